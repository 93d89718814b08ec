// Single-breath DLCO and the Jones-Meade breath-hold time (gateway/core/physiology/dlco.hpp).
// Source of the formulas: lung-function-facts.md, "Single-breath DLCO calculation"
// (flag M: from memory of ERS/ATS 2017 / ATS/ERS 2005, not checked against the
// primary text); the numbers below are worked by hand from those formulas.
#include "gateway/core/physiology/dlco.hpp"

#include <gtest/gtest.h>

#include <cmath>

#include "gateway/core/gas.hpp"
#include "gateway/core/units.hpp"

namespace pftgw::physiology {
namespace {

constexpr double kPb760Kpa = 760.0 * kKpaPerMmHg;  // PB exactly 760 mmHg

// The hand-worked maneuver used here and in the engine tests.
DlcoInputs worked_maneuver() {
    DlcoInputs in;
    in.vi_btps_l = 4.50;
    in.vd_instrument_l = 0.10;
    in.vd_anatomic_l = 0.15;
    in.fi_co = 0.0030;
    in.fa_co = 0.0012;
    in.fi_tracer = 0.100;
    in.fa_tracer = 0.085;
    in.breath_hold_s = 10.0;
    in.pressure_kpa = kPb760Kpa;
    return in;
}

TEST(SingleBreathDlco, HandWorkedManeuverInBothUnitSystems) {
    // Hand-worked from the facts-file formulas (flag M):
    //   VI - VD = 4.50 - (0.10 + 0.15) = 4.25 L
    //   VA (BTPS) = 4.25 x 0.100 / 0.085 = 5.000 L
    //   FA,CO,0 = 0.0030 x 0.085 / 0.100 = 0.00255
    //   ln(FA,CO,0 / FA,CO) = ln(0.00255 / 0.0012) = ln 2.125 = 0.753772
    //   BTPS -> STPD at 760 mmHg = 713 / 760 x 273.15 / 310.15 = 0.826236 (facts file: 0.8262, D)
    //   VA (STPD) = 5.000 x 0.826236 = 4.13118 L
    //   DLCO = 4.13118 x 60 000 / (10 x 713) x 0.753772 = 4.13118 x 8.41515 x 0.753772
    //        = 26.2045 mL/min/mm[Hg]
    //   SI: 26.2045 / 2.987 (DECISIONS.md) = 8.7728 mmol/min/kPa
    //   KCO = 26.2045 / 5.000 = 5.2409 mL/min/mm[Hg]/L = 1.7546 mmol/min/kPa/L
    auto r = compute_single_breath_dlco(worked_maneuver());
    ASSERT_TRUE(r.ok()) << r.error().message;
    EXPECT_NEAR(r->va_btps_l, 5.000, 1e-9);
    EXPECT_NEAR(r->fa_co_0, 0.00255, 1e-12);
    EXPECT_NEAR(r->va_stpd_l, 4.13118, 5e-5);
    EXPECT_NEAR(r->dlco_ml_min_mmhg, 26.2045, 5e-4);
    EXPECT_NEAR(r->dlco_mmol_min_kpa, 8.7728, 5e-4);
    EXPECT_NEAR(r->kco_ml_min_mmhg_l, 5.2409, 5e-4);
    EXPECT_NEAR(r->kco_mmol_min_kpa_l, 1.7546, 5e-4);
}

TEST(SingleBreathDlco, StpdFactorMatchesTheFactsFileAt700MmHg) {
    // lung-function-facts.md (D): V_STPD = V_BTPS x 0.7567 at 700 mmHg.
    DlcoInputs in = worked_maneuver();
    in.pressure_kpa = 700.0 * kKpaPerMmHg;
    auto r = compute_single_breath_dlco(in);
    ASSERT_TRUE(r.ok());
    EXPECT_NEAR(r->va_stpd_l / r->va_btps_l, 0.7567, 5e-5);
    // DLCO = VA,STPD x 60 000 / (tBH x (700 - 47)) x ln 2.125: the pressure
    // appears in both the STPD factor and the denominator, so (PB - 47) cancels:
    // DLCO = 5.000 x 273.15 / 310.15 / 760 x 60 000 / 10 x 0.753772 = 26.2045 again.
    EXPECT_NEAR(r->dlco_ml_min_mmhg, 26.2045, 5e-3);
}

TEST(SingleBreathDlco, RefusesWhatCannotBeAManeuver) {
    DlcoInputs in = worked_maneuver();
    in.fa_co = 0.0026;  // above FA,CO,0 = 0.00255: no CO uptake
    EXPECT_EQ(compute_single_breath_dlco(in).error().code, "dlco.input");
    in = worked_maneuver();
    in.fa_tracer = 0.11;  // tracer more concentrated than inspired
    EXPECT_FALSE(compute_single_breath_dlco(in).ok());
    in = worked_maneuver();
    in.vd_anatomic_l = 4.5;  // dead space swallows VI
    EXPECT_FALSE(compute_single_breath_dlco(in).ok());
    in = worked_maneuver();
    in.breath_hold_s = 0;
    EXPECT_FALSE(compute_single_breath_dlco(in).ok());
    in = worked_maneuver();
    in.fi_co = 0.3;  // a percent sent as a fraction still is a fraction in (0, 1)
    in.fa_co = 0.12;
    EXPECT_TRUE(compute_single_breath_dlco(in).ok());
}

TEST(AnatomicDeadSpace, TwoPointTwoMlPerKg) {
    // lung-function-facts.md (flag M, from memory): 2.2 mL/kg body mass.
    EXPECT_NEAR(anatomic_dead_space_l(70.0), 0.154, 1e-12);
}

TEST(JonesMeade, FromThirtyPercentOfInspirationToMidSample) {
    // Jones-Meade as stated in lung-function-facts.md (flag M): hand-worked,
    // inspiration 0.0-2.0 s, so the breath-hold starts at 0.3 x 2.0 = 0.6 s;
    // sample 10.2-11.0 s, middle 10.6 s; BHT = 10.6 - 0.6 = 10.0 s.
    ManeuverTimes t;
    t.inspiration_start_s = 0.0;
    t.inspiration_end_s = 2.0;
    t.sample_start_s = 10.2;
    t.sample_end_s = 11.0;
    EXPECT_NEAR(*jones_meade_breath_hold_s(t), 10.0, 1e-12);
    // A zero that is not at 0 s: the same maneuver shifted by 5 s.
    t.inspiration_start_s = 5.0;
    t.inspiration_end_s = 7.0;
    t.sample_start_s = 15.2;
    t.sample_end_s = 16.0;
    EXPECT_NEAR(*jones_meade_breath_hold_s(t), 10.0, 1e-12);
    // A sent 30 % point wins over start and end: 15.6 - 5.9 = 9.7 s.
    t.inspiration_30_s = 5.9;
    EXPECT_NEAR(*jones_meade_breath_hold_s(t), 9.7, 1e-12);
}

TEST(JonesMeade, SaysWhatIsMissing) {
    ManeuverTimes t;
    t.sample_start_s = 10.2;
    t.sample_end_s = 11.0;
    EXPECT_EQ(jones_meade_breath_hold_s(t).error().code, "dlco.timing");
    t.inspiration_start_s = 2.0;
    t.inspiration_end_s = 1.0;
    EXPECT_FALSE(jones_meade_breath_hold_s(t).ok());
    t.inspiration_start_s = 0.0;
    t.inspiration_end_s = 2.0;
    t.sample_end_s = 10.0;  // ends before it starts
    EXPECT_FALSE(jones_meade_breath_hold_s(t).ok());
}

}  // namespace
}  // namespace pftgw::physiology
