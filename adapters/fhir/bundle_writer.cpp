// FHIR R4 transaction Bundle writer (JSON streamed, XML in R4 element order).
//
// One Bundle per result, entries in this order: Patient, Device, per test the
// measured Observations (each followed by its predicted / percent predicted /
// z-score Observations) and the test's panel Observation, then one
// DiagnosticReport. The walk is written once (BundleWalk<Emitter>) and called
// in the element order of the R4 StructureDefinitions, so the JSON and the XML
// carry the same content in the same order.
//
// Choices:
// - Predicted, percent predicted and z-score are Observations of their own,
//   coded by the quantity table's variant rows, with derivedFrom -> the measured
//   Observation. FHIR R4 (Observation, "component" notes; interop-facts.md)
//   keeps components for values that mean nothing apart; a predicted value is a
//   fact of its own, LOINC codes it separately (20149-1 ...), and as its own
//   Observation it can never trip obs-7. LLN / ULN go into the measured
//   Observation's referenceRange.
// - Identifiers: every created resource has identifier
//   options.identifier_system | part_identifier(result id, part); the Patient
//   keeps the subject's identifiers and the Device the device system. fullUrl is
//   urn:uuid from SHA-256 of "system|value" (RFC 9562 name-based version 8
//   layout), so a retry writes identical bytes.
// - Revision 1: POST + ifNoneExist. Revision > 1: Observations and the report
//   are conditional updates (PUT Type?identifier=...) with status corrected
//   (DECISIONS.md); Patient and Device stay conditional creates, because a
//   corrected result is no reason to overwrite the patient or device record.
// - Interpretation is L / H / N from the first reference set with LLN or ULN,
//   never LL / HH / A (DECISIONS.md, patient safety).
#include "adapters/fhir/bundle_writer.hpp"

#include <array>
#include <charconv>
#include <cstdint>
#include <string_view>
#include <vector>

#include "adapters/fhir/emitters.hpp"
#include "gateway/core/identity.hpp"

namespace pftgw::fhir {

namespace {

using detail::JsonEmitter;
using detail::XmlEmitter;

// FHIR R4 terminology (interop-facts.md, FHIR section, flag V).
constexpr std::string_view kUcumUri = "http://unitsofmeasure.org";
constexpr std::string_view kCategoryUri =
    "http://terminology.hl7.org/CodeSystem/observation-category";
constexpr std::string_view kInterpretationUri =
    "http://terminology.hl7.org/CodeSystem/v3-ObservationInterpretation";
// Data absent reason code system, FHIR R4 (from memory: codes unknown,
// not-performed, ... in http://terminology.hl7.org/CodeSystem/data-absent-reason).
constexpr std::string_view kDataAbsentReasonUri =
    "http://terminology.hl7.org/CodeSystem/data-absent-reason";
// Panels (lung-function-facts.md, "Codes (LOINC)"): 81459-0 spirometry panel;
// the facts file has no closer LOINC for lung volumes or diffusing capacity, so
// those panels and the report use 81458-2, the pulmonary function panel.
constexpr std::string_view kSpirometryPanelLoinc = "81459-0";
constexpr std::string_view kPulmonaryFunctionPanelLoinc = "81458-2";
// z-score severity bands (lung-function-facts.md: Stanojevic 2022, flag V).
constexpr double kZBandLimit = -1.645;
constexpr double kZBandSecond = -2.5;
constexpr double kZBandThird = -4.0;
constexpr double kZUpperLimit = 1.645;
constexpr std::string_view kZBandText =
    "Bands at z -1.645 / -2.5 / -4.0 (Stanojevic 2022). Interpretation of these "
    "values belongs to licensed staff; the gateway does not diagnose.";
// Shortest round-trip text when a unit is neither the kind's SI nor its
// traditional unit (the result was not rendered): no display decimals apply.
constexpr int kShortestDecimals = -1;
// One Bundle of the 25-quantity example is about 52 kB of JSON, 64 kB of XML.
constexpr std::size_t kReserveBytes = 64 * 1024;

// ---- small text helpers ----------------------------------------------------

// A decimal as FHIR JSON / XML text: fixed decimals, "-0.00" written as "0.00".
struct DecimalText {
    std::array<char, 64> buf{};
    std::size_t size = 0;
    std::string_view view() const { return {buf.data(), size}; }
};

DecimalText format_decimal(double value, int decimals) {
    DecimalText t;
    auto* first = t.buf.data();
    auto* last = t.buf.data() + t.buf.size();
    auto res = decimals < 0 ? std::to_chars(first, last, value)
                            : std::to_chars(first, last, value, std::chars_format::fixed, decimals);
    t.size = res.ec == std::errc() ? static_cast<std::size_t>(res.ptr - first) : 0;
    if (t.size == 0) {
        t.buf[0] = '0';
        t.size = 1;
    }
    if (t.buf[0] == '-') {
        bool all_zero = true;
        for (std::size_t i = 1; i < t.size; ++i)
            if (t.buf[i] != '0' && t.buf[i] != '.') all_zero = false;
        if (all_zero) {
            for (std::size_t i = 1; i < t.size; ++i) t.buf[i - 1] = t.buf[i];
            --t.size;
        }
    }
    return t;
}

// Percent-encodes what may not stand in a URL query (RFC 3986 unreserved and
// ":/@" kept), so identifiers with spaces or '&' still make one search.
void append_query_encoded(std::string& out, std::string_view text) {
    constexpr char kHex[] = "0123456789ABCDEF";
    std::size_t run_start = 0;
    for (std::size_t i = 0; i < text.size(); ++i) {
        const auto c = static_cast<unsigned char>(text[i]);
        const bool keep = (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') ||
                          (c >= '0' && c <= '9') || c == '-' || c == '.' || c == '_' || c == '~' ||
                          c == ':' || c == '/' || c == '@';
        if (keep) continue;
        out.append(text.data() + run_start, i - run_start);
        run_start = i + 1;
        const char esc[] = {'%', kHex[c >> 4], kHex[c & 0x0F]};
        out.append(esc, sizeof esc);
    }
    out.append(text.data() + run_start, text.size() - run_start);
}

std::string identifier_query(std::string_view system, std::string_view value) {
    std::string q = "identifier=";
    append_query_encoded(q, system);
    q += '|';
    append_query_encoded(q, value);
    return q;
}

// urn:uuid from SHA-256 of "system|value": version 8, variant 10 (RFC 9562,
// name-based UUIDv8 with SHA-256; from memory). Deterministic across runs.
std::string urn_uuid(std::string_view system, std::string_view value) {
    std::string name;
    name.reserve(system.size() + value.size() + 1);
    name += system;
    name += '|';
    name += value;
    auto h = sha256(name);
    constexpr std::uint8_t kVersion8 = 0x80;
    constexpr std::uint8_t kVariantRfc = 0x80;
    h[6] = static_cast<std::uint8_t>((h[6] & 0x0F) | kVersion8);
    h[8] = static_cast<std::uint8_t>((h[8] & 0x3F) | kVariantRfc);
    constexpr char kHex[] = "0123456789abcdef";
    constexpr std::string_view kPrefix = "urn:uuid:";
    char text[kPrefix.size() + 36];
    std::size_t n = 0;
    for (char c : kPrefix) text[n++] = c;
    for (std::size_t i = 0; i < 16; ++i) {
        if (i == 4 || i == 6 || i == 8 || i == 10) text[n++] = '-';
        text[n++] = kHex[h[i] >> 4];
        text[n++] = kHex[h[i] & 0x0F];
    }
    return std::string(text, n);
}

// ---- the plan: every entry's identifier and fullUrl, before writing ---------

struct Part {
    std::string system;
    std::string value;     // identifier value
    std::string full_url;  // urn:uuid:...
    std::string query;     // identifier=<system>|<value>, URL-encoded
};

Part make_part(std::string_view system, std::string value) {
    Part p;
    p.system = std::string(system);
    p.value = std::move(value);
    p.full_url = urn_uuid(p.system, p.value);
    p.query = identifier_query(p.system, p.value);
    return p;
}

enum class DerivedKind { predicted, percent_predicted, z };

struct DerivedPlan {
    DerivedKind what = DerivedKind::predicted;
    const QuantityKind* kind = nullptr;  // the variant row
    const ReferenceValues* reference = nullptr;
    double value = 0;
    std::string unit;
    int decimals = kShortestDecimals;
    Part part;
};

struct ObservationPlan {
    std::size_t test_index = 0;
    const Quantity* quantity = nullptr;
    const QuantityKind* kind = nullptr;  // null when the table does not know it
    int decimals = kShortestDecimals;
    Part part;
    std::vector<DerivedPlan> derived;
};

struct TestPlan {
    const Test* test = nullptr;
    std::size_t test_index = 0;
    std::string effective;  // the test's time, else the session's; may be empty
    Part panel;
    std::vector<ObservationPlan> observations;
};

struct Plan {
    std::string result_id;
    bool update = false;  // revision > 1: conditional update
    std::string status;   // Observation / DiagnosticReport status code
    Part bundle;
    Part patient;
    std::vector<Identifier> patient_identifiers;
    std::string report_effective;
    bool has_device = false;
    Part device;
    std::vector<TestPlan> tests;
    Part report;
};

int decimals_for_unit(const QuantityKind* kind, std::string_view unit) {
    if (kind == nullptr) return kShortestDecimals;
    // The unit tells how the result was rendered (normalize.hpp, render_units).
    if (unit == kind->canonical_unit) return kind->decimals_for(UnitSystem::si);
    if (unit == kind->traditional_unit) return kind->decimals_for(UnitSystem::traditional);
    return kShortestDecimals;
}

std::string_view variant_suffix(DerivedKind what) {
    switch (what) {
        case DerivedKind::predicted:
            return "predicted";
        case DerivedKind::percent_predicted:
            return "percent_predicted";
        case DerivedKind::z:
            return "z";
    }
    return "";
}

std::string status_code(const NeutralResult& result) {
    if (result.status == ResultStatus::preliminary) return "preliminary";
    if (result.revision > 1 || result.status == ResultStatus::corrected) return "corrected";
    return "final";
}

Plan make_plan(const NeutralResult& result, const BundleOptions& options,
               const QuantityTable& table) {
    Plan plan;
    plan.result_id = result.id.empty() ? result_identifier(result) : result.id;
    plan.update = result.revision > 1;
    plan.status = status_code(result);
    const auto& sys = options.identifier_system;
    plan.bundle = make_part(
        sys, part_identifier(plan.result_id, "bundle-r" + std::to_string(result.revision)));

    for (const auto& id : result.subject.identifiers)
        if (!id.system.empty() && !id.value.empty()) plan.patient_identifiers.push_back(id);
    if (!plan.patient_identifiers.empty()) {
        const auto& first = plan.patient_identifiers.front();
        plan.patient = make_part(first.system, first.value);
    } else {
        // No subject identifier (validation blocks this for FHIR): a
        // result-scoped one keeps the create conditional.
        plan.patient = make_part(sys, part_identifier(plan.result_id, "patient"));
        plan.patient_identifiers.push_back({plan.patient.system, plan.patient.value, ""});
    }

    const auto& dev = result.device;
    const std::string& device_value = !dev.id.empty() ? dev.id : dev.serial_number;
    plan.has_device = !device_value.empty();
    if (plan.has_device) plan.device = make_part(options.device_identifier_system, device_value);

    std::vector<std::string> used_parts;
    for (std::size_t ti = 0; ti < result.tests.size(); ++ti) {
        const Test& test = result.tests[ti];
        TestPlan tp;
        tp.test = &test;
        tp.test_index = ti;
        if (test.time)
            tp.effective = to_iso(*test.time);
        else if (result.session_time)
            tp.effective = to_iso(*result.session_time);
        if (plan.report_effective.empty()) plan.report_effective = tp.effective;
        tp.panel = make_part(
            sys, part_identifier(plan.result_id, "panel-" + std::string(to_string(test.type))));
        for (const Quantity& q : test.values) {
            ObservationPlan op;
            op.test_index = ti;
            op.quantity = &q;
            op.kind = table.find(q.kind);
            op.decimals = decimals_for_unit(op.kind, q.unit);
            // "obs-FEV1"; a kind already used by an earlier test gets the test type.
            std::string part = "obs-" + q.kind;
            for (const auto& u : used_parts)
                if (u == part) part += "-" + std::string(to_string(test.type));
            used_parts.push_back(part);
            op.part = make_part(sys, part_identifier(plan.result_id, part));

            for (std::size_t ri = 0; ri < q.reference.size(); ++ri) {
                const ReferenceValues& ref = q.reference[ri];
                const std::pair<DerivedKind, const std::optional<double>*> wanted[] = {
                    {DerivedKind::predicted, &ref.predicted},
                    {DerivedKind::percent_predicted, &ref.percent_predicted},
                    {DerivedKind::z, &ref.z_score}};
                for (const auto& [what, number] : wanted) {
                    if (!number->has_value()) continue;
                    const QuantityKind* row = table.variant_of(q.kind, variant_suffix(what));
                    if (row == nullptr) continue;  // written as note text instead
                    DerivedPlan dp;
                    dp.what = what;
                    dp.kind = row;
                    dp.reference = &ref;
                    dp.value = **number;
                    // Predicted is in the measured quantity's unit (model.hpp);
                    // percent and z-score in their row's unit.
                    dp.unit = what == DerivedKind::predicted ? q.unit : row->canonical_unit;
                    dp.decimals = decimals_for_unit(row, dp.unit);
                    std::string dpart = "obs-" + row->key;
                    if (ri > 0) dpart += "-" + std::to_string(ri + 1);
                    if (part.size() > 4 + q.kind.size())  // test-qualified measured part
                        dpart += part.substr(4 + q.kind.size());
                    dp.part = make_part(sys, part_identifier(plan.result_id, dpart));
                    op.derived.push_back(std::move(dp));
                }
            }
            tp.observations.push_back(std::move(op));
        }
        plan.tests.push_back(std::move(tp));
    }
    plan.report = make_part(sys, part_identifier(plan.result_id, "report"));
    if (result.session_time) plan.report_effective = to_iso(*result.session_time);
    return plan;
}

// ---- the walk ----------------------------------------------------------------

template <class Emitter>
class BundleWalk {
public:
    BundleWalk(Emitter& e, const NeutralResult& result, const BundleOptions& options,
               const Plan& plan)
        : e_(e), result_(result), options_(options), plan_(plan) {}

    void write() {
        e_.begin_root("Bundle");
        // Bundle: identifier, type, entry (R4 order).
        identifier_object("identifier", plan_.bundle);
        e_.string("type", "transaction");
        e_.begin_array("entry");
        patient_entry();
        if (plan_.has_device) device_entry();
        for (const auto& tp : plan_.tests) {
            for (const auto& op : tp.observations) {
                measured_entry(tp, op);
                for (const auto& dp : op.derived) derived_entry(tp, op, dp);
            }
            panel_entry(tp);
        }
        report_entry();
        e_.end_array();
        e_.end_root();
    }

private:
    // ---- entries ----

    void begin_entry(const Part& part, std::string_view type) {
        e_.begin_item();
        e_.string("fullUrl", part.full_url);
        e_.begin_resource(type);
    }

    // Bundle.entry.request: method, url, ifNoneExist (R4 order).
    void end_entry(const Part& part, std::string_view type, bool may_update) {
        e_.end_resource();
        e_.begin_object("request");
        const std::string& query = part.query;
        if (may_update && plan_.update) {
            e_.string("method", "PUT");
            std::string url(type);
            url += '?';
            url += query;
            e_.string("url", url);
        } else {
            e_.string("method", "POST");
            e_.string("url", type);
            e_.string("ifNoneExist", query);
        }
        e_.end_object();
        e_.end_item();
    }

    void patient_entry() {
        begin_entry(plan_.patient, "Patient");
        // Patient: identifier, name, gender, birthDate.
        e_.begin_array("identifier");
        for (const auto& id : plan_.patient_identifiers) {
            e_.begin_item();
            if (!id.type.empty()) {
                // HL7 table 0203 in FHIR R4 (from memory: v2-0203 code system URI).
                e_.begin_object("type");
                coding_array("http://terminology.hl7.org/CodeSystem/v2-0203", id.type, "");
                e_.end_object();
            }
            e_.string("system", id.system);
            e_.string("value", id.value);
            e_.end_item();
        }
        e_.end_array();
        const auto& s = result_.subject;
        if (!s.family_name.empty() || !s.given_name.empty()) {
            e_.begin_array("name");
            e_.begin_item();
            e_.string("family", s.family_name);
            if (!s.given_name.empty()) {
                e_.begin_array("given");
                e_.string_item(s.given_name);
                e_.end_array();
            }
            e_.end_item();
            e_.end_array();
        }
        e_.string("gender", gender_code());
        if (s.birth_date) e_.string("birthDate", to_iso(*s.birth_date));
        end_entry(plan_.patient, "Patient", false);
    }

    std::string_view gender_code() const {
        // FHIR administrative-gender: male | female | other | unknown.
        const std::string& g = result_.subject.administrative_gender;
        for (std::string_view code : {"male", "female", "other", "unknown"}) {
            if (g.size() != code.size()) continue;
            bool same = true;
            for (std::size_t i = 0; i < g.size(); ++i)
                if ((g[i] | 0x20) != code[i]) same = false;
            if (same) return code;
        }
        switch (result_.subject.sex_at_birth) {
            case SexAtBirth::male:
                return "male";
            case SexAtBirth::female:
                return "female";
            case SexAtBirth::unknown:
                return "";
        }
        return "";
    }

    void device_entry() {
        const auto& d = result_.device;
        begin_entry(plan_.device, "Device");
        // Device: identifier, manufacturer, serialNumber, modelNumber, version.
        e_.begin_array("identifier");
        e_.begin_item();
        e_.string("system", plan_.device.system);
        e_.string("value", plan_.device.value);
        e_.end_item();
        e_.end_array();
        e_.string("manufacturer", d.manufacturer);
        e_.string("serialNumber", d.serial_number);
        e_.string("modelNumber", d.model);
        if (!d.software_version.empty()) {
            e_.begin_array("version");
            e_.begin_item();
            e_.string("value", d.software_version);
            e_.end_item();
            e_.end_array();
        }
        end_entry(plan_.device, "Device", false);
    }

    void measured_entry(const TestPlan& tp, const ObservationPlan& op) {
        const Quantity& q = *op.quantity;
        begin_entry(op.part, "Observation");
        // Observation: identifier status category code subject effective value
        // dataAbsentReason interpretation note method device referenceRange
        // hasMember derivedFrom (R4 order).
        observation_head(op.part, tp);
        quantity_code(op.kind, q.kind);
        references_and_time(tp);
        if (q.value) {
            quantity_value("valueQuantity", *q.value, op.decimals, q.unit);
            interpretation(q);
        } else {
            data_absent_reason(q.absent_reason);
        }
        measured_notes(tp, op);
        method(*tp.test);
        device_reference();
        reference_ranges(op);
        if (!q.derived_from.empty()) derived_from_kinds(tp, q);
        end_entry(op.part, "Observation", true);
    }

    void derived_entry(const TestPlan& tp, const ObservationPlan& op, const DerivedPlan& dp) {
        begin_entry(dp.part, "Observation");
        // The equation set as an extension of the project's own naming.
        e_.begin_array("extension");
        e_.begin_extension(options_.equation_extension_url);
        e_.string("valueString", equation_label(*dp.reference));
        e_.end_extension();
        e_.end_array();
        observation_head(dp.part, tp);
        quantity_code(dp.kind, dp.kind->key);
        references_and_time(tp);
        quantity_value("valueQuantity", dp.value, dp.decimals, dp.unit);
        std::string who = "Computed by the ";
        who += to_string(dp.reference->origin);
        who += " from ";
        who += equation_label(*dp.reference);
        who += '.';
        e_.begin_array("note");
        note_item(who);
        if (dp.what == DerivedKind::z) note_item(z_band_text(dp.value));
        e_.end_array();
        device_reference();
        e_.begin_array("derivedFrom");
        reference_item(op.part.full_url);
        e_.end_array();
        end_entry(dp.part, "Observation", true);
    }

    void panel_entry(const TestPlan& tp) {
        begin_entry(tp.panel, "Observation");
        observation_head(tp.panel, tp);
        const bool spiro = tp.test->type == TestType::spirometry;
        codeable_concept(
            "code", kLoincUri, spiro ? kSpirometryPanelLoinc : kPulmonaryFunctionPanelLoinc,
            spiro ? "Spirometry panel" : "Pulmonary function panel", to_string(tp.test->type));
        references_and_time(tp);
        panel_notes(tp);
        method(*tp.test);
        device_reference();
        bool any = false;
        for (const auto& op : tp.observations) {
            if (!any) e_.begin_array("hasMember");
            any = true;
            reference_item(op.part.full_url);
            for (const auto& dp : op.derived) reference_item(dp.part.full_url);
        }
        if (any) e_.end_array();
        end_entry(tp.panel, "Observation", true);
    }

    void report_entry() {
        begin_entry(plan_.report, "DiagnosticReport");
        // DiagnosticReport: identifier status code subject effective result.
        // No conclusion: the gateway does not diagnose.
        identifier_array(plan_.report);
        e_.string("status", plan_.status);
        codeable_concept("code", kLoincUri, kPulmonaryFunctionPanelLoinc,
                         "Pulmonary function panel", "Pulmonary function tests");
        reference_object("subject", plan_.patient.full_url);
        e_.string("effectiveDateTime", plan_.report_effective);
        if (!plan_.tests.empty()) {
            e_.begin_array("result");
            for (const auto& tp : plan_.tests) reference_item(tp.panel.full_url);
            e_.end_array();
        }
        end_entry(plan_.report, "DiagnosticReport", true);
    }

    // ---- Observation pieces ----

    void observation_head(const Part& part, const TestPlan&) {
        identifier_array(part);
        e_.string("status", plan_.status);
        e_.begin_array("category");
        e_.begin_item();
        coding_array(kCategoryUri, "procedure", "Procedure");
        e_.end_item();
        e_.end_array();
    }

    void references_and_time(const TestPlan& tp) {
        reference_object("subject", plan_.patient.full_url);
        e_.string("effectiveDateTime", tp.effective);
    }

    void quantity_code(const QuantityKind* kind, std::string_view key) {
        if (kind == nullptr) {
            // Not in the table (validation reports quantity.unknown-kind):
            // the key in the project's code system keeps the value findable.
            codeable_concept("code", options_.code_system_uri, key, "", key);
            return;
        }
        const std::string_view system =
            kind->code_system == "LN" ? kLoincUri : std::string_view(options_.code_system_uri);
        codeable_concept("code", system, kind->code, kind->display, kind->trade_name);
    }

    void quantity_value(std::string_view name, double value, int decimals, std::string_view unit) {
        // Quantity: value unit system code (R4 order); qty-3: a code has a system.
        e_.begin_object(name);
        e_.decimal("value", format_decimal(value, decimals).view());
        if (!unit.empty()) {
            e_.string("unit", unit);
            e_.string("system", kUcumUri);
            e_.string("code", unit);
        }
        e_.end_object();
    }

    const ReferenceValues* primary_limits(const Quantity& q) const {
        for (const auto& ref : q.reference)
            if (ref.lln || ref.uln) return &ref;
        return nullptr;
    }

    void interpretation(const Quantity& q) {
        const ReferenceValues* ref = primary_limits(q);
        if (ref == nullptr || !q.value) return;
        // L / H / N from LLN / ULN only (DECISIONS.md: never LL / HH / A).
        const double v = *q.value;
        std::string_view code = "N";
        std::string_view display = "Normal";
        if (ref->lln && v < *ref->lln) {
            code = "L";
            display = "Low";
        } else if (ref->uln && v > *ref->uln) {
            code = "H";
            display = "High";
        }
        e_.begin_array("interpretation");
        e_.begin_item();
        coding_array(kInterpretationUri, code, display);
        e_.end_item();
        e_.end_array();
    }

    void data_absent_reason(const std::optional<std::string>& reason) {
        // FHIR data-absent-reason (from memory): "not-measured" is not-performed.
        std::string_view code = "unknown";
        std::string_view text = reason ? std::string_view(*reason) : std::string_view();
        for (std::string_view known :
             {"unknown", "asked-unknown", "temp-unknown", "not-asked", "asked-declined", "masked",
              "not-applicable", "unsupported", "as-text", "error", "not-a-number", "not-performed",
              "not-permitted"})
            if (text == known) code = known;
        if (text == "not-measured") code = "not-performed";
        codeable_concept("dataAbsentReason", kDataAbsentReasonUri, code, "", text);
    }

    void measured_notes(const TestPlan& tp, const ObservationPlan& op) {
        const Quantity& q = *op.quantity;
        std::vector<std::string> notes;
        if (q.condition == GasCondition::btps || q.condition == GasCondition::stpd ||
            q.condition == GasCondition::atps || q.condition == GasCondition::atpd)
            notes.push_back("Gas condition: " + std::string(to_string(q.condition)) + ".");
        if (q.origin == Origin::gateway) {
            std::string text = "Computed by the gateway";
            for (std::size_t i = 0; i < q.derived_from.size(); ++i)
                text += (i == 0 ? " from " : ", ") + q.derived_from[i];
            notes.push_back(text + ".");
        }
        for (const auto& ref : q.reference) {
            std::string text = "Reference values: " + equation_label(ref) + ", computed by the " +
                               std::string(to_string(ref.origin)) + ".";
            // Values the table has no variant row for travel as text, never lost.
            append_unrowed(text, q, ref, op);
            notes.push_back(std::move(text));
            if (ref.z_score) notes.push_back(z_band_text(*ref.z_score));
        }
        const std::string prefix =
            "tests[" + std::to_string(tp.test_index) + "].values[" + q.kind + "]";
        for (const auto& f : result_.findings) {
            if (f.severity != Severity::warning) continue;
            if (f.path.compare(0, prefix.size(), prefix) != 0) continue;
            if (f.path.size() > prefix.size() && f.path[prefix.size()] != '.' &&
                f.path[prefix.size()] != '[')
                continue;
            notes.push_back("Warning " + f.rule + ": " + f.message);
        }
        if (notes.empty()) return;
        e_.begin_array("note");
        for (const auto& n : notes) note_item(n);
        e_.end_array();
    }

    void append_unrowed(std::string& text, const Quantity& q, const ReferenceValues& ref,
                        const ObservationPlan& op) {
        auto has = [&](DerivedKind what) {
            for (const auto& dp : op.derived)
                if (dp.reference == &ref && dp.what == what) return true;
            return false;
        };
        if (ref.predicted && !has(DerivedKind::predicted))
            text += " Predicted " +
                    std::string(format_decimal(*ref.predicted, op.decimals).view()) + " " + q.unit +
                    ".";
        if (ref.percent_predicted && !has(DerivedKind::percent_predicted))
            text += " Percent predicted " +
                    std::string(format_decimal(*ref.percent_predicted, 0).view()) + " %.";
        if (ref.z_score && !has(DerivedKind::z))
            text += " z-score " + std::string(format_decimal(*ref.z_score, 2).view()) + ".";
    }

    void panel_notes(const TestPlan& tp) {
        std::vector<std::string_view> notes;
        for (const auto& c : tp.test->comments)
            if (!c.empty()) notes.push_back(c);
        const std::string prefix = "tests[" + std::to_string(tp.test_index) + "]";
        std::vector<std::string> warnings;
        for (const auto& f : result_.findings) {
            if (f.severity != Severity::warning) continue;
            if (f.path != prefix && f.path.compare(0, prefix.size() + 1, prefix + ".") != 0)
                continue;
            if (f.path.compare(0, prefix.size() + 7, prefix + ".values") == 0) continue;
            warnings.push_back("Warning " + f.rule + ": " + f.message);
        }
        if (notes.empty() && warnings.empty()) return;
        e_.begin_array("note");
        for (auto n : notes) note_item(n);
        for (const auto& w : warnings) note_item(w);
        e_.end_array();
    }

    static std::string z_band_text(double z) {
        std::string text = "z-score " + std::string(format_decimal(z, 2).view()) + ": ";
        if (z > kZUpperLimit)
            text += "above +1.645.";
        else if (z >= kZBandLimit)
            text += "at or above -1.645.";
        else if (z >= kZBandSecond)
            text += "between -2.5 and -1.645.";
        else if (z >= kZBandThird)
            text += "between -4.0 and -2.5.";
        else
            text += "below -4.0.";
        text += ' ';
        text += kZBandText;
        return text;
    }

    static std::string equation_label(const ReferenceValues& ref) {
        std::string label = ref.equation_set.empty() ? "unnamed equation set" : ref.equation_set;
        if (!ref.equation_version.empty()) label += " (" + ref.equation_version + ")";
        return label;
    }

    void method(const Test& test) {
        if (test.method.empty()) return;
        e_.begin_object("method");
        e_.string("text", test.method);
        e_.end_object();
    }

    void device_reference() {
        if (plan_.has_device) reference_object("device", plan_.device.full_url);
    }

    void reference_ranges(const ObservationPlan& op) {
        const Quantity& q = *op.quantity;
        bool any = false;
        for (const auto& ref : q.reference) {
            if (!ref.lln && !ref.uln) continue;
            if (!any) e_.begin_array("referenceRange");
            any = true;
            // referenceRange: low high text (R4 order); obs-3 holds with text.
            e_.begin_item();
            if (ref.lln) simple_quantity("low", *ref.lln, op.decimals, q.unit);
            if (ref.uln) simple_quantity("high", *ref.uln, op.decimals, q.unit);
            std::string text = ref.lln && ref.uln ? "Lower and upper limits of normal"
                               : ref.lln          ? "Lower limit of normal"
                                                  : "Upper limit of normal";
            text += " from " + equation_label(ref) + ", computed by the " +
                    std::string(to_string(ref.origin)) + ".";
            e_.string("text", text);
            e_.end_item();
        }
        if (any) e_.end_array();
    }

    void simple_quantity(std::string_view name, double value, int decimals, std::string_view unit) {
        quantity_value(name, value, decimals, unit);
    }

    void derived_from_kinds(const TestPlan& tp, const Quantity& q) {
        bool any = false;
        for (const auto& kind : q.derived_from) {
            const Part* target = find_measured(tp, kind);
            if (target == nullptr) continue;
            if (!any) e_.begin_array("derivedFrom");
            any = true;
            reference_item(target->full_url);
        }
        if (any) e_.end_array();
    }

    // The Observation of a kind: same test first, then any test.
    const Part* find_measured(const TestPlan& tp, std::string_view kind) const {
        for (const auto& op : tp.observations)
            if (op.quantity->kind == kind) return &op.part;
        for (const auto& other : plan_.tests)
            for (const auto& op : other.observations)
                if (op.quantity->kind == kind) return &op.part;
        return nullptr;
    }

    // ---- data types ----

    void identifier_object(std::string_view name, const Part& part) {
        e_.begin_object(name);
        e_.string("system", part.system);
        e_.string("value", part.value);
        e_.end_object();
    }

    void identifier_array(const Part& part) {
        e_.begin_array("identifier");
        e_.begin_item();
        e_.string("system", part.system);
        e_.string("value", part.value);
        e_.end_item();
        e_.end_array();
    }

    // Coding: system code display (R4 order), as a one-item `coding` array.
    void coding_array(std::string_view system, std::string_view code, std::string_view display) {
        e_.begin_array("coding");
        e_.begin_item();
        e_.string("system", system);
        e_.string("code", code);
        e_.string("display", display);
        e_.end_item();
        e_.end_array();
    }

    // CodeableConcept: coding text (R4 order).
    void codeable_concept(std::string_view name, std::string_view system, std::string_view code,
                          std::string_view display, std::string_view text) {
        e_.begin_object(name);
        coding_array(system, code, display);
        e_.string("text", text);
        e_.end_object();
    }

    void reference_object(std::string_view name, std::string_view full_url) {
        e_.begin_object(name);
        e_.string("reference", full_url);
        e_.end_object();
    }

    void reference_item(std::string_view full_url) {
        e_.begin_item();
        e_.string("reference", full_url);
        e_.end_item();
    }

    void note_item(std::string_view text) {
        e_.begin_item();
        e_.string("text", text);
        e_.end_item();
    }

    Emitter& e_;
    const NeutralResult& result_;
    const BundleOptions& options_;
    const Plan& plan_;
};

}  // namespace

void write_bundle_json(const NeutralResult& result, const BundleOptions& options,
                       const QuantityTable& table, std::string& out) {
    const Plan plan = make_plan(result, options, table);
    out.reserve(out.size() + kReserveBytes);
    JsonEmitter emitter(out);
    BundleWalk<JsonEmitter>(emitter, result, options, plan).write();
}

void write_bundle_xml(const NeutralResult& result, const BundleOptions& options,
                      const QuantityTable& table, std::string& out) {
    const Plan plan = make_plan(result, options, table);
    out.reserve(out.size() + kReserveBytes);
    XmlEmitter emitter(out);
    BundleWalk<XmlEmitter>(emitter, result, options, plan).write();
}

}  // namespace pftgw::fhir
