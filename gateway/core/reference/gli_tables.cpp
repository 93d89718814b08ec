// Reads and checks the GLI tables compiled from schemas/reference/gli/*.csv.
// A broken table is refused as a whole, so no equation is ever computed from
// a partial or shifted spline sheet.
#include "gateway/core/reference/gli_tables.hpp"

#include <charconv>
#include <cmath>
#include <string>

#include "gateway/core/reference/gli_csv.hpp"  // generated: kCoefficientsCsv, kGli20xxCsv

namespace pftgw::gli {
namespace {

constexpr double kAgeStepYears = 0.25;  // GLI lookup tables: quarter-year rows

// What each spline file must hold (schemas/reference/gli/README.md, "Files").
struct QuantitySpec {
    GliQuantity quantity;
    double age_min_years;
    double age_max_years;
};

struct FileSpec {
    EquationSet set;
    std::string_view file;  // for messages
    std::size_t row_count;  // data rows, header excluded
    std::vector<QuantitySpec> quantities;
};

const std::vector<FileSpec>& file_specs() {
    static const std::vector<FileSpec> specs = {
        {EquationSet::gli_2017,
         "gli2017_transfer_factor_splines.csv",
         3410,
         {{GliQuantity::tlco_si, 5, 90},
          {GliQuantity::dlco_traditional, 5, 90},
          {GliQuantity::kco_si, 5, 90},
          {GliQuantity::kco_traditional, 5, 90},
          {GliQuantity::va, 5, 90}}},
        {EquationSet::gli_global_2022,
         "gli2022_global_spirometry_splines.csv",
         2214,
         {{GliQuantity::fev1, 3, 95}, {GliQuantity::fvc, 3, 95}, {GliQuantity::fev1_fvc, 3, 95}}},
        {EquationSet::gli_2012,
         "gli2012_spirometry_splines.csv",
         3610,
         {{GliQuantity::fev1, 3, 95},
          {GliQuantity::fvc, 3, 95},
          {GliQuantity::fev1_fvc, 3, 95},
          {GliQuantity::fef25_75, 3, 90},
          {GliQuantity::fef75, 3, 90}}},
        {EquationSet::gli_2021,
         "gli2021_lung_volumes_splines.csv",
         4214,
         {{GliQuantity::frc, 5, 80},
          {GliQuantity::tlc, 5, 80},
          {GliQuantity::rv, 5, 80},
          {GliQuantity::rv_tlc, 5, 80},
          {GliQuantity::erv, 5, 80},
          {GliQuantity::ic, 5, 80},
          {GliQuantity::vc, 5, 80}}},
    };
    return specs;
}

constexpr std::size_t kCoefficientRows = 40;  // README: one row per set, quantity and sex

constexpr std::string_view kSplineHeader = "quantity,sex,age,Mspline,Sspline,Lspline";
constexpr std::string_view kCoefficientHeader =
    "set,quantity,sex,unit_system,unit,a0,a1,a1_term,a2,a2_term,a3,a4,a5,a6,p0,p1,p1_term,p2,p3,"
    "p4,p5,q0,q1,q1_term,coef_source";
constexpr std::size_t kCoefficientColumns = 25;

std::vector<std::string_view> split_fields(std::string_view line) {
    std::vector<std::string_view> out;
    std::size_t pos = 0;
    while (true) {
        const auto comma = line.find(',', pos);
        if (comma == std::string_view::npos) {
            out.push_back(line.substr(pos));
            return out;
        }
        out.push_back(line.substr(pos, comma - pos));
        pos = comma + 1;
    }
}

// Lines without their end-of-line; empty lines are skipped.
std::vector<std::string_view> split_lines(std::string_view text) {
    std::vector<std::string_view> out;
    std::size_t pos = 0;
    while (pos < text.size()) {
        auto end = text.find('\n', pos);
        if (end == std::string_view::npos) end = text.size();
        auto line = text.substr(pos, end - pos);
        if (!line.empty() && line.back() == '\r') line.remove_suffix(1);
        if (!line.empty()) out.push_back(line);
        pos = end + 1;
    }
    return out;
}

// An empty cell is 0 only where the README says a term may be absent.
bool parse_number(std::string_view s, bool empty_is_zero, double& out) {
    if (s.empty()) {
        out = 0;
        return empty_is_zero;
    }
    auto [p, ec] = std::from_chars(s.data(), s.data() + s.size(), out);
    return ec == std::errc() && p == s.data() + s.size() && std::isfinite(out);
}

bool parse_term(std::string_view s, Term& out) {
    if (s.empty())
        out = Term::none;
    else if (s == "ln_height_cm")
        out = Term::ln_height_cm;
    else if (s == "height_cm")
        out = Term::height_cm;
    else if (s == "ln_age")
        out = Term::ln_age;
    else if (s == "age")
        out = Term::age;
    else
        return false;
    return true;
}

bool parse_sex(std::string_view s, SexAtBirth& out) {
    if (s == "M")
        out = SexAtBirth::male;
    else if (s == "F")
        out = SexAtBirth::female;
    else
        return false;
    return true;
}

std::size_t sex_index(SexAtBirth s) {
    return s == SexAtBirth::male ? 0 : 1;
}

Error table_error(std::string_view file, int line, std::string message) {
    Error e = make_error("reference.tables-invalid", std::move(message),
                         "schemas/reference/gli/" + std::string(file));
    e.line = line;
    return e;
}

const QuantitySpec* find_spec(const FileSpec& spec, std::string_view name) {
    for (const auto& q : spec.quantities)
        if (table_name(q.quantity) == name) return &q;
    return nullptr;
}

std::string_view source_of(const GliSources& s, EquationSet set) {
    switch (set) {
        case EquationSet::gli_global_2022:
            return s.gli2022;
        case EquationSet::gli_2012:
            return s.gli2012;
        case EquationSet::gli_2017:
            return s.gli2017;
        case EquationSet::gli_2021:
            return s.gli2021;
    }
    return {};
}

std::string format_age(double a) {
    std::string s = std::to_string(a);
    while (!s.empty() && s.back() == '0') s.pop_back();
    if (!s.empty() && s.back() == '.') s.pop_back();
    return s;
}

}  // namespace

std::string_view table_name(GliQuantity q) {
    switch (q) {
        case GliQuantity::fev1:
            return "FEV1";
        case GliQuantity::fvc:
            return "FVC";
        case GliQuantity::fev1_fvc:
            return "FEV1FVC";
        case GliQuantity::fef25_75:
            return "FEF2575";
        case GliQuantity::fef75:
            return "FEF75";
        case GliQuantity::tlco_si:
            return "TLCO_SI";
        case GliQuantity::dlco_traditional:
            return "DLCO_TRAD";
        case GliQuantity::kco_si:
            return "KCO_SI";
        case GliQuantity::kco_traditional:
            return "KCO_TRAD";
        case GliQuantity::va:
            return "VA";
        case GliQuantity::frc:
            return "FRC";
        case GliQuantity::tlc:
            return "TLC";
        case GliQuantity::rv:
            return "RV";
        case GliQuantity::rv_tlc:
            return "RV_TLC";
        case GliQuantity::erv:
            return "ERV";
        case GliQuantity::ic:
            return "IC";
        case GliQuantity::vc:
            return "VC";
    }
    return "";
}

std::string_view table_set_label(EquationSet set) {
    return names_of(set).table;
}

const Equation* GliTables::find(EquationSet set, GliQuantity q, SexAtBirth sex) const {
    if (sex == SexAtBirth::unknown) return nullptr;
    const std::size_t i =
        index_[static_cast<std::size_t>(set)][static_cast<std::size_t>(q)][sex_index(sex)];
    return i == kNoEquation ? nullptr : &equations_[i];
}

Result<GliTables> parse_gli_tables(const GliSources& sources) {
    GliTables t;
    for (auto& by_quantity : t.index_)
        for (auto& by_sex : by_quantity) by_sex.fill(GliTables::kNoEquation);

    // Spline sheets first: they define which equations exist.
    for (const FileSpec& spec : file_specs()) {
        const auto lines = split_lines(source_of(sources, spec.set));
        if (lines.empty() || lines.front() != kSplineHeader)
            return table_error(spec.file, 1, "header must be '" + std::string(kSplineHeader) + "'");
        if (lines.size() - 1 != spec.row_count)
            return table_error(spec.file, 0,
                               "expected " + std::to_string(spec.row_count) + " rows, found " +
                                   std::to_string(lines.size() - 1));
        for (std::size_t n = 1; n < lines.size(); ++n) {
            const int line_no = static_cast<int>(n) + 1;
            const auto f = split_fields(lines[n]);
            if (f.size() != 6)
                return table_error(spec.file, line_no,
                                   "expected 6 columns, found " + std::to_string(f.size()));
            const QuantitySpec* qs = find_spec(spec, f[0]);
            if (!qs)
                return table_error(spec.file, line_no,
                                   "quantity '" + std::string(f[0]) + "' is not expected here");
            SexAtBirth sex{};
            if (!parse_sex(f[1], sex))
                return table_error(spec.file, line_no,
                                   "sex '" + std::string(f[1]) + "' is not M or F");
            double age = 0;
            SplineRow row;
            // Sspline may be empty (GLI-2021 ERV, IC, VC: no S spline term); M must not be.
            if (!parse_number(f[2], false, age) || !parse_number(f[3], false, row.m) ||
                !parse_number(f[4], true, row.s) || !parse_number(f[5], true, row.l))
                return table_error(spec.file, line_no, "a number does not parse");
            auto& slot = t.index_[static_cast<std::size_t>(spec.set)]
                                 [static_cast<std::size_t>(qs->quantity)][sex_index(sex)];
            if (slot == GliTables::kNoEquation) {
                slot = t.equations_.size();
                Equation eq;
                eq.set = spec.set;
                eq.quantity = qs->quantity;
                eq.sex = sex;
                eq.table_age_min_years = qs->age_min_years;
                eq.table_age_max_years = qs->age_max_years;
                t.equations_.push_back(std::move(eq));
            }
            Equation& eq = t.equations_[slot];
            // Exact comparison on purpose: quarter years are exact in binary.
            const double expected_age =
                qs->age_min_years + kAgeStepYears * static_cast<double>(eq.rows.size());
            if (age != expected_age)
                return table_error(spec.file, line_no,
                                   std::string(f[0]) + " " + std::string(f[1]) + ": age " +
                                       std::string(f[2]) + " where " + format_age(expected_age) +
                                       " was expected (gap, repeat or wrong start)");
            if (age > qs->age_max_years)
                return table_error(spec.file, line_no,
                                   std::string(f[0]) + " " + std::string(f[1]) +
                                       ": age beyond the range's end " +
                                       format_age(qs->age_max_years));
            eq.rows.push_back(row);
        }
        for (const QuantitySpec& qs : spec.quantities) {
            for (SexAtBirth sex : {SexAtBirth::male, SexAtBirth::female}) {
                const auto slot = t.index_[static_cast<std::size_t>(spec.set)]
                                          [static_cast<std::size_t>(qs.quantity)][sex_index(sex)];
                const std::string what = std::string(table_name(qs.quantity)) + " " +
                                         (sex == SexAtBirth::male ? "M" : "F");
                if (slot == GliTables::kNoEquation)
                    return table_error(spec.file, 0, what + ": no rows");
                const auto expected_rows =
                    static_cast<std::size_t>(
                        std::lround((qs.age_max_years - qs.age_min_years) / kAgeStepYears)) +
                    1;
                if (t.equations_[slot].rows.size() != expected_rows)
                    return table_error(spec.file, 0,
                                       what + ": ends before " + format_age(qs.age_max_years) +
                                           " y (" + std::to_string(t.equations_[slot].rows.size()) +
                                           " rows, " + std::to_string(expected_rows) +
                                           " expected)");
            }
        }
    }

    // Coefficients: exactly one row for every equation found above.
    constexpr std::string_view kFile = "coefficients.csv";
    const auto lines = split_lines(sources.coefficients);
    if (lines.empty() || lines.front() != kCoefficientHeader)
        return table_error(kFile, 1, "header is not the documented one");
    if (lines.size() - 1 != kCoefficientRows)
        return table_error(kFile, 0,
                           "expected " + std::to_string(kCoefficientRows) + " rows, found " +
                               std::to_string(lines.size() - 1));
    std::vector<bool> seen(t.equations_.size(), false);
    for (std::size_t n = 1; n < lines.size(); ++n) {
        const int line_no = static_cast<int>(n) + 1;
        const auto f = split_fields(lines[n]);
        if (f.size() != kCoefficientColumns)
            return table_error(kFile, line_no,
                               "expected " + std::to_string(kCoefficientColumns) +
                                   " columns, found " + std::to_string(f.size()));
        const FileSpec* spec = nullptr;
        for (const auto& s : file_specs())
            if (table_set_label(s.set) == f[0]) spec = &s;
        if (!spec) return table_error(kFile, line_no, "unknown set '" + std::string(f[0]) + "'");
        const QuantitySpec* qs = find_spec(*spec, f[1]);
        SexAtBirth sex{};
        if (!qs || !parse_sex(f[2], sex))
            return table_error(kFile, line_no,
                               "no spline table for " + std::string(f[0]) + " " +
                                   std::string(f[1]) + " " + std::string(f[2]));
        const auto slot = t.index_[static_cast<std::size_t>(spec->set)]
                                  [static_cast<std::size_t>(qs->quantity)][sex_index(sex)];
        if (seen[slot]) return table_error(kFile, line_no, "repeated row");
        seen[slot] = true;
        Equation& eq = t.equations_[slot];
        bool ok = parse_number(f[5], false, eq.a0) && parse_number(f[6], false, eq.a1) &&
                  parse_term(f[7], eq.a1_term) && parse_number(f[8], false, eq.a2) &&
                  parse_term(f[9], eq.a2_term) && parse_number(f[14], false, eq.p0) &&
                  parse_number(f[15], true, eq.p1) && parse_term(f[16], eq.p1_term) &&
                  parse_number(f[21], false, eq.q0) && parse_number(f[22], true, eq.q1) &&
                  parse_term(f[23], eq.q1_term);
        for (std::size_t g = 0; g < 4; ++g)
            ok = ok && parse_number(f[10 + g], true, eq.a_group[g]) &&
                 parse_number(f[17 + g], true, eq.p_group[g]);
        if (!ok) return table_error(kFile, line_no, "a number or term name does not parse");
        if (eq.a1_term == Term::none || eq.a2_term == Term::none)
            return table_error(kFile, line_no, "the M equation needs a height and an age term");
        if (eq.q1 != 0 && eq.q1_term != Term::ln_age)
            return table_error(kFile, line_no, "L may only depend on ln(age)");
    }
    for (std::size_t i = 0; i < seen.size(); ++i)
        if (!seen[i])
            return table_error(kFile, 0,
                               "no coefficients for " +
                                   std::string(table_set_label(t.equations_[i].set)) + " " +
                                   std::string(table_name(t.equations_[i].quantity)) + " " +
                                   (t.equations_[i].sex == SexAtBirth::male ? "M" : "F"));
    return t;
}

GliSources compiled_gli_sources() {
    return GliSources{kCoefficientsCsv, kGli2012Csv, kGli2017Csv, kGli2021Csv, kGli2022Csv};
}

const Result<GliTables>& gli_tables() {
    static const Result<GliTables> tables = parse_gli_tables(compiled_gli_sources());
    return tables;
}

}  // namespace pftgw::gli
