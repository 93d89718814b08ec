// Neutral XML: reader (pugixml DOM, parse_default, walked once) and writer
// (appends to a string). Layout: DEVELOPERS.md "The open schema";
// schemas/pftgw-result-1.0.xsd is the authority.
#include <pugixml.hpp>

#include <cstring>

#include "adapters/neutral/neutral_common.hpp"
#include "adapters/neutral/neutral_io.hpp"

namespace pftgw::neutral {
namespace {

using detail::Findings;
using detail::Path;

// Documents the gateway writes spell every enum exactly as to_string() does;
// trying that spelling first skips the case-insensitive parse, which lowers
// each character through the C library and showed in profiles (one condition
// and often one origin per value). Anything else goes to the model's parse.
std::optional<GasCondition> parse_condition_exact_first(std::string_view text) {
    for (GasCondition c : {GasCondition::btps, GasCondition::stpd, GasCondition::atps,
                           GasCondition::atpd, GasCondition::none})
        if (text == to_string(c)) return c;
    return parse_gas_condition(text);
}

std::optional<Origin> parse_origin_exact_first(std::string_view text) {
    for (Origin o : {Origin::device, Origin::gateway})
        if (text == to_string(o)) return o;
    return parse_origin(text);
}

constexpr std::string_view kXsiPrefix = "xsi:";

class XmlReader {
public:
    XmlReader(Findings& findings) : f_(findings) {}

    // Fills `r` in place (a NeutralResult is large; moving it out of an
    // optional twice showed in profiles); false when it is not a result.
    bool read(const pugi::xml_document& doc, NeutralResult& r);

private:
    Findings& f_;
    std::string prefix_;  // "p:" when the document binds the namespace to a prefix

    std::ptrdiff_t at(pugi::xml_node n) const { return n.offset_debug(); }

    // The local name of an element in the result namespace, or empty.
    std::string_view local(pugi::xml_node n) const {
        std::string_view name = n.name();
        if (prefix_.empty()) return name.find(':') == std::string_view::npos ? name : "";
        if (name.size() > prefix_.size() && name.compare(0, prefix_.size(), prefix_) == 0)
            return name.substr(prefix_.size());
        return {};
    }

    static bool is_namespace_attribute(std::string_view a) {
        return a == "xmlns" || a.rfind("xmlns:", 0) == 0 || a.rfind(kXsiPrefix, 0) == 0;
    }

    void unknown_attribute(pugi::xml_node n, pugi::xml_attribute a, const Path& p) {
        if (is_namespace_attribute(a.name())) return;
        f_.add("schema.unknown-attribute", p,
               "unknown attribute '" + std::string(a.name()) + "' on <" + n.name() + ">", at(n),
               {{"attribute", a.name()}}, f_.unknown_severity);
    }
    void unknown_element(pugi::xml_node n, const Path& p) {
        f_.add("schema.unknown-element", p,
               "unknown element <" + std::string(n.name()) + "> in <" + n.parent().name() + ">",
               at(n), {{"element", n.name()}}, f_.unknown_severity);
    }
    void missing(pugi::xml_node n, const Path& p, std::string_view what) {
        f_.add("schema.missing-required", p,
               "<" + std::string(n.name()) + "> needs " + std::string(what), at(n),
               {{"missing", std::string(what)}});
    }
    void invalid(pugi::xml_node n, const Path& p, std::string_view text, std::string expected) {
        f_.add("schema.invalid-value", p,
               "'" + std::string(text) + "' is not " + expected + " (in <" + n.name() + ">)", at(n),
               {{"text", std::string(text)}});
    }

    void number(pugi::xml_node n, const Path& p, std::string_view text,
                std::optional<double>& out) {
        out = detail::parse_double(text);
        if (!out)
            f_.add("value.not-numeric", p,
                   "'" + std::string(text) + "' is not a number (in <" + n.name() + ">)", at(n),
                   {{"text", std::string(text)}});
    }
    void integer(pugi::xml_node n, const Path& p, std::string_view text, int& out) {
        if (auto v = detail::parse_int(text)) {
            out = *v;
        } else {
            f_.add("value.not-numeric", p,
                   "'" + std::string(text) + "' is not an integer (in <" + n.name() + ">)", at(n),
                   {{"text", std::string(text)}});
        }
    }
    void timestamp(pugi::xml_node n, const Path& p, std::string_view text,
                   std::optional<Timestamp>& out) {
        auto t = parse_iso_timestamp(text);
        if (t) {
            out = t.value();
        } else {
            f_.add(t.error().code, p, t.error().message, at(n), {{"text", std::string(text)}});
        }
    }
    template <class E, class Parse>
    void enumerated(pugi::xml_node n, const Path& p, std::string_view text, E& out, Parse parse,
                    const char* expected) {
        if (auto v = parse(text)) {
            out = *v;
        } else {
            invalid(n, p, text, expected);
        }
    }
    // A Quantity is large and moving it is not cheap: a test's or trial's
    // values are reserved once for its number of child elements (an upper
    // bound: trials and comments count too), not regrown while reading.
    static std::size_t count_elements(pugi::xml_node n) {
        std::size_t count = 0;
        for (pugi::xml_node c = n.first_child(); c; c = c.next_sibling())
            if (c.type() == pugi::node_element) ++count;
        return count;
    }
    template <class Fn>
    void elements(pugi::xml_node n, Fn&& fn) {
        for (pugi::xml_node c = n.first_child(); c; c = c.next_sibling())
            if (c.type() == pugi::node_element) fn(c, local(c));
    }

    void read_root_attributes(pugi::xml_node n, NeutralResult& r);
    void read_subject(pugi::xml_node n, Subject& s, const Path& p);
    void read_quantity(pugi::xml_node n, Quantity& q, const Path* parent, std::string_view field,
                       bool keyed);
    void read_reference(pugi::xml_node n, ReferenceValues& r, const Path& p);
    void read_test(pugi::xml_node n, Test& t, const Path& p);
    void read_trial(pugi::xml_node n, Trial& t, const Path& p);
    void read_values(pugi::xml_node n, std::vector<Quantity>& out, const Path& p);
    void read_findings(pugi::xml_node n, std::vector<Finding>& out, const Path& p);
    void read_extensions(pugi::xml_node n, std::vector<Extension>& out, const Path& p);
    std::string_view namespace_of(pugi::xml_node n) const;
};

std::string_view XmlReader::namespace_of(pugi::xml_node n) const {
    std::string_view name = n.name();
    const auto colon = name.find(':');
    std::string attr = colon == std::string_view::npos
                           ? std::string("xmlns")
                           : "xmlns:" + std::string(name.substr(0, colon));
    for (pugi::xml_node a = n; a; a = a.parent())
        if (pugi::xml_attribute x = a.attribute(attr.c_str())) return x.value();
    return {};
}

bool XmlReader::read(const pugi::xml_document& doc, NeutralResult& r) {
    const pugi::xml_node root = doc.document_element();
    if (!root) {
        f_.add("xml.malformed", detail::kRoot, "no root element", 0);
        return false;
    }
    std::string_view name = root.name();
    const auto colon = name.find(':');
    if (colon != std::string_view::npos) prefix_ = std::string(name.substr(0, colon + 1));
    const std::string_view root_local =
        colon == std::string_view::npos ? name : name.substr(colon + 1);
    const std::string_view ns = namespace_of(root);
    if (root_local != "result" || ns != kNamespace) {
        f_.add("schema.wrong-root", detail::kRoot,
               "root element is <" + std::string(name) + "> in namespace '" + std::string(ns) +
                   "'; expected <result> in namespace '" + std::string(kNamespace) + "'",
               at(root), {{"found", std::string(name)}, {"namespace", std::string(ns)}});
        return false;
    }

    const pugi::xml_attribute version = root.attribute("schemaVersion");
    if (!version) {
        missing(root, detail::kRoot.child("schemaVersion"), "a schemaVersion attribute");
    } else {
        const auto v = detail::parse_version(version.value());
        if (!v || v->major != kSchemaMajor) {
            f_.add("schema.version-unsupported", detail::kRoot.child("schemaVersion"),
                   "schema version '" + std::string(version.value()) +
                       "' is not supported: this reader reads 1.x (1.0 and later minor versions)",
                   at(root), {{"schemaVersion", version.value()}});
            return false;
        }
        if (v->minor > kSchemaMinor) f_.unknown_severity = Severity::warning;
        r.schema_version = version.value();
    }
    read_root_attributes(root, r);

    int tests = 0;
    elements(root, [&](pugi::xml_node c, std::string_view l) {
        if (l == "deviceSessionNumber") {
            r.device_session_number = c.child_value();
        } else if (l == "sessionTime") {
            detail::Path p = detail::kRoot.child("sessionTime");
            timestamp(c, p, c.child_value(), r.session_time);
        } else if (l == "subject") {
            read_subject(c, r.subject, detail::kRoot.child("subject"));
        } else if (l == "order") {
            const Path p = detail::kRoot.child("order");
            for (pugi::xml_attribute a = c.first_attribute(); a; a = a.next_attribute()) {
                std::string_view an = a.name();
                if (an == "placer")
                    r.order.placer_number = a.value();
                else if (an == "filler")
                    r.order.filler_number = a.value();
                else if (an == "accession")
                    r.order.accession_number = a.value();
                else
                    unknown_attribute(c, a, p);
            }
            elements(c, [&](pugi::xml_node x, std::string_view) { unknown_element(x, p); });
        } else if (l == "device") {
            const Path p = detail::kRoot.child("device");
            Device& d = r.device;
            for (pugi::xml_attribute a = c.first_attribute(); a; a = a.next_attribute()) {
                std::string_view an = a.name();
                if (an == "id")
                    d.id = a.value();
                else if (an == "manufacturer")
                    d.manufacturer = a.value();
                else if (an == "model")
                    d.model = a.value();
                else if (an == "serial")
                    d.serial_number = a.value();
                else if (an == "software")
                    d.software_version = a.value();
                else if (an == "lastCalibration")
                    timestamp(c, p.child("lastCalibration"), a.value(), d.last_calibration);
                else if (an == "calibrationNote")
                    d.calibration_note = a.value();
                else
                    unknown_attribute(c, a, p);
            }
            elements(c, [&](pugi::xml_node x, std::string_view) { unknown_element(x, p); });
        } else if (l == "environment") {
            const Path p = detail::kRoot.child("environment");
            for (pugi::xml_attribute a = c.first_attribute(); a; a = a.next_attribute())
                unknown_attribute(c, a, p);
            elements(c, [&](pugi::xml_node x, std::string_view xl) {
                std::optional<Quantity>* slot = xl == "temperature" ? &r.environment.temperature
                                                : xl == "pressure"  ? &r.environment.pressure
                                                : xl == "humidity"  ? &r.environment.humidity
                                                                    : nullptr;
                if (slot == nullptr) return unknown_element(x, p);
                read_quantity(x, slot->emplace(), &p, xl, false);
            });
        } else if (l == "test") {
            Test& t = r.tests.emplace_back();
            read_test(c, t, detail::kRoot.item("tests", tests++));
        } else if (l == "findings") {
            read_findings(c, r.findings, detail::kRoot.child("findings"));
        } else if (l == "extensions") {
            read_extensions(c, r.extensions, detail::kRoot.child("extensions"));
        } else {
            unknown_element(c, detail::kRoot);
        }
    });
    return true;
}

void XmlReader::read_root_attributes(pugi::xml_node n, NeutralResult& r) {
    for (pugi::xml_attribute a = n.first_attribute(); a; a = a.next_attribute()) {
        std::string_view an = a.name();
        if (an == "schemaVersion") continue;
        if (an == "id") {
            r.id = a.value();
        } else if (an == "revision") {
            const Path p = detail::kRoot.child("revision");
            integer(n, p, a.value(), r.revision);
            if (r.revision < 1) {
                invalid(n, p, a.value(), "a revision (1, 2, ...)");
                r.revision = 1;
            }
        } else if (an == "status") {
            enumerated(n, detail::kRoot.child("status"), a.value(), r.status, parse_result_status,
                       "a status (final, preliminary, corrected)");
        } else if (an == "replaces") {
            r.replaces = a.value();
        } else {
            unknown_attribute(n, a, detail::kRoot);
        }
    }
}

void XmlReader::read_subject(pugi::xml_node n, Subject& s, const Path& p) {
    for (pugi::xml_attribute a = n.first_attribute(); a; a = a.next_attribute())
        unknown_attribute(n, a, p);
    int ids = 0;
    elements(n, [&](pugi::xml_node c, std::string_view l) {
        if (l == "identifier") {
            const Path ip = p.item("identifiers", ids++);
            Identifier& id = s.identifiers.emplace_back();
            bool has_value = false;
            for (pugi::xml_attribute a = c.first_attribute(); a; a = a.next_attribute()) {
                std::string_view an = a.name();
                if (an == "system")
                    id.system = a.value();
                else if (an == "value")
                    id.value = a.value(), has_value = true;
                else if (an == "type")
                    id.type = a.value();
                else
                    unknown_attribute(c, a, ip);
            }
            if (!has_value) missing(c, ip.child("value"), "a value attribute");
        } else if (l == "name") {
            const Path np = p.child("name");
            for (pugi::xml_attribute a = c.first_attribute(); a; a = a.next_attribute()) {
                std::string_view an = a.name();
                if (an == "family")
                    s.family_name = a.value();
                else if (an == "given")
                    s.given_name = a.value();
                else
                    unknown_attribute(c, a, np);
            }
        } else if (l == "sexAtBirth") {
            enumerated(c, p.child("sexAtBirth"), c.child_value(), s.sex_at_birth,
                       parse_sex_at_birth, "a sex at birth (male, female, unknown)");
        } else if (l == "administrativeGender") {
            s.administrative_gender = c.child_value();
        } else if (l == "birthDate") {
            auto d = parse_iso_date(c.child_value());
            if (d)
                s.birth_date = d.value();
            else
                f_.add(d.error().code, p.child("birthDate"), d.error().message, at(c),
                       {{"text", c.child_value()}});
        } else if (l == "height") {
            read_quantity(c, s.height.emplace(), &p, "height", false);
        } else if (l == "weight") {
            read_quantity(c, s.weight.emplace(), &p, "weight", false);
        } else if (l == "ethnicity") {
            s.ethnicity = c.child_value();
        } else {
            unknown_element(c, p);
        }
    });
}

void XmlReader::read_quantity(pugi::xml_node n, Quantity& q, const Path* parent,
                              std::string_view field, bool keyed) {
    const char* value_text = nullptr;
    const char* unit_text = nullptr;
    const char* condition_text = nullptr;
    // The kind names the path, so find it first.
    if (pugi::xml_attribute k = n.attribute("kind")) q.kind = k.value();
    const Path p = keyed ? parent->keyed(field, q.kind.empty() ? std::string_view("?")
                                                               : std::string_view(q.kind))
                         : parent->child(field);
    if (q.kind.empty()) missing(n, p.child("kind"), "a kind attribute");
    for (pugi::xml_attribute a = n.first_attribute(); a; a = a.next_attribute()) {
        std::string_view an = a.name();
        if (an == "kind") {
            continue;
        } else if (an == "value") {
            value_text = a.value();
            number(n, p.child("value"), value_text, q.value);
        } else if (an == "unit") {
            unit_text = a.value();
            q.unit = unit_text;
        } else if (an == "condition") {
            condition_text = a.value();
            enumerated(n, p.child("condition"), condition_text, q.condition,
                       parse_condition_exact_first,
                       "a gas condition (BTPS, STPD, ATPS, ATPD, none)");
        } else if (an == "origin") {
            enumerated(n, p.child("origin"), a.value(), q.origin, parse_origin_exact_first,
                       "an origin (device, gateway)");
        } else if (an == "absent") {
            q.absent_reason = a.value();
        } else {
            unknown_attribute(n, a, p);
        }
    }
    bool has_source = false;
    int refs = 0;
    elements(n, [&](pugi::xml_node c, std::string_view l) {
        if (l == "source") {
            has_source = true;
            const Path sp = p.child("source");
            for (pugi::xml_attribute a = c.first_attribute(); a; a = a.next_attribute()) {
                std::string_view an = a.name();
                if (an == "value")
                    q.source.value_text = a.value();
                else if (an == "unit")
                    q.source.unit_text = a.value();
                else if (an == "condition")
                    q.source.condition_text = a.value();
                else if (an == "code")
                    q.source.code = a.value();
                else if (an == "codeSystem")
                    q.source.code_system = a.value();
                else
                    unknown_attribute(c, a, sp);
            }
        } else if (l == "derivation") {
            const Path dp = p.child("derivation");
            Derivation& d = q.derivation.emplace();
            bool has_factor = false;
            for (pugi::xml_attribute a = c.first_attribute(); a; a = a.next_attribute()) {
                std::string_view an = a.name();
                if (an == "factor") {
                    std::optional<double> v;
                    number(c, dp.child("factor"), a.value(), v);
                    if (v) d.factor = *v;
                    has_factor = true;
                } else if (an == "steps") {
                    d.steps = a.value();
                } else if (an == "temperatureCel") {
                    number(c, dp.child("temperatureCel"), a.value(), d.temperature_cel);
                } else if (an == "pressureKpa") {
                    number(c, dp.child("pressureKpa"), a.value(), d.pressure_kpa);
                } else if (an == "waterVapourEquation") {
                    d.water_vapour_equation = a.value();
                } else {
                    unknown_attribute(c, a, dp);
                }
            }
            if (!has_factor) missing(c, dp.child("factor"), "a factor attribute");
        } else if (l == "reference") {
            read_reference(c, q.reference.emplace_back(), p.item("reference", refs++));
        } else if (l == "trialRef") {
            pugi::xml_attribute num = c.attribute("number");
            if (!num) return missing(c, p.child("trials"), "a number attribute");
            int t = 0;
            integer(c, p.child("trials"), num.value(), t);
            q.trials.push_back(t);
            for (pugi::xml_attribute a = c.first_attribute(); a; a = a.next_attribute())
                if (std::strcmp(a.name(), "number") != 0) unknown_attribute(c, a, p);
        } else if (l == "derivedFrom") {
            pugi::xml_attribute kind = c.attribute("kind");
            if (!kind) return missing(c, p.child("derivedFrom"), "a kind attribute");
            q.derived_from.emplace_back(kind.value());
            for (pugi::xml_attribute a = c.first_attribute(); a; a = a.next_attribute())
                if (std::strcmp(a.name(), "kind") != 0) unknown_attribute(c, a, p);
        } else if (l == "comment") {
            q.comments.emplace_back(c.child_value());
        } else {
            unknown_element(c, p);
        }
    });
    if (!has_source) {
        // What the device sent is never lost: keep the attribute texts as given.
        if (value_text != nullptr) q.source.value_text = value_text;
        if (unit_text != nullptr) q.source.unit_text = unit_text;
        if (condition_text != nullptr) q.source.condition_text = condition_text;
    }
}

void XmlReader::read_reference(pugi::xml_node n, ReferenceValues& r, const Path& p) {
    bool has_set = false;
    for (pugi::xml_attribute a = n.first_attribute(); a; a = a.next_attribute()) {
        std::string_view an = a.name();
        if (an == "equationSet")
            r.equation_set = a.value(), has_set = true;
        else if (an == "equationVersion")
            r.equation_version = a.value();
        else if (an == "origin")
            enumerated(n, p.child("origin"), a.value(), r.origin, parse_origin_exact_first,
                       "an origin (device, gateway)");
        else if (an == "unit")
            r.unit = a.value();
        else if (an == "predicted")
            number(n, p.child("predicted"), a.value(), r.predicted);
        else if (an == "lln")
            number(n, p.child("lln"), a.value(), r.lln);
        else if (an == "uln")
            number(n, p.child("uln"), a.value(), r.uln);
        else if (an == "z")
            number(n, p.child("z"), a.value(), r.z_score);
        else if (an == "percentPredicted")
            number(n, p.child("percentPredicted"), a.value(), r.percent_predicted);
        else
            unknown_attribute(n, a, p);
    }
    if (!has_set) missing(n, p.child("equationSet"), "an equationSet attribute");
    elements(n, [&](pugi::xml_node c, std::string_view) { unknown_element(c, p); });
}

void XmlReader::read_values(pugi::xml_node c, std::vector<Quantity>& out, const Path& p) {
    read_quantity(c, out.emplace_back(), &p, "values", true);
}

void XmlReader::read_test(pugi::xml_node n, Test& t, const Path& p) {
    bool has_type = false;
    for (pugi::xml_attribute a = n.first_attribute(); a; a = a.next_attribute()) {
        std::string_view an = a.name();
        if (an == "type") {
            has_type = true;
            enumerated(n, p.child("type"), a.value(), t.type, parse_test_type,
                       "a test type (spirometry, lung-volumes, diffusing-capacity)");
        } else if (an == "method") {
            t.method = a.value();
        } else if (an == "time") {
            timestamp(n, p.child("time"), a.value(), t.time);
        } else {
            unknown_attribute(n, a, p);
        }
    }
    if (!has_type) missing(n, p.child("type"), "a type attribute");
    int trials = 0;
    t.values.reserve(count_elements(n));
    elements(n, [&](pugi::xml_node c, std::string_view l) {
        if (l == "value")
            read_values(c, t.values, p);
        else if (l == "trial")
            read_trial(c, t.trials.emplace_back(), p.item("trials", trials++));
        else if (l == "comment")
            t.comments.emplace_back(c.child_value());
        else
            unknown_element(c, p);
    });
}

void XmlReader::read_trial(pugi::xml_node n, Trial& t, const Path& p) {
    bool has_number = false;
    for (pugi::xml_attribute a = n.first_attribute(); a; a = a.next_attribute()) {
        std::string_view an = a.name();
        if (an == "number") {
            has_number = true;
            integer(n, p.child("number"), a.value(), t.number);
        } else if (an == "time") {
            timestamp(n, p.child("time"), a.value(), t.time);
        } else if (an == "operatorAccepted") {
            std::string_view v = a.value();
            if (v == "true" || v == "1")
                t.operator_accepted = true;
            else if (v == "false" || v == "0")
                t.operator_accepted = false;
            else
                invalid(n, p.child("operatorAccepted"), v, "a boolean (true, false)");
        } else if (an == "tracer") {
            t.tracer = a.value();
        } else {
            unknown_attribute(n, a, p);
        }
    }
    if (!has_number) missing(n, p.child("number"), "a number attribute");
    t.values.reserve(count_elements(n));
    elements(n, [&](pugi::xml_node c, std::string_view l) {
        if (l == "value")
            read_values(c, t.values, p);
        else
            unknown_element(c, p);
    });
}

void XmlReader::read_findings(pugi::xml_node n, std::vector<Finding>& out, const Path& p) {
    int i = 0;
    elements(n, [&](pugi::xml_node c, std::string_view l) {
        if (l != "finding") return unknown_element(c, p);
        const Path fp = p.item("findings", i++);
        Finding& f = out.emplace_back();
        bool has_rule = false, has_severity = false;
        for (pugi::xml_attribute a = c.first_attribute(); a; a = a.next_attribute()) {
            std::string_view an = a.name();
            if (an == "rule") {
                f.rule = a.value(), has_rule = true;
            } else if (an == "severity") {
                has_severity = true;
                enumerated(c, fp.child("severity"), a.value(), f.severity, parse_severity,
                           "a severity (info, warning, error)");
            } else if (an == "path") {
                f.path = a.value();
            } else {
                unknown_attribute(c, a, fp);
            }
        }
        if (!has_rule) missing(c, fp.child("rule"), "a rule attribute");
        if (!has_severity) missing(c, fp.child("severity"), "a severity attribute");
        elements(c, [&](pugi::xml_node x, std::string_view xl) {
            if (xl == "message") {
                f.message = x.child_value();
            } else if (xl == "seen") {
                pugi::xml_attribute name = x.attribute("name");
                if (!name) missing(x, fp.child("values"), "a name attribute");
                f.values.emplace_back(name.value(), x.child_value());
            } else {
                unknown_element(x, fp);
            }
        });
    });
}

void XmlReader::read_extensions(pugi::xml_node n, std::vector<Extension>& out, const Path& p) {
    int i = 0;
    for (pugi::xml_node c = n.first_child(); c; c = c.next_sibling()) {
        if (c.type() != pugi::node_element) continue;
        const Path ep = p.item("extensions", i++);
        const std::string_view ns = namespace_of(c);
        if (ns.empty() || ns == kNamespace) {
            unknown_element(c, ep);
            continue;
        }
        Extension& e = out.emplace_back();
        std::string_view name = c.name();
        const auto colon = name.find(':');
        e.namespace_uri = ns;
        e.name = colon == std::string_view::npos ? name : name.substr(colon + 1);
        for (pugi::xml_node prop = c.first_child(); prop; prop = prop.next_sibling()) {
            if (prop.type() != pugi::node_element) continue;
            std::string_view pn = prop.name();
            const auto pc = pn.find(':');
            e.properties.emplace_back(pc == std::string_view::npos ? pn : pn.substr(pc + 1),
                                      prop.child_value());
            if (prop.find_child([](pugi::xml_node x) { return x.type() == pugi::node_element; }))
                f_.add("extension.not-kept", ep,
                       "<" + std::string(pn) +
                           "> has child elements; only one level of text properties is kept",
                       at(prop), {{"element", std::string(pn)}}, Severity::warning);
        }
    }
}

// ---- writer ----

void escape(std::string& out, std::string_view s, bool attribute) {
    bool only_blank = !attribute && !s.empty();
    for (char ch : s)
        if (ch != ' ' && ch != '\t' && ch != '\n' && ch != '\r') only_blank = false;
    for (char ch : s) {
        switch (ch) {
            case '&':
                out += "&amp;";
                break;
            case '<':
                out += "&lt;";
                break;
            case '>':
                out += "&gt;";
                break;
            case '"':
                attribute ? out += "&quot;" : out += ch;
                break;
            // Character references survive attribute-value normalization and
            // end-of-line handling; blank-only text would be dropped by readers.
            case '\t':
                out += "&#9;";
                break;
            case '\n':
                attribute || only_blank ? out += "&#10;" : out += ch;
                break;
            case '\r':
                out += "&#13;";
                break;
            case ' ':
                only_blank ? out += "&#32;" : out += ch;
                break;
            default:
                // Not allowed in XML 1.0: dropped (JSON input could carry them).
                if (static_cast<unsigned char>(ch) < 0x20) break;
                out += ch;
        }
    }
}

class XmlWriter {
public:
    explicit XmlWriter(std::string& out) : out_(out) {}
    void write(const NeutralResult& r);

private:
    std::string& out_;

    void indent(int depth) { out_.append(static_cast<std::size_t>(depth) * 2, ' '); }
    void attr(std::string_view name, std::string_view value) {
        out_ += ' ';
        out_ += name;
        out_ += "=\"";
        escape(out_, value, true);
        out_ += '"';
    }
    void attr_if(std::string_view name, std::string_view value) {
        if (!value.empty()) attr(name, value);
    }
    void attr_num(std::string_view name, double v) {
        out_ += ' ';
        out_ += name;
        out_ += "=\"";
        detail::append_double(out_, v);
        out_ += '"';
    }
    void attr_num_if(std::string_view name, const std::optional<double>& v) {
        if (v) attr_num(name, *v);
    }
    void text_element(int depth, std::string_view name, std::string_view text) {
        indent(depth);
        out_ += '<';
        out_ += name;
        out_ += '>';
        escape(out_, text, false);
        out_ += "</";
        out_ += name;
        out_ += ">\n";
    }
    void quantity(int depth, std::string_view tag, const Quantity& q);
};

void XmlWriter::quantity(int depth, std::string_view tag, const Quantity& q) {
    indent(depth);
    out_ += '<';
    out_ += tag;
    attr("kind", q.kind);
    attr_num_if("value", q.value);
    attr_if("unit", q.unit);
    attr_if("condition", to_string(q.condition));
    if (q.origin != Origin::device) attr("origin", to_string(q.origin));
    if (q.absent_reason) attr("absent", *q.absent_reason);
    const bool explicit_source = !(q.source == detail::implied_source(q));
    if (!explicit_source && !q.derivation && q.reference.empty() && q.trials.empty() &&
        q.derived_from.empty() && q.comments.empty()) {
        out_ += "/>\n";
        return;
    }
    out_ += ">\n";
    if (explicit_source) {
        indent(depth + 1);
        out_ += "<source";
        attr_if("value", q.source.value_text);
        attr_if("unit", q.source.unit_text);
        attr_if("condition", q.source.condition_text);
        attr_if("code", q.source.code);
        attr_if("codeSystem", q.source.code_system);
        out_ += "/>\n";
    }
    if (q.derivation) {
        const Derivation& d = *q.derivation;
        indent(depth + 1);
        out_ += "<derivation";
        attr_num("factor", d.factor);
        attr_if("steps", d.steps);
        attr_num_if("temperatureCel", d.temperature_cel);
        attr_num_if("pressureKpa", d.pressure_kpa);
        attr_if("waterVapourEquation", d.water_vapour_equation);
        out_ += "/>\n";
    }
    for (const ReferenceValues& r : q.reference) {
        indent(depth + 1);
        out_ += "<reference";
        attr("equationSet", r.equation_set);
        attr_if("equationVersion", r.equation_version);
        attr("origin", to_string(r.origin));
        attr_if("unit", r.unit);
        attr_num_if("predicted", r.predicted);
        attr_num_if("lln", r.lln);
        attr_num_if("uln", r.uln);
        attr_num_if("z", r.z_score);
        attr_num_if("percentPredicted", r.percent_predicted);
        out_ += "/>\n";
    }
    for (int t : q.trials) {
        indent(depth + 1);
        out_ += "<trialRef number=\"";
        detail::append_int(out_, t);
        out_ += "\"/>\n";
    }
    for (const std::string& k : q.derived_from) {
        indent(depth + 1);
        out_ += "<derivedFrom";
        attr("kind", k);
        out_ += "/>\n";
    }
    for (const std::string& c : q.comments) text_element(depth + 1, "comment", c);
    indent(depth);
    out_ += "</";
    out_ += tag;
    out_ += ">\n";
}

void XmlWriter::write(const NeutralResult& r) {
    out_ += "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n<result xmlns=\"";
    out_ += kNamespace;
    out_ += '"';
    attr("schemaVersion", r.schema_version.empty() ? "1.0" : r.schema_version);
    attr_if("id", r.id);
    out_ += " revision=\"";
    detail::append_int(out_, r.revision);
    out_ += '"';
    attr("status", to_string(r.status));
    attr_if("replaces", r.replaces);
    out_ += ">\n";
    if (!r.device_session_number.empty())
        text_element(1, "deviceSessionNumber", r.device_session_number);
    if (r.session_time) text_element(1, "sessionTime", to_iso(*r.session_time));

    const Subject& s = r.subject;
    if (!(s == Subject{})) {
        out_ += "  <subject>\n";
        for (const Identifier& id : s.identifiers) {
            out_ += "    <identifier";
            attr_if("system", id.system);
            attr("value", id.value);
            attr_if("type", id.type);
            out_ += "/>\n";
        }
        if (!s.family_name.empty() || !s.given_name.empty()) {
            out_ += "    <name";
            attr_if("family", s.family_name);
            attr_if("given", s.given_name);
            out_ += "/>\n";
        }
        if (s.sex_at_birth != SexAtBirth::unknown)
            text_element(2, "sexAtBirth", to_string(s.sex_at_birth));
        if (!s.administrative_gender.empty())
            text_element(2, "administrativeGender", s.administrative_gender);
        if (s.birth_date) text_element(2, "birthDate", to_iso(*s.birth_date));
        if (s.height) quantity(2, "height", *s.height);
        if (s.weight) quantity(2, "weight", *s.weight);
        if (!s.ethnicity.empty()) text_element(2, "ethnicity", s.ethnicity);
        out_ += "  </subject>\n";
    }
    const Order& o = r.order;
    if (!(o == Order{})) {
        out_ += "  <order";
        attr_if("placer", o.placer_number);
        attr_if("filler", o.filler_number);
        attr_if("accession", o.accession_number);
        out_ += "/>\n";
    }
    const Device& d = r.device;
    if (!(d == Device{})) {
        out_ += "  <device";
        attr_if("id", d.id);
        attr_if("manufacturer", d.manufacturer);
        attr_if("model", d.model);
        attr_if("serial", d.serial_number);
        attr_if("software", d.software_version);
        if (d.last_calibration) attr("lastCalibration", to_iso(*d.last_calibration));
        attr_if("calibrationNote", d.calibration_note);
        out_ += "/>\n";
    }
    const Environment& e = r.environment;
    if (e.temperature || e.pressure || e.humidity) {
        out_ += "  <environment>\n";
        if (e.temperature) quantity(2, "temperature", *e.temperature);
        if (e.pressure) quantity(2, "pressure", *e.pressure);
        if (e.humidity) quantity(2, "humidity", *e.humidity);
        out_ += "  </environment>\n";
    }
    for (const Test& t : r.tests) {
        out_ += "  <test";
        attr("type", to_string(t.type));
        attr_if("method", t.method);
        if (t.time) attr("time", to_iso(*t.time));
        out_ += ">\n";
        for (const Quantity& q : t.values) quantity(2, "value", q);
        for (const Trial& tr : t.trials) {
            out_ += "    <trial number=\"";
            detail::append_int(out_, tr.number);
            out_ += '"';
            if (tr.time) attr("time", to_iso(*tr.time));
            if (tr.operator_accepted)
                attr("operatorAccepted", *tr.operator_accepted ? "true" : "false");
            attr_if("tracer", tr.tracer);
            out_ += ">\n";
            for (const Quantity& q : tr.values) quantity(3, "value", q);
            out_ += "    </trial>\n";
        }
        for (const std::string& c : t.comments) text_element(2, "comment", c);
        out_ += "  </test>\n";
    }
    if (!r.findings.empty()) {
        out_ += "  <findings>\n";
        for (const Finding& f : r.findings) {
            out_ += "    <finding";
            attr("rule", f.rule);
            attr("severity", to_string(f.severity));
            attr_if("path", f.path);
            out_ += ">\n";
            if (!f.message.empty()) text_element(3, "message", f.message);
            for (const auto& [name, value] : f.values) {
                out_ += "      <seen";
                attr("name", name);
                out_ += '>';
                escape(out_, value, false);
                out_ += "</seen>\n";
            }
            out_ += "    </finding>\n";
        }
        out_ += "  </findings>\n";
    }
    if (!r.extensions.empty()) {
        out_ += "  <extensions>\n";
        for (const Extension& x : r.extensions) {
            // The prefix is local to the element; "x:" is as good as any.
            out_ += "    <x:";
            out_ += x.name;
            attr("xmlns:x", x.namespace_uri);
            if (x.properties.empty()) {
                out_ += "/>\n";
                continue;
            }
            out_ += ">\n";
            for (const auto& [name, value] : x.properties) {
                out_ += "      <x:";
                out_ += name;
                out_ += '>';
                escape(out_, value, false);
                out_ += "</x:";
                out_ += name;
                out_ += ">\n";
            }
            out_ += "    </x:";
            out_ += x.name;
            out_ += ">\n";
        }
        out_ += "  </extensions>\n";
    }
    out_ += "</result>\n";
}

}  // namespace

ReadOutcome read_xml(std::string_view bytes, std::string_view source_name) {
    ReadOutcome outcome;
    Findings findings(bytes, source_name, outcome.findings);
    pugi::xml_document doc;
    const pugi::xml_parse_result parsed =
        doc.load_buffer(bytes.data(), bytes.size(), pugi::parse_default, pugi::encoding_utf8);
    if (!parsed) {
        const auto offset = static_cast<std::size_t>(parsed.offset);
        findings.add_at("xml.malformed", "",
                        std::string("not well-formed XML: ") + parsed.description(),
                        detail::line_column(bytes, offset), {{"offset", std::to_string(offset)}});
        return outcome;
    }
    XmlReader reader(findings);
    if (!reader.read(doc, outcome.result.emplace())) outcome.result.reset();
    return outcome;
}

void write_xml(const NeutralResult& result, std::string& out) {
    XmlWriter(out).write(result);
}

}  // namespace pftgw::neutral
