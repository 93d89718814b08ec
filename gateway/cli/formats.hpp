// The output formats `convert` writes: one table, one writer call each.
#pragma once

#include <optional>
#include <string>
#include <string_view>

#include "gateway/core/model.hpp"
#include "gateway/core/validate.hpp"

namespace pftgw::cli {

struct WriterSettings {
    std::string sending_facility;
    std::string receiving_application;
    std::string receiving_facility;
    UnitSystem units = UnitSystem::si;
};

struct OutputFormat {
    std::string_view name;       // --to value
    std::string_view extension;  // ".hl7"
    Target target;               // completeness rules that apply
    void (*write)(const NeutralResult&, const WriterSettings&, std::string&);
};

const OutputFormat* find_format(std::string_view name);
std::string format_names();  // "hl7v2|fhir-json|..."

}  // namespace pftgw::cli
