// pftgw reference: what the gateway computes from the GLI equations, for lab
// staff and integration engineers checking it. One subject on the command
// line, or a CSV of subjects (rows echoed with predicted, lln, uln, z,
// percent_predicted and error appended). Exit: 0 ok, 1 a row failed or the
// subject is out of range, 2 usage, 3 the file cannot be read.
#include <fmt/core.h>

#include <cctype>
#include <cerrno>
#include <charconv>
#include <cstring>
#include <fstream>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "gateway/cli/commands.hpp"
#include "gateway/core/csv_line.hpp"
#include "gateway/core/quantity_table.hpp"
#include "gateway/core/reference/reference_values.hpp"

namespace pftgw::cli {
namespace {

constexpr std::string_view kCaution =
    "caution: reference values only; interpretation belongs to licensed staff.";

// Display decimals: the GLI calculator gives 3 decimals; z to 3, percent to 1.
constexpr int kValueDecimals = 3;
constexpr int kZDecimals = 3;
constexpr int kPercentDecimals = 1;

struct Options {
    std::string set_name;
    std::string quantity;
    std::string group;
    std::string units = "si";
    std::string sex;
    double age_years = 0;
    double height_cm = 0;
    double value = 0;
    std::string csv_path;
};

// What every row shares: the set, the kind and the unit it is computed in.
struct Plan {
    EquationSet set = EquationSet::gli_global_2022;
    std::string kind;
    std::string unit;
    std::optional<Gli2012Group> group;
};

std::optional<SexAtBirth> parse_sex(std::string_view text) {
    std::string t(text);
    for (char& c : t) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
    if (t == "m" || t == "male") return SexAtBirth::male;
    if (t == "f" || t == "female") return SexAtBirth::female;
    return std::nullopt;
}

std::optional<double> parse_number(std::string_view s) {
    while (!s.empty() && s.front() == ' ') s.remove_prefix(1);
    while (!s.empty() && s.back() == ' ') s.remove_suffix(1);
    double v = 0;
    auto [p, ec] = std::from_chars(s.data(), s.data() + s.size(), v);
    if (s.empty() || ec != std::errc() || p != s.data() + s.size()) return std::nullopt;
    return v;
}

std::string fixed(double v, int decimals) {
    return fmt::format("{:.{}f}", v, decimals);
}

std::string csv_field(const std::string& s) {
    if (s.find_first_of(",\"\n\r") == std::string::npos) return s;
    std::string out = "\"";
    for (char c : s) out += c == '"' ? std::string("\"\"") : std::string(1, c);
    return out + "\"";
}

std::string lower(std::string s) {
    for (char& c : s) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
    return s;
}

// Checks the options shared by both modes; prints the usage error and returns empty.
std::optional<Plan> make_plan(const Options& o, bool csv_has_group) {
    Plan p;
    auto set = parse_equation_set(o.set_name);
    if (!set) {
        fmt::print(stderr,
                   "pftgw reference: --set '{}' is not one of gli-global-2022, gli-2012, "
                   "gli-2017, gli-2021\n",
                   o.set_name);
        return std::nullopt;
    }
    p.set = *set;
    auto kind = kind_for_trade_name(o.quantity);
    if (!kind) {
        fmt::print(stderr,
                   "pftgw reference: --quantity '{}' is not one of FEV1, FVC, FEV1/FVC, "
                   "FEF25-75, FEF75, TLCO, DLCO, KCO, VA, FRC, TLC, RV, RV/TLC, ERV, IC, VC\n",
                   o.quantity);
        return std::nullopt;
    }
    p.kind = *kind;
    auto units = parse_unit_system(o.units);
    if (!units) {
        fmt::print(stderr, "pftgw reference: --units must be si or traditional\n");
        return std::nullopt;
    }
    const QuantityKind* row = quantity_table().find(p.kind);
    if (!row) {
        fmt::print(stderr, "pftgw reference: {} is missing from the quantity table\n", p.kind);
        return std::nullopt;
    }
    p.unit = row->unit_for(*units);
    auto bound = bind_kind(p.set, p.kind, p.unit);
    if (!bound.ok()) {
        fmt::print(stderr, "pftgw reference: {}\n", bound.error().message);
        return std::nullopt;
    }
    if (!o.group.empty()) {
        if (p.set != EquationSet::gli_2012) {
            fmt::print(stderr, "pftgw reference: --group applies to --set gli-2012 only\n");
            return std::nullopt;
        }
        p.group = parse_gli2012_group(o.group);
        if (!p.group) {
            fmt::print(stderr,
                       "pftgw reference: --group '{}' is not one of caucasian, "
                       "african-american, ne-asian, se-asian, other\n",
                       o.group);
            return std::nullopt;
        }
    } else if (p.set == EquationSet::gli_2012 && !csv_has_group) {
        fmt::print(stderr,
                   "pftgw reference: --set gli-2012 needs --group (caucasian, "
                   "african-american, ne-asian, se-asian, other)\n");
        return std::nullopt;
    }
    return p;
}

int run_single(const Options& o, bool has_value) {
    auto plan = make_plan(o, false);
    if (!plan) return kExitUsage;
    auto sex = parse_sex(o.sex);
    if (!sex) {
        fmt::print(stderr, "pftgw reference: --sex must be M or F\n");
        return kExitUsage;
    }
    ReferenceSubject s;
    s.sex = *sex;
    s.age_years = o.age_years;
    s.height_cm = o.height_cm;
    s.group = plan->group;
    auto r = compute_reference_values(plan->set, plan->kind, plan->unit, s,
                                      has_value ? std::optional<double>(o.value) : std::nullopt);
    if (!r.ok()) {
        fmt::print(stderr, "pftgw reference: {}\n", r.error().message);
        return kExitFindings;
    }
    fmt::print("equation set: {} ({})\n", r->equation_set, r->equation_version);
    fmt::print("quantity: {} in {}\n", quantity_table().find(plan->kind)->trade_name,
               plan->unit == "1" ? std::string("1 (a fraction)") : plan->unit);
    fmt::print("subject: sex {}, age {} y, height {} cm\n", to_string(*sex), fixed(o.age_years, 2),
               fixed(o.height_cm, 1));
    fmt::print("predicted: {}\n", fixed(*r->predicted, kValueDecimals));
    fmt::print("lln: {}\n", fixed(*r->lln, kValueDecimals));
    fmt::print("uln: {}\n", fixed(*r->uln, kValueDecimals));
    if (has_value) {
        if (!r->z_score) {
            fmt::print(stderr, "pftgw reference: --value must be a positive number\n");
            return kExitFindings;
        }
        fmt::print("value: {}\n", fixed(o.value, kValueDecimals));
        fmt::print("z: {}\n", fixed(*r->z_score, kZDecimals));
        fmt::print("percent_predicted: {}\n", fixed(*r->percent_predicted, kPercentDecimals));
    }
    fmt::print("{}\n", kCaution);
    return kExitOk;
}

struct Columns {
    std::optional<std::size_t> sex, age, height, value, group;
};

std::optional<std::size_t> column(const std::vector<std::string>& header, std::string_view name) {
    for (std::size_t i = 0; i < header.size(); ++i)
        if (lower(header[i]) == name) return i;
    return std::nullopt;
}

// One row's appended fields, or its error.
std::string row_output(const Plan& plan, const Columns& c, const std::vector<std::string>& f,
                       std::size_t header_size, bool& failed) {
    // Empty predicted, lln, uln (and z, percent_predicted) before the error.
    const std::string empty_tail = c.value ? ",,,,,," : ",,,,";
    auto fail = [&](const std::string& why) {
        failed = true;
        return empty_tail + csv_field(why);
    };
    if (f.size() != header_size)
        return fail(fmt::format("expected {} fields, found {}", header_size, f.size()));
    ReferenceSubject s;
    auto sex = parse_sex(f[*c.sex]);
    if (!sex) return fail("sex '" + f[*c.sex] + "' is not M or F");
    s.sex = *sex;
    auto age = parse_number(f[*c.age]);
    if (!age) return fail("age '" + f[*c.age] + "' is not a number");
    s.age_years = *age;
    auto height = parse_number(f[*c.height]);
    if (!height) return fail("height_cm '" + f[*c.height] + "' is not a number");
    s.height_cm = *height;
    s.group = plan.group;
    if (c.group && plan.set == EquationSet::gli_2012 && !f[*c.group].empty()) {
        s.group = parse_gli2012_group(f[*c.group]);
        if (!s.group) return fail("group '" + f[*c.group] + "' is not a GLI-2012 group");
    }
    std::optional<double> measured;
    if (c.value && !f[*c.value].empty()) {
        measured = parse_number(f[*c.value]);
        if (!measured || *measured <= 0)
            return fail("value '" + f[*c.value] + "' is not a positive number");
    }
    auto r = compute_reference_values(plan.set, plan.kind, plan.unit, s, measured);
    if (!r.ok()) return fail(r.error().message);
    std::string out = "," + fixed(*r->predicted, kValueDecimals) + "," +
                      fixed(*r->lln, kValueDecimals) + "," + fixed(*r->uln, kValueDecimals);
    if (c.value) {
        out += ",";
        if (r->z_score) out += fixed(*r->z_score, kZDecimals);
        out += ",";
        if (r->percent_predicted) out += fixed(*r->percent_predicted, kPercentDecimals);
    }
    return out + ",";
}

int run_csv(const Options& o) {
    std::ifstream in(o.csv_path, std::ios::binary);
    if (!in) {
        fmt::print(stderr, "pftgw reference: cannot read '{}': {}\n", o.csv_path,
                   std::strerror(errno));
        return kExitUnreadable;
    }
    std::string header_line;
    if (!std::getline(in, header_line)) {
        fmt::print(stderr, "pftgw reference: '{}' is empty (a header row is needed)\n", o.csv_path);
        return kExitUnreadable;
    }
    if (!header_line.empty() && header_line.back() == '\r') header_line.pop_back();
    const auto header = split_csv_line(header_line);
    Columns c;
    c.sex = column(header, "sex");
    c.age = column(header, "age");
    c.height = column(header, "height_cm");
    c.value = column(header, "value");
    c.group = column(header, "group");
    if (!c.sex || !c.age || !c.height) {
        fmt::print(stderr, "pftgw reference: '{}' has no header row with sex, age and height_cm\n",
                   o.csv_path);
        return kExitUnreadable;
    }
    auto plan = make_plan(o, c.group.has_value());
    if (!plan) return kExitUsage;

    std::string out =
        header_line + ",predicted,lln,uln" + (c.value ? ",z,percent_predicted" : "") + ",error\n";
    bool any_failed = false;
    std::string line;
    while (std::getline(in, line)) {
        if (!line.empty() && line.back() == '\r') line.pop_back();
        if (line.empty()) continue;
        bool failed = false;
        out += line + row_output(*plan, c, split_csv_line(line), header.size(), failed) + "\n";
        any_failed = any_failed || failed;
    }
    if (in.bad()) {
        fmt::print(stderr, "pftgw reference: reading '{}' failed\n", o.csv_path);
        return kExitUnreadable;
    }
    fmt::print("{}", out);
    fmt::print(stderr, "{} ({})\n", kCaution, equation_set_label(plan->set));
    return any_failed ? kExitFindings : kExitOk;
}

}  // namespace

void add_reference_command(CLI::App& app, CommandContext& ctx) {
    auto o = std::make_shared<Options>();
    auto* sub = app.add_subcommand(
        "reference",
        "Compute GLI reference values (predicted, LLN, ULN, z, percent predicted) for a subject "
        "or a CSV of subjects");
    sub->add_option("--set", o->set_name, "gli-global-2022, gli-2012, gli-2017 or gli-2021")
        ->required();
    sub->add_option("--quantity", o->quantity,
                    "FEV1, FVC, FEV1/FVC, FEF25-75, FEF75, TLCO/DLCO, KCO, VA, FRC, TLC, RV, "
                    "RV/TLC, ERV, IC, VC")
        ->required();
    sub->add_option("--group", o->group,
                    "GLI-2012 group: caucasian, african-american, ne-asian, se-asian, other");
    sub->add_option("--units", o->units, "si or traditional (DLCO, KCO)")->capture_default_str();
    auto* sex = sub->add_option("--sex", o->sex, "sex at birth: M or F");
    auto* age = sub->add_option("--age", o->age_years, "age at the test in decimal years");
    auto* height = sub->add_option("--height", o->height_cm, "height in cm");
    auto* value = sub->add_option("--value", o->value, "measured value, for z and % predicted");
    auto* csv = sub->add_option("--csv", o->csv_path,
                                "CSV with a header row: sex,age,height_cm[,value][,group]");
    csv->excludes(sex)->excludes(age)->excludes(height)->excludes(value);
    sub->callback([o, sex, age, height, value, csv, &ctx] {
        if (csv->count() > 0) {
            ctx.exit_code = run_csv(*o);
            return;
        }
        if (sex->count() == 0 || age->count() == 0 || height->count() == 0) {
            fmt::print(stderr, "pftgw reference: give --sex, --age and --height, or --csv FILE\n");
            ctx.exit_code = kExitUsage;
            return;
        }
        ctx.exit_code = run_single(*o, value->count() > 0);
    });
}

}  // namespace pftgw::cli
