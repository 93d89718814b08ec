// Stable identifiers: the result id, HL7 MSH-10 and FHIR identifier values.
#pragma once

#include <array>
#include <cstdint>
#include <string>
#include <string_view>

#include "gateway/core/model.hpp"

namespace pftgw {

// SHA-256 (FIPS 180-4) of bytes.
std::array<std::uint8_t, 32> sha256(std::string_view bytes);
std::string sha256_hex(std::string_view bytes);

// RFC 4648 base32 alphabet, no padding, upper case.
std::string base32(const std::uint8_t* data, std::size_t size);

// The stable result identifier (SCHEMA-NOTES.md, "Identity"): the document's
// own id when it has one; else from device identity and the device's own
// session number; else from a content hash of the normalized result.
// Filesystem-safe: [A-Za-z0-9._-], at most 64 characters.
std::string result_identifier(const NeutralResult& result);

// MSH-10: from (result id, revision, target); 20 characters (HL7 2.5.1 ST length).
std::string hl7_control_id(std::string_view result_id, int revision, std::string_view target);

// A stable id for a resource inside a result ("obs-FEV1", "report", ...),
// used as the FHIR identifier value: result id + "-" + part.
std::string part_identifier(std::string_view result_id, std::string_view part);

// Makes any string filesystem-safe (for output file names).
std::string filesystem_safe(std::string_view text);

}  // namespace pftgw
