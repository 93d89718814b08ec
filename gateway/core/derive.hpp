// Derived quantities: KCO = DLCO / VA, FEV1/FVC, Hb-adjusted DLCO, age at test.
#pragma once

#include "gateway/core/model.hpp"
#include "gateway/core/result.hpp"

namespace pftgw {

// Reference hemoglobin of the Cotes adjustment, in g/dL
// (lung-function-facts.md, "Adjustments"; ATS/ERS 2005 / ERS/ATS 2017, flag V2).
inline constexpr double kHbRefMaleGdl = 14.6;   // males aged 15 y and over
inline constexpr double kHbRefOtherGdl = 13.4;  // females, and children under 15 y
inline constexpr double kCotesAdultAgeYears = 15.0;

// Reference Hb (g/dL) for a subject: 14.6 for males of 15.0 y and over, 13.4
// for younger males and for females of any age (a female's age may be NaN).
// Errors: "cotes.sex-unknown"; "cotes.age-unknown" for a male whose age is not
// a finite non-negative number.
Result<double> cotes_reference_hb_gdl(SexAtBirth sex, double age_years);

// Measured DLCO adjusted to the reference Hb: measured x (Hb + 0.7 Hbref) / (1.7 Hb).
// Hb and Hbref in the same unit (any). Equals 1 at Hb = Hbref.
double cotes_measured_factor(double hb, double hb_ref);
// Predicted DLCO at the subject's Hb: predicted x 1.7 Hb / (Hb + 0.7 Hbref).
double cotes_predicted_factor(double hb, double hb_ref);

// Adds computed quantities a normalized result lacks to each test's reported
// values (trials are not derived), each with origin gateway, derived_from set,
// the table's canonical unit and condition, an empty source and a Derivation
// whose steps name the formula:
//   KCO = DLCO / VA, FEV1_FVC = FEV1 / FVC, RV_TLC = RV / TLC (same test);
//   VI_VC = VI / the largest VC or FVC among all tests of the result;
//   DLCO_HB = DLCO x cotes_measured_factor(HB, Hbref), Hbref from sex at birth
//   and age at the test (birth date to the test's date, else the session's).
// DLCO and its reference values are never touched (GLI practice: z-scores from
// DLCO not corrected for Hb). A kind already in the test (even absent) is never
// replaced. Inputs must be in the canonical unit and condition.
// Returns an info finding "derive.<kind>" for what could not be derived and
// why, only when an input that asks for it is present: either part of KCO,
// FEV1_FVC and RV_TLC; VI for VI_VC; HB for DLCO_HB (a VC without VI, or a
// DLCO without Hb, is the ordinary case). The findings are returned, not
// appended to result.findings (normalize() does that).
std::vector<Finding> derive_quantities(NeutralResult& result);

}  // namespace pftgw
