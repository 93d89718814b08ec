// What the FHIR Bundle carries of the physiology engine (issue 4) and of the
// gateway's reference values (issue 5). Inputs are made by the core itself
// (normalize, assess_physiology, apply_reference_values) on invented
// sessions; the JSON is parsed with nlohmann-json. FHIR rules checked are R4
// 4.0.1 (interop-facts.md, FHIR section); the grade codes are the project's
// own (bundle_writer.cpp header comment), shared with the HL7 writer.
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "adapters/fhir/bundle_writer.hpp"
#include "gateway/core/normalize.hpp"
#include "gateway/core/physiology/physiology.hpp"
#include "gateway/core/quantity_table.hpp"
#include "gateway/core/reference/reference_values.hpp"
#include "tests/support/examples.hpp"

namespace pftgw::fhir {
namespace {

using nlohmann::json;
using testing::q;
using testing::ts;
constexpr GasCondition kNone = GasCondition::none;
constexpr GasCondition kBtps = GasCondition::btps;

const BundleOptions kOptions{};

json bundle_of(const NeutralResult& r) {
    std::string out;
    write_bundle_json(r, kOptions, quantity_table(), out);
    return json::parse(out);
}

const json* entry_by_part(const json& bundle, const std::string& part) {
    const std::string suffix = "-" + part;
    for (const auto& e : bundle["entry"])
        for (const auto& id : e["resource"].value("identifier", json::array())) {
            const std::string v = id.value("value", "");
            if (id.value("system", "") == kOptions.identifier_system && v.size() >= suffix.size() &&
                v.compare(v.size() - suffix.size(), suffix.size(), suffix) == 0)
                return &e;
        }
    return nullptr;
}

std::string notes_of(const json& resource) {
    std::string all;
    for (const auto& n : resource.value("note", json::array()))
        all += n["text"].get<std::string>() + "\n";
    return all;
}

bool has(const std::string& text, const std::string& part) {
    return text.find(part) != std::string::npos;
}

std::vector<std::string> references(const json& resource, const std::string& name) {
    std::vector<std::string> out;
    for (const auto& r : resource.value(name, json::array()))
        out.push_back(r["reference"].get<std::string>());
    return out;
}

bool contains(const std::vector<std::string>& v, const std::string& s) {
    return std::find(v.begin(), v.end(), s) != v.end();
}

// The hand-worked maneuver of tests/unit/core/physiology_dlco_test.cpp:
// 26.2 mL/min/mm[Hg] recomputed (core's own expectation, not checked here).
Trial dlco_trial(int n, int minute) {
    Trial t;
    t.number = n;
    t.time = ts(2026, 3, 14, 9, minute, 0, 60);
    t.tracer = "helium";
    t.values = {q("VI", 4.50, "L", kBtps),          q("VD_INSTR", 100, "mL", kNone),
                q("VD_ANAT", 0.15, "L", kBtps),     q("FICO", 0.30, "%", kNone),
                q("FACO", 0.12, "%", kNone),        q("FITR", 10.0, "%", kNone),
                q("FATR", 8.5, "%", kNone),         q("T_INSP_START", 0.0, "s", kNone),
                q("T_INSP_END", 2.0, "s", kNone),   q("T_SAMPLE_START", 10.2, "s", kNone),
                q("T_SAMPLE_END", 11.0, "s", kNone)};
    return t;
}

Trial spiro_trial(int n, double fev1, double fvc) {
    Trial t;
    t.number = n;
    t.values = {q("FEV1", fev1, "L", kBtps), q("FVC", fvc, "L", kBtps),
                q("BEV", 0.05, "L", kBtps),  q("EOTV", 0.01, "L", kBtps),
                q("FET", 9.0, "s", kNone),   q("PEF", 8.0 + n, "L/s", kBtps)};
    return t;
}

// Spirometry from three trials and DLCO from two maneuvers, normalized and
// assessed as the pipeline does (prepare.hpp order).
NeutralResult assessed_session(double pb_mmhg = 760.0, bool mismatch = false) {
    NeutralResult r;
    r.id = "TEST-FHIR-PHYS-1";
    r.session_time = ts(2026, 3, 14, 9, 0, 0, 60);
    r.subject.identifiers.push_back({"urn:oid:2.999.40.1", "H1", "MR"});
    r.subject.sex_at_birth = SexAtBirth::female;
    r.subject.birth_date = Date{1970, 5, 1};
    r.subject.height = q("HEIGHT", 166, "cm", kNone);
    r.device.id = "DEV1";
    r.environment.temperature = q("AMB_TEMP", 22.0, "Cel", kNone);
    r.environment.pressure = q("PB", pb_mmhg, "mm[Hg]", kNone);
    pftgw::Test spiro;
    spiro.type = TestType::spirometry;
    spiro.trials = {spiro_trial(1, 3.10, 4.00), spiro_trial(2, 3.20, 3.92),
                    spiro_trial(3, 3.05, 3.86)};
    r.tests.push_back(spiro);
    pftgw::Test dl;
    dl.type = TestType::diffusing_capacity;
    dl.method = "single-breath";
    dl.trials = {dlco_trial(1, 0), dlco_trial(2, 5)};
    if (mismatch)
        dl.trials[1].values.push_back(q("DLCO", 22.3, "mL/min/mm[Hg]", GasCondition::stpd));
    dl.values.push_back(q("HB", 11.0, "g/dL", kNone));
    r.tests.push_back(dl);
    normalize(r, quantity_table());
    assess_physiology(r);
    return r;
}

TEST(FhirPhysiology, DlcoGradeAndRepeatabilityOnPanelAndOnTheDlcoObservation) {
    const auto b = bundle_of(assessed_session());
    const json* panel = entry_by_part(b, "panel-diffusing-capacity");
    const json* dlco = entry_by_part(b, "obs-DLCO");
    ASSERT_NE(panel, nullptr);
    ASSERT_NE(dlco, nullptr);
    const std::string panel_notes = notes_of((*panel)["resource"]);
    EXPECT_TRUE(has(panel_notes, "quality.grade: DLCO session grade A")) << panel_notes;
    EXPECT_TRUE(has(panel_notes, "quality.dlco.repeatability")) << panel_notes;
    EXPECT_TRUE(has(panel_notes, "quality.dlco.maneuver")) << panel_notes;  // per maneuver
    const std::string dlco_notes = notes_of((*dlco)["resource"]);
    EXPECT_TRUE(has(dlco_notes, "DLCO session grade A")) << dlco_notes;
    EXPECT_TRUE(has(dlco_notes, "quality.dlco.repeatability")) << dlco_notes;
    // The spirometry grade is not the DLCO's business.
    EXPECT_FALSE(has(dlco_notes, "spirometry grade"));
}

TEST(FhirPhysiology, GradeIsItsOwnObservationInTheProjectCodeSystem) {
    const auto b = bundle_of(assessed_session());
    const json* measured = entry_by_part(b, "obs-DLCO");
    const json* grade = entry_by_part(b, "grade-DLCO");
    ASSERT_NE(measured, nullptr);
    ASSERT_NE(grade, nullptr);
    const auto& g = (*grade)["resource"];
    EXPECT_EQ(g["resourceType"], "Observation");
    EXPECT_EQ(g["code"]["coding"][0]["system"], kOptions.code_system_uri);
    EXPECT_EQ(g["code"]["coding"][0]["code"], "DLCO.grade");
    EXPECT_EQ(g["valueString"], "A");
    EXPECT_FALSE(g.contains("valueQuantity"));
    EXPECT_FALSE(g.contains("interpretation"));  // a grade is not a clinical flag
    EXPECT_EQ(references(g, "derivedFrom"), std::vector<std::string>{(*measured)["fullUrl"]});
    EXPECT_EQ(g["category"][0]["coding"][0]["code"], "procedure");
    const auto members =
        references((*entry_by_part(b, "panel-diffusing-capacity"))["resource"], "hasMember");
    EXPECT_TRUE(contains(members, (*grade)["fullUrl"]));
    // Conditional create on its own identifier, like every other entry.
    const auto& id = g["identifier"][0];
    EXPECT_EQ((*grade)["request"]["ifNoneExist"], "identifier=" + id["system"].get<std::string>() +
                                                      "|" + id["value"].get<std::string>());
    // Spirometry: FEV1 and FVC separately (ATS/ERS 2019); 3.20 vs 3.10 and
    // 4.00 vs 3.92 L are within 0.150 L, so both A (the core's own test says so).
    const json* fev1 = entry_by_part(b, "grade-FEV1");
    const json* fvc = entry_by_part(b, "grade-FVC");
    ASSERT_NE(fev1, nullptr);
    ASSERT_NE(fvc, nullptr);
    EXPECT_EQ((*fev1)["resource"]["code"]["coding"][0]["code"], "FEV1.grade");
    EXPECT_EQ((*fev1)["resource"]["valueString"], "A");
    EXPECT_EQ((*fvc)["resource"]["code"]["coding"][0]["code"], "FVC.grade");
    EXPECT_EQ(references((*fev1)["resource"], "derivedFrom"),
              std::vector<std::string>{(*entry_by_part(b, "obs-FEV1"))["fullUrl"]});
}

TEST(FhirPhysiology, SpirometryRepeatabilityOnItsValueAndOnThePanel) {
    const auto b = bundle_of(assessed_session());
    const std::string fev1 = notes_of((*entry_by_part(b, "obs-FEV1"))["resource"]);
    const std::string fvc = notes_of((*entry_by_part(b, "obs-FVC"))["resource"]);
    const std::string panel = notes_of((*entry_by_part(b, "panel-spirometry"))["resource"]);
    EXPECT_TRUE(has(fev1, "FEV1 repeatable")) << fev1;
    EXPECT_FALSE(has(fev1, "FVC repeatable")) << fev1;
    EXPECT_TRUE(has(fvc, "FVC repeatable")) << fvc;
    EXPECT_TRUE(has(fev1, "spirometry grade FEV1 A")) << fev1;
    EXPECT_TRUE(has(panel, "FEV1 repeatable") && has(panel, "FVC repeatable")) << panel;
    EXPECT_TRUE(has(panel, "quality.spirometry.trial")) << panel;
}

TEST(FhirPhysiology, RecomputationMismatchIsAWarningNoteWhereItsPathPoints) {
    NeutralResult r = assessed_session(760.0, true);
    std::string path;
    for (const auto& f : r.findings)
        if (f.rule == "dlco.recompute-mismatch") path = f.path;
    // The path names the maneuver (a trial has no Observation): the panel.
    ASSERT_EQ(path, "tests[1].trials[1].values[DLCO]");
    const auto b = bundle_of(r);
    const std::string panel = notes_of((*entry_by_part(b, "panel-diffusing-capacity"))["resource"]);
    EXPECT_TRUE(has(panel,
                    "Warning dlco.recompute-mismatch: DLCO sent 22.3, recomputed from your "
                    "maneuver 26.2 mL/min/mm[Hg]"))
        << panel;
}

TEST(FhirPhysiology, AdjustedDlcoPointsAtWhatItWasMadeFrom) {
    // 600 mm[Hg]: PIO2 = 0.21 x (600 - 47) = 116 mm[Hg], far enough below 150
    // for the altitude adjustment (physiology.hpp); Hb 11.0 g/dL for Cotes.
    const NeutralResult r = assessed_session(600.0);
    const pftgw::Test& dl = r.tests[1];
    ASSERT_NE(dl.find("DLCO_HB"), nullptr);
    ASSERT_NE(dl.find("DLCO_ALT"), nullptr);
    const auto b = bundle_of(r);
    const std::string dlco_url = (*entry_by_part(b, "obs-DLCO"))["fullUrl"];
    const std::string hb_url = (*entry_by_part(b, "obs-HB"))["fullUrl"];
    const auto& hb = (*entry_by_part(b, "obs-DLCO_HB"))["resource"];
    EXPECT_EQ(references(hb, "derivedFrom"), (std::vector<std::string>{dlco_url, hb_url}));
    EXPECT_TRUE(has(notes_of(hb), "Computed by the gateway from DLCO, HB."));
    // PB is the session's environment, not an Observation: only DLCO is linked,
    // the note still names both.
    const auto& alt = (*entry_by_part(b, "obs-DLCO_ALT"))["resource"];
    EXPECT_EQ(references(alt, "derivedFrom"), std::vector<std::string>{dlco_url});
    EXPECT_TRUE(has(notes_of(alt), "Computed by the gateway from DLCO, PB."));
    // The reported DLCO is the gateway's mean of the maneuvers: never derived from itself.
    for (const auto& ref : references((*entry_by_part(b, "obs-DLCO"))["resource"], "derivedFrom"))
        EXPECT_NE(ref, dlco_url);
}

// ---- reference values (issue 5) ----

// The example session plus the gateway's GLI values beside the device's.
NeutralResult with_both_sets() {
    NeutralResult r = testing::example_normalized_result();
    ReferencePolicy policy;
    policy.mode = ReferenceMode::both;
    apply_reference_values(r, policy);
    return r;
}

const ReferenceValues* gateway_set(const Quantity& q) {
    for (const auto& ref : q.reference)
        if (ref.origin == Origin::gateway) return &ref;
    return nullptr;
}

TEST(FhirReference, BothSetsGoOutEachNamingItsSet) {
    const NeutralResult r = with_both_sets();
    const Quantity& fev1 = r.tests[0].values[0];
    ASSERT_EQ(fev1.kind, "FEV1");
    ASSERT_EQ(fev1.reference.size(), 2u);
    const ReferenceValues* gw = gateway_set(fev1);
    ASSERT_NE(gw, nullptr);
    const auto b = bundle_of(r);
    const auto& o = (*entry_by_part(b, "obs-FEV1"))["resource"];
    ASSERT_EQ(o["referenceRange"].size(), 2u);
    const std::string device_text = o["referenceRange"][0]["text"];
    const std::string gateway_text = o["referenceRange"][1]["text"];
    EXPECT_TRUE(has(device_text, "GLI Global 2022") && has(device_text, "computed by the device"));
    EXPECT_TRUE(has(gateway_text, gw->equation_set) &&
                has(gateway_text, "computed by the gateway"));
    if (!gw->equation_version.empty()) EXPECT_TRUE(has(gateway_text, gw->equation_version));
    EXPECT_DOUBLE_EQ(o["referenceRange"][1]["low"]["value"].get<double>(),
                     std::round(*gw->lln * 100) / 100);  // FEV1: 2 display decimals
    // The driving set says so; the other does not.
    EXPECT_TRUE(has(gateway_text, "sets the interpretation"));
    EXPECT_FALSE(has(device_text, "sets the interpretation"));
    // Each set's predicted value is its own Observation with the equation extension.
    const json* pred1 = entry_by_part(b, "obs-FEV1.pred");
    const json* pred2 = entry_by_part(b, "obs-FEV1.pred-2");
    ASSERT_NE(pred1, nullptr);
    ASSERT_NE(pred2, nullptr);
    EXPECT_EQ((*pred1)["resource"]["extension"][0]["url"], kOptions.equation_extension_url);
    EXPECT_EQ((*pred1)["resource"]["extension"][0]["valueString"], "GLI Global 2022");
    const std::string label2 = (*pred2)["resource"]["extension"][0]["valueString"];
    EXPECT_EQ(label2.rfind(gw->equation_set, 0), 0u) << label2;
    EXPECT_TRUE(has(notes_of((*pred2)["resource"]), "Computed by the gateway"));
}

TEST(FhirReference, GatewayGliSetDrivesInterpretationWhenComputed) {
    NeutralResult r = with_both_sets();
    Quantity& fev1 = r.tests[0].values[0];
    const ReferenceValues* gw = gateway_set(fev1);
    ASSERT_TRUE(gw != nullptr && gw->lln);
    // Below the gateway's LLN, above the device's (lowered for the test): L.
    fev1.reference[0].lln = *gw->lln - 1.0;
    fev1.value = *gw->lln - 0.05;
    auto code = [](const json& b) {
        return (*entry_by_part(b, "obs-FEV1"))["resource"]["interpretation"][0]["coding"][0]["code"]
            .get<std::string>();
    };
    EXPECT_EQ(code(bundle_of(r)), "L");
    // Without the gateway's set, the first set decides: N.
    fev1.reference.erase(fev1.reference.begin() + 1);
    EXPECT_EQ(code(bundle_of(r)), "N");
}

TEST(FhirReference, FirstSetDecidesWhenNoGatewaySet) {
    NeutralResult r = testing::example_normalized_result();
    Quantity& fev1 = r.tests[0].values[0];
    ReferenceValues second = fev1.reference[0];
    second.equation_set = "ECSC 1993";
    second.lln = 2.90;  // FEV1 2.61 would be L by this one
    fev1.reference.push_back(second);
    const auto b = bundle_of(r);
    const auto& o = (*entry_by_part(b, "obs-FEV1"))["resource"];
    EXPECT_EQ(o["interpretation"][0]["coding"][0]["code"], "N");
    EXPECT_TRUE(has(o["referenceRange"][0]["text"].get<std::string>(), "sets the interpretation"));
}

TEST(FhirReference, ZScoreBandTextAndCautionOnEveryZObservation) {
    const auto b = bundle_of(with_both_sets());
    int z_observations = 0;
    for (const auto& e : b["entry"]) {
        const auto& o = e["resource"];
        if (o["resourceType"] != "Observation") continue;
        const std::string code = o["code"]["coding"][0]["code"];
        // Interpretation only L / H / N (DECISIONS.md, patient safety).
        for (const auto& i : o.value("interpretation", json::array())) {
            const std::string c = i["coding"][0]["code"];
            EXPECT_TRUE(c == "L" || c == "H" || c == "N") << c;
        }
        if (o.value("valueQuantity", json::object()).value("code", "") != "{z-score}") continue;
        ++z_observations;
        const std::string notes = notes_of(o);
        // Bands of lung-function-facts.md (Stanojevic 2022) and the caution.
        EXPECT_TRUE(has(notes, "-1.645 / -2.5 / -4.0")) << code;
        EXPECT_TRUE(has(notes, "licensed staff")) << code;
        const double z = o["valueQuantity"]["value"];
        const char* band = z > 1.645     ? "above +1.645"
                           : z >= -1.645 ? "at or above -1.645"
                           : z >= -2.5   ? "between -2.5 and -1.645"
                           : z >= -4.0   ? "between -4.0 and -2.5"
                                         : "below -4.0";
        EXPECT_TRUE(has(notes, band)) << code << " z " << z << "\n" << notes;
    }
    EXPECT_GT(z_observations, 5);  // device and gateway z-scores
}

TEST(FhirReference, ZBandEdges) {
    // Each band edge and just past it (lung-function-facts.md, Stanojevic 2022).
    const std::pair<double, const char*> cases[] = {
        {-1.645, "at or above -1.645"},    {-1.65, "between -2.5 and -1.645"},
        {-2.5, "between -2.5 and -1.645"}, {-2.51, "between -4.0 and -2.5"},
        {-4.0, "between -4.0 and -2.5"},   {-4.01, "below -4.0"},
        {1.645, "at or above -1.645"},     {1.65, "above +1.645"}};
    for (const auto& [z, band] : cases) {
        NeutralResult r = testing::example_normalized_result();
        r.tests[0].values[0].reference[0].z_score = z;
        const auto b = bundle_of(r);
        const std::string notes = notes_of((*entry_by_part(b, "obs-FEV1.z"))["resource"]);
        EXPECT_TRUE(has(notes, band)) << z << "\n" << notes;
    }
}

}  // namespace
}  // namespace pftgw::fhir
