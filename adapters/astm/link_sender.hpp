// ASTM E1381 (LIS1-A) sender: sends one message over a link, as a pure state
// machine (for pftgw tools and tests). No I/O, no clock, no threads: the caller
// passes bytes from the line and the time, and sends the bytes it is given.
//
// Rules (interop-facts.md, "ASTM E1381 (LIS1-A) low level"):
// - ENQ, then wait for ACK; NAK on ENQ (receiver busy) -> wait 10 s, ENQ again;
// - frames one at a time; NAK -> the same frame again, same FN; after 6 failed
//   tries of one frame, EOT and failure (from memory, flag M);
// - 15 s for each reply, else EOT and failure;
// - contention (an ENQ arrives while we wait for the reply to our ENQ): the
//   instrument wins (from memory, flag M). As the computer we yield: stop, let
//   the caller's receiver take the other side's transfer, and ENQ again once its
//   EOT has passed (from memory). As the instrument we ignore the other ENQ,
//   wait 1 s and ENQ again (the 1 s is from memory).
// Choices of ours: any reply to a frame other than ACK counts as a failed try
// (the receiver interrupt, EOT in reply to a frame, is not supported); bytes
// other than ACK, NAK and ENQ while waiting for the reply to ENQ are ignored;
// establishment is tried at most max_enq_attempts times.
#pragma once

#include <cstddef>
#include <cstdint>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

namespace pftgw::astm {

// interop-facts.md: the receiver "replies within 15 s".
inline constexpr std::int64_t kSenderReplyTimeoutMs = 15'000;
// interop-facts.md: "after a NAK on ENQ the sender waits >= 10 s".
inline constexpr std::int64_t kEnqBusyRetryMs = 10'000;
// interop-facts.md (M): "after 6 failed tries of one frame the sender ends with EOT".
inline constexpr int kMaxFrameTries = 6;
// From memory: after contention the instrument waits at least 1 s before ENQ again.
inline constexpr std::int64_t kInstrumentContentionRetryMs = 1'000;
// A computer that yielded waits for the other side's EOT; if none comes (the
// other ENQ was noise), it tries again after the receiver's frame timeout
// (interop-facts.md: 30 s), a choice of ours.
inline constexpr std::int64_t kComputerYieldTimeoutMs = 30'000;
// Project choice: establishment attempts (ENQ) before reporting not_established.
inline constexpr int kDefaultMaxEnqAttempts = 6;

enum class Role { instrument, computer };

struct SenderConfig {
    Role role = Role::computer;
    std::int64_t reply_timeout_ms = kSenderReplyTimeoutMs;
    std::int64_t enq_busy_retry_ms = kEnqBusyRetryMs;
    int max_frame_tries = kMaxFrameTries;
    std::int64_t instrument_contention_retry_ms = kInstrumentContentionRetryMs;
    std::int64_t computer_yield_timeout_ms = kComputerYieldTimeoutMs;
    int max_enq_attempts = kDefaultMaxEnqAttempts;
};

enum class SendOutcome {
    delivered,        // every frame ACKed, EOT sent
    gave_up,          // a frame failed max_frame_tries times; EOT sent
    no_reply,         // no reply within reply_timeout_ms; EOT sent
    not_established,  // max_enq_attempts ENQs without ACK
};

struct SenderActions {
    std::string to_send;                 // bytes for the line, in order
    std::optional<SendOutcome> outcome;  // set once, when the message is finished
    bool yielded = false;                // contention lost: route input to the receiver
};

struct SenderCounters {
    std::uint64_t enq_sent_total = 0;
    std::uint64_t frames_sent_total = 0;  // including resends
    std::uint64_t frames_resent_total = 0;
    std::uint64_t contentions_total = 0;
};

class LinkSender {
public:
    enum class State {
        idle,                // nothing to send
        awaiting_enq_reply,  // ENQ sent
        enq_wait,            // NAK on ENQ, or contention as instrument: ENQ at deadline
        yielded,             // contention as computer: ENQ after the other side's EOT
        awaiting_frame_reply,
    };

    explicit LinkSender(SenderConfig config = {});

    // Starts sending `text` (split into frames): returns the ENQ. Refused (no
    // bytes, returns false) while a message is under way.
    bool start(std::string_view text, std::int64_t now_ms, SenderActions& out);

    // Bytes from the line. While yielded, pass the line's bytes here too (after
    // the receiver): the sender watches for the EOT that frees the line.
    SenderActions feed(std::string_view bytes, std::int64_t now_ms);
    SenderActions tick(std::int64_t now_ms);
    // The connection broke: forget the message, back to idle (no outcome).
    void reset();

    State state() const { return state_; }
    Role role() const { return config_.role; }
    // True while the line's bytes are replies for the sender (not the receiver's).
    bool awaiting_reply() const {
        return state_ == State::awaiting_enq_reply || state_ == State::awaiting_frame_reply;
    }
    std::optional<std::int64_t> next_deadline_ms() const;
    const SenderCounters& counters() const { return counters_; }
    // Which frame (0-based) is in flight, and how many times it has been sent.
    std::size_t frame_index() const { return frame_index_; }
    int tries() const { return tries_; }

private:
    void on_byte(char byte, std::int64_t now_ms, SenderActions& out);
    void send_enq(std::int64_t now_ms, SenderActions& out);
    void send_frame(std::int64_t now_ms, SenderActions& out);
    void finish(SendOutcome outcome, bool send_eot, SenderActions& out);

    SenderConfig config_;
    State state_ = State::idle;
    std::vector<std::string> frames_;
    std::size_t frame_index_ = 0;
    int tries_ = 0;
    int enq_attempts_ = 0;
    std::int64_t deadline_ms_ = 0;
    SenderCounters counters_;
};

}  // namespace pftgw::astm
