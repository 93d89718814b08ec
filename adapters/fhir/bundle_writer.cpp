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
//   layout), so a retry writes identical bytes. uuid.hpp hashes the shared
//   "system|<result id>-" prefix once per Bundle and uses the CPU's SHA
//   instructions where present: the same digests, a fraction of the cost.
// - Revision 1: POST + ifNoneExist. Revision > 1: Observations and the report
//   are conditional updates (PUT Type?identifier=...) with status corrected
//   (DECISIONS.md); Patient and Device stay conditional creates, because a
//   corrected result is no reason to overwrite the patient or device record.
// - Interpretation is L / H / N from LLN / ULN only, never LL / HH / A
//   (DECISIONS.md, patient safety). The set that drives it: the gateway's GLI
//   set when the policy computed one (origin gateway, equation set "GLI..."),
//   else the first set with LLN or ULN; the HL7 writer decides the same way.
//   Every set still goes out as its own referenceRange naming its set, and
//   with two or more the driving one says so in its text.
// - Physiology (DEVELOPERS.md, "Physiology and grading"): every warning goes
//   out as a note where its path points (a value's Observation, else the
//   test's panel); info findings of the quality.* and adjust.* rules
//   (grades, maneuver acceptability, repeatability) as well. Grades and
//   repeatability go on the panel and on the measured Observation they are
//   about. Each grade is also an Observation of its own, coded in the
//   project code system (options.code_system_uri) as "FEV1.grade",
//   "FVC.grade", "DLCO.grade" (the HL7 writer's OBX codes), valueString the
//   grade letter, derivedFrom the graded value's Observation, a member of the
//   panel: a grade is not a number and has no LOINC, but as a coded
//   Observation a quality lead can search for it.
// - JSON is compact (no indentation): FHIR servers and the conformance checks
//   need none, and it is a third of the bytes.
#include "adapters/fhir/bundle_writer.hpp"

#include <array>
#include <charconv>
#include <cstdint>
#include <cstring>
#include <string_view>
#include <vector>

#include "adapters/fhir/emitters.hpp"
#include "adapters/fhir/uuid.hpp"
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

// ---- the plan: every entry's identifier and fullUrl, before writing ---------

struct Part {
    std::string_view system;     // options' or the subject's: outlives the write
    std::string value;           // identifier value
    bool result_scoped = false;  // value is "<result id>-<part>" in options.identifier_system
    std::array<char, detail::kUrnUuidChars> uuid{};
    std::string_view url() const { return {uuid.data(), uuid.size()}; }
};

void set_uuid(Part& p, const std::array<std::uint8_t, 32>& digest) {
    std::string text;
    text.reserve(detail::kUrnUuidChars);
    detail::append_urn_uuid(text, digest);
    std::memcpy(p.uuid.data(), text.data(), p.uuid.size());
}

Part make_part(std::string_view system, std::string value) {
    Part p;
    p.system = system;
    p.value = std::move(value);
    detail::Sha256Stream s;
    s.update(system);
    s.update("|");
    s.update(p.value);
    set_uuid(p, s.finish());
    return p;
}

// Parts "<result id>-<part>" in the result's identifier system: the hash of
// "system|<result id>-" and its query encoding are computed once.
class PartMaker {
public:
    PartMaker(std::string_view system, std::string_view result_id) : system_(system) {
        prefix_.update(system);
        prefix_.update("|");
        prefix_.update(result_id);
        prefix_.update("-");
    }
    Part make(std::string_view result_id, std::string_view part) const {
        Part p;
        p.system = system_;
        p.value = part_identifier(result_id, part);
        p.result_scoped = true;
        detail::Sha256Stream s = prefix_;
        s.update(part);
        set_uuid(p, s.finish());
        return p;
    }

private:
    std::string_view system_;
    detail::Sha256Stream prefix_;
};

enum class DerivedKind { predicted, percent_predicted, z };
std::string_view variant_suffix(DerivedKind what);
const QuantityKind* variant_row(const QuantityTable& table, std::string_view kind,
                                DerivedKind what) {
    return table.variant_of(kind, variant_suffix(what));
}

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
    std::vector<const Finding*> findings;  // rendered as notes, in result order
};

// A grade of one test as its own Observation ("FEV1", "A").
struct GradePlan {
    std::string kind;
    std::string grade;
    std::string code;  // "FEV1.grade"
    const Finding* finding = nullptr;
    const Part* graded = nullptr;  // the graded value's Observation, if any
    Part part;
};

struct TestPlan {
    const Test* test = nullptr;
    std::size_t test_index = 0;
    std::string effective;  // the test's time, else the session's; may be empty
    Part panel;
    std::vector<ObservationPlan> observations;
    std::vector<GradePlan> grades;
    std::vector<const Finding*> findings;  // the panel's notes after the comments
};

struct Plan {
    std::string result_id;
    std::string result_query_prefix;  // "identifier=<system>|<result id>-", encoded
    bool update = false;              // revision > 1: conditional update
    std::string status;               // Observation / DiagnosticReport status code
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

// Findings the Bundle carries: every warning (errors block delivery), and
// the physiology engine's info findings on quality and adjustments.
bool rendered_finding(const Finding& f) {
    if (f.severity == Severity::warning) return true;
    if (f.severity != Severity::info) return false;
    return info_travels_to_record(f);  // the core decides, as for HL7
}

// Findings about a test as a whole that also belong on one value's
// Observation: grades (the kinds they name) and repeatability.
bool about_kind(const Finding& f, std::string_view kind) {
    if (f.rule == "quality.grade") {
        for (const auto& [k, v] : f.values)
            if (k == kind) return true;
        return false;
    }
    if (f.rule == "quality.dlco.repeatability") return kind == "DLCO";
    if (f.rule == "quality.frc-repeatability") return kind == "FRC";
    return false;
}

// Also on the panel, though the path names a value: repeatability.
bool also_on_panel(const Finding& f) {
    return f.rule == "quality.spirometry.repeatability";
}

// "tests[N]..." -> N and the rest; false for any other path.
bool parse_test_path(std::string_view path, std::size_t& test, std::string_view& rest) {
    constexpr std::string_view kTests = "tests[";
    if (!path.starts_with(kTests)) return false;
    std::size_t i = kTests.size();
    std::size_t n = 0;
    const std::size_t digits_start = i;
    while (i < path.size() && path[i] >= '0' && path[i] <= '9') n = n * 10 + (path[i++] - '0');
    if (i == digits_start || i >= path.size() || path[i] != ']') return false;
    test = n;
    rest = path.substr(i + 1);
    return true;
}

// ".values[KIND]" followed by nothing, '.' or '[' -> KIND; else empty.
std::string_view value_kind(std::string_view rest) {
    constexpr std::string_view kValues = ".values[";
    if (!rest.starts_with(kValues)) return {};
    const std::size_t close = rest.find(']', kValues.size());
    if (close == std::string_view::npos) return {};
    if (close + 1 < rest.size() && rest[close + 1] != '.' && rest[close + 1] != '[') return {};
    return rest.substr(kValues.size(), close - kValues.size());
}

void attach_findings(Plan& plan, const NeutralResult& result) {
    for (const Finding& f : result.findings) {
        if (!rendered_finding(f)) continue;
        std::size_t ti = 0;
        std::string_view rest;
        if (!parse_test_path(f.path, ti, rest) || ti >= plan.tests.size()) continue;
        if (!rest.empty() && rest[0] != '.' && rest[0] != '[') continue;
        TestPlan& tp = plan.tests[ti];
        const std::string_view kind = value_kind(rest);
        bool on_value = false;
        if (!kind.empty())
            for (auto& op : tp.observations)
                if (op.quantity->kind == kind) {
                    op.findings.push_back(&f);
                    on_value = true;
                }
        if (on_value) {
            if (also_on_panel(f)) tp.findings.push_back(&f);
            continue;
        }
        // The test itself, a trial, or a value with no Observation: the panel.
        tp.findings.push_back(&f);
        for (auto& op : tp.observations)
            if (about_kind(f, op.quantity->kind)) op.findings.push_back(&f);
    }
}

void plan_grades(Plan& plan, const PartMaker& parts, std::vector<std::string>& used_parts) {
    for (TestPlan& tp : plan.tests) {
        for (const Finding* f : tp.findings) {
            if (f->rule != "quality.grade") continue;
            for (const auto& [kind, grade] : f->values) {
                if (kind.empty() || grade.empty()) continue;
                GradePlan g;
                g.kind = kind;
                g.grade = grade;
                g.code = kind + ".grade";
                g.finding = f;
                for (const auto& op : tp.observations)
                    if (op.quantity->kind == kind) g.graded = &op.part;
                std::string part = "grade-" + kind;
                for (const auto& u : used_parts)
                    if (u == part) part += "-" + std::string(to_string(tp.test->type));
                used_parts.push_back(part);
                g.part = parts.make(plan.result_id, part);
                tp.grades.push_back(std::move(g));
            }
        }
    }
}

Plan make_plan(const NeutralResult& result, const BundleOptions& options,
               const QuantityTable& table) {
    Plan plan;
    plan.result_id = result.id.empty() ? result_identifier(result) : result.id;
    plan.update = result.revision > 1;
    plan.status = status_code(result);
    const std::string_view sys = options.identifier_system;
    const PartMaker parts(sys, plan.result_id);
    plan.result_query_prefix = "identifier=";
    append_query_encoded(plan.result_query_prefix, sys);
    plan.result_query_prefix += '|';
    append_query_encoded(plan.result_query_prefix, plan.result_id);
    plan.result_query_prefix += '-';
    plan.bundle = parts.make(plan.result_id, "bundle-r" + std::to_string(result.revision));

    for (const auto& id : result.subject.identifiers)
        if (!id.system.empty() && !id.value.empty()) plan.patient_identifiers.push_back(id);
    if (!plan.patient_identifiers.empty()) {
        // The result's own identifier (it outlives the write; Part keeps a view).
        for (const auto& id : result.subject.identifiers)
            if (!id.system.empty() && !id.value.empty()) {
                plan.patient = make_part(id.system, id.value);
                break;
            }
    } else {
        // No subject identifier (validation blocks this for FHIR): a
        // result-scoped one keeps the create conditional.
        plan.patient = parts.make(plan.result_id, "patient");
        plan.patient_identifiers.push_back(
            {std::string(plan.patient.system), plan.patient.value, ""});
    }

    const auto& dev = result.device;
    const std::string& device_value = !dev.id.empty() ? dev.id : dev.serial_number;
    plan.has_device = !device_value.empty();
    if (plan.has_device) plan.device = make_part(options.device_identifier_system, device_value);

    std::vector<std::string> used_parts;
    plan.tests.reserve(result.tests.size());
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
        tp.panel = parts.make(plan.result_id, "panel-" + std::string(to_string(test.type)));
        tp.observations.reserve(test.values.size());
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
            op.part = parts.make(plan.result_id, part);

            for (std::size_t ri = 0; ri < q.reference.size(); ++ri) {
                const ReferenceValues& ref = q.reference[ri];
                const std::pair<DerivedKind, const std::optional<double>*> wanted[] = {
                    {DerivedKind::predicted, &ref.predicted},
                    {DerivedKind::percent_predicted, &ref.percent_predicted},
                    {DerivedKind::z, &ref.z_score}};
                for (const auto& [what, number] : wanted) {
                    if (!number->has_value()) continue;
                    const QuantityKind* row = variant_row(table, q.kind, what);
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
                    dp.part = parts.make(plan.result_id, dpart);
                    op.derived.push_back(std::move(dp));
                }
            }
            tp.observations.push_back(std::move(op));
        }
        plan.tests.push_back(std::move(tp));
    }
    attach_findings(plan, result);
    plan_grades(plan, parts, used_parts);
    plan.report = parts.make(plan.result_id, "report");
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
            for (const auto& g : tp.grades) grade_entry(tp, g);
            panel_entry(tp);
        }
        report_entry();
        e_.end_array();
        e_.end_root();
    }

private:
    // A `note` array opened at its first item, so nothing is written when
    // there is no note; text() is a reused buffer for the next note.
    class NoteList {
    public:
        explicit NoteList(BundleWalk& w) : w_(w) { w_.scratch_.clear(); }
        ~NoteList() {
            if (open_) w_.e_.end_array();
        }
        std::string& text() { return w_.scratch_; }
        void add() {
            add(std::string_view(w_.scratch_));
            w_.scratch_.clear();
        }
        void add(std::string_view t) {
            if (t.empty()) return;
            if (!open_) w_.e_.begin_array("note");
            open_ = true;
            w_.note_item(t);
        }

    private:
        BundleWalk& w_;
        bool open_ = false;
    };

    // ---- entries ----

    void begin_entry(const Part& part, std::string_view type) {
        e_.begin_item();
        e_.string("fullUrl", part.url());
        e_.begin_resource(type);
    }

    // Bundle.entry.request: method, url, ifNoneExist (R4 order).
    void end_entry(const Part& part, std::string_view type, bool may_update) {
        e_.end_resource();
        e_.begin_object("request");
        // identifier=<system>|<value>, URL-encoded, so identifiers with spaces
        // or '&' still make one search.
        std::string& query = scratch_;
        query.clear();
        if (may_update && plan_.update) {
            query += type;
            query += '?';
        }
        if (part.result_scoped) {
            query += plan_.result_query_prefix;
            append_query_encoded(query,
                                 std::string_view(part.value).substr(plan_.result_id.size() + 1));
        } else {
            query += "identifier=";
            append_query_encoded(query, part.system);
            query += '|';
            append_query_encoded(query, part.value);
        }
        if (may_update && plan_.update) {
            e_.string("method", "PUT");
            e_.string("url", query);
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
        scratch_.clear();
        append_equation_label(scratch_, *dp.reference);
        e_.string("valueString", scratch_);
        e_.end_extension();
        e_.end_array();
        observation_head(dp.part, tp);
        quantity_code(dp.kind, dp.kind->key);
        references_and_time(tp);
        quantity_value("valueQuantity", dp.value, dp.decimals, dp.unit);
        {
            NoteList notes(*this);
            std::string& who = notes.text();
            who += "Computed by the ";
            who += to_string(dp.reference->origin);
            who += " from ";
            append_equation_label(who, *dp.reference);
            who += '.';
            notes.add();
            if (dp.what == DerivedKind::z) {
                append_z_band_text(notes.text(), dp.value);
                notes.add();
            }
        }
        device_reference();
        e_.begin_array("derivedFrom");
        reference_item(op.part.url());
        e_.end_array();
        end_entry(dp.part, "Observation", true);
    }

    void grade_entry(const TestPlan& tp, const GradePlan& g) {
        begin_entry(g.part, "Observation");
        observation_head(g.part, tp);
        std::string& display = scratch_;
        display.assign(g.kind);
        display += " quality grade";
        codeable_concept("code", options_.code_system_uri, g.code, display, display);
        references_and_time(tp);
        e_.string("valueString", g.grade);
        {
            NoteList notes(*this);
            finding_note(notes, *g.finding);
        }
        method(*tp.test);
        device_reference();
        if (g.graded != nullptr) {
            e_.begin_array("derivedFrom");
            reference_item(g.graded->url());
            e_.end_array();
        }
        end_entry(g.part, "Observation", true);
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
            reference_item(op.part.url());
            for (const auto& dp : op.derived) reference_item(dp.part.url());
        }
        for (const auto& g : tp.grades) {
            if (!any) e_.begin_array("hasMember");
            any = true;
            reference_item(g.part.url());
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
        reference_object("subject", plan_.patient.url());
        e_.string("effectiveDateTime", plan_.report_effective);
        if (!plan_.tests.empty()) {
            e_.begin_array("result");
            for (const auto& tp : plan_.tests) reference_item(tp.panel.url());
            e_.end_array();
        }
        end_entry(plan_.report, "DiagnosticReport", true);
    }

    // ---- Observation pieces ----

    // Fragment slots (emitters.hpp): bytes the same in every Observation.
    static constexpr std::size_t kStatusCategorySlot = 0;
    static constexpr std::size_t kSubjectSlot = 1;
    static constexpr std::size_t kDeviceSlot = 2;

    void observation_head(const Part& part, const TestPlan&) {
        identifier_array(part);
        e_.fragment(kStatusCategorySlot, [&] {
            e_.string("status", plan_.status);
            e_.begin_array("category");
            e_.begin_item();
            coding_array(kCategoryUri, "procedure", "Procedure");
            e_.end_item();
            e_.end_array();
        });
    }

    void references_and_time(const TestPlan& tp) {
        e_.fragment(kSubjectSlot, [&] { reference_object("subject", plan_.patient.url()); });
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

    // The set that drives the interpretation (header comment): the gateway's
    // GLI set when the policy computed one, else the first with LLN or ULN.
    static const ReferenceValues* primary_limits(const Quantity& q) {
        const ReferenceValues* first = nullptr;
        for (const auto& ref : q.reference) {
            if (!ref.lln && !ref.uln) continue;
            if (ref.origin == Origin::gateway && ref.equation_set.starts_with("GLI")) return &ref;
            if (first == nullptr) first = &ref;
        }
        return first;
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

    void measured_notes(const TestPlan&, const ObservationPlan& op) {
        const Quantity& q = *op.quantity;
        NoteList notes(*this);
        // The device's comments on this value first, as they were sent
        // (FHIR R4 Observation.note is Annotation[]; one Annotation each).
        for (const auto& c : q.comments) notes.add(c);
        if (q.condition == GasCondition::btps || q.condition == GasCondition::stpd ||
            q.condition == GasCondition::atps || q.condition == GasCondition::atpd) {
            std::string& text = notes.text();
            text += "Gas condition: ";
            text += to_string(q.condition);
            text += '.';
            notes.add();
        }
        if (q.origin == Origin::gateway) {
            std::string& text = notes.text();
            text += "Computed by the gateway";
            for (std::size_t i = 0; i < q.derived_from.size(); ++i) {
                text += i == 0 ? " from " : ", ";
                text += q.derived_from[i];
            }
            text += '.';
            notes.add();
        }
        for (const auto& ref : q.reference) {
            std::string& text = notes.text();
            text += "Reference values: ";
            append_equation_label(text, ref);
            text += ", computed by the ";
            text += to_string(ref.origin);
            text += '.';
            // Values the table has no variant row for travel as text, never lost.
            append_unrowed(text, q, ref, op);
            notes.add();
            if (ref.z_score) {
                append_z_band_text(notes.text(), *ref.z_score);
                notes.add();
            }
        }
        for (const Finding* f : op.findings) finding_note(notes, *f);
    }

    // A finding as note text: "Warning <rule>: <message>" (or "Info ...").
    void finding_note(NoteList& notes, const Finding& f) {
        std::string& text = notes.text();
        text += f.severity == Severity::warning ? "Warning " : "Info ";
        text += f.rule;
        text += ": ";
        text += f.message;
        notes.add();
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
        NoteList notes(*this);
        for (const auto& c : tp.test->comments) notes.add(c);
        for (const Finding* f : tp.findings) finding_note(notes, *f);
    }

    static void append_z_band_text(std::string& text, double z) {
        text += "z-score ";
        text += format_decimal(z, 2).view();
        text += ": ";
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
    }

    static void append_equation_label(std::string& out, const ReferenceValues& ref) {
        out += ref.equation_set.empty() ? std::string_view("unnamed equation set")
                                        : std::string_view(ref.equation_set);
        if (!ref.equation_version.empty()) {
            out += " (";
            out += ref.equation_version;
            out += ')';
        }
    }

    void method(const Test& test) {
        if (test.method.empty()) return;
        e_.begin_object("method");
        e_.string("text", test.method);
        e_.end_object();
    }

    void device_reference() {
        if (plan_.has_device)
            e_.fragment(kDeviceSlot, [&] { reference_object("device", plan_.device.url()); });
    }

    void reference_ranges(const ObservationPlan& op) {
        const Quantity& q = *op.quantity;
        bool any = false;
        std::size_t with_limits = 0;
        for (const auto& ref : q.reference)
            if (ref.lln || ref.uln) ++with_limits;
        const ReferenceValues* primary = q.value ? primary_limits(q) : nullptr;
        for (const auto& ref : q.reference) {
            if (!ref.lln && !ref.uln) continue;
            if (!any) e_.begin_array("referenceRange");
            any = true;
            // referenceRange: low high text (R4 order); obs-3 holds with text.
            e_.begin_item();
            if (ref.lln) simple_quantity("low", *ref.lln, op.decimals, q.unit);
            if (ref.uln) simple_quantity("high", *ref.uln, op.decimals, q.unit);
            std::string& text = scratch_;
            text = ref.lln && ref.uln ? "Lower and upper limits of normal"
                   : ref.lln          ? "Lower limit of normal"
                                      : "Upper limit of normal";
            text += " from ";
            append_equation_label(text, ref);
            text += ", computed by the ";
            text += to_string(ref.origin);
            text += '.';
            if (with_limits > 1 && &ref == primary) text += " This range sets the interpretation.";
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
            if (kind == q.kind) continue;  // never itself (a per-test mean of maneuvers)
            const Part* target = find_measured(tp, kind);
            if (target == nullptr) continue;
            if (!any) e_.begin_array("derivedFrom");
            any = true;
            reference_item(target->url());
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
    std::string scratch_;  // one text at a time (query, note), capacity reused
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
