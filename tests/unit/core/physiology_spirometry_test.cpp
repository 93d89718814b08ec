// Spirometry acceptability, grades and reported values (gateway/core/physiology/spirometry.hpp).
// Source: ATS/ERS 2019 (Graham 2019) via lung-function-facts.md, "Spirometry":
// BEV, end of forced expiration, repeatability and the reported values are V2
// there (secondary source only); the grade table is V (Table 10, via a public
// R implementation). The forced-inspiration check is from memory (M).
#include "gateway/core/physiology/spirometry.hpp"

#include <gtest/gtest.h>

namespace pftgw::physiology {
namespace {

SpirometryTrial trial(int n, double fev1, double fvc) {
    SpirometryTrial t;
    t.trial_number = n;
    t.fev1_l = fev1;
    t.fvc_l = fvc;
    t.bev_l = 0.05;
    t.eotv_l = 0.010;
    t.fet_s = 9.0;
    return t;
}

constexpr std::optional<double> kAdult = 45.0;

TEST(SpirometryGrade, AdultRepeatabilityBoundary) {
    // Table 10 (V): A >= 3 acceptable within 0.150 L; 0.151 L is grade C (<= 0.200).
    EXPECT_EQ(spirometry_grade({4.000, 3.850, 3.800}, 3, kAdult), 'A');
    EXPECT_EQ(spirometry_grade({4.000, 3.849, 3.800}, 3, kAdult), 'C');
    EXPECT_EQ(spirometry_grade({4.000, 3.850}, 2, kAdult), 'B');
    EXPECT_EQ(spirometry_grade({4.000, 3.800}, 2, kAdult), 'C');
    EXPECT_EQ(spirometry_grade({4.000, 3.799}, 2, kAdult), 'D');
    EXPECT_EQ(spirometry_grade({4.000, 3.750}, 2, kAdult), 'D');
    EXPECT_EQ(spirometry_grade({4.000, 3.749}, 2, kAdult), 'E');
    EXPECT_EQ(spirometry_grade({4.000}, 1, kAdult), 'E');
    EXPECT_EQ(spirometry_grade({}, 2, kAdult), 'U');
    EXPECT_EQ(spirometry_grade({}, 0, kAdult), 'F');
    // Only the two largest count: a low third value does not lower the grade.
    EXPECT_EQ(spirometry_grade({3.000, 4.000, 3.900}, 3, kAdult), 'A');
    // Unknown age: the adult limits.
    EXPECT_EQ(spirometry_grade({4.000, 3.850, 3.800}, 3, std::nullopt), 'A');
}

TEST(SpirometryGrade, ChildLimits) {
    // Table 10 (V): age <= 6 y, 0.100 / 0.100 / 0.150 / 0.200 L; the facts
    // file's repeatability row adds "or 10 %" (V2) - applied to A/B here, the
    // greater of the two (from memory, M).
    const std::optional<double> five = 5.0;
    EXPECT_EQ(spirometry_grade({0.900, 0.800, 0.790}, 3, five), 'A');  // 0.100 L
    EXPECT_EQ(spirometry_grade({0.900, 0.799, 0.790}, 3, five), 'C');  // 0.101 L <= 0.150
    EXPECT_EQ(spirometry_grade({1.200, 1.080}, 2, five), 'B');         // 10 % of 1.20 = 0.12 L
    EXPECT_EQ(spirometry_grade({1.200, 1.079}, 2, five), 'C');
    EXPECT_EQ(spirometry_grade({0.900, 0.750}, 2, five), 'C');
    EXPECT_EQ(spirometry_grade({0.900, 0.749}, 2, five), 'D');
    EXPECT_EQ(spirometry_grade({0.900, 0.700}, 2, five), 'D');
    EXPECT_EQ(spirometry_grade({0.900, 0.699}, 2, five), 'E');
    // 6.0 y is still a child, 6.01 y is not.
    EXPECT_EQ(spirometry_grade({1.000, 0.880}, 2, 6.0), 'C');
    EXPECT_EQ(spirometry_grade({1.000, 0.880}, 2, 6.01), 'B');
}

TEST(SpirometryTrials, BackExtrapolatedVolume) {
    // V2: BEV < 5 % of FVC or 0.100 L, whichever is greater.
    SpirometryTrial t = trial(1, 3.2, 4.0);  // limit 0.200 L
    t.bev_l = 0.199;
    EXPECT_TRUE(assess_spirometry_trials({t}, kAdult)[0].fvc_acceptable);
    t.bev_l = 0.200;
    auto a = assess_spirometry_trials({t}, kAdult)[0];
    EXPECT_FALSE(a.fev1_usable);
    EXPECT_FALSE(a.fvc_usable);
    t = trial(1, 1.2, 1.5);  // 5 % = 0.075 L, so the 0.100 L floor applies
    t.bev_l = 0.099;
    EXPECT_TRUE(assess_spirometry_trials({t}, kAdult)[0].fev1_acceptable);
    t.bev_l = 0.100;
    EXPECT_FALSE(assess_spirometry_trials({t}, kAdult)[0].fev1_acceptable);
    t.bev_l.reset();  // not sent: not shown, so not acceptable
    EXPECT_FALSE(assess_spirometry_trials({t}, kAdult)[0].fev1_usable);
}

TEST(SpirometryTrials, EndOfForcedExpiration) {
    // V2: plateau < 0.025 L in the last 1 s, or FET >= 15 s, or FVC within the
    // repeatability tolerance of / above the largest prior FVC. FEV1 does not need it.
    SpirometryTrial t = trial(1, 3.0, 4.0);
    t.eotv_l = 0.024;
    EXPECT_TRUE(assess_spirometry_trials({t}, kAdult)[0].end_of_expiration);
    t.eotv_l = 0.025;
    auto a = assess_spirometry_trials({t}, kAdult)[0];
    EXPECT_FALSE(a.end_of_expiration);
    EXPECT_FALSE(a.fvc_acceptable);
    EXPECT_TRUE(a.fvc_usable);
    EXPECT_TRUE(a.fev1_acceptable);
    t.fet_s = 15.0;
    EXPECT_TRUE(assess_spirometry_trials({t}, kAdult)[0].end_of_expiration);
    t.fet_s = 14.99;
    EXPECT_FALSE(assess_spirometry_trials({t}, kAdult)[0].end_of_expiration);
    // Within 0.150 L of the largest prior FVC.
    SpirometryTrial first = trial(1, 3.0, 4.0);
    SpirometryTrial second = t;
    second.trial_number = 2;
    second.fvc_l = 3.850;
    EXPECT_TRUE(assess_spirometry_trials({first, second}, kAdult)[1].end_of_expiration);
    second.fvc_l = 3.849;
    EXPECT_FALSE(assess_spirometry_trials({first, second}, kAdult)[1].end_of_expiration);
    // "Prior" only: the same trial first does not count.
    second.fvc_l = 4.1;
    EXPECT_FALSE(assess_spirometry_trials({second, first}, kAdult)[0].end_of_expiration);
}

TEST(SpirometryTrials, ForcedInspirationAndOperator) {
    // From memory (M): FIVC - FVC <= 0.100 L or 5 % of FVC, the greater.
    SpirometryTrial t = trial(1, 3.0, 4.0);  // allowed 0.200 L
    t.fivc_l = 4.200;
    EXPECT_TRUE(assess_spirometry_trials({t}, kAdult)[0].fvc_acceptable);
    t.fivc_l = 4.201;
    auto a = assess_spirometry_trials({t}, kAdult)[0];
    EXPECT_FALSE(a.fvc_acceptable);
    EXPECT_FALSE(a.fev1_acceptable);
    EXPECT_TRUE(a.fev1_usable);
    t.fivc_l.reset();
    t.operator_accepted = false;
    a = assess_spirometry_trials({t}, kAdult)[0];
    EXPECT_FALSE(a.fev1_usable);
    EXPECT_FALSE(a.fvc_usable);
}

TEST(SpirometrySelection, LargestFev1AndFvcMayComeFromDifferentTrials) {
    // V2: the largest FVC and the largest FEV1, possibly from different
    // maneuvers; flows from the maneuver with the largest FEV1 + FVC.
    std::vector<SpirometryTrial> ts{trial(1, 3.10, 4.00), trial(2, 3.20, 3.85),
                                    trial(3, 3.18, 3.96)};
    const auto a = assess_spirometry_trials(ts, kAdult);
    const auto s = select_spirometry(ts, a);
    EXPECT_DOUBLE_EQ(*s.fev1_l, 3.20);
    EXPECT_EQ(s.fev1_trial, 2);
    EXPECT_DOUBLE_EQ(*s.fvc_l, 4.00);
    EXPECT_EQ(s.fvc_trial, 1);
    EXPECT_EQ(s.flows_trial, 3);  // sums 7.10, 7.05, 7.14
}

}  // namespace
}  // namespace pftgw::physiology
