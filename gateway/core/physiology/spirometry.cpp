// Spirometry acceptability and grades (ATS/ERS 2019 via lung-function-facts.md).
#include "gateway/core/physiology/spirometry.hpp"

#include <algorithm>
#include <charconv>
#include <functional>

namespace pftgw::physiology {
namespace {

std::string litres(double v) {
    char buf[32];
    auto [p, ec] = std::to_chars(buf, buf + sizeof buf, v, std::chars_format::fixed, 3);
    return (ec == std::errc() ? std::string(buf, p) : std::string("?")) + " L";
}

bool is_child(std::optional<double> age_years) {
    return age_years && *age_years <= kChildAgeMaxYears;
}

}  // namespace

double repeatability_tolerance_l(std::optional<double> age_years, double highest_l) {
    if (!is_child(age_years)) return kGradeAbL;
    return std::max(kGradeAbChildL, kChildRepeatabilityFraction * highest_l);
}

std::vector<SpirometryTrialAssessment> assess_spirometry_trials(
    const std::vector<SpirometryTrial>& trials, std::optional<double> age_years) {
    std::vector<SpirometryTrialAssessment> out;
    std::optional<double> largest_prior_fvc_l;
    for (const SpirometryTrial& t : trials) {
        SpirometryTrialAssessment a;
        a.trial_number = t.trial_number;
        auto note = [&a](std::string c, std::string m, bool failed = true) {
            a.notes.push_back({std::move(c), std::move(m), failed});
        };

        bool bev_ok = false;
        if (!t.bev_l) {
            note("bev", "back-extrapolated volume not sent: not acceptable, not usable");
        } else {
            const double limit_l =
                t.fvc_l ? std::max(kBevFractionOfFvc * *t.fvc_l, kBevMinL) : kBevMinL;
            bev_ok = *t.bev_l < limit_l - kVolumeSlackL;
            if (!bev_ok)
                note("bev", "BEV " + litres(*t.bev_l) + " not below " + litres(limit_l) +
                                " (5 % of FVC or 0.100 L, the greater)");
        }

        bool inspiration_ok = true;
        if (t.fivc_l && t.fvc_l) {
            const double allowed_l = std::max(kFivcExcessL, kFivcExcessFraction * *t.fvc_l);
            if (*t.fivc_l - *t.fvc_l > allowed_l + kVolumeSlackL) {
                inspiration_ok = false;
                note("forced-inspiration", "FIVC " + litres(*t.fivc_l) + " exceeds FVC " +
                                               litres(*t.fvc_l) + " by more than " +
                                               litres(allowed_l) +
                                               ": the inspiration before it was not maximal");
            }
        }

        // The three end-of-forced-expiration indicators; one suffices.
        const bool plateau = t.eotv_l && *t.eotv_l < kEotvPlateauL - kVolumeSlackL;
        const bool long_enough = t.fet_s && *t.fet_s >= kFetEndS - kVolumeSlackL;
        bool repeats_prior = false;
        if (t.fvc_l && largest_prior_fvc_l) {
            const double tol_l =
                repeatability_tolerance_l(age_years, std::max(*t.fvc_l, *largest_prior_fvc_l));
            repeats_prior = *t.fvc_l >= *largest_prior_fvc_l - tol_l - kVolumeSlackL;
        }
        a.end_of_expiration = plateau || long_enough || repeats_prior;
        if (!a.end_of_expiration)
            note("end-of-expiration",
                 std::string("no end-of-forced-expiration indicator: ") +
                     (t.eotv_l ? "last-second volume " + litres(*t.eotv_l) + " not < 0.025 L"
                               : "last-second volume not sent") +
                     ", " + (t.fet_s ? "FET below 15 s" : "FET not sent") +
                     ", FVC not within the repeatability tolerance of a larger prior FVC");

        const bool rejected = t.operator_accepted && !*t.operator_accepted;
        if (rejected) note("operator", "the operator did not accept the trial");

        a.fev1_usable = bev_ok && !rejected && t.fev1_l.has_value();
        a.fev1_acceptable = a.fev1_usable && inspiration_ok;
        a.fvc_usable = bev_ok && !rejected && t.fvc_l.has_value();
        a.fvc_acceptable = a.fvc_usable && inspiration_ok && a.end_of_expiration;

        if (t.fvc_l) largest_prior_fvc_l = std::max(largest_prior_fvc_l.value_or(0.0), *t.fvc_l);
        out.push_back(std::move(a));
    }
    return out;
}

char spirometry_grade(std::vector<double> acceptable_l, int usable_count,
                      std::optional<double> age_years) {
    if (acceptable_l.empty()) return usable_count > 0 ? 'U' : 'F';
    if (acceptable_l.size() == 1) return 'E';
    std::sort(acceptable_l.begin(), acceptable_l.end(), std::greater<>());
    const double spread_l = acceptable_l[0] - acceptable_l[1];
    const bool child = is_child(age_years);
    const double ab_l = repeatability_tolerance_l(age_years, acceptable_l[0]);
    const double c_l = child ? kGradeCChildL : kGradeCL;
    const double d_l = child ? kGradeDChildL : kGradeDL;
    if (spread_l <= ab_l + kVolumeSlackL) return acceptable_l.size() >= 3 ? 'A' : 'B';
    if (spread_l <= c_l + kVolumeSlackL) return 'C';
    if (spread_l <= d_l + kVolumeSlackL) return 'D';
    return 'E';
}

SpirometrySelection select_spirometry(const std::vector<SpirometryTrial>& trials,
                                      const std::vector<SpirometryTrialAssessment>& assessed) {
    SpirometrySelection s;
    bool any_acceptable = false;
    for (const auto& a : assessed)
        any_acceptable = any_acceptable || a.fev1_acceptable || a.fvc_acceptable;
    s.from_usable = !any_acceptable;
    double best_sum = -1;
    for (std::size_t i = 0; i < trials.size() && i < assessed.size(); ++i) {
        const SpirometryTrial& t = trials[i];
        const SpirometryTrialAssessment& a = assessed[i];
        const bool fev1_ok = s.from_usable ? a.fev1_usable : a.fev1_acceptable;
        const bool fvc_ok = s.from_usable ? a.fvc_usable : a.fvc_acceptable;
        if (fev1_ok && (!s.fev1_l || *t.fev1_l > *s.fev1_l)) {
            s.fev1_l = t.fev1_l;
            s.fev1_trial = t.trial_number;
        }
        if (fvc_ok && (!s.fvc_l || *t.fvc_l > *s.fvc_l)) {
            s.fvc_l = t.fvc_l;
            s.fvc_trial = t.trial_number;
        }
        if (fev1_ok && fvc_ok && *t.fev1_l + *t.fvc_l > best_sum) {
            best_sum = *t.fev1_l + *t.fvc_l;
            s.flows_trial = t.trial_number;
        }
    }
    return s;
}

}  // namespace pftgw::physiology
