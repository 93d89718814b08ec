// See pipeline.hpp.
#include "gateway/cli/pipeline.hpp"

#include <algorithm>
#include <cerrno>
#include <cstring>

#include "adapters/hl7v2/ack_writer.hpp"
#include "adapters/neutral/neutral_io.hpp"
#include "gateway/core/quantity_table.hpp"

namespace fs = std::filesystem;

namespace pftgw::cli {
namespace {

void add_unique(std::vector<Finding>& into, std::vector<Finding>&& more) {
    for (auto& f : more) {
        const bool seen = std::any_of(into.begin(), into.end(), [&](const Finding& g) {
            return g.rule == f.rule && g.path == f.path && g.message == f.message;
        });
        if (!seen) into.push_back(std::move(f));
    }
}

std::size_t count_of(const std::string& bytes, std::string_view what) {
    std::size_t n = 0;
    for (auto pos = bytes.find(what); pos != std::string::npos; pos = bytes.find(what, pos + 1))
        ++n;
    return n;
}

}  // namespace

std::vector<std::string> find_inputs(const std::vector<std::string>& args, InputFormat from,
                                     std::vector<std::string>& missing) {
    std::vector<std::string> out;
    for (const auto& arg : args) {
        std::error_code ec;
        const fs::path p(arg);
        if (fs::is_directory(p, ec)) {
            std::vector<std::string> found;
            for (auto it = fs::recursive_directory_iterator(p, ec);
                 !ec && it != fs::recursive_directory_iterator(); it.increment(ec)) {
                if (it->is_regular_file(ec) && is_input_file(it->path(), from))
                    found.push_back(it->path());
            }
            std::sort(found.begin(), found.end());
            out.insert(out.end(), found.begin(), found.end());
        } else if (is_stdin(p) || fs::exists(p, ec)) {
            out.push_back(arg);
        } else {
            missing.push_back(arg);
        }
    }
    return out;
}

std::size_t count_documents(const fs::path& file, InputFormat from) {
    if (from == InputFormat::neutral && file.extension() != ".jsonl") return 1;
    if (is_stdin(file)) return 1;  // not known before it is read
    // Streamed in chunks: counting must not hold a large archive in memory.
    const std::string_view marker = from == InputFormat::hl7v2  ? std::string_view("MSH")
                                    : from == InputFormat::astm ? std::string_view("\rO|")
                                                                : std::string_view("\n");
    std::string buffer;
    std::size_t n = 0;
    std::string error;  // a file that cannot be read counts as one: reading it will say why
    (void)read_pieces(
        file,
        [&](std::string_view piece) {
            // Keep the marker's length minus one from the previous piece, so a
            // marker split over two pieces is counted once.
            const std::size_t keep = std::min(buffer.size(), marker.size() - 1);
            buffer.erase(0, buffer.size() - keep);
            buffer.append(piece);
            n += count_of(buffer, marker);
        },
        error, nullptr);
    switch (from) {
        case InputFormat::neutral:
        case InputFormat::csv:
            return n > 0 ? n - (from == InputFormat::csv ? 1 : 0) : 0;  // CSV: less the header
        case InputFormat::hl7v2:
        case InputFormat::astm:
            return std::max<std::size_t>(1, n);
    }
    return 1;
}

Processed process(ReadItem&& item, const ProcessOptions& options, const InputContext& input) {
    finish_reading(item, input);
    Processed out;
    out.source = std::move(item.source);
    std::optional<NeutralResult> read_result;
    if (item.read) {
        out.findings = std::move(item.findings);
        read_result = std::move(item.result);
    } else {
        auto read = neutral::read_any(item.bytes, out.source);
        out.findings = std::move(read.findings);
        read_result = std::move(read.result);
        // The reader's findings travel in the result like every other.
        if (read_result) add_unique(read_result->findings, std::vector<Finding>(out.findings));
    }
    if (!read_result) {
        if (item.hl7_message) out.reply = hl7v2::acknowledge(*item.hl7_message);
        return out;
    }
    NeutralResult result = std::move(*read_result);
    prepare_result(result, options, quantity_table());
    // What the gateway writes follows the current schema version.
    result.schema_version = "1." + std::to_string(neutral::kSchemaMinor);
    add_unique(out.findings, std::vector<Finding>(result.findings));
    if (item.hl7_message) {
        // The ACK lists the reader's findings and those normalize and validate added.
        const std::vector<Finding>& by_reader = item.hl7_message->findings;
        std::vector<Finding> later;
        for (const Finding& f : result.findings)
            if (std::find(by_reader.begin(), by_reader.end(), f) == by_reader.end())
                later.push_back(f);
        out.reply = hl7v2::acknowledge(*item.hl7_message, later);
    }
    out.result = std::move(result);
    return out;
}

}  // namespace pftgw::cli
