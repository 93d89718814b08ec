// ASTM E1381 receiver: the link rules of interop-facts.md ("ASTM E1381 (LIS1-A)
// low level") checked on byte streams built from the standard's frame layout.
#include "adapters/astm/link_receiver.hpp"

#include <gtest/gtest.h>

#include <string>
#include <vector>

#include "adapters/astm/frame.hpp"

namespace pftgw::astm {
namespace {

const std::string kEnqS(1, kEnq);
const std::string kAckS(1, kAck);
const std::string kNakS(1, kNak);
const std::string kEotS(1, kEot);

// Everything the receiver did over a whole run, merged.
struct Log {
    std::string sent;
    std::vector<std::string> messages;
    std::vector<Discard> discards;
    std::vector<Error> errors;
    void add(const ReceiverActions& a) {
        sent += a.to_send;
        messages.insert(messages.end(), a.messages.begin(), a.messages.end());
        discards.insert(discards.end(), a.discards.begin(), a.discards.end());
        errors.insert(errors.end(), a.frame_errors.begin(), a.frame_errors.end());
    }
};

Log feed_whole(LinkReceiver& r, const std::string& bytes, std::int64_t now_ms = 0) {
    Log log;
    log.add(r.feed(bytes, now_ms));
    return log;
}

Log feed_bytewise(LinkReceiver& r, const std::string& bytes, std::int64_t now_ms = 0) {
    Log log;
    for (char c : bytes) log.add(r.feed(std::string(1, c), now_ms));
    return log;
}

std::string joined(const std::vector<std::string>& frames) {
    std::string s;
    for (const auto& f : frames) s += f;
    return s;
}

TEST(AstmReceiver, EnqAckedAndMessageHandedOutOnlyAtEot) {
    // interop-facts.md "Phases": establishment ENQ -> ACK, transfer frame -> ACK,
    // termination EOT.
    LinkReceiver r;
    const std::string text = "H|\\^&\rL|1|N\r";
    Log a = feed_whole(r, kEnqS + build_frame(1, text, true));
    EXPECT_EQ(a.sent, kAckS + kAckS);
    EXPECT_TRUE(a.messages.empty());  // not before EOT
    Log b = feed_whole(r, kEotS);
    ASSERT_EQ(b.messages.size(), 1u);
    EXPECT_EQ(b.messages[0], text);
    EXPECT_EQ(r.state(), LinkReceiver::State::idle);
    EXPECT_FALSE(r.next_deadline_ms().has_value());
}

TEST(AstmReceiver, BusyRefusesEnqWithNak) {
    // interop-facts.md "Phases": "NAK = busy".
    LinkReceiver r;
    r.set_busy(true);
    Log a = feed_whole(r, kEnqS);
    EXPECT_EQ(a.sent, kNakS);
    EXPECT_EQ(r.state(), LinkReceiver::State::idle);
    EXPECT_EQ(r.counters().enq_refused_total, 1u);
    r.set_busy(false);
    EXPECT_EQ(feed_whole(r, kEnqS).sent, kAckS);
}

TEST(AstmReceiver, EtbContinuationReassemblesExactly) {
    // interop-facts.md: more than 240 text characters go into ETB frames then an ETX frame.
    std::string text;
    for (int i = 0; i < 241; ++i) text += static_cast<char>('!' + i % 90);
    const auto frames = split_into_frames(text);
    ASSERT_EQ(frames.size(), 2u);
    LinkReceiver r;
    Log a = feed_whole(r, kEnqS + joined(frames) + kEotS);
    EXPECT_EQ(a.sent, kAckS + kAckS + kAckS);
    ASSERT_EQ(a.messages.size(), 1u);
    EXPECT_EQ(a.messages[0], text);
}

TEST(AstmReceiver, FrameNumberWrapAcceptedThroughZero) {
    // interop-facts.md: FN rolls 7 -> 0 (here 1..7, 0, 1, 2: ten frames).
    const std::string text(10 * kMaxFrameTextBytes - 7, 'q');
    const auto frames = split_into_frames(text);
    ASSERT_EQ(frames.size(), 10u);
    ASSERT_EQ(frames[7][1], '0');
    LinkReceiver r;
    Log a = feed_whole(r, kEnqS + joined(frames) + kEotS);
    EXPECT_EQ(a.sent, std::string(11, kAck));
    ASSERT_EQ(a.messages.size(), 1u);
    EXPECT_EQ(a.messages[0], text);
}

TEST(AstmReceiver, BadChecksumNakedThenResendAccepted) {
    // interop-facts.md: a bad checksum is NAKed and resent with the same FN.
    LinkReceiver r;
    const std::string good = build_frame(1, "R|1|^^^FVC|3.10|L\r", true);
    std::string bad = good;
    bad[5] = 'X';  // text changed, checksum kept
    Log a = feed_whole(r, kEnqS + bad);
    EXPECT_EQ(a.sent, kAckS + kNakS);
    ASSERT_EQ(a.errors.size(), 1u);
    EXPECT_EQ(a.errors[0].code, "astm.frame.checksum");
    Log b = feed_whole(r, good + kEotS);
    EXPECT_EQ(b.sent, kAckS);
    ASSERT_EQ(b.messages.size(), 1u);
    EXPECT_EQ(b.messages[0], "R|1|^^^FVC|3.10|L\r");
}

TEST(AstmReceiver, DuplicateLastFrameAckedNotAppendedTwice) {
    // interop-facts.md: the sender resends with the same FN when it saw no ACK; an FN
    // equal to the last one is not an error, and its text is already ours.
    LinkReceiver r;
    const auto frames = split_into_frames(std::string(300, 'd'));
    Log a = feed_whole(r, kEnqS + frames[0] + frames[0] + frames[1] + kEotS);
    EXPECT_EQ(a.sent, std::string(4, kAck));
    ASSERT_EQ(a.messages.size(), 1u);
    EXPECT_EQ(a.messages[0], std::string(300, 'd'));
    EXPECT_EQ(r.counters().frames_duplicate_total, 1u);
}

TEST(AstmReceiver, RepeatedFrameNumberWithOtherTextNaked) {
    // Our rule (link_receiver.hpp): a repeat of the last FN must carry the same text.
    LinkReceiver r;
    Log a = feed_whole(r, kEnqS + build_frame(1, "A", false) + build_frame(1, "B", false));
    EXPECT_EQ(a.sent, kAckS + kAckS + kNakS);
}

TEST(AstmReceiver, FrameNumberNeitherLastNorNextNaked) {
    // interop-facts.md: "an FN that is neither the last nor the next is NAKed".
    LinkReceiver r;
    Log a = feed_whole(r, kEnqS + build_frame(1, "A", false) + build_frame(3, "C", true));
    EXPECT_EQ(a.sent, kAckS + kAckS + kNakS);
    ASSERT_EQ(a.errors.size(), 1u);
    EXPECT_EQ(a.errors[0].code, "astm.frame.number");
    // The right frame then goes through.
    Log b = feed_whole(r, build_frame(2, "B", true) + kEotS);
    EXPECT_EQ(b.sent, kAckS);
    ASSERT_EQ(b.messages.size(), 1u);
    EXPECT_EQ(b.messages[0], "AB");
    // A first frame numbered 0 is not "the last" one: NAKed.
    LinkReceiver r2;
    EXPECT_EQ(feed_whole(r2, kEnqS + build_frame(0, "Z", true)).sent, kAckS + kNakS);
}

TEST(AstmReceiver, CharacterErrorsNaked) {
    // interop-facts.md: "a frame with a character error ... is NAKed".
    LinkReceiver r;
    // Too long: 241 text bytes make a 248-byte frame.
    Log a = feed_whole(r, kEnqS + build_frame(1, std::string(241, 'a'), true));
    EXPECT_EQ(a.sent, kAckS + kNakS);
    ASSERT_EQ(a.errors.size(), 1u);
    EXPECT_EQ(a.errors[0].code, "astm.frame.length");
    // A far longer run without LF stays bounded and is NAKed at its LF.
    Log b = feed_whole(r, std::string(1, kStx) + std::string(100000, 'b') + "\r\n");
    EXPECT_EQ(b.sent, kNakS);
    // A control byte (STX) inside the text.
    std::string f = build_frame(1, "abc", true);
    f[3] = kStx;
    Log c = feed_whole(r, f);
    EXPECT_EQ(c.sent, kNakS);
    // Nothing was accepted: EOT gives no message.
    Log d = feed_whole(r, kEotS);
    EXPECT_TRUE(d.messages.empty());
    ASSERT_EQ(d.discards.size(), 1u);
    EXPECT_EQ(d.discards[0].reason, DiscardReason::eot_after_nak);
}

TEST(AstmReceiver, EotAfterNakedFrameDiscards) {
    // The sender gave up (interop-facts.md: after failed tries, EOT): nothing half-read
    // becomes a result.
    LinkReceiver r;
    std::string bad = build_frame(2, "second", true);
    bad[3] = '#';
    Log a = feed_whole(r, kEnqS + build_frame(1, "first", false) + bad + kEotS);
    EXPECT_EQ(a.sent, kAckS + kAckS + kNakS);
    EXPECT_TRUE(a.messages.empty());
    ASSERT_EQ(a.discards.size(), 1u);
    EXPECT_EQ(a.discards[0].reason, DiscardReason::eot_after_nak);
    EXPECT_EQ(a.discards[0].frames_accepted, 1u);
}

TEST(AstmReceiver, EotAfterEtbFrameDiscards) {
    LinkReceiver r;
    Log a = feed_whole(r, kEnqS + build_frame(1, "part", false) + kEotS);
    EXPECT_TRUE(a.messages.empty());
    ASSERT_EQ(a.discards.size(), 1u);
    EXPECT_EQ(a.discards[0].reason, DiscardReason::eot_in_continuation);
}

TEST(AstmReceiver, TimeoutMidMessageDiscards) {
    // interop-facts.md: "Receiver waits 30 s for a frame".
    LinkReceiver r;
    Log a = feed_whole(r, kEnqS + build_frame(1, "P|1\r", false), 1000);
    EXPECT_EQ(a.sent, kAckS + kAckS);
    EXPECT_EQ(r.next_deadline_ms(), 1000 + 30000);
    EXPECT_TRUE(r.tick(1000 + 29999).discards.empty());
    auto t = r.tick(1000 + 30000);
    ASSERT_EQ(t.discards.size(), 1u);
    EXPECT_EQ(t.discards[0].reason, DiscardReason::timeout);
    EXPECT_EQ(t.discards[0].text_bytes, 4u);
    EXPECT_EQ(r.state(), LinkReceiver::State::idle);
    // The rest arriving late is noise; no message, ever.
    Log b = feed_whole(r, build_frame(2, "L|1\r", true) + kEotS, 40000);
    EXPECT_TRUE(b.messages.empty());
    EXPECT_TRUE(b.sent.empty());
}

TEST(AstmReceiver, LateBytesAfterDeadlineDoNotContinueTheTransfer) {
    // A caller that feeds before it ticks still sees the timeout first.
    LinkReceiver r;
    feed_whole(r, kEnqS + build_frame(1, "P|1\r", false), 0);
    Log a = feed_whole(r, build_frame(2, "L|1\r", true) + kEotS, 30000);
    EXPECT_TRUE(a.messages.empty());
    ASSERT_EQ(a.discards.size(), 1u);
    EXPECT_EQ(a.discards[0].reason, DiscardReason::timeout);
}

TEST(AstmReceiver, BrokenConnectionMidMessageGivesNoMessage) {
    LinkReceiver r;
    const auto frames = split_into_frames(std::string(500, 'm'));
    feed_whole(r, kEnqS + frames[0] + frames[1].substr(0, 50));
    auto reset = r.reset();
    ASSERT_EQ(reset.discards.size(), 1u);
    EXPECT_EQ(reset.discards[0].reason, DiscardReason::reset);
    EXPECT_EQ(reset.discards[0].frames_accepted, 1u);
    // The rest of the old transfer after a reconnect is noise: no message.
    Log a = feed_whole(r, frames[1].substr(50) + frames[2] + kEotS);
    EXPECT_TRUE(a.messages.empty());
    EXPECT_TRUE(a.sent.empty());
    // A new transfer works.
    Log b = feed_whole(r, kEnqS + build_frame(1, "ok", true) + kEotS);
    ASSERT_EQ(b.messages.size(), 1u);
    EXPECT_EQ(b.messages[0], "ok");
    // reset() while idle reports nothing.
    EXPECT_TRUE(r.reset().discards.empty());
}

TEST(AstmReceiver, EotInsideFrameDiscards) {
    LinkReceiver r;
    const std::string f = build_frame(2, "tail", true);
    Log a =
        feed_whole(r, kEnqS + build_frame(1, "head", false) + f.substr(0, 4) + kEotS + f.substr(4));
    EXPECT_TRUE(a.messages.empty());
    ASSERT_EQ(a.discards.size(), 1u);
    EXPECT_EQ(a.discards[0].reason, DiscardReason::eot_in_frame);
}

TEST(AstmReceiver, EnqDuringTransferIgnoredOnceAFrameIsAccepted) {
    // Our rule (link_receiver.hpp): an ACK to it could pass for a frame's ACK.
    LinkReceiver r;
    Log a = feed_whole(r, kEnqS + kEnqS);  // before any frame: ACKed again
    EXPECT_EQ(a.sent, kAckS + kAckS);
    Log b = feed_whole(r, build_frame(1, "x", false) + kEnqS);
    EXPECT_EQ(b.sent, kAckS);
}

TEST(AstmReceiver, NoiseBetweenFramesAndSeveralTransfersInOneChunk) {
    LinkReceiver r;
    const std::string noise = "zz\r\n\xff";
    const std::string stream = noise + kEnqS + noise + build_frame(1, "one", true) + noise + kEotS +
                               noise + kEnqS + build_frame(1, "two", false) +
                               build_frame(2, "three", true) + kEotS;
    Log a = feed_whole(r, stream);
    ASSERT_EQ(a.messages.size(), 2u);
    EXPECT_EQ(a.messages[0], "one");
    EXPECT_EQ(a.messages[1], "twothree");
    EXPECT_TRUE(a.discards.empty());
    EXPECT_GT(r.counters().noise_bytes_total, 0u);
}

TEST(AstmReceiver, ByteAtATimeSameAsWhole) {
    // Any split of the stream gives the same replies, messages and discards.
    std::string text;
    for (int i = 0; i < 700; ++i) text += static_cast<char>(i % 13 == 0 ? '\r' : 'a' + i % 26);
    const auto frames = split_into_frames(text);
    std::string bad = frames[1];
    bad[10] ^= 0x01;
    const std::string stream = "#" + kEnqS + frames[0] + bad + frames[1] + frames[1] + frames[2] +
                               kEotS + kEnqS + build_frame(1, "x", false) + kEotS;
    LinkReceiver whole_r, byte_r;
    Log whole = feed_whole(whole_r, stream);
    Log bytes = feed_bytewise(byte_r, stream);
    EXPECT_EQ(whole.sent, bytes.sent);
    EXPECT_EQ(whole.messages, bytes.messages);
    ASSERT_EQ(whole.messages.size(), 1u);
    EXPECT_EQ(whole.messages[0], text);
    ASSERT_EQ(whole.discards.size(), 1u);
    ASSERT_EQ(bytes.discards.size(), 1u);
    EXPECT_EQ(whole.discards[0].reason, bytes.discards[0].reason);
    EXPECT_EQ(whole.sent, kAckS + kAckS + kNakS + kAckS + kAckS + kAckS + kAckS + kAckS);
}

TEST(AstmReceiver, MessageSizeBound) {
    LinkReceiver r(ReceiverConfig{.max_message_bytes = 300});
    const auto frames = split_into_frames(std::string(400, 'b'));
    Log a = feed_whole(r, kEnqS + frames[0] + frames[1] + kEotS);
    EXPECT_EQ(a.sent, kAckS + kAckS + kNakS);
    EXPECT_TRUE(a.messages.empty());
    ASSERT_EQ(a.discards.size(), 1u);
    EXPECT_EQ(a.discards[0].reason, DiscardReason::too_large);
}

}  // namespace
}  // namespace pftgw::astm
