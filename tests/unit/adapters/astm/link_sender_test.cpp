// ASTM E1381 sender: establishment, frames, resends, give-up, timers and contention
// as interop-facts.md ("ASTM E1381 (LIS1-A) low level") states them.
#include "adapters/astm/link_sender.hpp"

#include <gtest/gtest.h>

#include <string>

#include "adapters/astm/frame.hpp"

namespace pftgw::astm {
namespace {

const std::string kEnqS(1, kEnq);
const std::string kAckS(1, kAck);
const std::string kNakS(1, kNak);
const std::string kEotS(1, kEot);

SenderActions start(LinkSender& s, std::string_view text, std::int64_t now_ms = 0) {
    SenderActions a;
    EXPECT_TRUE(s.start(text, now_ms, a));
    return a;
}

TEST(AstmSender, SendsEnqFramesThenEot) {
    // interop-facts.md "Phases": ENQ -> ACK, frame -> ACK, EOT.
    LinkSender s;
    const std::string text(300, 'r');
    const auto frames = split_into_frames(text);
    EXPECT_EQ(start(s, text).to_send, kEnqS);
    SenderActions a;
    EXPECT_FALSE(s.start("other", 0, a));  // one message at a time
    EXPECT_EQ(s.feed(kAckS, 1).to_send, frames[0]);
    EXPECT_EQ(s.feed(kAckS, 2).to_send, frames[1]);
    auto last = s.feed(kAckS, 3);
    EXPECT_EQ(last.to_send, kEotS);
    ASSERT_TRUE(last.outcome.has_value());
    EXPECT_EQ(*last.outcome, SendOutcome::delivered);
    EXPECT_EQ(s.state(), LinkSender::State::idle);
}

TEST(AstmSender, NakedFrameResentWithSameFrameNumber) {
    // interop-facts.md: a NAKed frame is "resent with the same FN".
    LinkSender s;
    const auto frames = split_into_frames(std::string(250, 'n'));
    start(s, std::string(250, 'n'));
    s.feed(kAckS, 0);
    s.feed(kAckS, 0);  // frame 1 accepted, frame 2 sent
    auto again = s.feed(kNakS, 0);
    EXPECT_EQ(again.to_send, frames[1]);
    EXPECT_EQ(again.to_send[1], '2');
    EXPECT_EQ(s.tries(), 2);
    EXPECT_EQ(s.counters().frames_resent_total, 1u);
    EXPECT_EQ(*s.feed(kAckS, 0).outcome, SendOutcome::delivered);
}

TEST(AstmSender, GivesUpAfterSixNaks) {
    // interop-facts.md (M, from memory): "after 6 failed tries of one frame the
    // sender ends with EOT".
    LinkSender s;
    const std::string frame = split_into_frames("O|1\r")[0];
    start(s, "O|1\r");
    std::string sent = s.feed(kAckS, 0).to_send;  // try 1
    for (int nak = 1; nak <= 5; ++nak) {
        auto a = s.feed(kNakS, nak);
        EXPECT_EQ(a.to_send, frame) << "NAK " << nak;  // tries 2..6
        EXPECT_FALSE(a.outcome.has_value());
        sent += a.to_send;
    }
    EXPECT_EQ(sent, frame + frame + frame + frame + frame + frame);
    auto end = s.feed(kNakS, 6);  // the sixth NAK
    EXPECT_EQ(end.to_send, kEotS);
    ASSERT_TRUE(end.outcome.has_value());
    EXPECT_EQ(*end.outcome, SendOutcome::gave_up);
    EXPECT_EQ(s.counters().frames_sent_total, 6u);
}

TEST(AstmSender, NakOnEnqWaitsTenSeconds) {
    // interop-facts.md: "after a NAK on ENQ the sender waits >= 10 s".
    LinkSender s;
    start(s, "x", 0);
    EXPECT_TRUE(s.feed(kNakS, 500).to_send.empty());
    EXPECT_EQ(s.next_deadline_ms(), 500 + 10000);
    EXPECT_TRUE(s.tick(500 + 9999).to_send.empty());
    EXPECT_EQ(s.tick(500 + 10000).to_send, kEnqS);
    EXPECT_EQ(s.feed(kAckS, 11000).to_send, split_into_frames("x")[0]);
}

TEST(AstmSender, NoReplyWithinFifteenSecondsEndsWithEot) {
    // interop-facts.md: the receiver "replies within 15 s".
    LinkSender s;
    start(s, "x", 0);
    EXPECT_TRUE(s.tick(14999).to_send.empty());
    auto a = s.tick(15000);
    EXPECT_EQ(a.to_send, kEotS);
    EXPECT_EQ(*a.outcome, SendOutcome::no_reply);

    LinkSender t;
    start(t, "y", 0);
    t.feed(kAckS, 100);  // frame sent at 100
    EXPECT_TRUE(t.tick(15099).to_send.empty());
    EXPECT_EQ(*t.tick(15100).outcome, SendOutcome::no_reply);
}

TEST(AstmSender, NotEstablishedAfterMaxEnqAttempts) {
    // Project choice: a bounded number of ENQs (SenderConfig::max_enq_attempts).
    LinkSender s(SenderConfig{.max_enq_attempts = 2});
    start(s, "x", 0);
    s.feed(kNakS, 0);
    EXPECT_EQ(s.tick(10000).to_send, kEnqS);
    s.feed(kNakS, 10000);
    auto a = s.tick(20000);
    EXPECT_TRUE(a.to_send.empty());
    EXPECT_EQ(*a.outcome, SendOutcome::not_established);
}

TEST(AstmSender, ContentionComputerYields) {
    // interop-facts.md (M, from memory): when both send ENQ, the instrument wins.
    // From memory: the computer stops, receives, and tries again after the EOT.
    LinkSender s(SenderConfig{.role = Role::computer});
    start(s, "x", 0);
    auto a = s.feed(kEnqS, 10);
    EXPECT_TRUE(a.yielded);
    EXPECT_TRUE(a.to_send.empty());  // the computer's receiver answers, not the sender
    EXPECT_EQ(s.state(), LinkSender::State::yielded);
    EXPECT_FALSE(s.awaiting_reply());
    EXPECT_EQ(s.counters().contentions_total, 1u);
    // The instrument's transfer passes; its frames are not the sender's business.
    EXPECT_TRUE(s.feed(build_frame(1, "R|1\r", true), 20).to_send.empty());
    EXPECT_EQ(s.feed(kEotS, 30).to_send, kEnqS);  // line free: ENQ again
    EXPECT_TRUE(s.awaiting_reply());
}

TEST(AstmSender, ContentionInstrumentWins) {
    // interop-facts.md (M): the instrument wins; from memory it waits 1 s and ENQs again.
    LinkSender s(SenderConfig{.role = Role::instrument});
    start(s, "x", 0);
    auto a = s.feed(kEnqS, 10);
    EXPECT_FALSE(a.yielded);
    EXPECT_TRUE(a.to_send.empty());
    EXPECT_EQ(s.next_deadline_ms(), 10 + 1000);
    EXPECT_TRUE(s.tick(1009).to_send.empty());
    EXPECT_EQ(s.tick(1010).to_send, kEnqS);
    EXPECT_EQ(s.feed(kAckS, 1020).to_send, split_into_frames("x")[0]);
}

TEST(AstmSender, ComputerYieldTimesOutWithoutEot) {
    // Our fallback (link_sender.hpp): no EOT within 30 s -> ENQ again.
    LinkSender s(SenderConfig{.role = Role::computer});
    start(s, "x", 0);
    s.feed(kEnqS, 0);
    EXPECT_TRUE(s.tick(29999).to_send.empty());
    EXPECT_EQ(s.tick(30000).to_send, kEnqS);
}

TEST(AstmSender, NoiseWhileWaitingForEnqReplyIgnored) {
    LinkSender s;
    start(s, "x", 0);
    EXPECT_TRUE(s.feed("zz\r\n", 1).to_send.empty());
    EXPECT_EQ(s.state(), LinkSender::State::awaiting_enq_reply);
}

}  // namespace
}  // namespace pftgw::astm
