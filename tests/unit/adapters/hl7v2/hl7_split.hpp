// Test helper: splits an HL7 v2 message into segments, fields and components
// with the default delimiters, numbering fields as HL7 2.5.1 ch. 2 does
// (MSH-1 is the field separator itself, MSH-2 the encoding characters).
#pragma once

#include <string>
#include <string_view>
#include <vector>

namespace pftgw::hl7v2::testing {

inline std::vector<std::string> split(std::string_view text, char sep) {
    std::vector<std::string> out;
    std::size_t start = 0;
    for (std::size_t i = 0; i <= text.size(); ++i) {
        if (i == text.size() || text[i] == sep) {
            out.emplace_back(text.substr(start, i - start));
            start = i + 1;
        }
    }
    return out;
}

struct Segment {
    std::string id;
    std::vector<std::string> fields;  // fields[n] is field n (HL7 numbering); fields[0] the id

    // Field n, "" when the segment has fewer fields.
    std::string field(std::size_t n) const { return n < fields.size() ? fields[n] : std::string(); }
    // Component c (1-based) of field n.
    std::string component(std::size_t n, std::size_t c) const {
        auto parts = split(field(n), '^');
        return c >= 1 && c <= parts.size() ? parts[c - 1] : std::string();
    }
};

inline Segment parse_segment(std::string_view text) {
    Segment s;
    s.fields = split(text, '|');
    s.id = s.fields.empty() ? std::string() : s.fields[0];
    if (s.id == "MSH") {
        // "MSH|^~\&|APP": split gives {"MSH","^~\&","APP",...}; HL7 numbers the
        // separator itself as MSH-1, so insert it and shift the rest by one.
        s.fields.insert(s.fields.begin() + 1, "|");
    }
    return s;
}

// Segments split on CR (segments end in CR; a trailing CR leaves no empty segment).
inline std::vector<Segment> parse_message(std::string_view message) {
    std::vector<Segment> out;
    for (const auto& line : split(message, '\r'))
        if (!line.empty()) out.push_back(parse_segment(line));
    return out;
}

inline std::vector<Segment> segments_named(const std::vector<Segment>& all, std::string_view id) {
    std::vector<Segment> out;
    for (const auto& s : all)
        if (s.id == id) out.push_back(s);
    return out;
}

}  // namespace pftgw::hl7v2::testing
