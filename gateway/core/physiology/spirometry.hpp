// Spirometry acceptability, usability, repeatability and grades (ATS/ERS 2019 via
// lung-function-facts.md, "Spirometry"), and the reported values chosen from trials.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "gateway/core/physiology/dlco.hpp"

namespace pftgw::physiology {

// BEV < 5 % of FVC or 0.100 L, whichever is greater (V2).
inline constexpr double kBevFractionOfFvc = 0.05;
inline constexpr double kBevMinL = 0.100;
// End of forced expiration: < 0.025 L in the last 1 s, or FET >= 15 s, or FVC
// within the repeatability tolerance of / above the largest prior FVC (V2).
inline constexpr double kEotvPlateauL = 0.025;
inline constexpr double kFetEndS = 15.0;
// Forced inspiration: FIVC - FVC <= 0.100 L or 5 % of FVC, the greater
// (flag M: from memory of the 2019 acceptability table; not in the facts file).
inline constexpr double kFivcExcessL = 0.100;
inline constexpr double kFivcExcessFraction = 0.05;
// Grade tolerances between the two largest acceptable values (Table 10 via the
// facts file, V): A/B 0.150, C 0.200, D 0.250 L; age <= 6 y 0.100/0.100/0.150/0.200 L.
inline constexpr double kGradeAbL = 0.150;
inline constexpr double kGradeCL = 0.200;
inline constexpr double kGradeDL = 0.250;
inline constexpr double kGradeAbChildL = 0.100;
inline constexpr double kGradeCChildL = 0.150;
inline constexpr double kGradeDChildL = 0.200;
// Age <= 6 y: 0.100 L or 10 % of the highest value, the greater (facts file
// repeatability row, V2; applying the 10 % to grades A/B is from memory, M).
inline constexpr double kChildAgeMaxYears = 6.0;
inline constexpr double kChildRepeatabilityFraction = 0.10;
// Volumes are compared at a float slack far below any display step.
inline constexpr double kVolumeSlackL = 1e-9;

struct SpirometryTrial {
    int trial_number = 0;
    std::optional<double> fev1_l;
    std::optional<double> fvc_l;
    std::optional<double> bev_l;   // back-extrapolated volume
    std::optional<double> fet_s;   // forced expiratory time
    std::optional<double> eotv_l;  // volume change in the last 1 s
    std::optional<double> fivc_l;  // forced inspiratory VC after the expiration
    std::optional<bool> operator_accepted;
};

struct SpirometryTrialAssessment {
    int trial_number = 0;
    bool fev1_acceptable = false;
    bool fev1_usable = false;
    bool fvc_acceptable = false;
    bool fvc_usable = false;
    bool end_of_expiration = false;  // one of the three EOFE indicators achieved
    std::vector<CriterionNote> notes;
};

// The A/B repeatability tolerance for a value set: 0.150 L; age <= 6 y: 0.100 L
// or 10 % of the highest value, the greater. Unknown age: the adult limit.
double repeatability_tolerance_l(std::optional<double> age_years, double highest_l);

// Per trial, in session order (FVC "prior" means earlier in the vector).
// FEV1 acceptable: BEV, forced inspiration, operator; usable: BEV, operator.
// FVC acceptable: BEV, EOFE, forced inspiration, operator; usable: BEV, operator.
// (Criteria the gateway cannot see, such as cough or glottic closure, are the
// operator's: a trial the operator did not accept is neither acceptable nor usable.)
std::vector<SpirometryTrialAssessment> assess_spirometry_trials(
    const std::vector<SpirometryTrial>& trials, std::optional<double> age_years);

// Grade of FEV1 or FVC (Table 10): A >= 3 acceptable, B 2 acceptable, both
// with the two largest within the A/B tolerance; C >= 2 within 0.200 L; D >= 2
// within 0.250 L; E >= 2 beyond that, or 1 acceptable; U no acceptable and
// >= 1 usable; F none.
char spirometry_grade(std::vector<double> acceptable_l, int usable_count,
                      std::optional<double> age_years);

struct SpirometrySelection {
    std::optional<double> fev1_l;
    int fev1_trial = 0;
    std::optional<double> fvc_l;
    int fvc_trial = 0;
    int flows_trial = 0;       // largest FEV1 + FVC among trials acceptable for both; 0 if none
    bool from_usable = false;  // nothing acceptable: chosen among usable trials
};

// Largest FEV1 and largest FVC (possibly from different trials) among the
// acceptable trials, else among the usable ones (V2).
SpirometrySelection select_spirometry(const std::vector<SpirometryTrial>& trials,
                                      const std::vector<SpirometryTrialAssessment>& assessed);

}  // namespace pftgw::physiology
