// The open schema's own forms: neutral XML and JSON, read and written losslessly.
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "gateway/core/model.hpp"

namespace pftgw::neutral {

inline constexpr std::string_view kNamespace = "https://pftgw.example/ns/result";
inline constexpr int kSchemaMajor = 1;
inline constexpr int kSchemaMinor = 2;  // 1.1: reference unit, trial tracer; 1.2: value comments

// What a reader hands back: a result (absent when the input could not be read
// as one) and findings about the input (unknown elements, bad values ...),
// each with a path, and line/column in the message where known.
struct ReadOutcome {
    std::optional<NeutralResult> result;
    std::vector<Finding> findings;
};

ReadOutcome read_xml(std::string_view bytes, std::string_view source_name);
ReadOutcome read_json(std::string_view bytes, std::string_view source_name);
// Picks XML or JSON by the first non-blank byte.
ReadOutcome read_any(std::string_view bytes, std::string_view source_name);

void write_xml(const NeutralResult& result, std::string& out);
void write_json(const NeutralResult& result, std::string& out);

}  // namespace pftgw::neutral
