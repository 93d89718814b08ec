// String escaping for the FHIR JSON and XML emitters.
#include "adapters/fhir/emitters.hpp"

#include <algorithm>
#include <cstdint>
#include <cstring>

namespace pftgw::fhir::detail {

namespace {
constexpr char kHexDigits[] = "0123456789abcdef";
constexpr std::string_view kReplacementCharacter = "\xEF\xBF\xBD";  // U+FFFD in UTF-8

// Bytes that need escaping, as a table: one load per byte on the hot path.
struct EscapeTable {
    bool json[256] = {};
    bool xml[256] = {};
    constexpr EscapeTable() {
        for (int c = 0; c < 0x20; ++c) json[c] = xml[c] = true;
        json['"'] = json['\\'] = true;
        xml['&'] = xml['<'] = xml['>'] = xml['"'] = true;
    }
};
constexpr EscapeTable kEscape{};

// True when any of 8 bytes may need JSON escaping (< 0x20, '"' or '\\'): the
// "has zero byte" / "has less than" bit tricks (S. Anderson, Bit Twiddling
// Hacks). A false positive only sends the word to the byte loop.
inline bool word_may_need_json_escape(std::uint64_t w) {
    constexpr std::uint64_t kOnes = 0x0101010101010101ULL;
    constexpr std::uint64_t kHighs = 0x8080808080808080ULL;
    const std::uint64_t below_space = (w - kOnes * 0x20) & ~w & kHighs;
    const std::uint64_t q = w ^ (kOnes * '"');
    const std::uint64_t b = w ^ (kOnes * '\\');
    return (below_space | ((q - kOnes) & ~q & kHighs) | ((b - kOnes) & ~b & kHighs)) != 0;
}
}  // namespace

void append_json_escaped(std::string& out, std::string_view text) {
    const char* p = text.data();
    const std::size_t n = text.size();
    std::size_t run_start = 0;
    std::size_t i = 0;
    while (i < n) {
        if (i + 8 <= n) {
            std::uint64_t w;
            std::memcpy(&w, p + i, 8);
            if (!word_may_need_json_escape(w)) {
                i += 8;
                continue;
            }
        }
        for (const std::size_t end = std::min(i + 8, n); i < end; ++i) {
            const auto c = static_cast<unsigned char>(p[i]);
            if (!kEscape.json[c]) continue;
            out.append(p + run_start, i - run_start);
            run_start = i + 1;
            switch (c) {
                case '"':
                    out += "\\\"";
                    break;
                case '\\':
                    out += "\\\\";
                    break;
                case '\b':
                    out += "\\b";
                    break;
                case '\f':
                    out += "\\f";
                    break;
                case '\n':
                    out += "\\n";
                    break;
                case '\r':
                    out += "\\r";
                    break;
                case '\t':
                    out += "\\t";
                    break;
                default: {
                    const char esc[] = {
                        '\\', 'u', '0', '0', kHexDigits[c >> 4], kHexDigits[c & 0x0F]};
                    out.append(esc, sizeof esc);
                }
            }
        }
    }
    out.append(p + run_start, n - run_start);
}

void append_xml_escaped(std::string& out, std::string_view text) {
    std::size_t run_start = 0;
    for (std::size_t i = 0; i < text.size(); ++i) {
        const auto c = static_cast<unsigned char>(text[i]);
        if (!kEscape.xml[c]) continue;
        out.append(text.data() + run_start, i - run_start);
        run_start = i + 1;
        switch (c) {
            case '&':
                out += "&amp;";
                break;
            case '<':
                out += "&lt;";
                break;
            case '>':
                out += "&gt;";
                break;
            case '"':
                out += "&quot;";
                break;
            case '\t':
                out += "&#9;";
                break;
            case '\n':
                out += "&#10;";
                break;
            case '\r':
                out += "&#13;";
                break;
            default:
                out += kReplacementCharacter;
        }
    }
    out.append(text.data() + run_start, text.size() - run_start);
}

}  // namespace pftgw::fhir::detail
