// Input for the outside-reference checks in tests/conformance/
// (hl7_python_check.py with Debian python3-hl7, hl7_dictionary_check.mjs with
// npm hl7v2-dictionary 1.8.0): the example result and a few variants as .hl7,
// each with a neutral JSON of the same result (same base name) holding just
// what the python check reads: tests[].values[] {kind, value | absent, unit},
// tests[].comments[], findings[] {rule, severity, message}.
//
// Files are written only when PFTGW_HL7_DUMP_DIR names a folder. This stands in
// until `pftgw convert --to hl7v2` and `--to neutral-json` exist; the CLI-based
// run (tests/conformance/run.sh) replaces it in CI. Without the variable the
// test still checks each variant here: every measured OBX reads back as the
// neutral value rounded to the OBX's decimals, with the neutral unit.
#include <gtest/gtest.h>

#include <cstdlib>
#include <fstream>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "adapters/hl7v2/oru_writer.hpp"
#include "gateway/core/quantity_table.hpp"
#include "hl7_split.hpp"
#include "tests/support/examples.hpp"

namespace pftgw::hl7v2 {
namespace {

struct Variant {
    std::string name;  // base file name
    NeutralResult result;
    OruOptions options;
};

std::vector<Variant> variants() {
    std::vector<Variant> out;
    auto base = pftgw::testing::example_normalized_result();
    out.push_back({base.id, base, {}});

    auto corrected = base;
    corrected.revision = 2;
    corrected.status = ResultStatus::corrected;
    corrected.tests[0].values[0].value = 2.64;
    out.push_back({corrected.id + ".r2", corrected, {}});

    // Traditional rendering as render_units gives it: the DLCO family in
    // mL/min/mm[Hg] with the factor 2.987 (DECISIONS.md).
    constexpr double kDlcoFactor = 2.987;
    auto trad = pftgw::testing::example_normalized_result(3);
    for (auto& q : trad.tests[2].values) {
        if (q.kind != "DLCO" && q.kind != "DLCO_HB" && q.kind != "KCO") continue;
        q.value = *q.value * kDlcoFactor;
        q.unit = q.kind == "KCO" ? "mL/min/mm[Hg]/L" : "mL/min/mm[Hg]";
        for (auto& r : q.reference) {
            r.predicted = *r.predicted * kDlcoFactor;
            r.lln = *r.lln * kDlcoFactor;
            r.uln = *r.uln * kDlcoFactor;
        }
    }
    OruOptions trad_options;
    trad_options.units = UnitSystem::traditional;
    trad_options.target = "hl7v2-traditional";
    out.push_back({trad.id, trad, trad_options});

    // Text with every delimiter, the escape character, CR, LF and UTF-8.
    auto text = pftgw::testing::example_normalized_result(4);
    text.subject.family_name = "Brandvold|Aas^Jr & Co";
    text.tests[0].comments.push_back("Pipe | caret ^ amp & tilde ~ backslash \\ done");
    text.tests[0].comments.push_back("Line one\r\nline two\nline three\rend; looks escaped: \\F\\");
    text.tests[1].comments.push_back("Tr\xc3\xa6ning efter r\xc3\xb8getest \xe2\x80\x94 ok");
    out.push_back({text.id, text, {}});

    // An absent value (never a 0) and a preliminary result.
    auto absent = pftgw::testing::example_normalized_result(5);
    absent.status = ResultStatus::preliminary;
    absent.tests[0].values[3].value.reset();
    absent.tests[0].values[3].absent_reason = "not-measured";
    out.push_back({absent.id, absent, {}});
    return out;
}

nlohmann::json neutral_json(const NeutralResult& r) {
    nlohmann::json j;
    j["id"] = r.id;
    j["revision"] = r.revision;
    j["status"] = std::string(to_string(r.status));
    auto& tests = j["tests"] = nlohmann::json::array();
    for (const auto& t : r.tests) {
        nlohmann::json jt;
        jt["type"] = std::string(to_string(t.type));
        jt["values"] = nlohmann::json::array();
        for (const auto& q : t.values) {
            nlohmann::json v;
            v["kind"] = q.kind;
            if (q.value) v["value"] = *q.value;
            if (q.absent_reason) v["absent"] = *q.absent_reason;
            v["unit"] = q.unit;
            jt["values"].push_back(v);
        }
        jt["comments"] = t.comments;
        tests.push_back(jt);
    }
    j["findings"] = nlohmann::json::array();
    for (const auto& f : r.findings)
        j["findings"].push_back({{"rule", f.rule},
                                 {"severity", std::string(to_string(f.severity))},
                                 {"message", f.message}});
    return j;
}

int decimals_of(const std::string& nm) {
    const auto dot = nm.find('.');
    return dot == std::string::npos ? 0 : static_cast<int>(nm.size() - dot - 1);
}

TEST(OruConformanceDump, MeasuredObxMatchNeutralValues) {
    for (const auto& v : variants()) {
        std::string msg;
        write_oru_r01(v.result, v.options, quantity_table(), msg);
        const auto segments = testing::parse_message(msg);
        const nlohmann::json j = neutral_json(v.result);

        // Measured OBX (OBX-4 empty) in order, per OBR group.
        std::vector<std::vector<testing::Segment>> groups;
        for (const auto& s : segments) {
            if (s.id == "OBR") groups.emplace_back();
            if (s.id == "OBX" && s.field(4).empty() && !groups.empty()) groups.back().push_back(s);
        }
        ASSERT_EQ(groups.size(), j["tests"].size()) << v.name;
        for (std::size_t t = 0; t < groups.size(); ++t) {
            const auto& values = j["tests"][t]["values"];
            ASSERT_EQ(groups[t].size(), values.size()) << v.name;
            for (std::size_t i = 0; i < values.size(); ++i) {
                const auto& obx = groups[t][i];
                const auto& jv = values[i];
                if (!jv.contains("value")) {
                    EXPECT_EQ(obx.field(5), "") << v.name;
                    EXPECT_EQ(obx.field(11), "X") << v.name;
                    continue;
                }
                const std::string text = obx.field(5);
                char expected[64];
                std::snprintf(expected, sizeof expected, "%.*f", decimals_of(text),
                              jv["value"].get<double>());
                EXPECT_EQ(text, expected) << v.name << " " << jv["kind"];
                EXPECT_EQ(obx.component(6, 1), jv["unit"].get<std::string>()) << v.name;
                const QuantityKind* k = quantity_table().find(jv["kind"].get<std::string>());
                ASSERT_NE(k, nullptr);
                EXPECT_EQ(decimals_of(text), k->decimals_for(v.options.units)) << jv["kind"];
            }
        }
    }
}

TEST(OruConformanceDump, WritesFilesWhenAsked) {
    const char* dir = std::getenv("PFTGW_HL7_DUMP_DIR");
    const auto all = variants();
    EXPECT_EQ(all.size(), 5u);
    if (!dir || !*dir) GTEST_SKIP() << "PFTGW_HL7_DUMP_DIR not set: no files written";
    for (const auto& v : all) {
        std::string msg;
        write_oru_r01(v.result, v.options, quantity_table(), msg);
        const std::string base = std::string(dir) + "/" + v.name;
        std::ofstream hl7(base + ".hl7", std::ios::binary);
        hl7 << msg;
        std::ofstream json(base + ".json", std::ios::binary);
        json << neutral_json(v.result).dump(2) << '\n';
        EXPECT_TRUE(hl7.good() && json.good()) << base;
    }
}

}  // namespace
}  // namespace pftgw::hl7v2
