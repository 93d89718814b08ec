// HL7 v2 reader, OBX through the device profile and the other mapped fields:
// codes (with coding system), NM values with a decimal comma, units kept as
// sent in source, OBX-7 range, OBX-11 status, time zones, unmapped codes.
// Field meanings from HL7 2.5.1 as quoted in interop-facts.md (OBX-7 range
// text, OBX-11 table 0085, OBX-14, OBX-18, timestamps with offset); local
// times checked against the system tzdata (glibc), the outside reference.
#include <gtest/gtest.h>

#include <string>

#include "adapters/hl7v2/oru_reader.hpp"
#include "gateway/core/normalize.hpp"
#include "oru_reader_support.hpp"

namespace pftgw::hl7v2 {
namespace {

using testing::has_rule;
using testing::read;
using testing::spiroline_profile;
using testing::value_of;

std::string message(const std::string& obr7, const std::string& obx) {
    return "MSH|^~\\&|SPIROLINE|LAB2|PFTGW|KVH|20260302085000+0100||ORU^R01^ORU_R01|M1|P|2.5.1\r"
           "PID|1||KV100231^^^KVH&2.999.1.1&ISO^MR||Ilvesson^Marta||19580411|F\r"
           "OBR|1|PL-77|SL4-004711||||" +
           obr7 + "|||||||||||ACC-9\r" + obx;
}

TEST(OruReaderMapping, SubjectOrderDeviceAndValuesAsReceived) {
    const std::string msg =
        message("20260302085410+0100",
                "OBX|1|NM|F1^FEV1^99BRK||2.51|L|2.10-3.50|N|||F|||20260302085410+0100||||SL4-17\r"
                "OBX|2|NM|F1P^FEV1 pred^99BRK||2.92|L|||||F\r"
                "OBX|3|NM|F1Z^FEV1 z^99BRK||-0.84|{z-score}|||||F\r"
                "OBX|4|NM|HT^Height^99BRK||164|cm|||||F\r");
    const auto out = read(msg, spiroline_profile());
    ASSERT_EQ(out.messages.size(), 1u);
    const ReadMessage& m = out.messages[0];
    ASSERT_TRUE(m.result);
    const NeutralResult& r = *m.result;
    EXPECT_EQ(m.control_id, "M1");
    EXPECT_EQ(r.subject.identifiers[0].value, "KV100231");
    EXPECT_EQ(r.subject.identifiers[0].type, "MR");
    EXPECT_EQ(r.subject.sex_at_birth, SexAtBirth::female);
    EXPECT_EQ(to_iso(*r.subject.birth_date), "1958-04-11");
    EXPECT_EQ(r.order.placer_number, "PL-77");
    EXPECT_EQ(r.order.filler_number, "SL4-004711");
    EXPECT_EQ(r.order.accession_number, "ACC-9");
    EXPECT_EQ(r.device_session_number, "SL4-004711");
    EXPECT_EQ(r.device.id, "SL4-17");  // OBX-18 before MSH-4
    EXPECT_EQ(r.device.manufacturer, "Brackenfield");
    EXPECT_EQ(to_iso(*r.session_time), "2026-03-02T08:54:10+01:00");
    ASSERT_EQ(r.tests.size(), 1u);
    ASSERT_EQ(r.tests[0].values.size(), 1u);
    const Quantity& fev1 = r.tests[0].values[0];
    EXPECT_EQ(fev1.kind, "FEV1");
    EXPECT_EQ(*fev1.value, 2.51);
    EXPECT_EQ(fev1.unit, "L");
    EXPECT_EQ(fev1.condition, GasCondition::btps);  // the profile's, the device sent none
    EXPECT_EQ(fev1.source.code, "F1");
    EXPECT_EQ(fev1.source.code_system, "99BRK");
    ASSERT_EQ(fev1.reference.size(), 1u);
    EXPECT_EQ(fev1.reference[0].equation_set, "GLI-2012");
    EXPECT_EQ(*fev1.reference[0].lln, 2.10);
    EXPECT_EQ(*fev1.reference[0].uln, 3.50);
    EXPECT_EQ(*fev1.reference[0].predicted, 2.92);
    EXPECT_EQ(*fev1.reference[0].z_score, -0.84);
    ASSERT_TRUE(r.subject.height);
    EXPECT_EQ(*r.subject.height->value, 164);
    EXPECT_TRUE(m.findings.empty()) << m.findings[0].message;
}

// A device's non-UCUM unit is replaced by the profile's when override_sent,
// and kept exactly in source.unit_text; the decimal comma per profile.
TEST(OruReaderMapping, ProfileUnitOverrideAndDecimalComma) {
    auto profile = spiroline_profile();
    profile.decimal_separator = ',';
    const auto out = read(message("20260302085410+0100",
                                  "OBX|1|NM|DL^TLCO^99BRK||25,31|ml/min/mmHg|||||F\r"
                                  "OBX|2|NM|F1^FEV1^99BRK||2.51|L|||||F\r"),
                          profile);
    const NeutralResult& r = *out.messages[0].result;
    const Quantity* dlco = r.find_test(TestType::diffusing_capacity)->find("DLCO");
    ASSERT_NE(dlco, nullptr);
    EXPECT_EQ(*dlco->value, 25.31);
    EXPECT_EQ(dlco->unit, "mL/min/mm[Hg]");
    EXPECT_EQ(dlco->source.unit_text, "ml/min/mmHg");
    EXPECT_EQ(dlco->source.value_text, "25,31");
    // With a comma profile, "2.51" is not a number: kept as text, no value.
    const Quantity* fev1 = r.find_test(TestType::spirometry)->find("FEV1");
    EXPECT_FALSE(fev1->value);
    EXPECT_EQ(fev1->source.value_text, "2.51");
}

// A condition written into OBX-6 ("L BTPS") is the sent condition; the
// profile's override replaces it and the text stays in source.
TEST(OruReaderMapping, ConditionInUnitTextAndOverride) {
    const auto out = read(message("20260302085410+0100",
                                  "OBX|1|NM|F1^FEV1^99BRK||2.51|L(ATPS)|||||F\r"
                                  "OBX|2|NM|VIN^VI^99BRK|2|4.10|L BTPS|||||F\r"),
                          spiroline_profile());
    const NeutralResult& r = *out.messages[0].result;
    const Quantity& fev1 = r.tests[0].values[0];
    EXPECT_EQ(fev1.unit, "L");
    EXPECT_EQ(fev1.condition, GasCondition::atps);  // sent; profile only fills
    EXPECT_EQ(fev1.source.unit_text, "L(ATPS)");
    const pftgw::Test* dl = r.find_test(TestType::diffusing_capacity);
    ASSERT_NE(dl, nullptr);
    ASSERT_EQ(dl->trials.size(), 1u);
    EXPECT_EQ(dl->trials[0].number, 2);  // OBX-4 sub-id
    const Quantity& vi = dl->trials[0].values[0];
    EXPECT_EQ(vi.condition, GasCondition::atps);  // override_sent
    EXPECT_EQ(vi.source.condition_text, "BTPS");
}

// OBX-3 matched with its coding system where the profile qualifies the code,
// and through the alternate identifier (OBX-3.4 / 3.6).
TEST(OruReaderMapping, CodeMatchedWithCodingSystem) {
    const auto out = read(message("20260302085410+0100",
                                  "OBX|1|NM|PF^PEF^99BRK||7.9|L/s|||||F\r"
                                  "OBX|2|NM|PF^PEF^99OTHER||8.1|L/s|||||F\r"
                                  "OBX|3|NM|33452-4^PEF^LN^PF^PEF^99BRK||8.3|L/s|||||F\r"),
                          spiroline_profile());
    const ReadMessage& m = out.messages[0];
    const pftgw::Test& t = m.result->tests[0];
    ASSERT_EQ(t.values.size(), 2u);
    EXPECT_EQ(*t.values[0].value, 7.9);
    EXPECT_EQ(*t.values[1].value, 8.3);
    EXPECT_EQ(t.values[1].source.code, "PF");
    ASSERT_EQ(m.findings.size(), 1u);
    EXPECT_EQ(m.findings[0].rule, kRuleUnmapped);
    EXPECT_EQ(value_of(m.findings[0], "coding_system"), "99OTHER");
}

// A code no profile maps is a warning that keeps code, value and unit.
TEST(OruReaderMapping, UnmappedCodeIsKeptAsAFinding) {
    const auto out = read(message("20260302085410+0100",
                                  "OBX|1|NM|F1^FEV1^99BRK||2.51|L|||||F\r"
                                  "OBX|2|NM|XQ9^Mystery^99BRK||0.77|L/s|||||F\r"),
                          spiroline_profile());
    const ReadMessage& m = out.messages[0];
    ASSERT_EQ(m.findings.size(), 1u);
    const Finding& f = m.findings[0];
    EXPECT_EQ(f.rule, "profile.unmapped-code");
    EXPECT_EQ(f.severity, Severity::warning);
    EXPECT_EQ(value_of(f, "code"), "XQ9");
    EXPECT_EQ(value_of(f, "value"), "0.77");
    EXPECT_EQ(value_of(f, "unit"), "L/s");
    EXPECT_EQ(value_of(f, "location"), "OBX^2^3");
    EXPECT_EQ(m.result->findings, m.findings);
    EXPECT_EQ(m.result->tests[0].values.size(), 1u);
}

// HL7 v2.5.1 ch. 7 (ORU^R01: OBR {NTE} {OBX {NTE}}, from memory): an NTE
// after an OBX is a comment on that observation; one after the OBR, before
// any OBX, a comment on the order (the test). An OBX that makes no value of a
// test (unmapped, withdrawn, a predicted value, the height) leaves its NTE on
// the test, where it was before values had comments of their own.
TEST(OruReaderMapping, NteAfterObxIsThatValuesComment) {
    const auto out = read(message("20260302085410+0100",
                                  "NTE|1|L|about the whole test\r"
                                  "OBX|1|NM|F1^FEV1^99BRK||2.51|L|||||F\r"
                                  "NTE|1|L|first on FEV1\r"
                                  "NTE|2|L|second on FEV1\r"
                                  "OBX|2|NM|FVC^FVC^99BRK||3.40|L|||||F\r"
                                  "NTE|1|L|on FVC\r"
                                  "OBX|3|NM|F1P^FEV1 pred^99BRK||2.92|L|||||F\r"
                                  "NTE|1|L|after the prediction\r"
                                  "OBX|4|NM|XQ9^Mystery^99BRK||0.77|L/s|||||F\r"
                                  "NTE|1|L|after an unmapped code\r"
                                  "OBX|5|NM|FVC^FVC^99BRK||3.50|L|||||W\r"
                                  "NTE|1|L|after a withdrawn value\r"
                                  "OBX|6|NM|HT^Height^99BRK||164|cm|||||F\r"
                                  "NTE|1|L|after the height\r"
                                  "OBX|7|NM|VIN^VI^99BRK|2|3.9|L|||||F\r"
                                  "NTE|1|L|on maneuver 2\r"),
                          spiroline_profile());
    ASSERT_EQ(out.messages.size(), 1u);
    ASSERT_TRUE(out.messages[0].result);
    const NeutralResult& r = *out.messages[0].result;
    const pftgw::Test* spiro = r.find_test(TestType::spirometry);
    const pftgw::Test* dlco = r.find_test(TestType::diffusing_capacity);
    ASSERT_NE(spiro, nullptr);
    ASSERT_NE(dlco, nullptr);
    ASSERT_NE(spiro->find("FEV1"), nullptr);
    ASSERT_NE(spiro->find("FVC"), nullptr);
    EXPECT_EQ(spiro->find("FEV1")->comments,
              (std::vector<std::string>{"first on FEV1", "second on FEV1"}));
    EXPECT_EQ(spiro->find("FVC")->comments, std::vector<std::string>{"on FVC"});
    EXPECT_EQ(spiro->comments,
              (std::vector<std::string>{"about the whole test", "after the prediction",
                                        "after an unmapped code", "after a withdrawn value",
                                        "after the height"}));
    ASSERT_EQ(dlco->trials.size(), 1u);
    ASSERT_EQ(dlco->trials[0].values.size(), 1u);
    EXPECT_EQ(dlco->trials[0].values[0].comments, std::vector<std::string>{"on maneuver 2"});
    EXPECT_TRUE(dlco->comments.empty());
    ASSERT_TRUE(r.subject.height);
    EXPECT_TRUE(r.subject.height->comments.empty());
}

// OBX-11 table 0085: C makes the result a correction; P preliminary; X absent;
// W withdrawn and reported.
TEST(OruReaderMapping, ObxStatusGivesResultStatus) {
    const auto profile = spiroline_profile();
    const auto corrected =
        read(message("20260302085410+0100", "OBX|1|NM|F1^FEV1^99BRK||2.64|L|||||C\r"), profile);
    EXPECT_EQ(corrected.messages[0].result->status, ResultStatus::corrected);
    EXPECT_EQ(corrected.messages[0].result->revision, 2);
    const auto prelim =
        read(message("20260302085410+0100", "OBX|1|NM|F1^FEV1^99BRK||2.64|L|||||P\r"), profile);
    EXPECT_EQ(prelim.messages[0].result->status, ResultStatus::preliminary);
    EXPECT_EQ(prelim.messages[0].result->revision, 1);
    const auto absent = read(message("20260302085410+0100",
                                     "OBX|1|NM|F1^FEV1^99BRK|||L|||||X\r"
                                     "OBX|2|NM|FVC^FVC^99BRK||3.1|L|||||W\r"),
                             profile);
    const ReadMessage& m = absent.messages[0];
    ASSERT_EQ(m.result->tests[0].values.size(), 1u);
    EXPECT_EQ(*m.result->tests[0].values[0].absent_reason, "not-measured");
    EXPECT_FALSE(m.result->tests[0].values[0].value);
    EXPECT_TRUE(has_rule(m.findings, kRuleObxStatus));
}

// Time zones: an offset is used as sent (+0530 is 330 minutes, -0500 is -300);
// a local time is resolved in the profile's zone with its own date's rules
// (Europe/Oslo: +01:00 in March before the switch, +02:00 in July, per tzdata);
// without a zone it is a time.no-offset error, never UTC by default.
TEST(OruReaderMapping, TimeZonesAppliedNotIgnored) {
    const auto profile = spiroline_profile();
    const auto with = [&](const std::string& ts, const DeviceProfile& p) {
        return read(message(ts, "OBX|1|NM|F1^FEV1^99BRK||2.51|L|||||F\r"), p);
    };
    EXPECT_EQ(to_iso(*with("202603020854+0530", profile).messages[0].result->session_time),
              "2026-03-02T08:54:00+05:30");
    EXPECT_EQ(to_iso(*with("20260302085410.25-0500", profile).messages[0].result->session_time),
              "2026-03-02T08:54:10.250-05:00");
    EXPECT_EQ(to_iso(*with("20260302085410", profile).messages[0].result->session_time),
              "2026-03-02T08:54:10+01:00");
    EXPECT_EQ(to_iso(*with("20260715085410", profile).messages[0].result->session_time),
              "2026-07-15T08:54:10+02:00");
    auto no_zone = profile;
    no_zone.time_zone.clear();
    const auto lost = with("20260302085410", no_zone);
    EXPECT_FALSE(lost.messages[0].result->session_time);
    EXPECT_TRUE(has_rule(lost.messages[0].findings, kRuleNoOffset));
    EXPECT_TRUE(has_errors(lost.messages[0].findings));
    const auto bad = with("2026030208541", profile);
    EXPECT_TRUE(has_rule(bad.messages[0].findings, kRuleTimeInvalid));
}

// The reader converts nothing: normalize (core) does, from what it produced.
TEST(OruReaderMapping, NormalizeConvertsWhatTheReaderKept) {
    auto out =
        read(message("20260302085410+0100", "OBX|1|NM|DL^TLCO^99BRK||25.31|ml/min/mmHg|||||F\r"),
             spiroline_profile());
    NeutralResult r = *out.messages[0].result;
    const auto findings = normalize(r, quantity_table());
    EXPECT_FALSE(has_errors(findings));
    const Quantity& dlco = r.tests[0].values[0];
    EXPECT_EQ(dlco.unit, "mmol/min/kPa");
    EXPECT_NEAR(*dlco.value, 25.31 / 2.987, 1e-9);  // DECISIONS.md factor
    EXPECT_EQ(dlco.source.unit_text, "ml/min/mmHg");
}

}  // namespace
}  // namespace pftgw::hl7v2
