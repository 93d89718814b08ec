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

// Reference Hb (g/dL) for a subject, or an error when sex or age is unknown.
Result<double> cotes_reference_hb_gdl(SexAtBirth sex, double age_years);

// Measured DLCO adjusted to the reference Hb: measured x (Hb + 0.7 Hbref) / (1.7 Hb).
// Hb and Hbref in the same unit (any). Equals 1 at Hb = Hbref.
double cotes_measured_factor(double hb, double hb_ref);
// Predicted DLCO at the subject's Hb: predicted x 1.7 Hb / (Hb + 0.7 Hbref).
double cotes_predicted_factor(double hb, double hb_ref);

// Adds computed quantities a normalized result lacks (KCO, FEV1/FVC, VI/VC,
// RV/TLC, DLCO_HB), each with origin gateway and derived_from set, and
// returns findings for what could not be derived. Never overwrites a value
// the device sent. Expects canonical units (after normalize()).
std::vector<Finding> derive_quantities(NeutralResult& result);

}  // namespace pftgw
