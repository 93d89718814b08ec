// Stable identifiers: SHA-256, base32, the result id, MSH-10 and part ids.
// Written here so the core needs no crypto library; the recipe is in identity.hpp.
#include "gateway/core/identity.hpp"

#include "gateway/core/sha256.hpp"

#include <charconv>
#include <cstring>
#include <system_error>

namespace pftgw {
namespace {

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
    Sha256Stream stream;
    stream.update(bytes);
    return stream.finish();
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
