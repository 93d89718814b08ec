// libFuzzer target for the ASTM E1381 receiver (RELIABILITY.md row 13: serial
// noise, split or merged frames, fuzzed input: no crash, no half result).
// The input is the byte stream from the line. Checks, aborting on failure:
// - the same stream fed whole and fed in pseudo-random chunks gives the same
//   replies, messages and discards (the split is derived from a hash of the input);
// - with time passing, ticks, resets and busy toggles mixed in, no crash;
// - every completed message is made of valid frames: it can be cut into texts of
//   frames (STX..LF) that occur in the input and pass parse_frame.
// Seed corpus: tests/fuzz/corpus/astm_frame/ (small valid and broken streams).
#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <string>
#include <string_view>
#include <unordered_set>
#include <vector>

#include "adapters/astm/frame.hpp"
#include "adapters/astm/link_receiver.hpp"

namespace {

using pftgw::astm::LinkReceiver;
using pftgw::astm::ReceiverActions;

void check(bool ok) {
    if (!ok) std::abort();
}

// A small deterministic generator (xorshift64), seeded from the input.
struct Rng {
    std::uint64_t state;
    std::uint64_t next() {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        return state;
    }
};

std::uint64_t fnv1a(std::string_view data) {
    std::uint64_t h = 1469598103934665603ULL;                     // FNV-1a 64-bit offset basis
    for (unsigned char c : data) h = (h ^ c) * 1099511628211ULL;  // FNV prime
    return h | 1;                                                 // xorshift needs a nonzero state
}

struct Log {
    std::string sent;
    std::vector<std::string> messages;
    std::vector<int> discard_reasons;
    void add(const ReceiverActions& a) {
        sent += a.to_send;
        messages.insert(messages.end(), a.messages.begin(), a.messages.end());
        for (const auto& d : a.discards) discard_reasons.push_back(static_cast<int>(d.reason));
    }
    bool operator==(const Log& o) const {
        return sent == o.sent && messages == o.messages && discard_reasons == o.discard_reasons;
    }
};

// Texts of every STX..first-LF span of the input that parses as a frame.
std::unordered_set<std::string> frame_texts(std::string_view data) {
    std::unordered_set<std::string> texts;
    for (std::size_t i = 0; i < data.size(); ++i) {
        if (data[i] != pftgw::astm::kStx) continue;
        const std::size_t lf = data.find(pftgw::astm::kLf, i);
        if (lf == std::string_view::npos) break;
        auto parsed = pftgw::astm::parse_frame(data.substr(i, lf - i + 1));
        if (parsed) texts.insert(parsed->text);
    }
    return texts;
}

// Whether `message` is a concatenation of texts from `texts` (dynamic programming).
bool made_of(const std::string& message, const std::unordered_set<std::string>& texts) {
    std::vector<char> reach(message.size() + 1, 0);
    reach[0] = 1;
    for (std::size_t i = 0; i < message.size(); ++i) {
        if (!reach[i]) continue;
        for (const auto& t : texts) {
            if (!t.empty() && message.compare(i, t.size(), t) == 0) reach[i + t.size()] = 1;
        }
    }
    return reach[message.size()] != 0;
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
    const std::string_view input(reinterpret_cast<const char*>(data), size);
    Rng rng{fnv1a(input)};

    // 1. Split invariance.
    LinkReceiver whole_rx;
    Log whole;
    whole.add(whole_rx.feed(input, 0));
    LinkReceiver chunk_rx;
    Log chunked;
    for (std::size_t pos = 0; pos < input.size();) {
        const std::size_t n = 1 + rng.next() % 64;
        chunked.add(chunk_rx.feed(input.substr(pos, n), 0));
        pos += n;
    }
    check(whole == chunked);
    check(whole_rx.counters().messages_total == whole.messages.size());

    // 2. Time, ticks, resets and backpressure mixed in.
    LinkReceiver rx;
    Log mixed;
    std::int64_t now_ms = 0;
    for (std::size_t pos = 0; pos < input.size();) {
        const std::uint64_t r = rng.next();
        const std::size_t n = 1 + r % 32;
        // Mostly small steps; now and then past the 30 s frame timeout.
        now_ms += (r >> 8) % 16 == 0 ? 31'000 : static_cast<std::int64_t>((r >> 16) % 500);
        if ((r >> 24) % 64 == 0) mixed.add(rx.reset());
        if ((r >> 32) % 32 == 0) rx.set_busy(!rx.busy());
        mixed.add(rx.tick(now_ms));
        mixed.add(rx.feed(input.substr(pos, n), now_ms));
        pos += n;
    }
    mixed.add(rx.tick(now_ms + 31'000));
    check(rx.state() == LinkReceiver::State::idle);  // the timeout always ends a transfer

    // 3. Every message is made of valid frames of the input.
    std::vector<const std::string*> all;
    for (const auto& m : whole.messages) all.push_back(&m);
    for (const auto& m : mixed.messages) all.push_back(&m);
    if (!all.empty()) {
        const auto texts = frame_texts(input);
        for (const std::string* m : all) {
            for (unsigned char c : *m) check(pftgw::astm::is_text_byte(c));
            check(m->empty() ? texts.count("") > 0 : made_of(*m, texts));
        }
    }
    // Replies are only ever ACK or NAK.
    for (char c : whole.sent + mixed.sent) check(c == pftgw::astm::kAck || c == pftgw::astm::kNak);
    return 0;
}
