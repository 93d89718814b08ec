// String escaping for the FHIR JSON and XML emitters.
#include "adapters/fhir/emitters.hpp"

#include <algorithm>
#include <cstdint>
#include <cstring>

#if defined(__SSE2__)
#include <emmintrin.h>
#endif

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

#if defined(__SSE2__)
// Bit i set when byte i of the 16 needs JSON escaping (< 0x20, '"' or '\\').
inline unsigned json_escape_mask(const char* p) {
    const __m128i v = _mm_loadu_si128(reinterpret_cast<const __m128i*>(p));
    const __m128i control = _mm_cmpeq_epi8(_mm_min_epu8(v, _mm_set1_epi8(0x1F)), v);
    const __m128i quote = _mm_cmpeq_epi8(v, _mm_set1_epi8('"'));
    const __m128i backslash = _mm_cmpeq_epi8(v, _mm_set1_epi8('\\'));
    return static_cast<unsigned>(
        _mm_movemask_epi8(_mm_or_si128(control, _mm_or_si128(quote, backslash))));
}
#endif

void append_json_escape(std::string& out, unsigned char c) {
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
            const char esc[] = {'\\', 'u', '0', '0', kHexDigits[c >> 4], kHexDigits[c & 0x0F]};
            out.append(esc, sizeof esc);
        }
    }
}
}  // namespace

std::size_t json_safe_prefix(std::string_view text) {
    const char* p = text.data();
    const std::size_t n = text.size();
    std::size_t i = 0;
#if defined(__SSE2__)
    // 16 bytes at a time; the tail is copied into a block padded with a byte
    // that needs no escaping, so nothing past the text is read.
    constexpr std::size_t kBlock = 16;
    for (; i + kBlock <= n; i += kBlock)
        if (const unsigned m = json_escape_mask(p + i); m != 0)
            return i + static_cast<std::size_t>(__builtin_ctz(m));
    // The tail bytewise: reading past the text is not allowed.
    for (; i < n; ++i)
        if (kEscape.json[static_cast<unsigned char>(p[i])]) return i;
    return n;
#else
    for (; i < n; ++i)
        if (kEscape.json[static_cast<unsigned char>(p[i])]) return i;
    return n;
#endif
}

void append_json_escaped(std::string& out, std::string_view text) {
    std::size_t safe = json_safe_prefix(text);
    if (safe == text.size()) {
        out.append(text.data(), text.size());
        return;
    }
    // Escapes are rare (a quote or line break in free text): bytewise from here.
    out.append(text.data(), safe);
    for (std::size_t i = safe; i < text.size(); ++i) {
        const auto c = static_cast<unsigned char>(text[i]);
        if (kEscape.json[c])
            append_json_escape(out, c);
        else
            out += text[i];
    }
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
