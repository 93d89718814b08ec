// GLI reference values (gateway/core/reference/): published examples,
// interpolation between quarter-year rows, age-range edges, SI vs traditional
// DLCO, and refusals. Each published value names its source beside the check.
#include <gtest/gtest.h>

#include <cmath>
#include <fstream>
#include <map>
#include <sstream>
#include <string>
#include <vector>

#include "gateway/core/reference/reference_values.hpp"

namespace pftgw {
namespace {

double round_to(double v, int decimals) {
    const double f = std::pow(10.0, decimals);
    return std::round(v * f) / f;
}

// Rounded to `decimals` the computed value equals the published one.
#define EXPECT_ROUNDS_TO(value, published, decimals) \
    EXPECT_NEAR(round_to((value), (decimals)), (published), 1e-9) << "computed " << (value)

ReferenceSubject subject(SexAtBirth sex, double age, double height,
                         std::optional<Gli2012Group> group = std::nullopt) {
    ReferenceSubject s;
    s.sex = sex;
    s.age_years = age;
    s.height_cm = height;
    s.group = group;
    return s;
}

ReferenceEstimate must(EquationSet set, GliQuantity q, const ReferenceSubject& s) {
    auto r = gli_reference(set, q, s);
    EXPECT_TRUE(r.ok()) << (r.ok() ? "" : r.error().message);
    return r.ok() ? *r : ReferenceEstimate{};
}

TEST(ReferenceGli, Gli2017DlcoTraditionalMatchesPublishedVignette) {
    // Source: the "diffusion-capacity" vignette of the pft R package (GLI
    // equations), also lung-function-facts.md "Reference equations" (V):
    // male, 45 y, 178 cm, DLCO 30.3 / LLN 23.4 / ULN 38.3 mL/min/mm[Hg], 1 decimal.
    const auto e = must(EquationSet::gli_2017, GliQuantity::dlco_traditional,
                        subject(SexAtBirth::male, 45, 178));
    EXPECT_ROUNDS_TO(e.predicted, 30.3, 1);
    EXPECT_ROUNDS_TO(e.lln, 23.4, 1);
    EXPECT_ROUNDS_TO(e.uln, 38.3, 1);
}

TEST(ReferenceGli, Gli2012OtherMixedMatchesGliCalculator) {
    // Source: GLI web calculator output (issue 5), GLI-2012 Other/mixed,
    // male, 57 y, 150 cm; 3 decimals.
    const auto s = subject(SexAtBirth::male, 57, 150, Gli2012Group::other);
    const auto fev1 = must(EquationSet::gli_2012, GliQuantity::fev1, s);
    EXPECT_ROUNDS_TO(fev1.predicted, 2.362, 3);
    EXPECT_ROUNDS_TO(fev1.lln, 1.796, 3);
    EXPECT_ROUNDS_TO(fev1.uln, 2.899, 3);
    const auto fvc = must(EquationSet::gli_2012, GliQuantity::fvc, s);
    EXPECT_ROUNDS_TO(fvc.predicted, 2.905, 3);
    EXPECT_ROUNDS_TO(fvc.lln, 2.266, 3);
    EXPECT_ROUNDS_TO(fvc.uln, 3.552, 3);
}

TEST(ReferenceGli, Gli2012GroupTermsChangeTheValue) {
    // The group terms are in the equation: Caucasian (reference group, no
    // term) and Other/mixed differ for the same subject (Quanjer 2012).
    const auto other = must(EquationSet::gli_2012, GliQuantity::fev1,
                            subject(SexAtBirth::male, 57, 150, Gli2012Group::other));
    const auto cauc = must(EquationSet::gli_2012, GliQuantity::fev1,
                           subject(SexAtBirth::male, 57, 150, Gli2012Group::caucasian));
    EXPECT_GT(std::fabs(other.predicted - cauc.predicted), 0.05);
    // Without a group GLI-2012 is refused, not defaulted.
    auto none =
        gli_reference(EquationSet::gli_2012, GliQuantity::fev1, subject(SexAtBirth::male, 57, 150));
    ASSERT_FALSE(none.ok());
    EXPECT_EQ(none.error().code, "reference.missing-input");
}

TEST(ReferenceGli, Gli2017TlcoSiMatchesGliCalculator) {
    // Source: GLI web calculator output (issue 5), GLI-2017 TLCO SI, female,
    // 57 y, 190 cm: 8.625 / 6.651 / 11.014 mmol/min/kPa; 3 decimals.
    const auto e =
        must(EquationSet::gli_2017, GliQuantity::tlco_si, subject(SexAtBirth::female, 57, 190));
    EXPECT_ROUNDS_TO(e.predicted, 8.625, 3);
    EXPECT_ROUNDS_TO(e.lln, 6.651, 3);
    EXPECT_ROUNDS_TO(e.uln, 11.014, 3);
}

TEST(ReferenceGli, Gli2021TlcMatchesGliCalculator) {
    // Source: GLI web calculator output (issue 5), GLI-2021 TLC, female, 57 y,
    // 190 cm: 7.276 / 5.906 / 8.799 L; 3 decimals.
    const auto e =
        must(EquationSet::gli_2021, GliQuantity::tlc, subject(SexAtBirth::female, 57, 190));
    EXPECT_ROUNDS_TO(e.predicted, 7.276, 3);
    EXPECT_ROUNDS_TO(e.lln, 5.906, 3);
    EXPECT_ROUNDS_TO(e.uln, 8.799, 3);
}

TEST(ReferenceGli, GliGlobal2022MatchesPublishedVignette) {
    // Source: the pft R package "Getting started" vignette, as quoted in
    // schemas/reference/gli/README.md ("Verification"): GLI Global FEV1
    // 3.87 / 2.94 / 4.75 and FVC 4.81 / 3.68 L, 2 decimals. The README does not
    // name the subject; the vignette's source (vignettes/pft.Rmd) has one
    // patient, sex M, age 45, height 178 cm, taken here as the subject.
    const auto s = subject(SexAtBirth::male, 45, 178);
    const auto fev1 = must(EquationSet::gli_global_2022, GliQuantity::fev1, s);
    EXPECT_ROUNDS_TO(fev1.predicted, 3.87, 2);
    EXPECT_ROUNDS_TO(fev1.lln, 2.94, 2);
    EXPECT_ROUNDS_TO(fev1.uln, 4.75, 2);
    const auto fvc = must(EquationSet::gli_global_2022, GliQuantity::fvc, s);
    EXPECT_ROUNDS_TO(fvc.predicted, 4.81, 2);
    EXPECT_ROUNDS_TO(fvc.lln, 3.68, 2);
}

TEST(ReferenceGli, LmsTransformsFollowTheDefinition) {
    // LMS definitions (Cole 1992; lung-function-facts.md "Reference equations", V):
    // z(M) = 0, z(LLN) = -1.645, percent predicted of M = 100; L = 0 is the log-normal limit.
    const auto e =
        must(EquationSet::gli_2021, GliQuantity::tlc, subject(SexAtBirth::female, 57, 190));
    EXPECT_NEAR(lms_z_score(e.lms, e.predicted), 0.0, 1e-12);
    EXPECT_NEAR(lms_z_score(e.lms, e.lln), -1.645, 1e-9);
    EXPECT_NEAR(lms_z_score(e.lms, e.uln), 1.645, 1e-9);
    EXPECT_NEAR(lms_percent_predicted(e.lms, e.predicted), 100.0, 1e-12);
    const LmsParameters log_normal{2.0, 0.1, 0.0};
    EXPECT_NEAR(lms_z_score(log_normal, 2.0 * std::exp(0.1)), 1.0, 1e-12);
    EXPECT_NEAR(lms_value_at_z(log_normal, -1.0), 2.0 * std::exp(-0.1), 1e-12);
}

// ---- interpolation, checked by hand from the CSVs in the repository ----

struct CsvRows {
    std::vector<std::string> header;
    std::vector<std::vector<std::string>> rows;
};

CsvRows read_csv(const std::string& name) {
    std::ifstream in(std::string(PFTGW_SOURCE_DIR) + "/schemas/reference/gli/" + name);
    CsvRows out;
    std::string line;
    bool first = true;
    while (std::getline(in, line)) {
        std::vector<std::string> f;
        std::stringstream ss(line);
        std::string cell;
        while (std::getline(ss, cell, ',')) f.push_back(cell);
        if (!line.empty() && line.back() == ',') f.emplace_back();
        if (first)
            out.header = f;
        else
            out.rows.push_back(f);
        first = false;
    }
    return out;
}

std::map<std::string, std::string> coefficient_row(const std::string& set, const std::string& q,
                                                   const std::string& sex) {
    const auto csv = read_csv("coefficients.csv");
    for (const auto& r : csv.rows)
        if (r[0] == set && r[1] == q && r[2] == sex) {
            std::map<std::string, std::string> m;
            for (std::size_t i = 0; i < csv.header.size() && i < r.size(); ++i)
                m[csv.header[i]] = r[i];
            return m;
        }
    ADD_FAILURE() << "no coefficients for " << set << " " << q << " " << sex;
    return {};
}

std::vector<double> spline_at(const std::string& file, const std::string& q, const std::string& sex,
                              const std::string& age) {
    for (const auto& r : read_csv(file).rows)
        if (r[0] == q && r[1] == sex && r[2] == age)
            return {std::stod(r[3]), r[4].empty() ? 0.0 : std::stod(r[4]),
                    r[5].empty() ? 0.0 : std::stod(r[5])};
    ADD_FAILURE() << "no spline row " << q << " " << sex << " " << age;
    return {0, 0, 0};
}

TEST(ReferenceGli, InterpolatesBetweenQuarterYearsNeverRounds) {
    // Hand computation of the README's form for GLI-2017 TLCO SI male at
    // 45.1 y, 178 cm: splines interpolated 40 % of the way from the 45.00 row
    // to the 45.25 row, then M = exp(a0 + a1 ln h + a2 ln t + Mspline),
    // S = exp(p0 + p1 ln t + Sspline), L = q0 (schemas/reference/gli/README.md).
    ASSERT_TRUE(
        std::ifstream(std::string(PFTGW_SOURCE_DIR) + "/schemas/reference/gli/coefficients.csv")
            .good());
    const std::string file = "gli2017_transfer_factor_splines.csv";
    const auto r0 = spline_at(file, "TLCO_SI", "M", "45");
    const auto r1 = spline_at(file, "TLCO_SI", "M", "45.25");
    auto c = coefficient_row("GLI-2017", "TLCO_SI", "M");
    const double t = 45.1, h = 178, f = (t - 45.0) / 0.25;
    const double m_spline = r0[0] + f * (r1[0] - r0[0]);
    const double s_spline = r0[1] + f * (r1[1] - r0[1]);
    const double m = std::exp(std::stod(c["a0"]) + std::stod(c["a1"]) * std::log(h) +
                              std::stod(c["a2"]) * std::log(t) + m_spline);
    const double s = std::exp(std::stod(c["p0"]) + std::stod(c["p1"]) * std::log(t) + s_spline);
    const double l = std::stod(c["q0"]);

    auto lms = lms_at(EquationSet::gli_2017, GliQuantity::tlco_si, subject(SexAtBirth::male, t, h));
    ASSERT_TRUE(lms.ok());
    EXPECT_NEAR(lms->m, m, 1e-12);
    EXPECT_NEAR(lms->s, s, 1e-12);
    EXPECT_NEAR(lms->l, l, 1e-12);

    // It lies between the values at the two rows' ages (spline and ln t move together here).
    const auto at0 =
        must(EquationSet::gli_2017, GliQuantity::tlco_si, subject(SexAtBirth::male, 45.0, h));
    const auto at1 =
        must(EquationSet::gli_2017, GliQuantity::tlco_si, subject(SexAtBirth::male, 45.25, h));
    EXPECT_GT(lms->m, std::min(at0.predicted, at1.predicted));
    EXPECT_LT(lms->m, std::max(at0.predicted, at1.predicted));
}

TEST(ReferenceGli, InterpolatesGli2021RvTlcOnLinearTerms) {
    // GLI-2021 RV/TLC uses linear height and age and S on linear age
    // (schemas/reference/gli/README.md); hand computation at 57.6 y, 190 cm, female.
    const std::string file = "gli2021_lung_volumes_splines.csv";
    const auto r0 = spline_at(file, "RV_TLC", "F", "57.5");
    const auto r1 = spline_at(file, "RV_TLC", "F", "57.75");
    auto c = coefficient_row("GLI-2021", "RV_TLC", "F");
    const double t = 57.6, h = 190, f = (t - 57.5) / 0.25;
    const double m = std::exp(std::stod(c["a0"]) + std::stod(c["a1"]) * h + std::stod(c["a2"]) * t +
                              r0[0] + f * (r1[0] - r0[0]));
    const double s =
        std::exp(std::stod(c["p0"]) + std::stod(c["p1"]) * t + r0[1] + f * (r1[1] - r0[1]));
    auto lms =
        lms_at(EquationSet::gli_2021, GliQuantity::rv_tlc, subject(SexAtBirth::female, t, h));
    ASSERT_TRUE(lms.ok());
    EXPECT_NEAR(lms->m, m, 1e-10);
    EXPECT_NEAR(lms->s, s, 1e-12);
}

// ---- edges of each age range ----

struct Edge {
    EquationSet set;
    GliQuantity q;
    double min_years;
    double max_years;
    const char* source;
};

TEST(ReferenceGli, AgeRangeEdgesAreComputedAndJustOutsideRefused) {
    // Ranges: schemas/reference/gli/README.md "Files"; GLI-2017 capped at 85 y
    // (shared design DECISIONS.md, the GLI calculator's range).
    const std::vector<Edge> edges = {
        {EquationSet::gli_global_2022, GliQuantity::fev1, 3, 95, "GLI Global 2022 3-95"},
        {EquationSet::gli_global_2022, GliQuantity::fev1_fvc, 3, 95, "GLI Global 2022 3-95"},
        {EquationSet::gli_2012, GliQuantity::fvc, 3, 95, "GLI-2012 3-95"},
        {EquationSet::gli_2012, GliQuantity::fef25_75, 3, 90, "GLI-2012 FEF 3-90"},
        {EquationSet::gli_2012, GliQuantity::fef75, 3, 90, "GLI-2012 FEF 3-90"},
        {EquationSet::gli_2017, GliQuantity::tlco_si, 5, 85, "GLI-2017 5-85 (table 90)"},
        {EquationSet::gli_2017, GliQuantity::va, 5, 85, "GLI-2017 5-85 (table 90)"},
        {EquationSet::gli_2021, GliQuantity::tlc, 5, 80, "GLI-2021 5-80"},
        {EquationSet::gli_2021, GliQuantity::erv, 5, 80, "GLI-2021 5-80"},
    };
    for (const auto& e : edges) {
        for (SexAtBirth sex : {SexAtBirth::male, SexAtBirth::female}) {
            SCOPED_TRACE(e.source);
            const auto group = Gli2012Group::caucasian;
            // Heights that fit the age (a child at the lower edge).
            const double h_lo = 100, h_hi = 165;
            EXPECT_TRUE(gli_reference(e.set, e.q, subject(sex, e.min_years, h_lo, group)).ok());
            EXPECT_TRUE(gli_reference(e.set, e.q, subject(sex, e.max_years, h_hi, group)).ok());
            for (double age : {e.min_years - 0.01, e.max_years + 0.01}) {
                auto r = gli_reference(e.set, e.q, subject(sex, age, h_hi, group));
                ASSERT_FALSE(r.ok()) << age;
                EXPECT_EQ(r.error().code, "reference.out-of-range");
            }
            auto range = computed_age_range(e.set, e.q, sex);
            ASSERT_TRUE(range.ok());
            EXPECT_EQ(range->min, e.min_years);
            EXPECT_EQ(range->max, e.max_years);
        }
    }
}

TEST(ReferenceGli, Gli2017RefusesAbove85EvenThoughTableRunsTo90) {
    // Shared design DECISIONS.md: GLI-2017 computed for 5-85 y.
    auto r = gli_reference(EquationSet::gli_2017, GliQuantity::tlco_si,
                           subject(SexAtBirth::female, 88, 160));
    ASSERT_FALSE(r.ok());
    EXPECT_EQ(r.error().code, "reference.out-of-range");
    EXPECT_NE(r.error().message.find("5-85"), std::string::npos) << r.error().message;
}

TEST(ReferenceGli, ImplausibleHeightAndUnknownSexRefused) {
    // Project choice (reference_values.hpp): heights 50-250 cm.
    for (double h : {49.9, 250.1, std::nan("")}) {
        auto r = gli_reference(EquationSet::gli_2021, GliQuantity::tlc,
                               subject(SexAtBirth::female, 40, h));
        ASSERT_FALSE(r.ok());
        EXPECT_EQ(r.error().code, "reference.out-of-range");
    }
    EXPECT_TRUE(
        gli_reference(EquationSet::gli_2021, GliQuantity::tlc, subject(SexAtBirth::female, 40, 250))
            .ok());
    auto u = gli_reference(EquationSet::gli_2021, GliQuantity::tlc,
                           subject(SexAtBirth::unknown, 40, 170));
    ASSERT_FALSE(u.ok());
    EXPECT_EQ(u.error().code, "reference.missing-input");
}

TEST(ReferenceGli, OutOfRangeSubjectGivesErrorAndNoValue) {
    // Issue 5: outside the age range nothing is extrapolated.
    auto r = compute_reference_values(EquationSet::gli_2021, "TLC", "L",
                                      subject(SexAtBirth::male, 81, 180), 6.0);
    ASSERT_FALSE(r.ok());
    EXPECT_EQ(r.error().code, "reference.out-of-range");
    EXPECT_NE(r.error().message.find("81.00"), std::string::npos) << r.error().message;
}

TEST(ReferenceGli, SetWithoutTheQuantityIsRefused) {
    // GLI Global 2022 covers FEV1, FVC and FEV1/FVC only (Bowerman 2023).
    auto r = compute_reference_values(EquationSet::gli_global_2022, "FEF25_75", "L/s",
                                      subject(SexAtBirth::male, 40, 180), std::nullopt);
    ASSERT_FALSE(r.ok());
    EXPECT_EQ(r.error().code, "reference.no-equation");
    auto pef = bind_kind(EquationSet::gli_global_2022, "PEF", "L/s");
    ASSERT_FALSE(pef.ok());
    EXPECT_EQ(pef.error().code, "reference.no-equation");
}

// ---- SI and traditional tables ----

TEST(ReferenceGli, SiAndTraditionalDlcoAgreeThroughTheProjectFactor) {
    // The DLCO factor 2.987 (shared design DECISIONS.md; lung-function-facts.md, D).
    // Tolerance from schemas/reference/gli/README.md: the SI and traditional
    // spline sheets differ by up to 1.6e-8 (TLCO/DLCO) and 1.5e-6 (KCO) in
    // ln M, and the intercepts, given to 6 decimals, differ from ln 2.987 by
    // less than 1e-6 (rounding of the two a0). Relative tolerances follow.
    constexpr double kDlcoFactor = 2.987;
    constexpr double kTlcoTolerance = 1.6e-8 + 1e-6;
    constexpr double kKcoTolerance = 1.5e-6 + 1e-6;
    for (SexAtBirth sex : {SexAtBirth::male, SexAtBirth::female})
        for (double age = 5; age <= 85; age += 3.7)
            for (double h : {120.0, 160.0, 195.0}) {
                const auto s = subject(sex, age, h);
                const auto si = must(EquationSet::gli_2017, GliQuantity::tlco_si, s);
                const auto tr = must(EquationSet::gli_2017, GliQuantity::dlco_traditional, s);
                EXPECT_NEAR(tr.predicted / si.predicted / kDlcoFactor, 1.0, kTlcoTolerance);
                EXPECT_NEAR(tr.lln / si.lln / kDlcoFactor, 1.0, kTlcoTolerance);
                EXPECT_NEAR(tr.uln / si.uln / kDlcoFactor, 1.0, kTlcoTolerance);
                // The same measured value in either unit gets the same z-score.
                const double measured_si = si.predicted * 0.8;
                EXPECT_NEAR(lms_z_score(tr.lms, measured_si * kDlcoFactor),
                            lms_z_score(si.lms, measured_si), 1e-4);
                const auto ksi = must(EquationSet::gli_2017, GliQuantity::kco_si, s);
                const auto ktr = must(EquationSet::gli_2017, GliQuantity::kco_traditional, s);
                EXPECT_NEAR(ktr.predicted / ksi.predicted / kDlcoFactor, 1.0, kKcoTolerance);
            }
}

TEST(ReferenceGli, KindBindingFollowsTheProjectUnit) {
    // Project canonical units (DEVELOPERS.md "Units"): DLCO in mmol/min/kPa
    // uses the SI sheet, mL/min/mm[Hg] the traditional one.
    auto si = bind_kind(EquationSet::gli_2017, "DLCO", "mmol/min/kPa");
    auto tr = bind_kind(EquationSet::gli_2017, "DLCO", "mL/min/mm[Hg]");
    ASSERT_TRUE(si.ok() && tr.ok());
    EXPECT_EQ(si->quantity, GliQuantity::tlco_si);
    EXPECT_EQ(tr->quantity, GliQuantity::dlco_traditional);
    auto bad = bind_kind(EquationSet::gli_2017, "DLCO", "mL/s");
    ASSERT_FALSE(bad.ok());
    EXPECT_EQ(bad.error().code, "reference.unit-unsupported");
    auto ml = bind_kind(EquationSet::gli_2021, "TLC", "mL");
    ASSERT_TRUE(ml.ok());
    EXPECT_EQ(ml->scale, 1000.0);  // 1 L = 1000 mL (SI)
}

TEST(ReferenceGli, RvTlcTablePercentBecomesProjectFraction) {
    // GLI-2021 RV/TLC is in percent (schemas/reference/gli/README.md); the
    // project stores RV/TLC as a fraction (schemas/quantities.csv, unit "1").
    const auto s = subject(SexAtBirth::female, 57, 165);
    const auto table = must(EquationSet::gli_2021, GliQuantity::rv_tlc, s);
    // A percent between 20 and 60 for an adult: the table really is in percent.
    EXPECT_GT(table.predicted, 20.0);
    EXPECT_LT(table.predicted, 60.0);
    auto frac = compute_reference_values(EquationSet::gli_2021, "RV_TLC", "1", s, 0.40);
    auto pct = compute_reference_values(EquationSet::gli_2021, "RV_TLC", "%", s, 40.0);
    ASSERT_TRUE(frac.ok() && pct.ok());
    EXPECT_NEAR(*frac->predicted, table.predicted / 100.0, 1e-12);
    EXPECT_NEAR(*frac->lln, table.lln / 100.0, 1e-12);
    EXPECT_NEAR(*frac->uln, table.uln / 100.0, 1e-12);
    EXPECT_NEAR(*pct->predicted, table.predicted, 1e-12);
    // z and percent predicted do not depend on the unit.
    EXPECT_NEAR(*frac->z_score, lms_z_score(table.lms, 40.0), 1e-12);
    EXPECT_NEAR(*frac->z_score, *pct->z_score, 1e-12);
    EXPECT_NEAR(*frac->percent_predicted, 100.0 * 40.0 / table.predicted, 1e-9);
}

TEST(ReferenceGli, ComputedValuesNameTheirSetAndOrigin) {
    auto r = compute_reference_values(EquationSet::gli_2017, "DLCO", "mmol/min/kPa",
                                      subject(SexAtBirth::female, 57, 190), 8.0);
    ASSERT_TRUE(r.ok());
    EXPECT_EQ(r->equation_set, "GLI-2017");
    EXPECT_EQ(r->equation_version, "2020 author correction");
    EXPECT_EQ(r->origin, Origin::gateway);
    ASSERT_TRUE(r->z_score && r->percent_predicted);
    EXPECT_NEAR(*r->percent_predicted, 100.0 * 8.0 / *r->predicted, 1e-9);
    EXPECT_LT(*r->z_score, 0.0);  // below predicted
    auto g = compute_reference_values(EquationSet::gli_2012, "FEV1", "L",
                                      subject(SexAtBirth::male, 57, 150, Gli2012Group::other),
                                      std::nullopt);
    ASSERT_TRUE(g.ok());
    EXPECT_EQ(g->equation_set, "GLI-2012");
    EXPECT_NE(g->equation_version.find("other"), std::string::npos);
    EXPECT_FALSE(g->z_score.has_value());
}

TEST(ReferenceGli, TradeNamesAndSetNamesParse) {
    EXPECT_EQ(kind_for_trade_name("fev1/fvc"), "FEV1_FVC");
    EXPECT_EQ(kind_for_trade_name("TLCO"), "DLCO");
    EXPECT_EQ(kind_for_trade_name("Fef25-75"), "FEF25_75");
    EXPECT_EQ(kind_for_trade_name("rv/tlc"), "RV_TLC");
    EXPECT_FALSE(kind_for_trade_name("PEF").has_value());
    EXPECT_EQ(parse_equation_set("GLI-Global-2022"), EquationSet::gli_global_2022);
    EXPECT_EQ(parse_equation_set("gli-2017"), EquationSet::gli_2017);
    EXPECT_FALSE(parse_equation_set("gli-2019").has_value());
    EXPECT_EQ(parse_gli2012_group("SE-Asian"), Gli2012Group::se_asian);
    EXPECT_EQ(parse_gli2012_group("Other/mixed"), Gli2012Group::other);
    EXPECT_FALSE(parse_gli2012_group("").has_value());
}

}  // namespace
}  // namespace pftgw
