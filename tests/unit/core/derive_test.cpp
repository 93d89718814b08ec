// Derived quantities and the Cotes Hb adjustment (lung-function-facts.md, "Adjustments").
#include "gateway/core/derive.hpp"

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <string>

#include "tests/support/examples.hpp"

namespace pftgw {
namespace {

using testing::q;

const Finding* find_rule(const std::vector<Finding>& fs, const std::string& rule) {
    auto it = std::find_if(fs.begin(), fs.end(), [&](const Finding& f) { return f.rule == rule; });
    return it == fs.end() ? nullptr : &*it;
}

TEST(Cotes, ReferenceHbBySexAndAge) {
    // ATS/ERS 2005 / ERS/ATS 2017 via lung-function-facts.md (V2): Hbref 14.6 g/dL for
    // males aged 15 y and over, 13.4 g/dL for females and for children under 15 y.
    EXPECT_EQ(*cotes_reference_hb_gdl(SexAtBirth::male, 45), 14.6);
    EXPECT_EQ(*cotes_reference_hb_gdl(SexAtBirth::female, 45), 13.4);
    EXPECT_EQ(*cotes_reference_hb_gdl(SexAtBirth::female, 9), 13.4);
    // The age boundary: 15.0 y is adult, 14.99 y is a child.
    EXPECT_EQ(*cotes_reference_hb_gdl(SexAtBirth::male, 15.0), 14.6);
    EXPECT_EQ(*cotes_reference_hb_gdl(SexAtBirth::male, 14.99), 13.4);
    // A female's reference does not depend on age, a male's does.
    EXPECT_EQ(*cotes_reference_hb_gdl(SexAtBirth::female, std::nan("")), 13.4);
    auto no_age = cotes_reference_hb_gdl(SexAtBirth::male, std::nan(""));
    ASSERT_FALSE(no_age.ok());
    EXPECT_EQ(no_age.error().code, "cotes.age-unknown");
    auto no_sex = cotes_reference_hb_gdl(SexAtBirth::unknown, 45);
    ASSERT_FALSE(no_sex.ok());
    EXPECT_EQ(no_sex.error().code, "cotes.sex-unknown");
}

TEST(Cotes, FactorsAreOneAtTheReferenceHb) {
    // lung-function-facts.md (D): both factors are 1.000 at 14.6 / 13.4 g/dL.
    EXPECT_DOUBLE_EQ(cotes_measured_factor(14.6, 14.6), 1.0);
    EXPECT_DOUBLE_EQ(cotes_predicted_factor(14.6, 14.6), 1.0);
    EXPECT_DOUBLE_EQ(cotes_measured_factor(13.4, 13.4), 1.0);
    EXPECT_DOUBLE_EQ(cotes_predicted_factor(13.4, 13.4), 1.0);
    // Any Hb unit: g/L gives the same factor as g/dL.
    EXPECT_DOUBLE_EQ(cotes_measured_factor(100, 134), cotes_measured_factor(10, 13.4));
}

TEST(Cotes, HandWorkedFemaleHb10) {
    // Hand-worked: female, Hb 10 g/dL, Hbref 13.4: measured factor
    // (10 + 0.7 x 13.4) / (1.7 x 10) = 19.38 / 17 = 1.14 exactly.
    EXPECT_NEAR(cotes_measured_factor(10, 13.4), 1.14, 1e-12);
    EXPECT_NEAR(cotes_predicted_factor(10, 13.4), 1 / 1.14, 1e-12);
    // The ATS/ERS published form for females: predicted x 1.7 Hb / (9.38 + Hb);
    // for males 1.7 Hb / (10.22 + Hb) (lung-function-facts.md, V2).
    EXPECT_NEAR(cotes_predicted_factor(10, 13.4), 1.7 * 10 / (9.38 + 10), 1e-12);
    EXPECT_NEAR(cotes_predicted_factor(12, 14.6), 1.7 * 12 / (10.22 + 12), 1e-12);
    EXPECT_NEAR(cotes_measured_factor(12, 14.6), (10.22 + 12) / (1.7 * 12), 1e-12);
}

Test diffusing(std::vector<Quantity> values) {
    Test t;
    t.type = TestType::diffusing_capacity;
    t.time = testing::ts(2026, 3, 14, 10, 5, 0, 60);
    t.values = std::move(values);
    return t;
}

NeutralResult subject(SexAtBirth sex, Date birth) {
    NeutralResult r;
    r.subject.sex_at_birth = sex;
    r.subject.birth_date = birth;
    r.session_time = testing::ts(2026, 3, 14, 9, 0, 0, 60);
    return r;
}

TEST(Derive, KcoFev1FvcRvTlcFromTheirParts) {
    NeutralResult r = subject(SexAtBirth::female, Date{1968, 5, 21});
    pftgw::Test spiro;
    spiro.type = TestType::spirometry;
    spiro.values = {q("FEV1", 2.61, "L", GasCondition::btps),
                    q("FVC", 3.40, "L", GasCondition::btps)};
    pftgw::Test vols;
    vols.type = TestType::lung_volumes;
    vols.values = {q("TLC", 5.10, "L", GasCondition::btps), q("RV", 1.65, "L", GasCondition::btps)};
    r.tests = {spiro, vols,
               diffusing({q("DLCO", 7.10, "mmol/min/kPa", GasCondition::stpd),
                          q("VA", 4.80, "L", GasCondition::btps)})};
    auto findings = derive_quantities(r);
    EXPECT_TRUE(findings.empty()) << findings.front().message;

    const Quantity* ratio = r.tests[0].find("FEV1_FVC");
    ASSERT_NE(ratio, nullptr);
    EXPECT_DOUBLE_EQ(*ratio->value, 2.61 / 3.40);
    EXPECT_EQ(ratio->unit, "1");
    EXPECT_EQ(ratio->condition, GasCondition::none);
    EXPECT_EQ(ratio->origin, Origin::gateway);
    EXPECT_EQ(ratio->derived_from, (std::vector<std::string>{"FEV1", "FVC"}));

    const Quantity* rvtlc = r.tests[1].find("RV_TLC");
    ASSERT_NE(rvtlc, nullptr);
    EXPECT_DOUBLE_EQ(*rvtlc->value, 1.65 / 5.10);

    const Quantity* kco = r.tests[2].find("KCO");
    ASSERT_NE(kco, nullptr);
    EXPECT_DOUBLE_EQ(*kco->value, 7.10 / 4.80);
    EXPECT_EQ(kco->unit, "mmol/min/kPa/L");
    EXPECT_EQ(kco->origin, Origin::gateway);
    EXPECT_EQ(kco->derived_from, (std::vector<std::string>{"DLCO", "VA"}));
    EXPECT_TRUE(kco->source.value_text.empty());  // nothing was sent
}

TEST(Derive, NeverOverwritesWhatTheDeviceSent) {
    NeutralResult r = subject(SexAtBirth::female, Date{1968, 5, 21});
    auto kco = q("KCO", 1.48, "mmol/min/kPa/L", GasCondition::none);
    auto absent = q("FEV1_FVC", 0, "1", GasCondition::none);
    absent.value.reset();
    absent.absent_reason = "not-measured";
    pftgw::Test spiro;
    spiro.type = TestType::spirometry;
    spiro.values = {q("FEV1", 2.61, "L", GasCondition::btps),
                    q("FVC", 3.40, "L", GasCondition::btps), absent};
    r.tests = {spiro, diffusing({q("DLCO", 7.10, "mmol/min/kPa", GasCondition::stpd),
                                 q("VA", 4.80, "L", GasCondition::btps), kco})};
    const NeutralResult before = r;
    EXPECT_TRUE(derive_quantities(r).empty());
    EXPECT_EQ(r, before);
}

TEST(Derive, ViOverTheLargestVcOrFvcInTheResult) {
    NeutralResult r = subject(SexAtBirth::female, Date{1968, 5, 21});
    pftgw::Test spiro;
    spiro.type = TestType::spirometry;
    spiro.values = {q("FVC", 3.40, "L", GasCondition::btps)};
    pftgw::Test vols;
    vols.type = TestType::lung_volumes;
    vols.values = {q("VC", 3.45, "L", GasCondition::btps)};
    r.tests = {spiro, vols, diffusing({q("VI", 3.30, "L", GasCondition::btps)})};
    (void)derive_quantities(r);
    const Quantity* vivc = r.tests[2].find("VI_VC");
    ASSERT_NE(vivc, nullptr);
    EXPECT_DOUBLE_EQ(*vivc->value, 3.30 / 3.45);
    EXPECT_EQ(vivc->derived_from, (std::vector<std::string>{"VI", "VC"}));
}

TEST(Derive, DlcoHbFemaleHandWorked) {
    NeutralResult r = subject(SexAtBirth::female, Date{1968, 5, 21});
    auto dlco = q("DLCO", 7.10, "mmol/min/kPa", GasCondition::stpd);
    dlco.reference.push_back(testing::ref("GLI-2017", 7.60, 5.90, 9.50, -0.48, 93));
    r.tests = {diffusing({dlco, q("HB", 10.0, "g/dL", GasCondition::none)})};
    EXPECT_EQ(find_rule(derive_quantities(r), "derive.DLCO_HB"), nullptr);
    const Quantity* adj = r.tests[0].find("DLCO_HB");
    ASSERT_NE(adj, nullptr);
    // (10 + 0.7 x 13.4) / (1.7 x 10) = 1.14 (hand-worked).
    EXPECT_NEAR(*adj->value, 7.10 * 1.14, 1e-12);
    EXPECT_EQ(adj->unit, "mmol/min/kPa");
    EXPECT_EQ(adj->condition, GasCondition::stpd);
    EXPECT_EQ(adj->derived_from, (std::vector<std::string>{"DLCO", "HB"}));
    EXPECT_TRUE(adj->reference.empty());
    // GLI practice (DECISIONS.md): DLCO and its reference values are untouched.
    EXPECT_EQ(*r.tests[0].find("DLCO"), dlco);
}

TEST(Derive, DlcoHbMaleAgeBoundary) {
    // Test date 2026-03-14. Born 2011-03-14: 5479 days = 15.0007 y (adult, 14.6);
    // born 2011-03-18: 5475 days = 14.99 y (child, 13.4).
    for (const auto& [birth, hb_ref] :
         {std::pair{Date{2011, 3, 14}, 14.6}, std::pair{Date{2011, 3, 18}, 13.4}}) {
        NeutralResult r = subject(SexAtBirth::male, birth);
        r.tests = {diffusing({q("DLCO", 7.0, "mmol/min/kPa", GasCondition::stpd),
                              q("HB", 12.0, "g/dL", GasCondition::none)})};
        (void)derive_quantities(r);
        const Quantity* adj = r.tests[0].find("DLCO_HB");
        ASSERT_NE(adj, nullptr);
        EXPECT_NEAR(*adj->value, 7.0 * (12.0 + 0.7 * hb_ref) / (1.7 * 12.0), 1e-12) << hb_ref;
    }
}

TEST(Derive, DlcoHbNeedsSexAndForMalesAge) {
    NeutralResult r = subject(SexAtBirth::unknown, Date{1968, 5, 21});
    r.tests = {diffusing({q("DLCO", 7.0, "mmol/min/kPa", GasCondition::stpd),
                          q("HB", 12.0, "g/dL", GasCondition::none)})};
    auto findings = derive_quantities(r);
    EXPECT_EQ(r.tests[0].find("DLCO_HB"), nullptr);
    const Finding* f = find_rule(findings, "derive.DLCO_HB");
    ASSERT_NE(f, nullptr);
    EXPECT_EQ(f->severity, Severity::info);
    EXPECT_EQ(f->path, "tests[0].values[DLCO_HB]");
    EXPECT_NE(f->message.find("sex"), std::string::npos);

    NeutralResult male = subject(SexAtBirth::male, Date{1968, 5, 21});
    male.subject.birth_date.reset();
    male.tests = r.tests;
    findings = derive_quantities(male);
    f = find_rule(findings, "derive.DLCO_HB");
    ASSERT_NE(f, nullptr);
    EXPECT_NE(f->message.find("birth date"), std::string::npos);

    // A female without a birth date still gets it: her reference does not depend on age.
    NeutralResult female = male;
    female.subject.sex_at_birth = SexAtBirth::female;
    EXPECT_EQ(find_rule(derive_quantities(female), "derive.DLCO_HB"), nullptr);
    EXPECT_NE(female.tests[0].find("DLCO_HB"), nullptr);
}

TEST(Derive, ReportsOnlyWhenSomeInputIsPresent) {
    NeutralResult r = subject(SexAtBirth::female, Date{1968, 5, 21});
    pftgw::Test spiro;
    spiro.type = TestType::spirometry;
    spiro.values = {q("FVC", 3.40, "L", GasCondition::btps)};  // FEV1 missing
    pftgw::Test vols;
    vols.type = TestType::lung_volumes;
    vols.values = {q("VC", 3.45, "L", GasCondition::btps)};  // nothing to derive from
    r.tests = {spiro, vols,
               diffusing({q("DLCO", 7.10, "mL/min/mm[Hg]", GasCondition::stpd),  // not normalized
                          q("VA", 4.80, "L", GasCondition::btps)})};
    auto findings = derive_quantities(r);
    ASSERT_EQ(findings.size(), 2u);
    const Finding* ratio = find_rule(findings, "derive.FEV1_FVC");
    ASSERT_NE(ratio, nullptr);
    EXPECT_EQ(ratio->path, "tests[0].values[FEV1_FVC]");
    EXPECT_NE(ratio->message.find("FEV1 is not in the test"), std::string::npos);
    const Finding* kco = find_rule(findings, "derive.KCO");
    ASSERT_NE(kco, nullptr);
    EXPECT_NE(kco->message.find("mL/min/mm[Hg]"), std::string::npos);
    EXPECT_EQ(r.tests[2].find("KCO"), nullptr);
    EXPECT_EQ(find_rule(findings, "derive.RV_TLC"), nullptr);
    EXPECT_EQ(find_rule(findings, "derive.VI_VC"), nullptr);
}

TEST(Derive, ZeroDenominatorIsNotDivided) {
    NeutralResult r = subject(SexAtBirth::female, Date{1968, 5, 21});
    r.tests = {diffusing({q("DLCO", 7.10, "mmol/min/kPa", GasCondition::stpd),
                          q("VA", 0.0, "L", GasCondition::btps)})};
    auto findings = derive_quantities(r);
    EXPECT_EQ(r.tests[0].find("KCO"), nullptr);
    ASSERT_NE(find_rule(findings, "derive.KCO"), nullptr);
}

TEST(Derive, TheExampleResultGainsOnlyWhatItLacks) {
    NeutralResult r = testing::example_normalized_result();
    const std::size_t dl_values = r.tests[2].values.size();
    auto findings = derive_quantities(r);
    EXPECT_TRUE(findings.empty()) << findings.front().message;
    // FEV1_FVC, RV_TLC, KCO and DLCO_HB are there already; VI_VC is new.
    EXPECT_EQ(r.tests[2].values.size(), dl_values + 1);
    const Quantity* vivc = r.tests[2].find("VI_VC");
    ASSERT_NE(vivc, nullptr);
    EXPECT_DOUBLE_EQ(*vivc->value, 3.30 / 3.45);  // VC 3.45 > FVC 3.40
    EXPECT_DOUBLE_EQ(*r.tests[2].find("KCO")->value, 1.48);
}

}  // namespace
}  // namespace pftgw
