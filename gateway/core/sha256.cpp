// SHA-256 (FIPS 180-4) as a stream, with the x86 SHA instructions when the CPU has them.
#include "gateway/core/sha256.hpp"

#include <algorithm>
#include <cstring>

#if defined(__x86_64__) && defined(__GNUC__)
#include <cpuid.h>
#include <immintrin.h>
#define PFTGW_SHA_NI 1
#endif

namespace pftgw {

namespace {

// FIPS 180-4 section 4.2.2: first 32 bits of the fractional parts of the cube
// roots of the first 64 primes.
constexpr std::uint32_t kRound[64] = {
    0x428a2f98, 0x71374491, 0xb5c0fbcf, 0xe9b5dba5, 0x3956c25b, 0x59f111f1, 0x923f82a4, 0xab1c5ed5,
    0xd807aa98, 0x12835b01, 0x243185be, 0x550c7dc3, 0x72be5d74, 0x80deb1fe, 0x9bdc06a7, 0xc19bf174,
    0xe49b69c1, 0xefbe4786, 0x0fc19dc6, 0x240ca1cc, 0x2de92c6f, 0x4a7484aa, 0x5cb0a9dc, 0x76f988da,
    0x983e5152, 0xa831c66d, 0xb00327c8, 0xbf597fc7, 0xc6e00bf3, 0xd5a79147, 0x06ca6351, 0x14292967,
    0x27b70a85, 0x2e1b2138, 0x4d2c6dfc, 0x53380d13, 0x650a7354, 0x766a0abb, 0x81c2c92e, 0x92722c85,
    0xa2bfe8a1, 0xa81a664b, 0xc24b8b70, 0xc76c51a3, 0xd192e819, 0xd6990624, 0xf40e3585, 0x106aa070,
    0x19a4c116, 0x1e376c08, 0x2748774c, 0x34b0bcb5, 0x391c0cb3, 0x4ed8aa4a, 0x5b9cca4f, 0x682e6ff3,
    0x748f82ee, 0x78a5636f, 0x84c87814, 0x8cc70208, 0x90befffa, 0xa4506ceb, 0xbef9a3f7, 0xc67178f2};

// FIPS 180-4 section 5.3.3: the initial hash value.
constexpr std::array<std::uint32_t, 8> kInitial = {0x6a09e667, 0xbb67ae85, 0x3c6ef372, 0xa54ff53a,
                                                   0x510e527f, 0x9b05688c, 0x1f83d9ab, 0x5be0cd19};

constexpr std::size_t kBlockBytes = 64;
constexpr std::size_t kLengthBytes = 8;  // message length in bits, big-endian

inline std::uint32_t rotr(std::uint32_t x, int n) {
    return (x >> n) | (x << (32 - n));
}

void compress_portable(std::array<std::uint32_t, 8>& state, const std::uint8_t* block);

#ifdef PFTGW_SHA_NI
// The x86 SHA extensions (CPUID leaf 7, EBX bit 29) do one block in about a
// tenth of the portable code's instructions; same digest, chosen at run time.
bool cpu_has_sha_extensions() {
    unsigned a = 0, b = 0, c = 0, d = 0;
    if (!__get_cpuid_count(7, 0, &a, &b, &c, &d)) return false;
    return (b & bit_SHA) != 0;
}

// Two rounds per sha256rnds2; state kept as ABEF / CDGH (Intel SHA extensions
// programming reference, from memory; checked against the portable code in
// tests/unit/adapters/fhir/uuid_test.cpp).
__attribute__((target("sha,sse4.1,ssse3"))) void compress_sha_ni(
    std::array<std::uint32_t, 8>& state, const std::uint8_t* block) {
    const __m128i byte_swap = _mm_set_epi64x(0x0c0d0e0f08090a0bULL, 0x0405060700010203ULL);
    __m128i tmp = _mm_loadu_si128(reinterpret_cast<const __m128i*>(state.data()));
    __m128i state1 = _mm_loadu_si128(reinterpret_cast<const __m128i*>(state.data() + 4));
    tmp = _mm_shuffle_epi32(tmp, 0xB1);                // CDAB
    state1 = _mm_shuffle_epi32(state1, 0x1B);          // EFGH
    __m128i state0 = _mm_alignr_epi8(tmp, state1, 8);  // ABEF
    state1 = _mm_blend_epi16(state1, tmp, 0xF0);       // CDGH
    const __m128i abef_saved = state0;
    const __m128i cdgh_saved = state1;

    __m128i w[4];
    for (int i = 0; i < 4; ++i)
        w[i] = _mm_shuffle_epi8(_mm_loadu_si128(reinterpret_cast<const __m128i*>(block + 16 * i)),
                                byte_swap);
    for (int g = 0; g < 16; ++g) {
        __m128i& cur = w[g & 3];
        if (g >= 4) {
            // W[t] from W[t-16] + s0(W[t-15]) + W[t-7] + s1(W[t-2]), four at a time.
            const __m128i prev = w[(g - 1) & 3];
            const __m128i prev2 = w[(g - 2) & 3];
            __m128i x = _mm_sha256msg1_epu32(cur, w[(g - 3) & 3]);
            x = _mm_add_epi32(x, _mm_alignr_epi8(prev, prev2, 4));
            cur = _mm_sha256msg2_epu32(x, prev);
        }
        __m128i k =
            _mm_add_epi32(cur, _mm_loadu_si128(reinterpret_cast<const __m128i*>(kRound + 4 * g)));
        state1 = _mm_sha256rnds2_epu32(state1, state0, k);
        k = _mm_shuffle_epi32(k, 0x0E);
        state0 = _mm_sha256rnds2_epu32(state0, state1, k);
    }
    state0 = _mm_add_epi32(state0, abef_saved);
    state1 = _mm_add_epi32(state1, cdgh_saved);
    tmp = _mm_shuffle_epi32(state0, 0x1B);        // FEBA
    state1 = _mm_shuffle_epi32(state1, 0xB1);     // DCHG
    state0 = _mm_blend_epi16(tmp, state1, 0xF0);  // DCBA
    state1 = _mm_alignr_epi8(state1, tmp, 8);     // HGFE
    _mm_storeu_si128(reinterpret_cast<__m128i*>(state.data()), state0);
    _mm_storeu_si128(reinterpret_cast<__m128i*>(state.data() + 4), state1);
}

const bool kUseShaNi = cpu_has_sha_extensions();
#endif

}  // namespace

bool sha_extensions_in_use() {
#ifdef PFTGW_SHA_NI
    return kUseShaNi;
#else
    return false;
#endif
}

Sha256Stream::Sha256Stream(bool portable_only) : state_(kInitial), force_portable_(portable_only) {}

void Sha256Stream::compress(const std::uint8_t* block) {
#ifdef PFTGW_SHA_NI
    if (kUseShaNi && !force_portable_) {
        compress_sha_ni(state_, block);
        return;
    }
#endif
    compress_portable(state_, block);
}

namespace {
void compress_portable(std::array<std::uint32_t, 8>& state_, const std::uint8_t* block) {
    std::uint32_t w[64];
    for (int i = 0; i < 16; ++i)
        w[i] = (std::uint32_t(block[4 * i]) << 24) | (std::uint32_t(block[4 * i + 1]) << 16) |
               (std::uint32_t(block[4 * i + 2]) << 8) | std::uint32_t(block[4 * i + 3]);
    for (int i = 16; i < 64; ++i) {
        const std::uint32_t s0 = rotr(w[i - 15], 7) ^ rotr(w[i - 15], 18) ^ (w[i - 15] >> 3);
        const std::uint32_t s1 = rotr(w[i - 2], 17) ^ rotr(w[i - 2], 19) ^ (w[i - 2] >> 10);
        w[i] = w[i - 16] + s0 + w[i - 7] + s1;
    }
    std::uint32_t a = state_[0], b = state_[1], c = state_[2], d = state_[3], e = state_[4],
                  f = state_[5], g = state_[6], h = state_[7];
    for (int i = 0; i < 64; ++i) {
        const std::uint32_t t1 =
            h + (rotr(e, 6) ^ rotr(e, 11) ^ rotr(e, 25)) + ((e & f) ^ (~e & g)) + kRound[i] + w[i];
        const std::uint32_t t2 =
            (rotr(a, 2) ^ rotr(a, 13) ^ rotr(a, 22)) + ((a & b) ^ (a & c) ^ (b & c));
        h = g;
        g = f;
        f = e;
        e = d + t1;
        d = c;
        c = b;
        b = a;
        a = t1 + t2;
    }
    state_[0] += a;
    state_[1] += b;
    state_[2] += c;
    state_[3] += d;
    state_[4] += e;
    state_[5] += f;
    state_[6] += g;
    state_[7] += h;
}
}  // namespace

void Sha256Stream::update(std::string_view bytes) {
    const auto* p = reinterpret_cast<const std::uint8_t*>(bytes.data());
    std::size_t n = bytes.size();
    total_bytes_ += n;
    if (buffered_ > 0) {
        const std::size_t take = std::min(n, kBlockBytes - buffered_);
        std::memcpy(buffer_.data() + buffered_, p, take);
        buffered_ += take;
        p += take;
        n -= take;
        if (buffered_ < kBlockBytes) return;
        compress(buffer_.data());
        buffered_ = 0;
    }
    for (; n >= kBlockBytes; n -= kBlockBytes, p += kBlockBytes) compress(p);
    std::memcpy(buffer_.data(), p, n);
    buffered_ = n;
}

std::array<std::uint8_t, 32> Sha256Stream::finish() const {
    // Padding (FIPS 180-4 section 5.1.1): 0x80, zeros, the length in bits.
    Sha256Stream s = *this;
    s.buffer_[s.buffered_++] = 0x80;
    if (s.buffered_ > kBlockBytes - kLengthBytes) {
        std::memset(s.buffer_.data() + s.buffered_, 0, kBlockBytes - s.buffered_);
        s.compress(s.buffer_.data());
        s.buffered_ = 0;
    }
    std::memset(s.buffer_.data() + s.buffered_, 0, kBlockBytes - kLengthBytes - s.buffered_);
    const std::uint64_t bits = total_bytes_ * 8;
    for (std::size_t i = 0; i < kLengthBytes; ++i)
        s.buffer_[kBlockBytes - 1 - i] = static_cast<std::uint8_t>(bits >> (8 * i));
    s.compress(s.buffer_.data());
    std::array<std::uint8_t, 32> digest{};
    for (std::size_t i = 0; i < 8; ++i) {
        digest[4 * i] = static_cast<std::uint8_t>(s.state_[i] >> 24);
        digest[4 * i + 1] = static_cast<std::uint8_t>(s.state_[i] >> 16);
        digest[4 * i + 2] = static_cast<std::uint8_t>(s.state_[i] >> 8);
        digest[4 * i + 3] = static_cast<std::uint8_t>(s.state_[i]);
    }
    return digest;
}

}  // namespace pftgw
