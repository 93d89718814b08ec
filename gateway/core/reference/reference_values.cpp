// GLI reference values (LMS method) and the policy that adds them to a result.
// Equation forms per set come from the term columns of coefficients.csv
// (schemas/reference/gli/README.md); nothing here special-cases a set but the
// GLI-2017 age cap and the GLI-2012 group.
#include "gateway/core/reference/reference_values.hpp"

#include <algorithm>
#include <array>
#include <charconv>
#include <cmath>

namespace pftgw {
namespace {

using gli::Equation;
using gli::Term;

// Below this |L| the LMS limit L -> 0 (log-normal) is used (Cole 1992 LMS form).
constexpr double kLmsZeroL = 1e-12;
constexpr double kPercent = 100.0;               // percent per unit fraction
constexpr double kMillilitresPerLitre = 1000.0;  // SI definition
constexpr double kSecondsPerMinute = 60.0;
constexpr double kCentimetresPerMetre = 100.0;  // SI definition
constexpr double kCentimetresPerInch = 2.54;    // international inch, exact by definition

std::string fixed(double v, int decimals) {
    std::array<char, 64> buf{};
    auto [p, ec] =
        std::to_chars(buf.data(), buf.data() + buf.size(), v, std::chars_format::fixed, decimals);
    if (ec != std::errc()) return "?";
    return std::string(buf.data(), p);
}

// Shortest form of a bound such as 5 or 85 or 2.5.
std::string bound(double v) {
    std::array<char, 64> buf{};
    auto [p, ec] = std::to_chars(buf.data(), buf.data() + buf.size(), v);
    if (ec != std::errc()) return "?";
    return std::string(buf.data(), p);
}

std::string lower(std::string_view s) {
    std::string out(s);
    for (char& c : out)
        if (c >= 'A' && c <= 'Z') c = static_cast<char>(c - 'A' + 'a');
    return out;
}

std::string upper(std::string_view s) {
    std::string out(s);
    for (char& c : out)
        if (c >= 'a' && c <= 'z') c = static_cast<char>(c - 'a' + 'A');
    return out;
}

std::string what(EquationSet set, GliQuantity q) {
    return std::string(equation_set_label(set)) + " " + std::string(gli::table_name(q));
}

double term_value(Term t, double height_cm, double ln_height, double age, double ln_age) {
    switch (t) {
        case Term::none:
            return 0.0;
        case Term::ln_height_cm:
            return ln_height;
        case Term::height_cm:
            return height_cm;
        case Term::ln_age:
            return ln_age;
        case Term::age:
            return age;
    }
    return 0.0;
}

// Index of a group's term in Equation::a_group / p_group; -1 for the reference group.
int group_index(Gli2012Group g) {
    switch (g) {
        case Gli2012Group::caucasian:
            return -1;
        case Gli2012Group::african_american:
            return 0;
        case Gli2012Group::ne_asian:
            return 1;
        case Gli2012Group::se_asian:
            return 2;
        case Gli2012Group::other:
            return 3;
    }
    return -1;
}

double max_age_computed(const Equation& eq) {
    return eq.set == EquationSet::gli_2017 ? std::min(eq.table_age_max_years, kGli2017MaxAgeYears)
                                           : eq.table_age_max_years;
}

struct UnitScale {
    std::string_view unit;
    double scale;  // project value = table value x scale
};

constexpr std::array<UnitScale, 2> kVolumeUnits = {{{"L", 1.0}, {"mL", kMillilitresPerLitre}}};
constexpr std::array<UnitScale, 3> kFlowUnits = {
    {{"L/s", 1.0}, {"L/min", kSecondsPerMinute}, {"mL/s", kMillilitresPerLitre}}};
constexpr std::array<UnitScale, 2> kFractionUnits = {{{"1", 1.0}, {"%", kPercent}}};
// The RV/TLC table is in percent; the project's RV/TLC is a fraction.
constexpr std::array<UnitScale, 2> kPercentTableUnits = {{{"1", 1.0 / kPercent}, {"%", 1.0}}};

template <std::size_t N>
std::optional<double> scale_for(const std::array<UnitScale, N>& units, std::string_view unit) {
    for (const auto& u : units)
        if (u.unit == unit) return u.scale;
    return std::nullopt;
}

struct KindSpec {
    std::string_view kind;
    enum Family { volume, flow, fraction, percent_table, dlco, kco } family;
    GliQuantity quantity;  // the SI (or only) sheet
};

constexpr std::array<KindSpec, 15> kKinds = {{
    {"FEV1", KindSpec::volume, GliQuantity::fev1},
    {"FVC", KindSpec::volume, GliQuantity::fvc},
    {"FEV1_FVC", KindSpec::fraction, GliQuantity::fev1_fvc},
    {"FEF25_75", KindSpec::flow, GliQuantity::fef25_75},
    {"FEF75", KindSpec::flow, GliQuantity::fef75},
    {"DLCO", KindSpec::dlco, GliQuantity::tlco_si},
    {"KCO", KindSpec::kco, GliQuantity::kco_si},
    {"VA", KindSpec::volume, GliQuantity::va},
    {"FRC", KindSpec::volume, GliQuantity::frc},
    {"TLC", KindSpec::volume, GliQuantity::tlc},
    {"RV", KindSpec::volume, GliQuantity::rv},
    {"RV_TLC", KindSpec::percent_table, GliQuantity::rv_tlc},
    {"ERV", KindSpec::volume, GliQuantity::erv},
    {"IC", KindSpec::volume, GliQuantity::ic},
    {"VC", KindSpec::volume, GliQuantity::vc},
}};

const KindSpec* find_kind(std::string_view kind) {
    for (const auto& k : kKinds)
        if (k.kind == kind) return &k;
    return nullptr;
}

}  // namespace

std::string_view equation_set_label(EquationSet set) {
    return names_of(set).label;
}

std::string_view equation_set_version(EquationSet set) {
    return names_of(set).version;
}

std::string_view cli_name(EquationSet set) {
    return names_of(set).cli;
}

std::optional<EquationSet> parse_equation_set(std::string_view text) {
    const std::string t = lower(text);
    for (EquationSet s : {EquationSet::gli_global_2022, EquationSet::gli_2012,
                          EquationSet::gli_2017, EquationSet::gli_2021})
        if (t == cli_name(s) || t == lower(equation_set_label(s))) return s;
    return std::nullopt;
}

std::string_view to_string(Gli2012Group g) {
    switch (g) {
        case Gli2012Group::caucasian:
            return "caucasian";
        case Gli2012Group::african_american:
            return "african-american";
        case Gli2012Group::ne_asian:
            return "ne-asian";
        case Gli2012Group::se_asian:
            return "se-asian";
        case Gli2012Group::other:
            return "other";
    }
    return "";
}

std::optional<Gli2012Group> parse_gli2012_group(std::string_view text) {
    const std::string t = lower(text);
    for (Gli2012Group g : {Gli2012Group::caucasian, Gli2012Group::african_american,
                           Gli2012Group::ne_asian, Gli2012Group::se_asian, Gli2012Group::other})
        if (t == to_string(g)) return g;
    if (t == "other/mixed" || t == "other-mixed") return Gli2012Group::other;
    return std::nullopt;
}

std::string_view table_unit(GliQuantity q) {
    switch (q) {
        case GliQuantity::fev1_fvc:
            return "1";
        case GliQuantity::rv_tlc:
            return "%";
        case GliQuantity::fef25_75:
        case GliQuantity::fef75:
            return "L/s";
        case GliQuantity::tlco_si:
            return "mmol/min/kPa";
        case GliQuantity::dlco_traditional:
            return "mL/min/mm[Hg]";
        case GliQuantity::kco_si:
            return "mmol/min/kPa/L";
        case GliQuantity::kco_traditional:
            return "mL/min/mm[Hg]/L";
        default:
            return "L";
    }
}

Result<AgeRangeYears> computed_age_range(EquationSet set, GliQuantity q, SexAtBirth sex) {
    const auto& tables = gli::gli_tables();
    if (!tables.ok()) return tables.error();
    const Equation* eq = tables->find(set, q, sex);
    if (!eq)
        return make_error("reference.no-equation", what(set, q) + " has no equation for sex '" +
                                                       std::string(to_string(sex)) + "'");
    return AgeRangeYears{eq->table_age_min_years, max_age_computed(*eq)};
}

Result<LmsParameters> lms_at(EquationSet set, GliQuantity q, const ReferenceSubject& subject) {
    const auto& tables = gli::gli_tables();
    if (!tables.ok()) return tables.error();
    if (subject.sex == SexAtBirth::unknown)
        return make_error("reference.missing-input",
                          "sex at birth is unknown; the GLI equations need male or female");
    const Equation* eq = tables->find(set, q, subject.sex);
    if (!eq) return make_error("reference.no-equation", what(set, q) + " has no equation");
    const double age = subject.age_years;
    const double age_max = max_age_computed(*eq);
    // Written so that NaN fails too.
    if (!(age >= eq->table_age_min_years && age <= age_max))
        return make_error("reference.out-of-range", "age " + fixed(age, 2) + " y is outside " +
                                                        what(set, q) + " (" +
                                                        bound(eq->table_age_min_years) + "-" +
                                                        bound(age_max) + " y); not extrapolated");
    const double h = subject.height_cm;
    if (!(h >= kMinHeightCm && h <= kMaxHeightCm))
        return make_error("reference.out-of-range", "height " + fixed(h, 1) + " cm is outside " +
                                                        bound(kMinHeightCm) + "-" +
                                                        bound(kMaxHeightCm) + " cm; not computed");
    int group = -1;
    if (set == EquationSet::gli_2012) {
        if (!subject.group)
            return make_error("reference.missing-input",
                              "GLI-2012 needs a group (caucasian, african-american, ne-asian, "
                              "se-asian, other)");
        group = group_index(*subject.group);
    }

    // Linear interpolation between quarter-year rows; 4 x age is exact in binary,
    // so the index and the fraction carry no rounding.
    const double quarters = 4.0 * age;
    const double whole = std::floor(quarters);
    const double f = quarters - whole;
    const auto i = static_cast<std::size_t>(whole - 4.0 * eq->table_age_min_years);
    const gli::SplineRow& r0 = eq->rows[i];
    gli::SplineRow spline = r0;
    if (f > 0) {
        const gli::SplineRow& r1 = eq->rows[i + 1];
        spline.m += f * (r1.m - r0.m);
        spline.s += f * (r1.s - r0.s);
        spline.l += f * (r1.l - r0.l);
    }

    const double ln_h = std::log(h);
    const double ln_t = std::log(age);
    double m_exp = eq->a0 + eq->a1 * term_value(eq->a1_term, h, ln_h, age, ln_t) +
                   eq->a2 * term_value(eq->a2_term, h, ln_h, age, ln_t) + spline.m;
    double s_exp = eq->p0 + eq->p1 * term_value(eq->p1_term, h, ln_h, age, ln_t) + spline.s;
    if (group >= 0) {
        m_exp += eq->a_group[static_cast<std::size_t>(group)];
        s_exp += eq->p_group[static_cast<std::size_t>(group)];
    }
    LmsParameters p;
    p.m = std::exp(m_exp);
    p.s = std::exp(s_exp);
    p.l = eq->q0 + eq->q1 * term_value(eq->q1_term, h, ln_h, age, ln_t) + spline.l;
    return p;
}

double lms_z_score(const LmsParameters& p, double measured) {
    if (std::fabs(p.l) < kLmsZeroL) return std::log(measured / p.m) / p.s;
    return (std::pow(measured / p.m, p.l) - 1.0) / (p.l * p.s);
}

double lms_value_at_z(const LmsParameters& p, double z) {
    if (std::fabs(p.l) < kLmsZeroL) return p.m * std::exp(p.s * z);
    const double base = 1.0 + p.l * p.s * z;
    if (base <= 0) return std::nan("");
    return p.m * std::pow(base, 1.0 / p.l);
}

double lms_percent_predicted(const LmsParameters& p, double measured) {
    return kPercent * measured / p.m;
}

Result<ReferenceEstimate> gli_reference(EquationSet set, GliQuantity q,
                                        const ReferenceSubject& subject) {
    auto lms = lms_at(set, q, subject);
    if (!lms.ok()) return lms.error();
    ReferenceEstimate e;
    e.lms = *lms;
    e.predicted = e.lms.m;
    e.lln = lms_value_at_z(e.lms, -kLimitOfNormalZ);
    e.uln = lms_value_at_z(e.lms, kLimitOfNormalZ);
    if (!std::isfinite(e.lln) || !std::isfinite(e.uln) || !std::isfinite(e.predicted))
        return make_error("reference.not-computable",
                          what(set, q) + ": the LMS limits are not defined for this subject");
    return e;
}

Result<KindBinding> bind_kind(EquationSet set, std::string_view kind, std::string_view unit) {
    const KindSpec* k = find_kind(kind);
    if (!k)
        return make_error("reference.no-equation",
                          "no GLI equation for '" + std::string(kind) + "'");
    KindBinding b;
    b.quantity = k->quantity;
    std::optional<double> scale;
    switch (k->family) {
        case KindSpec::volume:
            scale = scale_for(kVolumeUnits, unit);
            break;
        case KindSpec::flow:
            scale = scale_for(kFlowUnits, unit);
            break;
        case KindSpec::fraction:
            scale = scale_for(kFractionUnits, unit);
            break;
        case KindSpec::percent_table:
            scale = scale_for(kPercentTableUnits, unit);
            break;
        case KindSpec::dlco:
            if (unit == "mmol/min/kPa") scale = 1.0;
            if (unit == "mL/min/mm[Hg]") {
                b.quantity = GliQuantity::dlco_traditional;
                scale = 1.0;
            }
            break;
        case KindSpec::kco:
            if (unit == "mmol/min/kPa/L") scale = 1.0;
            if (unit == "mL/min/mm[Hg]/L") {
                b.quantity = GliQuantity::kco_traditional;
                scale = 1.0;
            }
            break;
    }
    const auto& tables = gli::gli_tables();
    if (!tables.ok()) return tables.error();
    if (!tables->find(set, b.quantity, SexAtBirth::male))
        return make_error("reference.no-equation", std::string(equation_set_label(set)) +
                                                       " has no equation for " + std::string(kind));
    if (!scale)
        return make_error("reference.unit-unsupported",
                          std::string(kind) + " in '" + std::string(unit) +
                              "': reference values are computed for its canonical or "
                              "traditional unit only");
    b.scale = *scale;
    return b;
}

std::optional<std::string> kind_for_trade_name(std::string_view trade_name) {
    const std::string t = upper(trade_name);
    struct Alias {
        std::string_view name;
        std::string_view kind;
    };
    static constexpr std::array<Alias, 21> kAliases = {{
        {"FEV1", "FEV1"},
        {"FVC", "FVC"},
        {"FEV1/FVC", "FEV1_FVC"},
        {"FEV1_FVC", "FEV1_FVC"},
        {"FEF25-75", "FEF25_75"},
        {"FEF25_75", "FEF25_75"},
        {"FEF75", "FEF75"},
        {"TLCO", "DLCO"},
        {"DLCO", "DLCO"},
        {"KCO", "KCO"},
        {"VA", "VA"},
        {"FRC", "FRC"},
        {"TLC", "TLC"},
        {"RV", "RV"},
        {"RV/TLC", "RV_TLC"},
        {"RV_TLC", "RV_TLC"},
        {"ERV", "ERV"},
        {"IC", "IC"},
        {"VC", "VC"},
        {"FEV1FVC", "FEV1_FVC"},
        {"FEF2575", "FEF25_75"},
    }};
    for (const auto& a : kAliases)
        if (a.name == t) return std::string(a.kind);
    return std::nullopt;
}

std::optional<EquationSet> policy_set_for_kind(std::string_view kind, EquationSet spirometry_set) {
    const KindSpec* k = find_kind(kind);
    if (!k) return std::nullopt;
    switch (k->quantity) {
        case GliQuantity::fev1:
        case GliQuantity::fvc:
        case GliQuantity::fev1_fvc:
        case GliQuantity::fef25_75:
        case GliQuantity::fef75:
            return spirometry_set;
        case GliQuantity::tlco_si:
        case GliQuantity::dlco_traditional:
        case GliQuantity::kco_si:
        case GliQuantity::kco_traditional:
        case GliQuantity::va:
            return EquationSet::gli_2017;
        default:
            return EquationSet::gli_2021;
    }
}

Result<ReferenceValues> compute_reference_values(EquationSet set, std::string_view kind,
                                                 std::string_view unit,
                                                 const ReferenceSubject& subject,
                                                 std::optional<double> measured) {
    auto binding = bind_kind(set, kind, unit);
    if (!binding.ok()) return binding.error();
    auto estimate = gli_reference(set, binding->quantity, subject);
    if (!estimate.ok()) return estimate.error();
    ReferenceValues r;
    r.equation_set = std::string(equation_set_label(set));
    r.equation_version = std::string(equation_set_version(set));
    if (set == EquationSet::gli_2012 && subject.group)
        r.equation_version += ", group " + std::string(to_string(*subject.group));
    r.origin = Origin::gateway;
    r.unit = std::string(unit);
    const double scale = binding->scale;
    r.predicted = estimate->predicted * scale;
    r.lln = estimate->lln * scale;
    r.uln = estimate->uln * scale;
    if (measured && std::isfinite(*measured) && *measured > 0) {
        const double y_table = *measured / scale;
        r.z_score = lms_z_score(estimate->lms, y_table);
        r.percent_predicted = lms_percent_predicted(estimate->lms, y_table);
    }
    return r;
}

std::string_view to_string(ReferenceMode m) {
    switch (m) {
        case ReferenceMode::none:
            return "none";
        case ReferenceMode::fill:
            return "fill";
        case ReferenceMode::both:
            return "both";
    }
    return "";
}

std::optional<ReferenceMode> parse_reference_mode(std::string_view text) {
    const std::string t = lower(text);
    for (ReferenceMode m : {ReferenceMode::none, ReferenceMode::fill, ReferenceMode::both})
        if (t == to_string(m)) return m;
    return std::nullopt;
}

namespace {

bool device_sent_reference(const Quantity& q) {
    return std::any_of(q.reference.begin(), q.reference.end(),
                       [](const ReferenceValues& r) { return r.origin == Origin::device; });
}

bool wants_reference(const Quantity& q, ReferenceMode mode) {
    if (q.absent_reason) return false;  // not measured: nothing to compare with
    if (mode == ReferenceMode::fill && device_sent_reference(q)) return false;
    return true;
}

Finding reference_finding(std::string rule, Severity severity, std::string path,
                          std::string message) {
    Finding f;
    f.rule = std::move(rule);
    f.severity = severity;
    f.path = std::move(path);
    f.message = std::move(message);
    return f;
}

std::optional<double> height_in_cm(const Quantity& h) {
    if (!h.value) return std::nullopt;
    if (h.unit == "cm") return *h.value;
    if (h.unit == "m") return *h.value * kCentimetresPerMetre;
    if (h.unit == "[in_i]") return *h.value * kCentimetresPerInch;
    return std::nullopt;
}

// The subject's inputs for one test; findings for what is missing.
std::optional<ReferenceSubject> subject_for_test(const NeutralResult& result, const Test& test,
                                                 std::size_t test_index, bool needs_group,
                                                 const ReferencePolicy& policy,
                                                 std::vector<Finding>& findings) {
    const std::string test_path = "tests[" + std::to_string(test_index) + "]";
    const std::string why = "reference values for " + test_path + " (" +
                            std::string(to_string(test.type)) + ") not computed: ";
    const Subject& s = result.subject;
    ReferenceSubject out;
    bool ok = true;
    auto missing = [&](std::string path, std::string message) {
        findings.push_back(reference_finding("reference.missing-input", Severity::warning,
                                             std::move(path), why + message));
        ok = false;
    };
    out.sex = s.sex_at_birth;
    if (s.sex_at_birth == SexAtBirth::unknown)
        missing("subject.sexAtBirth", "sex at birth is unknown (male or female is needed)");
    std::optional<Date> at;
    if (test.time)
        at = test.time->date;
    else if (result.session_time)
        at = result.session_time->date;
    if (!s.birth_date) missing("subject.birthDate", "no birth date");
    if (!at) missing(test_path + ".time", "no test or session time to take the age at");
    if (s.birth_date && at) {
        auto age = age_years(*s.birth_date, *at);
        if (age.ok())
            out.age_years = *age;
        else
            missing("subject.birthDate", age.error().message);
    }
    std::optional<double> h = s.height ? height_in_cm(*s.height) : std::nullopt;
    if (!h)
        missing("subject.height", "no height in cm, m or [in_i]");
    else
        out.height_cm = *h;
    if (needs_group) {
        out.group = policy.gli2012_group;
        if (!out.group) out.group = parse_gli2012_group(s.ethnicity);
        if (!out.group)
            missing("subject.ethnicity",
                    s.ethnicity.empty() ? std::string("GLI-2012 needs a group and none was given")
                                        : "'" + s.ethnicity +
                                              "' is not a GLI-2012 group (caucasian, "
                                              "african-american, ne-asian, se-asian, other)");
    }
    if (!ok) return std::nullopt;
    return out;
}

}  // namespace

void apply_reference_values(NeutralResult& result, const ReferencePolicy& policy) {
    if (policy.mode == ReferenceMode::none) return;
    for (std::size_t ti = 0; ti < result.tests.size(); ++ti) {
        Test& test = result.tests[ti];
        bool any = false;
        bool needs_group = false;
        for (const Quantity& q : test.values) {
            const auto set = policy_set_for_kind(q.kind, policy.spirometry_set);
            if (!set || !wants_reference(q, policy.mode)) continue;
            any = true;
            if (*set == EquationSet::gli_2012) needs_group = true;
        }
        if (!any) continue;
        auto subject = subject_for_test(result, test, ti, needs_group, policy, result.findings);
        if (!subject) continue;
        for (Quantity& q : test.values) {
            const auto set = policy_set_for_kind(q.kind, policy.spirometry_set);
            if (!set || !wants_reference(q, policy.mode)) continue;
            const std::string path = "tests[" + std::to_string(ti) + "].values[" + q.kind + "]";
            auto rv = compute_reference_values(*set, q.kind, q.unit, *subject, q.value);
            if (!rv.ok()) {
                const Error& e = rv.error();
                const Severity sev =
                    e.code == "reference.no-equation" ? Severity::info : Severity::warning;
                Finding f = reference_finding(e.code, sev, path, e.message);
                f.values = {{"equation_set", std::string(equation_set_label(*set))},
                            {"age_years", fixed(subject->age_years, 2)},
                            {"height_cm", fixed(subject->height_cm, 1)}};
                result.findings.push_back(std::move(f));
                continue;
            }
            // Recomputing replaces the gateway's own earlier values of this set only.
            auto& refs = q.reference;
            refs.erase(std::remove_if(refs.begin(), refs.end(),
                                      [&](const ReferenceValues& r) {
                                          return r.origin == Origin::gateway &&
                                                 r.equation_set == rv->equation_set;
                                      }),
                       refs.end());
            refs.push_back(std::move(rv).value());
        }
    }
}

}  // namespace pftgw
