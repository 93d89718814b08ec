// DLCO adjustments for carboxyhemoglobin and altitude (lung-function-facts.md,
// "Adjustments", flag M). The Hb adjustment is Cotes' (gateway/core/derive.hpp).
// Each adjusted value is its own quantity; the measured one is never changed.
#pragma once

namespace pftgw::physiology {

// COHb: predicted x (102 % - COHb %) / 100 (flag M, from memory): the factor is
// 1 at the 2 % COHb assumed for the reference population.
inline constexpr double kCohbReferencePercentPlus100 = 102.0;
// Altitude: DLCO x (1 + 0.0031 (PIO2 - 150)), PIO2 = 0.21 (PB - 47) mmHg (flag M).
inline constexpr double kAltitudeSlopePerMmHg = 0.0031;
inline constexpr double kPio2SeaLevelMmHg = 150.0;
inline constexpr double kInspiredO2Fraction = 0.21;

// Predicted DLCO at the subject's COHb: predicted x cohb_predicted_factor.
double cohb_predicted_factor(double cohb_percent);
// Measured DLCO adjusted to the reference 2 % COHb: the inverse of the
// predicted factor, 100 / (102 - COHb %), so that adjusted / predicted equals
// measured / (predicted at the subject's COHb) (derived here from the M formula).
double cohb_measured_factor(double cohb_percent);

// PIO2 = 0.21 x (PB - 47) mmHg.
double inspired_po2_mmhg(double pressure_mmhg);
// DLCO adjusted to PIO2 150 mmHg: DLCO x (1 + 0.0031 (PIO2 - 150)).
double altitude_factor(double pio2_mmhg);

}  // namespace pftgw::physiology
