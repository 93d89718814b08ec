// SHA-256 (FIPS 180-4) as a stream. A copy carries the state, so a shared
// prefix is hashed once (the FHIR writer's fullUrls). Pure computation; the
// CPU's SHA instructions are used when CPUID reports them (same digest).
#pragma once

#include <array>
#include <cstddef>
#include <cstdint>
#include <string_view>

namespace pftgw {

// SHA-256 (FIPS 180-4) as a stream; a copy carries the state, so a shared
// prefix is hashed once.
class Sha256Stream {
public:
    // portable_only: never the CPU's SHA instructions (tests compare both paths).
    explicit Sha256Stream(bool portable_only = false);
    void update(std::string_view bytes);
    std::array<std::uint8_t, 32> finish() const;  // the stream itself is unchanged

private:
    void compress(const std::uint8_t* block);

    std::array<std::uint32_t, 8> state_;
    std::array<std::uint8_t, 64> buffer_{};
    std::size_t buffered_ = 0;
    std::uint64_t total_bytes_ = 0;
    bool force_portable_ = false;
};

// True when this CPU's SHA instructions compute the digests.
bool sha_extensions_in_use();

}  // namespace pftgw
