// ASTM E1381 sender state machine (see link_sender.hpp).
#include "adapters/astm/link_sender.hpp"

#include "adapters/astm/frame.hpp"

namespace pftgw::astm {

LinkSender::LinkSender(SenderConfig config) : config_(config) {}

bool LinkSender::start(std::string_view text, std::int64_t now_ms, SenderActions& out) {
    if (state_ != State::idle) return false;
    frames_ = split_into_frames(text);
    frame_index_ = 0;
    tries_ = 0;
    enq_attempts_ = 0;
    send_enq(now_ms, out);
    return true;
}

void LinkSender::reset() {
    state_ = State::idle;
    frames_.clear();
    frame_index_ = 0;
    tries_ = 0;
    enq_attempts_ = 0;
}

std::optional<std::int64_t> LinkSender::next_deadline_ms() const {
    if (state_ == State::idle) return std::nullopt;
    return deadline_ms_;
}

void LinkSender::send_enq(std::int64_t now_ms, SenderActions& out) {
    if (enq_attempts_ >= config_.max_enq_attempts) {
        finish(SendOutcome::not_established, false, out);
        return;
    }
    ++enq_attempts_;
    ++counters_.enq_sent_total;
    out.to_send += kEnq;
    state_ = State::awaiting_enq_reply;
    deadline_ms_ = now_ms + config_.reply_timeout_ms;
}

void LinkSender::send_frame(std::int64_t now_ms, SenderActions& out) {
    ++tries_;
    ++counters_.frames_sent_total;
    if (tries_ > 1) ++counters_.frames_resent_total;
    out.to_send += frames_[frame_index_];
    state_ = State::awaiting_frame_reply;
    deadline_ms_ = now_ms + config_.reply_timeout_ms;
}

void LinkSender::finish(SendOutcome outcome, bool send_eot, SenderActions& out) {
    if (send_eot) out.to_send += kEot;
    out.outcome = outcome;
    reset();
}

SenderActions LinkSender::feed(std::string_view bytes, std::int64_t now_ms) {
    SenderActions out;
    for (char byte : bytes) {
        if (state_ == State::idle) break;  // finished: later bytes are not ours
        on_byte(byte, now_ms, out);
    }
    return out;
}

void LinkSender::on_byte(char byte, std::int64_t now_ms, SenderActions& out) {
    switch (state_) {
        case State::idle:
        case State::enq_wait:
            return;  // not our turn: the bytes belong to the receiver
        case State::yielded:
            if (byte == kEot) send_enq(now_ms, out);  // the other side's transfer ended
            return;
        case State::awaiting_enq_reply:
            if (byte == kAck) {
                send_frame(now_ms, out);
            } else if (byte == kNak) {
                state_ = State::enq_wait;  // busy: wait, then ENQ again
                deadline_ms_ = now_ms + config_.enq_busy_retry_ms;
            } else if (byte == kEnq) {
                ++counters_.contentions_total;
                if (config_.role == Role::instrument) {
                    // The instrument wins: the computer yields; ask again shortly.
                    state_ = State::enq_wait;
                    deadline_ms_ = now_ms + config_.instrument_contention_retry_ms;
                } else {
                    state_ = State::yielded;
                    deadline_ms_ = now_ms + config_.computer_yield_timeout_ms;
                    out.yielded = true;
                }
            }
            return;  // other bytes: noise
        case State::awaiting_frame_reply:
            if (byte == kAck) {
                ++frame_index_;
                tries_ = 0;
                if (frame_index_ == frames_.size()) {
                    finish(SendOutcome::delivered, true, out);
                } else {
                    send_frame(now_ms, out);
                }
            } else if (tries_ >= config_.max_frame_tries) {
                finish(SendOutcome::gave_up, true, out);
            } else {
                send_frame(now_ms, out);  // same frame, same FN
            }
            return;
    }
}

SenderActions LinkSender::tick(std::int64_t now_ms) {
    SenderActions out;
    if (state_ == State::idle || now_ms < deadline_ms_) return out;
    switch (state_) {
        case State::idle:
            break;
        case State::enq_wait:
        case State::yielded:
            send_enq(now_ms, out);
            break;
        case State::awaiting_enq_reply:
        case State::awaiting_frame_reply:
            finish(SendOutcome::no_reply, true, out);
            break;
    }
    return out;
}

}  // namespace pftgw::astm
