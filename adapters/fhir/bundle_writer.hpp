// FHIR R4 writer: a normalized neutral result to one transaction Bundle.
// Design choices (identifiers, revisions, grouping) are described in the
// header comment of bundle_writer.cpp.
#pragma once

#include <string>

#include "gateway/core/model.hpp"
#include "gateway/core/quantity_table.hpp"

namespace pftgw::fhir {

struct BundleOptions {
    // Identifier system of the resources the gateway creates (per site).
    std::string identifier_system = "https://pftgw.example/fhir/identifier/result";
    // Identifier system of Device resources (value: the device id, else its serial).
    std::string device_identifier_system = "https://pftgw.example/fhir/identifier/device";
    std::string code_system_uri = std::string(kProjectCodeSystemUri);
    std::string equation_extension_url =
        "https://pftgw.example/fhir/StructureDefinition/reference-equation";
};

// Appends one transaction Bundle as JSON (streamed, not a DOM) to `out`.
void write_bundle_json(const NeutralResult& result, const BundleOptions& options,
                       const QuantityTable& table, std::string& out);

// The same Bundle as FHIR XML, elements in R4 order.
void write_bundle_xml(const NeutralResult& result, const BundleOptions& options,
                      const QuantityTable& table, std::string& out);

}  // namespace pftgw::fhir
