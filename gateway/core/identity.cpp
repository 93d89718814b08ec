// Stable identifiers: SHA-256, base32, the result id, MSH-10 and part ids.
// Written here so the core needs no crypto library; the recipe is in identity.hpp.
#include "gateway/core/identity.hpp"

#include <charconv>
#include <cstring>
#include <system_error>

namespace pftgw {
namespace {

// ---- SHA-256, FIPS 180-4 section 6.2 ----

// FIPS 180-4 section 4.2.2: first 32 bits of the fractional parts of the cube
// roots of the first 64 primes.
constexpr std::array<std::uint32_t, 64> kRoundConstants{
    0x428a2f98, 0x71374491, 0xb5c0fbcf, 0xe9b5dba5, 0x3956c25b, 0x59f111f1, 0x923f82a4, 0xab1c5ed5,
    0xd807aa98, 0x12835b01, 0x243185be, 0x550c7dc3, 0x72be5d74, 0x80deb1fe, 0x9bdc06a7, 0xc19bf174,
    0xe49b69c1, 0xefbe4786, 0x0fc19dc6, 0x240ca1cc, 0x2de92c6f, 0x4a7484aa, 0x5cb0a9dc, 0x76f988da,
    0x983e5152, 0xa831c66d, 0xb00327c8, 0xbf597fc7, 0xc6e00bf3, 0xd5a79147, 0x06ca6351, 0x14292967,
    0x27b70a85, 0x2e1b2138, 0x4d2c6dfc, 0x53380d13, 0x650a7354, 0x766a0abb, 0x81c2c92e, 0x92722c85,
    0xa2bfe8a1, 0xa81a664b, 0xc24b8b70, 0xc76c51a3, 0xd192e819, 0xd6990624, 0xf40e3585, 0x106aa070,
    0x19a4c116, 0x1e376c08, 0x2748774c, 0x34b0bcb5, 0x391c0cb3, 0x4ed8aa4a, 0x5b9cca4f, 0x682e6ff3,
    0x748f82ee, 0x78a5636f, 0x84c87814, 0x8cc70208, 0x90befffa, 0xa4506ceb, 0xbef9a3f7, 0xc67178f2,
};

// FIPS 180-4 section 5.3.3: initial hash value H(0).
constexpr std::array<std::uint32_t, 8> kInitialHash{
    0x6a09e667, 0xbb67ae85, 0x3c6ef372, 0xa54ff53a, 0x510e527f, 0x9b05688c, 0x1f83d9ab, 0x5be0cd19,
};

constexpr std::size_t kBlockBytes = 64;

constexpr std::uint32_t rotr(std::uint32_t x, int n) {
    return (x >> n) | (x << (32 - n));
}

void compress(std::array<std::uint32_t, 8>& h, const std::uint8_t* block) {
    std::array<std::uint32_t, 64> w{};
    for (int t = 0; t < 16; ++t)
        w[t] = (std::uint32_t{block[4 * t]} << 24) | (std::uint32_t{block[4 * t + 1]} << 16) |
               (std::uint32_t{block[4 * t + 2]} << 8) | std::uint32_t{block[4 * t + 3]};
    for (int t = 16; t < 64; ++t) {
        const std::uint32_t s0 = rotr(w[t - 15], 7) ^ rotr(w[t - 15], 18) ^ (w[t - 15] >> 3);
        const std::uint32_t s1 = rotr(w[t - 2], 17) ^ rotr(w[t - 2], 19) ^ (w[t - 2] >> 10);
        w[t] = w[t - 16] + s0 + w[t - 7] + s1;
    }
    std::uint32_t a = h[0], b = h[1], c = h[2], d = h[3], e = h[4], f = h[5], g = h[6], hh = h[7];
    for (int t = 0; t < 64; ++t) {
        const std::uint32_t big_s1 = rotr(e, 6) ^ rotr(e, 11) ^ rotr(e, 25);
        const std::uint32_t ch = (e & f) ^ (~e & g);
        const std::uint32_t t1 = hh + big_s1 + ch + kRoundConstants[t] + w[t];
        const std::uint32_t big_s0 = rotr(a, 2) ^ rotr(a, 13) ^ rotr(a, 22);
        const std::uint32_t maj = (a & b) ^ (a & c) ^ (b & c);
        const std::uint32_t t2 = big_s0 + maj;
        hh = g;
        g = f;
        f = e;
        e = d + t1;
        d = c;
        c = b;
        b = a;
        a = t1 + t2;
    }
    h[0] += a;
    h[1] += b;
    h[2] += c;
    h[3] += d;
    h[4] += e;
    h[5] += f;
    h[6] += g;
    h[7] += hh;
}

// ---- identifiers ----

constexpr char kBase32Alphabet[] = "ABCDEFGHIJKLMNOPQRSTUVWXYZ234567";  // RFC 4648 table 3

constexpr std::size_t kMaxIdentifierChars = 64;
constexpr std::size_t kSuffixHashChars = 8;    // 40 bits: keeps cut or rewritten ids apart
constexpr std::size_t kContentHashChars = 25;  // "R" + 25 = 26 characters, 125 bits
constexpr std::size_t kControlIdChars = 20;    // HL7 2.5.1 MSH-10 (ST) length, DECISIONS.md
constexpr char kFieldSeparator = '\x1f';       // ASCII unit separator: cannot occur in an id

bool is_safe_char(char c) {
    return (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '.' ||
           c == '_' || c == '-';
}

std::string hash_base32(std::string_view bytes, std::size_t chars) {
    const auto digest = sha256(bytes);
    return base32(digest.data(), digest.size()).substr(0, chars);
}

// Byte-wise replacement only: every byte outside [A-Za-z0-9._-] becomes '_'
// (so one UTF-8 character becomes several '_'); a leading '.' becomes '_' so
// the result is never ".", ".." or a hidden file.
std::string replace_unsafe(std::string_view text) {
    std::string out;
    out.reserve(text.size());
    for (char c : text) out.push_back(is_safe_char(c) ? c : '_');
    if (!out.empty() && out.front() == '.') out.front() = '_';
    if (out.empty()) out = "_";
    return out;
}

std::string cut_with_suffix(std::string safe, std::string_view original) {
    safe.resize(kMaxIdentifierChars - kSuffixHashChars - 1);
    return safe + "-" + hash_base32(original, kSuffixHashChars);
}

// Like filesystem_safe(), but a text that had to be rewritten also gets the
// hash suffix, so "A B" and "A_B" (two different results) never share an id.
std::string safe_identifier(std::string_view text) {
    std::string safe = replace_unsafe(text);
    if (safe == text && safe.size() <= kMaxIdentifierChars) return safe;
    if (safe.size() > kMaxIdentifierChars - kSuffixHashChars - 1)
        return cut_with_suffix(std::move(safe), text);
    return safe + "-" + hash_base32(text, kSuffixHashChars);
}

// ---- canonical text for the content hash ----

// Each field is "name:length:value\n": the length makes the text unambiguous
// whatever bytes a value holds.
void field(std::string& out, std::string_view name, std::string_view value) {
    out.append(name);
    out.push_back(':');
    out.append(std::to_string(value.size()));
    out.push_back(':');
    out.append(value);
    out.push_back('\n');
}

// Shortest text that reads back to the same double (std::to_chars without a
// format is round-trip exact); -0 is written as 0 so both hash the same.
std::string number_text(double v) {
    if (v == 0) v = 0;
    char buf[64];
    const auto r = std::to_chars(buf, buf + sizeof buf, v);
    return r.ec == std::errc{} ? std::string(buf, r.ptr) : std::string("?");
}

void quantity_fields(std::string& out, const Quantity& q) {
    field(out, "kind", q.kind);
    if (q.value)
        field(out, "value", number_text(*q.value));
    else
        field(out, "absent", q.absent_reason.value_or(""));
    field(out, "unit", q.unit);
    field(out, "condition", to_string(q.condition));
}

std::string canonical_content(const NeutralResult& r) {
    std::string out = "pftgw-content-1\n";  // recipe version: a new recipe gives new ids
    for (const auto& id : r.subject.identifiers) {
        field(out, "subject.identifier.system", id.system);
        field(out, "subject.identifier.value", id.value);
        field(out, "subject.identifier.type", id.type);
    }
    field(out, "subject.birth_date", r.subject.birth_date ? to_iso(*r.subject.birth_date) : "");
    field(out, "subject.sex_at_birth", to_string(r.subject.sex_at_birth));
    field(out, "device.id", r.device.id);
    field(out, "device.serial", r.device.serial_number);
    field(out, "session_time", r.session_time ? to_iso(*r.session_time) : "");
    for (const auto& test : r.tests) {
        field(out, "test.type", to_string(test.type));
        field(out, "test.time", test.time ? to_iso(*test.time) : "");
        for (const auto& q : test.values) quantity_fields(out, q);
    }
    return out;
}

}  // namespace

std::array<std::uint8_t, 32> sha256(std::string_view bytes) {
    std::array<std::uint32_t, 8> h = kInitialHash;
    const auto* data = reinterpret_cast<const std::uint8_t*>(bytes.data());
    const std::size_t size = bytes.size();

    std::size_t offset = 0;
    for (; offset + kBlockBytes <= size; offset += kBlockBytes) compress(h, data + offset);

    // FIPS 180-4 section 5.1.1: a 1 bit, zeros, then the length in bits as 64 bits.
    std::array<std::uint8_t, 2 * kBlockBytes> tail{};
    const std::size_t rest = size - offset;
    if (rest > 0) std::memcpy(tail.data(), data + offset, rest);
    tail[rest] = 0x80;
    const std::size_t tail_bytes = rest + 1 + 8 <= kBlockBytes ? kBlockBytes : 2 * kBlockBytes;
    const std::uint64_t bits = static_cast<std::uint64_t>(size) * 8;
    for (int i = 0; i < 8; ++i)
        tail[tail_bytes - 1 - i] = static_cast<std::uint8_t>(bits >> (8 * i));
    for (std::size_t b = 0; b < tail_bytes; b += kBlockBytes) compress(h, tail.data() + b);

    std::array<std::uint8_t, 32> digest{};
    for (int i = 0; i < 8; ++i) {
        digest[4 * i] = static_cast<std::uint8_t>(h[i] >> 24);
        digest[4 * i + 1] = static_cast<std::uint8_t>(h[i] >> 16);
        digest[4 * i + 2] = static_cast<std::uint8_t>(h[i] >> 8);
        digest[4 * i + 3] = static_cast<std::uint8_t>(h[i]);
    }
    return digest;
}

std::string sha256_hex(std::string_view bytes) {
    static constexpr char kHex[] = "0123456789abcdef";
    const auto digest = sha256(bytes);
    std::string out;
    out.reserve(64);
    for (auto b : digest) {
        out.push_back(kHex[b >> 4]);
        out.push_back(kHex[b & 0x0f]);
    }
    return out;
}

std::string base32(const std::uint8_t* data, std::size_t size) {
    // RFC 4648 section 6: 5-bit groups, most significant first; the last group
    // is padded with zero bits; no '=' padding is written.
    std::string out;
    out.reserve((size * 8 + 4) / 5);
    std::uint32_t buffer = 0;
    int bits = 0;
    for (std::size_t i = 0; i < size; ++i) {
        buffer = (buffer << 8) | data[i];
        bits += 8;
        while (bits >= 5) {
            bits -= 5;
            out.push_back(kBase32Alphabet[(buffer >> bits) & 0x1f]);
        }
    }
    if (bits > 0) out.push_back(kBase32Alphabet[(buffer << (5 - bits)) & 0x1f]);
    return out;
}

std::string result_identifier(const NeutralResult& result) {
    if (!result.id.empty()) return safe_identifier(result.id);
    if (!result.device.id.empty() && !result.device_session_number.empty())
        return safe_identifier(result.device.id + "-" + result.device_session_number);
    return "R" + hash_base32(canonical_content(result), kContentHashChars);
}

std::string hl7_control_id(std::string_view result_id, int revision, std::string_view target) {
    std::string key;
    key.append(result_id);
    key.push_back(kFieldSeparator);
    key.append(std::to_string(revision));
    key.push_back(kFieldSeparator);
    key.append(target);
    return hash_base32(key, kControlIdChars);
}

std::string part_identifier(std::string_view result_id, std::string_view part) {
    std::string out;
    out.reserve(result_id.size() + 1 + part.size());
    out.append(result_id);
    out.push_back('-');
    out.append(part);
    return out;
}

std::string filesystem_safe(std::string_view text) {
    std::string safe = replace_unsafe(text);
    if (safe.size() > kMaxIdentifierChars) return cut_with_suffix(std::move(safe), text);
    return safe;
}

}  // namespace pftgw
