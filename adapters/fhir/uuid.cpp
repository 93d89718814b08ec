// UUIDv8 text for the FHIR writer's fullUrls (the SHA-256 is the core's).
#include "adapters/fhir/uuid.hpp"

#include <cstring>

namespace pftgw::fhir::detail {

void append_urn_uuid(std::string& out, const std::array<std::uint8_t, 32>& digest) {
    // RFC 9562 section 5.8: version 8 in the high nibble of octet 6, variant
    // 10 in the two high bits of octet 8; the other 122 bits are the hash's.
    constexpr std::uint8_t kVersion8 = 0x80;
    constexpr std::uint8_t kVariantRfc = 0x80;
    std::uint8_t h[16];
    std::memcpy(h, digest.data(), sizeof h);
    h[6] = static_cast<std::uint8_t>((h[6] & 0x0F) | kVersion8);
    h[8] = static_cast<std::uint8_t>((h[8] & 0x3F) | kVariantRfc);
    constexpr char kHex[] = "0123456789abcdef";
    char text[kUrnUuidChars] = {'u', 'r', 'n', ':', 'u', 'u', 'i', 'd', ':'};
    std::size_t n = 9;
    for (std::size_t i = 0; i < 16; ++i) {
        if (i == 4 || i == 6 || i == 8 || i == 10) text[n++] = '-';
        text[n++] = kHex[h[i] >> 4];
        text[n++] = kHex[h[i] & 0x0F];
    }
    out.append(text, n);
}

std::string urn_uuid(std::string_view system, std::string_view value) {
    Sha256Stream s;
    s.update(system);
    s.update("|");
    s.update(value);
    std::string out;
    out.reserve(kUrnUuidChars);
    append_urn_uuid(out, s.finish());
    return out;
}

}  // namespace pftgw::fhir::detail
