// Test harness: two ASTM E1381 endpoints (a sender and a receiver each) joined by
// an in-memory line, with optional chunking and one corrupted byte. Time moves
// only when the line is quiet, to the earliest deadline; the loop is bounded.
#pragma once

#include <algorithm>
#include <cstddef>
#include <cstdint>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "adapters/astm/link_receiver.hpp"
#include "adapters/astm/link_sender.hpp"

namespace pftgw::astm::testing {

struct Endpoint {
    explicit Endpoint(Role role) : sender(SenderConfig{.role = role}) {}

    LinkSender sender;
    LinkReceiver receiver;
    std::string outbox;                 // bytes for the line
    std::vector<std::string> messages;  // what the receiver handed out
    std::vector<Discard> discards;      // what the receiver dropped
    std::vector<SendOutcome> outcomes;  // what the sender reported
    int yields = 0;

    void take(const SenderActions& a) {
        outbox += a.to_send;
        if (a.outcome) outcomes.push_back(*a.outcome);
        if (a.yielded) ++yields;
    }
    void take(const ReceiverActions& a) {
        outbox += a.to_send;
        messages.insert(messages.end(), a.messages.begin(), a.messages.end());
        discards.insert(discards.end(), a.discards.begin(), a.discards.end());
    }
    void start(std::string_view text, std::int64_t now_ms) {
        SenderActions a;
        sender.start(text, now_ms, a);
        take(a);
    }
    // Byte by byte, because which role a byte belongs to can change mid-chunk.
    void on_line(std::string_view bytes, std::int64_t now_ms) {
        for (char b : bytes) {
            const std::string_view one(&b, 1);
            if (sender.awaiting_reply()) {
                take(sender.feed(one, now_ms));
            } else {
                take(receiver.feed(one, now_ms));
                if (sender.state() == LinkSender::State::yielded) take(sender.feed(one, now_ms));
            }
        }
    }
    void tick(std::int64_t now_ms) {
        take(receiver.tick(now_ms));
        take(sender.tick(now_ms));
    }
    std::optional<std::int64_t> next_deadline_ms() const {
        auto a = sender.next_deadline_ms();
        auto b = receiver.next_deadline_ms();
        if (a && b) return std::min(*a, *b);
        return a ? a : b;
    }
};

// One corrupted byte: the `index`-th byte sent in direction `a_to_b` becomes `value`.
struct Corruption {
    bool a_to_b = true;
    std::size_t index = 0;
    char value = 0;
};

struct Line {
    std::vector<int> chunk_sizes;  // cycled; empty: everything at once
    std::optional<Corruption> corruption;
    bool corrupted = false;  // the corruption happened (and changed a byte)
    std::size_t sent_a_to_b = 0;
    std::size_t sent_b_to_a = 0;
    std::size_t chunk_cursor = 0;

    std::string take_chunk(std::string& outbox, bool a_to_b) {
        std::size_t n = outbox.size();
        if (!chunk_sizes.empty()) {
            n = std::min<std::size_t>(
                n, std::max(1, chunk_sizes[chunk_cursor++ % chunk_sizes.size()]));
        }
        std::string chunk = outbox.substr(0, n);
        outbox.erase(0, n);
        std::size_t& sent = a_to_b ? sent_a_to_b : sent_b_to_a;
        if (corruption && corruption->a_to_b == a_to_b && corruption->index >= sent &&
            corruption->index < sent + n) {
            char& c = chunk[corruption->index - sent];
            if (c != corruption->value) corrupted = true;
            c = corruption->value;
        }
        sent += n;
        return chunk;
    }
};

// Runs until both sides are quiet and have no timers, or `max_steps` steps.
// Returns the number of steps used (max_steps means it did not settle).
inline int run(Endpoint& a, Endpoint& b, Line& line, std::int64_t& now_ms, int max_steps) {
    for (int step = 0; step < max_steps; ++step) {
        bool moved = false;
        if (!a.outbox.empty()) {
            b.on_line(line.take_chunk(a.outbox, true), now_ms);
            moved = true;
        }
        if (!b.outbox.empty()) {
            a.on_line(line.take_chunk(b.outbox, false), now_ms);
            moved = true;
        }
        if (moved) continue;
        auto da = a.next_deadline_ms();
        auto db = b.next_deadline_ms();
        if (!da && !db) return step;
        now_ms = std::max(now_ms, da && db ? std::min(*da, *db) : (da ? *da : *db));
        a.tick(now_ms);
        b.tick(now_ms);
    }
    return max_steps;
}

}  // namespace pftgw::astm::testing
