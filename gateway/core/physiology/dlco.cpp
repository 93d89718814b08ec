// Single-breath DLCO, Jones-Meade breath-hold time, and DLCO maneuver grading.
#include "gateway/core/physiology/dlco.hpp"

#include <algorithm>
#include <charconv>
#include <cmath>

#include "gateway/core/gas.hpp"
#include "gateway/core/units.hpp"

namespace pftgw::physiology {
namespace {

std::string number(double v) {
    char buf[32];
    auto [p, ec] = std::to_chars(buf, buf + sizeof buf, v, std::chars_format::fixed, 3);
    std::string s = ec == std::errc() ? std::string(buf, p) : std::string("?");
    while (s.size() > 1 && s.back() == '0') s.pop_back();
    if (!s.empty() && s.back() == '.') s.pop_back();
    return s;
}

Error input_error(const std::string& what) {
    return make_error("dlco.input", what);
}

bool at_least(double v, double limit) {
    return v >= limit - kBoundarySlack;
}
bool at_most(double v, double limit) {
    return v <= limit + kBoundarySlack;
}

}  // namespace

double anatomic_dead_space_l(double body_mass_kg) {
    return kAnatomicDeadSpaceLPerKg * body_mass_kg;
}

Result<DlcoComputed> compute_single_breath_dlco(const DlcoInputs& in) {
    if (!(in.vi_btps_l > 0)) return input_error("VI " + number(in.vi_btps_l) + " L is not > 0");
    if (!(in.vd_instrument_l >= 0) || !(in.vd_anatomic_l >= 0))
        return input_error("a dead space is negative");
    const double vi_alveolar_l = in.vi_btps_l - in.vd_instrument_l - in.vd_anatomic_l;
    if (!(vi_alveolar_l > 0))
        return input_error("VI " + number(in.vi_btps_l) + " L is not larger than the dead space " +
                           number(in.vd_instrument_l + in.vd_anatomic_l) + " L");
    for (double f : {in.fi_co, in.fa_co, in.fi_tracer, in.fa_tracer})
        if (!(f > 0 && f < 1))
            return input_error("a gas fraction " + number(f) + " is not in (0, 1)");
    if (!(in.fa_tracer <= in.fi_tracer))
        return input_error("alveolar tracer fraction " + number(in.fa_tracer) +
                           " is above the inspired " + number(in.fi_tracer) +
                           ": the tracer cannot concentrate");
    if (!(in.breath_hold_s > 0))
        return input_error("breath-hold time " + number(in.breath_hold_s) + " s is not > 0");
    const double pb_mmhg = in.pressure_kpa / kKpaPerMmHg;
    if (!(pb_mmhg > kPh2oBodyMmHg))
        return input_error("barometric pressure " + number(in.pressure_kpa) +
                           " kPa is not above 47 mmHg");

    DlcoComputed out;
    out.fa_co_0 = in.fi_co * in.fa_tracer / in.fi_tracer;
    if (!(out.fa_co_0 > in.fa_co))
        return input_error("alveolar CO fraction " + number(in.fa_co) +
                           " is not below the initial " + number(out.fa_co_0) +
                           " (FI,CO x FA,Tr / FI,Tr): no CO was taken up");
    out.va_btps_l = vi_alveolar_l * in.fi_tracer / in.fa_tracer;
    auto to_stpd = gas_condition_factor(GasCondition::btps, GasCondition::stpd,
                                        Ambient{std::nullopt, in.pressure_kpa});
    if (!to_stpd) return to_stpd.error();
    out.va_stpd_l = out.va_btps_l * *to_stpd;
    out.dlco_ml_min_mmhg = out.va_stpd_l * kMlPerLTimesSPerMin /
                           (in.breath_hold_s * (pb_mmhg - kPh2oBodyMmHg)) *
                           std::log(out.fa_co_0 / in.fa_co);
    out.dlco_mmol_min_kpa = out.dlco_ml_min_mmhg / kDlcoTraditionalPerSi;
    out.kco_ml_min_mmhg_l = out.dlco_ml_min_mmhg / out.va_btps_l;
    out.kco_mmol_min_kpa_l = out.dlco_mmol_min_kpa / out.va_btps_l;
    return out;
}

Result<double> jones_meade_breath_hold_s(const ManeuverTimes& t) {
    double start_s = 0;
    if (t.inspiration_30_s) {
        start_s = *t.inspiration_30_s;
    } else {
        if (!t.inspiration_start_s || !t.inspiration_end_s)
            return make_error("dlco.timing",
                              "Jones-Meade needs the 30 % inspiratory time point, or the start "
                              "and end of inspiration");
        if (!(*t.inspiration_end_s > *t.inspiration_start_s))
            return make_error("dlco.timing", "end of inspiration " + number(*t.inspiration_end_s) +
                                                 " s is not after its start " +
                                                 number(*t.inspiration_start_s) + " s");
        start_s = *t.inspiration_start_s +
                  kJonesMeadeInspiratoryFraction * (*t.inspiration_end_s - *t.inspiration_start_s);
    }
    if (!t.sample_start_s || !t.sample_end_s)
        return make_error("dlco.timing",
                          "Jones-Meade needs the start and end of the alveolar sample collection");
    if (*t.sample_end_s < *t.sample_start_s)
        return make_error("dlco.timing", "sample collection ends " + number(*t.sample_end_s) +
                                             " s before it starts " + number(*t.sample_start_s) +
                                             " s");
    const double bht_s = 0.5 * (*t.sample_start_s + *t.sample_end_s) - start_s;
    if (!(bht_s > 0))
        return make_error("dlco.timing",
                          "the middle of the sample is not after the start of the "
                          "breath-hold");
    return bht_s;
}

namespace {

struct Criteria {
    bool vi90 = false, vi85 = false, vi80 = false;
    bool bht_ok = false;
    bool sample4 = true, sample5 = true;  // true when not sent: noted, not failed
};

Criteria criteria_of(const DlcoManeuver& m) {
    Criteria c;
    if (m.vi_vc) {
        c.vi90 = at_least(*m.vi_vc, kViVcAcceptable);
        c.vi85 = at_least(*m.vi_vc, kViVcWithVaRule);
        c.vi80 = at_least(*m.vi_vc, kViVcGradeCD);
    }
    if (m.breath_hold_s)
        c.bht_ok = at_least(*m.breath_hold_s, kBreathHoldMinS) &&
                   at_most(*m.breath_hold_s, kBreathHoldMaxS);
    if (m.sample_collection_s) {
        c.sample4 = at_most(*m.sample_collection_s, kSampleCollectionAbS);
        c.sample5 = at_most(*m.sample_collection_s, kSampleCollectionCdS);
    }
    return c;
}

// Acceptable without the 85 % rule: the grade-A criteria with VI/VC >= 90 %.
bool acceptable_by_vi90(const DlcoManeuver& m) {
    if (!m.vi_vc || !m.breath_hold_s) return false;
    if (m.operator_accepted && !*m.operator_accepted) return false;
    const Criteria c = criteria_of(m);
    return c.vi90 && c.bht_ok && c.sample4;
}

char grade_of(const Criteria& c, bool va_rule) {
    // ERS/ATS 2017 grades via lung-function-facts.md (V2, the D and F boundaries
    // uncertain; the primary grading table was not available to check).
    if ((c.vi90 || (c.vi85 && va_rule)) && c.bht_ok && c.sample4) return 'A';
    if (c.vi85 && c.bht_ok && c.sample4) return 'B';
    if (c.vi80 && c.bht_ok && c.sample5) return 'C';
    if (c.vi80 && !c.bht_ok && c.sample5) return 'D';
    return 'F';
}

void note(DlcoGrading& g, std::string criterion, std::string message, bool failed = true) {
    g.notes.push_back({std::move(criterion), std::move(message), failed});
}

}  // namespace

std::vector<DlcoGrading> grade_dlco_maneuvers(const std::vector<DlcoManeuver>& maneuvers) {
    std::vector<DlcoGrading> out;
    for (std::size_t i = 0; i < maneuvers.size(); ++i) {
        const DlcoManeuver& m = maneuvers[i];
        DlcoGrading g;
        g.trial_number = m.trial_number;
        const Criteria c = criteria_of(m);

        // The 85 % rule: VA within 200 mL or 5 % of the largest VA of another acceptable maneuver.
        bool va_rule = false;
        if (m.vi_vc && c.vi85 && !c.vi90 && m.va_l) {
            std::optional<double> largest_va;
            for (std::size_t j = 0; j < maneuvers.size(); ++j)
                if (j != i && maneuvers[j].va_l && acceptable_by_vi90(maneuvers[j]))
                    largest_va = std::max(largest_va.value_or(0.0), *maneuvers[j].va_l);
            if (largest_va) {
                const double tolerance_l = std::max(kVaRuleL, kVaRuleFraction * *largest_va);
                va_rule = *m.va_l >= *largest_va - tolerance_l - kBoundarySlack;
            }
        }

        if (!m.vi_vc) note(g, "vi-vc", "VI/VC not known: not checked", false);
        if (!m.breath_hold_s)
            note(g, "breath-hold", "breath-hold time not known: not checked", false);
        if (!m.sample_collection_s)
            note(g, "sample-collection", "sample collection time not known: not checked", false);
        g.complete = m.vi_vc && m.breath_hold_s && m.sample_collection_s;
        if (m.vi_vc && m.breath_hold_s) g.grade = grade_of(c, va_rule);

        if (m.vi_vc && !c.vi90) {
            if (va_rule)
                note(g, "vi-vc",
                     "VI/VC " + number(*m.vi_vc) +
                         " below 0.90 but at least 0.85 with VA within 200 mL or 5 % of the "
                         "largest VA of another acceptable maneuver",
                     false);
            else
                note(g, "vi-vc",
                     "VI/VC " + number(*m.vi_vc) +
                         " below 0.90 (0.85 only with VA within 200 mL or 5 % of another "
                         "acceptable maneuver's largest VA)");
        }
        if (m.breath_hold_s && !c.bht_ok)
            note(g, "breath-hold",
                 "breath-hold time " + number(*m.breath_hold_s) + " s outside 8-12 s");
        if (m.sample_collection_s && !c.sample4)
            note(g, "sample-collection",
                 "sample collection " + number(*m.sample_collection_s) + " s longer than 4 s");

        // Secondary criteria (flag M): notes only.
        if (m.inspiration_85_s && !(*m.inspiration_85_s < kInspiration85MaxS))
            note(g, "inspiration-time",
                 "85 % of VI took " + number(*m.inspiration_85_s) + " s; expected < 4 s");
        if (m.washout_l) {
            const bool small_vc = m.largest_vc_l && *m.largest_vc_l < kWashoutSmallVcBelowL;
            const double min_l = small_vc ? kWashoutMinSmallVcL : kWashoutMinL;
            if (!at_least(*m.washout_l, min_l) || !at_most(*m.washout_l, kWashoutMaxL))
                note(g, "washout-volume",
                     "washout " + number(*m.washout_l) + " L outside " + number(min_l) + "-1.0 L" +
                         (small_vc ? " (VC < 2 L)" : ""));
        }
        if (m.sample_l &&
            (!at_least(*m.sample_l, kSampleMinL) || !at_most(*m.sample_l, kSampleMaxL)))
            note(g, "sample-volume",
                 "sample volume " + number(*m.sample_l) + " L outside 0.5-1.0 L");
        if (m.since_previous_s && !at_least(*m.since_previous_s, kManeuverIntervalMinS))
            note(g, "interval",
                 number(*m.since_previous_s) + " s after the previous maneuver; expected >= 4 min");

        const bool rejected = m.operator_accepted && !*m.operator_accepted;
        if (rejected) note(g, "operator", "the operator did not accept the maneuver");
        g.used_va_rule = va_rule;
        g.acceptable = g.grade && *g.grade == 'A' && !rejected;
        out.push_back(std::move(g));
    }
    return out;
}

DlcoSessionSummary summarize_dlco_session(const std::vector<DlcoManeuver>& maneuvers,
                                          const std::vector<DlcoGrading>& gradings) {
    DlcoSessionSummary s;
    struct Value {
        int trial;
        double dlco;
    };
    std::vector<Value> acceptable;
    for (std::size_t i = 0; i < maneuvers.size() && i < gradings.size(); ++i) {
        const DlcoGrading& g = gradings[i];
        if (g.grade && (!s.session_grade || *g.grade < *s.session_grade))
            s.session_grade = *g.grade;
        if (g.acceptable && maneuvers[i].dlco_ml_min_mmhg)
            acceptable.push_back({maneuvers[i].trial_number, *maneuvers[i].dlco_ml_min_mmhg});
    }
    s.acceptable_count = static_cast<int>(acceptable.size());
    if (acceptable.empty()) return s;
    std::stable_sort(acceptable.begin(), acceptable.end(),
                     [](const Value& a, const Value& b) { return a.dlco > b.dlco; });
    std::vector<Value> used = acceptable;
    if (acceptable.size() >= 2) {
        s.spread_ml_min_mmhg = acceptable[0].dlco - acceptable[1].dlco;
        s.repeatable = at_most(*s.spread_ml_min_mmhg, kRepeatabilityMlMinMmHg);
        if (s.repeatable) {
            used.clear();
            for (const Value& v : acceptable)
                if (at_most(acceptable[0].dlco - v.dlco, kRepeatabilityMlMinMmHg))
                    used.push_back(v);
        }
    }
    double sum = 0;
    for (const Value& v : used) {
        sum += v.dlco;
        s.reported_trials.push_back(v.trial);
    }
    std::sort(s.reported_trials.begin(), s.reported_trials.end());
    s.reported_ml_min_mmhg = sum / static_cast<double>(used.size());
    return s;
}

}  // namespace pftgw::physiology
