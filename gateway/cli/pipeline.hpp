// The conversion pipeline shared by `convert` and `check`: find the inputs,
// read each result, normalize, validate for the target. Plain functions on
// plain data; only input discovery and file reading touch the disk.
#pragma once

#include <filesystem>
#include <functional>
#include <optional>
#include <string>
#include <vector>

#include "gateway/core/model.hpp"
#include "gateway/core/prepare.hpp"

namespace pftgw::cli {

// One document to read: a file, or one line of a JSON Lines file.
struct InputItem {
    std::string source;  // "samples/lab/a.xml" or "archive.jsonl:17"
    std::string bytes;
};

// What became of one input.
struct Processed {
    std::string source;
    std::optional<NeutralResult> result;  // absent when nothing could be read
    std::vector<Finding> findings;        // reader + normalize + validate, in that order
    bool blocked() const { return !result || has_errors(findings); }
};

// Expands files and folders (recursively; .xml, .json, .jsonl; sorted) into
// a list of files. Missing paths are reported in `missing`.
std::vector<std::filesystem::path> find_inputs(const std::vector<std::string>& args,
                                               std::vector<std::string>& missing);

// Calls `fn` for every document in `file` (one for .xml/.json, one per line
// for .jsonl). Returns false, with `error` set, when the file cannot be read.
bool for_each_document(const std::filesystem::path& file,
                       const std::function<void(InputItem&&)>& fn, std::string& error);

// Counts documents without parsing them (lines of .jsonl, 1 otherwise).
std::size_t count_documents(const std::filesystem::path& file);

using ProcessOptions = PrepareOptions;

// Reads one document, then runs the core's prepare_result() on it.
Processed process(InputItem&& item, const ProcessOptions& options);

}  // namespace pftgw::cli
