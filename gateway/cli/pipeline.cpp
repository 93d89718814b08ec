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

bool is_input_file(const fs::path& p) {
    const auto ext = p.extension().string();
    return ext == ".xml" || ext == ".json" || ext == ".jsonl";
}

bool read_file(const fs::path& file, std::string& out, std::string& error) {
    std::ifstream in(file, std::ios::binary);
    if (!in) {
        error = "cannot open " + file.string() + ": " + std::strerror(errno);
        return false;
    }
    std::ostringstream ss;
    ss << in.rdbuf();
    if (in.bad()) {
        error = "cannot read " + file.string();
        return false;
    }
    out = std::move(ss).str();
    return true;
}

void add_unique(std::vector<Finding>& into, std::vector<Finding>&& more) {
    for (auto& f : more) {
        const bool seen = std::any_of(into.begin(), into.end(), [&](const Finding& g) {
            return g.rule == f.rule && g.path == f.path;
        });
        if (!seen) into.push_back(std::move(f));
    }
}

}  // namespace

std::vector<fs::path> find_inputs(const std::vector<std::string>& args,
                                  std::vector<std::string>& missing) {
    std::vector<fs::path> out;
    for (const auto& arg : args) {
        std::error_code ec;
        const fs::path p(arg);
        if (fs::is_directory(p, ec)) {
            std::vector<fs::path> found;
            for (auto it = fs::recursive_directory_iterator(p, ec);
                 !ec && it != fs::recursive_directory_iterator(); it.increment(ec)) {
                if (it->is_regular_file(ec) && is_input_file(it->path()))
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

bool for_each_document(const fs::path& file, const std::function<void(InputItem&&)>& fn,
                       std::string& error) {
    std::string bytes;
    if (!read_file(file, bytes, error)) return false;
    if (file.extension() != ".jsonl") {
        fn(InputItem{file.string(), std::move(bytes)});
        return true;
    }
    std::size_t pos = 0;
    int line_no = 0;
    while (pos < bytes.size()) {
        auto end = bytes.find('\n', pos);
        if (end == std::string::npos) end = bytes.size();
        ++line_no;
        std::string line = bytes.substr(pos, end - pos);
        pos = end + 1;
        if (line.find_first_not_of(" \t\r") == std::string::npos) continue;
        fn(InputItem{file.string() + ":" + std::to_string(line_no), std::move(line)});
    }
    return true;
}

std::size_t count_documents(const fs::path& file) {
    if (file.extension() != ".jsonl") return 1;
    std::ifstream in(file, std::ios::binary);
    std::size_t n = 0;
    std::string line;
    while (std::getline(in, line))
        if (line.find_first_not_of(" \t\r") != std::string::npos) ++n;
    return n;
}

Processed process(InputItem&& item, const ProcessOptions& options) {
    Processed out;
    out.source = std::move(item.source);
    auto read = neutral::read_any(item.bytes, out.source);
    out.findings = std::move(read.findings);
    if (!read.result) return out;
    NeutralResult result = std::move(*read.result);
    prepare_result(result, options, quantity_table());
    // What the gateway writes follows the current schema version.
    result.schema_version = "1." + std::to_string(neutral::kSchemaMinor);
    add_unique(out.findings, std::vector<Finding>(result.findings));
    out.result = std::move(result);
    return out;
}

}  // namespace pftgw::cli
