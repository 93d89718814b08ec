// The fullUrl UUIDs (adapters/fhir/uuid.hpp): the streamed SHA-256 against
// FIPS 180-2 appendix B examples and against the core's one-shot sha256()
// (identity.hpp), on both code paths, and the RFC 9562 version 8 layout.
#include "adapters/fhir/uuid.hpp"

#include <gtest/gtest.h>

#include <cctype>
#include <iostream>
#include <regex>
#include <string>

#include "gateway/core/identity.hpp"

namespace pftgw::fhir::detail {
namespace {

std::string hex(const std::array<std::uint8_t, 32>& d) {
    static constexpr char kHex[] = "0123456789abcdef";
    std::string out;
    for (auto b : d) {
        out += kHex[b >> 4];
        out += kHex[b & 0x0F];
    }
    return out;
}

std::string digest(std::string_view text, bool portable_only) {
    Sha256Stream s(portable_only);
    s.update(text);
    return hex(s.finish());
}

TEST(FhirUuid, Sha256MatchesPublishedExamples) {
    // FIPS 180-2 appendix B.1 and B.2 (from memory; the same values are the
    // core's identity_test expectations).
    for (bool portable : {true, false}) {
        EXPECT_EQ(digest("abc", portable),
                  "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
        EXPECT_EQ(digest("abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq", portable),
                  "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1");
        EXPECT_EQ(digest("", portable),
                  "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855");
    }
    std::cout << "SHA extensions in use: " << (sha_extensions_in_use() ? "yes" : "no") << "\n";
}

TEST(FhirUuid, StreamEqualsOneShotForEveryLengthAndSplit) {
    std::string text;
    for (int i = 0; i < 200; ++i) text += static_cast<char>('!' + (i * 7) % 90);
    for (std::size_t n = 0; n <= text.size(); ++n) {
        const std::string_view t(text.data(), n);
        const std::string expected = hex(sha256(t));
        EXPECT_EQ(digest(t, true), expected) << n;
        EXPECT_EQ(digest(t, false), expected) << n;
        // A copied stream after a prefix (how PartMaker hashes) gives the same.
        const std::size_t cut = n / 3;
        Sha256Stream prefix;
        prefix.update(t.substr(0, cut));
        Sha256Stream rest = prefix;
        rest.update(t.substr(cut));
        EXPECT_EQ(hex(rest.finish()), expected) << n;
    }
}

TEST(FhirUuid, Rfc9562Version8LayoutOfTheNameHash) {
    const std::string u = urn_uuid("https://pftgw.example/fhir/identifier/result", "R1-obs-FEV1");
    EXPECT_TRUE(std::regex_match(
        u,
        std::regex("urn:uuid:[0-9a-f]{8}-[0-9a-f]{4}-8[0-9a-f]{3}-[89ab][0-9a-f]{3}-[0-9a-f]{12}")))
        << u;
    // The first 16 bytes of SHA-256("system|value") with the version and
    // variant bits set: compare the hex digits the layout leaves untouched.
    const std::string h = sha256_hex("https://pftgw.example/fhir/identifier/result|R1-obs-FEV1");
    std::string lower;
    for (char c : h) lower += static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
    const std::string digits =
        u.substr(9, 8) + u.substr(18, 4) + u.substr(23, 4) + u.substr(28, 4) + u.substr(33, 12);
    EXPECT_EQ(digits.substr(0, 12), lower.substr(0, 12));
    EXPECT_EQ(digits.substr(13, 3), lower.substr(13, 3));
    EXPECT_EQ(digits.substr(17), lower.substr(17, 15));
}

}  // namespace
}  // namespace pftgw::fhir::detail
