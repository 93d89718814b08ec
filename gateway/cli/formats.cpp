// The registry of output formats (STYLE.md: one table, no self-registration).
#include "gateway/cli/formats.hpp"

#include <array>

#include "adapters/fhir/bundle_writer.hpp"
#include "adapters/hl7v2/oru_writer.hpp"
#include "adapters/neutral/neutral_io.hpp"
#include "gateway/core/quantity_table.hpp"

namespace pftgw::cli {
namespace {

void write_hl7(const NeutralResult& r, const WriterSettings& s, std::string& out) {
    hl7v2::OruOptions o;
    o.sending_facility = s.sending_facility;
    o.receiving_application = s.receiving_application;
    o.receiving_facility = s.receiving_facility;
    o.units = s.units;
    // The target name is part of MSH-10 (DECISIONS.md): SI and traditional
    // renderings of one result are two messages with two control ids.
    o.target = std::string("hl7v2-") + std::string(to_string(s.units));
    hl7v2::write_oru_r01(r, o, quantity_table(), out);
}
void write_fhir_json(const NeutralResult& r, const WriterSettings&, std::string& out) {
    fhir::write_bundle_json(r, fhir::BundleOptions{}, quantity_table(), out);
}
void write_fhir_xml(const NeutralResult& r, const WriterSettings&, std::string& out) {
    fhir::write_bundle_xml(r, fhir::BundleOptions{}, quantity_table(), out);
}
void write_neutral_xml(const NeutralResult& r, const WriterSettings&, std::string& out) {
    neutral::write_xml(r, out);
}
void write_neutral_json(const NeutralResult& r, const WriterSettings&, std::string& out) {
    neutral::write_json(r, out);
}

constexpr std::array<OutputFormat, 5> kFormats{{
    {"hl7v2", ".hl7", Target::hl7v2, &write_hl7},
    {"fhir-json", ".json", Target::fhir, &write_fhir_json},
    {"fhir-xml", ".xml", Target::fhir, &write_fhir_xml},
    {"neutral-xml", ".xml", Target::neutral, &write_neutral_xml},
    {"neutral-json", ".json", Target::neutral, &write_neutral_json},
}};

}  // namespace

const OutputFormat* find_format(std::string_view name) {
    for (const auto& f : kFormats)
        if (f.name == name) return &f;
    return nullptr;
}

std::string format_names() {
    std::string out;
    for (const auto& f : kFormats) {
        if (!out.empty()) out += '|';
        out += f.name;
    }
    return out;
}

}  // namespace pftgw::cli
