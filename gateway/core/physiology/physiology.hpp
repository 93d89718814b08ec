// The physiology engine's entry point: on every test that carries the data,
// recompute DLCO from its maneuvers, grade DLCO and spirometry (ERS/ATS 2017,
// ATS/ERS 2019), check lung-volume identities and FRC repeatability, and add
// the Hb, COHb and altitude adjustments as quantities of their own.
// DEVELOPERS.md, "Physiology and grading", lists the rule ids and how grades travel.
#pragma once

#include <vector>

#include "gateway/core/model.hpp"

namespace pftgw {

struct PhysiologyOptions {
    // Recomputed vs sent DLCO and VA per maneuver. A single-sample recomputation
    // differs from a device that computes VA by mass balance over the whole
    // exhaled signal by a few per cent in healthy lungs (more with uneven
    // ventilation); 10 % keeps that quiet while a wrong fraction, unit or gas
    // condition (20 % or more) still shows. Engineering choice, per device profile.
    double dlco_tolerance_fraction = 0.10;
    double dlco_tolerance_ml_min_mmhg = 1.0;  // floor for small values: half the repeatability
    double va_tolerance_fraction = 0.10;
    double va_tolerance_l = 0.200;  // floor: the 200 mL of the 85 % rule
    // A sent breath-hold time vs the Jones-Meade one from the sent timing points.
    double breath_hold_tolerance_s = 0.2;  // engineering choice: timing points at 0.1 s
    // A reported DLCO vs the mean of the acceptable, repeatable maneuvers: the
    // maneuvers rounded to 0.1 mL/min/mmHg, a quarter of the repeatability limit.
    double dlco_reported_tolerance_ml_min_mmhg = 0.5;
    // A reported FEV1 / FVC vs the largest acceptable trial: 0.01 L display rounding.
    double spirometry_reported_tolerance_l = 0.01;
    // Altitude adjustment only when PIO2 is at least this far below 150 mmHg:
    // closer, the adjustment (< 1.6 %) is far inside the between-maneuver
    // repeatability. Engineering choice.
    double altitude_min_pio2_deficit_mmhg = 5.0;
    // TLC = RV + VC is also validate()'s consistency.tlc; off to report it once.
    bool check_tlc_rv_vc = false;
};

// Runs on a normalized result (canonical units; it converts what it reads, so
// it also copes with values not yet normalized). Adds gateway quantities
// (origin gateway, derived_from set) only where the device sent none, never
// overwriting one; appends its findings to result.findings (once, when run
// twice) and returns them.
std::vector<Finding> assess_physiology(NeutralResult& result,
                                       const PhysiologyOptions& options = {});

}  // namespace pftgw
