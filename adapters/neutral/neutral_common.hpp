// Shared by the neutral XML and JSON readers and writers: lazy paths, findings
// with line/column, number and enum parsing, shortest round-trip number text.
// Internal to adapters/neutral.
#pragma once

#include <charconv>
#include <cstddef>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "gateway/core/model.hpp"
#include "gateway/core/time.hpp"

namespace pftgw::neutral::detail {

// A path in the model ("tests[0].values[FEV1].unit"), built on the stack and
// rendered only when a finding needs it, so a clean read allocates nothing for paths.
struct Path {
    const Path* parent = nullptr;
    std::string_view field;
    int index = -1;
    std::string_view key;

    Path child(std::string_view f) const { return Path{this, f, -1, {}}; }
    Path item(std::string_view f, int i) const { return Path{this, f, i, {}}; }
    Path keyed(std::string_view f, std::string_view k) const { return Path{this, f, -1, k}; }
    std::string str() const;
};

inline constexpr Path kRoot{};

// Line and column (1-based) of a byte offset.
struct LineColumn {
    int line = 0;
    int column = 0;
};
LineColumn line_column(std::string_view bytes, std::size_t offset);

// Collects findings about one input; offsets are turned into line/column.
class Findings {
public:
    Findings(std::string_view bytes, std::string_view source_name, std::vector<Finding>& out)
        : bytes_(bytes), source_name_(source_name), out_(out) {}

    // offset < 0: position unknown.
    void add(std::string_view rule, const Path& path, std::string message, std::ptrdiff_t offset,
             std::vector<std::pair<std::string, std::string>> values = {},
             Severity severity = Severity::error);
    void add_at(std::string_view rule, std::string path, std::string message, LineColumn where,
                std::vector<std::pair<std::string, std::string>> values = {},
                Severity severity = Severity::error);
    std::string_view bytes() const { return bytes_; }
    // Unknown elements of a newer minor version are warnings, not errors.
    Severity unknown_severity = Severity::error;

private:
    std::string_view bytes_;
    std::string_view source_name_;
    std::vector<Finding>& out_;
};

// Numbers: exact parse of the whole text (surrounding blanks and a leading '+'
// allowed, as in xs:double), finite only.
std::optional<double> parse_double(std::string_view text);
std::optional<int> parse_int(std::string_view text);
// Shortest text that reads back to the same double (std::to_chars).
void append_double(std::string& out, double v);
void append_int(std::string& out, long long v);
std::string format_double(double v);

// Schema version "major.minor".
struct Version {
    int major = 0;
    int minor = 0;
};
std::optional<Version> parse_version(std::string_view text);

// What the reader records in SourceForm when a value carries no explicit
// source: the value's own attribute / member texts. The writers omit
// `source` exactly when it equals this, so read(write(x)) == x.
SourceForm implied_source(const Quantity& q);

}  // namespace pftgw::neutral::detail
