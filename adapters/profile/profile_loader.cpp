// Device profile loader: TOML (toml++) to DeviceProfile, validated against
// the quantity table. Exceptions from toml++ stay inside this file: the
// loader returns its errors as values (STYLE.md rule 4).
#include "adapters/profile/profile_loader.hpp"

#include <toml++/toml.h>
#include <algorithm>
#include <cctype>
#include <fstream>
#include <sstream>

#include "gateway/core/quantity_table.hpp"
#include "gateway/core/units.hpp"

namespace pftgw::profile {

namespace {

// Defaults shown here are the DeviceProfile defaults; keep them in step.
const std::vector<ProfileKey> kKeys = {
    {"", "name", "string", "(required)"},
    {"", "code_system", "string", "the value of name"},
    {"", "time_zone", "string", "\"\" (times without an offset are refused)"},
    {"", "datetime_format", "string", "\"%Y%m%d%H%M%S\""},
    {"", "charset", "string", "\"ASCII\""},
    {"", "decimal_separator", "string", "\".\""},
    {"", "equation_set", "string", "\"\""},
    {"", "patient_identifier_system", "string", "\"\""},
    {"", "laboratory_identifier_system", "string", "\"\""},
    {"", "height_unit", "string", "\"\""},
    {"", "weight_unit", "string", "\"\""},
    {"", "device", "table", "{}"},
    {"", "units", "table", "{}"},
    {"", "codes", "array of tables", "[]"},
    {"", "comment_values", "array of tables", "[]"},
    {"", "csv", "table", "(none)"},
    {"device", "id", "string", "\"\""},
    {"device", "manufacturer", "string", "\"\""},
    {"device", "model", "string", "\"\""},
    {"device", "serial_number", "string", "\"\""},
    {"device", "software_version", "string", "\"\""},
    {"codes", "code", "string", "(required)"},
    {"codes", "kind", "string", "(required)"},
    {"codes", "test", "string", "the kind's test in the quantity table"},
    {"codes", "unit", "string", "\"\""},
    {"codes", "condition", "string", "(none)"},
    {"codes", "override_sent", "boolean", "false"},
    {"codes", "trial_value", "boolean", "false"},
    {"comment_values", "tag", "string", "(required)"},
    {"comment_values", "component", "integer", "2"},
    {"comment_values", "code", "string", "(required)"},
    {"comment_values", "unit_component", "integer", "0"},
    {"csv", "shape", "string", "\"row_per_session\""},
    {"csv", "separator", "string", "\",\""},
    {"csv", "quote", "string", "\"\\\"\""},
    {"csv", "has_header", "boolean", "true"},
    {"csv", "session_column", "string", "\"\""},
    {"csv", "code_column", "string", "\"\""},
    {"csv", "value_column", "string", "\"\""},
    {"csv", "unit_column", "string", "\"\""},
    {"csv", "columns", "array of tables", "[]"},
    {"csv.columns", "column", "string", "(required)"},
    {"csv.columns", "target", "string", "(required)"},
    {"csv.columns", "unit", "string", "\"\""},
    {"csv.columns", "condition", "string", "(none)"},
};

// CSV column targets that are not quantity kinds (schemas/device-profile.md).
constexpr std::string_view kCsvFieldTargets[] = {
    "subject.identifier",    "subject.laboratory_identifier",
    "subject.family_name",   "subject.given_name",
    "subject.birth_date",    "subject.sex_at_birth",
    "session_time",          "device.id",
    "device_session_number", "order.placer_number",
    "order.filler_number",   "order.accession_number",
    "test.comment",
};

constexpr std::string_view kCharsets[] = {"ASCII", "ISO-8859-1", "UTF-8"};

bool iequals(std::string_view a, std::string_view b) {
    return a.size() == b.size() && std::equal(a.begin(), a.end(), b.begin(), [](char x, char y) {
               return std::tolower(static_cast<unsigned char>(x)) ==
                      std::tolower(static_cast<unsigned char>(y));
           });
}

int line_of(const toml::source_region& r) {
    return static_cast<int>(r.begin.line);
}

class Loader {
public:
    explicit Loader(std::string file) : file_(std::move(file)) {}

    void error(int line, std::string key, std::string rule, std::string message) {
        errors_.push_back({file_, line, std::move(key), std::move(rule), std::move(message)});
    }
    std::vector<ProfileError>& errors() { return errors_; }

    // Every key of `t` must be in the key table under `table_name`.
    void check_keys(const toml::table& t, std::string_view table_name, const std::string& prefix) {
        for (const auto& [k, v] : t) {
            (void)v;
            const bool known = std::any_of(kKeys.begin(), kKeys.end(), [&](const ProfileKey& pk) {
                return pk.table == table_name && pk.key == k.str();
            });
            if (!known)
                error(line_of(k.source()), prefix + std::string(k.str()), "profile.unknown-key",
                      "unknown key '" + std::string(k.str()) + "'" +
                          (table_name.empty() ? std::string()
                                              : " in [" + std::string(table_name) + "]"));
        }
    }

    // Reads an optional string key; a value of another type is an error.
    std::optional<std::string> get_string(const toml::table& t, std::string_view key,
                                          const std::string& path) {
        const toml::node* n = t.get(key);
        if (!n) return std::nullopt;
        if (const auto* s = n->as_string()) return s->get();
        error(line_of(n->source()), path, "profile.wrong-type", "expected a string");
        return std::nullopt;
    }
    std::optional<bool> get_bool(const toml::table& t, std::string_view key,
                                 const std::string& path) {
        const toml::node* n = t.get(key);
        if (!n) return std::nullopt;
        if (const auto* b = n->as_boolean()) return b->get();
        error(line_of(n->source()), path, "profile.wrong-type", "expected true or false");
        return std::nullopt;
    }
    std::optional<std::int64_t> get_int(const toml::table& t, std::string_view key,
                                        const std::string& path) {
        const toml::node* n = t.get(key);
        if (!n) return std::nullopt;
        if (const auto* i = n->as_integer()) return i->get();
        error(line_of(n->source()), path, "profile.wrong-type", "expected an integer");
        return std::nullopt;
    }
    int line_of_key(const toml::table& t, std::string_view key, int fallback) {
        const toml::node* n = t.get(key);
        return n ? line_of(n->source()) : fallback;
    }
    std::string required_string(const toml::table& t, std::string_view key, const std::string& path,
                                int table_line) {
        auto s = get_string(t, key, path);
        if (!s && !t.contains(key))
            error(table_line, path, "profile.missing-key",
                  "required key '" + std::string(key) + "' is missing");
        if (s && s->empty())
            error(line_of_key(t, key, table_line), path, "profile.missing-key",
                  "'" + std::string(key) + "' must not be empty");
        return s.value_or("");
    }

    // A UCUM unit that must fit `kind`.
    void check_unit_for_kind(const std::string& unit, const QuantityKind& kind, int line,
                             const std::string& path) {
        if (unit.empty()) return;
        if (!kind.accepts(unit)) {
            std::string accepted;
            for (const auto& u : kind.accepted_units) accepted += (accepted.empty() ? "" : " ") + u;
            error(
                line, path, "profile.unit-mismatch",
                "unit '" + unit + "' does not fit " + kind.key + "; expected one of: " + accepted);
        }
    }

    // A gas condition by name that must fit `kind`: kinds without a gas
    // condition (ratios, times) take only "none"; gas volumes, flows and
    // DLCO take any condition but "none".
    std::optional<GasCondition> parse_condition(const std::string& text, const QuantityKind* kind,
                                                int line, const std::string& path) {
        auto c = parse_gas_condition(text);
        if (!c || *c == GasCondition::unspecified) {
            error(line, path, "profile.bad-condition",
                  "condition '" + text + "' is not one of BTPS, STPD, ATPS, ATPD, none");
            return std::nullopt;
        }
        if (kind) {
            const bool kind_has_none = kind->canonical_condition == GasCondition::none;
            if (kind_has_none != (*c == GasCondition::none)) {
                error(line, path, "profile.bad-condition",
                      "condition '" + text + "' does not fit " + kind->key +
                          (kind_has_none ? " (it has no gas condition: use none)"
                                         : " (a gas quantity: BTPS, STPD, ATPS or ATPD)"));
                return std::nullopt;
            }
        }
        return c;
    }

    // A unit setting for the HEIGHT or WEIGHT kind.
    std::string subject_unit(const toml::table& t, std::string_view key, std::string_view kind) {
        auto u = get_string(t, key, std::string(key));
        if (!u) return {};
        if (const QuantityKind* k = quantity_table().find(kind))
            check_unit_for_kind(*u, *k, line_of_key(t, key, 0), std::string(key));
        return *u;
    }

private:
    std::string file_;
    std::vector<ProfileError> errors_;
};

// Only %Y %m %d %H %M %S and %% are understood; a date needs %Y, %m and %d.
bool is_datetime_format(std::string_view f, std::string& why) {
    bool y = false, m = false, d = false;
    for (std::size_t i = 0; i < f.size(); ++i) {
        if (f[i] != '%') continue;
        if (i + 1 == f.size()) {
            why = "ends in a lone '%'";
            return false;
        }
        const char c = f[++i];
        switch (c) {
            case 'Y':
                y = true;
                break;
            case 'm':
                m = true;
                break;
            case 'd':
                d = true;
                break;
            case 'H':
            case 'M':
            case 'S':
            case '%':
                break;
            default:
                why = std::string("'%") + c + "' is not supported";
                return false;
        }
    }
    if (!(y && m && d)) {
        why = "needs %Y, %m and %d";
        return false;
    }
    return true;
}

void read_device(Loader& l, const toml::table& t, Device& d) {
    l.check_keys(t, "device", "device.");
    auto set = [&](std::string_view key, std::string& field) {
        if (auto s = l.get_string(t, key, "device." + std::string(key))) field = *s;
    };
    set("id", d.id);
    set("manufacturer", d.manufacturer);
    set("model", d.model);
    set("serial_number", d.serial_number);
    set("software_version", d.software_version);
}

void read_units(Loader& l, const toml::table& t, std::vector<UnitAlias>& out) {
    for (const auto& [k, v] : t) {
        const std::string path = "units.\"" + std::string(k.str()) + "\"";
        const auto* s = v.as_string();
        if (!s) {
            l.error(line_of(v.source()), path, "profile.wrong-type", "expected a UCUM unit string");
            continue;
        }
        if (!is_known_unit(s->get())) {
            l.error(line_of(v.source()), path, "profile.unit-unknown",
                    "'" + s->get() + "' is not a UCUM unit the gateway knows");
            continue;
        }
        out.push_back({std::string(k.str()), s->get()});
    }
}

void read_codes(Loader& l, const toml::array& arr, std::vector<CodeMapping>& out) {
    for (std::size_t i = 0; i < arr.size(); ++i) {
        const std::string p = "codes[" + std::to_string(i) + "]";
        const int table_line = line_of(arr[i].source());
        const auto* t = arr[i].as_table();
        if (!t) {
            l.error(table_line, p, "profile.wrong-type", "expected a table ([[codes]])");
            continue;
        }
        l.check_keys(*t, "codes", p + ".");
        CodeMapping m;
        m.code = l.required_string(*t, "code", p + ".code", table_line);
        m.kind = l.required_string(*t, "kind", p + ".kind", table_line);
        const QuantityKind* kind = nullptr;
        if (!m.kind.empty()) {
            kind = quantity_table().find(m.kind);
            if (!kind)
                l.error(l.line_of_key(*t, "kind", table_line), p + ".kind", "profile.unknown-kind",
                        "'" + m.kind + "' is not a quantity kind of schemas/quantities.csv");
        }
        if (auto s = l.get_string(*t, "test", p + ".test")) {
            m.test = parse_test_type(*s);
            if (!m.test)
                l.error(l.line_of_key(*t, "test", table_line), p + ".test", "profile.bad-test",
                        "'" + *s + "' is not spirometry, lung-volumes or diffusing-capacity");
        }
        if (auto s = l.get_string(*t, "unit", p + ".unit")) {
            m.unit = *s;
            if (kind)
                l.check_unit_for_kind(m.unit, *kind, l.line_of_key(*t, "unit", 0), p + ".unit");
        }
        if (auto s = l.get_string(*t, "condition", p + ".condition"))
            m.condition = l.parse_condition(*s, kind, l.line_of_key(*t, "condition", table_line),
                                            p + ".condition");
        if (auto b = l.get_bool(*t, "override_sent", p + ".override_sent")) m.override_sent = *b;
        if (auto b = l.get_bool(*t, "trial_value", p + ".trial_value")) m.trial_value = *b;
        if (m.override_sent && m.unit.empty() && !t->contains("condition"))
            l.error(l.line_of_key(*t, "override_sent", table_line), p + ".override_sent",
                    "profile.override-empty",
                    "override_sent is true but the mapping gives no unit or condition");
        if (!m.code.empty() && std::any_of(out.begin(), out.end(),
                                           [&](const CodeMapping& o) { return o.code == m.code; }))
            l.error(l.line_of_key(*t, "code", table_line), p + ".code", "profile.duplicate-code",
                    "code '" + m.code + "' is mapped twice");
        out.push_back(std::move(m));
    }
}

void read_comment_values(Loader& l, const toml::array& arr, const std::vector<CodeMapping>& codes,
                         std::vector<CommentValue>& out) {
    for (std::size_t i = 0; i < arr.size(); ++i) {
        const std::string p = "comment_values[" + std::to_string(i) + "]";
        const int table_line = line_of(arr[i].source());
        const auto* t = arr[i].as_table();
        if (!t) {
            l.error(table_line, p, "profile.wrong-type", "expected a table ([[comment_values]])");
            continue;
        }
        l.check_keys(*t, "comment_values", p + ".");
        CommentValue c;
        c.tag = l.required_string(*t, "tag", p + ".tag", table_line);
        c.code = l.required_string(*t, "code", p + ".code", table_line);
        if (!c.code.empty() && std::none_of(codes.begin(), codes.end(),
                                            [&](const CodeMapping& m) { return m.code == c.code; }))
            l.error(l.line_of_key(*t, "code", table_line), p + ".code", "profile.unknown-code",
                    "code '" + c.code + "' is not mapped in [[codes]]");
        if (auto n = l.get_int(*t, "component", p + ".component")) {
            if (*n < 2 || *n > 99)
                l.error(l.line_of_key(*t, "component", table_line), p + ".component",
                        "profile.out-of-range",
                        "component must be 2..99 (component 1 holds the tag)");
            else
                c.component = static_cast<int>(*n);
        }
        if (auto n = l.get_int(*t, "unit_component", p + ".unit_component")) {
            if (*n < 0 || *n > 99 || *n == 1)
                l.error(l.line_of_key(*t, "unit_component", table_line), p + ".unit_component",
                        "profile.out-of-range", "unit_component must be 0 (none) or 2..99");
            else
                c.unit_component = static_cast<int>(*n);
        }
        out.push_back(std::move(c));
    }
}

char single_char(Loader& l, const toml::table& t, std::string_view key, const std::string& path,
                 char fallback) {
    auto s = l.get_string(t, key, path);
    if (!s) return fallback;
    if (s->size() != 1) {
        l.error(l.line_of_key(t, key, 0), path, "profile.bad-value",
                "expected exactly one character, got '" + *s + "'");
        return fallback;
    }
    return (*s)[0];
}

void read_csv(Loader& l, const toml::table& t, CsvLayout& csv) {
    l.check_keys(t, "csv", "csv.");
    if (auto s = l.get_string(t, "shape", "csv.shape")) {
        if (*s == "row_per_session")
            csv.shape = CsvLayout::Shape::row_per_session;
        else if (*s == "row_per_value")
            csv.shape = CsvLayout::Shape::row_per_value;
        else
            l.error(l.line_of_key(t, "shape", 0), "csv.shape", "profile.bad-value",
                    "'" + *s + "' is not row_per_session or row_per_value");
    }
    csv.separator = single_char(l, t, "separator", "csv.separator", csv.separator);
    csv.quote = single_char(l, t, "quote", "csv.quote", csv.quote);
    if (auto b = l.get_bool(t, "has_header", "csv.has_header")) csv.has_header = *b;
    auto set = [&](std::string_view key, std::string& field) {
        if (auto s = l.get_string(t, key, "csv." + std::string(key))) field = *s;
    };
    set("session_column", csv.session_column);
    set("code_column", csv.code_column);
    set("value_column", csv.value_column);
    set("unit_column", csv.unit_column);
    if (csv.shape == CsvLayout::Shape::row_per_value &&
        (csv.code_column.empty() || csv.value_column.empty()))
        l.error(l.line_of_key(t, "shape", 0), "csv.shape", "profile.missing-key",
                "row_per_value needs code_column and value_column");
    const toml::node* cols = t.get("columns");
    if (!cols) return;
    const auto* arr = cols->as_array();
    if (!arr) {
        l.error(line_of(cols->source()), "csv.columns", "profile.wrong-type",
                "expected an array of tables ([[csv.columns]])");
        return;
    }
    for (std::size_t i = 0; i < arr->size(); ++i) {
        const std::string p = "csv.columns[" + std::to_string(i) + "]";
        const int table_line = line_of((*arr)[i].source());
        const auto* ct = (*arr)[i].as_table();
        if (!ct) {
            l.error(table_line, p, "profile.wrong-type", "expected a table ([[csv.columns]])");
            continue;
        }
        l.check_keys(*ct, "csv.columns", p + ".");
        CsvColumn c;
        c.column = l.required_string(*ct, "column", p + ".column", table_line);
        c.target = l.required_string(*ct, "target", p + ".target", table_line);
        const QuantityKind* kind = c.target.empty() ? nullptr : quantity_table().find(c.target);
        const bool is_field = std::find(std::begin(kCsvFieldTargets), std::end(kCsvFieldTargets),
                                        c.target) != std::end(kCsvFieldTargets);
        if (!c.target.empty() && !kind && !is_field)
            l.error(l.line_of_key(*ct, "target", table_line), p + ".target", "profile.unknown-kind",
                    "'" + c.target + "' is neither a quantity kind nor a known field");
        if (auto s = l.get_string(*ct, "unit", p + ".unit")) {
            c.unit = *s;
            if (kind)
                l.check_unit_for_kind(c.unit, *kind, l.line_of_key(*ct, "unit", 0), p + ".unit");
        }
        if (auto s = l.get_string(*ct, "condition", p + ".condition"))
            c.condition = l.parse_condition(*s, kind, l.line_of_key(*ct, "condition", table_line),
                                            p + ".condition");
        csv.columns.push_back(std::move(c));
    }
}

DeviceProfile read_profile(Loader& l, const toml::table& root, std::string_view source_name) {
    DeviceProfile p;
    p.source_file = std::string(source_name);
    l.check_keys(root, "", "");

    p.name = l.required_string(root, "name", "name", 1);
    p.code_system = l.get_string(root, "code_system", "code_system").value_or(p.name);
    if (auto s = l.get_string(root, "time_zone", "time_zone")) {
        if (!is_time_zone_form(*s))
            l.error(l.line_of_key(root, "time_zone", 0), "time_zone", "profile.bad-time-zone",
                    "'" + *s + "' is not the form of an IANA zone name (Area/City or UTC)");
        p.time_zone = *s;
    }
    if (auto s = l.get_string(root, "datetime_format", "datetime_format")) {
        std::string why;
        if (!is_datetime_format(*s, why))
            l.error(l.line_of_key(root, "datetime_format", 0), "datetime_format",
                    "profile.bad-datetime-format", "'" + *s + "': " + why);
        p.datetime_format = *s;
    }
    if (auto s = l.get_string(root, "charset", "charset")) {
        const auto* hit = std::find_if(std::begin(kCharsets), std::end(kCharsets),
                                       [&](std::string_view c) { return iequals(c, *s); });
        if (hit == std::end(kCharsets))
            l.error(l.line_of_key(root, "charset", 0), "charset", "profile.bad-charset",
                    "'" + *s + "' is not ASCII, ISO-8859-1 or UTF-8");
        else
            p.charset = std::string(*hit);
    }
    if (auto s = l.get_string(root, "decimal_separator", "decimal_separator")) {
        if (*s != "." && *s != ",")
            l.error(l.line_of_key(root, "decimal_separator", 0), "decimal_separator",
                    "profile.bad-decimal-separator", "'" + *s + "' is neither '.' nor ','");
        else
            p.decimal_separator = (*s)[0];
    }
    p.equation_set = l.get_string(root, "equation_set", "equation_set").value_or("");
    p.patient_identifier_system =
        l.get_string(root, "patient_identifier_system", "patient_identifier_system").value_or("");
    p.laboratory_identifier_system =
        l.get_string(root, "laboratory_identifier_system", "laboratory_identifier_system")
            .value_or("");
    p.height_unit = l.subject_unit(root, "height_unit", "HEIGHT");
    p.weight_unit = l.subject_unit(root, "weight_unit", "WEIGHT");

    auto sub_table = [&](std::string_view key) -> const toml::table* {
        const toml::node* n = root.get(key);
        if (!n) return nullptr;
        if (const auto* t = n->as_table()) return t;
        l.error(line_of(n->source()), std::string(key), "profile.wrong-type", "expected a table");
        return nullptr;
    };
    auto sub_array = [&](std::string_view key) -> const toml::array* {
        const toml::node* n = root.get(key);
        if (!n) return nullptr;
        if (const auto* a = n->as_array()) return a;
        l.error(line_of(n->source()), std::string(key), "profile.wrong-type",
                "expected an array of tables ([[" + std::string(key) + "]])");
        return nullptr;
    };
    if (const auto* t = sub_table("device")) read_device(l, *t, p.device);
    if (const auto* t = sub_table("units")) read_units(l, *t, p.unit_aliases);
    if (const auto* a = sub_array("codes")) read_codes(l, *a, p.codes);
    if (const auto* a = sub_array("comment_values"))
        read_comment_values(l, *a, p.codes, p.comment_values);
    if (const auto* t = sub_table("csv")) {
        p.csv.emplace();
        read_csv(l, *t, *p.csv);
    }
    return p;
}

}  // namespace

std::string ProfileError::to_string() const {
    std::string s = file + ":" + std::to_string(line) + ": ";
    if (!key.empty()) s += key + ": ";
    return s + message;
}

const std::vector<ProfileKey>& profile_keys() {
    return kKeys;
}

bool is_time_zone_form(std::string_view name) {
    if (name.empty() || name.size() > 64) return false;
    std::size_t start = 0;
    while (start <= name.size()) {
        auto end = name.find('/', start);
        if (end == std::string_view::npos) end = name.size();
        const std::string_view part = name.substr(start, end - start);
        // Each part starts with a letter and holds letters, digits, '_', '-', '+'.
        if (part.empty() || !std::isalpha(static_cast<unsigned char>(part[0]))) return false;
        for (char c : part)
            if (!std::isalnum(static_cast<unsigned char>(c)) && c != '_' && c != '-' && c != '+')
                return false;
        start = end + 1;
    }
    return true;
}

ProfileOutcome parse_profile(std::string_view toml_text, std::string_view source_name) {
    Loader l{std::string(source_name)};
    ProfileOutcome out;
    try {
        toml::table root = toml::parse(toml_text, source_name);
        DeviceProfile p = read_profile(l, root, source_name);
        if (l.errors().empty()) out.profile = std::move(p);
    } catch (const toml::parse_error& e) {
        l.error(line_of(e.source()), "", "profile.syntax", std::string(e.description()));
    }
    out.errors = std::move(l.errors());
    return out;
}

ProfileOutcome load_profile_file(const std::string& path) {
    std::ifstream in(path, std::ios::binary);
    if (!in) {
        ProfileOutcome out;
        out.errors.push_back({path, 0, "", "profile.unreadable", "cannot open the file"});
        return out;
    }
    std::ostringstream text;
    text << in.rdbuf();
    return parse_profile(text.str(), path);
}

}  // namespace pftgw::profile
