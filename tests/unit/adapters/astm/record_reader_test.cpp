// ASTM E1394 record reader. Record and field numbers, the H delimiter
// declaration and the C / R / O / P field uses are those quoted in
// /work/shared/reference/interop-facts.md ("ASTM E1381 (LIS1-A) low level and
// E1394 (LIS2-A2) records"; flagged M there, i.e. from memory of E1394-97).
// The escape sequences (&F& &S& &R& &E& &Xhh&) and the L-3 code T (sender
// aborted) are from memory. Latin-1 to UTF-8: ISO-8859-1 maps byte b to code
// point U+00b (ISO/IEC 8859-1), and U+00E5 is C3 A5 in UTF-8 (RFC 3629).
#include <gtest/gtest.h>

#include <string>

#include "adapters/astm/record_reader.hpp"
#include "gateway/core/normalize.hpp"
#include "gateway/core/quantity_table.hpp"

namespace {

using namespace pftgw;
using pftgw::astm::read_e1394;

// Fixed offset for tests: the core has no tz database (device_profile.hpp).
std::optional<int> plus_one_hour(const std::string&, const LocalDateTime&) {
    return 60;
}
std::optional<int> no_offset(const std::string&, const LocalDateTime&) {
    return std::nullopt;
}

DeviceProfile spirometer() {
    DeviceProfile p;
    p.name = "test-spirometer";
    p.code_system = "Test FlowQuill";
    p.time_zone = "Europe/Oslo";
    p.equation_set = "GLI-2012";
    p.patient_identifier_system = "https://kestrelvale.example/fhir/identifier/mrn";
    p.height_unit = "cm";
    p.device.id = "SPX3";
    p.unit_aliases = {{"ml", "mL"}, {"mmHg", "mm[Hg]"}};
    CodeMapping f1{"F1", "FEV1", std::nullopt, "", GasCondition::atps, false, false};
    CodeMapping fvc{"FVC", "FVC", std::nullopt, "", GasCondition::atps, false, false};
    CodeMapping f1p{"F1P", "FEV1.pred", std::nullopt, "L", std::nullopt, false, false};
    CodeMapping f1z{"F1Z", "FEV1.z", std::nullopt, "", std::nullopt, false, false};
    CodeMapping f1t{"F1T", "FEV1", std::nullopt, "mL", GasCondition::atps, false, true};
    CodeMapping pef{"PEF", "PEF", std::nullopt, "L/s", GasCondition::btps, true, false};
    CodeMapping ta{"TAMB", "AMB_TEMP", std::nullopt, "Cel", std::nullopt, false, false};
    CodeMapping pa{"PAMB", "PB", std::nullopt, "mm[Hg]", std::nullopt, false, false};
    p.codes = {f1, fvc, f1p, f1z, f1t, pef, ta, pa};
    p.comment_values = {{"AMB", 2, "TAMB", 3}, {"AMB", 4, "PAMB", 5}};
    return p;
}

const Quantity* value_of(const NeutralResult& r, const std::string& kind) {
    for (const auto& t : r.tests)
        if (const Quantity* q = t.find(kind)) return q;
    return nullptr;
}

const Finding* finding(const std::vector<Finding>& fs, const std::string& rule) {
    for (const auto& f : fs)
        if (f.rule == rule) return &f;
    return nullptr;
}

std::string value_named(const Finding& f, const std::string& name) {
    for (const auto& [k, v] : f.values)
        if (k == name) return v;
    return "<none>";
}

// One session: H, P, O, R..., L; records end in CR (interop-facts.md).
const std::string kOneSession =
    "H|\\^&|||FQ3^3.2.1|||||||P|1|20260302090000\r"
    "P|1||KV100231||Ilvesson^Marta||19580411|F||||||||164\r"
    "O|1|ORD-1|004711|^^^SPIRO|||20260302085000\r"
    "R|1|^^^F1|2010|ml|1.73 to 2.81|N||F||||20260302085410|SPX3\r"
    "R|2|^^^FVC|2950|ml||||F\r"
    "L|1|N\r";

TEST(E1394Reader, OneSessionAsReceived) {
    const auto out = read_e1394(kOneSession, spirometer(), plus_one_hour, "test.astm");
    ASSERT_TRUE(out.findings.empty()) << out.findings[0].message;
    ASSERT_EQ(out.results.size(), 1u);
    const NeutralResult& r = out.results[0];
    ASSERT_EQ(r.subject.identifiers.size(), 1u);
    EXPECT_EQ(r.subject.identifiers[0].value, "KV100231");  // P-4 laboratory patient id
    EXPECT_EQ(r.subject.identifiers[0].type, "PI");
    EXPECT_EQ(r.subject.family_name, "Ilvesson");  // P-6 last^first
    EXPECT_EQ(r.subject.given_name, "Marta");
    EXPECT_EQ(r.subject.birth_date, (Date{1958, 4, 11}));   // P-8
    EXPECT_EQ(r.subject.sex_at_birth, SexAtBirth::female);  // P-9
    ASSERT_TRUE(r.subject.height.has_value());              // P-17, unit from the profile
    EXPECT_EQ(r.subject.height->unit, "cm");
    EXPECT_EQ(r.order.placer_number, "ORD-1");     // O-3 specimen id
    EXPECT_EQ(r.device_session_number, "004711");  // O-4 instrument specimen id
    EXPECT_EQ(r.device.id, "SPX3");
    EXPECT_EQ(r.device.software_version, "3.2.1");  // H-5 name^software version
    const Quantity* fev1 = value_of(r, "FEV1");
    ASSERT_NE(fev1, nullptr);
    EXPECT_EQ(fev1->value, 2010.0);
    EXPECT_EQ(fev1->unit, "mL");                     // the profile's UCUM for "ml"
    EXPECT_EQ(fev1->condition, GasCondition::atps);  // ASTM sends none: the profile's
    EXPECT_EQ(fev1->source,
              (SourceForm{"2010", "ml", "", "F1", "Test FlowQuill"}));  // exactly as sent
    ASSERT_EQ(fev1->reference.size(), 1u);                              // R-6 range
    EXPECT_EQ(fev1->reference[0].equation_set, "GLI-2012");
    EXPECT_EQ(fev1->reference[0].lln, 1.73);
    EXPECT_EQ(fev1->reference[0].uln, 2.81);
    EXPECT_EQ(r.tests[0].time, (Timestamp{{2026, 3, 2}, 8, 54, 10, 0, 60}));
}

TEST(E1394Reader, DelimitersOtherThanTheDefault) {
    // H-2 declares field '!', repeat '~', component '#', escape '$'.
    const std::string text =
        "H!~#$!!!FQ3#9.9\r"
        "P!1!!KV100477!!Brennigan#Tomasz\r"
        "O!1!!17\r"
        "R!1!###F1!3120!ml!2.10-3.50\r"
        "L!1!N\r";
    const auto out = read_e1394(text, spirometer(), plus_one_hour, "");
    ASSERT_EQ(out.results.size(), 1u);
    EXPECT_EQ(out.results[0].subject.family_name, "Brennigan");
    EXPECT_EQ(out.results[0].subject.given_name, "Tomasz");
    EXPECT_EQ(out.results[0].device.software_version, "9.9");
    const Quantity* fev1 = value_of(out.results[0], "FEV1");
    ASSERT_NE(fev1, nullptr);
    EXPECT_EQ(fev1->value, 3120.0);
    ASSERT_EQ(fev1->reference.size(), 1u);  // "2.10-3.50" form
    EXPECT_EQ(fev1->reference[0].lln, 2.10);
    EXPECT_EQ(fev1->reference[0].uln, 3.50);
}

TEST(E1394Reader, BadDelimiterDeclarationIsRefused) {
    const auto out = read_e1394("H|\\^^|\rL|1|N\r", spirometer(), plus_one_hour, "");
    EXPECT_TRUE(out.results.empty());
    EXPECT_NE(finding(out.findings, "astm.bad-header"), nullptr);
}

TEST(E1394Reader, RepeatsAndComponents) {
    // P-3 with two repeats: the first is read. C-4 with repeats and components.
    const std::string text =
        "H|\\^&\r"
        "P|1|KV100231\\OLD-7|||Ilvesson^Marta^Ann\r"
        "O|1\r"
        "R|1|^^^F1|2010|ml\r"
        "C|1|I|good effort^coached\\repeat 3|G\r"
        "L|1|N\r";
    const auto out = read_e1394(text, spirometer(), plus_one_hour, "");
    ASSERT_EQ(out.results.size(), 1u);
    const auto& r = out.results[0];
    ASSERT_EQ(r.subject.identifiers.size(), 1u);
    EXPECT_EQ(r.subject.identifiers[0].value, "KV100231");
    EXPECT_EQ(r.subject.identifiers[0].type, "MR");
    EXPECT_EQ(r.subject.given_name, "Marta Ann");  // first^middle
    // The C follows the FEV1 R record, so it is that value's comment.
    EXPECT_TRUE(r.tests[0].comments.empty());
    ASSERT_NE(value_of(r, "FEV1"), nullptr);
    EXPECT_EQ(value_of(r, "FEV1")->comments,
              std::vector<std::string>{"good effort coached repeat 3"});
}

TEST(E1394Reader, Escapes) {
    using pftgw::astm::decode_escapes;
    const pftgw::astm::Delimiters d;  // | \ ^ &
    EXPECT_EQ(decode_escapes("a&F&b&S&c&R&d&E&e", d), "a|b^c\\d&e");
    EXPECT_EQ(decode_escapes("&X4142&", d), "AB");
    bool unknown = false;
    EXPECT_EQ(decode_escapes("x&Q&y", d, &unknown), "x&Q&y");
    EXPECT_TRUE(unknown);

    const std::string text =
        "H|\\^&\r"
        "P|1|KV101005|||Delacorte&F&Hale^Rufus\r"
        "O|1\r"
        "R|1|^^^F1|1010|ml\r"
        "C|1|L|FEV1 &S& FVC &E& more&R&|G\r"
        "L|1|N\r";
    const auto out = read_e1394(text, spirometer(), plus_one_hour, "");
    ASSERT_EQ(out.results.size(), 1u);
    EXPECT_EQ(out.results[0].subject.family_name, "Delacorte|Hale");
    ASSERT_NE(value_of(out.results[0], "FEV1"), nullptr);
    EXPECT_EQ(value_of(out.results[0], "FEV1")->comments,
              std::vector<std::string>{"FEV1 ^ FVC & more\\"});
}

TEST(E1394Reader, TwoPatientsTwoSessionsEach) {
    const std::string text =
        "H|\\^&\r"
        "P|1|KV100231|||Ilvesson^Marta\r"
        "O|1|A1|S1\r"
        "R|1|^^^F1|2010|ml\r"
        "O|2|A2|S2\r"
        "R|1|^^^F1|2050|ml\r"
        "P|2|KV100477|||Brennigan^Tomasz\r"
        "O|1|B1|S3\r"
        "R|1|^^^F1|3100|ml\r"
        "O|2|B2|S4\r"
        "R|1|^^^FVC|4200|ml\r"
        "L|1|N\r";
    const auto out = read_e1394(text, spirometer(), plus_one_hour, "");
    ASSERT_EQ(out.results.size(), 4u);
    const char* families[] = {"Ilvesson", "Ilvesson", "Brennigan", "Brennigan"};
    const char* sessions[] = {"S1", "S2", "S3", "S4"};
    for (int i = 0; i < 4; ++i) {
        EXPECT_EQ(out.results[i].subject.family_name, families[i]);
        EXPECT_EQ(out.results[i].device_session_number, sessions[i]);
        ASSERT_EQ(out.results[i].tests.size(), 1u);
        EXPECT_EQ(out.results[i].tests[0].values.size(), 1u);  // no value leaks between sessions
    }
    EXPECT_EQ(value_of(out.results[1], "FEV1")->value, 2050.0);
    EXPECT_EQ(value_of(out.results[3], "FEV1"), nullptr);
    EXPECT_EQ(value_of(out.results[3], "FVC")->value, 4200.0);
}

TEST(E1394Reader, CommentsAttachToTheRecordBefore) {
    const std::string text =
        "H|\\^&\r"
        "P|1|KV100231|||Ilvesson^Marta\r"
        "C|1|L|wheelchair user|G\r"
        "O|1\r"
        "C|1|L|referred for dyspnoea|G\r"
        "R|1|^^^F1|2010|ml\r"
        "C|1|I|BEV above limit|I\r"
        "L|1|N\r";
    const auto out = read_e1394(text, spirometer(), plus_one_hour, "");
    ASSERT_EQ(out.results.size(), 1u);
    const auto& r = out.results[0];
    ASSERT_EQ(r.tests.size(), 1u);
    // C after O: about the order, so on every test; C after R: on that result
    // (E1394, interop-facts.md: a C record comments on the record before it).
    EXPECT_EQ(r.tests[0].comments, std::vector<std::string>{"referred for dyspnoea"});
    ASSERT_NE(value_of(r, "FEV1"), nullptr);
    EXPECT_EQ(value_of(r, "FEV1")->comments, std::vector<std::string>{"BEV above limit"});
    // C-5 'I' instrument flag: also a finding naming the value it is about.
    const Finding* flag = finding(r.findings, "device.flag");
    ASSERT_NE(flag, nullptr);
    EXPECT_EQ(value_named(*flag, "kind"), "FEV1");
    EXPECT_EQ(flag->path, "C record 7, field 4");
    // C after P: a patient comment, kept as an extension.
    ASSERT_EQ(r.extensions.size(), 1u);
    EXPECT_EQ(r.extensions[0].name, "patient-comment");
    EXPECT_EQ(r.extensions[0].properties[0].second, "wheelchair user");
}

TEST(E1394Reader, CommentAfterAResultIsThatValuesComment) {
    // E1394 (interop-facts.md, flag M): a C record is about the record before it.
    const std::string text =
        "H|\\^&\r"
        "P|1|X\r"
        "O|1\r"
        "R|1|^^^F1|2010|ml\r"
        "C|1|L|first on FEV1|G\r"
        "C|2|L|second on FEV1|G\r"
        "R|2|^^^FVC|2950|ml\r"
        "C|1|I|back-extrapolation high|I\r"
        "R|3|^^^F1T^2|1980|ml\r"
        "C|1|L|cough on trial 2|G\r"
        "R|4|^^^F1P|2.27|L\r"  // a predicted value is no value of its own: the test's
        "C|1|L|after the prediction|G\r"
        "R|5|^^^MVV|120|l/min\r"  // unmapped: no value made, so the test keeps it
        "C|1|L|after an unmapped code|G\r"
        "R|6|^^^FVC|2990|ml\r"  // a duplicate is not kept: nor is it the value's
        "C|1|L|after a duplicate|G\r"
        "L|1|N\r";
    const auto out = read_e1394(text, spirometer(), plus_one_hour, "");
    ASSERT_EQ(out.results.size(), 1u);
    const auto& r = out.results[0];
    ASSERT_EQ(r.tests.size(), 1u);
    const Quantity* fev1 = value_of(r, "FEV1");
    const Quantity* fvc = value_of(r, "FVC");
    ASSERT_NE(fev1, nullptr);
    ASSERT_NE(fvc, nullptr);
    EXPECT_EQ(fev1->comments, (std::vector<std::string>{"first on FEV1", "second on FEV1"}));
    EXPECT_EQ(fvc->comments, std::vector<std::string>{"back-extrapolation high"});
    ASSERT_EQ(r.tests[0].trials.size(), 1u);
    ASSERT_EQ(r.tests[0].trials[0].values.size(), 1u);
    EXPECT_EQ(r.tests[0].trials[0].values[0].comments,
              std::vector<std::string>{"cough on trial 2"});
    EXPECT_EQ(r.tests[0].comments,
              (std::vector<std::string>{"after the prediction", "after an unmapped code",
                                        "after a duplicate"}));
    // The 'I' instrument flag is still a finding naming its value.
    const Finding* flag = finding(r.findings, "device.flag");
    ASSERT_NE(flag, nullptr);
    EXPECT_EQ(value_named(*flag, "kind"), "FVC");
}

TEST(E1394Reader, UnmappedCodeIsAFindingWithTheValue) {
    const std::string text = "H|\\^&\rP|1|X\rO|1\rR|1|^^^F1|2010|ml\rR|2|^^^MVV|120|l/min\rL|1|N\r";
    const auto out = read_e1394(text, spirometer(), plus_one_hour, "in.astm");
    ASSERT_EQ(out.results.size(), 1u);
    const Finding* f = finding(out.results[0].findings, "profile.unmapped-code");
    ASSERT_NE(f, nullptr);
    EXPECT_EQ(f->severity, Severity::warning);
    EXPECT_EQ(f->path, "R record 5, field 3");
    EXPECT_EQ(value_named(*f, "code"), "MVV");
    EXPECT_EQ(value_named(*f, "value"), "120");
    EXPECT_EQ(value_named(*f, "unit"), "l/min");
    EXPECT_EQ(value_named(*f, "source"), "in.astm");
    EXPECT_EQ(out.results[0].tests[0].values.size(), 1u);
}

TEST(E1394Reader, AtpsVolumesWithAmbientValuesInAComment) {
    const std::string text =
        "H|\\^&\r"
        "P|1|X||KV100231|Ilvesson^Marta\r"
        "O|1|||||||20260302085000\r"
        "C|1|I|AMB^22.5^Cel^755^mmHg|G\r"
        "R|1|^^^F1|2010|ml\r"
        "R|2|^^^FVC|2610|ml\r"
        "L|1|N\r";
    const auto out = read_e1394(text, spirometer(), plus_one_hour, "");
    ASSERT_EQ(out.results.size(), 1u);
    NeutralResult r = out.results[0];
    ASSERT_TRUE(r.environment.temperature.has_value());
    EXPECT_EQ(r.environment.temperature->value, 22.5);
    EXPECT_EQ(r.environment.temperature->unit, "Cel");
    ASSERT_TRUE(r.environment.pressure.has_value());
    EXPECT_EQ(r.environment.pressure->value, 755.0);
    EXPECT_EQ(r.environment.pressure->unit, "mm[Hg]");
    EXPECT_EQ(r.environment.pressure->source.unit_text, "mmHg");
    EXPECT_EQ(value_of(r, "FEV1")->condition, GasCondition::atps);
    EXPECT_TRUE(r.tests[0].comments.empty());  // the AMB comment became values
    // The core's normalize can convert it: ambient values are there.
    const auto findings = normalize(r, quantity_table());
    for (const auto& f : findings) EXPECT_NE(f.rule, "condition.ambient-missing") << f.message;
    EXPECT_EQ(value_of(r, "FEV1")->condition, GasCondition::btps);
    EXPECT_EQ(value_of(r, "FEV1")->unit, "L");
}

TEST(E1394Reader, LocalTimeConvertedWithAFixedOffset) {
    const auto out = read_e1394(kOneSession, spirometer(), plus_one_hour, "");
    ASSERT_EQ(out.results.size(), 1u);
    // O-8 collection time 2026-03-02 08:50:00 local; the resolver says +01:00.
    EXPECT_EQ(out.results[0].session_time, (Timestamp{{2026, 3, 2}, 8, 50, 0, 0, 60}));

    DeviceProfile no_zone = spirometer();
    no_zone.time_zone.clear();
    const auto refused = read_e1394(kOneSession, no_zone, plus_one_hour, "");
    ASSERT_EQ(refused.results.size(), 1u);
    EXPECT_FALSE(refused.results[0].session_time.has_value());
    EXPECT_NE(finding(refused.results[0].findings, "time.no-offset"), nullptr);

    const auto gap = read_e1394(kOneSession, spirometer(), no_offset, "");
    ASSERT_EQ(gap.results.size(), 1u);
    const Finding* f = finding(gap.results[0].findings, "time.unresolved");
    ASSERT_NE(f, nullptr);
    EXPECT_EQ(f->path, "O record 3, field 8");
}

TEST(E1394Reader, DecimalComma) {
    DeviceProfile p = spirometer();
    p.decimal_separator = ',';
    const std::string text =
        "H|\\^&\rP|1|X\rO|1\rR|1|^^^F1|3,21|l|2,10 to 3,50\rR|2|^^^FVC|4.05|l\rL|1|N\r";
    const auto out = read_e1394(text, p, plus_one_hour, "");
    ASSERT_EQ(out.results.size(), 1u);
    const Quantity* fev1 = value_of(out.results[0], "FEV1");
    ASSERT_NE(fev1, nullptr);
    EXPECT_EQ(fev1->value, 3.21);
    EXPECT_EQ(fev1->source.value_text, "3,21");
    EXPECT_EQ(fev1->reference[0].lln, 2.10);
    // A point where the profile says comma is not guessed at.
    const Finding* f = finding(out.results[0].findings, "value.not-numeric");
    ASSERT_NE(f, nullptr);
    EXPECT_EQ(f->path, "R record 5, field 4");
    EXPECT_FALSE(value_of(out.results[0], "FVC")->value.has_value());
}

TEST(E1394Reader, Latin1Names) {
    DeviceProfile p = spirometer();
    p.charset = "ISO-8859-1";
    const std::string text = "H|\\^&\rP|1|X|||Ilvesson^M\xE5rta\rO|1\rR|1|^^^F1|1|ml\rL|1|N\r";
    const auto out = read_e1394(text, p, plus_one_hour, "");
    ASSERT_EQ(out.results.size(), 1u);
    EXPECT_EQ(out.results[0].subject.given_name, "M\xC3\xA5rta");
    // The same byte under ASCII is not guessed: replaced and reported.
    const auto ascii = read_e1394(text, spirometer(), plus_one_hour, "");
    ASSERT_EQ(ascii.results.size(), 1u);
    EXPECT_EQ(ascii.results[0].subject.given_name, "M\xEF\xBF\xBDrta");
    EXPECT_NE(finding(ascii.results[0].findings, "charset.invalid"), nullptr);
}

TEST(E1394Reader, TruncatedMessageGivesNoHalfResult) {
    std::string text = kOneSession;
    text.erase(text.find("L|1|N\r"));
    const auto out = read_e1394(text, spirometer(), plus_one_hour, "cut.astm");
    EXPECT_TRUE(out.results.empty());
    const Finding* f = finding(out.findings, "astm.truncated");
    ASSERT_NE(f, nullptr);
    EXPECT_EQ(f->severity, Severity::error);
    EXPECT_EQ(value_named(*f, "sessions_dropped"), "1");
}

TEST(E1394Reader, AbortedTerminationGivesNoResult) {
    std::string text = kOneSession;
    text.replace(text.find("L|1|N"), 5, "L|1|T");  // L-3 T: sender aborted (from memory)
    const auto out = read_e1394(text, spirometer(), plus_one_hour, "");
    EXPECT_TRUE(out.results.empty());
    EXPECT_NE(finding(out.findings, "astm.aborted"), nullptr);
}

TEST(E1394Reader, SecondMessageAfterACutOneIsRead) {
    std::string cut = kOneSession;
    cut.erase(cut.find("L|1|N\r"));
    const auto out = read_e1394(cut + kOneSession, spirometer(), plus_one_hour, "");
    EXPECT_EQ(out.results.size(), 1u);
    EXPECT_NE(finding(out.findings, "astm.truncated"), nullptr);
}

TEST(E1394Reader, VariantsTrialsAndOverride) {
    const std::string text =
        "H|\\^&\rP|1|X\rO|1\r"
        "R|1|^^^F1Z|-0,84\r"  // before its base: attached at the end of the session
        "R|2|^^^F1|2010|ml\r"
        "R|3|^^^F1P|2.27|L\r"
        "R|4|^^^F1T^1|1980|ml\r"
        "R|5|^^^F1T^2|2010|ml\r"
        "R|6|^^^PEF|350|L/min\r"  // override_sent: the profile's L/s replaces it
        "L|1|N\r";
    const auto out = read_e1394(text, spirometer(), plus_one_hour, "");
    ASSERT_EQ(out.results.size(), 1u);
    const auto& r = out.results[0];
    const Quantity* fev1 = value_of(r, "FEV1");
    ASSERT_NE(fev1, nullptr);
    ASSERT_EQ(fev1->reference.size(), 1u);
    EXPECT_EQ(fev1->reference[0].predicted, 2.27);
    EXPECT_EQ(fev1->reference[0].unit, "L");
    EXPECT_FALSE(fev1->reference[0].z_score.has_value());  // "-0,84" is not '.'-decimal
    EXPECT_NE(finding(r.findings, "reference.no-base"), nullptr);
    ASSERT_EQ(r.tests[0].trials.size(), 2u);
    EXPECT_EQ(r.tests[0].trials[1].number, 2);
    EXPECT_EQ(r.tests[0].trials[1].values[0].value, 2010.0);
    const Quantity* pef = value_of(r, "PEF");
    ASSERT_NE(pef, nullptr);
    EXPECT_EQ(pef->unit, "L/s");
    EXPECT_EQ(pef->source.unit_text, "L/min");
    EXPECT_EQ(pef->condition, GasCondition::btps);
}

}  // namespace
