// pftgw check: every finding of every input, as text, JSON or JUnit XML.
// A device maker runs it over an export; exit 0 only when no result has an error.
#include <fmt/core.h>

#include <nlohmann/json.hpp>
#include <pugixml.hpp>
#include <sstream>

#include "gateway/cli/commands.hpp"
#include "gateway/cli/pipeline.hpp"
#include "gateway/cli/policy_options.hpp"
#include "gateway/cli/report.hpp"

namespace pftgw::cli {
namespace {

struct CheckOptions {
    std::string format = "text";
    std::string target = "all";
    std::vector<std::string> inputs;
    PolicyOptions policy;
    InputOptions input;
};

std::size_t count_severity(const std::vector<Finding>& fs, Severity s) {
    return static_cast<std::size_t>(
        std::count_if(fs.begin(), fs.end(), [s](const Finding& f) { return f.severity == s; }));
}

// The ACK an HL7 message gets, after its findings: its segments but the MSH,
// one a line ("reply    MSA|AE|SPX3-004801").
void print_reply_text(const std::string& reply) {
    std::size_t start = 0;
    bool first = true;
    while (start < reply.size()) {
        std::size_t end = reply.find('\r', start);
        if (end == std::string::npos) end = reply.size();
        const std::string_view segment(reply.data() + start, end - start);
        if (!segment.empty() && segment.substr(0, 3) != "MSH") {
            fmt::print("    {:<7}  {}\n", first ? "reply" : "", segment);
            first = false;
        }
        start = end + 1;
    }
}

const char* outcome_of(const Processed& p) {
    return !p.result                  ? "unreadable"
           : p.blocked()              ? "error"
           : has_warnings(p.findings) ? "warnings"
                                      : "ok";
}

// Text and JSON are printed result by result, as they are checked: memory
// does not grow with an archive. JUnit's counts come before its testcases, so
// the testcases are kept as rendered text until the end (about a kilobyte a
// result).
class Report {
public:
    explicit Report(std::string format) : format_(std::move(format)) {
        if (format_ == "json") fmt::print("{{\n  \"results\": [");
    }

    void add(Processed&& p) {
        if (format_ == "text") {
            print_findings_text(stdout, p, outcome_of(p));
            print_reply_text(p.reply);
        } else if (format_ == "json") {
            print_json(p);
        } else {
            add_junit(p);
        }
    }

    void finish(const RunCounts& c) {
        if (format_ == "json") {
            const nlohmann::json tail = {{"checked", c.read},
                                         {"withErrors", c.blocked},
                                         {"unreadable", c.unreadable},
                                         {"caution", kCaution}};
            fmt::print("{}],\n", first_ ? "" : "\n  ");
            const std::string body = safe_dump(tail, 2);  // "{\n  ...\n}": its members only
            fmt::print("{}\n", std::string_view(body).substr(2));
        } else if (format_ == "junit") {
            print_junit(c);
        } else {
            fmt::print("\nchecked {}  without errors {}  with errors {}  unreadable {}\n", c.read,
                       c.read - c.blocked - c.unreadable, c.blocked, c.unreadable);
            fmt::print(
                "severities: error blocks delivery; warning travels with the result; info is "
                "shown here only\n");
            fmt::print("{}\n", kCaution);
        }
    }

private:
    void print_json(const Processed& p) {
        nlohmann::json findings = nlohmann::json::array();
        for (const auto& f : p.findings) findings.push_back(finding_json(f));
        nlohmann::json r = {{"source", p.source},
                            {"id", p.result ? p.result->id : ""},
                            {"readable", p.result.has_value()},
                            {"errors", count_severity(p.findings, Severity::error)},
                            {"warnings", count_severity(p.findings, Severity::warning)},
                            {"findings", findings}};
        if (!p.reply.empty()) r["reply"] = p.reply;  // the ACK, segments ending in CR
        // Indented as one element of the results array.
        std::string text = safe_dump(r, 2);
        std::string indented = "\n    ";
        for (const char ch : text) {
            indented += ch;
            if (ch == '\n') indented += "    ";
        }
        fmt::print("{}{}", first_ ? "" : ",", indented);
        first_ = false;
    }

    void add_junit(const Processed& p);
    void print_junit(const RunCounts& c) const;

    std::string format_;
    bool first_ = true;
    std::ostringstream junit_cases_;  // rendered testcases: the counts go before them
    std::size_t junit_failures_ = 0;
};

// JUnit XML in the common Ant/Surefire form: one testcase per result, a
// <failure> per error finding, <error> for an unreadable input, warnings in <system-out>.
void Report::add_junit(const Processed& p) {
    pugi::xml_document scratch;
    auto tc = scratch.append_child("testcase");
    tc.append_attribute("classname") = p.source.c_str();
    tc.append_attribute("name") = (p.result ? p.result->id : p.source).c_str();
    tc.append_attribute("time") = "0";
    std::string warnings;
    for (const auto& f : p.findings) {
        const std::string line = f.rule + " at " + f.path + ": " + f.message;
        if (f.severity == Severity::error) {
            auto el = tc.append_child(p.result ? "failure" : "error");
            el.append_attribute("message") = line.c_str();
            el.append_attribute("type") = f.rule.c_str();
            el.text() = line.c_str();
        } else {
            warnings += std::string(to_string(f.severity)) + " " + line + "\n";
        }
    }
    if (p.result && has_errors(p.findings)) ++junit_failures_;
    if (!warnings.empty()) tc.append_child("system-out").text() = warnings.c_str();
    tc.print(junit_cases_, "  ", pugi::format_default, pugi::encoding_utf8, 2);
}

void Report::print_junit(const RunCounts& c) const {
    const auto counts = fmt::format(R"(tests="{}" failures="{}" errors="{}")", c.read,
                                    junit_failures_, c.unreadable);
    fmt::print("<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n");
    fmt::print("<testsuites name=\"pftgw check\" {}>\n", counts);
    fmt::print("  <testsuite name=\"pftgw check\" {} skipped=\"0\" time=\"0\">\n", counts);
    fmt::print("{}", junit_cases_.str());
    fmt::print("  </testsuite>\n</testsuites>\n");
}

int run_check(const CheckOptions& o) {
    ProcessOptions process_options;
    if (!parse_policy(o.policy, process_options.reference, "check")) return kExitUsage;
    std::vector<Target>& targets = process_options.targets;
    if (o.target == "all")
        targets = {Target::neutral, Target::hl7v2, Target::fhir};
    else if (o.target == "neutral")
        targets = {Target::neutral};
    else if (o.target == "hl7v2")
        targets = {Target::hl7v2};
    else if (o.target == "fhir")
        targets = {Target::fhir};
    else {
        fmt::print(stderr, "pftgw check: --target must be all, neutral, hl7v2 or fhir, not '{}'\n",
                   o.target);
        return kExitUsage;
    }
    if (o.format != "text" && o.format != "json" && o.format != "junit") {
        fmt::print(stderr, "pftgw check: --format must be text, json or junit, not '{}'\n",
                   o.format);
        return kExitUsage;
    }
    std::vector<std::string> missing;
    InputContext input;
    std::optional<DeviceProfile> profile;
    if (!make_input_context(o.input, input, profile, "check")) return kExitUsage;
    // A device maker sees the ACK or NAK each HL7 message would get.
    input.keep_hl7_messages = input.from == InputFormat::hl7v2;
    const auto files = find_inputs(o.inputs, input.from, missing);
    Report report(o.format);
    RunCounts counts;
    auto unreadable = [&](std::string source, std::string message) {
        Processed p;
        p.source = std::move(source);
        p.findings.push_back(
            Finding{"read.unreadable", Severity::error, "", std::move(message), {}});
        report.add(std::move(p));
        ++counts.read;
        ++counts.unreadable;
    };
    for (const auto& m : missing) unreadable(m, "no such file or folder: " + m);
    for (const auto& file : files) {
        std::string error;
        const bool ok = for_each_item(
            file, input,
            [&](ReadItem&& item) {
                Processed p = process(std::move(item), process_options, input);
                ++counts.read;
                if (!p.result)
                    ++counts.unreadable;
                else if (p.blocked())
                    ++counts.blocked;
                report.add(std::move(p));
            },
            error);
        if (!ok) unreadable(file, error);
    }
    report.finish(counts);
    return exit_code_for(counts);
}

}  // namespace

void add_check_command(CLI::App& app, CommandContext& ctx) {
    auto opts = std::make_shared<CheckOptions>();
    auto* sub = app.add_subcommand(
        "check",
        "Check results (neutral, HL7 v2, ASTM, CSV) against the open schema and the trade's rules");
    sub->add_option("--format", opts->format, "Output: text, json or junit")->capture_default_str();
    sub->add_option("--target", opts->target, "Completeness rules of: all, neutral, hl7v2 or fhir")
        ->capture_default_str();
    add_input_options(*sub, opts->input);
    add_policy_options(*sub, opts->policy);
    sub->add_option("inputs", opts->inputs, "Files or folders to read (see --from)")->required();
    sub->callback([opts, &ctx] { ctx.exit_code = run_check(*opts); });
}

}  // namespace pftgw::cli
