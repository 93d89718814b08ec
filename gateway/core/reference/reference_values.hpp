// Reference values from the GLI equations (LMS method): predicted, LLN, ULN,
// z-score and percent predicted, for one subject and one quantity, and the
// policy that adds them to a normalized result. Pure: the only data is the
// compiled-in tables (gli_tables.hpp). Interpretation belongs to licensed staff.
#pragma once

#include <optional>
#include <string>
#include <string_view>

#include "gateway/core/model.hpp"
#include "gateway/core/reference/gli_tables.hpp"
#include "gateway/core/result.hpp"

namespace pftgw {

// LLN and ULN are the 5th and 95th centiles: z = -/+1.645 (GLI; Quanjer 2012).
inline constexpr double kLimitOfNormalZ = 1.645;

// Heights outside this range are refused, not extrapolated: the GLI equations
// state no height range; 50 cm is the lowest height of the GLI web-calculator
// grid the tables were checked against (schemas/reference/gli/README.md) and
// 250 cm is the project's plausible maximum for HEIGHT (schemas/quantities.csv).
inline constexpr double kMinHeightCm = 50.0;
inline constexpr double kMaxHeightCm = 250.0;

// GLI-2017 is computed up to 85 y although its table runs to 90 y (the GLI
// calculator's range; shared design DECISIONS.md).
inline constexpr double kGli2017MaxAgeYears = 85.0;

// The set's name as it travels in ReferenceValues::equation_set ("GLI-2017").
std::string_view equation_set_label(EquationSet set);
// The set's version note ("2020 author correction").
std::string_view equation_set_version(EquationSet set);
// The command-line name ("gli-global-2022"); parse accepts it case-insensitively.
std::string_view cli_name(EquationSet set);
std::optional<EquationSet> parse_equation_set(std::string_view text);

std::string_view to_string(Gli2012Group g);  // "caucasian", "african-american", ...
// Case-insensitive: caucasian, african-american, ne-asian, se-asian, other (also "other/mixed").
std::optional<Gli2012Group> parse_gli2012_group(std::string_view text);

// The UCUM unit of a table quantity (RV/TLC: "%"; DLCO traditional: "mL/min/mm[Hg]").
std::string_view table_unit(GliQuantity q);

// The M, S and L of one subject.
struct LmsParameters {
    double m = 0;
    double s = 0;
    double l = 0;
};

struct ReferenceSubject {
    double age_years = 0;  // decimal years at the test
    double height_cm = 0;
    SexAtBirth sex = SexAtBirth::unknown;
    std::optional<Gli2012Group> group;  // GLI-2012 only
};

// Predicted (M), LLN and ULN in the table's unit (table_unit()).
struct ReferenceEstimate {
    double predicted = 0;
    double lln = 0;
    double uln = 0;
    LmsParameters lms;
};

// The age range the gateway computes for (inclusive), in years.
struct AgeRangeYears {
    double min = 0;
    double max = 0;
};
Result<AgeRangeYears> computed_age_range(EquationSet set, GliQuantity q, SexAtBirth sex);

// M, S, L by linear interpolation between the quarter-year rows (the age is
// never rounded). Errors: reference.no-equation, reference.missing-input (sex,
// GLI-2012 group), reference.out-of-range (age, height), reference.tables-invalid.
Result<LmsParameters> lms_at(EquationSet set, GliQuantity q, const ReferenceSubject& subject);
Result<ReferenceEstimate> gli_reference(EquationSet set, GliQuantity q,
                                        const ReferenceSubject& subject);

// The LMS transforms: z of a measured value, the value at a z, percent predicted.
double lms_z_score(const LmsParameters& p, double measured);
double lms_value_at_z(const LmsParameters& p, double z);
double lms_percent_predicted(const LmsParameters& p, double measured);

// A project quantity kind in a given unit, bound to a table quantity:
// project value = table value x scale (RV/TLC as a fraction: scale 0.01).
struct KindBinding {
    GliQuantity quantity = GliQuantity::fev1;
    double scale = 1.0;
};
// reference.no-equation when the set has no equation for the kind;
// reference.unit-unsupported when the unit is not one the binding knows.
Result<KindBinding> bind_kind(EquationSet set, std::string_view kind, std::string_view unit);

// The project kind of a trade name, case-insensitive: "FEV1/FVC" -> "FEV1_FVC",
// "TLCO" and "DLCO" -> "DLCO", "FEF25-75" -> "FEF25_75".
std::optional<std::string> kind_for_trade_name(std::string_view trade_name);

// The set a policy uses for a kind: the spirometry choice for FEV1, FVC,
// FEV1/FVC, FEF25-75 and FEF75; GLI-2021 for the lung volumes; GLI-2017 for
// DLCO, KCO and VA. Empty for a kind no GLI set covers (PEF, ...).
std::optional<EquationSet> policy_set_for_kind(std::string_view kind, EquationSet spirometry_set);

// Reference values of a project kind in `unit`, named for its set and marked
// origin gateway; z and percent predicted when a measured value (> 0) is given.
Result<ReferenceValues> compute_reference_values(EquationSet set, std::string_view kind,
                                                 std::string_view unit,
                                                 const ReferenceSubject& subject,
                                                 std::optional<double> measured);

// What the conversion pipeline does with reference values.
enum class ReferenceMode {
    none,  // leave the result as sent
    fill,  // compute only where the device sent no reference values for the quantity
    both,  // compute and add beside the device's own (never overwritten or relabelled)
};
std::string_view to_string(ReferenceMode m);  // "none", "fill", "both"
std::optional<ReferenceMode> parse_reference_mode(std::string_view text);

struct ReferencePolicy {
    ReferenceMode mode = ReferenceMode::none;
    // The spirometry set; lung volumes always use GLI-2021 and DLCO, KCO, VA GLI-2017.
    EquationSet spirometry_set = EquationSet::gli_global_2022;
    // GLI-2012 group; when empty, Subject::ethnicity is read (parse_gli2012_group).
    std::optional<Gli2012Group> gli2012_group;
};

// Adds gateway-computed ReferenceValues to the reported values of every test
// (the result must already be normalized: values in canonical units). Age is
// from the subject's birth date and the test date (else the session date).
// What could not be computed becomes a finding: reference.missing-input,
// reference.out-of-range (warning), reference.no-equation (info). Running it
// again replaces the gateway's own values of the same set; device values stay.
void apply_reference_values(NeutralResult& result, const ReferencePolicy& policy);

}  // namespace pftgw
