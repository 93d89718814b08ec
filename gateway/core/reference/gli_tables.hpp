// The published GLI lookup tables (schemas/reference/gli/), compiled into the core
// and checked once when first used: coefficients and the age-indexed LMS splines
// of GLI Global 2022, GLI-2012, GLI-2017 and GLI-2021.
#pragma once

#include <array>
#include <cstddef>
#include <cstdint>
#include <string_view>
#include <vector>

#include "gateway/core/model.hpp"
#include "gateway/core/result.hpp"

namespace pftgw {

// The GLI equation sets the gateway computes.
enum class EquationSet : std::uint8_t { gli_global_2022, gli_2012, gli_2017, gli_2021 };

inline constexpr std::size_t kEquationSetCount = 4;

// Every name a set goes by, in one place (indexed by EquationSet).
struct EquationSetNames {
    std::string_view label;    // in ReferenceValues::equation_set ("GLI Global 2022")
    std::string_view version;  // the version note ("Bowerman 2023, race-neutral")
    std::string_view cli;      // on the command line ("gli-global-2022")
    std::string_view table;    // in schemas/reference/gli/ ("GLI-2022-Global")
};
inline constexpr std::array<EquationSetNames, kEquationSetCount> kEquationSetNames{{
    {"GLI Global 2022", "Bowerman 2023, race-neutral", "gli-global-2022", "GLI-2022-Global"},
    {"GLI-2012", "Quanjer 2012", "gli-2012", "GLI-2012"},
    {"GLI-2017", "2020 author correction", "gli-2017", "GLI-2017"},
    {"GLI-2021", "Hall 2021", "gli-2021", "GLI-2021"},
}};
inline constexpr const EquationSetNames& names_of(EquationSet set) {
    return kEquationSetNames[static_cast<std::size_t>(set)];
}

// The quantities of the published tables (one per spline sheet), not the
// project's kinds: DLCO has an SI and a traditional sheet, RV/TLC is in percent.
enum class GliQuantity : std::uint8_t {
    fev1,
    fvc,
    fev1_fvc,
    fef25_75,
    fef75,
    tlco_si,           // mmol/min/kPa
    dlco_traditional,  // mL/min/mm[Hg]
    kco_si,            // mmol/min/kPa/L
    kco_traditional,   // mL/min/mm[Hg]/L
    va,
    frc,
    tlc,
    rv,
    rv_tlc,  // percent in the tables
    erv,
    ic,
    vc,
};
inline constexpr std::size_t kGliQuantityCount = 17;

// GLI-2012 groups; Caucasian is the reference group of the equations (no term).
enum class Gli2012Group : std::uint8_t { caucasian, african_american, ne_asian, se_asian, other };

namespace gli {

// Which transform of height or age a coefficient multiplies (coefficients.csv *_term).
enum class Term : std::uint8_t { none, ln_height_cm, height_cm, ln_age, age };

// The three spline values at one quarter-year age.
struct SplineRow {
    double m = 0;
    double s = 0;
    double l = 0;
};

// One equation: a set, a quantity and a sex, with its spline table.
struct Equation {
    EquationSet set = EquationSet::gli_global_2022;
    GliQuantity quantity = GliQuantity::fev1;
    SexAtBirth sex = SexAtBirth::male;
    double a0 = 0, a1 = 0, a2 = 0;  // M: intercept, height, age
    Term a1_term = Term::none, a2_term = Term::none;
    std::array<double, 4> a_group{};  // M: AfrAm, NE Asia, SE Asia, Other (GLI-2012 only)
    double p0 = 0, p1 = 0;            // S: intercept, age
    Term p1_term = Term::none;
    std::array<double, 4> p_group{};  // S: same order as a_group
    double q0 = 0, q1 = 0;            // L: intercept, ln(age)
    Term q1_term = Term::none;
    double table_age_min_years = 0;  // first row of the spline table
    double table_age_max_years = 0;  // last row
    std::vector<SplineRow> rows;     // rows[i] is at table_age_min_years + i / 4
};

// The CSV texts the tables are read from.
struct GliSources {
    std::string_view coefficients;
    std::string_view gli2012;
    std::string_view gli2017;
    std::string_view gli2021;
    std::string_view gli2022;
};

class GliTables {
public:
    // nullptr when the set has no equation for the quantity, or sex is unknown.
    const Equation* find(EquationSet set, GliQuantity q, SexAtBirth sex) const;
    std::size_t equation_count() const { return equations_.size(); }

private:
    friend Result<GliTables> parse_gli_tables(const GliSources& sources);
    static constexpr std::size_t kNoEquation = static_cast<std::size_t>(-1);
    std::vector<Equation> equations_;
    // [set][quantity][sex: 0 male, 1 female] -> index into equations_.
    std::array<std::array<std::array<std::size_t, 2>, kGliQuantityCount>, kEquationSetCount>
        index_{};
};

// Parses and checks the tables: headers, row counts, both sexes, every
// quantity, ages from the first to the last in steps of exactly 0.25 y.
Result<GliTables> parse_gli_tables(const GliSources& sources);

// The tables compiled from schemas/reference/gli/.
GliSources compiled_gli_sources();

// The compiled tables, parsed and checked once, then constant.
const Result<GliTables>& gli_tables();

// The spline sheet name of a quantity ("FEV1FVC", "TLCO_SI") and the
// coefficients.csv set label ("GLI-2022-Global").
std::string_view table_name(GliQuantity q);
std::string_view table_set_label(EquationSet set);

}  // namespace gli
}  // namespace pftgw
