// See report.hpp.
#include "gateway/cli/report.hpp"

#include <fmt/core.h>

#include <algorithm>

#include "gateway/cli/commands.hpp"

namespace pftgw::cli {

nlohmann::json finding_json(const Finding& f) {
    nlohmann::json values = nlohmann::json::array();
    for (const auto& [name, value] : f.values) values.push_back({{"name", name}, {"value", value}});
    return {{"rule", f.rule},
            {"severity", std::string(to_string(f.severity))},
            {"path", f.path},
            {"message", f.message},
            {"values", values}};
}

bool has_warnings(const std::vector<Finding>& findings) {
    return std::any_of(findings.begin(), findings.end(),
                       [](const Finding& f) { return f.severity == Severity::warning; });
}

void print_findings_text(std::FILE* out, const Processed& p, const char* outcome) {
    if (p.result)
        fmt::print(out, "{:<10}  {} (result {})\n", outcome, p.source, p.result->id);
    else
        fmt::print(out, "{:<10}  {}\n", outcome, p.source);
    for (const auto& f : p.findings) {
        fmt::print(out, "    {:<7}  {:<28}  {}\n", to_string(f.severity), f.rule, f.path);
        fmt::print(out, "             {}\n", f.message);
        // What was seen, as the reader kept it (the unmapped code's value and
        // unit, the HL7 error code): for whoever has to fix the export.
        if (f.severity == Severity::info || f.values.empty()) continue;
        std::string seen;
        for (const auto& [name, value] : f.values) {
            if (value.empty()) continue;
            if (!seen.empty()) seen += "; ";
            seen += name + "=" + value;
        }
        if (!seen.empty()) fmt::print(out, "             seen: {}\n", seen);
    }
}

void print_summary(std::FILE* out, const RunCounts& c,
                   const std::map<std::string, int>& rule_counts, const std::string& out_dir) {
    fmt::print(out, "\nread {}  written {} ({} with warnings)  blocked {}  unreadable {}\n", c.read,
               c.written, c.with_warnings, c.blocked, c.unreadable);
    if (!rule_counts.empty()) {
        std::vector<std::pair<std::string, int>> top(rule_counts.begin(), rule_counts.end());
        std::stable_sort(top.begin(), top.end(),
                         [](const auto& a, const auto& b) { return a.second > b.second; });
        if (top.size() > 10) top.resize(10);
        fmt::print(out, "most frequent findings:\n");
        for (const auto& [rule, n] : top) fmt::print(out, "  {:>6}  {}\n", n, rule);
    }
    if (!out_dir.empty()) fmt::print(out, "outputs in {}\n", out_dir);
    fmt::print(out, "{}\n", kCaution);
}

int exit_code_for(const RunCounts& c) {
    if (c.unreadable > 0) return kExitUnreadable;
    if (c.blocked > 0) return kExitFindings;
    return kExitOk;
}

}  // namespace pftgw::cli
