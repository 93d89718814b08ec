// The conversion pipeline shared by `convert` and `check`: find the inputs,
// read each result (inputs.hpp), run the core's prepare_result on it. Plain
// functions on plain data; only input discovery and reading touch the disk.
#pragma once

#include <filesystem>
#include <functional>
#include <optional>
#include <string>
#include <vector>

#include "gateway/cli/inputs.hpp"
#include "gateway/core/model.hpp"
#include "gateway/core/prepare.hpp"

namespace pftgw::cli {

// What became of one input.
struct Processed {
    std::string source;
    std::optional<NeutralResult> result;  // absent when nothing could be read
    std::vector<Finding> findings;        // reader + normalize + validate, in that order
    // HL7 input read with InputContext::keep_hl7_messages: the ACK the gateway
    // answers this message with (segments end in CR); empty when the MSH was unreadable.
    std::string reply;
    bool blocked() const { return !result || has_errors(findings); }
};

// Expands files and folders (recursively, the files of `from`, sorted) into
// a list of files. Missing paths are reported in `missing`.
// Plain strings, not paths: a path keeps its parsed components, which adds up
// over a folder of a million exports.
std::vector<std::string> find_inputs(const std::vector<std::string>& args, InputFormat from,
                                     std::vector<std::string>& missing);

// Counts results without parsing them (an estimate for device dialects: for
// the progress bar and the subfolder rule).
std::size_t count_documents(const std::filesystem::path& file, InputFormat from);

using ProcessOptions = PrepareOptions;

// Reads one document (when not read yet: finish_reading(), or the neutral
// reader), then runs prepare_result() on it. Safe on any thread.
Processed process(ReadItem&& item, const ProcessOptions& options, const InputContext& input);

}  // namespace pftgw::cli
