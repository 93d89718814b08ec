// The physiology engine over a neutral result (gateway/core/physiology/physiology.hpp).
// Invented sessions. The expected DLCO is the hand-worked maneuver of
// physiology_dlco_test.cpp (facts-file formulas, flag M): 26.2045 mL/min/mm[Hg],
// 8.7728 mmol/min/kPa.
#include "gateway/core/physiology/physiology.hpp"

#include <gtest/gtest.h>

#include <algorithm>

#include "gateway/core/gas.hpp"
#include "gateway/core/normalize.hpp"
#include "gateway/core/quantity_table.hpp"
#include "gateway/core/units.hpp"
#include "tests/support/examples.hpp"

namespace pftgw {
namespace {

using testing::q;
using testing::ts;
constexpr GasCondition kNone = GasCondition::none;
constexpr GasCondition kBtps = GasCondition::btps;

Trial dlco_trial(int n, int minute) {
    Trial t;
    t.number = n;
    t.time = ts(2026, 3, 14, 9, minute, 0, 60);
    t.tracer = "helium";
    t.values = {q("VI", 4.50, "L", kBtps),          q("VD_INSTR", 100, "mL", kNone),
                q("VD_ANAT", 0.15, "L", kBtps),     q("FICO", 0.30, "%", kNone),
                q("FACO", 0.12, "%", kNone),        q("FITR", 10.0, "%", kNone),
                q("FATR", 8.5, "%", kNone),         q("T_INSP_START", 0.0, "s", kNone),
                q("T_INSP_END", 2.0, "s", kNone),   q("T_SAMPLE_START", 10.2, "s", kNone),
                q("T_SAMPLE_END", 11.0, "s", kNone)};
    return t;
}

NeutralResult session(double pb_mmhg = 760.0) {
    NeutralResult r;
    r.id = "TEST-PHYS-1";
    r.session_time = ts(2026, 3, 14, 9, 0, 0, 60);
    r.subject.sex_at_birth = SexAtBirth::female;
    r.subject.birth_date = Date{1970, 5, 1};
    r.environment.temperature = q("AMB_TEMP", 22.0, "Cel", kNone);
    r.environment.pressure = q("PB", pb_mmhg, "mm[Hg]", kNone);
    pftgw::Test spiro;
    spiro.type = TestType::spirometry;
    spiro.values.push_back(q("FVC", 5.00, "L", kBtps));  // VI/VC = 4.50 / 5.00 = 0.90
    r.tests.push_back(spiro);
    pftgw::Test dl;
    dl.type = TestType::diffusing_capacity;
    dl.method = "single-breath";
    dl.trials = {dlco_trial(1, 0), dlco_trial(2, 5)};
    r.tests.push_back(dl);
    return r;
}

const Quantity* find(const std::vector<Quantity>& vs, const std::string& kind) {
    for (const auto& v : vs)
        if (v.kind == kind) return &v;
    return nullptr;
}

std::vector<const Finding*> with_rule(const std::vector<Finding>& fs, const std::string& rule) {
    std::vector<const Finding*> out;
    for (const auto& f : fs)
        if (f.rule == rule) out.push_back(&f);
    return out;
}

std::string value_of(const Finding& f, const std::string& name) {
    for (const auto& [k, v] : f.values)
        if (k == name) return v;
    return "";
}

TEST(PhysiologyEngine, RecomputesGradesAndReportsFromTheManeuvers) {
    NeutralResult r = session();
    const auto findings = assess_physiology(r);
    const pftgw::Test& dl = r.tests[1];
    for (const Trial& t : dl.trials) {
        const Quantity* d = find(t.values, "DLCO");
        ASSERT_NE(d, nullptr);
        EXPECT_EQ(d->origin, Origin::gateway);
        EXPECT_EQ(d->unit, "mmol/min/kPa");
        EXPECT_NEAR(*d->value, 8.7728, 5e-4);  // hand-worked, see above
        EXPECT_NEAR(*find(t.values, "VA")->value, 5.000, 1e-6);
        EXPECT_NEAR(*find(t.values, "BHT")->value, 10.0, 1e-9);  // Jones-Meade
        EXPECT_NEAR(*find(t.values, "KCO")->value, 1.7546, 5e-4);
    }
    const Quantity* reported = dl.find("DLCO");
    ASSERT_NE(reported, nullptr);
    EXPECT_EQ(reported->origin, Origin::gateway);
    EXPECT_NEAR(*reported->value, 8.7728, 5e-4);
    EXPECT_EQ(reported->trials, (std::vector<int>{1, 2}));
    EXPECT_NE(dl.find("VA"), nullptr);
    EXPECT_NE(dl.find("KCO"), nullptr);

    const auto grades = with_rule(findings, "quality.grade");
    ASSERT_EQ(grades.size(), 1u);
    EXPECT_EQ(value_of(*grades[0], "DLCO"), "A");
    EXPECT_EQ(grades[0]->severity, Severity::info);
    const auto maneuvers = with_rule(findings, "quality.dlco.maneuver");
    ASSERT_EQ(maneuvers.size(), 2u);
    // Five minutes apart: the >= 4 min interval holds, nothing failed.
    EXPECT_EQ(value_of(*maneuvers[1], "failed"), "");
    EXPECT_EQ(with_rule(findings, "quality.dlco.repeatability")[0]->severity, Severity::info);
    EXPECT_TRUE(with_rule(findings, "dlco.recompute-mismatch").empty());
    // Sea level: no altitude adjustment (PIO2 149.7 mmHg).
    EXPECT_EQ(dl.find("DLCO_ALT"), nullptr);
    // Every finding is also in the result.
    for (const auto& f : findings)
        EXPECT_NE(std::find(r.findings.begin(), r.findings.end(), f), r.findings.end());
}

TEST(PhysiologyEngine, SaysWhenTheSentDlcoDoesNotFollowFromTheManeuver) {
    NeutralResult r = session();
    r.tests[1].trials[1].values.push_back(q("DLCO", 22.3, "mL/min/mm[Hg]", GasCondition::stpd));
    const auto findings = assess_physiology(r);
    const auto mismatch = with_rule(findings, "dlco.recompute-mismatch");
    ASSERT_EQ(mismatch.size(), 1u);
    EXPECT_EQ(mismatch[0]->severity, Severity::warning);
    EXPECT_NE(mismatch[0]->message.find(
                  "DLCO sent 22.3, recomputed from your maneuver 26.2 mL/min/mm[Hg]"),
              std::string::npos)
        << mismatch[0]->message;
    EXPECT_EQ(value_of(*mismatch[0], "DLCO.sent"), "22.3");
    // The device's own per-maneuver value is kept, not overwritten.
    EXPECT_EQ(*find(r.tests[1].trials[1].values, "DLCO")->value, 22.3);
    // 26.2 vs 22.3 is 3.9 apart: not repeatable.
    EXPECT_EQ(with_rule(findings, "quality.dlco.repeatability")[0]->severity, Severity::warning);
}

// A device that leaves VA at BTPS in the DLCO formula sends DLCO / 0.8262 at
// 760 mmHg: BTPS -> STPD = (760 - 47) / 760 x 273.15 / 310.15 = 0.93816 x 0.88070
// = 0.82624 (lung-function-facts.md "Gas conditions", D); 26.2045 / 0.82624 = 31.72.
TEST(PhysiologyEngine, MismatchNamesTheInputsAndAKnownSlip) {
    NeutralResult r = session();
    r.tests[1].trials[0].values.push_back(q("DLCO", 31.7, "mL/min/mm[Hg]", GasCondition::stpd));
    const auto findings = assess_physiology(r);
    const auto mismatch = with_rule(findings, "dlco.recompute-mismatch");
    ASSERT_EQ(mismatch.size(), 1u);
    const std::string& m = mismatch[0]->message;
    EXPECT_NE(m.find("DLCO sent 31.7, recomputed from your maneuver 26.2 mL/min/mm[Hg]"),
              std::string::npos)
        << m;
    // 31.7 / 26.2045 = 1.2097; the inputs as used: VA 5.000 L BTPS, 5 x 0.82624 = 4.131 L
    // STPD, dead space 0.100 + 0.150 L, Jones-Meade 10.0 s, 760 mmHg = 101.32 kPa.
    EXPECT_NE(m.find("sent / recomputed 1.210"), std::string::npos) << m;
    EXPECT_NE(m.find("VA 5.000 L BTPS (4.131 L STPD), dead space 0.250 L, breath-hold 10.00 s"),
              std::string::npos)
        << m;
    EXPECT_NE(m.find("1 / the BTPS-to-STPD factor 0.8262"), std::string::npos) << m;
    EXPECT_NEAR(std::stod(value_of(*mismatch[0], "ratio")), 31.7 / 26.2045, 5e-4);
}

TEST(PhysiologyEngine, NoSlipNamedForAnOrdinaryMismatch) {
    NeutralResult r = session();
    // 22.3 / 26.2045 = 0.851: neither 0.826 nor 1 / 0.826 within 1 %.
    r.tests[1].trials[1].values.push_back(q("DLCO", 22.3, "mL/min/mm[Hg]", GasCondition::stpd));
    const auto mismatch = with_rule(assess_physiology(r), "dlco.recompute-mismatch");
    ASSERT_EQ(mismatch.size(), 1u);
    EXPECT_EQ(mismatch[0]->message.find("BTPS-to-STPD factor"), std::string::npos)
        << mismatch[0]->message;
}

// The reported DLCO is the mean of the device's maneuver values; when those do
// not follow from their data, the reported value does not either.
TEST(PhysiologyEngine, ReportedDlcoAgainstTheRecomputedMean) {
    NeutralResult r = session();
    for (Trial& t : r.tests[1].trials)
        t.values.push_back(q("DLCO", 31.7, "mL/min/mm[Hg]", GasCondition::stpd));
    r.tests[1].values.push_back(q("DLCO", 31.7, "mL/min/mm[Hg]", GasCondition::stpd));
    const auto findings = assess_physiology(r);
    const Finding* at_test = nullptr;
    for (const Finding* f : with_rule(findings, "dlco.recompute-mismatch"))
        if (f->path == "tests[1].values[DLCO]") at_test = f;
    ASSERT_NE(at_test, nullptr);
    EXPECT_EQ(at_test->severity, Severity::warning);
    // Both maneuvers recompute to 26.2045 (hand-worked above): mean 26.2.
    EXPECT_NE(at_test->message.find("reported DLCO 31.7 mL/min/mm[Hg]"), std::string::npos)
        << at_test->message;
    EXPECT_NE(at_test->message.find("their mean is 26.2 mL/min/mm[Hg]"), std::string::npos)
        << at_test->message;
    EXPECT_EQ(value_of(*at_test, "trials"), "1, 2");
    // The device's mean of its own values is 31.7: no dlco.reported-mismatch.
    EXPECT_TRUE(with_rule(findings, "dlco.reported-mismatch").empty());
    // Nothing is overwritten.
    EXPECT_EQ(*r.tests[1].find("DLCO")->value, 31.7);
}

TEST(PhysiologyEngine, ReportedDlcoThatFollowsIsQuiet) {
    NeutralResult r = session();
    r.tests[1].values.push_back(q("DLCO", 26.2, "mL/min/mm[Hg]", GasCondition::stpd));
    EXPECT_TRUE(with_rule(assess_physiology(r), "dlco.recompute-mismatch").empty());
}

// A value that went to SI and back (normalize, then read in the traditional
// unit) is shown as sent: 24.2 / 2.987 x 2.987 is 24.200000000000003 in binary.
TEST(PhysiologyEngine, FindingValuesReadAsSent) {
    NeutralResult r = session();
    r.tests[1].trials[1].values.push_back(
        q("DLCO", 24.2 / kDlcoTraditionalPerSi, "mmol/min/kPa", GasCondition::stpd));
    // 24.2 vs 26.2045: 2.0 apart, inside 10 %; a strict tolerance makes it a mismatch.
    PhysiologyOptions strict;
    strict.dlco_tolerance_fraction = 0.01;
    const auto mismatch = with_rule(assess_physiology(r, strict), "dlco.recompute-mismatch");
    ASSERT_EQ(mismatch.size(), 1u);
    EXPECT_EQ(value_of(*mismatch[0], "DLCO.sent"), "24.2");
}

TEST(PhysiologyEngine, WithinToleranceIsNotAMismatch) {
    NeutralResult r = session();
    // 24.1 vs 26.2: 2.1 apart, inside 10 % of 24.1 = 2.41 (the default tolerance).
    r.tests[1].trials[1].values.push_back(q("DLCO", 24.1, "mL/min/mm[Hg]", GasCondition::stpd));
    EXPECT_TRUE(with_rule(assess_physiology(r), "dlco.recompute-mismatch").empty());
    PhysiologyOptions strict;
    strict.dlco_tolerance_fraction = 0.05;
    NeutralResult r2 = session();
    r2.tests[1].trials[1].values.push_back(q("DLCO", 24.1, "mL/min/mm[Hg]", GasCondition::stpd));
    EXPECT_EQ(with_rule(assess_physiology(r2, strict), "dlco.recompute-mismatch").size(), 1u);
}

TEST(PhysiologyEngine, ConvertingBeforeOrAfterGivesTheSameDlco) {
    // The same maneuver once as sent (mL, %, mm[Hg], VI at ATPD 22 Cel) and once
    // normalized first: the gateway DLCO agrees within rounding.
    NeutralResult raw = session();
    const double atpd_to_btps = *gas_condition_factor(GasCondition::atpd, GasCondition::btps,
                                                      Ambient{22.0, 760.0 * kKpaPerMmHg});
    for (Trial& t : raw.tests[1].trials)
        for (Quantity& v : t.values)
            if (v.kind == "VI") v = q("VI", 4500.0 / atpd_to_btps, "mL", GasCondition::atpd);
    NeutralResult normalized = raw;
    normalize(normalized, quantity_table());
    assess_physiology(raw);
    assess_physiology(normalized);
    EXPECT_NEAR(*raw.tests[1].find("DLCO")->value, 8.7728, 5e-4);
    EXPECT_NEAR(*normalized.tests[1].find("DLCO")->value, *raw.tests[1].find("DLCO")->value, 1e-9);
    // Rendered in traditional units: x 2.987 (DECISIONS.md), 26.2045.
    const NeutralResult trad = render_units(normalized, UnitSystem::traditional, quantity_table());
    EXPECT_EQ(trad.tests[1].find("DLCO")->unit, "mL/min/mm[Hg]");
    EXPECT_NEAR(*trad.tests[1].find("DLCO")->value, 26.2045, 5e-3);
}

TEST(PhysiologyEngine, AnatomicDeadSpaceFromBodyMass) {
    NeutralResult r = session();
    // 2.2 mL/kg (from memory) x 68.1818 kg = 0.15 L: the same VA as a sent VD_ANAT of 0.15 L.
    r.subject.weight = q("WEIGHT", 0.15 / 0.0022, "kg", kNone);
    for (Trial& t : r.tests[1].trials)
        t.values.erase(std::remove_if(t.values.begin(), t.values.end(),
                                      [](const Quantity& v) { return v.kind == "VD_ANAT"; }),
                       t.values.end());
    assess_physiology(r);
    EXPECT_NEAR(*find(r.tests[1].trials[0].values, "VA")->value, 5.0, 1e-9);
}

TEST(PhysiologyEngine, MissingInputsAreNamed) {
    NeutralResult r = session();
    r.tests[1].trials.resize(1);
    auto& v = r.tests[1].trials[0].values;
    v.erase(std::remove_if(v.begin(), v.end(), [](const Quantity& x) { return x.kind == "FATR"; }),
            v.end());
    const auto findings = assess_physiology(r);
    const auto f = with_rule(findings, "dlco.not-recomputed");
    ASSERT_EQ(f.size(), 1u);
    EXPECT_NE(f[0]->message.find("FATR not sent"), std::string::npos);
}

TEST(PhysiologyEngine, ManeuversTooCloseAndBreathHoldTooShort) {
    NeutralResult r = session();
    r.tests[1].trials[1].time = ts(2026, 3, 14, 9, 3, 0, 60);  // 3 min after the first
    for (Quantity& v : r.tests[1].trials[1].values)
        if (v.kind == "T_SAMPLE_START") v.value = 7.0;  // mid-sample 9.0 s: BHT 8.4 s
    for (Quantity& v : r.tests[1].trials[0].values)
        if (v.kind == "T_SAMPLE_START") v.value = 6.0;
    // Trial 1: sample 6.0-11.0 s, 5 s collection, mid 8.5, BHT 7.9 s: grade D.
    const auto findings = assess_physiology(r);
    const auto m = with_rule(findings, "quality.dlco.maneuver");
    ASSERT_EQ(m.size(), 2u);
    EXPECT_EQ(value_of(*m[0], "grade"), "D");
    EXPECT_EQ(value_of(*m[1], "grade"), "A");
    bool interval = false;
    for (const auto& [k, v] : m[1]->values)
        interval = interval || (k == "failed" && v == "interval");
    EXPECT_TRUE(interval);
}

TEST(PhysiologyEngine, AdjustmentsAreQuantitiesOfTheirOwn) {
    NeutralResult r = session(630.0);  // about 1 600 m
    r.tests[1].values.push_back(q("HB", 10.0, "g/dL", kNone));
    r.tests[1].values.push_back(q("COHB", 5.0, "%", kNone));
    assess_physiology(r);
    const pftgw::Test& dl = r.tests[1];
    const double dlco = *dl.find("DLCO")->value;
    // Female: Hbref 13.4 g/dL (V2); (10 + 0.7 x 13.4) / (1.7 x 10) = 19.38 / 17.
    ASSERT_NE(dl.find("DLCO_HB"), nullptr);
    EXPECT_NEAR(*dl.find("DLCO_HB")->value, dlco * 19.38 / 17.0, 1e-9);
    // COHb 5 % (from memory): x 100 / 97.
    EXPECT_NEAR(*dl.find("DLCO_COHB")->value, dlco * 100.0 / 97.0, 1e-9);
    EXPECT_EQ(dl.find("DLCO_COHB")->derived_from, (std::vector<std::string>{"DLCO", "COHB"}));
    // PB 630 mmHg (from memory): x 0.914533.
    EXPECT_NEAR(*dl.find("DLCO_ALT")->value, dlco * 0.914533, 1e-6);
    EXPECT_EQ(dl.find("DLCO_ALT")->origin, Origin::gateway);
    // The measured value is untouched: the hand-worked DLCO does not depend on PB.
    EXPECT_NEAR(dlco, 8.7728, 5e-4);
}

TEST(PhysiologyEngine, RunningTwiceChangesNothing) {
    NeutralResult r = session();
    assess_physiology(r);
    const NeutralResult once = r;
    assess_physiology(r);
    EXPECT_EQ(r, once);
}

Trial spiro_trial(int n, double fev1, double fvc) {
    Trial t;
    t.number = n;
    t.values = {q("FEV1", fev1, "L", kBtps), q("FVC", fvc, "L", kBtps),
                q("BEV", 0.05, "L", kBtps),  q("EOTV", 0.01, "L", kBtps),
                q("FET", 9.0, "s", kNone),   q("PEF", 8.0 + n, "L/s", kBtps)};
    return t;
}

TEST(PhysiologyEngine, SpirometryGradesAndReportedValues) {
    NeutralResult r;
    r.subject.birth_date = Date{1980, 1, 1};
    r.session_time = ts(2026, 3, 14, 9, 0, 0, 60);
    pftgw::Test s;
    s.type = TestType::spirometry;
    s.trials = {spiro_trial(1, 3.10, 4.00), spiro_trial(2, 3.20, 3.92), spiro_trial(3, 3.05, 3.86)};
    r.tests.push_back(s);
    const auto findings = assess_physiology(r);
    const auto g = with_rule(findings, "quality.grade");
    ASSERT_EQ(g.size(), 1u);
    EXPECT_EQ(value_of(*g[0], "FEV1"), "A");  // 3.20 vs 3.10: 0.100 L
    EXPECT_EQ(value_of(*g[0], "FVC"), "A");   // 4.00 vs 3.92: 0.080 L
    const pftgw::Test& t = r.tests[0];
    EXPECT_DOUBLE_EQ(*t.find("FEV1")->value, 3.20);
    EXPECT_EQ(t.find("FEV1")->trials, (std::vector<int>{2}));
    EXPECT_DOUBLE_EQ(*t.find("FVC")->value, 4.00);
    EXPECT_EQ(t.find("FVC")->trials, (std::vector<int>{1}));
    // Flows from the largest FEV1 + FVC: trial 2 (sums 7.10, 7.12, 6.91).
    EXPECT_DOUBLE_EQ(*t.find("PEF")->value, 10.0);
    EXPECT_EQ(t.find("PEF")->trials, (std::vector<int>{2}));
}

TEST(PhysiologyEngine, ReportedSpirometryThatIsNotTheLargest) {
    NeutralResult r;
    pftgw::Test s;
    s.type = TestType::spirometry;
    s.values = {q("FEV1", 3.10, "L", kBtps), q("FVC", 4.00, "L", kBtps)};
    s.trials = {spiro_trial(1, 3.10, 4.00), spiro_trial(2, 3.20, 3.95)};
    r.tests.push_back(s);
    const auto findings = assess_physiology(r);
    const auto f = with_rule(findings, "spirometry.reported-not-largest");
    ASSERT_EQ(f.size(), 1u);
    EXPECT_EQ(f[0]->path, "tests[0].values[FEV1]");
    EXPECT_EQ(*r.tests[0].find("FEV1")->value, 3.10);  // never overwritten
}

TEST(PhysiologyEngine, LungVolumes) {
    NeutralResult r;
    pftgw::Test lv;
    lv.type = TestType::lung_volumes;
    lv.method = "body-plethysmography";
    lv.values = {q("TLC", 6.00, "L", kBtps), q("FRC", 3.00, "L", kBtps), q("IC", 2.50, "L", kBtps)};
    for (int n = 1; n <= 3; ++n) {
        Trial t;
        t.number = n;
        t.values = {q("FRC", 2.85 + 0.1 * n, "L", kBtps)};  // 2.95, 3.05, 3.15: 6.6 %
        lv.trials.push_back(t);
    }
    r.tests.push_back(lv);
    const auto findings = assess_physiology(r);
    const auto id = with_rule(findings, "lung-volumes.identity");
    ASSERT_EQ(id.size(), 1u);
    EXPECT_EQ(value_of(*id[0], "identity"), "TLC = FRC + IC");
    const auto frc = with_rule(findings, "quality.frc-repeatability");
    ASSERT_EQ(frc.size(), 1u);
    EXPECT_EQ(frc[0]->severity, Severity::warning);
}

}  // namespace
}  // namespace pftgw
