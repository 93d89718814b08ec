// See inputs.hpp.
#include "gateway/cli/inputs.hpp"

#include <fstream>
#include <sstream>

#include "adapters/astm/link_receiver.hpp"
#include "adapters/astm/record_reader.hpp"
#include "adapters/csv/csv_reader.hpp"
#include "adapters/hl7v2/oru_reader.hpp"
#include "gateway/cli/local_time.hpp"

namespace fs = std::filesystem;

namespace pftgw::cli {
namespace {

constexpr std::size_t kCsvChunkBytes = 64 * 1024;  // memory does not grow with the file

bool read_whole(const fs::path& file, std::string& out, std::string& error) {
    std::ifstream in(file, std::ios::binary);
    if (!in) {
        error = "cannot open " + file.string();
        return false;
    }
    std::ostringstream ss;
    ss << in.rdbuf();
    out = std::move(ss).str();
    return true;
}

std::optional<int> offset_of(const std::string& zone, const LocalDateTime& local) {
    return resolve_utc_offset(zone, local);
}

// File-level findings go with the first item, or alone when nothing was read.
void emit_all(std::vector<ReadItem>&& items, std::vector<Finding>&& file_findings,
              const std::string& source, const std::function<void(ReadItem&&)>& fn) {
    if (items.empty()) {
        ReadItem lone;
        lone.source = source;
        lone.read = true;
        lone.findings = std::move(file_findings);
        if (lone.findings.empty())
            lone.findings.push_back(Finding{"read.empty",
                                            Severity::error,
                                            "",
                                            source + ": no result could be read from this input",
                                            {}});
        fn(std::move(lone));
        return;
    }
    items.front().findings.insert(items.front().findings.begin(), file_findings.begin(),
                                  file_findings.end());
    for (auto& item : items) fn(std::move(item));
}

void read_hl7_file(const std::string& bytes, const std::string& source, const InputContext& c,
                   const std::function<void(ReadItem&&)>& fn) {
    hl7v2::Hl7ReadOptions options;
    options.profile = c.profile;
    options.resolve_offset = &offset_of;
    auto outcome = hl7v2::read_hl7(bytes, options);
    std::vector<ReadItem> items;
    for (std::size_t i = 0; i < outcome.messages.size(); ++i) {
        auto& m = outcome.messages[i];
        ReadItem item;
        item.source = source + "#" + std::to_string(i + 1);
        item.read = true;
        item.result = std::move(m.result);
        if (item.result) {
            item.findings =
                item.result->findings;  // the reader's findings travel in the result too
        } else {
            item.findings = std::move(m.findings);
        }
        items.push_back(std::move(item));
    }
    emit_all(std::move(items), std::move(outcome.findings), source, fn);
}

void read_astm_file(const std::string& bytes, const std::string& source, const InputContext& c,
                    const std::function<void(ReadItem&&)>& fn) {
    std::vector<std::string> messages;
    std::vector<Finding> file_findings;
    const bool framed =
        bytes.find('\x05') != std::string::npos || bytes.find('\x02') != std::string::npos;
    if (framed) {
        // A capture of the line: the E1381 receiver takes the frames apart,
        // exactly as it would on a serial port (checksums, frame numbers).
        astm::LinkReceiver receiver;
        auto actions = receiver.feed(bytes, 0);
        auto end = receiver.reset();
        messages = std::move(actions.messages);
        for (const auto& d : actions.discards)
            file_findings.push_back(Finding{"astm.message-discarded",
                                            Severity::error,
                                            "",
                                            source + ": a partial message was dropped (" +
                                                std::string(astm::to_string(d.reason)) + ")",
                                            {}});
        for (const auto& d : end.discards)
            file_findings.push_back(Finding{"astm.message-discarded",
                                            Severity::error,
                                            "",
                                            source + ": the capture ends inside a message (" +
                                                std::string(astm::to_string(d.reason)) + ")",
                                            {}});
        for (const auto& e : actions.frame_errors)
            file_findings.push_back(
                Finding{"astm.frame-refused",
                        Severity::warning,
                        "",
                        source + ": a frame was refused and would be NAKed: " + e.message,
                        {}});
    } else {
        messages.push_back(bytes);
    }
    std::vector<ReadItem> items;
    int n = 0;
    for (const auto& text : messages) {
        auto outcome = astm::read_e1394(text, *c.profile, &offset_of, source);
        file_findings.insert(file_findings.end(), outcome.findings.begin(), outcome.findings.end());
        for (auto& r : outcome.results) {
            ReadItem item;
            item.source = source + "#" + std::to_string(++n);
            item.read = true;
            item.findings = r.findings;
            item.result = std::move(r);
            items.push_back(std::move(item));
        }
    }
    emit_all(std::move(items), std::move(file_findings), source, fn);
}

bool read_csv_file(const fs::path& file, const InputContext& c,
                   const std::function<void(ReadItem&&)>& fn, std::string& error) {
    std::ifstream in(file, std::ios::binary);
    if (!in) {
        error = "cannot open " + file.string();
        return false;
    }
    csv::CsvReader reader(*c.profile, &offset_of, file.string());
    const csv::Emit emit = [&](csv::CsvRecord&& rec) {
        ReadItem item;
        item.source = std::move(rec.source);
        item.read = true;
        item.findings = std::move(rec.findings);
        item.result = std::move(rec.result);
        if (item.result)
            item.result->findings.insert(item.result->findings.end(), item.findings.begin(),
                                         item.findings.end());
        fn(std::move(item));
    };
    std::string chunk(kCsvChunkBytes, '\0');
    while (in) {
        in.read(chunk.data(), static_cast<std::streamsize>(chunk.size()));
        reader.feed(std::string_view(chunk.data(), static_cast<std::size_t>(in.gcount())), emit);
    }
    reader.finish(emit);
    return true;
}

}  // namespace

std::optional<InputFormat> parse_input_format(std::string_view t) {
    if (t == "neutral") return InputFormat::neutral;
    if (t == "hl7v2") return InputFormat::hl7v2;
    if (t == "astm") return InputFormat::astm;
    if (t == "csv") return InputFormat::csv;
    return std::nullopt;
}

bool is_input_file(const fs::path& p, InputFormat from) {
    const auto ext = p.extension().string();
    switch (from) {
        case InputFormat::neutral:
            return ext == ".xml" || ext == ".json" || ext == ".jsonl";
        case InputFormat::hl7v2:
            return ext == ".hl7" || ext == ".txt";
        case InputFormat::astm:
            return ext == ".astm" || ext == ".txt";
        case InputFormat::csv:
            return ext == ".csv" || ext == ".txt";
    }
    return false;
}

bool for_each_item(const fs::path& file, const InputContext& c,
                   const std::function<void(ReadItem&&)>& fn, std::string& error) {
    if (c.from == InputFormat::csv) return read_csv_file(file, c, fn, error);
    const std::string source = file.string();
    if (c.from == InputFormat::neutral && file.extension() == ".jsonl") {
        // Line by line: a JSON Lines archive is never held in memory whole.
        std::ifstream in(file, std::ios::binary);
        if (!in) {
            error = "cannot open " + source;
            return false;
        }
        std::string line;
        int line_no = 0;
        while (std::getline(in, line)) {
            ++line_no;
            if (line.find_first_not_of(" \t\r") == std::string::npos) continue;
            ReadItem item;
            item.source = source + ":" + std::to_string(line_no);
            item.bytes = std::move(line);
            fn(std::move(item));
        }
        return true;
    }
    std::string bytes;
    if (!read_whole(file, bytes, error)) return false;
    switch (c.from) {
        case InputFormat::neutral: {
            ReadItem item;
            item.source = source;
            item.bytes = std::move(bytes);
            fn(std::move(item));
            return true;
        }
        case InputFormat::hl7v2:
            read_hl7_file(bytes, source, c, fn);
            return true;
        case InputFormat::astm:
            read_astm_file(bytes, source, c, fn);
            return true;
        case InputFormat::csv:
            break;
    }
    return true;
}

}  // namespace pftgw::cli
