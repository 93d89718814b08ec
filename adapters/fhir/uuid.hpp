// Name-based urn:uuid values for Bundle fullUrls. Internal to adapters/fhir.
//
// The UUID is SHA-256 of "system|value" in the RFC 9562 version 8 layout
// (version nibble 8, variant bits 10; name-based UUIDv8 with SHA-256, RFC 9562
// appendix B.2, from memory). Every resource of one Bundle shares the prefix
// "system|<result id>-", so the hash state after that prefix is kept and only
// the part's own bytes are hashed per resource: the same digest as hashing the
// whole name (FIPS 180-4 is a left-to-right stream), at about half the cost.
#pragma once

#include <array>
#include <cstddef>
#include <cstdint>
#include <string>
#include <string_view>

#include "gateway/core/sha256.hpp"

namespace pftgw::fhir::detail {

// The core's SHA-256 stream (gateway/core/sha256.hpp).
using pftgw::Sha256Stream;
using pftgw::sha_extensions_in_use;

// "urn:uuid:" + the 36-character UUID text of a SHA-256 digest (version 8,
// variant 10, lower-case hex).
constexpr std::size_t kUrnUuidChars = 9 + 36;
void append_urn_uuid(std::string& out, const std::array<std::uint8_t, 32>& digest);

// urn:uuid for "system|value" hashed in one go.
std::string urn_uuid(std::string_view system, std::string_view value);

}  // namespace pftgw::fhir::detail
