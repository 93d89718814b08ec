// ASTM E1381 sender and receiver joined by an in-memory line (link_harness.hpp):
// whole transfers, contention between the two roles, and a property test that
// random splits and one random corrupted byte never deliver a wrong message.
#include <gtest/gtest.h>
#include <rapidcheck/gtest.h>

#include <string>
#include <vector>

#include "adapters/astm/frame.hpp"
#include "tests/unit/adapters/astm/link_harness.hpp"

namespace pftgw::astm {
namespace {

using testing::Corruption;
using testing::Endpoint;
using testing::Line;
using testing::run;

constexpr int kMaxSteps = 20000;

std::string sample_text(std::size_t n) {
    std::string s;
    for (std::size_t i = 0; i < n; ++i) s += i % 37 == 36 ? '\r' : static_cast<char>(' ' + i % 95);
    return s;
}

TEST(AstmWired, MultiFrameMessageDelivered) {
    Endpoint instrument(Role::instrument), gateway(Role::computer);
    const std::string text = sample_text(2000);  // 9 frames: FN 1..7, 0, 1
    ASSERT_EQ(split_into_frames(text).size(), 9u);
    std::int64_t now_ms = 0;
    Line line;
    instrument.start(text, now_ms);
    ASSERT_LT(run(instrument, gateway, line, now_ms, kMaxSteps), kMaxSteps);
    ASSERT_EQ(gateway.messages.size(), 1u);
    EXPECT_EQ(gateway.messages[0], text);
    ASSERT_EQ(instrument.outcomes.size(), 1u);
    EXPECT_EQ(instrument.outcomes[0], SendOutcome::delivered);
    EXPECT_EQ(now_ms, 0);  // no timer was needed
}

TEST(AstmWired, CorruptedFrameIsNakedResentAndAccepted) {
    // interop-facts.md: a bad checksum is NAKed and the frame resent with the same FN.
    Endpoint instrument(Role::instrument), gateway(Role::computer);
    const std::string text = sample_text(600);
    std::int64_t now_ms = 0;
    Line line;
    line.chunk_sizes = {3, 17, 1, 64};
    line.corruption = Corruption{true, 1 + 247 + 30, '#'};  // inside the second frame's text
    instrument.start(text, now_ms);
    ASSERT_LT(run(instrument, gateway, line, now_ms, kMaxSteps), kMaxSteps);
    EXPECT_TRUE(line.corrupted);
    ASSERT_EQ(gateway.messages.size(), 1u);
    EXPECT_EQ(gateway.messages[0], text);
    EXPECT_EQ(gateway.receiver.counters().frames_rejected_total, 1u);
    EXPECT_EQ(instrument.sender.counters().frames_resent_total, 1u);
}

TEST(AstmWired, LostAckGivesDuplicateNotAppendedTwice) {
    // The receiver's ACK of frame 1 arrives damaged: the sender resends frame 1 and
    // the receiver ACKs it again without appending it twice.
    Endpoint instrument(Role::instrument), gateway(Role::computer);
    const std::string text = sample_text(500);
    std::int64_t now_ms = 0;
    Line line;
    line.corruption = Corruption{false, 1, 'x'};  // gateway's 2nd byte: the ACK of frame 1
    instrument.start(text, now_ms);
    ASSERT_LT(run(instrument, gateway, line, now_ms, kMaxSteps), kMaxSteps);
    ASSERT_EQ(gateway.messages.size(), 1u);
    EXPECT_EQ(gateway.messages[0], text);
    EXPECT_EQ(gateway.receiver.counters().frames_duplicate_total, 1u);
}

TEST(AstmWired, ContentionBothWaysInstrumentFirstThenComputer) {
    // interop-facts.md (M, from memory): both send ENQ, the instrument wins; the
    // computer yields, receives, and sends its own message after the EOT.
    Endpoint instrument(Role::instrument), gateway(Role::computer);
    const std::string from_instrument = sample_text(400);
    const std::string from_gateway = "Q|1|^P-1\r";
    std::int64_t now_ms = 0;
    Line line;
    instrument.start(from_instrument, now_ms);
    gateway.start(from_gateway, now_ms);
    ASSERT_LT(run(instrument, gateway, line, now_ms, kMaxSteps), kMaxSteps);
    EXPECT_EQ(gateway.yields, 1);
    EXPECT_EQ(instrument.sender.counters().contentions_total, 1u);
    EXPECT_EQ(gateway.sender.counters().contentions_total, 1u);
    ASSERT_EQ(gateway.messages.size(), 1u);
    EXPECT_EQ(gateway.messages[0], from_instrument);
    ASSERT_EQ(instrument.messages.size(), 1u);
    EXPECT_EQ(instrument.messages[0], from_gateway);
    ASSERT_EQ(instrument.outcomes.size(), 1u);
    EXPECT_EQ(instrument.outcomes[0], SendOutcome::delivered);
    ASSERT_EQ(gateway.outcomes.size(), 1u);
    EXPECT_EQ(gateway.outcomes[0], SendOutcome::delivered);
    // The instrument's retry after contention waited its 1 s (from memory).
    EXPECT_GE(now_ms, kInstrumentContentionRetryMs);
}

TEST(AstmWired, BusyReceiverThenFree) {
    // interop-facts.md: NAK on ENQ = busy; the sender waits >= 10 s and tries again.
    Endpoint instrument(Role::instrument), gateway(Role::computer);
    gateway.receiver.set_busy(true);
    std::int64_t now_ms = 0;
    Line line;
    instrument.start("R|1|^^^FEV1|2.61\r", now_ms);
    run(instrument, gateway, line, now_ms, 4);  // ENQ, NAK
    EXPECT_TRUE(gateway.messages.empty());
    gateway.receiver.set_busy(false);
    ASSERT_LT(run(instrument, gateway, line, now_ms, kMaxSteps), kMaxSteps);
    ASSERT_EQ(gateway.messages.size(), 1u);
    EXPECT_GE(now_ms, kEnqBusyRetryMs);
}

TEST(AstmWired, SenderGivesUpAndReceiverKeepsNothing) {
    // Every frame 2 arrives damaged: 6 tries (M), EOT, and no message.
    Endpoint instrument(Role::instrument), gateway(Role::computer);
    std::int64_t now_ms = 0;
    Line line;
    instrument.start(sample_text(300), now_ms);
    // Drive by hand so each resend of frame 2 is damaged.
    for (int step = 0; step < 100 && instrument.outcomes.empty(); ++step) {
        if (!instrument.outbox.empty()) {
            std::string bytes = line.take_chunk(instrument.outbox, true);
            if (bytes.size() > 2 && bytes[0] == kStx && bytes[1] == '2') bytes[5] ^= 0x20;
            gateway.on_line(bytes, now_ms);
        }
        if (!gateway.outbox.empty())
            instrument.on_line(line.take_chunk(gateway.outbox, false), now_ms);
    }
    ASSERT_EQ(instrument.outcomes.size(), 1u);
    EXPECT_EQ(instrument.outcomes[0], SendOutcome::gave_up);
    gateway.on_line(instrument.outbox, now_ms);  // the EOT
    EXPECT_TRUE(gateway.messages.empty());
    ASSERT_EQ(gateway.discards.size(), 1u);
    EXPECT_EQ(gateway.discards[0].reason, DiscardReason::eot_after_nak);
    EXPECT_EQ(gateway.receiver.counters().frames_rejected_total, 6u);
}

// Property: any split of the line and at most one corrupted byte (either direction)
// give the receiver either exactly the message or nothing; without a corruption the
// message arrives and the sender says delivered. One message per transfer: the
// sender ends it with the only ETX frame (see link_receiver.hpp on several ETX frames).
RC_GTEST_PROP(AstmWiredProperty, SplitsAndOneCorruptionNeverGiveAWrongMessage, ()) {
    const auto text = *rc::gen::container<std::string>(
        rc::gen::oneOf(rc::gen::inRange<char>(0x20, 0x7F), rc::gen::just('\r')));
    const auto big = *rc::gen::inRange<std::size_t>(0, 3);  // sometimes several frames
    const std::string message = text + std::string(big * 200, 'v');
    Line line;
    line.chunk_sizes = *rc::gen::container<std::vector<int>>(rc::gen::inRange(1, 300));
    const bool corrupt = *rc::gen::arbitrary<bool>();
    if (corrupt) {
        // Aim inside what each direction carries: the frames one way, the replies
        // (one per frame plus the ENQ's) the other way.
        const std::size_t frames = split_into_frames(message).size();
        const bool a_to_b = *rc::gen::arbitrary<bool>();
        const std::size_t span = a_to_b ? message.size() + frames * kMinFrameBytes + 2 : frames + 1;
        line.corruption = Corruption{a_to_b, *rc::gen::inRange<std::size_t>(0, span),
                                     *rc::gen::arbitrary<char>()};
    }
    Endpoint instrument(Role::instrument), gateway(Role::computer);
    std::int64_t now_ms = 0;
    instrument.start(message, now_ms);
    RC_ASSERT(run(instrument, gateway, line, now_ms, kMaxSteps) < kMaxSteps);
    RC_ASSERT(gateway.messages.size() <= 1u);
    if (!gateway.messages.empty()) RC_ASSERT(gateway.messages[0] == message);
    if (!line.corrupted) {
        RC_ASSERT(gateway.messages.size() == 1u);
        RC_ASSERT(instrument.outcomes.size() == 1u);
        RC_ASSERT(instrument.outcomes[0] == SendOutcome::delivered);
    }
    RC_TAG(line.corrupted ? (gateway.messages.empty() ? "corrupted, none" : "corrupted, right")
                          : "clean");
}

}  // namespace
}  // namespace pftgw::astm
