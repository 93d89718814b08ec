// Reading the inputs of `convert` and `check` in every dialect the gateway
// understands: neutral documents, HL7 v2 ORU from devices, ASTM E1394 records
// (raw, or E1381-framed as captured from a line), CSV archives. Device
// dialects map through a device profile (--profile).
#pragma once

#include <filesystem>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "gateway/core/device_profile.hpp"
#include "gateway/core/model.hpp"

namespace pftgw::hl7v2 {
struct ReadMessage;
}

namespace pftgw::cli {

enum class InputFormat { neutral, hl7v2, astm, csv };
std::optional<InputFormat> parse_input_format(std::string_view text);

// One document, or one result read from a device dialect. A document may
// still be bytes (read == false): reading it is left to finish_reading(), so
// that it can run on a worker thread while the next file is being read.
struct ReadItem {
    std::string source;  // "file.xml", "archive.jsonl:17", "export.csv:204", "run.astm#2"
    std::string bytes;   // not read yet: one document in `format` (a neutral file, one HL7 message)
    InputFormat format = InputFormat::neutral;
    bool read = false;                    // true: result/findings below come from a reader
    std::optional<NeutralResult> result;  // device readers: the result as received
    std::vector<Finding> findings;        // about this result or its input (file findings too)
    // HL7, when InputContext::keep_hl7_messages: the message as read, for its ACK.
    std::shared_ptr<const hl7v2::ReadMessage> hl7_message;
};

struct InputContext {
    InputFormat from = InputFormat::neutral;
    const DeviceProfile* profile = nullptr;  // required for astm and csv
    bool keep_hl7_messages = false;          // check: each HL7 message's ACK is shown
};

// Reads an HL7 message left as bytes by for_each_item() (any thread; the
// context is only read). Neutral documents and items already read are left
// as they are: process() reads neutral documents itself.
void finish_reading(ReadItem& item, const InputContext& context);

// Calls `fn` for every document or result in `file`, in file order. HL7
// messages are handed over as bytes (split, not parsed: see finish_reading). Returns false, with
// `error` set, when the file cannot be read at all.
bool for_each_item(const std::filesystem::path& file, const InputContext& context,
                   const std::function<void(ReadItem&&)>& fn, std::string& error);

// "-" names standard input; its results' sources read "stdin" ("stdin#2",
// "stdin:14"). Neutral documents there are JSON Lines when the first line that
// is not blank is a JSON object of its own, else one XML or JSON document.
inline constexpr std::string_view kStdinArgument = "-";
inline constexpr std::string_view kStdinSource = "stdin";
bool is_stdin(const std::filesystem::path& p);
std::string source_name(const std::filesystem::path& p);  // "stdin" for "-"

// Reads `file` (or standard input for "-") in pieces of 256 KiB, giving each
// to `piece`: every reader and the counting use it. False, with `error`, when
// it cannot be opened or a read fails (`read_any`, if given, says whether
// anything was read before that).
bool read_pieces(const std::filesystem::path& file,
                 const std::function<void(std::string_view)>& piece, std::string& error,
                 bool* read_any);

// Which files of a folder are inputs for `from`.
bool is_input_file(const std::filesystem::path& p, InputFormat from);

}  // namespace pftgw::cli
