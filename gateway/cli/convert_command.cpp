// pftgw convert: neutral documents to HL7 v2, FHIR or neutral files, one per result.
// Fit for archives: streams the inputs in bounded batches, uses every core
// (--jobs) with output names and order that do not depend on the job count,
// resumes (a second run skips what it already wrote), never stops on one bad
// record (it goes to rejects.jsonl with its findings) and ends with a summary
// on screen and in summary.json.
#include <fmt/core.h>
#include <unistd.h>

#include <atomic>
#include <charconv>
#include <chrono>
#include <filesystem>
#include <fstream>
#include <map>
#include <nlohmann/json.hpp>
#include <optional>
#include <thread>
#include <unordered_map>
#include <unordered_set>

#include "adapters/neutral/neutral_io.hpp"
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
// Documents held in memory at once: bounds memory whatever the archive size.
constexpr std::size_t kBatchDocuments = 512;
constexpr const char* kManifestName = ".pftgw-done";
constexpr const char* kRejectsName = "rejects.jsonl";
constexpr const char* kSummaryName = "summary.json";
constexpr auto kProgressInterval = std::chrono::milliseconds(200);
// Rejected results shown with their findings on standard error; the rest are
// in rejects.jsonl only, so an archive's thousands do not bury the summary.
constexpr std::size_t kRejectsOnScreen = 20;

struct ConvertOptions {
    std::string to;
    std::string units = "si";
    std::string out_dir;
    std::vector<std::string> inputs;
    WriterSettings writer;
    PolicyOptions policy;
    InputOptions input;
    unsigned jobs = 0;  // 0: every core
    bool quiet = false;
    bool dry_run = false;  // convert everything, write nothing
};

enum class Outcome { written, skipped, blocked, unreadable, failed };

// One input document on its way through a batch.
struct Work {
    ReadItem item;
    std::string key;  // resume key: options + input bytes
    Outcome outcome = Outcome::failed;
    Processed processed;
    std::string relative_path;  // of the output file, when written
    std::string bytes;          // the output, written by the main thread in input order
    std::string error;          // a write failure
    bool whole_file = false;    // a file that could not be read at all
};

// "<id>.hl7" for revision 1, "<id>.r2.hl7" for later revisions, so a
// correction never overwrites the message it corrects.
std::string output_name(const OutputFormat& f, const NeutralResult& r, bool sharded) {
    std::string name = filesystem_safe(r.id);
    if (r.revision > 1) name += ".r" + std::to_string(r.revision);
    name += f.extension;
    if (sharded) return sha256_hex(r.id).substr(0, 2) + "/" + name;
    return name;
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

// Everything that changes the bytes written, so a resumed run with other
// options converts again instead of skipping.
std::string options_signature(const ConvertOptions& o) {
    return fmt::format("pftgw 0.1.0|{}|{}|{}|{}|{}|{}|{}|{}|{}|{}", o.input.from, o.input.profile,
                       o.to, o.units, o.policy.reference, o.policy.spirometry_set,
                       o.policy.gli2012_group, o.writer.sending_facility,
                       o.writer.receiving_application, o.writer.receiving_facility);
}

// The manifest: a line "<key> <size> <path>" per file written. The last line
// of a path is the one its file on disk should match: it counts as done only
// while the file is there at that very size, so a file cut short (a stop
// mid-write, a power cut before the data reached the disk) is written again.
// Earlier lines of the same path are inputs a later one with the same result
// id replaced, in input order: done as long as the file is there. Lines
// "<key> <path>" of earlier versions check existence only.
std::unordered_set<std::string> load_manifest(const fs::path& out_dir) {
    struct Entry {
        std::string key;
        std::optional<std::uintmax_t> size;
        std::string path;
    };
    std::vector<Entry> entries;
    std::unordered_map<std::string, std::size_t> last_of_path;
    std::ifstream in(out_dir / kManifestName);
    std::string line;
    while (std::getline(in, line)) {
        const auto space = line.find(' ');
        if (space == std::string::npos) continue;
        std::string_view rest = std::string_view(line).substr(space + 1);
        Entry e;
        e.key = line.substr(0, space);
        const auto gap = rest.find(' ');
        if (gap != std::string_view::npos && gap > 0 &&
            rest.substr(0, gap).find_first_not_of("0123456789") == std::string_view::npos) {
            std::uintmax_t n = 0;
            const auto [end, err] = std::from_chars(rest.data(), rest.data() + gap, n);
            if (err != std::errc()) continue;  // a damaged line: convert that input again
            e.size = n;
            rest.remove_prefix(gap + 1);
        }
        e.path = std::string(rest);
        last_of_path[e.path] = entries.size();
        entries.push_back(std::move(e));
    }
    std::unordered_set<std::string> done;
    for (std::size_t i = 0; i < entries.size(); ++i) {
        const Entry& e = entries[i];
        std::error_code ec;
        const fs::path file = out_dir / e.path;
        if (!fs::exists(file, ec)) continue;
        const bool last = last_of_path[e.path] == i;
        if (last && e.size && fs::file_size(file, ec) != *e.size) continue;
        done.insert(e.key);
    }
    return done;
}

// What identifies an input for a resumed run: a neutral document's or an HL7
// message's bytes, or a result read from ASTM or CSV (written as neutral JSON).
std::string resume_material(const ReadItem& item) {
    if (!item.read) return item.bytes;  // a neutral document or an HL7 message, as received
    std::string out = item.source;
    if (item.result) neutral::write_json(*item.result, out);
    return out;
}

nlohmann::json reject_json(const Work& w) {
    nlohmann::json findings = nlohmann::json::array();
    for (const auto& f : w.processed.findings)
        if (f.severity != Severity::info) findings.push_back(finding_json(f));
    return {{"source", w.processed.source.empty() ? w.item.source : w.processed.source},
            {"id", w.processed.result ? w.processed.result->id : ""},
            {"outcome", w.outcome == Outcome::unreadable ? "unreadable" : "blocked"},
            {"findings", findings}};
}

class Converter {
public:
    Converter(const ConvertOptions& o, const OutputFormat& f, UnitSystem units, bool sharded,
              const InputContext& input, const std::string& profile_digest)
        : o_(o), format_(f), units_(units), sharded_(sharded), out_dir_(o.out_dir), input_(input) {
        settings_ = o.writer;
        settings_.units = units;
        process_.targets = {f.target};
        // The profile's content, not only its name: a changed mapping converts again.
        signature_ = options_signature(o) + "|" + profile_digest;
        if (!o.dry_run) {
            done_ = load_manifest(out_dir_);
            manifest_.open(out_dir_ / kManifestName, std::ios::app);
            rejects_.open(out_dir_ / kRejectsName, std::ios::trunc);
        }
        jobs_ = o.jobs ? o.jobs : std::max(1u, std::thread::hardware_concurrency());
    }

    bool set_policy() { return parse_policy(o_.policy, process_.reference, "convert"); }

    void add(ReadItem&& item) {
        Work w;
        w.item = std::move(item);
        batch_.push_back(std::move(w));
        if (batch_.size() >= kBatchDocuments) flush();
    }

    // Hands the batch to the workers and records the one before it.
    // --jobs N is the number of threads at work, the main one included:
    // N - 1 workers convert a batch (reading the HL7 messages, preparing,
    // rendering) while the main thread records the batch before it (files
    // written in input order) and reads the files of the next; then the main
    // thread joins in on what is left of the batch in flight. With N = 1 the
    // main thread converts every batch itself.
    void flush() {
        if (batch_.empty()) return;
        finish_inflight();
        std::vector<Work> done = std::move(inflight_);
        inflight_ = std::move(batch_);
        batch_.clear();
        batch_.reserve(kBatchDocuments);
        next_ = 0;
        const unsigned threads =
            std::min<unsigned>(jobs_ - 1, static_cast<unsigned>(inflight_.size()));
        for (unsigned t = 0; t < threads; ++t) workers_.emplace_back([this] { convert_some(); });
        for (Work& w : done) record(w);
    }

    // Everything read so far is converted and recorded.
    void drain() {
        flush();
        finish_inflight();
        for (Work& w : inflight_) record(w);
        inflight_.clear();
    }

    void note_unreadable_file(const std::string& source, const std::string& error) {
        drain();  // keep the input order in rejects.jsonl
        Work w;
        w.item.source = source;
        w.outcome = Outcome::unreadable;
        w.whole_file = true;
        w.processed.source = source;
        w.processed.findings.push_back(Finding{"read.unreadable", Severity::error, "", error, {}});
        record(w);
    }

    RunCounts counts;
    std::size_t skipped = 0;
    std::size_t total = 0;
    bool total_known = true;  // false when standard input is among the inputs
    bool write_failed = false;
    std::map<std::string, int> rule_counts;

    void finish(double seconds) {
        if (progress_shown_) std::fputs("\r\033[K", stderr);
        nlohmann::json top = nlohmann::json::array();
        for (const auto& [rule, n] : top_rules()) top.push_back({{"rule", rule}, {"count", n}});
        const nlohmann::json summary = {{"to", o_.to},
                                        {"units", o_.units},
                                        {"reference", o_.policy.reference},
                                        {"read", counts.read},
                                        {"written", counts.written},
                                        {"writtenWithWarnings", counts.with_warnings},
                                        {"skippedAlreadyWritten", skipped},
                                        {"blocked", counts.blocked},
                                        {"unreadable", counts.unreadable},
                                        {"topFindings", top},
                                        {"rejects", kRejectsName},
                                        {"caution", kCaution}};
        if (!o_.dry_run) std::ofstream(out_dir_ / kSummaryName) << safe_dump(summary, 2) << "\n";
        if (o_.quiet) return;
        print_summary(stdout, counts, rule_counts, o_.out_dir);
        if (skipped > 0)
            fmt::print("skipped {} already written by an earlier run with the same options\n",
                       skipped);
        if (o_.dry_run) {
            fmt::print("{:.1f} s, {} jobs; dry run: nothing written\n", seconds, jobs_);
            return;
        }
        fmt::print("{:.1f} s, {} jobs; summary.json and rejects.jsonl in {}\n", seconds, jobs_,
                   o_.out_dir);
    }

private:
    // Takes items of the batch in flight until none is left (any thread).
    void convert_some() {
        for (std::size_t i = next_++; i < inflight_.size(); i = next_++) convert_one(inflight_[i]);
    }

    // The main thread converts what the workers have not taken, then waits for them.
    void finish_inflight() {
        convert_some();
        for (auto& t : workers_) t.join();
        workers_.clear();
    }

    void convert_one(Work& w) {
        if (!o_.dry_run) w.key = sha256_hex(signature_ + "\x1f" + resume_material(w.item));
        if (!o_.dry_run && done_.count(w.key)) {
            w.outcome = Outcome::skipped;
            return;
        }
        w.processed = process(std::move(w.item), process_, input_);
        if (!w.processed.result) {
            w.outcome = Outcome::unreadable;
            return;
        }
        if (w.processed.blocked()) {
            w.outcome = Outcome::blocked;
            return;
        }
        // Rendered in place: what is recorded later needs the findings and the id only.
        NeutralResult& result = *w.processed.result;
        result = render_units(std::move(result), units_, quantity_table());
        format_.write(result, settings_, w.bytes);
        w.relative_path = output_name(format_, result, sharded_);
        w.outcome = Outcome::written;
        // Freed here, on the thread that built it, not later by the recording one.
        w.processed.result.reset();
    }

    void record(Work& w) {
        ++counts.read;
        // The summary ranks what needs a person: warnings and errors, not info.
        for (const auto& f : w.processed.findings)
            if (f.severity != Severity::info) ++rule_counts[f.rule];
        switch (w.outcome) {
            case Outcome::written:
                // Written here, in input order, so that two inputs with the same
                // result id end the same way whatever the number of jobs.
                if (!o_.dry_run && !write_file(out_dir_ / w.relative_path, w.bytes, w.error)) {
                    fmt::print(stderr, "pftgw convert: {}\n", w.error);
                    write_failed = true;
                    break;
                }
                ++counts.written;
                if (has_warnings(w.processed.findings)) ++counts.with_warnings;
                manifest_ << w.key << ' ' << w.bytes.size() << ' ' << w.relative_path << '\n';
                break;
            case Outcome::skipped:
                ++skipped;
                break;
            case Outcome::blocked:
            case Outcome::unreadable:
                if (w.outcome == Outcome::blocked)
                    ++counts.blocked;
                else
                    ++counts.unreadable;
                rejects_ << safe_dump(reject_json(w), -1) << '\n';
                // A file that could not be read at all is always shown; results
                // with their findings up to kRejectsOnScreen, then one line.
                if (!o_.quiet && (w.whole_file || ++rejects_shown_ <= kRejectsOnScreen)) {
                    if (progress_shown_) std::fputs("\r\033[K", stderr);
                    print_findings_text(stderr, w.processed,
                                        w.outcome == Outcome::blocked ? "blocked" : "unreadable");
                } else if (!o_.quiet && rejects_shown_ == kRejectsOnScreen + 1) {
                    if (progress_shown_) std::fputs("\r\033[K", stderr);
                    if (o_.dry_run)
                        fmt::print(stderr,
                                   "(more rejected results: only the first {} are shown; a dry "
                                   "run writes no rejects.jsonl, the summary counts them)\n",
                                   kRejectsOnScreen);
                    else
                        fmt::print(stderr,
                                   "(more rejected results: only the first {} are shown; every "
                                   "one is in {})\n",
                                   kRejectsOnScreen, (out_dir_ / kRejectsName).string());
                }
                break;
            case Outcome::failed:
                fmt::print(stderr, "pftgw convert: {}\n", w.error);
                write_failed = true;
                break;
        }
        show_progress();
    }

    // On a terminal only, never with --quiet, at most every kProgressInterval.
    // A bar while the count made at the start holds; standard input, or a
    // device file holding more results than counted, shows counts and rate only.
    void show_progress() {
        if (o_.quiet || !isatty(fileno(stderr))) return;
        const auto now = std::chrono::steady_clock::now();
        if (now - last_progress_ < kProgressInterval) return;
        last_progress_ = now;
        const double elapsed = std::chrono::duration<double>(now - start_).count();
        const double rate = elapsed > 0 ? static_cast<double>(counts.read) / elapsed : 0;
        const std::string tail =
            fmt::format("{:.0f}/s  written {} skipped {} rejected {}", rate, counts.written,
                        skipped, counts.blocked + counts.unreadable);
        if (!total_known || counts.read > total) {
            fmt::print(stderr, "\r\033[K{} read  {}", counts.read, tail);
            progress_shown_ = true;
            return;
        }
        const double left = rate > 0 ? static_cast<double>(total - counts.read) / rate : 0;
        const std::size_t width = 30;
        const std::size_t filled = total ? std::min(width, width * counts.read / total) : width;
        // The first second's rate says little (the first batch is still in flight).
        const std::string eta = elapsed < 1.0
                                    ? std::string("--:--")
                                    : fmt::format("{}:{:02d}", static_cast<int>(left) / 60,
                                                  static_cast<int>(left) % 60);
        fmt::print(stderr, "\r\033[K[{:<{}}] {}/{}  {} left  {}", std::string(filled, '#'), width,
                   counts.read, total, eta, tail);
        progress_shown_ = true;
    }

    std::vector<std::pair<std::string, int>> top_rules() const {
        std::vector<std::pair<std::string, int>> top(rule_counts.begin(), rule_counts.end());
        std::stable_sort(top.begin(), top.end(),
                         [](const auto& a, const auto& b) { return a.second > b.second; });
        if (top.size() > 10) top.resize(10);
        return top;
    }

    const ConvertOptions& o_;
    const OutputFormat& format_;
    UnitSystem units_;
    bool sharded_;
    fs::path out_dir_;
    const InputContext& input_;
    WriterSettings settings_;
    ProcessOptions process_;
    std::string signature_;
    std::unordered_set<std::string> done_;
    std::ofstream manifest_;
    std::ofstream rejects_;
    unsigned jobs_ = 1;
    std::vector<Work> batch_;
    std::vector<Work> inflight_;
    std::vector<std::thread> workers_;
    std::atomic<std::size_t> next_{0};
    bool progress_shown_ = false;
    std::size_t rejects_shown_ = 0;
    std::chrono::steady_clock::time_point start_ = std::chrono::steady_clock::now();
    std::chrono::steady_clock::time_point last_progress_{};
};

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
    if (o.out_dir.empty() && !o.dry_run) {
        fmt::print(stderr,
                   "pftgw convert: --out DIR is required (or --dry-run to write nothing)\n");
        return kExitUsage;
    }
    std::error_code ec;
    if (!o.dry_run) fs::create_directories(o.out_dir, ec);
    if (ec) {
        fmt::print(stderr, "pftgw convert: cannot create --out folder {}: {}\n", o.out_dir,
                   ec.message());
        return kExitUsage;
    }
    InputContext input;
    std::optional<DeviceProfile> profile;
    if (!make_input_context(o.input, input, profile, "convert")) return kExitUsage;
    const auto start = std::chrono::steady_clock::now();
    std::vector<std::string> missing;
    const auto files = find_inputs(o.inputs, input.from, missing);
    // Counting reads every file once more: done only for the progress bar, or
    // where the number of files alone does not settle the subfolder rule
    // (every input file but a CSV holds at least one result).
    const bool progress = !o.quiet && isatty(fileno(stderr));
    const bool many_files = input.from != InputFormat::csv && files.size() > kFlatFolderLimit;
    std::size_t total = 0;
    if (progress || !many_files)
        for (const auto& f : files) total += count_documents(f, input.from);
    const bool sharded = many_files || total > kFlatFolderLimit;
    std::string profile_digest;
    if (!o.input.profile.empty()) {
        std::ifstream in(o.input.profile, std::ios::binary);
        profile_digest = sha256_hex(std::string(std::istreambuf_iterator<char>(in), {}));
    }

    Converter c(o, *format, *units, sharded, input, profile_digest);
    if (!c.set_policy()) return kExitUsage;
    c.total = total;
    c.total_known =
        std::none_of(files.begin(), files.end(), [](const std::string& f) { return is_stdin(f); });
    for (const auto& m : missing) c.note_unreadable_file(m, "no such file or folder: " + m);
    for (const auto& file : files) {
        std::string error;
        if (!for_each_item(
                file, input, [&](ReadItem&& item) { c.add(std::move(item)); }, error)) {
            c.note_unreadable_file(file, error);
        }
    }
    c.drain();
    c.finish(std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count());
    if (c.write_failed) return kExitUnreadable;
    return exit_code_for(c.counts);
}

}  // namespace

void add_convert_command(CLI::App& app, CommandContext& ctx) {
    auto opts = std::make_shared<ConvertOptions>();
    auto* sub = app.add_subcommand(
        "convert",
        "Convert results (neutral, HL7 v2, ASTM, CSV) to HL7 v2, FHIR R4 or neutral files");
    sub->add_option("--to", opts->to, "Output format: " + format_names())->required();
    sub->add_option("--units", opts->units, "Unit system of the output values: si or traditional")
        ->capture_default_str();
    sub->add_option("--out", opts->out_dir, "Folder for the output files (created if missing)");
    sub->add_flag("--dry-run", opts->dry_run,
                  "Read, check and convert everything but write nothing (to time a run, or to see "
                  "what an archive would give)");
    sub->add_option("--sending-facility", opts->writer.sending_facility, "HL7 MSH-4");
    sub->add_option("--receiving-application", opts->writer.receiving_application, "HL7 MSH-5");
    sub->add_option("--receiving-facility", opts->writer.receiving_facility, "HL7 MSH-6");
    sub->add_option("--jobs", opts->jobs,
                    "Threads at work, the one reading included (default: every core); outputs do "
                    "not depend on it");
    sub->add_flag("--quiet", opts->quiet,
                  "Print no progress, rejects or summary (summary.json is still written)");
    add_input_options(*sub, opts->input);
    add_policy_options(*sub, opts->policy);
    sub->add_option("inputs", opts->inputs, "Files or folders to read (see --from)")->required();
    sub->callback([opts, &ctx] { ctx.exit_code = run_convert(*opts); });
}

}  // namespace pftgw::cli
