// The physiology engine over a neutral result: reads maneuver quantities,
// calls the pure calculations (dlco, spirometry, lung_volumes, adjustments)
// and turns their answers into quantities and findings.
#include "gateway/core/physiology/physiology.hpp"

#include <algorithm>
#include <charconv>
#include <cmath>
#include <string>
#include <utility>

#include "gateway/core/derive.hpp"
#include "gateway/core/gas.hpp"
#include "gateway/core/physiology/adjustments.hpp"
#include "gateway/core/physiology/dlco.hpp"
#include "gateway/core/physiology/lung_volumes.hpp"
#include "gateway/core/physiology/spirometry.hpp"
#include "gateway/core/quantity_table.hpp"
#include "gateway/core/units.hpp"

namespace pftgw {
namespace {

using namespace physiology;
using Values = std::vector<std::pair<std::string, std::string>>;

constexpr const char* kTraditional = "mL/min/mm[Hg]";
// A sent / recomputed DLCO ratio within 1 % of a gas-condition factor (or its
// inverse) is named as the likely slip in the mismatch message. Engineering
// choice: the maneuver's rounding moves the ratio by well under 1 %.
constexpr double kKnownSlipRatioTolerance = 0.01;
constexpr const char* kSi = "mmol/min/kPa";

std::string fixed(double v, int decimals) {
    char buf[64];
    auto [p, ec] = std::to_chars(buf, buf + sizeof buf, v, std::chars_format::fixed, decimals);
    return ec == std::errc() ? std::string(buf, p) : std::string("?");
}

// A number for a finding's values and a derivation's text: 10 significant
// digits, so a value that went through a unit conversion and back reads as
// sent ("24.2", not "24.200000000000003") while a computed one keeps more
// digits than any display needs.
constexpr int kValueSignificantDigits = 10;
std::string shortest(double v) {
    char buf[64];
    auto [p, ec] = std::to_chars(buf, buf + sizeof buf, v, std::chars_format::general,
                                 kValueSignificantDigits);
    return ec == std::errc() ? std::string(buf, p) : std::string("?");
}

std::string grade_text(std::optional<char> g) {
    return g ? std::string(1, *g) : std::string("none");
}

const Quantity* find_in(const std::vector<Quantity>& values, std::string_view kind) {
    for (const Quantity& q : values)
        if (q.kind == kind) return &q;
    return nullptr;
}

// Reads quantities in the unit and gas condition a calculation needs,
// converting whatever the source sent (normalized or not).
class Reader {
public:
    explicit Reader(const NeutralResult& r) {
        if (const auto& t = r.environment.temperature; t && t->value && !t->absent_reason)
            if (auto c = convert_unit(*t->value, t->unit, "Cel")) ambient_.temperature_cel = *c;
        if (const auto& p = r.environment.pressure; p && p->value && !p->absent_reason)
            if (auto f = unit_factor(p->unit, "kPa")) ambient_.pressure_kpa = *p->value * *f;
    }

    const Ambient& ambient() const { return ambient_; }

    // Empty with `why` set when the value is absent or cannot be converted.
    std::optional<double> get(const std::vector<Quantity>& values, std::string_view kind,
                              std::string_view unit, GasCondition condition,
                              std::string* why = nullptr) const {
        auto fail = [&](std::string text) -> std::optional<double> {
            if (why) *why = std::move(text);
            return std::nullopt;
        };
        const Quantity* q = find_in(values, kind);
        if (!q || q->absent_reason || !q->value || !std::isfinite(*q->value))
            return fail(std::string(kind) + " not sent");
        auto f = unit_factor(q->unit, unit);
        if (!f) return fail(std::string(kind) + " in '" + q->unit + "': " + f.error().message);
        double v = *q->value * *f;
        if (condition == GasCondition::none) return v;
        GasCondition from = q->condition;
        if (from == GasCondition::unspecified || from == GasCondition::none) {
            const QuantityKind* k = quantity_table().find(kind);
            if (!k || !k->implied_condition || *k->implied_condition == GasCondition::none)
                return fail(std::string(kind) + " has no gas condition");
            from = *k->implied_condition;
        }
        auto g = gas_condition_factor(from, condition, ambient_);
        if (!g) return fail(std::string(kind) + ": " + g.error().message);
        return v * *g;
    }

private:
    Ambient ambient_;
};

Quantity gateway_quantity(std::string kind, double value, std::vector<std::string> from,
                          std::string steps, const Reader& reader) {
    Quantity q;
    const QuantityKind* k = quantity_table().find(kind);
    q.kind = std::move(kind);
    q.value = value;
    if (k) {
        q.unit = k->canonical_unit;
        q.condition = k->canonical_condition;
    }
    q.origin = Origin::gateway;
    q.derived_from = std::move(from);
    Derivation d;
    d.steps = std::move(steps);
    d.pressure_kpa = reader.ambient().pressure_kpa;
    q.derivation = std::move(d);
    return q;
}

void add_if_absent(std::vector<Quantity>& values, Quantity q) {
    if (!find_in(values, q.kind)) values.push_back(std::move(q));
}

Finding make_finding(std::string rule, Severity severity, std::string path, std::string message,
                     Values values) {
    Finding f;
    f.rule = std::move(rule);
    f.severity = severity;
    f.path = std::move(path);
    f.message = std::move(message);
    f.values = std::move(values);
    return f;
}

std::string notes_text(const std::vector<CriterionNote>& notes) {
    std::string s;
    for (const auto& n : notes) s += (s.empty() ? "" : "; ") + n.message;
    return s;
}

std::optional<double> age_at_test(const NeutralResult& r, const Test& t) {
    const std::optional<Timestamp>& at = t.time ? t.time : r.session_time;
    if (!r.subject.birth_date || !at) return std::nullopt;
    auto a = age_years(*r.subject.birth_date, at->date);
    return a ? std::optional<double>(*a) : std::nullopt;
}

// Whether `a` and `b` differ by more than max(fraction x b, floor).
bool differs(double a, double b, double fraction, double floor) {
    return std::abs(a - b) > std::max(fraction * std::abs(b), floor) + 1e-9;
}

class Engine {
public:
    Engine(NeutralResult& r, const PhysiologyOptions& o) : r_(r), o_(o), reader_(r) {}

    std::vector<Finding> run() {
        for (std::size_t i = 0; i < r_.tests.size(); ++i) {
            switch (r_.tests[i].type) {
                case TestType::diffusing_capacity:
                    dlco_test(i);
                    break;
                case TestType::spirometry:
                    spirometry_test(i);
                    break;
                case TestType::lung_volumes:
                    lung_volumes_test(i);
                    break;
            }
        }
        return std::move(findings_);
    }

private:
    static std::string test_path(std::size_t i) { return "tests[" + std::to_string(i) + "]"; }
    static std::string trial_path(std::size_t i, std::size_t j) {
        return test_path(i) + ".trials[" + std::to_string(j) + "]";
    }

    void add(std::string rule, Severity s, std::string path, std::string message, Values v) {
        findings_.push_back(
            make_finding(std::move(rule), s, std::move(path), std::move(message), std::move(v)));
    }

    // The largest VC or FVC reported in any test (as derive.hpp's VI/VC does).
    std::optional<double> largest_vc_l() const {
        std::optional<double> best;
        for (const Test& t : r_.tests)
            for (const char* kind : {"VC", "FVC"})
                if (auto v = reader_.get(t.values, kind, "L", GasCondition::btps))
                    best = std::max(best.value_or(0.0), *v);
        return best;
    }

    // ---- diffusing capacity ----

    struct TrialDlco {
        DlcoManeuver maneuver;
        std::optional<double> recomputed_va_l;
        std::optional<double> recomputed_dlco_ml_min_mmhg;
    };

    TrialDlco dlco_trial(std::size_t i, std::size_t j, std::optional<double> vc_l) {
        Trial& tr = r_.tests[i].trials[j];
        const auto& v = tr.values;
        const GasCondition none = GasCondition::none;
        const GasCondition btps = GasCondition::btps;
        TrialDlco out;
        DlcoManeuver& m = out.maneuver;
        m.trial_number = tr.number;
        m.operator_accepted = tr.operator_accepted;

        std::vector<std::string> missing;
        auto need = [&](std::optional<double> x, const std::string& why) {
            if (!x) missing.push_back(why);
            return x;
        };
        std::string why;
        const auto vi = need(reader_.get(v, "VI", "L", btps, &why), why);
        const auto vd_instr = need(reader_.get(v, "VD_INSTR", "L", none, &why), why);
        std::optional<double> vd_anat = reader_.get(v, "VD_ANAT", "L", btps);
        std::string vd_anat_step = "VD_ANAT as sent";
        if (!vd_anat && r_.subject.weight) {
            const auto mass = reader_.get({*r_.subject.weight}, "WEIGHT", "kg", none);
            if (mass) {
                vd_anat = anatomic_dead_space_l(*mass);
                vd_anat_step = "anatomic dead space 2.2 mL/kg x " + fixed(*mass, 1) + " kg";
            }
        }
        if (!vd_anat) missing.push_back("VD_ANAT not sent and body mass not known");
        const auto fi_co = need(reader_.get(v, "FICO", "1", none, &why), why);
        const auto fa_co = need(reader_.get(v, "FACO", "1", none, &why), why);
        const auto fi_tr = need(reader_.get(v, "FITR", "1", none, &why), why);
        const auto fa_tr = need(reader_.get(v, "FATR", "1", none, &why), why);

        ManeuverTimes times;
        times.inspiration_start_s = reader_.get(v, "T_INSP_START", "s", none);
        times.inspiration_30_s = reader_.get(v, "T_INSP_30", "s", none);
        times.inspiration_end_s = reader_.get(v, "T_INSP_END", "s", none);
        times.sample_start_s = reader_.get(v, "T_SAMPLE_START", "s", none);
        times.sample_end_s = reader_.get(v, "T_SAMPLE_END", "s", none);
        const auto sent_bht = reader_.get(v, "BHT", "s", none);
        const bool has_times = times.sample_start_s || times.sample_end_s ||
                               times.inspiration_30_s || times.inspiration_start_s;
        std::optional<double> bht;
        bool bht_jones_meade = false;
        if (has_times) {
            auto jm = jones_meade_breath_hold_s(times);
            if (jm) {
                bht = *jm;
                bht_jones_meade = true;
                if (sent_bht && std::abs(*sent_bht - *jm) > o_.breath_hold_tolerance_s + 1e-9)
                    add("dlco.breath-hold-mismatch", Severity::warning,
                        trial_path(i, j) + ".values[BHT]",
                        "breath-hold time sent " + fixed(*sent_bht, 2) +
                            " s, Jones-Meade from your timing points " + fixed(*jm, 2) + " s",
                        {{"BHT", shortest(*sent_bht)}, {"BHT.jones-meade", shortest(*jm)}});
            } else if (!sent_bht) {
                missing.push_back(jm.error().message);
            }
        }
        if (!bht) bht = sent_bht;
        if (!bht && !has_times) missing.push_back("neither BHT nor timing points sent");
        if (times.sample_start_s && times.sample_end_s)
            m.sample_collection_s = *times.sample_end_s - *times.sample_start_s;
        m.breath_hold_s = bht;
        m.inspiration_85_s = reader_.get(v, "T_INSP_85", "s", none);
        m.washout_l = reader_.get(v, "V_WASHOUT", "L", btps);
        m.sample_l = reader_.get(v, "V_SAMPLE", "L", btps);
        m.largest_vc_l = vc_l;
        if (auto sent = reader_.get(v, "VI_VC", "1", none))
            m.vi_vc = sent;
        else if (vi && vc_l && *vc_l > 0)
            m.vi_vc = *vi / *vc_l;

        const Quantity* device_dlco = find_in(v, "DLCO");
        const Quantity* device_va = find_in(v, "VA");
        const bool dlco_from_device = device_dlco && device_dlco->origin == Origin::device;
        const bool va_from_device = device_va && device_va->origin == Origin::device;
        const auto sent_dlco = dlco_from_device
                                   ? reader_.get(v, "DLCO", kTraditional, GasCondition::stpd)
                                   : std::nullopt;
        const auto sent_va = va_from_device ? reader_.get(v, "VA", "L", btps) : std::nullopt;
        m.va_l = sent_va;
        m.dlco_ml_min_mmhg = sent_dlco;

        const bool any_gas = fi_co || fa_co || fi_tr || fa_tr;
        std::optional<DlcoComputed> c;
        if (!reader_.ambient().pressure_kpa) missing.push_back("barometric pressure not known");
        if (missing.empty()) {
            DlcoInputs in{*vi,    *vd_instr, *vd_anat,
                          *fi_co, *fa_co,    *fi_tr,
                          *fa_tr, *bht,      *reader_.ambient().pressure_kpa};
            auto computed = compute_single_breath_dlco(in);
            if (computed)
                c = *computed;
            else
                missing.push_back(computed.error().message);
        }
        if (!c) {
            if (any_gas || vi)
                add("dlco.not-recomputed", Severity::info, trial_path(i, j),
                    "DLCO not recomputed from maneuver " + std::to_string(tr.number) + ": " +
                        [&] {
                            std::string s;
                            for (const auto& x : missing) s += (s.empty() ? "" : "; ") + x;
                            return s;
                        }(),
                    {{"trial", std::to_string(tr.number)}});
            return out;
        }

        out.recomputed_va_l = c->va_btps_l;
        out.recomputed_dlco_ml_min_mmhg = c->dlco_ml_min_mmhg;
        if (!m.va_l) m.va_l = c->va_btps_l;
        if (!m.dlco_ml_min_mmhg) m.dlco_ml_min_mmhg = c->dlco_ml_min_mmhg;
        Values vals{{"trial", std::to_string(tr.number)},
                    {"DLCO.recomputed", shortest(c->dlco_ml_min_mmhg)},
                    {"VA.recomputed", shortest(c->va_btps_l)},
                    {"BHT", shortest(*bht)}};
        if (sent_dlco && differs(*sent_dlco, c->dlco_ml_min_mmhg, o_.dlco_tolerance_fraction,
                                 o_.dlco_tolerance_ml_min_mmhg)) {
            // What a device maker needs to find the cause: the ratio, the inputs
            // the recomputation used, and a hint when the ratio is a known slip.
            const double ratio = *sent_dlco / c->dlco_ml_min_mmhg;
            const double stpd = c->va_stpd_l / c->va_btps_l;
            std::string hint;
            if (std::abs(ratio * stpd - 1.0) <= kKnownSlipRatioTolerance)
                hint = "; the ratio is 1 / the BTPS-to-STPD factor " + fixed(stpd, 4) +
                       ": was VA taken at BTPS where the formula needs STPD?";
            else if (std::abs(ratio / stpd - 1.0) <= kKnownSlipRatioTolerance)
                hint = "; the ratio is the BTPS-to-STPD factor " + fixed(stpd, 4) +
                       ": was VA converted to STPD twice?";
            add("dlco.recompute-mismatch", Severity::warning, trial_path(i, j) + ".values[DLCO]",
                "DLCO sent " + fixed(*sent_dlco, 1) + ", recomputed from your maneuver " +
                    fixed(c->dlco_ml_min_mmhg, 1) + " mL/min/mm[Hg] (" +
                    fixed(*sent_dlco / kDlcoTraditionalPerSi, 2) + " vs " +
                    fixed(c->dlco_mmol_min_kpa, 2) + " mmol/min/kPa); tolerance " +
                    fixed(o_.dlco_tolerance_fraction * 100, 0) + " % or " +
                    fixed(o_.dlco_tolerance_ml_min_mmhg, 1) + " mL/min/mm[Hg]; sent / recomputed " +
                    fixed(ratio, 3) + "; recomputed with VA " + fixed(c->va_btps_l, 3) +
                    " L BTPS (" + fixed(c->va_stpd_l, 3) + " L STPD), dead space " +
                    fixed(*vd_instr + *vd_anat, 3) + " L, breath-hold " + fixed(*bht, 2) + " s" +
                    (bht_jones_meade ? " (Jones-Meade)" : " (as sent)") + ", PB " +
                    fixed(*reader_.ambient().pressure_kpa, 2) + " kPa, FA,CO,0 " +
                    fixed(c->fa_co_0, 6) + hint,
                {{"trial", std::to_string(tr.number)},
                 {"DLCO.sent", shortest(*sent_dlco)},
                 {"DLCO.recomputed", shortest(c->dlco_ml_min_mmhg)},
                 {"ratio", shortest(ratio)},
                 {"unit", kTraditional}});
        }
        if (sent_va && differs(*sent_va, c->va_btps_l, o_.va_tolerance_fraction, o_.va_tolerance_l))
            add("dlco.va-mismatch", Severity::warning, trial_path(i, j) + ".values[VA]",
                "VA sent " + fixed(*sent_va, 2) + ", recomputed from your maneuver " +
                    fixed(c->va_btps_l, 2) + " L BTPS; tolerance " +
                    fixed(o_.va_tolerance_fraction * 100, 0) + " % or " +
                    fixed(o_.va_tolerance_l, 3) + " L",
                {{"trial", std::to_string(tr.number)},
                 {"VA.sent", shortest(*sent_va)},
                 {"VA.recomputed", shortest(c->va_btps_l)}});
        add("dlco.recomputed", Severity::info, trial_path(i, j),
            "maneuver " + std::to_string(tr.number) + ": DLCO " + fixed(c->dlco_ml_min_mmhg, 1) +
                " mL/min/mm[Hg] (" + fixed(c->dlco_mmol_min_kpa, 2) + " mmol/min/kPa), VA " +
                fixed(c->va_btps_l, 2) + " L BTPS, breath-hold " + fixed(*bht, 2) + " s" +
                (bht_jones_meade ? " (Jones-Meade)" : " (as sent)"),
            std::move(vals));

        // Quantities the device did not send for this maneuver.
        const std::vector<std::string> from{"VI",   "VD_INSTR", "VD_ANAT", "FICO", "FACO",
                                            "FITR", "FATR",     "BHT",     "PB"};
        const std::string method =
            "single-sample method (ERS/ATS 2017 via lung-function-facts.md); " + vd_anat_step;
        add_if_absent(
            tr.values,
            gateway_quantity("VA", c->va_btps_l, from,
                             "recomputed: VA = (VI - VD) x FI,Tr / FA,Tr; " + method, reader_));
        add_if_absent(tr.values, gateway_quantity("DLCO", c->dlco_mmol_min_kpa, from,
                                                  "recomputed: " + method + "; / 2.987", reader_));
        add_if_absent(tr.values, gateway_quantity("KCO", c->kco_mmol_min_kpa_l, {"DLCO", "VA"},
                                                  "recomputed: DLCO / VA", reader_));
        if (bht_jones_meade)
            add_if_absent(tr.values, gateway_quantity("BHT", *bht,
                                                      {"T_INSP_START", "T_INSP_30", "T_INSP_END",
                                                       "T_SAMPLE_START", "T_SAMPLE_END"},
                                                      "Jones-Meade", reader_));
        return out;
    }

    void dlco_test(std::size_t i) {
        Test& t = r_.tests[i];
        const auto vc_l = largest_vc_l();
        std::vector<DlcoManeuver> maneuvers;
        std::vector<std::size_t> index;                 // trial index of each maneuver
        std::vector<std::optional<double>> recomputed;  // recomputed DLCO of each maneuver
        std::size_t ungradable = 0;
        for (std::size_t j = 0; j < t.trials.size(); ++j) {
            TrialDlco td = dlco_trial(i, j, vc_l);
            const DlcoManeuver& m = td.maneuver;
            // A grade needs at least VI/VC and the breath-hold time; a trial that
            // carries only its DLCO is not graded (a grade "none" would mislead).
            if (m.vi_vc && m.breath_hold_s) {
                maneuvers.push_back(m);
                index.push_back(j);
                recomputed.push_back(td.recomputed_dlco_ml_min_mmhg);
            } else if (m.dlco_ml_min_mmhg) {
                ++ungradable;
            }
        }
        if (maneuvers.empty() && ungradable > 0)
            add("quality.dlco.not-graded", Severity::info, test_path(i),
                "DLCO maneuvers not graded: grading needs VI/VC (VI and a VC) and the breath-hold "
                "time of each maneuver",
                {{"maneuvers", std::to_string(ungradable)}});
        // Interval from the previous maneuver, in time order.
        for (std::size_t a = 0; a < maneuvers.size(); ++a) {
            const auto& ta = t.trials[index[a]].time;
            if (!ta) continue;
            std::optional<long long> previous;
            for (std::size_t b = 0; b < maneuvers.size(); ++b) {
                const auto& tb = t.trials[index[b]].time;
                if (b == a || !tb) continue;
                const long long d = to_unix_seconds(*ta) - to_unix_seconds(*tb);
                if (d > 0 && (!previous || d < *previous)) previous = d;
            }
            if (previous) maneuvers[a].since_previous_s = static_cast<double>(*previous);
        }
        if (!maneuvers.empty()) grade_dlco(i, maneuvers, index, recomputed);
        adjust_dlco(i);
    }

    // The reported DLCO is the mean of maneuvers as the device computed them;
    // when the same maneuvers recomputed from their own data give a mean beyond
    // the tolerance, the value in the record does not follow from the data
    // either (the per-maneuver warnings say which maneuver and by how much).
    void reported_vs_recomputed(std::size_t i, const DlcoSessionSummary& s,
                                const std::vector<DlcoManeuver>& maneuvers,
                                const std::vector<std::optional<double>>& recomputed,
                                const std::string& trials) {
        const Test& t = r_.tests[i];
        const auto sent = reader_.get(t.values, "DLCO", kTraditional, GasCondition::stpd);
        if (!sent || s.reported_trials.empty()) return;
        double sum = 0;
        for (int n : s.reported_trials) {
            std::optional<double> c;
            for (std::size_t a = 0; a < maneuvers.size(); ++a)
                if (maneuvers[a].trial_number == n) c = recomputed[a];
            if (!c) return;  // a maneuver not recomputed: nothing to compare
            sum += *c;
        }
        const double mean = sum / static_cast<double>(s.reported_trials.size());
        if (!differs(*sent, mean, o_.dlco_tolerance_fraction, o_.dlco_tolerance_ml_min_mmhg))
            return;
        add("dlco.recompute-mismatch", Severity::warning, test_path(i) + ".values[DLCO]",
            "reported DLCO " + fixed(*sent, 1) + " mL/min/mm[Hg] (" +
                fixed(*sent / kDlcoTraditionalPerSi, 2) +
                " mmol/min/kPa) does not follow from the maneuvers it is taken over (" + trials +
                "): recomputed from their data their mean is " + fixed(mean, 1) +
                " mL/min/mm[Hg] (" + fixed(mean / kDlcoTraditionalPerSi, 2) +
                " mmol/min/kPa); tolerance " + fixed(o_.dlco_tolerance_fraction * 100, 0) +
                " % or " + fixed(o_.dlco_tolerance_ml_min_mmhg, 1) + " mL/min/mm[Hg]",
            {{"DLCO.sent", shortest(*sent)},
             {"DLCO.recomputed-mean", shortest(mean)},
             {"trials", trials},
             {"unit", kTraditional}});
    }

    void grade_dlco(std::size_t i, const std::vector<DlcoManeuver>& maneuvers,
                    const std::vector<std::size_t>& index,
                    const std::vector<std::optional<double>>& recomputed) {
        Test& t = r_.tests[i];
        const auto gradings = grade_dlco_maneuvers(maneuvers);
        for (std::size_t a = 0; a < gradings.size(); ++a) {
            const DlcoGrading& g = gradings[a];
            const DlcoManeuver& m = maneuvers[a];
            Values vals{{"trial", std::to_string(g.trial_number)},
                        {"grade", grade_text(g.grade)},
                        {"acceptable", g.acceptable ? "true" : "false"}};
            if (m.vi_vc) vals.emplace_back("VI_VC", shortest(*m.vi_vc));
            if (m.breath_hold_s) vals.emplace_back("BHT", shortest(*m.breath_hold_s));
            if (m.sample_collection_s)
                vals.emplace_back("sample_collection_s", shortest(*m.sample_collection_s));
            for (const auto& n : g.notes)
                if (n.failed) vals.emplace_back("failed", n.criterion);
            const std::string notes = notes_text(g.notes);
            add("quality.dlco.maneuver", Severity::info, trial_path(i, index[a]),
                "DLCO maneuver " + std::to_string(g.trial_number) + ": grade " +
                    grade_text(g.grade) + (g.acceptable ? ", acceptable" : ", not acceptable") +
                    (notes.empty() ? "" : ": " + notes),
                std::move(vals));
        }
        const DlcoSessionSummary s = summarize_dlco_session(maneuvers, gradings);
        add("quality.grade", Severity::info, test_path(i),
            "DLCO session grade " + grade_text(s.session_grade) +
                " (best maneuver; ERS/ATS 2017 grades via a secondary source, the primary "
                "grading table not checked)",
            {{"DLCO", grade_text(s.session_grade)}});

        Values rep{{"acceptable", std::to_string(s.acceptable_count)}};
        if (s.spread_ml_min_mmhg)
            rep.emplace_back("spread_mL/min/mm[Hg]", shortest(*s.spread_ml_min_mmhg));
        if (s.repeatable) {
            add("quality.dlco.repeatability", Severity::info, test_path(i),
                "DLCO repeatable: the two highest acceptable maneuvers differ by " +
                    fixed(*s.spread_ml_min_mmhg, 2) + " mL/min/mm[Hg] (limit 2, " +
                    fixed(*s.spread_ml_min_mmhg / kDlcoTraditionalPerSi, 2) +
                    " vs 0.67 mmol/min/kPa)",
                std::move(rep));
        } else {
            add("quality.dlco.repeatability", Severity::warning, test_path(i),
                s.acceptable_count < 2
                    ? "DLCO repeatability not shown: " + std::to_string(s.acceptable_count) +
                          " acceptable maneuver(s), at least 2 needed"
                    : "DLCO not repeatable: the two highest acceptable maneuvers differ by " +
                          fixed(*s.spread_ml_min_mmhg, 2) + " mL/min/mm[Hg] (limit 2)",
                std::move(rep));
        }
        if (!s.reported_ml_min_mmhg) return;

        std::string trials;
        for (int n : s.reported_trials) trials += (trials.empty() ? "" : ", ") + std::to_string(n);
        const Quantity* reported = t.find("DLCO");
        if (reported && reported->origin == Origin::device) {
            if (auto sent = reader_.get(t.values, "DLCO", kTraditional, GasCondition::stpd))
                if (std::abs(*sent - *s.reported_ml_min_mmhg) >
                    o_.dlco_reported_tolerance_ml_min_mmhg + 1e-9)
                    add("dlco.reported-mismatch", Severity::warning, test_path(i) + ".values[DLCO]",
                        "reported DLCO " + fixed(*sent, 1) +
                            " mL/min/mm[Hg], but the mean of the acceptable" +
                            (s.repeatable ? ", repeatable" : "") + " maneuvers " + trials + " is " +
                            fixed(*s.reported_ml_min_mmhg, 1),
                        {{"DLCO.sent", shortest(*sent)},
                         {"DLCO.mean", shortest(*s.reported_ml_min_mmhg)},
                         {"trials", trials}});
            reported_vs_recomputed(i, s, maneuvers, recomputed, trials);
            return;
        }
        if (reported) return;  // a gateway value from an earlier run stands
        Quantity q = gateway_quantity(
            "DLCO", *s.reported_ml_min_mmhg / kDlcoTraditionalPerSi, {"DLCO"},
            "mean of the acceptable" + std::string(s.repeatable ? ", repeatable" : "") +
                " maneuvers " + trials + " (ERS/ATS 2017)",
            reader_);
        q.trials = s.reported_trials;
        t.values.push_back(std::move(q));
        // VA and KCO over the same maneuvers, when the device reported neither.
        if (!t.find("VA")) {
            double sum = 0;
            int n = 0;
            for (const Trial& tr : t.trials)
                if (std::find(s.reported_trials.begin(), s.reported_trials.end(), tr.number) !=
                    s.reported_trials.end())
                    if (auto va = reader_.get(tr.values, "VA", "L", GasCondition::btps)) {
                        sum += *va;
                        ++n;
                    }
            if (n == static_cast<int>(s.reported_trials.size()) && n > 0) {
                Quantity va = gateway_quantity("VA", sum / n, {"VA"},
                                               "mean over maneuvers " + trials, reader_);
                va.trials = s.reported_trials;
                t.values.push_back(std::move(va));
                if (!t.find("KCO"))
                    t.values.push_back(gateway_quantity(
                        "KCO", *s.reported_ml_min_mmhg / kDlcoTraditionalPerSi / (sum / n),
                        {"DLCO", "VA"}, "computed: DLCO / VA", reader_));
            }
        }
    }

    void adjust_dlco(std::size_t i) {
        Test& t = r_.tests[i];
        const auto dlco = reader_.get(t.values, "DLCO", kSi, GasCondition::stpd);
        if (!dlco) return;
        // Hb (Cotes, derive.hpp): normalize() derives it for a device DLCO; here
        // for a DLCO the gateway reported from the maneuvers.
        if (auto hb = reader_.get(t.values, "HB", "g/dL", GasCondition::none);
            hb && *hb > 0 && !t.find("DLCO_HB")) {
            const auto age = age_at_test(r_, t);
            auto ref = cotes_reference_hb_gdl(r_.subject.sex_at_birth, age.value_or(std::nan("")));
            if (ref) {
                t.values.push_back(gateway_quantity(
                    "DLCO_HB", *dlco * cotes_measured_factor(*hb, *ref), {"DLCO", "HB"},
                    "adjusted: Hb (Cotes), DLCO x (Hb + 0.7 x " + shortest(*ref) +
                        ") / (1.7 x Hb), Hbref " + shortest(*ref) + " g/dL",
                    reader_));
            } else {
                add("adjust.hb", Severity::info, test_path(i) + ".values[DLCO_HB]",
                    "DLCO not adjusted for Hb: " + ref.error().message, {{"HB", shortest(*hb)}});
            }
        }
        if (auto cohb = reader_.get(t.values, "COHB", "%", GasCondition::none);
            cohb && !t.find("DLCO_COHB")) {
            if (*cohb >= 0 && *cohb < kCohbReferencePercentPlus100)
                t.values.push_back(gateway_quantity(
                    "DLCO_COHB", *dlco * cohb_measured_factor(*cohb), {"DLCO", "COHB"},
                    "adjusted: COHb, DLCO x 100 / (102 - " + shortest(*cohb) +
                        ") (from memory: predicted x (102 % - COHb %))",
                    reader_));
        }
        if (const auto pb_kpa = reader_.ambient().pressure_kpa; pb_kpa && !t.find("DLCO_ALT")) {
            const double pio2 = inspired_po2_mmhg(*pb_kpa / kKpaPerMmHg);
            if (kPio2SeaLevelMmHg - pio2 >= o_.altitude_min_pio2_deficit_mmhg) {
                Quantity q = gateway_quantity(
                    "DLCO_ALT", *dlco * altitude_factor(pio2), {"DLCO", "PB"},
                    "adjusted: altitude, DLCO x (1 + 0.0031 x (PIO2 - 150)), PIO2 = 0.21 x (PB - "
                    "47) = " +
                        fixed(pio2, 1) + " mmHg (from memory)",
                    reader_);
                t.values.push_back(std::move(q));
            }
        }
    }

    // ---- spirometry ----

    void spirometry_test(std::size_t i) {
        Test& t = r_.tests[i];
        const GasCondition btps = GasCondition::btps;
        std::vector<SpirometryTrial> trials;
        std::vector<std::size_t> index;
        bool any_bev = false;
        for (std::size_t j = 0; j < t.trials.size(); ++j) {
            const auto& v = t.trials[j].values;
            SpirometryTrial st;
            st.trial_number = t.trials[j].number;
            st.fev1_l = reader_.get(v, "FEV1", "L", btps);
            st.fvc_l = reader_.get(v, "FVC", "L", btps);
            if (!st.fev1_l && !st.fvc_l) continue;
            st.bev_l = reader_.get(v, "BEV", "L", btps);
            st.fet_s = reader_.get(v, "FET", "s", GasCondition::none);
            st.eotv_l = reader_.get(v, "EOTV", "L", btps);
            st.fivc_l = reader_.get(v, "FIVC", "L", btps);
            st.operator_accepted = t.trials[j].operator_accepted;
            any_bev = any_bev || st.bev_l;
            trials.push_back(st);
            index.push_back(j);
        }
        if (trials.empty()) return;
        if (!any_bev) {
            add("quality.spirometry.not-assessed", Severity::info, test_path(i),
                "spirometry trials not graded: no trial carries a back-extrapolated volume (BEV)",
                {{"trials", std::to_string(trials.size())}});
            return;
        }
        // "Prior" FVC means an earlier trial: session order by trial number.
        std::vector<std::size_t> order(trials.size());
        for (std::size_t a = 0; a < order.size(); ++a) order[a] = a;
        std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) {
            return trials[a].trial_number < trials[b].trial_number;
        });
        std::vector<SpirometryTrial> sorted;
        std::vector<std::size_t> sorted_index;
        for (std::size_t a : order) {
            sorted.push_back(trials[a]);
            sorted_index.push_back(index[a]);
        }
        const auto age = age_at_test(r_, t);
        const auto assessed = assess_spirometry_trials(sorted, age);

        std::vector<double> fev1_ok, fvc_ok;
        int fev1_usable = 0, fvc_usable = 0;
        for (std::size_t a = 0; a < assessed.size(); ++a) {
            const auto& s = assessed[a];
            if (s.fev1_acceptable) fev1_ok.push_back(*sorted[a].fev1_l);
            if (s.fvc_acceptable) fvc_ok.push_back(*sorted[a].fvc_l);
            fev1_usable += s.fev1_usable;
            fvc_usable += s.fvc_usable;
            auto yes = [](bool b) { return b ? std::string("true") : std::string("false"); };
            Values vals{{"trial", std::to_string(s.trial_number)},
                        {"FEV1.acceptable", yes(s.fev1_acceptable)},
                        {"FEV1.usable", yes(s.fev1_usable)},
                        {"FVC.acceptable", yes(s.fvc_acceptable)},
                        {"FVC.usable", yes(s.fvc_usable)}};
            for (const auto& n : s.notes)
                if (n.failed) vals.emplace_back("failed", n.criterion);
            const std::string notes = notes_text(s.notes);
            add("quality.spirometry.trial", Severity::info, trial_path(i, sorted_index[a]),
                "spirometry trial " + std::to_string(s.trial_number) + ": FEV1 " +
                    (s.fev1_acceptable ? "acceptable" : (s.fev1_usable ? "usable" : "not usable")) +
                    ", FVC " +
                    (s.fvc_acceptable ? "acceptable" : (s.fvc_usable ? "usable" : "not usable")) +
                    (notes.empty() ? "" : " (" + notes + ")"),
                std::move(vals));
        }
        const char fev1_grade = spirometry_grade(fev1_ok, fev1_usable, age);
        const char fvc_grade = spirometry_grade(fvc_ok, fvc_usable, age);
        add("quality.grade", Severity::info, test_path(i),
            std::string("spirometry grade FEV1 ") + fev1_grade + ", FVC " + fvc_grade +
                " (ATS/ERS 2019 Table 10)" +
                (age ? "" : "; age unknown: the limits for age over 6 y were used"),
            {{"FEV1", std::string(1, fev1_grade)}, {"FVC", std::string(1, fvc_grade)}});
        repeatability_finding(i, "FEV1", fev1_ok, age);
        repeatability_finding(i, "FVC", fvc_ok, age);
        report_spirometry(i, sorted, assessed);
    }

    void repeatability_finding(std::size_t i, const char* kind, std::vector<double> ok,
                               std::optional<double> age) {
        if (ok.size() < 2) return;
        std::sort(ok.begin(), ok.end(), std::greater<>());
        const double spread = ok[0] - ok[1];
        const double tol = repeatability_tolerance_l(age, ok[0]);
        const bool repeatable = spread <= tol + kVolumeSlackL;
        add("quality.spirometry.repeatability", repeatable ? Severity::info : Severity::warning,
            test_path(i) + ".values[" + kind + "]",
            std::string(kind) + (repeatable ? " repeatable" : " not repeatable") +
                ": the two largest acceptable values differ by " + fixed(spread, 3) + " L (limit " +
                fixed(tol, 3) + " L)",
            {{"kind", kind}, {"spread_L", shortest(spread)}, {"limit_L", shortest(tol)}});
    }

    void report_spirometry(std::size_t i, const std::vector<SpirometryTrial>& trials,
                           const std::vector<SpirometryTrialAssessment>& assessed) {
        Test& t = r_.tests[i];
        const SpirometrySelection sel = select_spirometry(trials, assessed);
        const std::string basis = sel.from_usable ? "usable" : "acceptable";
        auto choose = [&](const char* kind, std::optional<double> best, int trial) {
            if (!best) return;
            const Quantity* reported = t.find(kind);
            if (reported && reported->origin == Origin::device) {
                if (auto sent = reader_.get(t.values, kind, "L", GasCondition::btps))
                    if (std::abs(*sent - *best) > o_.spirometry_reported_tolerance_l + 1e-9)
                        add("spirometry.reported-not-largest", Severity::warning,
                            test_path(i) + ".values[" + kind + "]",
                            std::string("reported ") + kind + " " + fixed(*sent, 2) +
                                " L, but the largest " + basis + " trial (" +
                                std::to_string(trial) + ") has " + fixed(*best, 2) + " L",
                            {{kind, shortest(*sent)},
                             {std::string(kind) + ".largest", shortest(*best)},
                             {"trial", std::to_string(trial)}});
                return;
            }
            if (reported) return;
            Quantity q = gateway_quantity(kind, *best, {kind},
                                          "largest " + basis + " trial (ATS/ERS 2019)", reader_);
            q.trials = {trial};
            t.values.push_back(std::move(q));
        };
        choose("FEV1", sel.fev1_l, sel.fev1_trial);
        choose("FVC", sel.fvc_l, sel.fvc_trial);
        if (sel.flows_trial == 0) return;
        for (const Trial& tr : t.trials) {
            if (tr.number != sel.flows_trial) continue;
            for (const char* kind : {"PEF", "FEF25_75", "FEF75"}) {
                if (t.find(kind)) continue;
                if (auto v = reader_.get(tr.values, kind, "L/s", GasCondition::btps)) {
                    Quantity q = gateway_quantity(
                        kind, *v, {kind}, "from the trial with the largest FEV1 + FVC", reader_);
                    q.trials = {tr.number};
                    t.values.push_back(std::move(q));
                }
            }
        }
    }

    // ---- lung volumes ----

    std::optional<double> volume_anywhere(std::size_t i, const char* kind) const {
        if (auto v = reader_.get(r_.tests[i].values, kind, "L", GasCondition::btps)) return v;
        for (std::size_t j = 0; j < r_.tests.size(); ++j)
            if (j != i)
                if (auto v = reader_.get(r_.tests[j].values, kind, "L", GasCondition::btps))
                    return v;
        return std::nullopt;
    }

    void lung_volumes_test(std::size_t i) {
        const Test& t = r_.tests[i];
        const GasCondition btps = GasCondition::btps;
        LungVolumes lv;
        lv.tlc_l = reader_.get(t.values, "TLC", "L", btps);
        lv.frc_l = reader_.get(t.values, "FRC", "L", btps);
        lv.rv_l = reader_.get(t.values, "RV", "L", btps);
        lv.erv_l = reader_.get(t.values, "ERV", "L", btps);
        lv.ic_l = reader_.get(t.values, "IC", "L", btps);
        lv.vc_l = volume_anywhere(i, "VC");
        for (const IdentityCheck& c : check_lung_volume_identities(lv)) {
            if (c.consistent) continue;
            if (c.identity == "TLC = RV + VC" && !o_.check_tlc_rv_vc) continue;
            add("lung-volumes.identity", Severity::warning,
                test_path(i) + ".values[" + c.whole + "]",
                c.identity + " does not hold: " + c.whole + " " + fixed(c.whole_l, 2) +
                    " L, parts sum to " + fixed(c.sum_l, 2) + " L (tolerance " +
                    fixed(c.tolerance_l, 2) + " L: 5 % plus rounding)",
                {{"identity", c.identity},
                 {c.whole, shortest(c.whole_l)},
                 {"sum", shortest(c.sum_l)}});
        }
        std::vector<double> frc;
        for (const Trial& tr : t.trials)
            if (auto v = reader_.get(tr.values, "FRC", "L", btps)) frc.push_back(*v);
        if (frc.empty()) return;
        const auto rep = frc_repeatability(frc, frc_method_of(t.method));
        if (!rep) {
            add("quality.frc-repeatability", Severity::info, test_path(i),
                "FRC repeatability not checked: method '" + t.method +
                    "' is neither plethysmography nor washout / dilution",
                {{"method", t.method}});
            return;
        }
        add("quality.frc-repeatability", rep->repeatable ? Severity::info : Severity::warning,
            test_path(i) + ".values[FRC]",
            std::string("FRC ") + (rep->repeatable ? "repeatable" : "not repeatable") + ": " +
                std::to_string(rep->count) + " value(s), spread " +
                fixed(rep->spread_fraction * 100, 1) + " % of the mean " + fixed(rep->mean_l, 2) +
                " L (needs " + std::to_string(rep->min_count) + " within " +
                fixed(rep->limit_fraction * 100, 0) + " %, from memory)",
            {{"count", std::to_string(rep->count)},
             {"spread_fraction", shortest(rep->spread_fraction)},
             {"mean_L", shortest(rep->mean_l)}});
    }

    NeutralResult& r_;
    const PhysiologyOptions& o_;
    Reader reader_;
    std::vector<Finding> findings_;
};

}  // namespace

std::vector<Finding> assess_physiology(NeutralResult& result, const PhysiologyOptions& options) {
    std::vector<Finding> findings = Engine(result, options).run();
    for (const Finding& f : findings)
        if (std::find(result.findings.begin(), result.findings.end(), f) == result.findings.end())
            result.findings.push_back(f);
    return findings;
}

}  // namespace pftgw
