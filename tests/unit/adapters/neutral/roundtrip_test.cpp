// Neutral XML/JSON round trips on every sample and on the invented example
// result: read(write(x)) == x for the whole model, and XML -> JSON -> XML identical.
#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>
#include <sstream>

#include "adapters/neutral/neutral_io.hpp"
#include "tests/support/examples.hpp"

namespace pftgw::neutral {
namespace {

namespace fs = std::filesystem;

std::string slurp(const fs::path& p) {
    std::ifstream in(p, std::ios::binary);
    std::ostringstream s;
    s << in.rdbuf();
    return s.str();
}

std::vector<fs::path> good_samples() {
    std::vector<fs::path> out;
    for (const char* dir : {"samples/lab", "samples/examples"})
        for (const auto& e : fs::directory_iterator(fs::path(PFTGW_SOURCE_DIR) / dir)) {
            const std::string name = e.path().filename().string();
            const std::string ext = e.path().extension().string();
            if ((ext == ".xml" || ext == ".json") && name.rfind("bad-schema-", 0) != 0)
                out.push_back(e.path());
        }
    std::sort(out.begin(), out.end());
    return out;
}

std::string errors_of(const ReadOutcome& o) {
    std::string s;
    for (const auto& f : o.findings) s += f.rule + " " + f.path + " " + f.message + "\n";
    return s;
}

NeutralResult read_clean(std::string_view bytes, const std::string& name) {
    ReadOutcome o = read_any(bytes, name);
    EXPECT_TRUE(o.result.has_value()) << name;
    EXPECT_TRUE(o.findings.empty()) << name << "\n" << errors_of(o);
    return o.result ? *o.result : NeutralResult{};
}

TEST(NeutralRoundTrip, SamplesExist) {
    // samples/README.md lists 20 good lab documents, 6 semantically bad ones, 6 examples.
    EXPECT_GE(good_samples().size(), 30u);
}

TEST(NeutralRoundTrip, EverySampleThroughXmlAndJson) {
    for (const fs::path& p : good_samples()) {
        SCOPED_TRACE(p.filename().string());
        const NeutralResult original = read_clean(slurp(p), p.string());
        std::string xml, json;
        write_xml(original, xml);
        write_json(original, json);
        const NeutralResult from_xml = read_clean(xml, "written.xml");
        const NeutralResult from_json = read_clean(json, "written.json");
        EXPECT_EQ(from_xml, original);
        EXPECT_EQ(from_json, original);
        // XML -> model -> JSON -> model -> XML gives the same bytes.
        std::string xml_again;
        write_xml(from_json, xml_again);
        EXPECT_EQ(xml_again, xml);
        std::string json_again;
        write_json(from_xml, json_again);
        EXPECT_EQ(json_again, json);
    }
}

TEST(NeutralRoundTrip, ExampleResultEveryField) {
    NeutralResult r = testing::example_normalized_result();
    // Fill the fields the example leaves at their defaults, so each one is exercised.
    r.revision = 2;
    r.status = ResultStatus::corrected;
    r.replaces = "NORTHLAB-SPX7-099999";
    r.subject.ethnicity = "Other/mixed";
    r.subject.identifiers.push_back({"", "X-1", ""});
    r.order.filler_number = "F-9";
    r.device.last_calibration = testing::ts(2026, 3, 14, 7, 30, 15, -330);
    r.device.last_calibration->millisecond = 250;
    r.device.calibration_note = "syringe \"3 L\" <ok> & done";
    r.environment.humidity = testing::q("RH", 41, "%", GasCondition::none);
    Quantity& fev1 = r.tests[0].values[0];
    fev1.origin = Origin::gateway;
    fev1.source = SourceForm{"2610", "mL", "ATPS", "F1", "SPX7"};
    fev1.derivation =
        Derivation{0.001 * 1.0912345678901234, "mL->L; ATPS->BTPS", 22.0, 100.8, "Buck 1996"};
    fev1.reference[0].equation_version = "2020 correction";
    fev1.reference[0].origin = Origin::gateway;
    fev1.derived_from = {"FEV1"};
    fev1.trials = {1, 2, 3};
    Quantity absent;
    absent.kind = "FEF75";
    absent.absent_reason = "not-measured";
    r.tests[0].values.push_back(absent);
    Quantity bare;  // empty source: must not be filled in on read
    bare.kind = "FET";
    bare.value = 1e-7;
    bare.unit = "s";
    r.tests[0].values.push_back(bare);
    Trial t;
    t.number = 2;
    t.time = testing::ts(2026, 3, 14, 9, 14, 0, 60);
    t.operator_accepted = false;
    t.values.push_back(testing::q("FEV1", 2.58, "L", GasCondition::btps));
    r.tests[0].trials.push_back(t);
    r.tests[0].comments.push_back("line one\nline two\ttab | ^ ~ \\ &");
    r.tests[0].comments.push_back("   ");
    r.extensions.push_back({"urn:example:vendor", "settings", {{"filter", "B2"}, {"mode", ""}}});
    r.findings[0].values.push_back({"empty", ""});

    std::string xml, json;
    write_xml(r, xml);
    write_json(r, json);
    ReadOutcome from_xml = read_xml(xml, "x.xml");
    ReadOutcome from_json = read_json(json, "x.json");
    ASSERT_TRUE(from_xml.result) << errors_of(from_xml);
    ASSERT_TRUE(from_json.result) << errors_of(from_json);
    EXPECT_TRUE(from_xml.findings.empty()) << errors_of(from_xml) << xml;
    EXPECT_TRUE(from_json.findings.empty()) << errors_of(from_json) << json;
    EXPECT_EQ(*from_xml.result, r) << xml;
    EXPECT_EQ(*from_json.result, r) << json;
}

TEST(NeutralRoundTrip, ShortestNumberText) {
    // std::to_chars shortest round trip (C++17 [utility.to.chars]): 0.1 prints as "0.1", not
    // "0.10000000000000001"; 2.987 stays "2.987".
    NeutralResult r;
    pftgw::Test t;
    Quantity q;
    q.kind = "DLCO";
    q.value = 0.1;
    q.unit = "mmol/min/kPa";
    q.source = SourceForm{"0.1", "mmol/min/kPa", "", "", ""};
    q.reference.push_back({"GLI-2017", "", Origin::device, "", 2.987, std::nullopt, std::nullopt,
                           std::nullopt, std::nullopt});
    t.values.push_back(q);
    r.tests.push_back(t);
    std::string xml;
    write_xml(r, xml);
    EXPECT_NE(xml.find("value=\"0.1\""), std::string::npos) << xml;
    EXPECT_NE(xml.find("predicted=\"2.987\""), std::string::npos) << xml;
    EXPECT_EQ(xml.find("<source"), std::string::npos) << "an implied source is not written";
}

TEST(NeutralRoundTrip, ValueTextKeptExactly) {
    // "What the device sent is never lost": 3.50 and 2610 stay as written.
    const std::string xml =
        R"(<result xmlns="https://pftgw.example/ns/result" schemaVersion="1.0"><test type="spirometry">)"
        R"(<value kind="FEV1" value="3.50" unit="l" condition="btps"/></test></result>)";
    const std::string json = R"({"schemaVersion":"1.0","tests":[{"type":"spirometry","values":[)"
                             R"({"kind":"FEV1","value":3.50,"unit":"l","condition":"btps"}]}]})";
    for (const ReadOutcome& o : {read_xml(xml, "a.xml"), read_json(json, "a.json")}) {
        ASSERT_TRUE(o.result);
        const Quantity& q = o.result->tests.at(0).values.at(0);
        EXPECT_EQ(q.source.value_text, "3.50");
        EXPECT_EQ(q.source.unit_text, "l");
        EXPECT_EQ(q.source.condition_text, "btps");
        EXPECT_EQ(q.unit, "l") << "the reader does not normalize units";
        EXPECT_EQ(q.condition, GasCondition::btps);
        EXPECT_DOUBLE_EQ(*q.value, 3.5);
        std::string again;
        write_json(*o.result, again);
        ReadOutcome back = read_json(again, "b.json");
        ASSERT_TRUE(back.result);
        EXPECT_EQ(*back.result, *o.result);
    }
}

TEST(NeutralRoundTrip, JsonLinesArchive) {
    std::ifstream in(fs::path(PFTGW_SOURCE_DIR) / "samples/lab/archive-2019.jsonl");
    std::string line;
    int n = 0;
    while (std::getline(in, line)) {
        if (line.empty()) continue;
        const NeutralResult r = read_clean(line, "archive-2019.jsonl:" + std::to_string(++n));
        std::string json;
        write_json(r, json);
        EXPECT_EQ(read_clean(json, "written"), r);
    }
    EXPECT_EQ(n, 4);
}

TEST(NeutralRoundTrip, ExamplesXmlAndJsonSayTheSame) {
    for (const char* name : {"spirometry", "lung-volumes", "diffusing-capacity"}) {
        SCOPED_TRACE(name);
        const fs::path dir = fs::path(PFTGW_SOURCE_DIR) / "samples/examples";
        const std::string base = std::string("example-") + name;
        const NeutralResult x = read_clean(slurp(dir / (base + ".xml")), base + ".xml");
        const NeutralResult j = read_clean(slurp(dir / (base + ".json")), base + ".json");
        EXPECT_EQ(x, j);
        EXPECT_FALSE(x.tests.empty());
    }
}

TEST(NeutralRoundTrip, ValueCommentsTravelWithTheValue) {
    NeutralResult r = testing::example_normalized_result();
    Quantity& fev1 = r.tests[0].values[0];
    fev1.comments = {"Leak suspected on this maneuver", "second <note> & \"quotes\""};
    Trial t;
    t.number = 1;
    t.values.push_back(testing::q("FVC", 3.1, "L", GasCondition::btps));
    t.values.back().comments.push_back("cough at 0.8 s");
    r.tests[0].trials.push_back(t);
    r.tests[0].comments = {"whole test"};

    std::string xml, json;
    write_xml(r, xml);
    write_json(r, json);
    // The comment is a child of its <value>, not of the <test>.
    const auto value_at = xml.find("<value kind=\"FEV1\"");
    const auto value_end = xml.find("</value>", value_at);
    const auto comment_at = xml.find("<comment>Leak suspected on this maneuver</comment>");
    ASSERT_NE(comment_at, std::string::npos) << xml;
    EXPECT_GT(comment_at, value_at);
    EXPECT_LT(comment_at, value_end) << xml;
    EXPECT_NE(json.find("\"comments\""), json.rfind("\"comments\"")) << "value and test: " << json;

    for (const ReadOutcome& o : {read_xml(xml, "c.xml"), read_json(json, "c.json")}) {
        ASSERT_TRUE(o.result) << errors_of(o);
        EXPECT_TRUE(o.findings.empty()) << errors_of(o);
        EXPECT_EQ(*o.result, r);
        const pftgw::Test& test = o.result->tests.at(0);
        EXPECT_EQ(test.values.at(0).comments, fev1.comments);
        EXPECT_EQ(test.trials.back().values.at(0).comments,
                  std::vector<std::string>{"cough at 0.8 s"});
        EXPECT_EQ(test.comments, std::vector<std::string>{"whole test"});
    }
}

TEST(NeutralRoundTrip, ValueCommentsAreModelEquality) {
    Quantity a = testing::q("FEV1", 2.5, "L", GasCondition::btps);
    Quantity b = a;
    b.comments.push_back("x");
    EXPECT_NE(a, b);
}

TEST(NeutralRoundTrip, OlderMinorVersionsStillRead) {
    // schemas/README.md: a minor version only adds optional content, so 1.0 and
    // 1.1 documents read as before and keep their version.
    for (const char* version : {"1.0", "1.1"}) {
        SCOPED_TRACE(version);
        const std::string xml =
            std::string(R"(<result xmlns="https://pftgw.example/ns/result" schemaVersion=")") +
            version +
            R"("><test type="spirometry"><value kind="FEV1" value="2.5" unit="L" condition="BTPS"/>)"
            R"(<comment>test</comment></test></result>)";
        const ReadOutcome o = read_xml(xml, "old.xml");
        ASSERT_TRUE(o.result) << errors_of(o);
        EXPECT_TRUE(o.findings.empty()) << errors_of(o);
        EXPECT_EQ(o.result->schema_version, version);
        EXPECT_TRUE(o.result->tests.at(0).values.at(0).comments.empty());
        EXPECT_EQ(o.result->tests.at(0).comments, std::vector<std::string>{"test"});
        std::string again;
        write_xml(*o.result, again);
        EXPECT_NE(again.find(std::string("schemaVersion=\"") + version + "\""), std::string::npos);
    }
    // A result made by a reader of another format says the version the writers follow.
    EXPECT_EQ(NeutralResult{}.schema_version, "1." + std::to_string(kSchemaMinor));
}
}  // namespace
}  // namespace pftgw::neutral
