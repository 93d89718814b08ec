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

// The stable result identifier (SCHEMA-NOTES.md, "Identity"), first that applies:
//  1. the document's own id;
//  2. "<device.id>-<device_session_number>" when both are non-empty;
//  3. "R" + the first 25 base32 characters of SHA-256 over a canonical text
//     of the normalized result (26 characters). The text (identity.cpp,
//     recipe "pftgw-content-1") holds, in model order, each field as
//     "name:byte-length:value\n": every subject identifier (system, value,
//     type), birth date, sex at birth, device id and serial, session time
//     (ISO 8601 with its offset), then per test its type and time and per
//     reported value its kind, value (shortest round-trip text of the double,
//     std::to_chars) or absent reason, unit and condition. Findings, names,
//     order numbers, trials and extensions are not part of it, so a re-read
//     of the same session gets the same id whatever findings it raised.
// Ids 1 and 2 are made filesystem-safe: bytes outside [A-Za-z0-9._-] become
// '_' and a leading '.' becomes '_'. A text that had to be rewritten, or is
// longer than 64 characters, gets "-" + 8 base32 characters of SHA-256 of the
// original text (cut first to 55 characters when it would not fit), so two
// different ids stay different. Always [A-Za-z0-9._-], at most 64 characters.
std::string result_identifier(const NeutralResult& result);

// MSH-10: the first 20 base32 characters of SHA-256 of
// result_id + "\x1f" + decimal revision + "\x1f" + target (DECISIONS.md:
// at most 20 characters, same revision and target always the same id).
std::string hl7_control_id(std::string_view result_id, int revision, std::string_view target);

// A stable id for a resource inside a result ("obs-FEV1", "report", ...),
// used as the FHIR identifier value: result id + "-" + part.
std::string part_identifier(std::string_view result_id, std::string_view part);

// Makes any string filesystem-safe (for output file names): the same byte
// replacement as above; longer than 64 characters is cut and hash-suffixed.
std::string filesystem_safe(std::string_view text);

}  // namespace pftgw
