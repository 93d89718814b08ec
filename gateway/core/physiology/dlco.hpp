// Single-breath DLCO from one maneuver (classic single-sample method), the
// Jones-Meade breath-hold time, and the ERS/ATS 2017 acceptability, grade and
// repeatability of DLCO maneuvers (lung-function-facts.md, "Single-breath DLCO
// calculation" and "DLCO acceptability, repeatability, grade").
// Plain numbers in, plain numbers out; physiology.hpp wires them into a result.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "gateway/core/result.hpp"

namespace pftgw::physiology {

// Anatomic dead space per kg body mass: 2.2 mL/kg (lung-function-facts.md, flag M:
// from memory, not checked against the 2017 text).
inline constexpr double kAnatomicDeadSpaceLPerKg = 0.0022;
// mL per L times s per min: DLCO [mL/min/mmHg] = VA,STPD [L] x 60 000 / (tBH [s] x (PB - 47)).
inline constexpr double kMlPerLTimesSPerMin = 60000.0;
// The trade's PH2O at 37 C, 47 mmHg (gas.hpp holds the same value in kPa).
inline constexpr double kPh2oBodyMmHg = 47.0;
// Jones-Meade: the breath-hold starts at 30 % of the inspiratory time.
inline constexpr double kJonesMeadeInspiratoryFraction = 0.30;

// Inputs of the single-sample calculation, in the units named.
struct DlcoInputs {
    double vi_btps_l = 0;        // inspired volume, BTPS
    double vd_instrument_l = 0;  // instrument dead space (geometric volume)
    double vd_anatomic_l = 0;    // anatomic dead space, BTPS
    double fi_co = 0;            // inspired CO fraction (dry test gas)
    double fa_co = 0;            // alveolar CO fraction at the end of the breath-hold
    double fi_tracer = 0;        // inspired tracer fraction
    double fa_tracer = 0;        // alveolar tracer fraction
    double breath_hold_s = 0;    // Jones-Meade or as sent
    double pressure_kpa = 0;     // barometric pressure
};

struct DlcoComputed {
    double va_btps_l = 0;
    double va_stpd_l = 0;
    double fa_co_0 = 0;            // initial alveolar CO fraction, FI,CO x FA,Tr / FI,Tr
    double dlco_ml_min_mmhg = 0;   // STPD, traditional units
    double dlco_mmol_min_kpa = 0;  // STPD, SI: traditional / 2.987 (DECISIONS.md)
    double kco_ml_min_mmhg_l = 0;  // DLCO (STPD) / VA (BTPS)
    double kco_mmol_min_kpa_l = 0;
};

// VA = (VI - VD) x FI,Tr / FA,Tr; FA,CO,0 = FI,CO x FA,Tr / FI,Tr;
// DLCO = VA,STPD x 60 000 / (tBH x (PB - 47)) x ln(FA,CO,0 / FA,CO), PB in mmHg;
// VA BTPS -> STPD by gas_condition_factor (gas.hpp).
// Errors "dlco.input" (a fraction, volume, time or pressure out of its domain).
Result<DlcoComputed> compute_single_breath_dlco(const DlcoInputs& in);

// Anatomic dead space from body mass: 2.2 mL/kg (flag M).
double anatomic_dead_space_l(double body_mass_kg);

// Timing points of one maneuver, in s from a common zero.
struct ManeuverTimes {
    std::optional<double> inspiration_start_s;  // back-extrapolated zero of the inspiration
    std::optional<double> inspiration_30_s;     // 30 % of the inspiratory time, when sent
    std::optional<double> inspiration_end_s;
    std::optional<double> sample_start_s;
    std::optional<double> sample_end_s;
};

// Jones-Meade breath-hold time: from 30 % of the inspiratory time (the sent
// point, else start + 0.3 x (end - start)) to the middle of the alveolar sample.
// Error "dlco.timing" when the points needed are missing or out of order.
Result<double> jones_meade_breath_hold_s(const ManeuverTimes& t);

// ---- acceptability and grade (ERS/ATS 2017 via lung-function-facts.md) ----

// Inspired volume: VI >= 90 % of the largest VC, or >= 85 % when VA is within
// 200 mL or 5 % (the greater) of the largest VA of another acceptable maneuver (V2).
inline constexpr double kViVcAcceptable = 0.90;
inline constexpr double kViVcWithVaRule = 0.85;
inline constexpr double kVaRuleL = 0.200;
inline constexpr double kVaRuleFraction = 0.05;
// Grade C and D accept VI/VC >= 80 % (V2; the 2017 grading table was not available to check).
inline constexpr double kViVcGradeCD = 0.80;
// Breath-hold 10 +/- 2 s (ATS/ERS 2005 text V; 2017 V2).
inline constexpr double kBreathHoldMinS = 8.0;
inline constexpr double kBreathHoldMaxS = 12.0;
// Sample collection <= 4 s for A and B, <= 5 s for C and D (2005 V; 2017 V2).
inline constexpr double kSampleCollectionAbS = 4.0;
inline constexpr double kSampleCollectionCdS = 5.0;
// 85 % of VI inspired in < 4 s (flag M, from memory of the 2017 text).
inline constexpr double kInspiration85MaxS = 4.0;
// Washout 0.75-1.0 L (0.5 L when VC < 2 L); sample 0.5-1.0 L (flag M, from memory).
inline constexpr double kWashoutMinL = 0.75;
inline constexpr double kWashoutMinSmallVcL = 0.5;
inline constexpr double kWashoutSmallVcBelowL = 2.0;
inline constexpr double kWashoutMaxL = 1.0;
inline constexpr double kSampleMinL = 0.5;
inline constexpr double kSampleMaxL = 1.0;
// At least 4 min between maneuvers (flag M, from memory).
inline constexpr double kManeuverIntervalMinS = 240.0;
// Repeatability: two acceptable values within 2 mL/min/mmHg, compared in
// traditional units even when the data are SI (DECISIONS.md; V2).
inline constexpr double kRepeatabilityMlMinMmHg = 2.0;
// Floating-point slack at a boundary only: 0.85 stored as 4.25 / 5.0 must still be 85 %.
inline constexpr double kBoundarySlack = 1e-9;

// One maneuver as the grading sees it. Missing optional data is not a failure:
// the criterion is reported as not checked.
struct DlcoManeuver {
    int trial_number = 0;
    std::optional<double> vi_vc;          // VI / largest VC (fraction)
    std::optional<double> va_l;           // VA (BTPS), for the 85 % rule
    std::optional<double> breath_hold_s;  // Jones-Meade
    std::optional<double> sample_collection_s;
    std::optional<double> inspiration_85_s;  // time to inspire 85 % of VI
    std::optional<double> washout_l;
    std::optional<double> sample_l;
    std::optional<double> largest_vc_l;      // to choose the washout limit
    std::optional<double> since_previous_s;  // interval from the previous maneuver
    std::optional<double> dlco_ml_min_mmhg;  // the maneuver's DLCO (device's or recomputed)
    std::optional<bool> operator_accepted;
};

// A criterion that failed or could not be checked, for a finding.
struct CriterionNote {
    std::string criterion;  // "vi-vc", "breath-hold", "sample-collection", "inspiration-time", ...
    std::string message;
    bool failed = true;  // false: not checked for want of data
};

struct DlcoGrading {
    int trial_number = 0;
    // A, B, C, D, F (DECISIONS.md: no E); empty when VI/VC or the breath-hold is not known.
    std::optional<char> grade;
    // False when the sample collection time was not sent: graded as if met, and noted.
    bool complete = false;
    bool acceptable = false;    // grade A and not rejected by the operator
    bool used_va_rule = false;  // acceptable through the 85 % / VA rule
    std::vector<CriterionNote> notes;
};

// Grades every maneuver of a session. The 85 % rule compares a maneuver's VA
// with the largest VA of the other maneuvers that are acceptable by VI/VC >= 90 %.
// The secondary criteria (inspiration time, washout and sample volume, interval:
// flag M) add notes but change neither grade nor acceptability.
std::vector<DlcoGrading> grade_dlco_maneuvers(const std::vector<DlcoManeuver>& maneuvers);

// Repeatability and the reported value from the graded maneuvers.
struct DlcoSessionSummary {
    int acceptable_count = 0;
    bool repeatable = false;                   // the two highest acceptable within 2 mL/min/mmHg
    std::optional<double> spread_ml_min_mmhg;  // highest minus second highest acceptable
    std::optional<double> reported_ml_min_mmhg;
    std::vector<int> reported_trials;   // the maneuvers the reported mean is taken over
    std::optional<char> session_grade;  // the best maneuver grade
};

// Reported value (ERS/ATS 2017 via the facts file, V2): the mean of the
// acceptable maneuvers within 2 mL/min/mmHg of the highest acceptable one, when
// at least two are; else the mean of the acceptable maneuvers (not repeatable);
// none when no maneuver is acceptable.
DlcoSessionSummary summarize_dlco_session(const std::vector<DlcoManeuver>& maneuvers,
                                          const std::vector<DlcoGrading>& gradings);

}  // namespace pftgw::physiology
