// apply_reference_values(): the none / fill / both policy on an invented
// normalized result (tests/support/examples.hpp). Device reference values are
// never overwritten or relabelled (issue 5, "Policy").
#include <gtest/gtest.h>

#include <algorithm>

#include "gateway/core/reference/reference_values.hpp"
#include "tests/support/examples.hpp"

namespace pftgw {
namespace {

using testing::example_normalized_result;

const ReferenceValues* gateway_ref(const Quantity& q) {
    for (const auto& r : q.reference)
        if (r.origin == Origin::gateway) return &r;
    return nullptr;
}

std::vector<const Finding*> findings_with(const NeutralResult& r, const std::string& rule) {
    std::vector<const Finding*> out;
    for (const auto& f : r.findings)
        if (f.rule == rule) out.push_back(&f);
    return out;
}

ReferencePolicy policy(ReferenceMode mode, EquationSet spirometry = EquationSet::gli_global_2022) {
    ReferencePolicy p;
    p.mode = mode;
    p.spirometry_set = spirometry;
    return p;
}

// The example's subject at its tests: female, born 1968-05-21, 166 cm, tested 2026-03-14.
ReferenceSubject example_subject() {
    ReferenceSubject s;
    s.sex = SexAtBirth::female;
    s.age_years = age_years(Date{1968, 5, 21}, Date{2026, 3, 14}).value();
    s.height_cm = 166;
    return s;
}

TEST(ReferencePolicy, NoneLeavesTheResultAsSent) {
    auto r = example_normalized_result();
    const auto before = r;
    apply_reference_values(r, policy(ReferenceMode::none));
    EXPECT_EQ(r, before);
}

TEST(ReferencePolicy, FillComputesOnlyWhereTheDeviceSentNone) {
    auto r = example_normalized_result();
    const auto before = r;
    apply_reference_values(r, policy(ReferenceMode::fill));
    // Device values untouched where they were sent (FEV1, FVC, FEV1/FVC, TLC, DLCO).
    for (std::size_t t = 0; t < r.tests.size(); ++t)
        for (std::size_t v = 0; v < r.tests[t].values.size(); ++v)
            if (!before.tests[t].values[v].reference.empty()) {
                EXPECT_EQ(r.tests[t].values[v].reference, before.tests[t].values[v].reference)
                    << r.tests[t].values[v].kind;
            }

    // VC (lung volumes) gets GLI-2021 values, equal to a direct computation.
    const Quantity* vc = r.tests[1].find("VC");
    ASSERT_NE(vc, nullptr);
    ASSERT_EQ(vc->reference.size(), 1u);
    auto direct =
        compute_reference_values(EquationSet::gli_2021, "VC", "L", example_subject(), 3.45);
    ASSERT_TRUE(direct.ok());
    EXPECT_EQ(vc->reference[0], *direct);
    EXPECT_EQ(vc->reference[0].equation_set, "GLI-2021");
    EXPECT_EQ(vc->reference[0].origin, Origin::gateway);
    ASSERT_TRUE(vc->reference[0].z_score.has_value());

    // RV/TLC arrives as a fraction (unit "1") and its reference values are fractions.
    const ReferenceValues* rvtlc = gateway_ref(*r.tests[1].find("RV_TLC"));
    ASSERT_NE(rvtlc, nullptr);
    EXPECT_GT(*rvtlc->predicted, 0.2);
    EXPECT_LT(*rvtlc->predicted, 0.6);

    // KCO and VA get GLI-2017; PEF, FET and others have no GLI equation and are left alone.
    EXPECT_EQ(gateway_ref(*r.tests[2].find("KCO"))->equation_set, "GLI-2017");
    EXPECT_EQ(gateway_ref(*r.tests[2].find("VA"))->equation_version, "2020 author correction");
    EXPECT_TRUE(r.tests[0].find("PEF")->reference.empty());
    EXPECT_TRUE(r.tests[2].find("VI")->reference.empty());

    // FEF25-75 and FEF75 have no GLI Global 2022 equation: an info finding, no value.
    EXPECT_TRUE(r.tests[0].find("FEF25_75")->reference.empty());
    auto none = findings_with(r, "reference.no-equation");
    ASSERT_EQ(none.size(), 2u);
    EXPECT_EQ(none[0]->severity, Severity::info);
    EXPECT_EQ(none[0]->path, "tests[0].values[FEF25_75]");
}

TEST(ReferencePolicy, BothAddsBesideTheDevicesOwnNeverOverwriting) {
    auto r = example_normalized_result();
    const auto before = r;
    apply_reference_values(r, policy(ReferenceMode::both));
    const Quantity& fev1 = *r.tests[0].find("FEV1");
    ASSERT_EQ(fev1.reference.size(), 2u);
    // The device's entry, labelled "GLI Global 2022" by the device, stays as sent.
    EXPECT_EQ(fev1.reference[0], before.tests[0].find("FEV1")->reference[0]);
    EXPECT_EQ(fev1.reference[0].origin, Origin::device);
    EXPECT_EQ(fev1.reference[1].origin, Origin::gateway);
    EXPECT_EQ(fev1.reference[1].equation_set, "GLI Global 2022");
    const Quantity& dlco = *r.tests[2].find("DLCO");
    ASSERT_EQ(dlco.reference.size(), 2u);
    EXPECT_EQ(dlco.reference[0], before.tests[2].find("DLCO")->reference[0]);
    EXPECT_EQ(dlco.reference[1].equation_set, "GLI-2017");
    // Measured values themselves are untouched.
    EXPECT_EQ(fev1.value, before.tests[0].find("FEV1")->value);
}

TEST(ReferencePolicy, RunningTwiceChangesNothing) {
    auto once = example_normalized_result();
    apply_reference_values(once, policy(ReferenceMode::both));
    auto twice = once;
    twice.findings.clear();
    auto once_values = once;
    once_values.findings.clear();
    apply_reference_values(twice, policy(ReferenceMode::both));
    twice.findings.erase(
        std::remove_if(twice.findings.begin(), twice.findings.end(),
                       [](const Finding& f) { return f.rule.rfind("reference.", 0) == 0; }),
        twice.findings.end());
    EXPECT_EQ(twice.tests, once_values.tests);
}

TEST(ReferencePolicy, Gli2012UsesTheSubjectsGroup) {
    auto r = example_normalized_result();
    r.subject.ethnicity = "NE-Asian";
    apply_reference_values(r, policy(ReferenceMode::fill, EquationSet::gli_2012));
    const ReferenceValues* fef = gateway_ref(*r.tests[0].find("FEF25_75"));
    ASSERT_NE(fef, nullptr);
    EXPECT_EQ(fef->equation_set, "GLI-2012");
    EXPECT_NE(fef->equation_version.find("ne-asian"), std::string::npos);
    auto s = example_subject();
    s.group = Gli2012Group::ne_asian;
    auto direct = compute_reference_values(EquationSet::gli_2012, "FEF25_75", "L/s", s, 2.05);
    ASSERT_TRUE(direct.ok());
    EXPECT_EQ(*fef, *direct);

    // The policy's group wins over the subject's.
    auto p = policy(ReferenceMode::fill, EquationSet::gli_2012);
    p.gli2012_group = Gli2012Group::caucasian;
    auto r2 = example_normalized_result();
    r2.subject.ethnicity = "NE-Asian";
    apply_reference_values(r2, p);
    EXPECT_NE(gateway_ref(*r2.tests[0].find("FEF25_75"))->equation_version.find("caucasian"),
              std::string::npos);
}

TEST(ReferencePolicy, Gli2012WithoutGroupIsAFindingAndOtherTestsGoOn) {
    auto r = example_normalized_result();
    r.subject.ethnicity.clear();
    apply_reference_values(r, policy(ReferenceMode::fill, EquationSet::gli_2012));
    auto missing = findings_with(r, "reference.missing-input");
    ASSERT_EQ(missing.size(), 1u);
    EXPECT_EQ(missing[0]->path, "subject.ethnicity");
    EXPECT_EQ(gateway_ref(*r.tests[0].find("FEF25_75")), nullptr);
    EXPECT_NE(gateway_ref(*r.tests[1].find("VC")), nullptr);  // lung volumes need no group
}

TEST(ReferencePolicy, OutOfRangeGivesFindingsAndNoValue) {
    // Born 1940: 86 y at the test, beyond GLI-2021 (80 y) and GLI-2017 (85 y)
    // but within GLI Global 2022 (95 y).
    auto r = example_normalized_result();
    const auto before = r;
    r.subject.birth_date = Date{1940, 1, 1};
    apply_reference_values(r, policy(ReferenceMode::both));
    auto out = findings_with(r, "reference.out-of-range");
    // Lung volumes: TLC, VC, RV, FRC, ERV, IC, RV_TLC; diffusion: DLCO, VA, KCO.
    EXPECT_EQ(out.size(), 10u);
    bool vc_seen = false;
    for (const auto* f : out) {
        EXPECT_EQ(f->severity, Severity::warning);
        if (f->path == "tests[1].values[VC]") vc_seen = true;
    }
    EXPECT_TRUE(vc_seen);
    EXPECT_EQ(gateway_ref(*r.tests[1].find("VC")), nullptr);
    EXPECT_EQ(gateway_ref(*r.tests[2].find("KCO")), nullptr);
    // The device's own DLCO values travel unchanged; spirometry is still computed.
    EXPECT_EQ(r.tests[2].find("DLCO")->reference, before.tests[2].find("DLCO")->reference);
    EXPECT_NE(gateway_ref(*r.tests[0].find("FEV1")), nullptr);
}

TEST(ReferencePolicy, MissingInputsAreFindings) {
    auto r = example_normalized_result();
    r.subject.birth_date.reset();
    r.subject.height.reset();
    apply_reference_values(r, policy(ReferenceMode::both));
    auto missing = findings_with(r, "reference.missing-input");
    ASSERT_FALSE(missing.empty());
    bool birth = false, height = false;
    for (const auto* f : missing) {
        birth = birth || f->path == "subject.birthDate";
        height = height || f->path == "subject.height";
    }
    EXPECT_TRUE(birth);
    EXPECT_TRUE(height);
    for (const auto& t : r.tests)
        for (const auto& q : t.values) EXPECT_EQ(gateway_ref(q), nullptr) << q.kind;
}

TEST(ReferencePolicy, AbsentValuesAreSkipped) {
    auto r = example_normalized_result();
    Quantity* vc = r.tests[1].find("VC");
    vc->value.reset();
    vc->absent_reason = "not-measured";
    apply_reference_values(r, policy(ReferenceMode::fill));
    EXPECT_TRUE(r.tests[1].find("VC")->reference.empty());
}

}  // namespace
}  // namespace pftgw
