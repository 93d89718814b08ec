// Validation of a normalized result: what each target cannot go without,
// values outside the table's plausible range, and related values that
// disagree beyond rounding. Rule ids and severities: DEVELOPERS.md,
// "Findings and rule ids". Pure: findings are returned, nothing is logged.
#include "gateway/core/validate.hpp"

#include <algorithm>
#include <charconv>
#include <cmath>
#include <string>
#include <string_view>
#include <system_error>

namespace pftgw {
namespace {

// ---- tolerances ----

// Absorbs binary floating-point error so a difference exactly at a tolerance
// counts as inside it (0.1 + 0.2 is not 0.3 in a double).
constexpr double kFloatSlack = 1e-9;

// FEV1 > FVC: both are reported to 0.01 L, so two equal true values can show
// up to one half step (0.005 L) apart after rounding. Beyond that FEV1 really
// exceeds FVC, which a single forced expiration cannot do.
constexpr double kFev1FvcRoundingL = 0.005;

// FEV1/FVC sent vs computed from the parts: parts rounded to 0.01 L move the
// quotient by up to about 0.005 for small volumes, the sent ratio rounded to
// two decimals by 0.005 more; 0.011 covers both with a little margin.
constexpr double kRatioTolerance = 0.011;

// KCO vs DLCO/VA: devices compute KCO from unrounded DLCO and VA, some with
// their own VA correction; 2 % relative plus half a display step of KCO.
constexpr double kKcoRelativeTolerance = 0.02;

// TLC vs RV + VC: 5 % is common practice for a volume identity measured in
// separate maneuvers, not a number from a standard.
constexpr double kTlcRelativeTolerance = 0.05;

// VI may exceed the largest VC or FVC a little (separate maneuvers); more
// than 5 % and more than 0.1 L suggests a unit or condition mistake.
// Common practice, not a standard's number.
constexpr double kViExcessRelative = 0.05;
constexpr double kViExcessL = 0.1;

// ---- number text ----

std::string shortest(double v) {
    char buf[64];
    const auto r = std::to_chars(buf, buf + sizeof buf, v);
    return r.ec == std::errc{} ? std::string(buf, r.ptr) : std::string("?");
}

std::string fixed(double v, int decimals) {
    char buf[64];
    const auto r = std::to_chars(buf, buf + sizeof buf, v, std::chars_format::fixed, decimals);
    return r.ec == std::errc{} ? std::string(buf, r.ptr) : shortest(v);
}

// Digits beyond the display decimals a seen value may show (gateway-derived
// values carry every bit of a division; six decimals are enough to read).
constexpr int kMaxExtraDecimals = 3;

bool parse_number(const std::string& text, double& out) {
    const auto r = std::from_chars(text.data(), text.data() + text.size(), out);
    return r.ec == std::errc{} && r.ptr == text.data() + text.size();
}

// A value as seen: the kind's display decimals, or a few more when the value
// has digits the display would hide (FEV1 3.406 must not read as 3.41, nor
// 0.0025 L as 0.00 L).
std::string seen_text(double v, int decimals) {
    if (!std::isfinite(v)) return shortest(v);
    for (int extra = 0; extra <= kMaxExtraDecimals; ++extra) {
        const std::string text = fixed(v, decimals + extra);
        double back = 0;
        if (parse_number(text, back) && back == v) return text;
    }
    return fixed(v, decimals + kMaxExtraDecimals);
}

// A value the gateway computed for comparison: one decimal more than the
// display, so a difference just beyond rounding is visible.
std::string computed_text(double v, int decimals) {
    return fixed(v, decimals + 1);
}

// Unit after a number in a message; the dimensionless "1" is left out.
std::string with_unit(const std::string& number, const std::string& unit) {
    if (unit.empty() || unit == "1") return number;
    return number + " " + unit;
}

std::string test_path(std::size_t i) {
    return "tests[" + std::to_string(i) + "]";
}

std::string value_path(std::size_t i, std::string_view kind) {
    return test_path(i) + ".values[" + std::string(kind) + "]";
}

std::string_view target_name(Target t) {
    switch (t) {
        case Target::hl7v2:
            return "HL7 v2";
        case Target::fhir:
            return "FHIR";
        case Target::neutral:
            break;
    }
    return "the neutral result";
}

class Checker {
public:
    Checker(const NeutralResult& result, Target target, const QuantityTable& table)
        : result_(result), target_(target), table_(table) {}

    std::vector<Finding> run() {
        resolve_kinds();
        check_completeness();
        check_plausibility();
        for (std::size_t i = 0; i < result_.tests.size(); ++i) check_test_consistency(i);
        check_vi_vc();
        return std::move(findings_);
    }

private:
    // Each reported value's table row, looked up once: a lookup is a binary
    // search over string keys, and plausibility, test type and consistency
    // would otherwise each repeat it for every value.
    void resolve_kinds() {
        kinds_.resize(result_.tests.size());
        for (std::size_t i = 0; i < result_.tests.size(); ++i) {
            const auto& values = result_.tests[i].values;
            kinds_[i].reserve(values.size());
            for (const Quantity& q : values) kinds_[i].push_back(table_.find(q.kind));
        }
    }

    void add(std::string rule, Severity severity, std::string path, std::string message,
             std::vector<std::pair<std::string, std::string>> values) {
        findings_.push_back(Finding{std::move(rule), severity, std::move(path), std::move(message),
                                    std::move(values)});
    }

    // ---- completeness ----

    bool has_any_time() const {
        if (result_.session_time) return true;
        return std::any_of(result_.tests.begin(), result_.tests.end(),
                           [](const Test& t) { return t.time.has_value(); });
    }

    bool has_any_value() const {
        for (const auto& t : result_.tests)
            for (const auto& q : t.values)
                if (q.value) return true;
        return false;
    }

    bool has_identifier_value() const {
        return std::any_of(result_.subject.identifiers.begin(), result_.subject.identifiers.end(),
                           [](const Identifier& id) { return !id.value.empty(); });
    }

    void check_completeness() {
        if (target_ == Target::neutral) {
            // Only what makes the document meaningless: it reports no test at all.
            if (result_.tests.empty())
                add("complete.values", Severity::error, "tests",
                    "the result has no test; expected at least one test with values", {});
            return;
        }
        const std::string target(target_name(target_));

        if (target_ == Target::hl7v2) {
            if (!has_identifier_value())
                add("complete.subject-identifier", Severity::error, "subject.identifiers",
                    "no subject identifier with a value; HL7 v2 needs one for PID-3",
                    {{"identifiers", std::to_string(result_.subject.identifiers.size())}});
            if (result_.subject.family_name.empty())
                add("complete.subject-name", Severity::error, "subject.name.family",
                    "no family name; HL7 v2 needs one for PID-5", {});
        } else {
            const bool ok = std::any_of(
                result_.subject.identifiers.begin(), result_.subject.identifiers.end(),
                [](const Identifier& id) { return !id.system.empty() && !id.value.empty(); });
            if (!ok)
                add("complete.subject-identifier", Severity::error, "subject.identifiers",
                    "no subject identifier with both system and value; FHIR needs one for the "
                    "conditional Patient create",
                    {{"identifiers", std::to_string(result_.subject.identifiers.size())}});
        }

        check_time(target);

        if (!has_any_value())
            add("complete.values", Severity::error, "tests",
                "no test with a reported value; " + target + " needs at least one " +
                    (target_ == Target::hl7v2 ? "OBX" : "Observation"),
                {{"tests", std::to_string(result_.tests.size())}});

        // A content-derived id (identity.hpp) only tells sessions apart when
        // the content names a subject and a time.
        const bool own_or_device = !result_.id.empty() || (!result_.device.id.empty() &&
                                                           !result_.device_session_number.empty());
        if (!own_or_device && !(has_identifier_value() && has_any_time()))
            add("complete.result-id", Severity::error, "id",
                "no result id, no device id with a session number, and no subject identifier "
                "and time to derive a stable id from; " +
                    target + " needs a stable id for idempotent delivery",
                {});
    }

    void check_time(const std::string& target) {
        const std::string where = target_ == Target::hl7v2 ? "OBR-7 / OBX-14" : "effective[x]";
        if (result_.session_time) return;
        if (!has_any_time()) {
            add("complete.time", Severity::error, "sessionTime",
                "no session time and no test time; " + target + " needs one for " + where, {});
            return;
        }
        // Some tests have a time, some not: the ones without have none to inherit.
        for (std::size_t i = 0; i < result_.tests.size(); ++i)
            if (!result_.tests[i].time && !result_.tests[i].values.empty())
                add("complete.time", Severity::error, test_path(i) + ".time",
                    "test " + std::string(to_string(result_.tests[i].type)) +
                        " has no time and the result has no session time; " + target +
                        " needs one for " + where,
                    {});
    }

    // ---- plausibility ----

    // `path` makes the finding's path: called only when there is a finding.
    template <class PathFn>
    void plausible(const QuantityKind& kind, double v, const PathFn& path) {
        if (v >= kind.plausible_min && v <= kind.plausible_max) return;  // NaN fails too
        const int d = kind.decimals_si;
        // The text shown must itself be outside the range, or the message
        // contradicts itself (10.0000001 shown as 10.000000).
        std::string text = seen_text(v, d);
        double back = 0;
        if (parse_number(text, back) && back >= kind.plausible_min && back <= kind.plausible_max)
            text = shortest(v);
        add("plausible.range", Severity::error, path(),
            kind.trade_name + " = " + with_unit(text, kind.canonical_unit) +
                " is outside the plausible range " + seen_text(kind.plausible_min, d) + "-" +
                with_unit(seen_text(kind.plausible_max, d), kind.canonical_unit),
            {{kind.key, shortest(v)}});
    }

    template <class PathFn>
    void check_quantity_plausible(const Quantity& q, const QuantityKind* kind, const PathFn& path) {
        // Unknown kinds and non-canonical units were reported by the reader or
        // by normalize(); a range in another unit would say nothing.
        if (kind == nullptr) return;
        if (q.value && q.unit == kind->canonical_unit) plausible(*kind, *q.value, path);
        for (std::size_t k = 0; k < q.reference.size(); ++k) {
            const auto& ref = q.reference[k];
            const std::pair<const char*, const std::optional<double>*> parts[] = {
                {"predicted", &ref.predicted}, {"lln", &ref.lln}, {"uln", &ref.uln}};
            for (const auto& [variant, value] : parts) {
                if (!value->has_value()) continue;
                const QuantityKind* vk = table_.variant_of(kind->base, variant);
                if (vk == nullptr) vk = kind;
                // A reference set that names no unit is in the quantity's unit.
                if (vk->canonical_unit != (ref.unit.empty() ? q.unit : ref.unit)) continue;
                plausible(*vk, **value, [&, variant = variant] {
                    return path() + ".reference[" + std::to_string(k) + "]." + variant;
                });
            }
        }
    }

    void check_plausibility() {
        const auto opt = [this](const std::optional<Quantity>& q, const char* path) {
            if (q)
                check_quantity_plausible(*q, table_.find(q->kind),
                                         [path] { return std::string(path); });
        };
        opt(result_.subject.height, "subject.height");
        opt(result_.subject.weight, "subject.weight");
        opt(result_.environment.temperature, "environment.temperature");
        opt(result_.environment.pressure, "environment.pressure");
        opt(result_.environment.humidity, "environment.humidity");
        for (std::size_t i = 0; i < result_.tests.size(); ++i) {
            const Test& t = result_.tests[i];
            for (std::size_t v = 0; v < t.values.size(); ++v) {
                const Quantity& q = t.values[v];
                check_quantity_plausible(q, kinds_[i][v], [&] { return value_path(i, q.kind); });
            }
            for (std::size_t j = 0; j < t.trials.size(); ++j)
                for (const auto& q : t.trials[j].values)
                    check_quantity_plausible(q, table_.find(q.kind), [&] {
                        return test_path(i) + ".trials[" + std::to_string(j) + "].values[" +
                               q.kind + "]";
                    });
        }
    }

    // ---- consistency ----

    // A reported value fit for arithmetic: present, in the canonical unit and,
    // for gas volumes, at the canonical condition. Anything else already has a
    // finding from normalize().
    const Quantity* usable(std::size_t test, std::string_view kind_key) const {
        // The first value of that kind, as Test::find; its row from kinds_.
        const auto& values = result_.tests[test].values;
        std::size_t v = 0;
        while (v < values.size() && values[v].kind != kind_key) ++v;
        if (v == values.size() || !values[v].value) return nullptr;
        const Quantity* q = &values[v];
        const QuantityKind* kind = kinds_[test][v];
        if (kind == nullptr || q->unit != kind->canonical_unit) return nullptr;
        if (kind->canonical_condition != GasCondition::none &&
            q->condition != kind->canonical_condition)
            return nullptr;
        return q;
    }

    // Same test first, then any other test (VC may sit in spirometry).
    const Quantity* usable_anywhere(std::size_t i, std::string_view kind_key) const {
        if (const Quantity* q = usable(i, kind_key)) return q;
        for (std::size_t j = 0; j < result_.tests.size(); ++j)
            if (j != i)
                if (const Quantity* q = usable(j, kind_key)) return q;
        return nullptr;
    }

    int decimals(std::string_view kind_key) const {
        const QuantityKind* k = table_.find(kind_key);
        return k ? k->decimals_si : 2;
    }

    std::string shown(const Quantity& q) const {
        return with_unit(seen_text(*q.value, decimals(q.kind)), q.unit);
    }

    void check_test_consistency(std::size_t i) {
        check_test_type(i);

        const Quantity* fev1 = usable(i, "FEV1");
        const Quantity* fvc = usable(i, "FVC");
        if (fev1 && fvc && *fev1->value - *fvc->value > kFev1FvcRoundingL + kFloatSlack)
            add("consistency.fev1-fvc", Severity::error, value_path(i, "FEV1"),
                "FEV1 " + shown(*fev1) + " is greater than FVC " + shown(*fvc) +
                    "; expected FEV1 <= FVC (within " + shortest(kFev1FvcRoundingL) +
                    " L rounding)",
                {{"FEV1", shortest(*fev1->value)}, {"FVC", shortest(*fvc->value)}});

        const Quantity* ratio = usable(i, "FEV1_FVC");
        if (ratio && fev1 && fvc && *fvc->value > 0) {
            const double computed = *fev1->value / *fvc->value;
            if (std::abs(*ratio->value - computed) > kRatioTolerance + kFloatSlack)
                add("consistency.ratio", Severity::warning, value_path(i, "FEV1_FVC"),
                    "FEV1/FVC sent as " + shown(*ratio) + " but FEV1 / FVC = " + shown(*fev1) +
                        " / " + shown(*fvc) + " = " +
                        computed_text(computed, decimals("FEV1_FVC")) + "; expected within " +
                        shortest(kRatioTolerance),
                    {{"FEV1_FVC", shortest(*ratio->value)},
                     {"FEV1/FVC", shortest(computed)},
                     {"FEV1", shortest(*fev1->value)},
                     {"FVC", shortest(*fvc->value)}});
        }

        const Quantity* kco = usable(i, "KCO");
        const Quantity* dlco = usable(i, "DLCO");
        const Quantity* va = usable(i, "VA");
        if (kco && dlco && va && *va->value > 0) {
            const double computed = *dlco->value / *va->value;
            const int d = decimals("KCO");
            const double half_step = 0.5 * std::pow(10.0, -d);
            const double tolerance = kKcoRelativeTolerance * computed + half_step;
            if (std::abs(*kco->value - computed) > tolerance + kFloatSlack)
                add("consistency.kco", Severity::warning, value_path(i, "KCO"),
                    "KCO sent as " + shown(*kco) + " but DLCO / VA = " + shown(*dlco) + " / " +
                        shown(*va) + " = " + computed_text(computed, d) +
                        "; expected within 2 % plus display rounding (" +
                        computed_text(tolerance, d) + ")",
                    {{"KCO", shortest(*kco->value)},
                     {"DLCO/VA", shortest(computed)},
                     {"DLCO", shortest(*dlco->value)},
                     {"VA", shortest(*va->value)}});
        }

        const Quantity* tlc = usable(i, "TLC");
        const Quantity* rv = tlc ? usable_anywhere(i, "RV") : nullptr;
        const Quantity* vc = tlc ? usable_anywhere(i, "VC") : nullptr;
        if (tlc && rv && vc) {
            const double sum = *rv->value + *vc->value;
            if (std::abs(*tlc->value - sum) > kTlcRelativeTolerance * sum + kFloatSlack)
                add("consistency.tlc", Severity::warning, value_path(i, "TLC"),
                    "TLC " + shown(*tlc) + " but RV + VC = " + shown(*rv) + " + " + shown(*vc) +
                        " = " + with_unit(computed_text(sum, decimals("TLC")), tlc->unit) +
                        "; expected within 5 %",
                    {{"TLC", shortest(*tlc->value)},
                     {"RV+VC", shortest(sum)},
                     {"RV", shortest(*rv->value)},
                     {"VC", shortest(*vc->value)}});
        }
    }

    void check_test_type(std::size_t i) {
        const Test& t = result_.tests[i];
        const std::string_view type = to_string(t.type);
        for (std::size_t v = 0; v < t.values.size(); ++v) {
            const Quantity& q = t.values[v];
            const QuantityKind* kind = kinds_[i][v];
            if (kind == nullptr || kind->test == type) continue;
            // A slow VC measured on a spirometer is common practice, and DLCO
            // systems measure it before the maneuver (VI/VC needs it).
            if (kind->base == "VC" && (type == "spirometry" || type == "diffusing-capacity"))
                continue;
            add("consistency.test-type", Severity::warning, value_path(i, q.kind),
                kind->trade_name + " belongs to " + kind->test + " but sits in a " +
                    std::string(type) + " test",
                {{"kind", q.kind}, {"test", std::string(type)}});
        }
    }

    void check_vi_vc() {
        // The largest VC or FVC reported anywhere in the result.
        const Quantity* largest = nullptr;
        for (std::size_t i = 0; i < result_.tests.size(); ++i)
            for (const char* key : {"VC", "FVC"})
                if (const Quantity* q = usable(i, key))
                    if (largest == nullptr || *q->value > *largest->value) largest = q;
        if (largest == nullptr) return;
        for (std::size_t i = 0; i < result_.tests.size(); ++i) {
            const Quantity* vi = usable(i, "VI");
            if (vi == nullptr) continue;
            const double excess = *vi->value - *largest->value;
            const double allowed = std::max(kViExcessRelative * *largest->value, kViExcessL);
            if (excess > allowed + kFloatSlack)
                add("consistency.vi-vc", Severity::warning, value_path(i, "VI"),
                    "VI " + shown(*vi) + " exceeds the largest " + largest->kind + " " +
                        shown(*largest) + " by " +
                        with_unit(computed_text(excess, decimals("VI")), vi->unit) +
                        "; expected at most 5 % and 0.1 L more",
                    {{"VI", shortest(*vi->value)}, {largest->kind, shortest(*largest->value)}});
        }
    }

    const NeutralResult& result_;
    Target target_;
    const QuantityTable& table_;
    std::vector<std::vector<const QuantityKind*>> kinds_;  // [test][value], see resolve_kinds()
    std::vector<Finding> findings_;
};

}  // namespace

std::vector<Finding> validate(const NeutralResult& result, Target target,
                              const QuantityTable& table) {
    return Checker(result, target, table).run();
}

}  // namespace pftgw
