// pftgw convert: neutral documents to HL7 v2, FHIR or neutral files, one per result.
#include <fmt/core.h>

#include <filesystem>
#include <fstream>
#include <map>

#include "gateway/cli/commands.hpp"
#include "gateway/cli/formats.hpp"
#include "gateway/cli/pipeline.hpp"
#include "gateway/cli/policy_options.hpp"
#include "gateway/cli/report.hpp"
#include "gateway/core/identity.hpp"
#include "gateway/core/normalize.hpp"
#include "gateway/core/quantity_table.hpp"

namespace fs = std::filesystem;

namespace pftgw::cli {
namespace {

// DECISIONS.md: above this many results, outputs go into subfolders.
constexpr std::size_t kFlatFolderLimit = 10000;

struct ConvertOptions {
    std::string to;
    std::string units = "si";
    std::string out_dir;
    std::vector<std::string> inputs;
    WriterSettings writer;
    PolicyOptions policy;
    bool quiet = false;
};

// "<id>.hl7" for revision 1, "<id>.r2.hl7" for later revisions, so a
// correction never overwrites the message it corrects.
fs::path output_path(const ConvertOptions& o, const OutputFormat& f, const NeutralResult& r,
                     bool sharded) {
    std::string name = filesystem_safe(r.id);
    if (r.revision > 1) name += ".r" + std::to_string(r.revision);
    name += f.extension;
    fs::path dir(o.out_dir);
    if (sharded) dir /= sha256_hex(r.id).substr(0, 2);
    return dir / name;
}

bool write_file(const fs::path& path, const std::string& bytes, std::string& error) {
    std::error_code ec;
    fs::create_directories(path.parent_path(), ec);
    const fs::path tmp = path.string() + ".part";
    {
        std::ofstream out(tmp, std::ios::binary | std::ios::trunc);
        if (!out) {
            error = "cannot create " + tmp.string();
            return false;
        }
        out.write(bytes.data(), static_cast<std::streamsize>(bytes.size()));
        out.flush();
        if (!out) {
            error = "cannot write " + tmp.string() + " (disk full?)";
            return false;
        }
    }
    fs::rename(tmp, path, ec);  // a reader never sees half a file
    if (ec) {
        error = "cannot rename " + tmp.string() + ": " + ec.message();
        return false;
    }
    return true;
}

int run_convert(const ConvertOptions& o) {
    const OutputFormat* format = find_format(o.to);
    if (!format) {
        fmt::print(stderr, "pftgw convert: --to must be one of {}, not '{}'\n", format_names(),
                   o.to);
        return kExitUsage;
    }
    auto units = parse_unit_system(o.units);
    if (!units) {
        fmt::print(stderr, "pftgw convert: --units must be si or traditional, not '{}'\n", o.units);
        return kExitUsage;
    }
    WriterSettings settings = o.writer;
    settings.units = *units;
    ProcessOptions process_options;
    process_options.targets = {format->target};
    if (!parse_policy(o.policy, process_options.reference, "convert")) return kExitUsage;

    std::vector<std::string> missing;
    const auto files = find_inputs(o.inputs, missing);
    RunCounts counts;
    for (const auto& m : missing) {
        fmt::print(stderr, "unreadable  {}: no such file or folder\n", m);
        ++counts.unreadable;
    }
    std::size_t total = 0;
    for (const auto& f : files) total += count_documents(f);
    const bool sharded = total > kFlatFolderLimit;

    std::error_code ec;
    fs::create_directories(o.out_dir, ec);
    if (ec) {
        fmt::print(stderr, "pftgw convert: cannot create --out folder {}: {}\n", o.out_dir,
                   ec.message());
        return kExitUsage;
    }
    std::map<std::string, int> rule_counts;
    std::string bytes;
    bool write_failed = false;
    for (const auto& file : files) {
        std::string error;
        const bool ok = for_each_document(
            file,
            [&](InputItem&& item) {
                Processed p = process(std::move(item), process_options);
                ++counts.read;
                for (const auto& f : p.findings) ++rule_counts[f.rule];
                if (!p.result) {
                    ++counts.unreadable;
                    print_findings_text(stderr, p, "unreadable");
                    return;
                }
                if (p.blocked()) {
                    ++counts.blocked;
                    print_findings_text(stderr, p, "blocked");
                    return;
                }
                const NeutralResult rendered = render_units(*p.result, *units, quantity_table());
                bytes.clear();
                format->write(rendered, settings, bytes);
                std::string werr;
                if (!write_file(output_path(o, *format, rendered, sharded), bytes, werr)) {
                    fmt::print(stderr, "pftgw convert: {}\n", werr);
                    write_failed = true;
                    return;
                }
                ++counts.written;
                if (has_warnings(p.findings)) ++counts.with_warnings;
            },
            error);
        if (!ok) {
            ++counts.unreadable;
            fmt::print(stderr, "unreadable  {}: {}\n", file.string(), error);
        }
    }
    if (!o.quiet) print_summary(stdout, counts, rule_counts, o.out_dir);
    if (write_failed) return kExitUnreadable;
    return exit_code_for(counts);
}

}  // namespace

void add_convert_command(CLI::App& app, CommandContext& ctx) {
    auto opts = std::make_shared<ConvertOptions>();
    auto* sub = app.add_subcommand(
        "convert",
        "Convert neutral results (XML, JSON, JSON Lines) to HL7 v2, FHIR R4 or neutral files");
    sub->add_option("--to", opts->to, "Output format: " + format_names())->required();
    sub->add_option("--units", opts->units, "Unit system of the output values: si or traditional")
        ->capture_default_str();
    sub->add_option("--out", opts->out_dir, "Folder for the output files (created if missing)")
        ->required();
    sub->add_option("--sending-facility", opts->writer.sending_facility, "HL7 MSH-4");
    sub->add_option("--receiving-application", opts->writer.receiving_application, "HL7 MSH-5");
    sub->add_option("--receiving-facility", opts->writer.receiving_facility, "HL7 MSH-6");
    sub->add_flag("--quiet", opts->quiet, "Print no summary");
    add_policy_options(*sub, opts->policy);
    sub->add_option("inputs", opts->inputs, "Files or folders of neutral documents")->required();
    sub->callback([opts, &ctx] { ctx.exit_code = run_convert(*opts); });
}

}  // namespace pftgw::cli
