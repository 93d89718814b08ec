// Normalization to canonical unit and condition, and rendering in SI or traditional units.
#include "gateway/core/normalize.hpp"

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <string>

#include "gateway/core/gas.hpp"
#include "gateway/core/units.hpp"
#include "tests/support/examples.hpp"

namespace pftgw {
namespace {

using testing::q;

// A quantity exactly as a reader hands it over: source filled, nothing converted.
Quantity sent(std::string kind, double value, std::string unit, GasCondition c) {
    Quantity out = q(std::move(kind), value, std::move(unit), c);
    out.source = SourceForm{};  // normalize() fills it
    return out;
}

NeutralResult with_test(TestType type, std::vector<Quantity> values) {
    NeutralResult r;
    r.subject.sex_at_birth = SexAtBirth::female;
    r.subject.birth_date = Date{1968, 5, 21};
    r.session_time = testing::ts(2026, 3, 14, 9, 12, 0, 60);
    Test t;
    t.type = type;
    t.values = std::move(values);
    r.tests.push_back(std::move(t));
    return r;
}

void set_ambient(NeutralResult& r, double t_cel, const char* t_unit, double pb,
                 const char* pb_unit) {
    r.environment.temperature = sent("AMB_TEMP", t_cel, t_unit, GasCondition::none);
    r.environment.pressure = sent("PB", pb, pb_unit, GasCondition::none);
}

const Finding* find_rule(const std::vector<Finding>& fs, const std::string& rule) {
    auto it = std::find_if(fs.begin(), fs.end(), [&](const Finding& f) { return f.rule == rule; });
    return it == fs.end() ? nullptr : &*it;
}

std::string value_of(const Finding& f, const std::string& name) {
    for (const auto& [n, v] : f.values)
        if (n == name) return v;
    return "<none>";
}

const QuantityTable& table() {
    return quantity_table();
}

TEST(Normalize, MillilitresAtpsWithAmbientBecomeLitresBtps) {
    NeutralResult r =
        with_test(TestType::spirometry, {sent("FEV1", 2610, "mL", GasCondition::atps)});
    set_ambient(r, 22, "Cel", 760, "mm[Hg]");
    auto findings = normalize(r, table());
    EXPECT_FALSE(has_errors(findings));  // info: FEV1/FVC without FVC

    const Quantity& fev1 = r.tests[0].values[0];
    EXPECT_EQ(fev1.unit, "L");
    EXPECT_EQ(fev1.condition, GasCondition::btps);
    // lung-function-facts.md: BTPS factor at 22 C and 760 mmHg is 1.091 (3 decimals).
    EXPECT_NEAR(*fev1.value, 2.610 * 1.091, 2.610 * 0.0005);
    // And exactly the published formula: (PB - PH2O(T)) / (PB - 47 mmHg) x 310.15 / (273.15 + T).
    const double pb = 760 * kKpaPerMmHg;
    const double exact =
        (pb - saturated_vapour_pressure_kpa(22)) / (pb - 47 * kKpaPerMmHg) * 310.15 / 295.15;
    EXPECT_NEAR(*fev1.value, 2.610 * exact, 1e-12);

    ASSERT_TRUE(fev1.derivation);
    EXPECT_EQ(fev1.derivation->steps, "mL->L; ATPS->BTPS");
    EXPECT_NEAR(fev1.derivation->factor, exact / 1000, 1e-15);
    EXPECT_NEAR(2610 * fev1.derivation->factor, *fev1.value, 1e-12);
    EXPECT_EQ(fev1.derivation->temperature_cel, 22.0);
    ASSERT_TRUE(fev1.derivation->pressure_kpa);
    EXPECT_NEAR(*fev1.derivation->pressure_kpa, pb, 1e-12);
    EXPECT_EQ(fev1.derivation->water_vapour_equation, "Buck 1996");
    // What was sent is kept.
    EXPECT_EQ(fev1.source.value_text, "2610");
    EXPECT_EQ(fev1.source.unit_text, "mL");
    EXPECT_EQ(fev1.source.condition_text, "ATPS");
    // The environment itself is canonical now: PB in kPa, with its own derivation.
    EXPECT_EQ(r.environment.pressure->unit, "kPa");
    EXPECT_EQ(r.environment.pressure->derivation->steps, "mm[Hg]->kPa");
    EXPECT_EQ(r.environment.pressure->source.unit_text, "mm[Hg]");
}

TEST(Normalize, AmbientTemperatureInFahrenheitIsUsedInCelsius) {
    NeutralResult r = with_test(TestType::spirometry, {sent("FVC", 3.0, "L", GasCondition::atps)});
    set_ambient(r, 71.6, "[degF]", 101.325, "kPa");  // 71.6 [degF] = 22 Cel
    ASSERT_FALSE(has_errors(normalize(r, table())));
    EXPECT_NEAR(*r.environment.temperature->value, 22.0, 1e-12);
    EXPECT_EQ(r.environment.temperature->unit, "Cel");
    EXPECT_NEAR(*r.tests[0].values[0].value, 3.0 * 1.091, 3.0 * 0.0005);
    EXPECT_NEAR(*r.tests[0].values[0].derivation->temperature_cel, 22.0, 1e-12);
}

TEST(Normalize, AtpsWithoutAmbientIsReportedAndLeftUnconverted) {
    NeutralResult r =
        with_test(TestType::spirometry, {sent("FEV1", 2610, "mL", GasCondition::atps)});
    const auto findings = normalize(r, table());
    const Finding* f = find_rule(findings, "condition.ambient-missing");
    ASSERT_NE(f, nullptr);
    EXPECT_EQ(f->severity, Severity::error);
    EXPECT_EQ(f->path, "tests[0].values[FEV1].condition");
    EXPECT_EQ(value_of(*f, "condition"), "ATPS");
    EXPECT_EQ(value_of(*f, "environment.temperature"), "absent");
    const Quantity& fev1 = r.tests[0].values[0];
    EXPECT_EQ(*fev1.value, 2610);
    EXPECT_EQ(fev1.unit, "mL");
    EXPECT_EQ(fev1.condition, GasCondition::atps);
    EXPECT_FALSE(fev1.derivation);
    // Findings are appended to the result too.
    EXPECT_NE(find_rule(r.findings, "condition.ambient-missing"), nullptr);
}

TEST(Normalize, AtpsWithPressureButNoTemperatureIsReported) {
    NeutralResult r = with_test(TestType::spirometry, {sent("FEV1", 2.6, "L", GasCondition::atps)});
    r.environment.pressure = sent("PB", 101.3, "kPa", GasCondition::none);
    const auto findings = normalize(r, table());
    ASSERT_NE(find_rule(findings, "condition.ambient-missing"), nullptr);
    EXPECT_EQ(r.tests[0].values[0].condition, GasCondition::atps);
}

TEST(Normalize, MissingUnit) {
    NeutralResult r = with_test(TestType::spirometry, {sent("FEV1", 2.61, "", GasCondition::btps)});
    const auto findings = normalize(r, table());
    const Finding* f = find_rule(findings, "unit.missing");
    ASSERT_NE(f, nullptr);
    EXPECT_EQ(f->path, "tests[0].values[FEV1].unit");
    EXPECT_NE(f->message.find("L, mL"), std::string::npos);
    EXPECT_EQ(r.tests[0].values[0].unit, "");
    EXPECT_EQ(*r.tests[0].values[0].value, 2.61);
}

TEST(Normalize, UnknownUnitIsNotGuessed) {
    // lung-function-facts.md (V, ucum-lhc 7.1.10): `mL/min/mmHg` is not valid UCUM.
    NeutralResult r = with_test(TestType::diffusing_capacity,
                                {sent("DLCO", 22.4, "mL/min/mmHg", GasCondition::stpd)});
    const auto findings = normalize(r, table());
    const Finding* f = find_rule(findings, "unit.unknown");
    ASSERT_NE(f, nullptr);
    EXPECT_EQ(f->path, "tests[0].values[DLCO].unit");
    EXPECT_EQ(value_of(*f, "unit"), "mL/min/mmHg");
    EXPECT_NE(f->message.find("mL/min/mm[Hg]"), std::string::npos);  // says what is expected
    EXPECT_EQ(*r.tests[0].values[0].value, 22.4);
    EXPECT_EQ(r.tests[0].values[0].unit, "mL/min/mmHg");
}

TEST(Normalize, WrongDimensionIsAMismatch) {
    NeutralResult r =
        with_test(TestType::spirometry, {sent("FEV1", 2.61, "L/s", GasCondition::btps)});
    const auto findings = normalize(r, table());
    const Finding* f = find_rule(findings, "unit.mismatch");
    ASSERT_NE(f, nullptr);
    EXPECT_EQ(f->path, "tests[0].values[FEV1].unit");
    EXPECT_EQ(value_of(*f, "unit"), "L/s");
    EXPECT_EQ(r.tests[0].values[0].unit, "L/s");
}

TEST(Normalize, VolumeWithoutConditionIsReported) {
    NeutralResult r =
        with_test(TestType::spirometry, {sent("FVC", 3.4, "L", GasCondition::unspecified)});
    const auto findings = normalize(r, table());
    const Finding* f = find_rule(findings, "condition.missing");
    ASSERT_NE(f, nullptr);
    EXPECT_EQ(f->path, "tests[0].values[FVC].condition");
    EXPECT_NE(f->message.find("BTPS"), std::string::npos);
    // Never read as BTPS (DEVELOPERS.md, decisions of our own).
    EXPECT_EQ(r.tests[0].values[0].condition, GasCondition::unspecified);
}

TEST(Normalize, DlcoWithoutConditionIsStpdByDefinition) {
    NeutralResult r = with_test(TestType::diffusing_capacity,
                                {sent("DLCO", 7.1, "mmol/min/kPa", GasCondition::unspecified)});
    ASSERT_FALSE(has_errors(normalize(r, table())));
    const Quantity& dlco = r.tests[0].values[0];
    EXPECT_EQ(dlco.condition, GasCondition::stpd);
    EXPECT_EQ(*dlco.value, 7.1);
    EXPECT_EQ(dlco.derivation->factor, 1.0);
    EXPECT_EQ(dlco.derivation->steps, "STPD implied by definition");
    EXPECT_EQ(dlco.source.condition_text, "");  // the source said nothing, and that is kept
}

TEST(Normalize, TraditionalDlcoAndItsReferenceBecomeSi) {
    auto dlco = sent("DLCO", 22.4, "mL/min/mm[Hg]", GasCondition::stpd);
    dlco.reference.push_back(testing::ref("GLI-2017", 24.0, 18.0, 30.0, -0.9, 93));
    NeutralResult r = with_test(TestType::diffusing_capacity, {dlco});
    ASSERT_FALSE(has_errors(normalize(r, table())));
    const Quantity& out = r.tests[0].values[0];
    // DECISIONS.md: 1 mmol/min/kPa = 2.987 mL/min/mm[Hg], the one factor.
    EXPECT_EQ(out.unit, "mmol/min/kPa");
    EXPECT_NEAR(*out.value, 22.4 / 2.987, 1e-12);
    EXPECT_EQ(out.derivation->steps, "mL/min/mm[Hg]->mmol/min/kPa");
    EXPECT_NEAR(out.derivation->factor, 1 / 2.987, 1e-15);
    EXPECT_FALSE(out.derivation->pressure_kpa);  // no gas step
    const ReferenceValues& ref = out.reference[0];
    EXPECT_NEAR(*ref.predicted, 24.0 / 2.987, 1e-12);
    EXPECT_NEAR(*ref.lln, 18.0 / 2.987, 1e-12);
    EXPECT_NEAR(*ref.uln, 30.0 / 2.987, 1e-12);
    EXPECT_EQ(*ref.z_score, -0.9);            // unitless: unchanged
    EXPECT_EQ(*ref.percent_predicted, 93.0);  // unitless: unchanged
}

TEST(Normalize, ReferenceValuesChangeUnitButNeverGasCondition) {
    // Reference equations are defined at BTPS (GLI: volumes in L BTPS, shared/data/gli
    // README), so a predicted FEV1 is never taken through the ATPS->BTPS factor.
    auto fev1 = sent("FEV1", 2610, "mL", GasCondition::atps);
    fev1.reference.push_back(testing::ref("GLI Global 2022", 2800, 2100, 3500, -0.52, 93));
    NeutralResult r = with_test(TestType::spirometry, {fev1});
    set_ambient(r, 22, "Cel", 100.8, "kPa");
    ASSERT_FALSE(has_errors(normalize(r, table())));
    const Quantity& out = r.tests[0].values[0];
    EXPECT_GT(out.derivation->factor, 0.001 * 1.05);         // the value got the BTPS factor too
    EXPECT_NEAR(*out.reference[0].predicted, 2.800, 1e-12);  // mL -> L only
    EXPECT_NEAR(*out.reference[0].lln, 2.100, 1e-12);
    EXPECT_NEAR(*out.reference[0].uln, 3.500, 1e-12);
    EXPECT_EQ(out.reference[0].unit, "L");
    EXPECT_EQ(*out.reference[0].z_score, -0.52);
}

TEST(Normalize, ReferenceValuesInTheirOwnUnit) {
    // A device reporting FEV1 in mL at ATPS and its predicted values in L (at BTPS).
    auto fev1 = sent("FEV1", 2610, "mL", GasCondition::atps);
    auto ref = testing::ref("GLI-2012", 2.8, 2.1, 3.5, -0.52, 93);
    ref.unit = "L";
    fev1.reference.push_back(ref);
    NeutralResult r = with_test(TestType::spirometry, {fev1});
    set_ambient(r, 22, "Cel", 100.8, "kPa");
    ASSERT_FALSE(has_errors(normalize(r, table())));
    EXPECT_DOUBLE_EQ(*r.tests[0].values[0].reference[0].predicted, 2.8);
    // Rendering moves the reference unit with the value's.
    auto fev1_ml = sent("DLCO", 25.0, "mL/min/mm[Hg]", GasCondition::stpd);
    auto dref = testing::ref("GLI-2017", 29.87, 23.4, 38.3, -1.0, 84);
    fev1_ml.reference.push_back(dref);
    NeutralResult d = with_test(TestType::diffusing_capacity, {fev1_ml});
    ASSERT_FALSE(has_errors(normalize(d, table())));
    EXPECT_NEAR(*d.tests[0].values[0].reference[0].predicted, 10.0, 1e-12);  // / 2.987
    const NeutralResult trad = render_units(d, UnitSystem::traditional, table());
    EXPECT_NEAR(*trad.tests[0].values[0].reference[0].predicted, 29.87, 1e-9);
    EXPECT_EQ(trad.tests[0].values[0].reference[0].unit, "mL/min/mm[Hg]");
}

TEST(Normalize, HemoglobinInGramsPerLitre) {
    NeutralResult r = with_test(TestType::diffusing_capacity,
                                {sent("HB", 129, "g/L", GasCondition::unspecified)});
    ASSERT_FALSE(has_errors(normalize(r, table())));
    const Quantity& hb = r.tests[0].values[0];
    EXPECT_EQ(hb.unit, "g/dL");
    EXPECT_DOUBLE_EQ(*hb.value, 12.9);
    EXPECT_EQ(hb.condition, GasCondition::none);
    EXPECT_EQ(hb.derivation->steps, "g/L->g/dL");
}

TEST(Normalize, PercentRatioBecomesAFraction) {
    // DECISIONS.md: FEV1/FVC is stored as a fraction (UCUM `1`).
    auto ratio = sent("FEV1_FVC", 76.8, "%", GasCondition::unspecified);
    ratio.reference.push_back(testing::ref("GLI Global 2022", 81, 70, 90, -0.85, 95));
    NeutralResult r = with_test(TestType::spirometry, {ratio});
    ASSERT_TRUE(normalize(r, table()).empty());
    const Quantity& out = r.tests[0].values[0];
    EXPECT_EQ(out.unit, "1");
    EXPECT_DOUBLE_EQ(*out.value, 0.768);
    EXPECT_DOUBLE_EQ(*out.reference[0].lln, 0.70);
    EXPECT_EQ(*out.reference[0].percent_predicted, 95);
}

TEST(Normalize, ConditionOnARatioIsAMismatch) {
    NeutralResult r =
        with_test(TestType::spirometry, {sent("FEV1_FVC", 0.77, "1", GasCondition::btps)});
    const auto findings = normalize(r, table());
    const Finding* f = find_rule(findings, "condition.mismatch");
    ASSERT_NE(f, nullptr);
    EXPECT_EQ(f->path, "tests[0].values[FEV1_FVC].condition");
    EXPECT_EQ(value_of(*f, "condition"), "BTPS");
}

TEST(Normalize, TrialValuesAndTheirPaths) {
    NeutralResult r = with_test(TestType::diffusing_capacity, {});
    for (int n = 1; n <= 2; ++n) {
        Trial t;
        t.number = n;
        t.values.push_back(
            sent("VI", 3300, "mL", n == 1 ? GasCondition::btps : GasCondition::unspecified));
        r.tests[0].trials.push_back(t);
    }
    const auto findings = normalize(r, table());
    ASSERT_EQ(findings.size(), 1u);
    EXPECT_EQ(findings[0].rule, "condition.missing");
    EXPECT_EQ(findings[0].path, "tests[0].trials[1].values[VI].condition");
    EXPECT_DOUBLE_EQ(*r.tests[0].trials[0].values[0].value, 3.3);
    EXPECT_EQ(r.tests[0].trials[0].values[0].unit, "L");
}

TEST(Normalize, SubjectHeightAndWeight) {
    NeutralResult r = with_test(TestType::spirometry, {});
    r.subject.height = sent("HEIGHT", 65, "[in_i]", GasCondition::unspecified);
    r.subject.weight = sent("WEIGHT", 141, "", GasCondition::unspecified);
    const auto findings = normalize(r, table());
    EXPECT_DOUBLE_EQ(*r.subject.height->value, 65 * 2.54);  // UCUM [in_i] = 2.54 cm
    EXPECT_EQ(r.subject.height->unit, "cm");
    const Finding* f = find_rule(findings, "unit.missing");
    ASSERT_NE(f, nullptr);
    EXPECT_EQ(f->path, "subject.weight.unit");
}

TEST(Normalize, TextThatIsNotANumberAndUnknownKinds) {
    auto bad = sent("FEV1", 0, "L", GasCondition::btps);
    bad.value.reset();
    bad.source.value_text = "2,6x";
    NeutralResult r =
        with_test(TestType::spirometry, {bad, sent("FEV3", 2.9, "L", GasCondition::btps)});
    const auto findings = normalize(r, table());
    const Finding* nn = find_rule(findings, "value.not-numeric");
    ASSERT_NE(nn, nullptr);
    EXPECT_EQ(nn->path, "tests[0].values[FEV1].value");
    EXPECT_EQ(value_of(*nn, "value"), "2,6x");
    const Finding* uk = find_rule(findings, "quantity.unknown-kind");
    ASSERT_NE(uk, nullptr);
    EXPECT_EQ(uk->path, "tests[0].values[FEV3].kind");
    EXPECT_EQ(value_of(*uk, "kind"), "FEV3");
}

TEST(Normalize, AbsentQuantitiesAreNotFindings) {
    Quantity pef;
    pef.kind = "PEF";
    pef.absent_reason = "not-measured";
    NeutralResult r = with_test(TestType::spirometry, {pef});
    EXPECT_TRUE(normalize(r, table()).empty());
    EXPECT_EQ(r.tests[0].values[0], pef);
}

TEST(Normalize, KeepsTheSourceAReaderFilled) {
    auto fev1 = sent("FEV1", 2610, "mL", GasCondition::btps);
    fev1.source = SourceForm{"2 610", "ml", "btps", "F1", "SPX1"};
    NeutralResult r = with_test(TestType::spirometry, {fev1});
    ASSERT_FALSE(has_errors(normalize(r, table())));
    EXPECT_EQ(r.tests[0].values[0].source, fev1.source);
    EXPECT_DOUBLE_EQ(*r.tests[0].values[0].value, 2.61);
}

TEST(Normalize, DerivesAfterConverting) {
    NeutralResult r = with_test(TestType::diffusing_capacity,
                                {sent("DLCO", 21.2, "mL/min/mm[Hg]", GasCondition::unspecified),
                                 sent("VA", 4800, "mL", GasCondition::btps)});
    ASSERT_TRUE(normalize(r, table()).empty());
    const Quantity* kco = r.tests[0].find("KCO");
    ASSERT_NE(kco, nullptr);
    EXPECT_NEAR(*kco->value, 21.2 / 2.987 / 4.8, 1e-12);
    EXPECT_EQ(kco->origin, Origin::gateway);
}

TEST(Normalize, IsIdempotent) {
    // Already canonical: nothing changes but the derivation (factor 1) and VI_VC.
    NeutralResult example = testing::example_normalized_result();
    ASSERT_TRUE(normalize(example, table()).empty());
    for (const auto& t : example.tests)
        for (const auto& v : t.values) EXPECT_TRUE(v.derivation) << v.kind;
    NeutralResult again = example;
    EXPECT_TRUE(normalize(again, table()).empty());
    EXPECT_EQ(again, example);

    // With conversions, an implied condition and a finding.
    NeutralResult r =
        with_test(TestType::spirometry, {sent("FEV1", 2610, "mL", GasCondition::atps),
                                         sent("FVC", 3400, "mL", GasCondition::atps),
                                         sent("PEF", 366, "L/min", GasCondition::btps),
                                         sent("FEF25_75", 2.0, "L/s", GasCondition::unspecified)});
    r.tests.push_back(with_test(TestType::diffusing_capacity,
                                {sent("DLCO", 21.2, "mL/min/mm[Hg]", GasCondition::unspecified)})
                          .tests[0]);
    set_ambient(r, 22, "Cel", 756, "mm[Hg]");
    const auto first = normalize(r, table());
    ASSERT_EQ(first.size(), 2u);
    EXPECT_NE(find_rule(first, "condition.missing"), nullptr);  // FEF25_75
    EXPECT_NE(find_rule(first, "derive.KCO"), nullptr);         // DLCO without VA
    const NeutralResult once = r;
    (void)normalize(r, table());
    EXPECT_EQ(r, once);
    EXPECT_EQ(r.findings.size(), 2u);  // not repeated
}

TEST(Normalize, NormalizingATraditionalRenderingGivesBackTheSiResult) {
    NeutralResult si = testing::example_normalized_result();
    ASSERT_TRUE(normalize(si, table()).empty());
    NeutralResult back = render_units(si, UnitSystem::traditional, table());
    ASSERT_TRUE(normalize(back, table()).empty());
    const Quantity& dlco = *back.tests[2].find("DLCO");
    EXPECT_NEAR(*dlco.value, 7.10, 7.10 * 1e-12);
    EXPECT_EQ(dlco.unit, "mmol/min/kPa");
    EXPECT_EQ(dlco.derivation->steps, "");
}

TEST(RenderUnits, TraditionalDlcoAndKco) {
    NeutralResult si = testing::example_normalized_result();
    ASSERT_TRUE(normalize(si, table()).empty());
    const NeutralResult trad = render_units(si, UnitSystem::traditional, table());

    const Quantity& dlco = *trad.tests[2].find("DLCO");
    EXPECT_EQ(dlco.unit, "mL/min/mm[Hg]");
    EXPECT_NEAR(*dlco.value, 7.10 * 2.987, 1e-12);
    EXPECT_NEAR(*dlco.reference[0].predicted, 7.60 * 2.987, 1e-12);
    EXPECT_NEAR(*dlco.reference[0].lln, 5.90 * 2.987, 1e-12);
    EXPECT_EQ(*dlco.reference[0].z_score, -0.48);
    EXPECT_EQ(dlco.derivation->steps, "mmol/min/kPa->mL/min/mm[Hg]");
    EXPECT_NEAR(dlco.derivation->factor, 2.987, 1e-12);

    const Quantity& kco = *trad.tests[2].find("KCO");
    EXPECT_EQ(kco.unit, "mL/min/mm[Hg]/L");
    EXPECT_NEAR(*kco.value, 1.48 * 2.987, 1e-12);
    EXPECT_EQ(trad.tests[2].find("DLCO_HB")->unit, "mL/min/mm[Hg]");
    // Volumes are litres in both systems; PB is rendered in mm[Hg].
    EXPECT_EQ(*trad.tests[0].find("FEV1"), *si.tests[0].find("FEV1"));
    EXPECT_EQ(trad.environment.pressure->unit, "mm[Hg]");
    EXPECT_NEAR(*trad.environment.pressure->value, 100.8 / 0.133322, 1e-9);
    // The input is not touched; SI rendering of an SI result is the same result.
    EXPECT_EQ(si.tests[2].find("DLCO")->unit, "mmol/min/kPa");
    EXPECT_EQ(render_units(si, UnitSystem::si, table()), si);
}

void expect_close(const std::optional<double>& a, const std::optional<double>& b,
                  const std::string& what) {
    ASSERT_EQ(a.has_value(), b.has_value()) << what;
    if (a) {
        EXPECT_LE(std::abs(*a - *b), 1e-12 * std::abs(*b)) << what;
    }
}

TEST(RenderUnits, TraditionalAndBackIsTheOriginalWithin1e12) {
    NeutralResult si = testing::example_normalized_result();
    ASSERT_TRUE(normalize(si, table()).empty());
    const NeutralResult back =
        render_units(render_units(si, UnitSystem::traditional, table()), UnitSystem::si, table());
    ASSERT_EQ(back.tests.size(), si.tests.size());
    for (std::size_t i = 0; i < si.tests.size(); ++i) {
        ASSERT_EQ(back.tests[i].values.size(), si.tests[i].values.size());
        for (std::size_t j = 0; j < si.tests[i].values.size(); ++j) {
            const Quantity& a = back.tests[i].values[j];
            const Quantity& b = si.tests[i].values[j];
            EXPECT_EQ(a.unit, b.unit) << b.kind;
            expect_close(a.value, b.value, b.kind);
            ASSERT_EQ(a.reference.size(), b.reference.size());
            for (std::size_t k = 0; k < b.reference.size(); ++k) {
                expect_close(a.reference[k].predicted, b.reference[k].predicted, b.kind);
                expect_close(a.reference[k].lln, b.reference[k].lln, b.kind);
                expect_close(a.reference[k].uln, b.reference[k].uln, b.kind);
            }
            EXPECT_EQ(a.derivation->steps, b.derivation->steps) << b.kind;
            EXPECT_NEAR(a.derivation->factor, b.derivation->factor, 1e-12) << b.kind;
        }
    }
    expect_close(back.environment.pressure->value, si.environment.pressure->value, "PB");
}

}  // namespace
}  // namespace pftgw
