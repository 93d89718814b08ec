// HL7 v2 parsing: delimiters from MSH-1/MSH-2, field spans, escapes, character sets.
#include "adapters/hl7v2/hl7_parser.hpp"

#include <algorithm>
#include <cctype>

namespace pftgw::hl7v2 {
namespace {

constexpr char kMllpStart = 0x0B;  // MLLP start block (interop-facts.md, HL7)
constexpr char kMllpEnd = 0x1C;    // MLLP end block

bool is_hex(char c) {
    return std::isxdigit(static_cast<unsigned char>(c)) != 0;
}
int hex_value(char c) {
    if (c >= '0' && c <= '9') return c - '0';
    if (c >= 'a' && c <= 'f') return c - 'a' + 10;
    return c - 'A' + 10;
}

// The n-th piece (1-based) of `text` split on `sep`; empty when there are fewer.
std::string_view piece(std::string_view text, char sep, std::size_t n) {
    std::size_t start = 0;
    for (std::size_t i = 1; i < n; ++i) {
        const auto next = text.find(sep, start);
        if (next == std::string_view::npos) return {};
        start = next + 1;
    }
    const auto stop = text.find(sep, start);
    return text.substr(start,
                       stop == std::string_view::npos ? std::string_view::npos : stop - start);
}

void append_utf8(std::uint32_t cp, std::string& out) {
    if (cp < 0x80) {
        out += static_cast<char>(cp);
    } else if (cp < 0x800) {
        out += static_cast<char>(0xC0 | (cp >> 6));
        out += static_cast<char>(0x80 | (cp & 0x3F));
    } else if (cp < 0x10000) {
        out += static_cast<char>(0xE0 | (cp >> 12));
        out += static_cast<char>(0x80 | ((cp >> 6) & 0x3F));
        out += static_cast<char>(0x80 | (cp & 0x3F));
    } else {
        out += static_cast<char>(0xF0 | (cp >> 18));
        out += static_cast<char>(0x80 | ((cp >> 12) & 0x3F));
        out += static_cast<char>(0x80 | ((cp >> 6) & 0x3F));
        out += static_cast<char>(0x80 | (cp & 0x3F));
    }
}
constexpr std::uint32_t kReplacement = 0xFFFD;

// Length of a valid UTF-8 sequence at s[i], 0 when invalid (RFC 3629).
std::size_t utf8_length(std::string_view s, std::size_t i, std::uint32_t* cp) {
    const auto b = [&](std::size_t k) { return static_cast<unsigned char>(s[i + k]); };
    const unsigned char c = b(0);
    std::size_t n = 0;
    std::uint32_t v = 0;
    if (c < 0x80) {
        *cp = c;
        return 1;
    } else if (c >= 0xC2 && c <= 0xDF) {
        n = 2;
        v = c & 0x1F;
    } else if (c >= 0xE0 && c <= 0xEF) {
        n = 3;
        v = c & 0x0F;
    } else if (c >= 0xF0 && c <= 0xF4) {
        n = 4;
        v = c & 0x07;
    } else {
        return 0;
    }
    if (i + n > s.size()) return 0;
    for (std::size_t k = 1; k < n; ++k) {
        if ((b(k) & 0xC0) != 0x80) return 0;
        v = (v << 6) | (b(k) & 0x3F);
    }
    if ((n == 3 && (v < 0x800 || (v >= 0xD800 && v <= 0xDFFF))) ||
        (n == 4 && (v < 0x10000 || v > 0x10FFFF)))
        return 0;
    *cp = v;
    return n;
}

// Bytes in `charset` to UTF-8.
std::string to_utf8(std::string_view bytes, Charset charset, bool* lossy) {
    std::string out;
    out.reserve(bytes.size());
    for (std::size_t i = 0; i < bytes.size();) {
        const auto c = static_cast<unsigned char>(bytes[i]);
        if (c < 0x80) {
            out += static_cast<char>(c);
            ++i;
            continue;
        }
        switch (charset) {
            case Charset::latin1:
                append_utf8(c, out);  // ISO-8859-1 is the first 256 code points
                ++i;
                break;
            case Charset::ascii:
                append_utf8(kReplacement, out);
                if (lossy) *lossy = true;
                ++i;
                break;
            case Charset::utf8: {
                std::uint32_t cp = 0;
                const std::size_t n = utf8_length(bytes, i, &cp);
                if (n == 0) {
                    append_utf8(kReplacement, out);
                    if (lossy) *lossy = true;
                    ++i;
                } else {
                    out.append(bytes.substr(i, n));
                    i += n;
                }
                break;
            }
        }
    }
    return out;
}

bool valid_delimiter(char c) {
    const auto u = static_cast<unsigned char>(c);
    return u > 0x20 && u < 0x7F && !std::isalnum(u);
}

}  // namespace

std::vector<Line> split_lines(std::string_view text) {
    std::vector<Line> lines;
    lines.reserve(text.size() / 64 + 1);  // segments are rarely shorter
    const std::size_t n = text.size();
    const auto next = [&](char c, std::size_t from) {
        const auto at = text.find(c, from);  // memchr: whole segments at a time
        return at == std::string_view::npos ? n : at;
    };
    // The next CR and the next LF ahead, each searched again only once passed:
    // one pass over the text whichever of the two ends its segments.
    std::size_t cr = next('\r', 0);
    std::size_t lf = next('\n', 0);
    for (std::size_t start = 0; start <= n;) {
        if (cr < start) cr = next('\r', start);
        if (lf < start) lf = next('\n', start);
        const std::size_t i = std::min(cr, lf);
        std::size_t b = start;
        while (b < i && (text[b] == kMllpStart || text[b] == kMllpEnd)) ++b;
        if (b < i) lines.push_back({b, text.substr(b, i - b)});
        start = i + 1;
    }
    return lines;
}

std::optional<Delimiters> read_delimiters(std::string_view line, std::string* why) {
    const auto fail = [&](std::string text) -> std::optional<Delimiters> {
        if (why) *why = std::move(text);
        return std::nullopt;
    };
    if (line.size() < 4) return fail("the header segment is too short to declare its delimiters");
    Delimiters d;
    d.field = line[3];
    if (!valid_delimiter(d.field))
        return fail("MSH-1 is not a printable non-alphanumeric character");
    const auto stop = line.find(d.field, 4);
    const std::string_view enc =
        line.substr(4, stop == std::string_view::npos ? std::string_view::npos : stop - 4);
    // Four characters in 2.3-2.6; a fifth (truncation, 2.7 style) is accepted.
    if (enc.size() < 4 || enc.size() > 5)
        return fail("MSH-2 has " + std::to_string(enc.size()) + " characters; 4 or 5 expected");
    d.component = enc[0];
    d.repetition = enc[1];
    d.escape = enc[2];
    d.subcomponent = enc[3];
    if (enc.size() == 5) d.truncation = enc[4];
    std::string all(1, d.field);
    all += enc;
    for (std::size_t i = 0; i < all.size(); ++i) {
        if (!valid_delimiter(all[i]))
            return fail("MSH-2 holds a character that cannot be a delimiter");
        if (all.find(all[i], i + 1) != std::string::npos)
            return fail(std::string("delimiter '") + all[i] + "' is declared twice");
    }
    return d;
}

std::optional<Charset> charset_from_hl7(std::string_view msh18) {
    if (msh18.empty() || msh18 == "ASCII") return Charset::ascii;
    if (msh18 == "8859/1") return Charset::latin1;
    if (msh18 == "UNICODE UTF-8" || msh18 == "UTF-8") return Charset::utf8;
    return std::nullopt;
}

ParseOutcome parse_message(std::string_view input, std::size_t begin, std::size_t end,
                           const std::vector<Line>& lines, std::optional<Charset> fallback) {
    ParseOutcome out;
    if (lines.empty() || lines.front().text.substr(0, 3) != "MSH") {
        out.failure = ParseFailure{"hl7.msh-unreadable", "the message does not start with MSH"};
        return out;
    }
    std::string why;
    const auto d = read_delimiters(lines.front().text, &why);
    if (!d) {
        out.failure = ParseFailure{"hl7.msh-unreadable", why};
        return out;
    }
    ParsedMessage m;
    m.text.assign(input.substr(begin, end - begin));
    m.offset = begin;
    m.delimiters = *d;
    m.segments.reserve(lines.size());
    for (const auto& line : lines) {
        Segment s;
        const auto base = static_cast<std::uint32_t>(line.offset - begin);
        s.whole = {base, static_cast<std::uint32_t>(base + line.text.size())};
        std::uint32_t start = 0;
        const auto n = static_cast<std::uint32_t>(line.text.size());
        for (std::uint32_t i = 0; i <= n; ++i) {
            if (i < n && line.text[i] != d->field) continue;
            s.fields.push_back({base + start, base + i});
            start = i + 1;
        }
        const std::string_view id = line.text.substr(0, line.text.find(d->field));
        s.id.assign(id);
        if (m.segments.empty()) {
            // MSH-1 is the separator itself (at byte 3): the classic off-by-one.
            s.fields.insert(s.fields.begin() + 1, Span{base + 3, base + 4});
            s.header = true;
        }
        m.segments.push_back(std::move(s));
    }
    const std::string_view msh18 = m.raw(m.msh(), 18, 1, 1);
    if (msh18.empty()) {
        m.charset = fallback.value_or(Charset::ascii);
    } else if (const auto cs = charset_from_hl7(msh18)) {
        m.charset = *cs;
    } else {
        out.unknown_charset.assign(msh18);
        m.charset = Charset::ascii;
    }
    out.message = std::move(m);
    return out;
}

std::string_view ParsedMessage::field(const Segment& s, std::size_t n) const {
    if (n >= s.fields.size()) return {};
    const Span sp = s.fields[n];
    return std::string_view(text).substr(sp.begin, sp.size());
}

std::size_t ParsedMessage::repetitions(const Segment& s, std::size_t n) const {
    const std::string_view f = field(s, n);
    if (f.empty()) return 0;
    if (s.header && (n == 1 || n == 2)) return 1;
    std::size_t count = 1;
    for (char c : f) count += c == delimiters.repetition;
    return count;
}

std::string_view ParsedMessage::raw(const Segment& s, std::size_t n, std::size_t rep,
                                    std::size_t comp, std::size_t sub) const {
    std::string_view f = field(s, n);
    // MSH-1 and MSH-2 are the delimiters: never split (MSH-2 holds ~ and ^).
    if (s.header && (n == 1 || n == 2)) return rep == 1 && comp <= 1 && sub <= 1 ? f : "";
    f = piece(f, delimiters.repetition, rep);
    if (comp == 0) return f;
    f = piece(f, delimiters.component, comp);
    if (sub == 0) return f;
    return piece(f, delimiters.subcomponent, sub);
}

std::string ParsedMessage::text_of(const Segment& s, std::size_t n, std::size_t rep,
                                   std::size_t comp, std::size_t sub) const {
    if (s.header && (n == 1 || n == 2)) return std::string(raw(s, n, rep, comp, sub));
    return decode(raw(s, n, rep, comp, sub));
}

bool is_plain_text(std::string_view raw_text, char escape) {
    for (const char c : raw_text)
        if (c == escape || static_cast<unsigned char>(c) >= 0x80) return false;
    return true;
}

std::string ParsedMessage::decode(std::string_view in, bool* lossy) const {
    const Delimiters& d = delimiters;
    // Most fields hold neither escapes nor bytes above ASCII: their text is
    // their bytes in every character set this reader knows.
    if (is_plain_text(in, d.escape)) return std::string(in);
    std::string bytes;
    bytes.reserve(in.size());
    for (std::size_t i = 0; i < in.size(); ++i) {
        if (in[i] != d.escape) {
            bytes += in[i];
            continue;
        }
        const auto close = in.find(d.escape, i + 1);
        if (close == std::string_view::npos) {  // unterminated: kept as written
            bytes.append(in.substr(i));
            break;
        }
        const std::string_view seq = in.substr(i + 1, close - i - 1);
        bool known = true;
        if (seq == "F") {
            bytes += d.field;
        } else if (seq == "S") {
            bytes += d.component;
        } else if (seq == "T") {
            bytes += d.subcomponent;
        } else if (seq == "R") {
            bytes += d.repetition;
        } else if (seq == "E") {
            bytes += d.escape;
        } else if (seq == "H" || seq == "N") {
            // highlighting on / off: no text
        } else if (seq == ".br") {
            bytes += '\n';
        } else if (seq.size() >= 3 && seq.size() % 2 == 1 && (seq[0] == 'X' || seq[0] == 'x')) {
            std::string hex;
            for (std::size_t k = 1; k + 1 < seq.size(); k += 2) {
                if (!is_hex(seq[k]) || !is_hex(seq[k + 1])) {
                    known = false;
                    break;
                }
                hex += static_cast<char>(hex_value(seq[k]) * 16 + hex_value(seq[k + 1]));
            }
            if (known) bytes += hex;
        } else {
            known = false;
        }
        if (!known) {
            bytes.append(in.substr(i, close - i + 1));
        }
        i = close;
    }
    return to_utf8(bytes, charset, lossy);
}

void append_field_text(std::string_view utf8, const Delimiters& d, Charset charset,
                       std::string& out) {
    static constexpr char kHex[] = "0123456789ABCDEF";
    const auto escape = [&](char code) {
        out += d.escape;
        out += code;
        out += d.escape;
    };
    for (std::size_t i = 0; i < utf8.size();) {
        const char c = utf8[i];
        const auto u = static_cast<unsigned char>(c);
        if (c == d.field) {
            escape('F');
        } else if (c == d.component) {
            escape('S');
        } else if (c == d.subcomponent) {
            escape('T');
        } else if (c == d.repetition) {
            escape('R');
        } else if (c == d.escape) {
            escape('E');
        } else if (u < 0x20 || u == 0x7F || (d.truncation && c == d.truncation)) {
            out += d.escape;
            out += 'X';
            out += kHex[u >> 4];
            out += kHex[u & 0xF];
            out += d.escape;
        } else if (u >= 0x80) {
            std::uint32_t cp = 0;
            const std::size_t n = utf8_length(utf8, i, &cp);
            if (n == 0) {
                out += '?';
                ++i;
                continue;
            }
            if (charset == Charset::utf8) {
                out.append(utf8.substr(i, n));
            } else if (charset == Charset::latin1 && cp < 0x100) {
                out += static_cast<char>(cp);
            } else {
                out += '?';
            }
            i += n;
            continue;
        } else {
            out += c;
        }
        ++i;
    }
}

}  // namespace pftgw::hl7v2
