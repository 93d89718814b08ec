// Derived quantities (KCO, FEV1/FVC, RV/TLC, VI/VC, Hb-adjusted DLCO) and the
// Cotes Hb functions (lung-function-facts.md, "Adjustments").
#include "gateway/core/derive.hpp"

#include <charconv>
#include <cmath>
#include <string>
#include <utility>

#include "gateway/core/quantity_table.hpp"
#include "gateway/core/time.hpp"

namespace pftgw {
namespace {

// Cotes: DM / (theta Vc) = 0.7 at the reference Hb, hence 1.7 = 1 + 0.7.
constexpr double kCotesRatio = 0.7;

std::string number(double v) {
    char buf[32];
    auto [p, ec] = std::to_chars(buf, buf + sizeof buf, v);
    return ec == std::errc() ? std::string(buf, p) : std::string("?");
}

// One input of a derivation, looked up among a test's reported values. Why
// it is not usable is worded only when a finding needs it (problem()): most
// inputs are looked up for a derivation that is not reported at all.
struct Input {
    std::string kind;
    std::optional<double> value;  // what the quantity holds, usable or not
    bool usable = false;          // a finite value in the canonical unit and condition
    const Quantity* quantity = nullptr;
    const QuantityKind* row = nullptr;  // looked up once the quantity holds a value

    bool present() const { return value.has_value(); }

    // Why it is not usable; empty when usable.
    std::string problem() const {
        const Quantity* q = quantity;
        if (!q) return kind + " is not in the test";
        if (q->absent_reason) return kind + " is absent (" + *q->absent_reason + ")";
        if (!q->value) return kind + " has no value";
        const QuantityKind* k = row;
        if (!k) return kind + " is not in the quantity table";
        if (q->unit != k->canonical_unit)
            return kind + " is in '" + q->unit + "', not the canonical '" + k->canonical_unit +
                   "' (not normalized)";
        if (k->canonical_condition != GasCondition::none && q->condition != k->canonical_condition)
            return kind + " is at '" + std::string(to_string(q->condition)) + "', not " +
                   std::string(to_string(k->canonical_condition)) + " (not normalized)";
        if (!std::isfinite(*q->value)) return kind + " is not a finite number";
        return {};
    }
};

Input find_input(const Test& test, std::string_view kind) {
    Input in;
    in.kind = std::string(kind);
    const Quantity* q = test.find(kind);
    in.quantity = q;
    if (!q || q->absent_reason || !q->value) return in;
    in.value = q->value;
    const QuantityKind* k = quantity_table().find(kind);
    in.row = k;
    in.usable =
        k && q->unit == k->canonical_unit &&
        (k->canonical_condition == GasCondition::none || q->condition == k->canonical_condition) &&
        std::isfinite(*q->value);
    return in;
}

Quantity make_derived(std::string_view kind, double value, std::vector<std::string> from,
                      std::string steps) {
    const QuantityKind* k = quantity_table().find(kind);
    Quantity q;
    q.kind = std::string(kind);
    q.value = value;
    if (k) {
        q.unit = k->canonical_unit;
        q.condition = k->canonical_condition;
    }
    q.origin = Origin::gateway;
    q.derived_from = std::move(from);
    Derivation d;
    d.steps = std::move(steps);
    q.derivation = std::move(d);
    return q;
}

Finding not_derived(std::size_t test_index, std::string_view kind, const std::string& formula,
                    const std::string& why, const std::vector<const Input*>& inputs) {
    Finding f;
    f.rule = "derive." + std::string(kind);
    f.severity = Severity::info;
    f.path = "tests[" + std::to_string(test_index) + "].values[" + std::string(kind) + "]";
    f.message = std::string(kind) + " = " + formula + " not computed: " + why;
    for (const Input* in : inputs)
        f.values.emplace_back(in->kind, in->present() ? number(*in->value) : "absent");
    return f;
}

// The first problem among the inputs, or empty when all are usable.
std::string first_problem(const std::vector<const Input*>& inputs) {
    for (const Input* in : inputs)
        if (!in->usable) return in->problem();
    return {};
}

// kind = numerator / denominator, both in one test. Reports only when one of
// them is present: a result without any of them has nothing to say.
void derive_ratio(Test& test, std::size_t index, std::string_view kind, std::string_view numerator,
                  std::string_view denominator, std::vector<Finding>& findings) {
    if (test.find(kind)) return;  // the device's value (or its absence) stands
    const Input num = find_input(test, numerator);
    const Input den = find_input(test, denominator);
    if (!num.present() && !den.present()) return;
    const std::string formula = std::string(numerator) + " / " + std::string(denominator);
    const std::vector<const Input*> inputs{&num, &den};
    std::string why = first_problem(inputs);
    if (why.empty() && !(*den.value > 0)) why = den.kind + " is not above zero";
    if (!why.empty()) {
        findings.push_back(not_derived(index, kind, formula, why, inputs));
        return;
    }
    test.values.push_back(make_derived(kind, *num.value / *den.value,
                                       {std::string(numerator), std::string(denominator)},
                                       "computed: " + formula));
}

// The largest usable VC or FVC among every test's reported values.
std::optional<std::pair<std::string, double>> largest_vital_capacity(const NeutralResult& r) {
    std::optional<std::pair<std::string, double>> best;
    for (const Test& t : r.tests)
        for (const char* kind : {"VC", "FVC"}) {
            const Input in = find_input(t, kind);
            if (in.usable && (!best || *in.value > best->second)) best = {in.kind, *in.value};
        }
    return best;
}

void derive_vi_vc(NeutralResult& r, std::size_t index, std::vector<Finding>& findings) {
    Test& test = r.tests[index];
    if (test.find("VI_VC")) return;
    const Input vi = find_input(test, "VI");
    if (!vi.present()) return;  // VC without VI is every spirometry: nothing to say
    const std::string formula = "VI / largest of VC and FVC";
    const auto vc = largest_vital_capacity(r);
    Input vc_input;
    vc_input.kind = vc ? vc->first : "VC";
    if (vc) vc_input.value = vc->second;
    const std::vector<const Input*> inputs{&vi, &vc_input};
    std::string why;
    if (!vi.usable)
        why = vi.problem();
    else if (!vc)
        why = "no usable VC or FVC in the result";
    else if (!(vc->second > 0))
        why = vc->first + " is not above zero";
    if (!why.empty()) {
        findings.push_back(not_derived(index, "VI_VC", formula, why, inputs));
        return;
    }
    test.values.push_back(make_derived("VI_VC", *vi.value / vc->second, {"VI", vc->first},
                                       "computed: VI / " + vc->first));
}

// Age at the test in decimal years, from the birth date and the test's date
// (or the session's). Empty with a reason when it cannot be known.
std::optional<double> age_at(const NeutralResult& r, const Test& test, std::string& why) {
    if (!r.subject.birth_date) {
        why = "the birth date is not known";
        return std::nullopt;
    }
    const std::optional<Timestamp>& at = test.time ? test.time : r.session_time;
    if (!at) {
        why = "neither the test time nor the session time is known";
        return std::nullopt;
    }
    auto age = age_years(*r.subject.birth_date, at->date);
    if (!age) {
        why = age.error().message;
        return std::nullopt;
    }
    return *age;
}

void derive_dlco_hb(NeutralResult& r, std::size_t index, std::vector<Finding>& findings) {
    Test& test = r.tests[index];
    if (test.find("DLCO_HB")) return;
    const Input hb = find_input(test, "HB");
    if (!hb.present()) return;  // DLCO without Hb is the common case: nothing to say
    const Input dlco = find_input(test, "DLCO");
    const std::string formula = "DLCO x (Hb + 0.7 Hbref) / (1.7 Hb) (Cotes)";
    const std::vector<const Input*> inputs{&dlco, &hb};
    std::string why = first_problem(inputs);
    if (why.empty() && !(*hb.value > 0)) why = "HB is not above zero";
    std::optional<double> hb_ref;
    if (why.empty()) {
        std::string age_why;
        const auto age = age_at(r, test, age_why);
        const double age_value = age ? *age : std::nan("");
        auto ref = cotes_reference_hb_gdl(r.subject.sex_at_birth, age_value);
        if (ref)
            hb_ref = *ref;
        else if (r.subject.sex_at_birth == SexAtBirth::male && !age)
            why =
                "the reference Hb of a male depends on age, and age at test is unknown: " + age_why;
        else
            why = ref.error().message;
    }
    if (!why.empty()) {
        Finding f = not_derived(index, "DLCO_HB", formula, why, inputs);
        f.values.emplace_back("sex_at_birth", std::string(to_string(r.subject.sex_at_birth)));
        findings.push_back(std::move(f));
        return;
    }
    const double factor = cotes_measured_factor(*hb.value, *hb_ref);
    test.values.push_back(make_derived("DLCO_HB", *dlco.value * factor, {"DLCO", "HB"},
                                       "computed: Cotes, DLCO x (Hb + 0.7 x " + number(*hb_ref) +
                                           ") / (1.7 x Hb), Hbref " + number(*hb_ref) + " g/dL"));
}

}  // namespace

Result<double> cotes_reference_hb_gdl(SexAtBirth sex, double age_years) {
    switch (sex) {
        case SexAtBirth::female:
            return kHbRefOtherGdl;  // any age
        case SexAtBirth::male:
            if (!std::isfinite(age_years) || age_years < 0)
                return make_error("cotes.age-unknown",
                                  "the reference Hb of a male depends on age, which is not known");
            return age_years >= kCotesAdultAgeYears ? kHbRefMaleGdl : kHbRefOtherGdl;
        case SexAtBirth::unknown:
            break;
    }
    return make_error("cotes.sex-unknown",
                      "the reference Hb depends on sex at birth, which is not known");
}

double cotes_measured_factor(double hb, double hb_ref) {
    return (hb + kCotesRatio * hb_ref) / ((1.0 + kCotesRatio) * hb);
}

double cotes_predicted_factor(double hb, double hb_ref) {
    return (1.0 + kCotesRatio) * hb / (hb + kCotesRatio * hb_ref);
}

std::vector<Finding> derive_quantities(NeutralResult& result) {
    std::vector<Finding> findings;
    for (std::size_t i = 0; i < result.tests.size(); ++i) {
        derive_ratio(result.tests[i], i, "FEV1_FVC", "FEV1", "FVC", findings);
        derive_ratio(result.tests[i], i, "RV_TLC", "RV", "TLC", findings);
        derive_ratio(result.tests[i], i, "KCO", "DLCO", "VA", findings);
        derive_vi_vc(result, i, findings);
        derive_dlco_hb(result, i, findings);
    }
    return findings;
}

}  // namespace pftgw
