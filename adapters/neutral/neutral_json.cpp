// Neutral JSON: reader (nlohmann-json SAX into a DOM that keeps each number's
// text, so "3.50" stays "3.50" in source.value_text) and a streaming writer.
// Also read_any. Layout: DEVELOPERS.md "The open schema";
// schemas/pftgw-result-1.0.schema.json is the authority.
#include <nlohmann/json.hpp>

#include "adapters/neutral/neutral_common.hpp"
#include "adapters/neutral/neutral_io.hpp"

namespace pftgw::neutral {
namespace {

using detail::Findings;
using detail::Path;
using Json = nlohmann::json;

// Builds a DOM like nlohmann's own, but a non-integer number is stored as a
// binary value holding its exact text (JSON text never yields binary values).
class LexemeDom : public nlohmann::json_sax<Json> {
public:
    Json root;
    std::size_t error_position = 0;
    std::string error_message;

    bool null() override { return put(nullptr); }
    bool boolean(bool v) override { return put(v); }
    bool number_integer(number_integer_t v) override { return put(v); }
    bool number_unsigned(number_unsigned_t v) override { return put(v); }
    bool number_float(number_float_t, const string_t& s) override {
        return put(Json::binary(std::vector<std::uint8_t>(s.begin(), s.end())));
    }
    bool string(string_t& v) override { return put(std::move(v)); }
    bool binary(binary_t& v) override { return put(Json::binary(std::move(v))); }
    bool start_object(std::size_t) override {
        stack_.push_back(slot(Json::object()));
        return true;
    }
    bool key(string_t& k) override {
        key_slot_ = &(*stack_.back())[k];
        return true;
    }
    bool end_object() override {
        stack_.pop_back();
        return true;
    }
    bool start_array(std::size_t) override {
        stack_.push_back(slot(Json::array()));
        return true;
    }
    bool end_array() override {
        stack_.pop_back();
        return true;
    }
    bool parse_error(std::size_t position, const std::string&,
                     const nlohmann::detail::exception& ex) override {
        error_position = position;
        error_message = ex.what();
        return false;
    }

private:
    std::vector<Json*> stack_;
    Json* key_slot_ = nullptr;

    Json* slot(Json&& v) {
        if (stack_.empty()) {
            root = std::move(v);
            return &root;
        }
        Json& top = *stack_.back();
        if (top.is_array()) {
            top.push_back(std::move(v));
            return &top.back();
        }
        *key_slot_ = std::move(v);
        return key_slot_;
    }
    template <class V>
    bool put(V&& v) {
        slot(Json(std::forward<V>(v)));
        return true;
    }
};

// The text of a number member, or nullopt when it is not a number.
std::optional<std::string> number_text(const Json& j) {
    std::string s;
    if (j.is_binary()) {
        const auto& b = j.get_binary();
        s.assign(b.begin(), b.end());
    } else if (j.is_number_integer() && !j.is_number_unsigned()) {
        detail::append_int(s, j.get<std::int64_t>());
    } else if (j.is_number_unsigned()) {
        s = std::to_string(j.get<std::uint64_t>());
    } else {
        return std::nullopt;
    }
    return s;
}

std::string_view type_name(const Json& j) {
    if (j.is_binary() || j.is_number()) return "a number";
    if (j.is_string()) return "a string";
    if (j.is_boolean()) return "a boolean";
    if (j.is_null()) return "null";
    if (j.is_array()) return "an array";
    return "an object";
}

class JsonReader {
public:
    explicit JsonReader(Findings& f) : f_(f) {}
    std::optional<NeutralResult> read(const Json& root);

private:
    Findings& f_;

    // Where a key first appears in the text: enough to point a person at it.
    std::ptrdiff_t locate(std::string_view key) const {
        const std::string quoted = "\"" + std::string(key) + "\"";
        std::string_view b = f_.bytes();
        for (std::size_t pos = b.find(quoted); pos != std::string_view::npos;
             pos = b.find(quoted, pos + 1)) {
            std::size_t k = pos + quoted.size();
            while (k < b.size() && (b[k] == ' ' || b[k] == '\t' || b[k] == '\n' || b[k] == '\r'))
                ++k;
            if (k < b.size() && b[k] == ':') return static_cast<std::ptrdiff_t>(pos);
        }
        return -1;
    }
    void unknown(std::string_view key, const Path& p) {
        f_.add("schema.unknown-element", p, "unknown member \"" + std::string(key) + "\"",
               locate(key), {{"member", std::string(key)}}, f_.unknown_severity);
    }
    void missing(const Path& p, std::string_view key) {
        f_.add("schema.missing-required", p, "required member \"" + std::string(key) + "\" missing",
               -1, {{"missing", std::string(key)}});
    }
    void wrong_type(const Json& j, const Path& p, std::string_view key, std::string_view expected) {
        f_.add("schema.invalid-value", p,
               "\"" + std::string(key) + "\" is " + std::string(type_name(j)) + "; expected " +
                   std::string(expected),
               locate(key), {{"member", std::string(key)}});
    }
    void invalid(const Path& p, std::string_view key, std::string_view text,
                 std::string_view expected) {
        f_.add("schema.invalid-value", p,
               "'" + std::string(text) + "' is not " + std::string(expected), locate(key),
               {{"text", std::string(text)}});
    }

    bool object(const Json& j, const Path& p, std::string_view key) {
        if (j.is_object()) return true;
        wrong_type(j, p, key, "an object");
        return false;
    }
    bool array(const Json& j, const Path& p, std::string_view key) {
        if (j.is_array()) return true;
        wrong_type(j, p, key, "an array");
        return false;
    }
    const std::string* text(const Json& j, const Path& p, std::string_view key) {
        if (j.is_string()) return j.get_ptr<const std::string*>();
        wrong_type(j, p, key, "a string");
        return nullptr;
    }
    void str(const Json& j, const Path& p, std::string_view key, std::string& out) {
        if (const std::string* s = text(j, p, key)) out = *s;
    }
    // Returns the number's text (or the string given in its place).
    std::string number(const Json& j, const Path& p, std::string_view key,
                       std::optional<double>& out) {
        if (auto t = number_text(j)) {
            out = detail::parse_double(*t);
            return *t;
        }
        if (j.is_string()) {
            const std::string& s = j.get_ref<const std::string&>();
            f_.add("value.not-numeric", p, "'" + s + "' is not a number", locate(key),
                   {{"text", s}});
            return s;
        }
        wrong_type(j, p, key, "a number");
        return {};
    }
    void integer(const Json& j, const Path& p, std::string_view key, int& out) {
        auto t = number_text(j);
        std::optional<int> v;
        if (t) v = detail::parse_int(*t);
        if (v) {
            out = *v;
            return;
        }
        if (j.is_string() || t) {
            const std::string s = t ? *t : j.get<std::string>();
            f_.add("value.not-numeric", p, "'" + s + "' is not an integer", locate(key),
                   {{"text", s}});
            return;
        }
        wrong_type(j, p, key, "an integer");
    }
    void timestamp(const Json& j, const Path& p, std::string_view key,
                   std::optional<Timestamp>& out) {
        const std::string* s = text(j, p, key);
        if (s == nullptr) return;
        auto t = parse_iso_timestamp(*s);
        if (t)
            out = t.value();
        else
            f_.add(t.error().code, p, t.error().message, locate(key), {{"text", *s}});
    }
    template <class E, class Parse>
    void enumerated(const Json& j, const Path& p, std::string_view key, E& out, Parse parse,
                    std::string_view expected) {
        const std::string* s = text(j, p, key);
        if (s == nullptr) return;
        if (auto v = parse(*s))
            out = *v;
        else
            invalid(p, key, *s, expected);
    }
    void pairs(const Json& j, const Path& p, std::string_view key,
               std::vector<std::pair<std::string, std::string>>& out) {
        if (!array(j, p, key)) return;
        int i = 0;
        for (const Json& e : j) {
            const Path ep = p.item(key, i++);
            if (!object(e, ep, key)) continue;
            auto& pair = out.emplace_back();
            if (!e.contains("name")) missing(ep, "name");
            for (const auto& [k, v] : e.items()) {
                if (k == "name")
                    str(v, ep.child("name"), k, pair.first);
                else if (k == "value")
                    str(v, ep.child("value"), k, pair.second);
                else
                    unknown(k, ep);
            }
        }
    }

    void subject(const Json& j, Subject& s, const Path& p);
    void quantity(const Json& j, Quantity& q, const Path* parent, std::string_view field,
                  bool keyed);
    void reference(const Json& j, ReferenceValues& r, const Path& p);
    void values(const Json& j, std::vector<Quantity>& out, const Path& p);
    void test(const Json& j, Test& t, const Path& p);
    void finding(const Json& j, Finding& f, const Path& p);
    void extension(const Json& j, Extension& e, const Path& p);
};

std::optional<NeutralResult> JsonReader::read(const Json& root) {
    if (!root.is_object()) {
        f_.add("schema.wrong-root", detail::kRoot,
               "the document is " + std::string(type_name(root)) +
                   "; expected an object with \"schemaVersion\" (a neutral result)",
               0, {{"found", std::string(type_name(root))}});
        return std::nullopt;
    }
    NeutralResult r;
    const auto version = root.find("schemaVersion");
    if (version == root.end()) {
        missing(detail::kRoot, "schemaVersion");
    } else if (const std::string* vs =
                   text(*version, detail::kRoot.child("schemaVersion"), "schemaVersion")) {
        const auto v = detail::parse_version(*vs);
        if (!v || v->major != kSchemaMajor) {
            f_.add("schema.version-unsupported", detail::kRoot.child("schemaVersion"),
                   "schema version '" + *vs +
                       "' is not supported: this reader reads 1.x (1.0 and later minor versions)",
                   locate("schemaVersion"), {{"schemaVersion", *vs}});
            return std::nullopt;
        }
        if (v->minor > kSchemaMinor) f_.unknown_severity = Severity::warning;
        r.schema_version = *vs;
    }
    const Path& R = detail::kRoot;
    for (const auto& [k, v] : root.items()) {
        if (k == "schemaVersion") {
            continue;
        } else if (k == "id") {
            str(v, R.child("id"), k, r.id);
        } else if (k == "revision") {
            integer(v, R.child("revision"), k, r.revision);
            if (r.revision < 1) {
                invalid(R.child("revision"), k, std::to_string(r.revision),
                        "a revision (1, 2, ...)");
                r.revision = 1;
            }
        } else if (k == "status") {
            enumerated(v, R.child("status"), k, r.status, parse_result_status,
                       "a status (final, preliminary, corrected)");
        } else if (k == "replaces") {
            str(v, R.child("replaces"), k, r.replaces);
        } else if (k == "deviceSessionNumber") {
            str(v, R.child("deviceSessionNumber"), k, r.device_session_number);
        } else if (k == "sessionTime") {
            timestamp(v, R.child("sessionTime"), k, r.session_time);
        } else if (k == "subject") {
            if (object(v, R.child("subject"), k)) subject(v, r.subject, R.child("subject"));
        } else if (k == "order") {
            const Path p = R.child("order");
            if (!object(v, p, k)) continue;
            for (const auto& [ok, ov] : v.items()) {
                if (ok == "placer")
                    str(ov, p.child("placer"), ok, r.order.placer_number);
                else if (ok == "filler")
                    str(ov, p.child("filler"), ok, r.order.filler_number);
                else if (ok == "accession")
                    str(ov, p.child("accession"), ok, r.order.accession_number);
                else
                    unknown(ok, p);
            }
        } else if (k == "device") {
            const Path p = R.child("device");
            if (!object(v, p, k)) continue;
            Device& d = r.device;
            for (const auto& [dk, dv] : v.items()) {
                if (dk == "id")
                    str(dv, p.child("id"), dk, d.id);
                else if (dk == "manufacturer")
                    str(dv, p.child(dk), dk, d.manufacturer);
                else if (dk == "model")
                    str(dv, p.child(dk), dk, d.model);
                else if (dk == "serial")
                    str(dv, p.child(dk), dk, d.serial_number);
                else if (dk == "software")
                    str(dv, p.child(dk), dk, d.software_version);
                else if (dk == "lastCalibration")
                    timestamp(dv, p.child("lastCalibration"), dk, d.last_calibration);
                else if (dk == "calibrationNote")
                    str(dv, p.child(dk), dk, d.calibration_note);
                else
                    unknown(dk, p);
            }
        } else if (k == "environment") {
            const Path p = R.child("environment");
            if (!object(v, p, k)) continue;
            for (const auto& [ek, ev] : v.items()) {
                std::optional<Quantity>* slot = ek == "temperature" ? &r.environment.temperature
                                                : ek == "pressure"  ? &r.environment.pressure
                                                : ek == "humidity"  ? &r.environment.humidity
                                                                    : nullptr;
                if (slot == nullptr) {
                    unknown(ek, p);
                    continue;
                }
                if (object(ev, p.child(ek), ek)) quantity(ev, slot->emplace(), &p, ek, false);
            }
        } else if (k == "tests") {
            if (!array(v, R.child("tests"), k)) continue;
            int i = 0;
            for (const Json& t : v) {
                const Path p = R.item("tests", i++);
                if (object(t, p, k)) test(t, r.tests.emplace_back(), p);
            }
        } else if (k == "findings") {
            if (!array(v, R.child("findings"), k)) continue;
            int i = 0;
            for (const Json& fj : v) {
                const Path p = R.item("findings", i++);
                if (object(fj, p, k)) finding(fj, r.findings.emplace_back(), p);
            }
        } else if (k == "extensions") {
            if (!array(v, R.child("extensions"), k)) continue;
            int i = 0;
            for (const Json& e : v) {
                const Path p = R.item("extensions", i++);
                if (object(e, p, k)) extension(e, r.extensions.emplace_back(), p);
            }
        } else {
            unknown(k, R);
        }
    }
    return r;
}

void JsonReader::subject(const Json& j, Subject& s, const Path& p) {
    for (const auto& [k, v] : j.items()) {
        if (k == "identifiers") {
            if (!array(v, p.child(k), k)) continue;
            int i = 0;
            for (const Json& idj : v) {
                const Path ip = p.item("identifiers", i++);
                if (!object(idj, ip, k)) continue;
                Identifier& id = s.identifiers.emplace_back();
                if (!idj.contains("value")) missing(ip, "value");
                for (const auto& [ik, iv] : idj.items()) {
                    if (ik == "system")
                        str(iv, ip.child(ik), ik, id.system);
                    else if (ik == "value")
                        str(iv, ip.child(ik), ik, id.value);
                    else if (ik == "type")
                        str(iv, ip.child(ik), ik, id.type);
                    else
                        unknown(ik, ip);
                }
            }
        } else if (k == "name") {
            const Path np = p.child("name");
            if (!object(v, np, k)) continue;
            for (const auto& [nk, nv] : v.items()) {
                if (nk == "family")
                    str(nv, np.child(nk), nk, s.family_name);
                else if (nk == "given")
                    str(nv, np.child(nk), nk, s.given_name);
                else
                    unknown(nk, np);
            }
        } else if (k == "sexAtBirth") {
            enumerated(v, p.child(k), k, s.sex_at_birth, parse_sex_at_birth,
                       "a sex at birth (male, female, unknown)");
        } else if (k == "administrativeGender") {
            str(v, p.child(k), k, s.administrative_gender);
        } else if (k == "birthDate") {
            const std::string* t = text(v, p.child(k), k);
            if (t == nullptr) continue;
            auto d = parse_iso_date(*t);
            if (d)
                s.birth_date = d.value();
            else
                f_.add(d.error().code, p.child(k), d.error().message, locate(k), {{"text", *t}});
        } else if (k == "height") {
            if (object(v, p.child(k), k)) quantity(v, s.height.emplace(), &p, "height", false);
        } else if (k == "weight") {
            if (object(v, p.child(k), k)) quantity(v, s.weight.emplace(), &p, "weight", false);
        } else if (k == "ethnicity") {
            str(v, p.child(k), k, s.ethnicity);
        } else {
            unknown(k, p);
        }
    }
}

void JsonReader::quantity(const Json& j, Quantity& q, const Path* parent, std::string_view field,
                          bool keyed) {
    const auto kind = j.find("kind");
    if (kind != j.end() && kind->is_string()) q.kind = kind->get<std::string>();
    const Path p = keyed ? parent->keyed(field, q.kind.empty() ? std::string_view("?")
                                                               : std::string_view(q.kind))
                         : parent->child(field);
    if (kind == j.end()) missing(p, "kind");
    std::string value_text;
    const std::string* unit_text = nullptr;
    const std::string* condition_text = nullptr;
    bool has_source = false;
    for (const auto& [k, v] : j.items()) {
        if (k == "kind") {
            if (!v.is_string()) wrong_type(v, p.child(k), k, "a string");
        } else if (k == "value") {
            value_text = number(v, p.child(k), k, q.value);
        } else if (k == "unit") {
            unit_text = text(v, p.child(k), k);
            if (unit_text != nullptr) q.unit = *unit_text;
        } else if (k == "condition") {
            condition_text = text(v, p.child(k), k);
            if (condition_text == nullptr) continue;
            if (auto c = parse_gas_condition(*condition_text))
                q.condition = *c;
            else
                invalid(p.child(k), k, *condition_text,
                        "a gas condition (BTPS, STPD, ATPS, ATPD, none)");
        } else if (k == "origin") {
            enumerated(v, p.child(k), k, q.origin, parse_origin, "an origin (device, gateway)");
        } else if (k == "absent") {
            str(v, p.child(k), k, q.absent_reason.emplace());
        } else if (k == "source") {
            has_source = true;
            const Path sp = p.child(k);
            if (!object(v, sp, k)) continue;
            for (const auto& [sk, sv] : v.items()) {
                if (sk == "value")
                    str(sv, sp.child(sk), sk, q.source.value_text);
                else if (sk == "unit")
                    str(sv, sp.child(sk), sk, q.source.unit_text);
                else if (sk == "condition")
                    str(sv, sp.child(sk), sk, q.source.condition_text);
                else if (sk == "code")
                    str(sv, sp.child(sk), sk, q.source.code);
                else if (sk == "codeSystem")
                    str(sv, sp.child(sk), sk, q.source.code_system);
                else
                    unknown(sk, sp);
            }
        } else if (k == "derivation") {
            const Path dp = p.child(k);
            if (!object(v, dp, k)) continue;
            Derivation& d = q.derivation.emplace();
            if (!v.contains("factor")) missing(dp, "factor");
            for (const auto& [dk, dv] : v.items()) {
                if (dk == "factor") {
                    std::optional<double> f;
                    number(dv, dp.child(dk), dk, f);
                    if (f) d.factor = *f;
                } else if (dk == "steps") {
                    str(dv, dp.child(dk), dk, d.steps);
                } else if (dk == "temperatureCel") {
                    number(dv, dp.child(dk), dk, d.temperature_cel);
                } else if (dk == "pressureKpa") {
                    number(dv, dp.child(dk), dk, d.pressure_kpa);
                } else if (dk == "waterVapourEquation") {
                    str(dv, dp.child(dk), dk, d.water_vapour_equation);
                } else {
                    unknown(dk, dp);
                }
            }
        } else if (k == "reference") {
            if (!array(v, p.child(k), k)) continue;
            int i = 0;
            for (const Json& rj : v) {
                const Path rp = p.item("reference", i++);
                if (object(rj, rp, k)) reference(rj, q.reference.emplace_back(), rp);
            }
        } else if (k == "trials") {
            if (!array(v, p.child(k), k)) continue;
            for (const Json& t : v) integer(t, p.child(k), k, q.trials.emplace_back());
        } else if (k == "derivedFrom") {
            if (!array(v, p.child(k), k)) continue;
            for (const Json& d : v) str(d, p.child(k), k, q.derived_from.emplace_back());
        } else if (k == "comments") {
            if (!array(v, p.child(k), k)) continue;
            for (const Json& c : v) str(c, p.child(k), k, q.comments.emplace_back());
        } else {
            unknown(k, p);
        }
    }
    if (!has_source) {
        q.source.value_text = std::move(value_text);
        if (unit_text != nullptr) q.source.unit_text = *unit_text;
        if (condition_text != nullptr) q.source.condition_text = *condition_text;
    }
}

void JsonReader::reference(const Json& j, ReferenceValues& r, const Path& p) {
    if (!j.contains("equationSet")) missing(p, "equationSet");
    for (const auto& [k, v] : j.items()) {
        if (k == "equationSet")
            str(v, p.child(k), k, r.equation_set);
        else if (k == "equationVersion")
            str(v, p.child(k), k, r.equation_version);
        else if (k == "origin")
            enumerated(v, p.child(k), k, r.origin, parse_origin, "an origin (device, gateway)");
        else if (k == "unit")
            str(v, p.child(k), k, r.unit);
        else if (k == "predicted")
            number(v, p.child(k), k, r.predicted);
        else if (k == "lln")
            number(v, p.child(k), k, r.lln);
        else if (k == "uln")
            number(v, p.child(k), k, r.uln);
        else if (k == "z")
            number(v, p.child(k), k, r.z_score);
        else if (k == "percentPredicted")
            number(v, p.child(k), k, r.percent_predicted);
        else
            unknown(k, p);
    }
}

void JsonReader::values(const Json& j, std::vector<Quantity>& out, const Path& p) {
    if (!array(j, p.child("values"), "values")) return;
    for (const Json& q : j)
        if (object(q, p.child("values"), "values"))
            quantity(q, out.emplace_back(), &p, "values", true);
}

void JsonReader::test(const Json& j, Test& t, const Path& p) {
    if (!j.contains("type")) missing(p, "type");
    for (const auto& [k, v] : j.items()) {
        if (k == "type") {
            enumerated(v, p.child(k), k, t.type, parse_test_type,
                       "a test type (spirometry, lung-volumes, diffusing-capacity)");
        } else if (k == "method") {
            str(v, p.child(k), k, t.method);
        } else if (k == "time") {
            timestamp(v, p.child(k), k, t.time);
        } else if (k == "values") {
            values(v, t.values, p);
        } else if (k == "trials") {
            if (!array(v, p.child(k), k)) continue;
            int i = 0;
            for (const Json& tj : v) {
                const Path tp = p.item("trials", i++);
                if (!object(tj, tp, k)) continue;
                Trial& tr = t.trials.emplace_back();
                if (!tj.contains("number")) missing(tp, "number");
                for (const auto& [tk, tv] : tj.items()) {
                    if (tk == "number") {
                        integer(tv, tp.child(tk), tk, tr.number);
                    } else if (tk == "time") {
                        timestamp(tv, tp.child(tk), tk, tr.time);
                    } else if (tk == "operatorAccepted") {
                        if (tv.is_boolean())
                            tr.operator_accepted = tv.get<bool>();
                        else
                            wrong_type(tv, tp.child(tk), tk, "a boolean");
                    } else if (tk == "tracer") {
                        str(tv, tp.child(tk), tk, tr.tracer);
                    } else if (tk == "values") {
                        values(tv, tr.values, tp);
                    } else {
                        unknown(tk, tp);
                    }
                }
            }
        } else if (k == "comments") {
            if (!array(v, p.child(k), k)) continue;
            for (const Json& c : v) str(c, p.child(k), k, t.comments.emplace_back());
        } else {
            unknown(k, p);
        }
    }
}

void JsonReader::finding(const Json& j, Finding& f, const Path& p) {
    if (!j.contains("rule")) missing(p, "rule");
    if (!j.contains("severity")) missing(p, "severity");
    for (const auto& [k, v] : j.items()) {
        if (k == "rule")
            str(v, p.child(k), k, f.rule);
        else if (k == "severity")
            enumerated(v, p.child(k), k, f.severity, parse_severity,
                       "a severity (info, warning, error)");
        else if (k == "path")
            str(v, p.child(k), k, f.path);
        else if (k == "message")
            str(v, p.child(k), k, f.message);
        else if (k == "values")
            pairs(v, p, "values", f.values);
        else
            unknown(k, p);
    }
}

void JsonReader::extension(const Json& j, Extension& e, const Path& p) {
    if (!j.contains("namespace")) missing(p, "namespace");
    if (!j.contains("name")) missing(p, "name");
    for (const auto& [k, v] : j.items()) {
        if (k == "namespace") {
            str(v, p.child(k), k, e.namespace_uri);
            if (e.namespace_uri == kNamespace)
                invalid(p.child(k), k, e.namespace_uri, "another namespace than the result's");
        } else if (k == "name") {
            str(v, p.child(k), k, e.name);
        } else if (k == "properties") {
            pairs(v, p, "properties", e.properties);
        } else {
            unknown(k, p);
        }
    }
}

// ---- writer: pretty, two-space indent, members in the schema's order ----

void escape_json(std::string& out, std::string_view s) {
    static constexpr char kHex[] = "0123456789abcdef";
    out += '"';
    for (char ch : s) {
        const auto u = static_cast<unsigned char>(ch);
        switch (ch) {
            case '"':
                out += "\\\"";
                break;
            case '\\':
                out += "\\\\";
                break;
            case '\n':
                out += "\\n";
                break;
            case '\r':
                out += "\\r";
                break;
            case '\t':
                out += "\\t";
                break;
            default:
                if (u < 0x20) {
                    out += "\\u00";
                    out += kHex[u >> 4];
                    out += kHex[u & 0xF];
                } else {
                    out += ch;
                }
        }
    }
    out += '"';
}

class JsonWriter {
public:
    explicit JsonWriter(std::string& out) : out_(out) {}
    void write(const NeutralResult& r);

private:
    std::string& out_;
    int depth_ = 0;
    bool first_ = true;

    void newline() {
        out_ += '\n';
        out_.append(static_cast<std::size_t>(depth_) * 2, ' ');
    }
    void next() {
        if (!first_) out_ += ',';
        newline();
        first_ = false;
    }
    void open(char c) {
        out_ += c;
        ++depth_;
        first_ = true;
    }
    void close(char c) {
        --depth_;
        if (!first_) newline();
        out_ += c;
        first_ = false;
    }
    void key(std::string_view k) {
        next();
        escape_json(out_, k);
        out_ += ": ";
    }
    void member(std::string_view k, std::string_view v) {
        key(k);
        escape_json(out_, v);
    }
    void member_if(std::string_view k, std::string_view v) {
        if (!v.empty()) member(k, v);
    }
    void member_num(std::string_view k, double v) {
        key(k);
        detail::append_double(out_, v);
    }
    void member_num_if(std::string_view k, const std::optional<double>& v) {
        if (v) member_num(k, *v);
    }
    void element() { next(); }
    void pairs(std::string_view k, std::string_view name_key,
               const std::vector<std::pair<std::string, std::string>>& v) {
        if (v.empty()) return;
        key(k);
        open('[');
        for (const auto& [name, value] : v) {
            element();
            open('{');
            member(name_key, name);
            member("value", value);
            close('}');
        }
        close(']');
    }
    void quantity(const Quantity& q);
};

void JsonWriter::quantity(const Quantity& q) {
    open('{');
    member("kind", q.kind);
    member_num_if("value", q.value);
    member_if("unit", q.unit);
    member_if("condition", to_string(q.condition));
    if (q.origin != Origin::device) member("origin", to_string(q.origin));
    if (q.absent_reason) member("absent", *q.absent_reason);
    if (!(q.source == detail::implied_source(q))) {
        key("source");
        open('{');
        member_if("value", q.source.value_text);
        member_if("unit", q.source.unit_text);
        member_if("condition", q.source.condition_text);
        member_if("code", q.source.code);
        member_if("codeSystem", q.source.code_system);
        close('}');
    }
    if (q.derivation) {
        const Derivation& d = *q.derivation;
        key("derivation");
        open('{');
        member_num("factor", d.factor);
        member_if("steps", d.steps);
        member_num_if("temperatureCel", d.temperature_cel);
        member_num_if("pressureKpa", d.pressure_kpa);
        member_if("waterVapourEquation", d.water_vapour_equation);
        close('}');
    }
    if (!q.reference.empty()) {
        key("reference");
        open('[');
        for (const ReferenceValues& r : q.reference) {
            element();
            open('{');
            member("equationSet", r.equation_set);
            member_if("equationVersion", r.equation_version);
            member("origin", to_string(r.origin));
            member_if("unit", r.unit);
            member_num_if("predicted", r.predicted);
            member_num_if("lln", r.lln);
            member_num_if("uln", r.uln);
            member_num_if("z", r.z_score);
            member_num_if("percentPredicted", r.percent_predicted);
            close('}');
        }
        close(']');
    }
    if (!q.trials.empty()) {
        key("trials");
        out_ += '[';
        for (std::size_t i = 0; i < q.trials.size(); ++i) {
            if (i > 0) out_ += ", ";
            detail::append_int(out_, q.trials[i]);
        }
        out_ += ']';
    }
    if (!q.derived_from.empty()) {
        key("derivedFrom");
        out_ += '[';
        for (std::size_t i = 0; i < q.derived_from.size(); ++i) {
            if (i > 0) out_ += ", ";
            escape_json(out_, q.derived_from[i]);
        }
        out_ += ']';
    }
    if (!q.comments.empty()) {
        key("comments");
        open('[');
        for (const std::string& c : q.comments) {
            element();
            escape_json(out_, c);
        }
        close(']');
    }
    close('}');
}

void JsonWriter::write(const NeutralResult& r) {
    open('{');
    member("schemaVersion", r.schema_version.empty() ? "1.0" : r.schema_version);
    member_if("id", r.id);
    key("revision");
    detail::append_int(out_, r.revision);
    member("status", to_string(r.status));
    member_if("replaces", r.replaces);
    member_if("deviceSessionNumber", r.device_session_number);
    if (r.session_time) member("sessionTime", to_iso(*r.session_time));

    const Subject& s = r.subject;
    if (!(s == Subject{})) {
        key("subject");
        open('{');
        if (!s.identifiers.empty()) {
            key("identifiers");
            open('[');
            for (const Identifier& id : s.identifiers) {
                element();
                open('{');
                member_if("system", id.system);
                member("value", id.value);
                member_if("type", id.type);
                close('}');
            }
            close(']');
        }
        if (!s.family_name.empty() || !s.given_name.empty()) {
            key("name");
            open('{');
            member_if("family", s.family_name);
            member_if("given", s.given_name);
            close('}');
        }
        if (s.sex_at_birth != SexAtBirth::unknown) member("sexAtBirth", to_string(s.sex_at_birth));
        member_if("administrativeGender", s.administrative_gender);
        if (s.birth_date) member("birthDate", to_iso(*s.birth_date));
        if (s.height) {
            key("height");
            quantity(*s.height);
        }
        if (s.weight) {
            key("weight");
            quantity(*s.weight);
        }
        member_if("ethnicity", s.ethnicity);
        close('}');
    }
    const Order& o = r.order;
    if (!(o == Order{})) {
        key("order");
        open('{');
        member_if("placer", o.placer_number);
        member_if("filler", o.filler_number);
        member_if("accession", o.accession_number);
        close('}');
    }
    const Device& d = r.device;
    if (!(d == Device{})) {
        key("device");
        open('{');
        member_if("id", d.id);
        member_if("manufacturer", d.manufacturer);
        member_if("model", d.model);
        member_if("serial", d.serial_number);
        member_if("software", d.software_version);
        if (d.last_calibration) member("lastCalibration", to_iso(*d.last_calibration));
        member_if("calibrationNote", d.calibration_note);
        close('}');
    }
    const Environment& e = r.environment;
    if (e.temperature || e.pressure || e.humidity) {
        key("environment");
        open('{');
        if (e.temperature) {
            key("temperature");
            quantity(*e.temperature);
        }
        if (e.pressure) {
            key("pressure");
            quantity(*e.pressure);
        }
        if (e.humidity) {
            key("humidity");
            quantity(*e.humidity);
        }
        close('}');
    }
    if (!r.tests.empty()) {
        key("tests");
        open('[');
        for (const Test& t : r.tests) {
            element();
            open('{');
            member("type", to_string(t.type));
            member_if("method", t.method);
            if (t.time) member("time", to_iso(*t.time));
            if (!t.values.empty()) {
                key("values");
                open('[');
                for (const Quantity& q : t.values) {
                    element();
                    quantity(q);
                }
                close(']');
            }
            if (!t.trials.empty()) {
                key("trials");
                open('[');
                for (const Trial& tr : t.trials) {
                    element();
                    open('{');
                    key("number");
                    detail::append_int(out_, tr.number);
                    if (tr.time) member("time", to_iso(*tr.time));
                    if (tr.operator_accepted) {
                        key("operatorAccepted");
                        out_ += *tr.operator_accepted ? "true" : "false";
                    }
                    member_if("tracer", tr.tracer);
                    if (!tr.values.empty()) {
                        key("values");
                        open('[');
                        for (const Quantity& q : tr.values) {
                            element();
                            quantity(q);
                        }
                        close(']');
                    }
                    close('}');
                }
                close(']');
            }
            if (!t.comments.empty()) {
                key("comments");
                open('[');
                for (const std::string& c : t.comments) {
                    element();
                    escape_json(out_, c);
                }
                close(']');
            }
            close('}');
        }
        close(']');
    }
    if (!r.findings.empty()) {
        key("findings");
        open('[');
        for (const Finding& f : r.findings) {
            element();
            open('{');
            member("rule", f.rule);
            member("severity", to_string(f.severity));
            member_if("path", f.path);
            member_if("message", f.message);
            pairs("values", "name", f.values);
            close('}');
        }
        close(']');
    }
    if (!r.extensions.empty()) {
        key("extensions");
        open('[');
        for (const Extension& x : r.extensions) {
            element();
            open('{');
            member("namespace", x.namespace_uri);
            member("name", x.name);
            pairs("properties", "name", x.properties);
            close('}');
        }
        close(']');
    }
    close('}');
    out_ += '\n';
}

}  // namespace

ReadOutcome read_json(std::string_view bytes, std::string_view source_name) {
    ReadOutcome outcome;
    Findings findings(bytes, source_name, outcome.findings);
    LexemeDom dom;
    bool parsed = false;
    try {
        parsed = Json::sax_parse(bytes.begin(), bytes.end(), &dom);
    } catch (const std::exception& ex) {  // the boundary: nothing past here throws
        dom.error_message = ex.what();
    }
    if (!parsed) {
        // nlohmann reports the 1-based position of the last character read.
        const std::size_t offset = dom.error_position > 0 ? dom.error_position - 1 : 0;
        findings.add_at("json.malformed", "", "not well-formed JSON: " + dom.error_message,
                        detail::line_column(bytes, offset), {{"offset", std::to_string(offset)}});
        return outcome;
    }
    JsonReader reader(findings);
    outcome.result = reader.read(dom.root);
    return outcome;
}

ReadOutcome read_any(std::string_view bytes, std::string_view source_name) {
    std::size_t i = 0;
    if (bytes.substr(0, 3) == "\xEF\xBB\xBF") i = 3;  // UTF-8 byte order mark
    while (i < bytes.size() &&
           (bytes[i] == ' ' || bytes[i] == '\t' || bytes[i] == '\n' || bytes[i] == '\r'))
        ++i;
    if (i < bytes.size() && bytes[i] == '<') return read_xml(bytes, source_name);
    if (i < bytes.size() && (bytes[i] == '{' || bytes[i] == '['))
        return read_json(bytes, source_name);
    ReadOutcome outcome;
    Findings findings(bytes, source_name, outcome.findings);
    findings.add("read.unreadable", detail::kRoot,
                 i == bytes.size() ? "the input is empty"
                                   : "the input is neither XML (starts with '<') nor JSON "
                                     "(starts with '{')",
                 i == bytes.size() ? -1 : static_cast<std::ptrdiff_t>(i));
    return outcome;
}

void write_json(const NeutralResult& result, std::string& out) {
    JsonWriter(out).write(result);
}

}  // namespace pftgw::neutral
