// How `convert` and `check` print findings and summaries.
#pragma once

#include <cstdio>
#include <map>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "gateway/cli/pipeline.hpp"

namespace pftgw::cli {

struct RunCounts {
    std::size_t read = 0;
    std::size_t written = 0;
    std::size_t with_warnings = 0;
    std::size_t blocked = 0;
    std::size_t unreadable = 0;
};

bool has_warnings(const std::vector<Finding>& findings);

// A finding in the JSON outputs (check --format json, rejects.jsonl): rule,
// severity, path, message and what was seen ("values": [{name, value}]).
nlohmann::json finding_json(const Finding& f);

// "blocked  samples/lab/x.xml (id ...)" then one indented line per finding.
void print_findings_text(std::FILE* out, const Processed& p, const char* outcome);

void print_summary(std::FILE* out, const RunCounts& counts,
                   const std::map<std::string, int>& rule_counts, const std::string& out_dir);

// DECISIONS.md exit status: 3 if an input could not be read at all, else 1 if
// any result was blocked, else 0.
int exit_code_for(const RunCounts& counts);

// JSON text of `j` (indent -1: one line). A finding may quote bytes a device
// sent that are not UTF-8 (a Latin-1 segment in a UTF-8 message): they become
// U+FFFD here rather than stop the run.
inline std::string safe_dump(const nlohmann::json& j, int indent) {
    return j.dump(indent, ' ', false, nlohmann::json::error_handler_t::replace);
}

// The caution every human-readable output carries.
inline constexpr const char* kCaution =
    "pftgw moves and checks results; it does not diagnose. Interpretation belongs to licensed "
    "staff and local rules.";

}  // namespace pftgw::cli
