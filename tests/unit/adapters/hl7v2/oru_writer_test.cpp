// The HL7 v2.5.1 ORU^R01 writer: fields by number, codes, values, flags,
// statuses, times and escaping. Field positions and meanings follow the
// 2.5.1 segment definitions as shipped in npm hl7v2-dictionary 1.8.0
// (tests/conformance/node_modules/hl7v2-dictionary) unless a comment says otherwise.
#include "adapters/hl7v2/oru_writer.hpp"

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <ctime>
#include <string>

#include "gateway/core/identity.hpp"
#include "gateway/core/time.hpp"
#include "hl7_split.hpp"
#include "tests/support/examples.hpp"

namespace pftgw::hl7v2 {
namespace {

using testing::parse_message;
using testing::Segment;
using testing::segments_named;

std::string write(const NeutralResult& r, const OruOptions& o = {}) {
    std::string out;
    write_oru_r01(r, o, quantity_table(), out);
    return out;
}

std::string escaped(std::string_view text) {
    std::string out;
    append_escaped(text, out);
    return out;
}

// The OBX whose OBX-3.1 is `code` (and OBX-4 is `sub_id`); fails the test if absent.
Segment obx_with_code(const std::vector<Segment>& all, std::string_view code,
                      std::string_view sub_id = "") {
    for (const auto& s : all)
        if (s.id == "OBX" && s.component(3, 1) == code && s.field(4) == sub_id) return s;
    ADD_FAILURE() << "no OBX with code " << code << " sub-id '" << sub_id << "'";
    return {};
}

OruOptions site_options() {
    OruOptions o;
    o.sending_facility = "NORTHLAB";
    o.receiving_application = "RIS";
    o.receiving_facility = "NORTH-HOSP";
    return o;
}

// HL7 2.5.1 ch. 2: MSH-1 is the field separator, MSH-2 the encoding characters.
TEST(OruWriter, MshFieldsByNumber) {
    const auto r = pftgw::testing::example_normalized_result();
    const auto msg = parse_message(write(r, site_options()));
    ASSERT_FALSE(msg.empty());
    const Segment& msh = msg.front();
    ASSERT_EQ(msh.id, "MSH");
    EXPECT_EQ(msh.field(1), "|");
    EXPECT_EQ(msh.field(2), "^~\\&");
    EXPECT_EQ(msh.field(3), "PFTGW");
    EXPECT_EQ(msh.field(4), "NORTHLAB");
    EXPECT_EQ(msh.field(5), "RIS");
    EXPECT_EQ(msh.field(6), "NORTH-HOSP");
    EXPECT_EQ(msh.field(7), "20260314091200+0100");  // the session time, with its offset
    EXPECT_EQ(msh.field(8), "");
    EXPECT_EQ(msh.field(9), "ORU^R01^ORU_R01");
    EXPECT_EQ(msh.field(10), hl7_control_id(r.id, 1, "hl7v2"));
    EXPECT_EQ(msh.field(10).size(), 20u);  // 2.5.1 MSH-10 length 20 (hl7v2-dictionary 1.8.0)
    EXPECT_EQ(msh.field(11), "P");
    EXPECT_EQ(msh.field(12), "2.5.1");
    for (int n = 13; n <= 17; ++n) EXPECT_EQ(msh.field(n), "") << "MSH-" << n;
    EXPECT_EQ(msh.field(18), "UNICODE UTF-8");  // table 0211 (interop-facts.md, M)
}

TEST(OruWriter, MessageTimeFromOptionsKeepsItsOffset) {
    auto o = site_options();
    o.message_time_iso = "2026-03-15T18:00:05-05:00";
    const auto msg = parse_message(write(pftgw::testing::example_normalized_result(), o));
    EXPECT_EQ(msg.front().field(7), "20260315180005-0500");
    EXPECT_FALSE(check_oru_options(o).has_value());
}

TEST(OruWriter, CheckOptionsRefusesBadTimeAndProcessingId) {
    OruOptions o;
    o.message_time_iso = "2026-03-15T18:00:05";  // no offset
    EXPECT_TRUE(check_oru_options(o).has_value());
    o.message_time_iso.clear();
    o.processing_id = 'X';  // table 0103 has D, P, T only
    EXPECT_TRUE(check_oru_options(o).has_value());
    o.processing_id = 'T';
    EXPECT_FALSE(check_oru_options(o).has_value());
    EXPECT_EQ(
        parse_message(write(pftgw::testing::example_normalized_result(), o)).front().field(11),
        "T");
}

TEST(OruWriter, SameResultSameBytes) {
    const auto r = pftgw::testing::example_normalized_result();
    EXPECT_EQ(write(r), write(r));
    // Appends: a second message goes after the first, the first is untouched.
    std::string out;
    write_oru_r01(r, {}, quantity_table(), out);
    const std::string first = out;
    write_oru_r01(r, {}, quantity_table(), out);
    EXPECT_EQ(out, first + first);
}

TEST(OruWriter, ControlIdStableAndKeyedByRevisionAndTarget) {
    auto r = pftgw::testing::example_normalized_result();
    const auto id1 = parse_message(write(r)).front().field(10);
    EXPECT_EQ(parse_message(write(r)).front().field(10), id1);

    OruOptions other_target;
    other_target.target = "hl7v2-traditional";
    const auto id_target = parse_message(write(r, other_target)).front().field(10);
    EXPECT_NE(id_target, id1);
    EXPECT_EQ(id_target, hl7_control_id(r.id, 1, "hl7v2-traditional"));

    r.revision = 2;
    const auto id2 = parse_message(write(r)).front().field(10);
    EXPECT_NE(id2, id1);
    EXPECT_EQ(id2, hl7_control_id(r.id, 2, "hl7v2"));

    auto other = pftgw::testing::example_normalized_result(2);
    EXPECT_NE(parse_message(write(other)).front().field(10), id1);
}

// Segments end in CR (2.5.1 ch. 2); no LF, no MLLP bytes 0x0B / 0x1C inside.
TEST(OruWriter, SegmentsEndInCrOnly) {
    const std::string m = write(pftgw::testing::example_normalized_result());
    ASSERT_FALSE(m.empty());
    EXPECT_EQ(m.back(), '\r');
    EXPECT_EQ(m.find('\n'), std::string::npos);
    EXPECT_EQ(m.find('\x0b'), std::string::npos);
    EXPECT_EQ(m.find('\x1c'), std::string::npos);
    EXPECT_EQ(m.rfind("MSH", 0), 0u);
}

// ORU_R01 structure (interop-facts.md, from hl7v2-dictionary 1.8.0):
// MSH PID { ORC OBR [NTE] { OBX [NTE] } }.
TEST(OruWriter, SegmentOrder) {
    const auto msg = parse_message(write(pftgw::testing::example_normalized_result()));
    std::string order;
    for (const auto& s : msg) {
        if (s.id == "MSH")
            order += 'M';
        else if (s.id == "PID")
            order += 'P';
        else if (s.id == "ORC")
            order += 'C';
        else if (s.id == "OBR")
            order += 'R';
        else if (s.id == "OBX")
            order += 'X';
        else if (s.id == "NTE")
            order += 'n';
        else
            order += '?';
    }
    EXPECT_EQ(order.substr(0, 4), "MPCR");
    EXPECT_EQ(order.find('?'), std::string::npos);
    // Every ORC is directly followed by OBR; NTE only after OBR, OBX or NTE.
    for (std::size_t i = 0; i < order.size(); ++i) {
        if (order[i] == 'C') EXPECT_EQ(order[i + 1], 'R');
        if (order[i] == 'n') EXPECT_NE(std::string("RXn").find(order[i - 1]), std::string::npos);
    }
    EXPECT_EQ(segments_named(msg, "OBR").size(), 3u);
    EXPECT_EQ(segments_named(msg, "ORC").size(), 3u);
}

TEST(OruWriter, PidIdentifiersNameBirthDateSex) {
    auto r = pftgw::testing::example_normalized_result();
    r.subject.identifiers.push_back({"https://north.example/id/insurance", "INS-44", ""});
    r.subject.identifiers.push_back({"LOCALPAS", "P9", "PI"});
    const auto pid = segments_named(parse_message(write(r)), "PID").at(0);
    EXPECT_EQ(pid.field(1), "1");
    // CX: ID ^ check digit ^ scheme ^ assigning authority (HD: namespace & universal id &
    // type, table 0301 ISO / URI) ^ identifier type (table 0203); repetitions with ~.
    EXPECT_EQ(pid.field(3),
              "H500001^^^&2.999.40.1&ISO^MR~INS-44^^^&https://north.example/id/insurance&URI"
              "~P9^^^LOCALPAS^PI");
    EXPECT_EQ(pid.field(5), "Brandvold^Ines");
    EXPECT_EQ(pid.field(7), "19680521");
    EXPECT_EQ(pid.field(8), "F");
}

// PID-8 table 0001 (M, F, U used here): administrative gender first, else sex at birth.
TEST(OruWriter, AdministrativeSexFallsBackToSexAtBirth) {
    auto r = pftgw::testing::example_normalized_result();
    r.subject.administrative_gender.clear();
    r.subject.sex_at_birth = SexAtBirth::male;
    EXPECT_EQ(segments_named(parse_message(write(r)), "PID").at(0).field(8), "M");
    r.subject.sex_at_birth = SexAtBirth::unknown;
    EXPECT_EQ(segments_named(parse_message(write(r)), "PID").at(0).field(8), "U");
    r.subject.administrative_gender = "other";
    EXPECT_EQ(segments_named(parse_message(write(r)), "PID").at(0).field(8), "U");
    r.subject.administrative_gender = "male";
    r.subject.sex_at_birth = SexAtBirth::female;
    EXPECT_EQ(segments_named(parse_message(write(r)), "PID").at(0).field(8), "M");
}

TEST(OruWriter, OrcAndObrPerTest) {
    const auto msg = parse_message(write(pftgw::testing::example_normalized_result()));
    const auto orc = segments_named(msg, "ORC");
    const auto obr = segments_named(msg, "OBR");
    ASSERT_EQ(obr.size(), 3u);
    EXPECT_EQ(orc[0].field(1), "RE");  // table 0119: RE observations to follow
    EXPECT_EQ(orc[0].field(2), "PL-7001");
    EXPECT_EQ(obr[0].field(1), "1");
    EXPECT_EQ(obr[0].field(2), "PL-7001");
    // Spirometry panel LOINC 81459-0 (lung-function-facts.md "Codes").
    EXPECT_EQ(obr[0].field(4), "81459-0^Spirometry panel^LN");
    EXPECT_EQ(obr[1].component(4, 3), "99PFTGW");
    EXPECT_EQ(obr[2].component(4, 3), "99PFTGW");
    EXPECT_EQ(obr[0].field(7), "20260314091500+0100");
    EXPECT_EQ(obr[1].field(7), "20260314094000+0100");
    EXPECT_EQ(obr[2].field(7), "20260314100500+0100");
    EXPECT_EQ(obr[0].field(18), "ACC-9001");
    EXPECT_EQ(obr[0].field(25), "F");  // table 0123
}

// OBX-2 NM, OBX-3 CE code^text^LN (2.5.1: CE, interop-facts.md), OBX-5 with the
// table's display decimals, OBX-6 unit^unit^UCUM, OBX-7 LLN-ULN, OBX-8 N,
// OBX-11 F, OBX-14 the test time with offset.
TEST(OruWriter, Fev1Observation) {
    const auto msg = parse_message(write(pftgw::testing::example_normalized_result()));
    const auto obx = obx_with_code(msg, "20150-9");
    EXPECT_EQ(obx.field(1), "1");
    EXPECT_EQ(obx.field(2), "NM");
    EXPECT_EQ(obx.field(3), "20150-9^Forced expiratory volume in 1 second^LN");
    EXPECT_EQ(obx.field(4), "");
    EXPECT_EQ(obx.field(5), "2.61");
    EXPECT_EQ(obx.field(6), "L^L^UCUM");
    EXPECT_EQ(obx.field(7), "2.10-3.50");
    EXPECT_EQ(obx.field(8), "N");
    EXPECT_EQ(obx.field(11), "F");
    EXPECT_EQ(obx.field(14), "20260314091500+0100");
    // OBX-18 EI: 22 characters in 2.5.1, "SPX7^Northwind Respiratory Spirograph 7"
    // does not fit, so only the device id goes there.
    EXPECT_EQ(obx.field(18), "SPX7");
}

TEST(OruWriter, EquipmentNamespaceWhenItFits) {
    auto r = pftgw::testing::example_normalized_result();
    r.device.manufacturer = "NW";
    r.device.model = "S7";
    const auto obx = obx_with_code(parse_message(write(r)), "20150-9");
    EXPECT_EQ(obx.field(18), "SPX7^NW S7");
}

TEST(OruWriter, DecimalsAndProjectCodes) {
    const auto msg = parse_message(write(pftgw::testing::example_normalized_result()));
    EXPECT_EQ(obx_with_code(msg, "19926-5").field(5), "0.768");  // FEV1/FVC: 3 decimals
    EXPECT_EQ(obx_with_code(msg, "19926-5").field(6), "1^1^UCUM");
    EXPECT_EQ(obx_with_code(msg, "65819-5").field(5), "8.4");  // FET: 1 decimal
    const auto fef75 = obx_with_code(msg, "FEF75");
    EXPECT_EQ(fef75.component(3, 3), "99PFTGW");
    EXPECT_EQ(fef75.field(5), "0.61");
    EXPECT_EQ(fef75.field(8), "");  // no reference set: no flag
    EXPECT_EQ(obx_with_code(msg, "19911-7").field(6), "mmol/min/kPa^mmol/min/kPa^UCUM");
    EXPECT_EQ(obx_with_code(msg, "RV_TLC").field(5), "0.324");
}

// Predicted, LLN, ULN, z and percent predicted as their own OBX, coded by the
// table's variant rows (LOINC predicted / %pred where the facts file has one).
TEST(OruWriter, ReferenceValuesAsOwnObservations) {
    const auto msg = parse_message(write(pftgw::testing::example_normalized_result()));
    const auto pred = obx_with_code(msg, "20149-1", "1");  // FEV1 predicted
    EXPECT_EQ(pred.field(5), "2.80");
    EXPECT_EQ(pred.field(6), "L^L^UCUM");
    EXPECT_EQ(pred.field(8), "");
    const auto lln = obx_with_code(msg, "FEV1.lln", "1");
    EXPECT_EQ(lln.component(3, 3), "99PFTGW");
    EXPECT_EQ(lln.field(5), "2.10");
    EXPECT_EQ(obx_with_code(msg, "FEV1.uln", "1").field(5), "3.50");
    const auto z = obx_with_code(msg, "FEV1.z", "1");
    EXPECT_EQ(z.field(5), "-0.52");
    EXPECT_EQ(z.field(6), "{z-score}^{z-score}^UCUM");
    const auto pct = obx_with_code(msg, "20152-5", "1");  // FEV1 % predicted
    EXPECT_EQ(pct.field(5), "93");
    EXPECT_EQ(pct.field(6), "%^%^UCUM");
    EXPECT_EQ(obx_with_code(msg, "19910-9", "1").field(5), "7.60");  // DLCO predicted
}

TEST(OruWriter, ReferenceSetNamedInNote) {
    auto r = pftgw::testing::example_normalized_result();
    r.tests[0].values[0].reference[0].equation_version = "2023 update";
    auto second = r.tests[0].values[0].reference[0];
    second.equation_set = "Local 2019";
    second.equation_version.clear();
    second.origin = Origin::gateway;
    second.predicted = 2.95;
    r.tests[0].values[0].reference.push_back(second);
    const std::string m = write(r);
    EXPECT_NE(m.find("NTE|1|L|Reference set 1 (OBX-4 1) for FEV1: GLI Global 2022, version 2023 "
                     "update; computed by the device."),
              std::string::npos);
    // NTE 2 is set 1's z-score band text.
    EXPECT_NE(m.find("NTE|3|O|Reference set 2 (OBX-4 2) for FEV1: Local 2019; computed by the "
                     "gateway."),
              std::string::npos);
    EXPECT_EQ(obx_with_code(parse_message(m), "20149-1", "2").field(5), "2.95");
}

// Flags: L below LLN, H above ULN, N otherwise; equal to a limit is N (LLN is
// the 5th centile, z = -1.645, lung-function-facts.md: "below LLN" is abnormal).
// Compared at the displayed decimals so the flag agrees with OBX-5 and OBX-7.
TEST(OruWriter, FlagBoundaries) {
    EXPECT_EQ(abnormal_flag(2.10, 2.10, 3.50, 2), "N");
    EXPECT_EQ(abnormal_flag(2.09, 2.10, 3.50, 2), "L");
    EXPECT_EQ(abnormal_flag(3.50, 2.10, 3.50, 2), "N");
    EXPECT_EQ(abnormal_flag(3.51, 2.10, 3.50, 2), "H");
    EXPECT_EQ(abnormal_flag(2.0951, 2.10, 3.50, 2), "N");  // shown as 2.10
    EXPECT_EQ(abnormal_flag(2.0949, 2.10, 3.50, 2), "L");  // shown as 2.09
    EXPECT_EQ(abnormal_flag(1.0, 2.10, std::nullopt, 2), "L");
    EXPECT_EQ(abnormal_flag(9.0, 2.10, std::nullopt, 2), "N");
    EXPECT_EQ(abnormal_flag(9.0, std::nullopt, 3.50, 2), "H");
    EXPECT_EQ(abnormal_flag(1.0, std::nullopt, 3.50, 2), "N");
    EXPECT_EQ(abnormal_flag(1.0, std::nullopt, std::nullopt, 2), "");
    EXPECT_EQ(abnormal_flag(1.0, NAN, NAN, 2), "");
}

TEST(OruWriter, FlagsAndRangesInMessage) {
    auto r = pftgw::testing::example_normalized_result();
    auto& fev1 = r.tests[0].values[0];
    fev1.value = 2.05;
    auto& fvc = r.tests[0].values[1];
    fvc.value = 4.30;
    fvc.reference[0].lln.reset();
    auto& ratio = r.tests[0].values[2];
    ratio.reference[0].uln.reset();
    const auto msg = parse_message(write(r));
    EXPECT_EQ(obx_with_code(msg, "20150-9").field(8), "L");
    const auto fvc_obx = obx_with_code(msg, "19870-5");
    EXPECT_EQ(fvc_obx.field(7), "<4.25");
    EXPECT_EQ(fvc_obx.field(8), "H");
    const auto ratio_obx = obx_with_code(msg, "19926-5");
    EXPECT_EQ(ratio_obx.field(7), ">0.700");
    EXPECT_EQ(ratio_obx.field(8), "N");
}

// DECISIONS.md (patient safety): never LL / HH / A, whatever the value.
TEST(OruWriter, NeverCriticalFlags) {
    auto r = pftgw::testing::example_normalized_result();
    for (double v = -5.0; v <= 20.0; v += 0.37) {
        for (auto& t : r.tests)
            for (auto& q : t.values) {
                q.value = v;
                for (auto& ref : q.reference) ref.z_score = -v;
            }
        for (const auto& s : segments_named(parse_message(write(r)), "OBX")) {
            const auto f = s.field(8);
            EXPECT_TRUE(f.empty() || f == "L" || f == "H" || f == "N") << f;
        }
    }
}

// OBX-11 table 0085 / OBR-25 table 0123: C corrected, P preliminary, F final.
TEST(OruWriter, CorrectedAndPreliminaryStatus) {
    auto r = pftgw::testing::example_normalized_result();
    r.revision = 2;
    auto msg = parse_message(write(r));
    for (const auto& s : segments_named(msg, "OBX")) EXPECT_EQ(s.field(11), "C");
    for (const auto& s : segments_named(msg, "OBR")) EXPECT_EQ(s.field(25), "C");

    r.revision = 1;
    r.status = ResultStatus::corrected;
    for (const auto& s : segments_named(parse_message(write(r)), "OBX"))
        EXPECT_EQ(s.field(11), "C");

    r.status = ResultStatus::preliminary;
    msg = parse_message(write(r));
    for (const auto& s : segments_named(msg, "OBX")) EXPECT_EQ(s.field(11), "P");
    for (const auto& s : segments_named(msg, "OBR")) EXPECT_EQ(s.field(25), "P");
}

// An absent value is never a 0: empty OBX-2/OBX-5, OBX-11 X (table 0085
// "results cannot be obtained for this observation"), the reason in an NTE.
TEST(OruWriter, AbsentQuantity) {
    auto r = pftgw::testing::example_normalized_result();
    auto& pef = r.tests[0].values[3];
    ASSERT_EQ(pef.kind, "PEF");
    pef.value.reset();
    pef.absent_reason = "not-measured";
    const std::string m = write(r);
    const auto msg = parse_message(m);
    const auto obx = obx_with_code(msg, "33452-4");
    EXPECT_EQ(obx.field(2), "");
    EXPECT_EQ(obx.field(5), "");
    EXPECT_EQ(obx.field(8), "");
    EXPECT_EQ(obx.field(11), "X");
    EXPECT_NE(m.find("NTE|1|L|Not reported: not-measured"), std::string::npos);
}

// TS with an offset everywhere (interop-facts.md: always send the offset).
TEST(OruWriter, EveryTimeHasAnOffset) {
    auto r = pftgw::testing::example_normalized_result();
    r.session_time->offset_minutes = -210;  // -03:30
    r.tests[1].time->offset_minutes = -300;
    r.tests[2].time.reset();  // falls back to the session time
    const auto msg = parse_message(write(r));
    auto has_offset = [](const std::string& ts) {
        return ts.size() >= 19 && (ts[ts.size() - 5] == '+' || ts[ts.size() - 5] == '-');
    };
    EXPECT_EQ(msg.front().field(7), "20260314091200-0330");
    const auto obr = segments_named(msg, "OBR");
    EXPECT_EQ(obr[1].field(7), "20260314094000-0500");
    EXPECT_EQ(obr[2].field(7), "20260314091200-0330");
    for (const auto& s : obr) EXPECT_TRUE(has_offset(s.field(7))) << s.field(7);
    for (const auto& s : segments_named(msg, "OBX")) EXPECT_TRUE(has_offset(s.field(14)));
    // Same form as core's to_hl7_ts.
    EXPECT_EQ(obr[1].field(7), to_hl7_ts(*r.tests[1].time));
    auto t = *r.session_time;
    t.millisecond = 250;
    r.session_time = t;
    EXPECT_EQ(parse_message(write(r)).front().field(7), to_hl7_ts(t));
}

// Escapes (HL7 2.5.1 ch. 2; interop-facts.md V): \F\ | , \S\ ^ , \T\ & , \R\ ~ ,
// \E\ \ ; control bytes as \Xhh\ (project choice over .br: exact in any text type).
TEST(OruWriter, EscapesEachDelimiter) {
    EXPECT_EQ(escaped("a|b"), "a\\F\\b");
    EXPECT_EQ(escaped("a^b"), "a\\S\\b");
    EXPECT_EQ(escaped("a&b"), "a\\T\\b");
    EXPECT_EQ(escaped("a~b"), "a\\R\\b");
    EXPECT_EQ(escaped("a\\b"), "a\\E\\b");
    EXPECT_EQ(escaped("\\F\\"), "\\E\\F\\E\\");  // literal text that looks like an escape
    EXPECT_EQ(escaped("line1\r\nline2\n"), "line1\\X0D\\\\X0A\\line2\\X0A\\");
    EXPECT_EQ(escaped(std::string("\x0b\x1c", 2)), "\\X0B\\\\X1C\\");
    EXPECT_EQ(escaped("plain text, 3.5 %"), "plain text, 3.5 %");
    EXPECT_EQ(escaped("Bj\xc3\xb8rn"), "Bj\xc3\xb8rn");  // UTF-8 passes as is (MSH-18)
    EXPECT_EQ(escaped(""), "");
}

TEST(OruWriter, TextIsEscapedInTheMessage) {
    auto r = pftgw::testing::example_normalized_result();
    r.subject.family_name = "O'Hara|Smith^Jr";
    r.tests[0].comments.push_back("first line\nsecond ~ line \\ end");
    const std::string m = write(r);
    const auto msg = parse_message(m);
    EXPECT_EQ(segments_named(msg, "PID").at(0).field(5), "O'Hara\\F\\Smith\\S\\Jr^Ines");
    // The example's comment has an "&".
    EXPECT_NE(m.find("NTE|2|L|Good effort; 3 acceptable maneuvers \\T\\ no cough\r"),
              std::string::npos);
    EXPECT_NE(m.find("NTE|3|L|first line\\X0A\\second \\R\\ line \\E\\ end\r"), std::string::npos);
    // The example's warning (| and ^ in the message) sits under the KCO OBX.
    const auto kco_pos = m.find("|NM|19916-6^");
    ASSERT_NE(kco_pos, std::string::npos);
    const auto warn = m.find(
        "|O|Warning consistency.kco at tests[2].values[KCO]: KCO 1.48 differs from DLCO/VA = "
        "1.479 \\F\\ within rounding? \\S\\check\\S\\ (KCO=1.48; DLCO/VA=1.479)\r");
    EXPECT_NE(warn, std::string::npos);
    EXPECT_GT(warn, kco_pos);
    EXPECT_LT(warn, m.find("OBX|", kco_pos + 1));
}

// The NTE is for a person: a computed ratio's ten digits are cut to four
// significant ones there; short numbers and other text are written as they are.
TEST(OruWriter, FindingValuesInNotesAreReadable) {
    auto r = pftgw::testing::example_normalized_result();
    r.findings.push_back(Finding{"consistency.kco",
                                 Severity::warning,
                                 "tests[2].values[KCO]",
                                 "a note",
                                 {{"VI_VC", "0.9703703704"},
                                  {"spread_L", "0.1"},
                                  {"DLCO.recomputed", "24.98765432"},
                                  {"sum", "1234.56789"},
                                  {"tiny", "0.000123456"},
                                  {"time", "2026-03-02T08:54:10+01:00"}}});
    const std::string m = write(r);
    EXPECT_NE(m.find("(VI_VC=0.9704; spread_L=0.1; DLCO.recomputed=24.99; sum=1235; "
                     "tiny=0.0001235; time=2026-03-02T08:54:10+01:00)\r"),
              std::string::npos)
        << m;
}

// HL7 v2.5.1 ch. 7 (from memory): an NTE right after an OBX is a comment on
// that observation. NTE-1 set id from 1 under each OBX, NTE-2 table 0105 "L"
// (from memory), as the writer's other lab notes.
TEST(OruWriter, ValueCommentsAreNtesRightAfterTheirObx) {
    auto r = pftgw::testing::example_normalized_result();
    Quantity* fev1 = r.tests[0].find("FEV1");
    ASSERT_NE(fev1, nullptr);
    fev1->comments = {"leak suspected", "pipe | in it"};
    Quantity* fef75 = r.tests[0].find("FEF75");
    ASSERT_NE(fef75, nullptr);
    fef75->value.reset();
    fef75->absent_reason = "not-measured";
    fef75->comments = {"stopped early"};
    const auto msg = parse_message(write(r));
    std::size_t at = msg.size();
    for (std::size_t i = 0; i < msg.size(); ++i)
        if (msg[i].id == "OBX" && msg[i].component(3, 1) == "20150-9" && msg[i].field(4).empty())
            at = i;
    ASSERT_LT(at + 2, msg.size());
    EXPECT_EQ(msg[at + 1].id, "NTE");
    EXPECT_EQ(msg[at + 1].field(1), "1");
    EXPECT_EQ(msg[at + 1].field(2), "L");
    EXPECT_EQ(msg[at + 1].field(3), "leak suspected");
    EXPECT_EQ(msg[at + 2].id, "NTE");
    EXPECT_EQ(msg[at + 2].field(1), "2");
    EXPECT_EQ(msg[at + 2].field(3), "pipe \\F\\ in it");
    // Only under their own OBX: the text appears once in the message.
    int seen = 0;
    for (const auto& s : msg)
        if (s.id == "NTE" && s.field(3) == "leak suspected") ++seen;
    EXPECT_EQ(seen, 1);
    // An absent value: its comment first, then the writer's "Not reported" note.
    std::size_t fef = msg.size();
    for (std::size_t i = 0; i < msg.size(); ++i)
        if (msg[i].id == "OBX" && msg[i].field(11) == "X") fef = i;
    ASSERT_LT(fef + 2, msg.size());
    EXPECT_EQ(msg[fef + 1].field(3), "stopped early");
    EXPECT_EQ(msg[fef + 2].field(3).rfind("Not reported: not-measured", 0), 0u);
    // The test's own comment stays under the OBR, before any OBX.
    const auto obr =
        std::find_if(msg.begin(), msg.end(), [](const Segment& s) { return s.id == "OBR"; });
    ASSERT_NE(obr, msg.end());
    bool test_comment = false;
    for (auto it = obr + 1; it != msg.end() && it->id == "NTE"; ++it)
        if (it->field(3).find("Good effort") != std::string::npos) test_comment = true;
    EXPECT_TRUE(test_comment);
}

TEST(OruWriter, InfoFindingsStayOutUnplacedFindingsTravel) {
    auto r = pftgw::testing::example_normalized_result();
    Finding info;
    info.rule = "derive.skipped";
    info.severity = Severity::info;
    info.message = "info only";
    r.findings.push_back(info);
    Finding loose;
    loose.rule = "consistency.tlc";
    loose.severity = Severity::warning;
    loose.path = "tests[9].values[TLC]";
    loose.message = "no such test";
    r.findings.push_back(loose);
    const std::string m = write(r);
    EXPECT_EQ(m.find("info only"), std::string::npos);
    const auto pos = m.find("no such test");
    ASSERT_NE(pos, std::string::npos);
    EXPECT_LT(pos, m.find("OBR|2|"));  // under the first test
}

// The gateway caution under every OBR (DECISIONS.md: z bands as text only).
TEST(OruWriter, CautionAndContextNotes) {
    const std::string m = write(pftgw::testing::example_normalized_result());
    std::size_t count = 0;
    for (auto p = m.find("Results moved and checked by the gateway; interpretation belongs to "
                         "licensed staff");
         p != std::string::npos; p = m.find("Results moved and checked", p + 1))
        ++count;
    EXPECT_EQ(count, 3u);
    EXPECT_NE(m.find("-1.645 / -2.5 / -4.0"), std::string::npos);
    EXPECT_NE(m.find("Method: body-plethysmography."), std::string::npos);
    EXPECT_NE(m.find("Device SPX7: Northwind Respiratory Spirograph 7, serial SN-77-0192, "
                     "software 4.2.1. Units: si. At BTPS: FEV1, FVC, PEF, FEF25_75, FEF75."),
              std::string::npos);
    EXPECT_NE(m.find("At STPD: DLCO, DLCO_HB."), std::string::npos);
    EXPECT_NE(m.find("Computed by the gateway from DLCO, HB."), std::string::npos);
}

// Traditional rendering: values arrive rendered; the writer uses the table's
// traditional decimals (DLCO 1 decimal in mL/min/mm[Hg], quantities.csv).
TEST(OruWriter, TraditionalDecimals) {
    auto r = pftgw::testing::example_normalized_result();
    constexpr double kDlcoFactor = 2.987;  // mL/min/mm[Hg] per mmol/min/kPa (DECISIONS.md)
    auto& dlco = r.tests[2].values[0];
    dlco.value = *dlco.value * kDlcoFactor;
    dlco.unit = "mL/min/mm[Hg]";
    for (auto& ref : dlco.reference) {
        ref.predicted = *ref.predicted * kDlcoFactor;
        ref.lln = *ref.lln * kDlcoFactor;
        ref.uln = *ref.uln * kDlcoFactor;
    }
    OruOptions o;
    o.units = UnitSystem::traditional;
    const auto msg = parse_message(write(r, o));
    const auto obx = obx_with_code(msg, "19911-7");
    EXPECT_EQ(obx.field(5), "21.2");  // 7.10 x 2.987 = 21.2077
    EXPECT_EQ(obx.field(6), "mL/min/mm[Hg]^mL/min/mm[Hg]^UCUM");
    EXPECT_EQ(obx.field(7), "17.6-28.4");  // 5.90 x 2.987 = 17.62; 9.50 x 2.987 = 28.38
    EXPECT_EQ(obx_with_code(msg, "19910-9", "1").field(5), "22.7");  // 7.60 x 2.987 = 22.70
    EXPECT_EQ(obx_with_code(msg, "DLCO.z", "1").field(5), "-0.48");
}

TEST(OruWriter, NegativeZeroIsWrittenAsZero) {
    auto r = pftgw::testing::example_normalized_result();
    r.tests[0].values[0].reference[0].z_score = -0.001;
    EXPECT_EQ(obx_with_code(parse_message(write(r)), "FEV1.z", "1").field(5), "0.00");
}

// Not a pass/fail check (the machine is shared): run with
// --gtest_also_run_disabled_tests to print results per CPU second (process CPU
// time, so other work on the machine does not count) for 25 quantities.
TEST(OruWriter, DISABLED_Throughput) {
    const auto r = pftgw::testing::example_normalized_result();
    std::string out;
    out.reserve(1 << 16);
    constexpr int kRounds = 20000;
    const std::clock_t start = std::clock();
    std::size_t bytes = 0;
    for (int i = 0; i < kRounds; ++i) {
        out.clear();
        write_oru_r01(r, {}, quantity_table(), out);
        bytes += out.size();
    }
    const double s = static_cast<double>(std::clock() - start) / CLOCKS_PER_SEC;
    std::printf("%d messages, %.0f results/s, %zu bytes each\n", kRounds, kRounds / s,
                bytes / kRounds);
    EXPECT_GT(bytes, 0u);
}

}  // namespace
}  // namespace pftgw::hl7v2
