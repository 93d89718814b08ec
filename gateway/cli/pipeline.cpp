// See pipeline.hpp.
#include "gateway/cli/pipeline.hpp"

#include <algorithm>
#include <cerrno>
#include <cstring>
#include <fstream>
#include <sstream>

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

std::vector<fs::path> find_inputs(const std::vector<std::string>& args, InputFormat from,
                                  std::vector<std::string>& missing) {
    std::vector<fs::path> out;
    for (const auto& arg : args) {
        std::error_code ec;
        const fs::path p(arg);
        if (fs::is_directory(p, ec)) {
            std::vector<fs::path> found;
            for (auto it = fs::recursive_directory_iterator(p, ec);
                 !ec && it != fs::recursive_directory_iterator(); it.increment(ec)) {
                if (it->is_regular_file(ec) && is_input_file(it->path(), from))
                    found.push_back(it->path());
            }
            std::sort(found.begin(), found.end());
            out.insert(out.end(), found.begin(), found.end());
        } else if (fs::exists(p, ec)) {
            out.push_back(p);
        } else {
            missing.push_back(arg);
        }
    }
    return out;
}

std::size_t count_documents(const fs::path& file, InputFormat from) {
    if (from == InputFormat::neutral && file.extension() != ".jsonl") return 1;
    std::ifstream in(file, std::ios::binary);
    std::ostringstream ss;
    ss << in.rdbuf();
    const std::string bytes = std::move(ss).str();
    switch (from) {
        case InputFormat::neutral: {
            std::size_t n = 0;
            std::istringstream lines(bytes);
            std::string line;
            while (std::getline(lines, line))
                if (line.find_first_not_of(" \t\r") != std::string::npos) ++n;
            return n;
        }
        case InputFormat::csv: {
            const std::size_t lines = count_of(bytes, "\n");
            return lines > 0 ? lines - 1 : 0;  // less the header
        }
        case InputFormat::hl7v2:
            return std::max<std::size_t>(1, count_of(bytes, "MSH"));
        case InputFormat::astm:
            return std::max<std::size_t>(1, count_of(bytes, "\rO|"));
    }
    return 1;
}

Processed process(ReadItem&& item, const ProcessOptions& options) {
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
    if (!read_result) return out;
    NeutralResult result = std::move(*read_result);
    prepare_result(result, options, quantity_table());
    // What the gateway writes follows the current schema version.
    result.schema_version = "1." + std::to_string(neutral::kSchemaMinor);
    add_unique(out.findings, std::vector<Finding>(result.findings));
    out.result = std::move(result);
    return out;
}

}  // namespace pftgw::cli
