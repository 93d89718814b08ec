// Normalization to the quantity table's canonical unit and gas condition, and
// the output rendering in SI or traditional units.
#include "gateway/core/normalize.hpp"

#include <charconv>
#include <cmath>
#include <optional>
#include <string>
#include <string_view>
#include <utility>

#include "gateway/core/derive.hpp"
#include "gateway/core/gas.hpp"
#include "gateway/core/units.hpp"

namespace pftgw {
namespace {

std::string number(double v) {
    char buf[32];
    auto [p, ec] = std::to_chars(buf, buf + sizeof buf, v);
    return ec == std::errc() ? std::string(buf, p) : std::string("?");
}

bool is_gas(GasCondition c) {
    return c == GasCondition::btps || c == GasCondition::stpd || c == GasCondition::atps ||
           c == GasCondition::atpd;
}

std::string cond_name(GasCondition c) {
    return c == GasCondition::unspecified ? std::string("unspecified") : std::string(to_string(c));
}

std::string joined_units(const QuantityKind& k) {
    std::string s;
    for (const auto& u : k.accepted_units) s += (s.empty() ? "" : ", ") + u;
    return s;
}

// Appends "a->b" to a derivation's steps; the inverse of the last step
// cancels it instead, so SI -> traditional -> SI gives back the same text.
void append_step(std::string& steps, const std::string& from, const std::string& to) {
    const std::string inverse = to + "->" + from;
    const auto sep = steps.rfind("; ");
    const std::string_view last = sep == std::string::npos
                                      ? std::string_view(steps)
                                      : std::string_view(steps).substr(sep + 2);
    if (last == inverse) {
        steps.erase(sep == std::string::npos ? 0 : sep);
        return;
    }
    if (!steps.empty()) steps += "; ";
    steps += from + "->" + to;
}

void append_note(std::string& steps, const std::string& note) {
    if (!steps.empty()) steps += "; ";
    steps += note;
}

// A unit change: a factor, or for the affine temperature units a conversion
// through convert_unit(); `slope` is the factor recorded in the Derivation
// (for the affine units, the multiplicative part). A plain struct rather than
// a std::function: it runs for every converted number. `from` and `to` must
// outlive it (they name the quantity's unit and the table's).
struct UnitChange {
    std::string_view from;
    std::string_view to;
    double slope = 1.0;
    bool affine = false;

    double apply(double v) const {
        if (!affine) return v * slope;
        auto r = convert_unit(v, from, to);
        return r ? *r : v;
    }
};

// Only called for two known units of one dimension.
UnitChange unit_change(std::string_view from, std::string_view to) {
    if (auto f = unit_factor(from, to)) return {from, to, *f, false};
    UnitChange at{from, to, 1.0, true};
    at.slope = at.apply(1.0) - at.apply(0.0);
    return at;
}

void apply_to_reference(ReferenceValues& r, const UnitChange& change) {
    // z-score and percent predicted are unitless: unchanged.
    if (r.predicted) r.predicted = change.apply(*r.predicted);
    if (r.lln) r.lln = change.apply(*r.lln);
    if (r.uln) r.uln = change.apply(*r.uln);
}

bool has_reference_numbers(const ReferenceValues& r) {
    return r.predicted || r.lln || r.uln;
}

// Reference values change unit only, never gas condition: the equations are
// defined at the kind's canonical condition (see ReferenceValues).
void render_reference(Quantity& q, const std::string& target) {
    for (auto& r : q.reference) {
        if (!has_reference_numbers(r) || r.unit.empty() || r.unit == target ||
            !same_dimension(r.unit, target))
            continue;
        apply_to_reference(r, unit_change(r.unit, target));
        r.unit = target;
    }
}

bool has_convertible_number(const Quantity& q) {
    if (q.value) return true;
    for (const auto& r : q.reference)
        if (r.predicted || r.lln || r.uln) return true;
    return false;
}

// Where a quantity sits in a result, rendered to text only when a finding
// names it: building "tests[1].values[FEV1]" for every quantity cost more
// than normalizing an already canonical one.
struct QuantityPath {
    std::string_view field;  // "environment.temperature", ...; empty for a test's value
    std::size_t test = 0;
    std::optional<std::size_t> trial;
    std::string_view kind;

    static QuantityPath named(std::string_view field) { return {field, 0, std::nullopt, {}}; }
    static QuantityPath value(std::size_t test, std::optional<std::size_t> trial,
                              std::string_view kind) {
        return {{}, test, trial, kind};
    }

    std::string str() const {
        if (!field.empty()) return std::string(field);
        std::string out = "tests[" + std::to_string(test) + "]";
        if (trial) out += ".trials[" + std::to_string(*trial) + "]";
        out += ".values[";
        out += kind;
        out += ']';
        return out;
    }
};

// The visitors are templates, not std::function: they run for every quantity.
// The two quantities the gas conversions read.
template <class Visit>
void for_each_ambient(NeutralResult& r, Visit&& visit) {
    if (r.environment.temperature)
        visit(*r.environment.temperature, QuantityPath::named("environment.temperature"));
    if (r.environment.pressure)
        visit(*r.environment.pressure, QuantityPath::named("environment.pressure"));
}

// Every other quantity of a result, with its path.
template <class Visit>
void for_each_other(NeutralResult& r, Visit&& visit) {
    if (r.environment.humidity)
        visit(*r.environment.humidity, QuantityPath::named("environment.humidity"));
    if (r.subject.height) visit(*r.subject.height, QuantityPath::named("subject.height"));
    if (r.subject.weight) visit(*r.subject.weight, QuantityPath::named("subject.weight"));
    for (std::size_t i = 0; i < r.tests.size(); ++i) {
        Test& t = r.tests[i];
        for (Quantity& q : t.values) visit(q, QuantityPath::value(i, std::nullopt, q.kind));
        for (std::size_t j = 0; j < t.trials.size(); ++j)
            for (Quantity& q : t.trials[j].values) visit(q, QuantityPath::value(i, j, q.kind));
    }
}

// A unit already known to units.cpp is of its own dimension: a value already
// in the canonical unit (the common case) needs no second walk of the unit table.
bool known_unit_fits(const std::string& known_unit, const std::string& canonical) {
    return known_unit == canonical || same_dimension(known_unit, canonical);
}

class Normalizer {
public:
    explicit Normalizer(const QuantityTable& table) : table_(table) {}

    void set_ambient(const NeutralResult& r) {
        ambient_ = {};
        const auto& env = r.environment;
        if (env.temperature && usable_ambient(*env.temperature, "AMB_TEMP"))
            ambient_.temperature_cel = env.temperature->value;
        if (env.pressure && usable_ambient(*env.pressure, "PB"))
            ambient_.pressure_kpa = env.pressure->value;
    }

    void normalize(Quantity& q, const QuantityPath& path) {
        if (q.absent_reason) return;  // an explicit "not measured" is not a finding
        fill_source(q);
        const QuantityKind* k = table_.find(q.kind);
        if (!k) {
            report("quantity.unknown-kind", path.str() + ".kind",
                   "kind '" + q.kind + "' is not in the quantity table (schemas/quantities.csv)",
                   {{"kind", q.kind}});
            return;
        }
        if (!q.value && !q.source.value_text.empty())
            report("value.not-numeric", path.str() + ".value",
                   q.kind + " value '" + q.source.value_text + "' is not a number",
                   {{"value", q.source.value_text}});
        if (!has_convertible_number(q)) return;

        // The unit.
        if (q.unit.empty()) {
            report("unit.missing", path.str() + ".unit",
                   q.kind + " has no unit; expected one of " + joined_units(*k),
                   {{"unit", q.source.unit_text}});
            return;
        }
        if (!is_known_unit(q.unit)) {
            report("unit.unknown", path.str() + ".unit",
                   q.kind + " unit '" + q.unit + "' is not a UCUM unit the gateway knows; " +
                       "expected one of " + joined_units(*k),
                   {{"unit", q.unit}});
            return;
        }
        if (!k->accepts(q.unit) || !known_unit_fits(q.unit, k->canonical_unit)) {
            report("unit.mismatch", path.str() + ".unit",
                   q.kind + " in '" + q.unit + "' does not fit the kind; expected one of " +
                       joined_units(*k),
                   {{"unit", q.unit}});
            return;
        }

        normalize_reference(q, *k, path);

        // The condition.
        const GasCondition target = k->canonical_condition;
        GasCondition from = q.condition;
        bool implied = false;
        if (target == GasCondition::none || !is_gas(target)) {
            if (is_gas(from)) {
                report("condition.mismatch", path.str() + ".condition",
                       q.kind + " is not a gas volume or flow; condition " + cond_name(from) +
                           " does not apply (expected none)",
                       {{"condition", cond_name(from)}});
                return;
            }
            from = target;
        } else if (from == GasCondition::unspecified) {
            if (!k->implied_condition || !is_gas(*k->implied_condition)) {
                report("condition.missing", path.str() + ".condition",
                       q.kind + " has no gas condition; expected " + cond_name(target) +
                           " (or ATPS/ATPD with the ambient temperature and pressure)",
                       {{"condition", q.source.condition_text}});
                return;
            }
            from = *k->implied_condition;
            implied = true;
        } else if (!is_gas(from)) {
            report("condition.mismatch", path.str() + ".condition",
                   q.kind + " is a gas quantity at " + cond_name(target) + "; condition " +
                       cond_name(from) + " does not fit",
                   {{"condition", cond_name(from)}});
            return;
        }
        double gas = 1.0;
        if (from != target) {
            auto f = gas_condition_factor(from, target, ambient_);
            if (!f) {
                std::vector<std::pair<std::string, std::string>> values{
                    {"condition", cond_name(from)},
                    {"environment.temperature",
                     ambient_.temperature_cel ? number(*ambient_.temperature_cel) : "absent"},
                    {"environment.pressure",
                     ambient_.pressure_kpa ? number(*ambient_.pressure_kpa) : "absent"}};
                report("condition.ambient-missing", path.str() + ".condition",
                       q.kind + " at " + cond_name(from) + " cannot be taken to " +
                           cond_name(target) + ": " + f.error().message +
                           " (environment.temperature in Cel, environment.pressure in kPa)",
                       std::move(values));
                return;
            }
            gas = *f;
        }

        // Convert.
        const bool unit_changes = q.unit != k->canonical_unit;
        if (!unit_changes && from == target && !implied) {
            q.condition = target;
            if (!q.derivation) q.derivation = Derivation{};
            return;
        }
        const UnitChange uc = unit_changes ? unit_change(q.unit, k->canonical_unit) : UnitChange{};
        auto convert = [&](double v) { return (unit_changes ? uc.apply(v) : v) * gas; };
        Derivation d = q.derivation.value_or(Derivation{});
        d.factor *= uc.slope * gas;
        if (unit_changes) append_step(d.steps, q.unit, k->canonical_unit);
        if (implied) append_note(d.steps, cond_name(from) + " implied by definition");
        if (from != target) {
            append_step(d.steps, cond_name(from), cond_name(target));
            d.pressure_kpa = ambient_.pressure_kpa;
            if (needs_ambient_temperature(from, target))
                d.temperature_cel = ambient_.temperature_cel;
            if (uses_vapour_equation(from, target)) d.water_vapour_equation = kWaterVapourEquation;
        }
        if (q.value) q.value = convert(*q.value);
        q.unit = k->canonical_unit;
        q.condition = target;
        q.derivation = std::move(d);
    }

    std::vector<Finding>& findings() { return findings_; }

    // Each reference set to the canonical unit; a set that names no unit is
    // in the quantity's unit as sent (called before the value is converted).
    void normalize_reference(Quantity& q, const QuantityKind& k, const QuantityPath& path) {
        for (std::size_t i = 0; i < q.reference.size(); ++i) {
            ReferenceValues& r = q.reference[i];
            if (!has_reference_numbers(r)) continue;
            const std::string& from = r.unit.empty() ? q.unit : r.unit;
            const auto rpath = [&] {
                return path.str() + ".reference[" + std::to_string(i) + "].unit";
            };
            if (!is_known_unit(from)) {
                report(
                    "unit.unknown", rpath(),
                    q.kind + " reference unit '" + from + "' is not a UCUM unit the gateway knows",
                    {{"unit", from}});
                continue;
            }
            if (!k.accepts(from) || !known_unit_fits(from, k.canonical_unit)) {
                report("unit.mismatch", rpath(),
                       q.kind + " reference values in '" + from +
                           "' do not fit the kind; expected one of " + joined_units(k),
                       {{"unit", from}});
                continue;
            }
            if (from != k.canonical_unit)
                apply_to_reference(r, unit_change(from, k.canonical_unit));
            r.unit = k.canonical_unit;
        }
    }

private:
    // What was sent is kept: a reader that filled nothing gets the value as it
    // arrived here. Gateway-computed values were never sent.
    static void fill_source(Quantity& q) {
        if (q.origin != Origin::device) return;
        SourceForm& s = q.source;
        if (!s.value_text.empty() || !s.unit_text.empty() || !s.condition_text.empty()) return;
        if (q.value) s.value_text = number(*q.value);
        s.unit_text = q.unit;
        if (q.condition != GasCondition::unspecified) s.condition_text = to_string(q.condition);
    }

    bool usable_ambient(const Quantity& q, std::string_view kind) const {
        const QuantityKind* k = table_.find(kind);
        return k && !q.absent_reason && q.value && std::isfinite(*q.value) &&
               q.unit == k->canonical_unit;
    }

    void report(std::string rule, std::string path, std::string message,
                std::vector<std::pair<std::string, std::string>> values) {
        Finding f;
        f.rule = std::move(rule);
        f.severity = Severity::error;
        f.path = std::move(path);
        f.message = std::move(message);
        f.values = std::move(values);
        findings_.push_back(std::move(f));
    }

    const QuantityTable& table_;
    Ambient ambient_;
    std::vector<Finding> findings_;
};

// Normalizing twice must not repeat a finding.
void append_new(std::vector<Finding>& to, const std::vector<Finding>& add) {
    for (const Finding& f : add) {
        bool seen = false;
        for (const Finding& g : to)
            if (g == f) {
                seen = true;
                break;
            }
        if (!seen) to.push_back(f);
    }
}

}  // namespace

std::vector<Finding> normalize(NeutralResult& result, const QuantityTable& table) {
    Normalizer n(table);
    const auto visit = [&n](Quantity& q, const QuantityPath& path) { n.normalize(q, path); };
    // The ambient values first: the gas conversions read them normalized.
    for_each_ambient(result, visit);
    n.set_ambient(result);
    for_each_other(result, visit);
    std::vector<Finding> findings = std::move(n.findings());
    const std::vector<Finding> derived = derive_quantities(result);
    findings.insert(findings.end(), derived.begin(), derived.end());
    append_new(result.findings, findings);
    return findings;
}

NeutralResult render_units(const NeutralResult& normalized, UnitSystem system,
                           const QuantityTable& table) {
    return render_units(NeutralResult(normalized), system, table);
}

NeutralResult render_units(NeutralResult&& normalized, UnitSystem system,
                           const QuantityTable& table) {
    NeutralResult out = std::move(normalized);
    const auto render = [&](Quantity& q, const QuantityPath&) {
        if (q.absent_reason) return;
        const QuantityKind* k = table.find(q.kind);
        if (!k) return;
        const std::string& target = k->unit_for(system);
        if (target.empty()) return;
        render_reference(q, target);
        // A unit normalization could not settle stays as it is (it has a finding).
        if (q.unit == target || !same_dimension(q.unit, target)) return;
        const UnitChange uc = unit_change(q.unit, target);
        Derivation d = q.derivation.value_or(Derivation{});
        d.factor *= uc.slope;
        append_step(d.steps, q.unit, target);
        if (q.value) q.value = uc.apply(*q.value);
        q.unit = target;
        q.derivation = std::move(d);
    };
    for_each_ambient(out, render);
    for_each_other(out, render);
    return out;
}

}  // namespace pftgw
