// SHA-256, base32 and the stable identifiers (result id, MSH-10, part ids).
#include "gateway/core/identity.hpp"

#include <gtest/gtest.h>

#include <set>
#include <string>

#include "tests/support/examples.hpp"

namespace pftgw {
namespace {

std::string b32(std::string_view text) {
    return base32(reinterpret_cast<const std::uint8_t*>(text.data()), text.size());
}

bool only_safe_chars(const std::string& s) {
    for (char c : s) {
        const bool ok = (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') ||
                        (c >= '0' && c <= '9') || c == '.' || c == '_' || c == '-';
        if (!ok) return false;
    }
    return !s.empty();
}

bool only_base32_chars(const std::string& s) {
    for (char c : s)
        if (!((c >= 'A' && c <= 'Z') || (c >= '2' && c <= '7'))) return false;
    return true;
}

// A result with neither its own id nor a device session: the content hash applies.
NeutralResult content_only_result() {
    auto r = testing::example_normalized_result();
    r.id.clear();
    r.device_session_number.clear();
    return r;
}

// ---- SHA-256 ----

TEST(Sha256, FipsExampleAbc) {
    // FIPS 180-2, Appendix B.1 (NIST example "abc", one block).
    EXPECT_EQ(sha256_hex("abc"),
              "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
}

TEST(Sha256, EmptyMessage) {
    // NIST CAVP SHA256ShortMsg, Len = 0 (from memory; cross-checked with
    // coreutils sha256sum and Python hashlib on Debian 12).
    EXPECT_EQ(sha256_hex(""), "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855");
}

TEST(Sha256, FipsExample448Bits) {
    // FIPS 180-2, Appendix B.2 (448-bit message, padding spills into a second block).
    EXPECT_EQ(sha256_hex("abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq"),
              "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1");
}

TEST(Sha256, FipsExampleMillionA) {
    // FIPS 180-2, Appendix B.3 (one million 'a').
    EXPECT_EQ(sha256_hex(std::string(1000000, 'a')),
              "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0");
}

TEST(Sha256, PaddingBoundaries) {
    // Lengths around the 55/56/64-byte padding edges; expected digests from
    // Python 3.11 hashlib.sha256 (Debian 12), an independent implementation.
    EXPECT_EQ(sha256_hex(std::string(55, 'a')),
              "9f4390f8d30c2dd92ec9f095b65e2b9ae9b0a925a5258e241c9f1e910f734318");
    EXPECT_EQ(sha256_hex(std::string(56, 'a')),
              "b35439a4ac6f0948b6d6f9e3c6af0f5f590ce20f1bde7090ef7970686ec6738a");
    EXPECT_EQ(sha256_hex(std::string(64, 'a')),
              "ffe054fe7ae0cb6dc65c3af9b61d5209f439851db43d0ba5997337df154668eb");
    EXPECT_EQ(sha256_hex(std::string(119, 'a')),
              "31eba51c313a5c08226adf18d4a359cfdfd8d2e816b13f4af952f7ea6584dcfb");
    EXPECT_EQ(sha256_hex(std::string(120, 'a')),
              "2f3d335432c70b580af0e8e1b3674a7c020d683aa5f73aaaedfdc55af904c21c");
}

// ---- base32 ----

TEST(Base32, Rfc4648TestVectorsWithoutPadding) {
    // RFC 4648 section 10 test vectors, with the '=' padding removed.
    EXPECT_EQ(b32(""), "");
    EXPECT_EQ(b32("f"), "MY");
    EXPECT_EQ(b32("fo"), "MZXQ");
    EXPECT_EQ(b32("foo"), "MZXW6");
    EXPECT_EQ(b32("foob"), "MZXW6YQ");
    EXPECT_EQ(b32("fooba"), "MZXW6YTB");
    EXPECT_EQ(b32("foobar"), "MZXW6YTBOI");
}

TEST(Base32, OfDigest) {
    // Python 3.11 base64.b32encode(hashlib.sha256(b"abc").digest()), padding removed.
    const auto d = sha256("abc");
    EXPECT_EQ(base32(d.data(), d.size()), "XJ4BNP4PAHH6UQKBIDPF3LRCEOYAGYNDSYLXVHFUCD7WD4QACWWQ");
}

// ---- result identifier ----

TEST(ResultIdentifier, OwnIdWins) {
    const auto r = testing::example_normalized_result();
    EXPECT_EQ(result_identifier(r), "NORTHLAB-SPX7-100001");
}

TEST(ResultIdentifier, DeviceAndSessionNumberWhenNoOwnId) {
    auto r = testing::example_normalized_result();
    r.id.clear();
    EXPECT_EQ(result_identifier(r), "SPX7-100001");
}

TEST(ResultIdentifier, DeviceSessionIdIsMadeSafe) {
    auto r = testing::example_normalized_result();
    r.id.clear();
    r.device.id = "lab/room 2";
    const auto id = result_identifier(r);
    EXPECT_TRUE(only_safe_chars(id)) << id;
    EXPECT_EQ(id.rfind("lab_room_2-100001-", 0), 0u) << id;
}

TEST(ResultIdentifier, ContentIdShapeAndStability) {
    const auto r = content_only_result();
    const auto id = result_identifier(r);
    ASSERT_EQ(id.size(), 26u);
    EXPECT_EQ(id[0], 'R');
    EXPECT_TRUE(only_base32_chars(id.substr(1))) << id;
    // Same input, same id, across calls and across copies.
    EXPECT_EQ(result_identifier(r), id);
    const NeutralResult copy = r;
    EXPECT_EQ(result_identifier(copy), id);
}

TEST(ResultIdentifier, ContentIdIgnoresFindings) {
    auto r = content_only_result();
    const auto id = result_identifier(r);
    r.findings.clear();
    EXPECT_EQ(result_identifier(r), id);
}

TEST(ResultIdentifier, ContentIdChangesWithContent) {
    const auto base = content_only_result();
    const auto id = result_identifier(base);

    auto value = base;
    value.tests[0].values[0].value = 2.62;  // FEV1 2.61 -> 2.62 L
    EXPECT_NE(result_identifier(value), id);

    auto tiny = base;
    tiny.tests[0].values[0].value = 2.61 + 1e-12;  // shortest round-trip keeps every bit
    EXPECT_NE(result_identifier(tiny), id);

    auto unit = base;
    unit.tests[0].values[0].unit = "mL";
    EXPECT_NE(result_identifier(unit), id);

    auto condition = base;
    condition.tests[0].values[0].condition = GasCondition::atps;
    EXPECT_NE(result_identifier(condition), id);

    auto subject = base;
    subject.subject.identifiers[0].value = "H500002";
    EXPECT_NE(result_identifier(subject), id);

    auto time = base;
    time.tests[1].time->minute = 41;
    EXPECT_NE(result_identifier(time), id);

    auto order = base;  // two values swapped: model order is part of the text
    std::swap(order.tests[0].values[0], order.tests[0].values[1]);
    EXPECT_NE(result_identifier(order), id);
}

// ---- MSH-10 ----

TEST(Hl7ControlId, ShapeAndStability) {
    const auto a = hl7_control_id("NORTHLAB-SPX7-100001", 1, "hl7v2");
    EXPECT_EQ(a.size(), 20u);  // HL7 2.5.1 MSH-10 is at most 20 characters (DECISIONS.md)
    EXPECT_TRUE(only_base32_chars(a)) << a;
    EXPECT_EQ(hl7_control_id("NORTHLAB-SPX7-100001", 1, "hl7v2"), a);
}

TEST(Hl7ControlId, MatchesIndependentHash) {
    // Python 3.11: base64.b32encode(hashlib.sha256(b"NORTHLAB-SPX7-100001\x1f1\x1fhl7v2")
    // .digest())[:20], i.e. the recipe in identity.hpp computed by another implementation.
    EXPECT_EQ(hl7_control_id("NORTHLAB-SPX7-100001", 1, "hl7v2"), "B5FR7QVS3O3K2BBCLUKA");
    EXPECT_EQ(hl7_control_id("NORTHLAB-SPX7-100001", 2, "hl7v2"), "PU3CERQQSGLCMG7ZOF2D");
}

TEST(Hl7ControlId, RevisionAndTargetAreInTheKey) {
    const auto a = hl7_control_id("NORTHLAB-SPX7-100001", 1, "hl7v2");
    EXPECT_NE(hl7_control_id("NORTHLAB-SPX7-100001", 2, "hl7v2"), a);
    EXPECT_NE(hl7_control_id("NORTHLAB-SPX7-100001", 1, "hl7v2-traditional"), a);
    EXPECT_NE(hl7_control_id("NORTHLAB-SPX7-100002", 1, "hl7v2"), a);
    // The separator keeps ("A1", 1) apart from ("A", 11).
    EXPECT_NE(hl7_control_id("A1", 1, "t"), hl7_control_id("A", 11, "t"));
}

// ---- part ids and filesystem safety ----

TEST(PartIdentifier, JoinsWithDash) {
    EXPECT_EQ(part_identifier("NORTHLAB-SPX7-100001", "obs-FEV1"), "NORTHLAB-SPX7-100001-obs-FEV1");
}

TEST(FilesystemSafe, OddIds) {
    for (std::string_view odd :
         {"../x", "..", ".", "a b c", "a/b\\c", "x\x01y", "Gr\xc3\xbc\xc3\x9f", "", ".hidden"}) {
        const auto s = filesystem_safe(odd);
        EXPECT_TRUE(only_safe_chars(s)) << s;
        EXPECT_NE(s.front(), '.') << s;
        EXPECT_LE(s.size(), 64u);
    }
    EXPECT_EQ(filesystem_safe("../x"), "_._x");
    EXPECT_EQ(filesystem_safe("a b"), "a_b");
    EXPECT_EQ(filesystem_safe("LAB-1.v2_x"), "LAB-1.v2_x");  // already safe: unchanged
}

TEST(ResultIdentifier, OddOwnIdsStaySafeAndDistinct) {
    std::set<std::string> seen;
    for (std::string_view odd :
         {"../x", "_._x", "a b", "a_b", "a/b", "Gr\xc3\xbc\xc3\x9f", "Gr__", "Gr____", ".."}) {
        auto r = testing::example_normalized_result();
        r.id = std::string(odd);
        const auto id = result_identifier(r);
        EXPECT_TRUE(only_safe_chars(id)) << id;
        EXPECT_NE(id.front(), '.') << id;
        EXPECT_LE(id.size(), 64u) << id;
        EXPECT_TRUE(seen.insert(id).second) << "collision for " << odd << ": " << id;
    }
}

TEST(ResultIdentifier, LongIdsAreCutAndStayDistinct) {
    auto r = testing::example_normalized_result();
    r.id = std::string(100, 'A') + "1";
    const auto a = result_identifier(r);
    r.id = std::string(100, 'A') + "2";
    const auto b = result_identifier(r);
    EXPECT_EQ(a.size(), 64u);
    EXPECT_EQ(b.size(), 64u);
    EXPECT_NE(a, b);
    EXPECT_TRUE(only_safe_chars(a));
    r.id = std::string(64, 'A');  // exactly at the limit: kept as is
    EXPECT_EQ(result_identifier(r), r.id);
}

}  // namespace
}  // namespace pftgw
