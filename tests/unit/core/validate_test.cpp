// Validation rules: completeness per target, plausibility, consistency.
// Inputs are the invented example result (tests/support/examples.hpp) with
// one change each; every tolerance is checked from both sides.
#include "gateway/core/validate.hpp"

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <string>
#include <vector>

#include "tests/support/examples.hpp"

namespace pftgw {
namespace {

using testing::example_normalized_result;

constexpr std::size_t kSpiro = 0;  // test order in the example
constexpr std::size_t kVolumes = 1;
constexpr std::size_t kDiffusion = 2;

std::vector<Finding> check(const NeutralResult& r, Target target = Target::neutral) {
    return validate(r, target, quantity_table());
}

std::vector<Finding> of_rule(const std::vector<Finding>& findings, const std::string& rule) {
    std::vector<Finding> out;
    for (const auto& f : findings)
        if (f.rule == rule) out.push_back(f);
    return out;
}

void set_value(NeutralResult& r, std::size_t test, const char* kind, double v) {
    Quantity* q = r.tests[test].find(kind);
    ASSERT_NE(q, nullptr) << kind;
    q->value = v;
}

// Exactly one finding of `rule`, at `path`, with `severity`.
void expect_one(const std::vector<Finding>& findings, const std::string& rule,
                const std::string& path, Severity severity) {
    const auto hits = of_rule(findings, rule);
    ASSERT_EQ(hits.size(), 1u) << rule;
    EXPECT_EQ(hits[0].path, path);
    EXPECT_EQ(hits[0].severity, severity);
    EXPECT_FALSE(hits[0].message.empty());
    EXPECT_FALSE(hits[0].values.empty() && rule.rfind("complete.", 0) != 0);
}

void expect_none(const std::vector<Finding>& findings, const std::string& rule) {
    EXPECT_TRUE(of_rule(findings, rule).empty()) << rule << ": " << findings.front().message;
}

// ---- the example as given ----

TEST(Validate, ExampleIsCleanForEveryTarget) {
    // The example's own warning in result.findings is not returned again.
    const auto r = example_normalized_result();
    for (Target t : {Target::neutral, Target::hl7v2, Target::fhir}) {
        const auto f = check(r, t);
        EXPECT_TRUE(f.empty()) << f.front().rule << " " << f.front().path << ": "
                               << f.front().message;
    }
}

// ---- completeness ----

TEST(ValidateComplete, Hl7NeedsIdentifierValue) {
    auto r = example_normalized_result();
    r.subject.identifiers[0].value.clear();
    expect_one(check(r, Target::hl7v2), "complete.subject-identifier", "subject.identifiers",
               Severity::error);
    EXPECT_TRUE(check(r, Target::neutral).empty());
}

TEST(ValidateComplete, FhirNeedsSystemAndValueHl7OnlyValue) {
    auto r = example_normalized_result();
    r.subject.identifiers[0].system.clear();
    expect_one(check(r, Target::fhir), "complete.subject-identifier", "subject.identifiers",
               Severity::error);
    expect_none(check(r, Target::hl7v2), "complete.subject-identifier");
}

TEST(ValidateComplete, Hl7NeedsFamilyNameFhirDoesNot) {
    auto r = example_normalized_result();
    r.subject.family_name.clear();
    expect_one(check(r, Target::hl7v2), "complete.subject-name", "subject.name.family",
               Severity::error);
    EXPECT_TRUE(check(r, Target::fhir).empty());
}

TEST(ValidateComplete, SessionOrTestTime) {
    auto r = example_normalized_result();
    r.session_time.reset();  // every test still has its own time
    EXPECT_TRUE(check(r, Target::hl7v2).empty());

    r.tests[kVolumes].time.reset();  // this test has nothing to inherit now
    expect_one(check(r, Target::hl7v2), "complete.time", "tests[1].time", Severity::error);

    for (auto& t : r.tests) t.time.reset();
    expect_one(check(r, Target::hl7v2), "complete.time", "sessionTime", Severity::error);
    expect_one(check(r, Target::fhir), "complete.time", "sessionTime", Severity::error);
    EXPECT_TRUE(check(r, Target::neutral).empty());
}

TEST(ValidateComplete, AtLeastOneValue) {
    auto r = example_normalized_result();
    for (auto& t : r.tests)
        for (auto& q : t.values) {
            q.value.reset();
            q.absent_reason = "not-measured";
        }
    expect_one(check(r, Target::hl7v2), "complete.values", "tests", Severity::error);
    expect_one(check(r, Target::fhir), "complete.values", "tests", Severity::error);
    EXPECT_TRUE(check(r, Target::neutral).empty());  // tests exist: not meaningless
}

TEST(ValidateComplete, NoTestsIsAnErrorEvenForNeutral) {
    auto r = example_normalized_result();
    r.tests.clear();
    for (Target t : {Target::neutral, Target::hl7v2, Target::fhir})
        expect_one(check(r, t), "complete.values", "tests", Severity::error);
}

TEST(ValidateComplete, ResultIdOrDataToDeriveIt) {
    auto r = example_normalized_result();
    r.id.clear();  // device id + session number remain
    EXPECT_TRUE(check(r, Target::fhir).empty());
    r.device.id.clear();  // subject identifier and times remain: content id works
    EXPECT_TRUE(check(r, Target::fhir).empty());
    r.subject.identifiers.clear();
    expect_one(check(r, Target::fhir), "complete.result-id", "id", Severity::error);
    expect_one(check(r, Target::hl7v2), "complete.result-id", "id", Severity::error);
    expect_none(check(r, Target::neutral), "complete.result-id");
}

// ---- plausibility (bounds from schemas/quantities.csv) ----

TEST(ValidatePlausible, MessageAndPath) {
    auto r = example_normalized_result();
    set_value(r, kSpiro, "FEV1", 80);
    const auto f = of_rule(check(r), "plausible.range");
    ASSERT_EQ(f.size(), 1u);
    EXPECT_EQ(f[0].path, "tests[0].values[FEV1]");
    EXPECT_EQ(f[0].severity, Severity::error);
    EXPECT_EQ(f[0].message, "FEV1 = 80.00 L is outside the plausible range 0.05-10.00 L");
    ASSERT_EQ(f[0].values.size(), 1u);
    EXPECT_EQ(f[0].values[0], (std::pair<std::string, std::string>{"FEV1", "80"}));
}

TEST(ValidatePlausible, BoundaryPairs) {
    // FEV1 plausible 0.05-10 L (table row FEV1): the bounds are inside.
    for (double inside : {0.05, 10.0}) {
        auto r = example_normalized_result();
        set_value(r, kSpiro, "FEV1", inside);
        set_value(r, kSpiro, "FVC", 10.0);  // keep FEV1 <= FVC
        expect_none(check(r), "plausible.range");
    }
    for (double outside : {0.049, 10.001}) {
        auto r = example_normalized_result();
        set_value(r, kSpiro, "FEV1", outside);
        set_value(r, kSpiro, "FVC", 11.0);
        expect_one(check(r), "plausible.range", "tests[0].values[FEV1]", Severity::error);
    }
}

TEST(ValidatePlausible, ShowsDigitsTheDisplayWouldHide) {
    auto r = example_normalized_result();
    set_value(r, kSpiro, "FEV1", 10.004);
    set_value(r, kSpiro, "FVC", 11.0);
    const auto f = of_rule(check(r), "plausible.range");
    ASSERT_EQ(f.size(), 1u);
    EXPECT_EQ(f[0].message, "FEV1 = 10.004 L is outside the plausible range 0.05-10.00 L");
}

TEST(ValidatePlausible, SmallAndComputedValuesStayReadable) {
    auto r = example_normalized_result();
    r.tests[kSpiro].find("FEV1")->reference[0].predicted = 0.0025;  // L given as if m3
    set_value(r, kSpiro, "FEV1_FVC", 3.12 / 2.95);                  // a ratio above 1
    const auto f = of_rule(check(r), "plausible.range");
    ASSERT_EQ(f.size(), 2u);
    EXPECT_EQ(f[0].message, "FEV1 pred = 0.0025 L is outside the plausible range 0.05-10.00 L");
    EXPECT_EQ(f[1].message, "FEV1/FVC = 1.057627 is outside the plausible range 0.150-1.000");
}

TEST(ValidatePlausible, ReferenceValuesUseTheirVariantRow) {
    auto r = example_normalized_result();
    r.tests[kDiffusion].find("DLCO")->reference[0].uln = 25;  // DLCO.uln 0.33-20.1
    const auto f = of_rule(check(r), "plausible.range");
    ASSERT_EQ(f.size(), 1u);
    EXPECT_EQ(f[0].path, "tests[2].values[DLCO].reference[0].uln");
    EXPECT_EQ(f[0].values[0].first, "DLCO.uln");
}

TEST(ValidatePlausible, SubjectEnvironmentAndTrials) {
    auto r = example_normalized_result();
    r.subject.height->value = 300;       // HEIGHT 30-250 cm
    r.environment.pressure->value = 30;  // PB 50-110 kPa
    Trial trial;
    trial.number = 1;
    trial.values.push_back(testing::q("FVC", 0.01, "L", GasCondition::btps));
    r.tests[kSpiro].trials.push_back(trial);
    const auto f = of_rule(check(r), "plausible.range");
    ASSERT_EQ(f.size(), 3u);
    EXPECT_EQ(f[0].path, "subject.height");
    EXPECT_EQ(f[1].path, "environment.pressure");
    EXPECT_EQ(f[2].path, "tests[0].trials[0].values[FVC]");
}

TEST(ValidatePlausible, NotANumberIsOutside) {
    auto r = example_normalized_result();
    set_value(r, kSpiro, "PEF", std::numeric_limits<double>::quiet_NaN());
    expect_one(check(r), "plausible.range", "tests[0].values[PEF]", Severity::error);
}

TEST(ValidatePlausible, SkippedWhenNotInCanonicalUnit) {
    // 2610 mL is plausible; normalize() reports the unit, not validate().
    auto r = example_normalized_result();
    Quantity* fev1 = r.tests[kSpiro].find("FEV1");
    fev1->value = 2610;
    fev1->unit = "mL";
    expect_none(check(r), "plausible.range");
}

// ---- FEV1 > FVC: FEV1 is part of the FVC maneuver (ATS/ERS spirometry
// standard, from memory); tolerance 0.005 L = half the 0.01 L display step ----

TEST(ValidateConsistency, Fev1FvcBoundary) {
    auto r = example_normalized_result();  // FVC 3.40 L
    set_value(r, kSpiro, "FEV1", 3.404);
    expect_none(check(r), "consistency.fev1-fvc");
    set_value(r, kSpiro, "FEV1", 3.406);
    expect_one(check(r), "consistency.fev1-fvc", "tests[0].values[FEV1]", Severity::error);
}

TEST(ValidateConsistency, Fev1FvcSkippedAtDifferentConditions) {
    auto r = example_normalized_result();
    set_value(r, kSpiro, "FEV1", 3.6);
    r.tests[kSpiro].find("FEV1")->condition = GasCondition::atps;  // not converted
    expect_none(check(r), "consistency.fev1-fvc");
}

// ---- FEV1/FVC: 2.61 / 3.40 = 0.76765; tolerance 0.011 (two-decimal rounding
// of the parts and the ratio; common practice) ----

TEST(ValidateConsistency, RatioBoundaryAbove) {
    auto r = example_normalized_result();
    set_value(r, kSpiro, "FEV1_FVC", 0.778);  // differs by 0.01035
    expect_none(check(r), "consistency.ratio");
    set_value(r, kSpiro, "FEV1_FVC", 0.779);  // differs by 0.01135
    expect_one(check(r), "consistency.ratio", "tests[0].values[FEV1_FVC]", Severity::warning);
}

TEST(ValidateConsistency, RatioBoundaryBelow) {
    auto r = example_normalized_result();
    set_value(r, kSpiro, "FEV1_FVC", 0.757);  // differs by 0.01065
    expect_none(check(r), "consistency.ratio");
    set_value(r, kSpiro, "FEV1_FVC", 0.756);  // differs by 0.01165
    const auto f = of_rule(check(r), "consistency.ratio");
    ASSERT_EQ(f.size(), 1u);
    EXPECT_EQ(f[0].message,
              "FEV1/FVC sent as 0.756 but FEV1 / FVC = 2.61 L / 3.40 L = 0.7676; expected within "
              "0.011");
}

// ---- KCO = DLCO / VA (lung-function-facts.md, M): 7.10 / 4.80 = 1.479167;
// tolerance 2 % (0.029583) + half a 0.01 display step (0.005) = 0.034583 ----

TEST(ValidateConsistency, KcoBoundaryAbove) {
    auto r = example_normalized_result();
    set_value(r, kDiffusion, "KCO", 1.513);  // differs by 0.033833
    expect_none(check(r), "consistency.kco");
    set_value(r, kDiffusion, "KCO", 1.515);  // differs by 0.035833
    expect_one(check(r), "consistency.kco", "tests[2].values[KCO]", Severity::warning);
}

TEST(ValidateConsistency, KcoBoundaryBelow) {
    auto r = example_normalized_result();
    set_value(r, kDiffusion, "KCO", 1.445);  // differs by 0.034167
    expect_none(check(r), "consistency.kco");
    set_value(r, kDiffusion, "KCO", 1.443);  // differs by 0.036167
    expect_one(check(r), "consistency.kco", "tests[2].values[KCO]", Severity::warning);
}

// ---- TLC = RV + VC (lung-function-facts.md, M): 1.65 + 3.45 = 5.10 L;
// 5 % = 0.255 L (common practice, not a standard's number) ----

TEST(ValidateConsistency, TlcBoundary) {
    auto r = example_normalized_result();
    set_value(r, kVolumes, "TLC", 5.35);  // differs by 0.25
    expect_none(check(r), "consistency.tlc");
    set_value(r, kVolumes, "TLC", 5.36);  // differs by 0.26
    expect_one(check(r), "consistency.tlc", "tests[1].values[TLC]", Severity::warning);
    set_value(r, kVolumes, "TLC", 4.85);
    expect_none(check(r), "consistency.tlc");
    set_value(r, kVolumes, "TLC", 4.84);
    expect_one(check(r), "consistency.tlc", "tests[1].values[TLC]", Severity::warning);
}

TEST(ValidateConsistency, TlcFindsVcInAnotherTest) {
    auto r = example_normalized_result();
    auto& vols = r.tests[kVolumes].values;
    Quantity vc = *r.tests[kVolumes].find("VC");
    vols.erase(std::find(vols.begin(), vols.end(), vc));
    vc.value = 4.0;  // RV 1.65 + 4.00 = 5.65 vs TLC 5.10: 0.55 L > 5 %
    r.tests[kSpiro].values.push_back(vc);
    expect_one(check(r), "consistency.tlc", "tests[1].values[TLC]", Severity::warning);
}

// ---- VI vs the largest VC or FVC: more than 5 % and more than 0.1 L
// (common practice; ERS/ATS 2017 asks VI >= 90 % of VC, lung-function-facts.md V2) ----

TEST(ValidateConsistency, ViVcRelativeBoundary) {
    auto r = example_normalized_result();  // largest is VC 3.45 L: 5 % = 0.1725 L
    set_value(r, kDiffusion, "VI", 3.62);  // 0.17 L more
    expect_none(check(r), "consistency.vi-vc");
    set_value(r, kDiffusion, "VI", 3.63);  // 0.18 L more
    expect_one(check(r), "consistency.vi-vc", "tests[2].values[VI]", Severity::warning);
}

TEST(ValidateConsistency, ViVcAbsoluteBoundary) {
    auto r = example_normalized_result();
    set_value(r, kVolumes, "VC", 1.50);  // 5 % = 0.075 L: the 0.1 L floor applies
    set_value(r, kSpiro, "FVC", 1.40);
    set_value(r, kDiffusion, "VI", 1.59);
    expect_none(check(r), "consistency.vi-vc");
    set_value(r, kDiffusion, "VI", 1.61);
    expect_one(check(r), "consistency.vi-vc", "tests[2].values[VI]", Severity::warning);
}

TEST(ValidateConsistency, ViUsesFvcWhenLarger) {
    auto r = example_normalized_result();
    set_value(r, kSpiro, "FVC", 3.80);  // now the largest: 5 % = 0.19 L
    set_value(r, kSpiro, "FEV1_FVC", 2.61 / 3.80);
    set_value(r, kDiffusion, "VI", 3.98);
    expect_none(check(r), "consistency.vi-vc");
    set_value(r, kDiffusion, "VI", 4.0);
    const auto f = of_rule(check(r), "consistency.vi-vc");
    ASSERT_EQ(f.size(), 1u);
    EXPECT_EQ(f[0].values[1].first, "FVC");
}

// ---- a kind in a test of another type (table column `test`) ----

TEST(ValidateConsistency, TestType) {
    auto r = example_normalized_result();
    r.tests[kSpiro].values.push_back(testing::q("DLCO", 7.1, "mmol/min/kPa", GasCondition::stpd));
    expect_one(check(r), "consistency.test-type", "tests[0].values[DLCO]", Severity::warning);
    const auto ok = example_normalized_result();
    expect_none(check(ok), "consistency.test-type");
}

TEST(ValidateConsistency, SlowVcOnASpirometerIsNotMisplaced) {
    // Common practice: a spirometer measures a slow VC beside the FVC, and
    // VI/VC needs a VC in the diffusing-capacity test. A TLC there still is misplaced.
    auto r = example_normalized_result();
    r.tests[kSpiro].values.push_back(testing::q("VC", 3.5, "L", GasCondition::btps));
    r.tests[kDiffusion].values.push_back(testing::q("VC", 3.5, "L", GasCondition::btps));
    expect_none(check(r), "consistency.test-type");
    r.tests[kSpiro].values.push_back(testing::q("TLC", 5.1, "L", GasCondition::btps));
    expect_one(check(r), "consistency.test-type", "tests[0].values[TLC]", Severity::warning);
}

}  // namespace
}  // namespace pftgw
