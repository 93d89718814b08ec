// Lung-volume identities, FRC repeatability, and the COHb and altitude
// adjustments (gateway/core/physiology/lung_volumes.hpp, adjustments.hpp).
// Sources: lung-function-facts.md, "Lung volumes" and "Adjustments", all flag M
// (from memory, not checked against ATS/ERS 2005 or ERS/ATS 2017); the identity
// tolerance is common practice.
#include <gtest/gtest.h>

#include "gateway/core/physiology/adjustments.hpp"
#include "gateway/core/physiology/lung_volumes.hpp"

namespace pftgw::physiology {
namespace {

TEST(LungVolumeIdentities, EveryIdentityWithItsThreeVolumes) {
    // TLC = FRC + IC = RV + VC; FRC = RV + ERV; VC = IC + ERV (from memory).
    LungVolumes v{6.00, 3.00, 1.80, 1.20, 3.00, 4.20};
    const auto checks = check_lung_volume_identities(v);
    ASSERT_EQ(checks.size(), 4u);
    for (const auto& c : checks) EXPECT_TRUE(c.consistent) << c.identity;
    v.ic_l = 2.50;  // TLC 6.00 vs FRC + IC 5.50: 0.50 L > 5 % x 5.50 + 0.01 = 0.285 L
    int inconsistent = 0;
    for (const auto& c : check_lung_volume_identities(v)) inconsistent += !c.consistent;
    EXPECT_EQ(inconsistent, 2);  // TLC = FRC + IC and VC = IC + ERV
}

TEST(LungVolumeIdentities, ToleranceBoundary) {
    // Common practice: 5 % of the sum plus 0.01 L rounding. FRC + IC = 5.00 L,
    // tolerance 0.26 L: TLC 5.26 holds, 5.27 does not.
    LungVolumes v;
    v.frc_l = 2.5;
    v.ic_l = 2.5;
    v.tlc_l = 5.26;
    EXPECT_TRUE(check_lung_volume_identities(v)[0].consistent);
    v.tlc_l = 5.27;
    EXPECT_FALSE(check_lung_volume_identities(v)[0].consistent);
    v.tlc_l.reset();
    EXPECT_TRUE(check_lung_volume_identities(v).empty());
}

TEST(FrcRepeatability, PlethysmographyFivePercentOfThree) {
    // Facts file (M): plethysmographic FRC, >= 3 values within 5 %.
    EXPECT_EQ(frc_method_of("body-plethysmography"), FrcMethod::plethysmography);
    auto r = frc_repeatability({3.00, 3.10, 3.05}, FrcMethod::plethysmography);
    EXPECT_TRUE(r->repeatable);  // 0.10 / 3.05 = 3.3 %
    EXPECT_NEAR(r->mean_l, 3.05, 1e-12);
    EXPECT_FALSE(frc_repeatability({2.90, 3.10, 3.00}, FrcMethod::plethysmography)->repeatable);
    EXPECT_FALSE(frc_repeatability({3.00, 3.05}, FrcMethod::plethysmography)->repeatable);
    // Exactly 5 %: 0.15 / 3.00.
    EXPECT_TRUE(frc_repeatability({2.925, 3.075, 3.00}, FrcMethod::plethysmography)->repeatable);
}

TEST(FrcRepeatability, WashoutTenPercent) {
    // Facts file (M): washout / dilution within 10 %.
    EXPECT_EQ(frc_method_of("nitrogen-washout"), FrcMethod::washout_dilution);
    EXPECT_EQ(frc_method_of("helium-dilution"), FrcMethod::washout_dilution);
    EXPECT_TRUE(frc_repeatability({2.85, 3.15}, FrcMethod::washout_dilution)->repeatable);
    EXPECT_FALSE(frc_repeatability({2.80, 3.15}, FrcMethod::washout_dilution)->repeatable);
    EXPECT_FALSE(frc_repeatability({3.0}, FrcMethod::unknown).has_value());
}

TEST(CohbAdjustment, OneAtTheReferenceTwoPercent) {
    // Facts file (M): predicted x (102 % - COHb %); 1 at COHb 2 %.
    EXPECT_DOUBLE_EQ(cohb_predicted_factor(2.0), 1.0);
    EXPECT_DOUBLE_EQ(cohb_predicted_factor(5.0), 0.97);
    // Measured adjusted: the inverse, 100 / 97 = 1.030928 (derived here).
    EXPECT_NEAR(cohb_measured_factor(5.0), 1.030928, 1e-6);
    EXPECT_NEAR(cohb_measured_factor(5.0) * cohb_predicted_factor(5.0), 1.0, 1e-15);
}

TEST(AltitudeAdjustment, PiO2AndFactor) {
    // Facts file (M): PIO2 = 0.21 (PB - 47); DLCO x (1 + 0.0031 (PIO2 - 150)).
    // Sea level: PIO2 = 0.21 x 713 = 149.73 mmHg; factor 1 + 0.0031 x -0.27 = 0.999163.
    EXPECT_NEAR(inspired_po2_mmhg(760.0), 149.73, 1e-9);
    EXPECT_NEAR(altitude_factor(149.73), 0.999163, 1e-6);
    // PB 630 mmHg: PIO2 = 0.21 x 583 = 122.43; factor 1 - 0.0031 x 27.57 = 0.914533.
    EXPECT_NEAR(inspired_po2_mmhg(630.0), 122.43, 1e-9);
    EXPECT_NEAR(altitude_factor(122.43), 0.914533, 1e-6);
    EXPECT_DOUBLE_EQ(altitude_factor(150.0), 1.0);
}

}  // namespace
}  // namespace pftgw::physiology
