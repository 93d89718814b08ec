// HL7 v2 message parsing as devices send it: segments, fields, repetitions,
// components and subcomponents with the delimiters each MSH declares, escape
// decoding and MSH-18 character sets, for versions 2.3 to 2.6.
//
// Rules (HL7 2.5.1 ch. 2 as quoted in interop-facts.md; from memory where said):
// - MSH-1 is the field separator itself and MSH-2 the encoding characters, so
//   MSH-n is the n-th field counting the separator after "MSH" as MSH-1;
//   MSH-1 and MSH-2 are never split or unescaped.
// - MSH-2 holds component, repetition, escape, subcomponent and (2.7-style,
//   from memory) a fifth truncation character, which is kept as data.
// - Segments end in CR; LF and CRLF are accepted too. MLLP start/end bytes
//   (0x0B, 0x1C) at a segment start are skipped.
// - Escapes: \F\ \S\ \T\ \R\ \E\ give the delimiters, \Xhh..\ bytes in the
//   message's character set, \.br\ a line feed, \H\ \N\ nothing; any other or
//   unterminated sequence is kept as written. Decoding is one pass, left to
//   right, so "\E\F\E\" is the text "\F\", not "|".
// - MSH-18 (table 0211, from memory): empty or "ASCII" ASCII, "8859/1"
//   ISO-8859-1, "UNICODE UTF-8" (or "UTF-8") UTF-8; decoded text is UTF-8.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

namespace pftgw::hl7v2 {

struct Delimiters {
    char field = '|';
    char component = '^';
    char repetition = '~';
    char escape = '\\';
    char subcomponent = '&';
    char truncation = 0;  // 2.7-style fifth MSH-2 character; 0 when not declared
};

enum class Charset { ascii, latin1, utf8 };

// A byte range inside ParsedMessage::text.
struct Span {
    std::uint32_t begin = 0;
    std::uint32_t end = 0;
    std::size_t size() const { return end - begin; }
};

struct Segment {
    std::string id;            // "MSH", "PID", "OBX", ...
    Span whole;                // the segment without its end
    std::vector<Span> fields;  // fields[n] is field n (HL7 numbering), fields[0] the id
    bool header = false;       // the MSH: fields 1 and 2 are the delimiters, never split
};

// One message (MSH up to the next MSH, batch segment or the end), owning its bytes.
struct ParsedMessage {
    std::string text;        // this message's bytes as received
    std::size_t offset = 0;  // where `text` starts in the input
    Delimiters delimiters;
    Charset charset = Charset::ascii;
    std::vector<Segment> segments;  // segments[0] is the MSH

    // Raw field text (still escaped): all repetitions. MSH-1 and MSH-2 as declared.
    std::string_view field(const Segment& s, std::size_t n) const;
    // Raw text of repetition `rep` (1-based), component `comp` (1-based; 0 = the
    // whole repetition), subcomponent `sub` (1-based; 0 = the whole component).
    std::string_view raw(const Segment& s, std::size_t field_number, std::size_t rep = 1,
                         std::size_t comp = 0, std::size_t sub = 0) const;
    // The same, unescaped and converted to UTF-8.
    std::string text_of(const Segment& s, std::size_t field_number, std::size_t rep = 1,
                        std::size_t comp = 0, std::size_t sub = 0) const;
    std::size_t repetitions(const Segment& s, std::size_t field_number) const;

    // Unescapes raw text and converts it to UTF-8. `lossy` (if given) is set
    // when a byte did not fit the character set (it became U+FFFD).
    std::string decode(std::string_view raw_text, bool* lossy = nullptr) const;

    const Segment& msh() const { return segments.front(); }
};

// Why a message could not be split (the MSH itself is unreadable).
struct ParseFailure {
    std::string rule;     // "hl7.msh-unreadable"
    std::string message;  // what was seen
};

// Splits text into lines at CR, LF or CRLF; empty lines are dropped. Each line
// keeps its offset into `text`.
struct Line {
    std::size_t offset = 0;
    std::string_view text;
};
std::vector<Line> split_lines(std::string_view text);

// True when raw field text holds no escape character and no byte above
// ASCII: decoding it gives the same bytes whatever the character set.
bool is_plain_text(std::string_view raw_text, char escape);

// Reads MSH-1 and MSH-2 of a line starting "MSH" (or "BHS"/"FHS").
std::optional<Delimiters> read_delimiters(std::string_view header_line, std::string* why = nullptr);

// Parses one message made of `lines` (the first starts with "MSH"), whose
// bytes are input[begin, end). The character set is MSH-18, or `fallback`
// when MSH-18 is empty. A value of MSH-18 the reader does not know is
// reported through `unknown_charset` (the text) and ASCII is used.
struct ParseOutcome {
    std::optional<ParsedMessage> message;
    std::optional<ParseFailure> failure;
    std::string unknown_charset;  // non-empty: MSH-18 named a set this reader does not know
};
ParseOutcome parse_message(std::string_view input, std::size_t begin, std::size_t end,
                           const std::vector<Line>& lines, std::optional<Charset> fallback);

// "8859/1" -> latin1, ... (table 0211 spellings above); nullopt when unknown.
// Empty text is ASCII.
std::optional<Charset> charset_from_hl7(std::string_view msh18);

// Appends `utf8` escaped for a field with `d` (| ^ ~ \ & and the truncation
// character as \F\ \S\ \R\ \E\ \T\, control bytes as \Xhh\), encoded for
// `charset`: characters Latin-1 or ASCII cannot hold become '?'.
void append_field_text(std::string_view utf8, const Delimiters& d, Charset charset,
                       std::string& out);

}  // namespace pftgw::hl7v2
