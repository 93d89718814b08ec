// ASTM E1381 receiver state machine (see link_receiver.hpp).
#include "adapters/astm/link_receiver.hpp"

#include <utility>

#include "adapters/astm/frame.hpp"

namespace pftgw::astm {

std::string_view to_string(DiscardReason reason) {
    switch (reason) {
        case DiscardReason::timeout:
            return "timeout";
        case DiscardReason::reset:
            return "reset";
        case DiscardReason::eot_in_frame:
            return "eot-in-frame";
        case DiscardReason::eot_after_nak:
            return "eot-after-nak";
        case DiscardReason::eot_in_continuation:
            return "eot-in-continuation";
        case DiscardReason::too_large:
            return "too-large";
    }
    return "unknown";
}

LinkReceiver::LinkReceiver(ReceiverConfig config) : config_(config) {}

ReceiverActions LinkReceiver::feed(std::string_view bytes, std::int64_t now_ms) {
    ReceiverActions out;
    // A late caller may feed before ticking: expire first, so bytes after the
    // deadline never continue a transfer the sender has given up on.
    if (state_ != State::idle && now_ms >= deadline_ms_) discard(DiscardReason::timeout, out);
    for (char byte : bytes) on_byte(byte, now_ms, out);
    return out;
}

ReceiverActions LinkReceiver::tick(std::int64_t now_ms) {
    ReceiverActions out;
    if (state_ != State::idle && now_ms >= deadline_ms_) discard(DiscardReason::timeout, out);
    return out;
}

ReceiverActions LinkReceiver::reset() {
    ReceiverActions out;
    if (state_ != State::idle) discard(DiscardReason::reset, out);
    return out;
}

std::optional<std::int64_t> LinkReceiver::next_deadline_ms() const {
    if (state_ == State::idle) return std::nullopt;
    return deadline_ms_;
}

void LinkReceiver::start_transfer() {
    state_ = State::awaiting_frame;
    frame_.clear();
    frame_overlong_ = false;
    message_.clear();
    frames_in_message_ = 0;
    next_fn_ = kFirstFrameNumber;
    has_last_ = false;
    last_text_.clear();
    last_was_etb_ = false;
    last_reply_nak_ = false;
    too_large_ = false;
}

void LinkReceiver::reply(char byte, std::int64_t now_ms, ReceiverActions& out) {
    out.to_send += byte;
    // The sender has the next move; the frame timer runs from our reply.
    deadline_ms_ = now_ms + config_.frame_timeout_ms;
}

void LinkReceiver::discard(DiscardReason reason, ReceiverActions& out) {
    out.discards.push_back(Discard{reason, frames_in_message_, message_.size()});
    ++counters_.discards_total;
    start_transfer();  // clears the partial message
    state_ = State::idle;
}

void LinkReceiver::on_byte(char byte, std::int64_t now_ms, ReceiverActions& out) {
    switch (state_) {
        case State::idle:
            if (byte == kEnq) {
                if (busy_) {
                    ++counters_.enq_refused_total;
                    out.to_send += kNak;
                    return;
                }
                start_transfer();
                reply(kAck, now_ms, out);
            } else {
                ++counters_.noise_bytes_total;
            }
            return;
        case State::awaiting_frame:
            if (byte == kStx) {
                state_ = State::in_frame;
                frame_.assign(1, kStx);
                frame_overlong_ = false;
            } else if (byte == kEot) {
                on_eot(out);
            } else if (byte == kEnq && frames_in_message_ == 0 && !has_last_) {
                // The sender missed our ACK of its ENQ; nothing accepted yet, so
                // answering again cannot be taken for the ACK of a frame.
                reply(kAck, now_ms, out);
            } else {
                ++counters_.noise_bytes_total;
            }
            return;
        case State::in_frame:
            if (byte == kEot) {
                discard(DiscardReason::eot_in_frame, out);
                return;
            }
            if (frame_.size() < kMaxFrameBytes) {
                frame_ += byte;
            } else {
                frame_overlong_ = true;  // keep reading to the LF, then NAK
            }
            if (byte == kLf) on_frame(now_ms, out);
            return;
    }
}

void LinkReceiver::on_frame(std::int64_t now_ms, ReceiverActions& out) {
    state_ = State::awaiting_frame;
    auto refuse = [&](Error error) {
        ++counters_.frames_rejected_total;
        out.frame_errors.push_back(std::move(error));
        last_reply_nak_ = true;
        reply(kNak, now_ms, out);
    };
    if (frame_overlong_) {
        refuse(make_error("astm.frame.length",
                          "a frame is at most " + std::to_string(kMaxFrameBytes) + " bytes"));
        return;
    }
    auto parsed = parse_frame(frame_);
    if (!parsed) {
        refuse(parsed.error());
        return;
    }
    const ParsedFrame& frame = parsed.value();
    if (frame.frame_number == next_fn_) {
        if (message_.size() + frame.text.size() > config_.max_message_bytes) {
            too_large_ = true;
            refuse(make_error(
                "astm.message.too-large",
                "the message exceeds " + std::to_string(config_.max_message_bytes) + " bytes"));
            return;
        }
        message_ += frame.text;
        ++frames_in_message_;
        ++counters_.frames_accepted_total;
        has_last_ = true;
        last_text_ = frame.text;
        last_was_etb_ = !frame.last;
        next_fn_ = next_frame_number(frame.frame_number);
        last_reply_nak_ = false;
        reply(kAck, now_ms, out);
        return;
    }
    if (has_last_ &&
        frame.frame_number == (next_fn_ + kFrameNumberModulus - 1) % kFrameNumberModulus) {
        if (frame.text == last_text_) {
            // The sender did not see our ACK and sent the frame again.
            ++counters_.frames_duplicate_total;
            last_reply_nak_ = false;
            reply(kAck, now_ms, out);
        } else {
            refuse(make_error("astm.frame.number",
                              "frame number " + std::to_string(frame.frame_number) +
                                  " repeats the last one with a different text"));
        }
        return;
    }
    refuse(make_error("astm.frame.number", "frame number " + std::to_string(frame.frame_number) +
                                               " is neither the last nor the next (" +
                                               std::to_string(next_fn_) + ")"));
}

void LinkReceiver::on_eot(ReceiverActions& out) {
    if (too_large_) {
        discard(DiscardReason::too_large, out);
    } else if (last_reply_nak_) {
        discard(DiscardReason::eot_after_nak, out);
    } else if (last_was_etb_) {
        discard(DiscardReason::eot_in_continuation, out);
    } else if (frames_in_message_ == 0) {
        // An empty transfer (ENQ, EOT): nothing to hand out, nothing lost.
        start_transfer();
        state_ = State::idle;
    } else {
        out.messages.push_back(std::move(message_));
        ++counters_.messages_total;
        start_transfer();
        state_ = State::idle;
    }
}

}  // namespace pftgw::astm
