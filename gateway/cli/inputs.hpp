// Reading the inputs of `convert` and `check` in every dialect the gateway
// understands: neutral documents, HL7 v2 ORU from devices, ASTM E1394 records
// (raw, or E1381-framed as captured from a line), CSV archives. Device
// dialects map through a device profile (--profile).
#pragma once

#include <filesystem>
#include <functional>
#include <optional>
#include <string>
#include <vector>

#include "gateway/core/device_profile.hpp"
#include "gateway/core/model.hpp"

namespace pftgw::cli {

enum class InputFormat { neutral, hl7v2, astm, csv };
std::optional<InputFormat> parse_input_format(std::string_view text);

// One document, or one result read from a device dialect.
struct ReadItem {
    std::string source;  // "file.xml", "archive.jsonl:17", "export.csv:204", "run.astm#2"
    std::string bytes;   // neutral: the document, not yet read
    bool read = false;   // true: result/findings below come from a device reader
    std::optional<NeutralResult> result;  // device readers: the result as received
    std::vector<Finding> findings;        // device readers: about this result or its input
};

struct InputContext {
    InputFormat from = InputFormat::neutral;
    const DeviceProfile* profile = nullptr;  // required for astm and csv
};

// Calls `fn` for every document or result in `file`. Returns false, with
// `error` set, when the file cannot be read at all.
bool for_each_item(const std::filesystem::path& file, const InputContext& context,
                   const std::function<void(ReadItem&&)>& fn, std::string& error);

// Which files of a folder are inputs for `from`.
bool is_input_file(const std::filesystem::path& p, InputFormat from);

}  // namespace pftgw::cli
