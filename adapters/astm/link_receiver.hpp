// ASTM E1381 (LIS1-A) receiver: the gateway's side of a link to an instrument,
// as a pure state machine. No I/O, no clock, no threads: the caller feeds the
// bytes as they arrive (any split), calls tick() with the time, and sends the
// bytes and stores the messages the returned actions carry.
//
// Rules (interop-facts.md, "ASTM E1381 (LIS1-A) low level"):
// - idle: ENQ -> ACK, or NAK when busy (set_busy: backpressure from the store);
// - transfer: each frame STX..LF is ACKed, or NAKed for a character error (too
//   long, a byte outside the text set, a broken layout), a bad checksum, or an
//   FN that is neither the last nor the next; the resend is accepted; a repeat of
//   the last FN (the sender missed our ACK) is ACKed again and not appended;
// - EOT ends the transfer; the receiver waits 30 s for a frame, then gives up.
// A message (the texts of all frames from ENQ to EOT, joined) is handed out only
// when EOT closes a transfer whose every frame was accepted and whose last frame
// was an ETX frame. Anything else (timeout, reset, EOT inside a frame or after a
// NAK or after an ETB frame) discards the partial message and says why.
// Choices of ours (not from the standard), each safe against one corrupted byte:
// - ENQ during the transfer is ignored once a frame was accepted (answering it
//   could be read by the sender as the ACK of a frame); before that, it is ACKed
//   again;
// - a repeat of the last FN whose text differs from the accepted one is NAKed;
// - EOT inside a frame aborts the transfer; STX or ENQ inside a frame is a
//   character error (no resynchronisation on STX, which could splice a frame).
// A transfer with several ETX frames can still be cut short by a lost STX that
// arrives as EOT; the record layer checks for the terminator record.
#pragma once

#include <cstddef>
#include <cstdint>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "gateway/core/result.hpp"

namespace pftgw::astm {

// interop-facts.md: "Receiver waits 30 s for a frame".
inline constexpr std::int64_t kReceiverFrameTimeoutMs = 30'000;
// Bound on one message's text so hostile input cannot grow memory without end;
// a project choice, far above any lung-function session.
inline constexpr std::size_t kDefaultMaxMessageBytes = 4 * 1024 * 1024;

struct ReceiverConfig {
    std::int64_t frame_timeout_ms = kReceiverFrameTimeoutMs;
    std::size_t max_message_bytes = kDefaultMaxMessageBytes;
};

enum class DiscardReason {
    timeout,              // no frame or EOT within the frame timeout
    reset,                // the caller reported a broken connection
    eot_in_frame,         // EOT arrived before a frame's LF
    eot_after_nak,        // the sender gave up on a frame we NAKed
    eot_in_continuation,  // EOT after an ETB frame: the message is incomplete
    too_large,            // the message exceeded max_message_bytes
};

std::string_view to_string(DiscardReason reason);

struct Discard {
    DiscardReason reason;
    std::size_t frames_accepted = 0;  // frames of the dropped message
    std::size_t text_bytes = 0;       // text bytes dropped
};

struct ReceiverActions {
    std::string to_send;                // ACK / NAK bytes, in order
    std::vector<std::string> messages;  // completed messages, in order
    std::vector<Discard> discards;      // partial messages dropped, and why
    std::vector<Error> frame_errors;    // why each NAKed frame was refused
};

struct ReceiverCounters {
    std::uint64_t frames_accepted_total = 0;
    std::uint64_t frames_rejected_total = 0;  // NAKed
    std::uint64_t frames_duplicate_total = 0;
    std::uint64_t messages_total = 0;
    std::uint64_t discards_total = 0;
    std::uint64_t enq_refused_total = 0;  // NAK on ENQ while busy
    std::uint64_t noise_bytes_total = 0;  // ignored outside a frame
};

class LinkReceiver {
public:
    enum class State { idle, awaiting_frame, in_frame };

    explicit LinkReceiver(ReceiverConfig config = {});

    // Bytes from the line at time now_ms (monotonic milliseconds, caller's clock).
    ReceiverActions feed(std::string_view bytes, std::int64_t now_ms);
    // Lets timeouts happen; call at next_deadline_ms() or whenever convenient.
    ReceiverActions tick(std::int64_t now_ms);
    // The connection broke: drop any partial message, back to idle.
    ReceiverActions reset();

    // Busy: refuse new transfers (NAK on ENQ). A transfer under way goes on.
    void set_busy(bool busy) { busy_ = busy; }
    bool busy() const { return busy_; }

    State state() const { return state_; }
    // When tick() must be called next; empty when idle.
    std::optional<std::int64_t> next_deadline_ms() const;
    const ReceiverCounters& counters() const { return counters_; }

private:
    void on_byte(char byte, std::int64_t now_ms, ReceiverActions& out);
    void on_frame(std::int64_t now_ms, ReceiverActions& out);
    void on_eot(ReceiverActions& out);
    void reply(char byte, std::int64_t now_ms, ReceiverActions& out);
    void discard(DiscardReason reason, ReceiverActions& out);
    void start_transfer();

    ReceiverConfig config_;
    State state_ = State::idle;
    bool busy_ = false;
    std::int64_t deadline_ms_ = 0;

    std::string frame_;            // the frame being collected, STX..LF, bounded
    bool frame_overlong_ = false;  // more than kMaxFrameBytes before LF

    std::string message_;  // accepted texts, joined
    std::size_t frames_in_message_ = 0;
    int next_fn_ = 1;
    bool has_last_ = false;
    std::string last_text_;      // text of the last accepted frame
    bool last_was_etb_ = false;  // the last accepted frame was intermediate
    bool last_reply_nak_ = false;
    bool too_large_ = false;

    ReceiverCounters counters_;
};

}  // namespace pftgw::astm
