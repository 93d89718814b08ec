// What the physiology engine and the reference policy add, as it reaches HL7:
// grades as NTE and ST OBX (99PFTGW FEV1.grade, FVC.grade, DLCO.grade),
// repeatability and recomputation findings as NTE where their path points,
// adjustment notes, both reference sets named, the OBX-8 set rule and the
// z-score band text. Inputs are built by the core (normalize,
// assess_physiology, apply_reference_values) from demo-lab sessions and the
// example result; expected values are read from what the core produced.
// Field numbers: HL7 2.5.1 segment definitions in npm hl7v2-dictionary 1.8.0.
#include <gtest/gtest.h>

#include <fstream>
#include <sstream>
#include <string>

#include "adapters/hl7v2/oru_writer.hpp"
#include "adapters/neutral/neutral_io.hpp"
#include "gateway/core/normalize.hpp"
#include "gateway/core/physiology/physiology.hpp"
#include "gateway/core/reference/reference_values.hpp"
#include "hl7_split.hpp"
#include "tests/support/examples.hpp"

namespace pftgw::hl7v2 {
namespace {

using testing::parse_message;
using testing::Segment;

std::string write(const NeutralResult& r) {
    std::string out;
    write_oru_r01(r, {}, quantity_table(), out);
    return out;
}

// A demo-lab session read, normalized and assessed as the pipeline does.
NeutralResult assessed_sample(const std::string& name) {
    std::ifstream in(std::string(PFTGW_SOURCE_DIR) + "/samples/lab/" + name, std::ios::binary);
    std::stringstream bytes;
    bytes << in.rdbuf();
    const bool json = name.size() > 5 && name.substr(name.size() - 5) == ".json";
    auto read = json ? neutral::read_json(bytes.str(), name) : neutral::read_xml(bytes.str(), name);
    EXPECT_TRUE(read.result.has_value()) << name;
    if (!read.result) return {};
    NeutralResult r = std::move(*read.result);
    normalize(r, quantity_table());
    assess_physiology(r);
    return r;
}

const Finding* finding(const NeutralResult& r, std::string_view rule, std::size_t nth = 0) {
    for (const auto& f : r.findings)
        if (f.rule == rule && nth-- == 0) return &f;
    return nullptr;
}

std::string unescaped_notes(const std::string& message) {
    std::string all;
    for (const auto& s : parse_message(message))
        if (s.id == "NTE") all += s.field(3) + "\n";
    return all;
}

// The segments of OBR group `test` (0-based), OBR included.
std::vector<Segment> group(const std::vector<Segment>& all, int test) {
    std::vector<Segment> out;
    int at = -1;
    for (const auto& s : all) {
        if (s.id == "OBR") ++at;
        if (at == test && s.id != "ORC") out.push_back(s);
    }
    return out;
}

// Grades: one ST OBX per graded quantity, in 99PFTGW, value = the finding's grade.
TEST(OruPhysiology, SpirometryGradesAsObxAndNote) {
    const auto r = assessed_sample("2026-03-24-andersby-spirometry-not-repeatable.xml");
    const Finding* grade = finding(r, "quality.grade");
    ASSERT_NE(grade, nullptr);
    ASSERT_EQ(grade->values.size(), 2u);
    const auto msg = parse_message(write(r));
    const auto g = group(msg, 0);
    int grades = 0;
    for (const auto& [name, value] : grade->values) {
        bool found = false;
        for (const auto& s : g) {
            if (s.id != "OBX" || s.component(3, 1) != name + ".grade") continue;
            found = true;
            EXPECT_EQ(s.field(2), "ST");
            EXPECT_EQ(s.component(3, 3), "99PFTGW");
            EXPECT_EQ(s.field(5), value);
            EXPECT_EQ(s.field(8), "");  // a grade is never a flag
            EXPECT_EQ(s.field(11), "F");
            ++grades;
        }
        EXPECT_TRUE(found) << name;
    }
    EXPECT_EQ(grades, 2);
    // The grade finding is also an NTE of the OBR (its path is tests[0]).
    bool under_obr = false;
    for (std::size_t i = 1; i < g.size() && g[i].id == "NTE"; ++i)
        if (g[i].field(3).find("Info quality.grade at tests[0]: " + grade->message) !=
            std::string::npos)
            under_obr = true;
    EXPECT_TRUE(under_obr);
}

// A repeatability warning with path tests[0].values[FEV1] sits under the FEV1 OBX.
TEST(OruPhysiology, RepeatabilityUnderItsObservation) {
    const auto r = assessed_sample("2026-03-24-andersby-spirometry-not-repeatable.xml");
    const Finding* rep = finding(r, "quality.spirometry.repeatability");
    ASSERT_NE(rep, nullptr);
    ASSERT_EQ(rep->path, "tests[0].values[FEV1]");
    const auto msg = parse_message(write(r));
    bool under_fev1 = false;
    std::string current;
    for (const auto& s : msg) {
        if (s.id == "OBX") current = s.component(3, 2);
        if (s.id == "NTE" && s.field(3).find(rep->message) != std::string::npos)
            under_fev1 = current == "Forced expiratory volume in 1 second";
    }
    EXPECT_TRUE(under_fev1);
}

// DLCO: the recomputation mismatch (dlco.recompute-mismatch, "DLCO sent ...,
// recomputed from your maneuver ...") and the grade and repeatability travel.
TEST(OruPhysiology, DlcoMismatchGradeAndRepeatability) {
    const auto r = assessed_sample("2026-03-23-ilvesson-dlco-maneuvers.xml");
    const Finding* mismatch = finding(r, "dlco.recompute-mismatch");
    const Finding* grade = finding(r, "quality.grade");
    const Finding* rep = finding(r, "quality.dlco.repeatability");
    ASSERT_NE(mismatch, nullptr);
    ASSERT_NE(grade, nullptr);
    ASSERT_NE(rep, nullptr);
    EXPECT_EQ(mismatch->message.rfind("DLCO sent ", 0), 0u);
    const std::string m = write(r);
    const std::string notes = unescaped_notes(m);
    EXPECT_NE(notes.find("Warning dlco.recompute-mismatch"), std::string::npos);
    std::string escaped_message;
    append_escaped(mismatch->message, escaped_message);
    EXPECT_NE(m.find(escaped_message), std::string::npos);
    EXPECT_NE(m.find(rep->rule + " at " + rep->path), std::string::npos);
    const auto msg = parse_message(m);
    bool graded = false;
    for (const auto& s : msg)
        if (s.id == "OBX" && s.component(3, 1) == "DLCO.grade") {
            graded = true;
            ASSERT_EQ(grade->values.size(), 1u);
            EXPECT_EQ(grade->values[0].first, "DLCO");
            EXPECT_EQ(s.field(5), grade->values[0].second);
        }
    EXPECT_TRUE(graded);
}

// Adjusted values the gateway made say which adjustment made them.
TEST(OruPhysiology, AdjustmentNamedInNote) {
    const auto r = assessed_sample("2026-03-26-delacorte-dlco-hb-cohb.json");
    int checked = 0;
    const std::string m = write(r);
    for (const auto& t : r.tests)
        for (const auto& q : t.values) {
            if (q.origin != Origin::gateway || q.kind.rfind("DLCO_", 0) != 0) continue;
            ASSERT_TRUE(q.derivation.has_value()) << q.kind;
            std::string want = "Computed by the gateway from ";
            for (std::size_t i = 0; i < q.derived_from.size(); ++i)
                want += (i ? ", " : "") + q.derived_from[i];
            want += ": " + q.derivation->steps;
            std::string escaped;
            append_escaped(want, escaped);
            EXPECT_NE(m.find(escaped), std::string::npos) << q.kind;
            ++checked;
        }
    EXPECT_GE(checked, 1);  // the session sends Hb and COHb
}

// Info findings outside quality.* / adjust.* stay for `check`.
TEST(OruPhysiology, OtherInfoFindingsStayOut) {
    auto r = assessed_sample("2026-03-23-ilvesson-dlco-maneuvers.xml");
    const Finding* recomputed = finding(r, "dlco.recomputed");
    ASSERT_NE(recomputed, nullptr);
    std::string escaped;
    append_escaped(recomputed->message, escaped);
    EXPECT_EQ(write(r).find(escaped), std::string::npos);
}

// Issue 5: the device's set and the gateway's GLI set both go out, each named
// in its NTE and in OBX-17 of its predicted OBX; OBX-7 / OBX-8 use the
// gateway's set when the policy computed one, else the first set.
TEST(OruPhysiology, BothReferenceSetsAndTheFlagSet) {
    auto r = pftgw::testing::example_normalized_result();
    Quantity& fev1 = r.tests[0].values[0];
    ASSERT_EQ(fev1.kind, "FEV1");
    // A device set whose LLN lies above the value: it alone would flag L.
    fev1.reference[0].equation_set = "Old device set";
    fev1.reference[0].lln = *fev1.value + 0.5;
    const std::string device_only = write(r);
    const auto dmsg = parse_message(device_only);
    for (const auto& s : dmsg)
        if (s.id == "OBX" && s.component(3, 1) == "20150-9" && s.field(4).empty())
            EXPECT_EQ(s.field(8), "L");

    ReferencePolicy policy;
    policy.mode = ReferenceMode::both;
    apply_reference_values(r, policy);
    ASSERT_EQ(fev1.reference.size(), 2u);
    const ReferenceValues& gli = fev1.reference[1];
    ASSERT_EQ(gli.origin, Origin::gateway);
    const int decimals = quantity_table().find("FEV1")->decimals_si;
    // The two sets must disagree, or the test could not tell which one was used.
    ASSERT_NE(abnormal_flag(*fev1.value, gli.lln, gli.uln, decimals), "L");
    const std::string m = write(r);
    const auto msg = parse_message(m);
    for (const auto& s : msg) {
        if (s.id != "OBX") continue;
        if (s.component(3, 1) == "20150-9" && s.field(4).empty()) {
            EXPECT_EQ(s.field(8), abnormal_flag(*fev1.value, gli.lln, gli.uln, decimals));
            char lln[32], uln[32];
            std::snprintf(lln, sizeof lln, "%.*f", decimals, *gli.lln);
            std::snprintf(uln, sizeof uln, "%.*f", decimals, *gli.uln);
            EXPECT_EQ(s.field(7), std::string(lln) + "-" + uln);
        }
        if (s.component(3, 1) == "20149-1") {  // FEV1 predicted, one per set
            const std::size_t set = s.field(4) == "1" ? 0 : 1;
            const ReferenceValues& ref = fev1.reference[set];
            std::string name = ref.equation_set;
            if (!ref.equation_version.empty()) name += ", version " + ref.equation_version;
            EXPECT_EQ(s.component(17, 2), name);
        }
    }
    EXPECT_NE(m.find("OBX-7 and OBX-8 use reference set 2 (" + gli.equation_set),
              std::string::npos);
    EXPECT_NE(m.find("Reference set 1 (OBX-4 1) for FEV1: Old device set"), std::string::npos);
    EXPECT_NE(m.find("Reference set 2 (OBX-4 2) for FEV1: " + gli.equation_set), std::string::npos);
}

// z-score bands -1.645 / -2.5 / -4.0 (Stanojevic 2022, lung-function-facts.md)
// as text with the caution; OBX-8 stays L / H / N (DECISIONS.md).
TEST(OruPhysiology, ZScoreBandTextNeverAFlag) {
    struct Case {
        double z;
        const char* text;
    };
    const Case cases[] = {
        {-1.60, "from -1.645 to +1.645"},
        {-2.49, "from -2.5 to below -1.645 (Stanojevic 2022 band: mild)"},
        {-2.50, "from -2.5 to below -1.645 (Stanojevic 2022 band: mild)"},
        {-2.51, "from -4.0 to below -2.5 (Stanojevic 2022 band: moderate)"},
        {-4.00, "from -4.0 to below -2.5 (Stanojevic 2022 band: moderate)"},
        {-4.01, "below -4.0 (Stanojevic 2022 band: severe)"},
        {1.70, "above +1.645"},
    };
    for (const Case& c : cases) {
        auto r = pftgw::testing::example_normalized_result();
        r.tests[0].values[0].reference[0].z_score = c.z;
        const std::string m = write(r);
        const auto at = m.find("|O|z-score ");  // the band note, not the caution
        ASSERT_NE(at, std::string::npos);
        const std::string note = m.substr(at, m.find('\r', at) - at);
        EXPECT_NE(note.find(c.text), std::string::npos) << c.z << ": " << note;
        EXPECT_NE(note.find("interpretation belongs to licensed staff"), std::string::npos);
        for (const auto& s : parse_message(m))
            if (s.id == "OBX") {
                EXPECT_NE(s.field(8), "LL");
                EXPECT_NE(s.field(8), "HH");
            }
    }
}

}  // namespace
}  // namespace pftgw::hl7v2
