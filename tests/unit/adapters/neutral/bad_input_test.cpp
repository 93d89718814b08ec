// Each class of bad input gives its own rule id (DEVELOPERS.md "Findings and
// rule ids"), with the path and, where the input has one, line and column.
#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>
#include <sstream>

#include "adapters/neutral/neutral_io.hpp"

namespace pftgw::neutral {
namespace {

namespace fs = std::filesystem;

std::string sample(const std::string& name) {
    std::ifstream in(fs::path(PFTGW_SOURCE_DIR) / "samples/lab" / name, std::ios::binary);
    std::ostringstream s;
    s << in.rdbuf();
    return s.str();
}

const Finding* find_rule(const ReadOutcome& o, std::string_view rule) {
    for (const Finding& f : o.findings)
        if (f.rule == rule) return &f;
    return nullptr;
}

std::string value_of(const Finding& f, std::string_view name) {
    for (const auto& [k, v] : f.values)
        if (k == name) return v;
    return {};
}

constexpr std::string_view kHead =
    R"(<result xmlns="https://pftgw.example/ns/result" schemaVersion="1.0">)";

TEST(NeutralBadInput, MalformedXmlHasLineAndColumn) {
    // samples/README.md: <value> opened on line 28; xmllint (libxml2) reports the
    // mismatched end tag </test> on line 44, where pugixml stops too.
    const ReadOutcome o = read_xml(sample("bad-schema-malformed.xml"), "m.xml");
    EXPECT_FALSE(o.result);
    const Finding* f = find_rule(o, "xml.malformed");
    ASSERT_NE(f, nullptr);
    EXPECT_EQ(value_of(*f, "line"), "44");
    EXPECT_NE(f->message.find("m.xml:44:"), std::string::npos) << f->message;
    // Hand-made: the 2nd line's 4th character is where the bad tag starts.
    const ReadOutcome small = read_xml("<a>\n  <<b/></a>", "s.xml");
    ASSERT_NE(find_rule(small, "xml.malformed"), nullptr);
    EXPECT_EQ(value_of(*find_rule(small, "xml.malformed"), "line"), "2");
}

TEST(NeutralBadInput, MalformedJsonHasLineAndColumn) {
    // Python's json module (the reference here) reports "line 71 column 9" for this file.
    const ReadOutcome o = read_json(sample("bad-schema-malformed.json"), "m.json");
    EXPECT_FALSE(o.result);
    const Finding* f = find_rule(o, "json.malformed");
    ASSERT_NE(f, nullptr);
    EXPECT_EQ(value_of(*f, "line"), "71");
    EXPECT_EQ(value_of(*f, "column"), "9");
}

TEST(NeutralBadInput, WrongRootNamesFoundAndExpected) {
    const ReadOutcome o = read_any(sample("bad-schema-wrong-root.xml"), "w.xml");
    EXPECT_FALSE(o.result);
    const Finding* f = find_rule(o, "schema.wrong-root");
    ASSERT_NE(f, nullptr);
    EXPECT_NE(f->message.find("<report>"), std::string::npos) << f->message;
    EXPECT_NE(f->message.find("expected <result>"), std::string::npos) << f->message;
    // Right name, wrong namespace.
    EXPECT_NE(find_rule(read_xml("<result schemaVersion=\"1.0\"/>", "n.xml"), "schema.wrong-root"),
              nullptr);
    EXPECT_NE(find_rule(read_json("[1]", "a.json"), "schema.wrong-root"), nullptr);
}

TEST(NeutralBadInput, UnknownElementAttributeAndKey) {
    const ReadOutcome o = read_xml(sample("bad-schema-unknown-element.xml"), "u.xml");
    ASSERT_TRUE(o.result) << "still readable, so check can list every finding";
    const Finding* f = find_rule(o, "schema.unknown-element");
    ASSERT_NE(f, nullptr);
    EXPECT_EQ(f->path, "tests[0]");
    EXPECT_EQ(value_of(*f, "line"), "31");  // samples/README.md
    EXPECT_EQ(f->severity, Severity::error);

    const std::string xml = std::string(kHead) +
                            "<test type=\"spirometry\"><value kind=\"FEV1\" value=\"2\" "
                            "colour=\"red\"/></test></result>";
    const ReadOutcome a = read_xml(xml, "a.xml");
    const Finding* fa = find_rule(a, "schema.unknown-attribute");
    ASSERT_NE(fa, nullptr);
    EXPECT_EQ(fa->path, "tests[0].values[FEV1]");

    const ReadOutcome j = read_json(
        "{\"schemaVersion\":\"1.0\",\n\"tests\":[{\"type\":\"spirometry\",\n\"colour\":1}]}",
        "j.json");
    const Finding* fj = find_rule(j, "schema.unknown-element");
    ASSERT_NE(fj, nullptr);
    EXPECT_EQ(fj->path, "tests[0]");
    EXPECT_EQ(value_of(*fj, "line"), "3");

    // A newer minor version may add elements: unknown ones become warnings.
    const ReadOutcome minor = read_xml(
        "<result xmlns=\"https://pftgw.example/ns/result\" schemaVersion=\"1.4\"><later/></result>",
        "m.xml");
    ASSERT_TRUE(minor.result);
    ASSERT_NE(find_rule(minor, "schema.unknown-element"), nullptr);
    EXPECT_EQ(find_rule(minor, "schema.unknown-element")->severity, Severity::warning);
}

TEST(NeutralBadInput, TextInANumberKeepsTheText) {
    for (const char* name : {"bad-schema-not-numeric.xml", "bad-schema-not-numeric.json"}) {
        SCOPED_TRACE(name);
        const ReadOutcome o = read_any(sample(name), name);
        ASSERT_TRUE(o.result);
        const Finding* f = find_rule(o, "value.not-numeric");
        ASSERT_NE(f, nullptr);
        const std::string kind =
            std::string(name).find(".xml") != std::string::npos ? "FEF25_75" : "VA";
        EXPECT_EQ(f->path, "tests[0].values[" + kind + "].value");
        const Quantity* q = o.result->tests.at(0).find(kind);
        ASSERT_NE(q, nullptr);
        EXPECT_FALSE(q->value.has_value());
        EXPECT_EQ(q->source.value_text, "n/a");
    }
}

TEST(NeutralBadInput, NewerMajorVersionRefused) {
    const ReadOutcome o = read_json(sample("bad-schema-version-2.json"), "v.json");
    EXPECT_FALSE(o.result);
    const Finding* f = find_rule(o, "schema.version-unsupported");
    ASSERT_NE(f, nullptr);
    EXPECT_NE(f->message.find("'2.0'"), std::string::npos) << f->message;
    const ReadOutcome x = read_xml(
        "<result xmlns=\"https://pftgw.example/ns/result\" schemaVersion=\"3.1\"/>", "v.xml");
    EXPECT_FALSE(x.result);
    EXPECT_NE(find_rule(x, "schema.version-unsupported"), nullptr);
}

TEST(NeutralBadInput, TimestampWithoutOffset) {
    const ReadOutcome o = read_xml(sample("bad-schema-no-offset.xml"), "t.xml");
    ASSERT_TRUE(o.result);
    const Finding* f = find_rule(o, "time.no-offset");
    ASSERT_NE(f, nullptr);
    EXPECT_EQ(f->path, "sessionTime");
    EXPECT_EQ(f->severity, Severity::error);
    EXPECT_FALSE(o.result->session_time);
}

TEST(NeutralBadInput, BadEnumsAndMissingRequired) {
    const std::string xml = std::string(kHead) +
                            "<subject><sexAtBirth>yes</sexAtBirth></subject>"
                            "<test type=\"spirometry\"><value kind=\"FEV1\" value=\"2\" "
                            "condition=\"BTPX\"/><value value=\"3\"/></test>"
                            "<test type=\"walking\"/></result>";
    const ReadOutcome o = read_xml(xml, "e.xml");
    ASSERT_TRUE(o.result);
    std::vector<std::string> paths;
    for (const Finding& f : o.findings) paths.push_back(f.rule + " " + f.path);
    EXPECT_NE(std::find(paths.begin(), paths.end(), "schema.invalid-value subject.sexAtBirth"),
              paths.end());
    EXPECT_NE(std::find(paths.begin(), paths.end(),
                        "schema.invalid-value tests[0].values[FEV1].condition"),
              paths.end());
    EXPECT_NE(
        std::find(paths.begin(), paths.end(), "schema.missing-required tests[0].values[?].kind"),
        paths.end());
    EXPECT_NE(std::find(paths.begin(), paths.end(), "schema.invalid-value tests[1].type"),
              paths.end());
    // The condition text as sent is kept.
    EXPECT_EQ(o.result->tests[0].values[0].source.condition_text, "BTPX");

    const ReadOutcome j = read_json(R"({"tests":[]})", "m.json");
    ASSERT_TRUE(j.result);
    ASSERT_NE(find_rule(j, "schema.missing-required"), nullptr);
    EXPECT_EQ(find_rule(j, "schema.missing-required")->path, "");
}

TEST(NeutralBadInput, NotXmlNorJson) {
    EXPECT_NE(find_rule(read_any("MSH|^~\\&|", "x"), "read.unreadable"), nullptr);
    EXPECT_NE(find_rule(read_any("  \n", "x"), "read.unreadable"), nullptr);
}

TEST(NeutralBadInput, SemanticallyBadSamplesReadCleanly) {
    // These are for normalize/validate to refuse (samples/README.md); the reader must not.
    for (const char* name : {"bad-condition-missing.xml", "bad-unit-not-ucum.json",
                             "bad-atps-no-ambient.xml", "bad-fev1-greater-than-fvc.json",
                             "bad-fev1-80-litres.xml", "bad-no-patient-identifier.json"}) {
        const ReadOutcome o = read_any(sample(name), name);
        EXPECT_TRUE(o.result) << name;
        EXPECT_TRUE(o.findings.empty()) << name << ": " << o.findings.front().message;
    }
}

}  // namespace
}  // namespace pftgw::neutral
