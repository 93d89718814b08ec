// Helpers shared by the neutral XML and JSON forms (see neutral_common.hpp).
#include "adapters/neutral/neutral_common.hpp"

#include <cmath>
#include <system_error>

namespace pftgw::neutral::detail {

namespace {
void render(const Path& p, std::string& out) {
    if (p.parent != nullptr) render(*p.parent, out);
    if (p.field.empty()) return;
    if (!out.empty()) out += '.';
    out += p.field;
    if (p.index >= 0) {
        out += '[';
        append_int(out, p.index);
        out += ']';
    } else if (!p.key.empty()) {
        out += '[';
        out += p.key;
        out += ']';
    }
}

std::string_view trim(std::string_view s) {
    while (!s.empty() &&
           (s.front() == ' ' || s.front() == '\t' || s.front() == '\n' || s.front() == '\r'))
        s.remove_prefix(1);
    while (!s.empty() &&
           (s.back() == ' ' || s.back() == '\t' || s.back() == '\n' || s.back() == '\r'))
        s.remove_suffix(1);
    return s;
}
}  // namespace

std::string Path::str() const {
    std::string out;
    render(*this, out);
    return out;
}

LineColumn line_column(std::string_view bytes, std::size_t offset) {
    if (offset > bytes.size()) offset = bytes.size();
    LineColumn lc{1, 1};
    for (std::size_t i = 0; i < offset; ++i) {
        if (bytes[i] == '\n') {
            ++lc.line;
            lc.column = 1;
        } else {
            ++lc.column;
        }
    }
    return lc;
}

void Findings::add(std::string_view rule, const Path& path, std::string message,
                   std::ptrdiff_t offset, std::vector<std::pair<std::string, std::string>> values,
                   Severity severity) {
    LineColumn where{};
    if (offset >= 0) where = line_column(bytes_, static_cast<std::size_t>(offset));
    add_at(rule, path.str(), std::move(message), where, std::move(values), severity);
}

void Findings::add_at(std::string_view rule, std::string path, std::string message,
                      LineColumn where, std::vector<std::pair<std::string, std::string>> values,
                      Severity severity) {
    Finding f;
    f.rule = std::string(rule);
    f.severity = severity;
    f.path = std::move(path);
    std::string prefix(source_name_);
    if (where.line > 0) {
        prefix += ':';
        prefix += std::to_string(where.line);
        prefix += ':';
        prefix += std::to_string(where.column);
        values.emplace_back("line", std::to_string(where.line));
        values.emplace_back("column", std::to_string(where.column));
    }
    f.message = prefix.empty() ? std::move(message) : prefix + ": " + message;
    f.values = std::move(values);
    out_.push_back(std::move(f));
}

std::optional<double> parse_double(std::string_view text) {
    text = trim(text);
    if (!text.empty() && text.front() == '+') text.remove_prefix(1);
    if (text.empty()) return std::nullopt;
    double v = 0;
    const auto [end, ec] = std::from_chars(text.data(), text.data() + text.size(), v);
    if (ec != std::errc() || end != text.data() + text.size() || !std::isfinite(v))
        return std::nullopt;
    return v;
}

std::optional<int> parse_int(std::string_view text) {
    text = trim(text);
    if (!text.empty() && text.front() == '+') text.remove_prefix(1);
    if (text.empty()) return std::nullopt;
    int v = 0;
    const auto [end, ec] = std::from_chars(text.data(), text.data() + text.size(), v);
    if (ec != std::errc() || end != text.data() + text.size()) return std::nullopt;
    return v;
}

void append_double(std::string& out, double v) {
    char buf[32];
    const auto [end, ec] = std::to_chars(buf, buf + sizeof buf, v);
    if (ec == std::errc()) out.append(buf, end);
}

void append_int(std::string& out, long long v) {
    char buf[24];
    const auto [end, ec] = std::to_chars(buf, buf + sizeof buf, v);
    if (ec == std::errc()) out.append(buf, end);
}

std::string format_double(double v) {
    std::string s;
    append_double(s, v);
    return s;
}

std::optional<Version> parse_version(std::string_view text) {
    const auto dot = text.find('.');
    if (dot == std::string_view::npos) return std::nullopt;
    const auto major = parse_int(text.substr(0, dot));
    const auto minor = parse_int(text.substr(dot + 1));
    if (!major || !minor || *major < 0 || *minor < 0) return std::nullopt;
    return Version{*major, *minor};
}

SourceForm implied_source(const Quantity& q) {
    SourceForm s;
    if (q.value) s.value_text = format_double(*q.value);
    s.unit_text = q.unit;
    s.condition_text = std::string(to_string(q.condition));
    return s;
}

}  // namespace pftgw::neutral::detail
