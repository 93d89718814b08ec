// ACK / NAK bytes for received ORU^R01 (interop-facts.md, HL7 section: MSH-9
// ACK^R01^ACK, MSH-11 copied, MSA-2 = the acknowledged MSH-10, ERR-2 location
// OBX^1^5, ERR-3 table 0357 codes, ERR-4 E/W). Table 0357 codes and the 2.3
// MSH-9 / ERR-1 forms are from memory (flag M). python3-hl7 0.4.5 create_ack
// is checked against the same fields in tests/conformance/hl7_ack_check.py.
#include <gtest/gtest.h>

#include <string>

#include "adapters/hl7v2/ack_writer.hpp"
#include "adapters/hl7v2/oru_reader.hpp"
#include "gateway/core/normalize.hpp"
#include "hl7_split.hpp"
#include "oru_reader_support.hpp"

namespace pftgw::hl7v2 {
namespace {

using testing::read;
using testing::spiroline_profile;

std::string oru(const std::string& version, const std::string& obx,
                const std::string& msh9 = "ORU^R01^ORU_R01",
                const std::string& msh10 = "SL4-000101", const std::string& msh11 = "P") {
    return "MSH|^~\\&|SPIROLINE|LAB2|PFTGW|KVH|20260302085000+0100||" + msh9 + "|" + msh10 + "|" +
           msh11 + "|" + version +
           "\r"
           "PID|1||KV100231^^^KVH^MR||Ilvesson^Marta||19580411|F\r"
           "OBR|1|PL-1|SL4-004711||||20260302085410+0100\r" +
           obx;
}

// Read, normalize (as the daemon will), acknowledge.
std::string ack_for(const std::string& msg) {
    const auto out = read(msg, spiroline_profile());
    EXPECT_EQ(out.messages.size(), 1u);
    const ReadMessage& m = out.messages.at(0);
    std::vector<Finding> later;
    if (m.result) {
        NeutralResult r = *m.result;
        later = normalize(r, quantity_table());
    }
    AckOptions o;
    o.message_time = Timestamp{{2026, 3, 2}, 8, 50, 5, 0, 60};
    return acknowledge(m, later, o);
}

TEST(OruReaderAck, AcceptEchoesControlIdCopiesVersionAndSwapsApplications) {
    const std::string ack = ack_for(oru("2.5.1", "OBX|1|NM|F1^FEV1^99BRK||2.51|L|||||F\r",
                                        "ORU^R01^ORU_R01", "SL4-000101", "T"));
    const auto segs = testing::parse_message(ack);
    ASSERT_EQ(segs.size(), 2u) << ack;
    const auto& msh = segs[0];
    EXPECT_EQ(msh.field(1), "|");
    EXPECT_EQ(msh.field(2), "^~\\&");
    EXPECT_EQ(msh.field(3), "PFTGW");      // received MSH-5
    EXPECT_EQ(msh.field(4), "KVH");        // received MSH-6
    EXPECT_EQ(msh.field(5), "SPIROLINE");  // received MSH-3
    EXPECT_EQ(msh.field(6), "LAB2");       // received MSH-4
    EXPECT_EQ(msh.field(7), "20260302085005+0100");
    EXPECT_EQ(msh.field(9), "ACK^R01^ACK");
    EXPECT_EQ(msh.field(11), "T");
    EXPECT_EQ(msh.field(12), "2.5.1");
    const std::string id = msh.field(10);
    EXPECT_GE(id.size(), 1u);
    EXPECT_LE(id.size(), 20u);  // 2.5.1 MSH-10 length
    EXPECT_NE(id, "SL4-000101");
    EXPECT_EQ(segs[1].id, "MSA");
    EXPECT_EQ(segs[1].field(1), "AA");
    EXPECT_EQ(segs[1].field(2), "SL4-000101");
    // Deterministic: the same message gets the same ACK; another id another.
    EXPECT_EQ(ack, ack_for(oru("2.5.1", "OBX|1|NM|F1^FEV1^99BRK||2.51|L|||||F\r", "ORU^R01^ORU_R01",
                               "SL4-000101", "T")));
    const auto other = testing::parse_message(
        ack_for(oru("2.5.1", "OBX|1|NM|F1^FEV1^99BRK||2.51|L|||||F\r", "ORU^R01^ORU_R01", "X2")));
    EXPECT_NE(other[0].field(10), id);
    EXPECT_EQ(other[1].field(2), "X2");
}

// MSA-2 is the received MSH-10 byte for byte, escapes included.
TEST(OruReaderAck, Msa2IsTheReceivedControlIdExactly) {
    const auto segs = testing::parse_message(
        ack_for(oru("2.5.1", "OBX|1|NM|F1^FEV1^99BRK||2.51|L|||||F\r", "ORU^R01", "A\\T\\B 0007")));
    EXPECT_EQ(segs[1].field(2), "A\\T\\B 0007");
}

TEST(OruReaderAck, Version23UsesItsOwnMessageTypeForm) {
    const auto segs = testing::parse_message(
        ack_for(oru("2.3", "OBX|1|NM|F1^FEV1^99BRK||2.51|L|||||F\r", "ORU^R01")));
    EXPECT_EQ(segs[0].field(9), "ACK^R01");  // no message structure before 2.3.1 (M)
    EXPECT_EQ(segs[0].field(12), "2.3");
    const auto s24 = testing::parse_message(
        ack_for(oru("2.4", "OBX|1|NM|F1^FEV1^99BRK||2.51|L|||||F\r", "ORU^R01")));
    EXPECT_EQ(s24[0].field(9), "ACK^R01^ACK");
}

// Text in an NM value: AE with ERR naming OBX^1^5, 102 data type error, E.
TEST(OruReaderAck, TextInNumericValueIsApplicationError) {
    const auto segs =
        testing::parse_message(ack_for(oru("2.5.1", "OBX|1|NM|F1^FEV1^99BRK||two|L|||||F\r")));
    ASSERT_GE(segs.size(), 3u);
    EXPECT_EQ(segs[1].field(1), "AE");
    EXPECT_EQ(segs[2].id, "ERR");
    EXPECT_EQ(segs[2].field(2), "OBX^1^5");
    EXPECT_EQ(segs[2].field(3), "102^Data type error^HL70357");
    EXPECT_EQ(segs[2].field(4), "E");
    EXPECT_NE(segs[2].field(8).find("two"), std::string::npos);
}

// A unit the profile cannot settle ("ltr" for FEV1): AE, OBX^1^6, 103.
TEST(OruReaderAck, UnitTheProfileCannotSettleIsApplicationError) {
    const auto segs =
        testing::parse_message(ack_for(oru("2.5.1", "OBX|1|NM|F1^FEV1^99BRK||2.51|ltr|||||F\r")));
    ASSERT_GE(segs.size(), 3u);
    EXPECT_EQ(segs[1].field(1), "AE");
    EXPECT_EQ(segs[2].field(2), "OBX^1^6");
    EXPECT_EQ(segs[2].field(3), "103^Table value not found^HL70357");
}

// An unmapped code alone is a warning: AA with an ERR of severity W.
TEST(OruReaderAck, WarningsTravelAsErrWithSeverityW) {
    const auto segs = testing::parse_message(ack_for(
        oru("2.5.1", "OBX|1|NM|F1^FEV1^99BRK||2.51|L|||||F\rOBX|2|NM|XQ9^X^99BRK||1|L|||||F\r")));
    ASSERT_EQ(segs.size(), 3u);
    EXPECT_EQ(segs[1].field(1), "AA");
    EXPECT_EQ(segs[2].field(2), "OBX^2^3");
    EXPECT_EQ(segs[2].field(4), "W");
}

// Not an ORU^R01 (or not readable as one): AR, with the reason.
TEST(OruReaderAck, NotAnOruIsRejected) {
    auto segs = testing::parse_message(ack_for(oru("2.5.1", "", "ADT^A01^ADT_A01")));
    EXPECT_EQ(segs[0].field(9), "ACK^A01^ACK");
    EXPECT_EQ(segs[1].field(1), "AR");
    EXPECT_EQ(segs[2].field(2), "MSH^1^9");
    EXPECT_EQ(segs[2].component(3, 1), "200");
    segs = testing::parse_message(ack_for(oru("2.2", "", "ORU^R01")));
    EXPECT_EQ(segs[1].field(1), "AR");
    EXPECT_EQ(segs[2].component(1, 3), "12");  // old ELD form in ERR-1 for 2.2
    segs = testing::parse_message(ack_for(oru("2.5.1", "", "ORU^R01", "")));
    EXPECT_EQ(segs[1].field(1), "AR");
    EXPECT_EQ(segs[2].field(2), "MSH^1^10");
    EXPECT_EQ(segs[2].component(3, 1), "101");
    // Nothing to echo when the MSH itself is unreadable: no ACK at all.
    const auto out = read("MSH|^~|broken\rPID|1\r", spiroline_profile());
    ASSERT_EQ(out.messages.size(), 1u);
    EXPECT_TRUE(out.messages[0].rejected());
    EXPECT_EQ(acknowledge(out.messages[0]), "");
}

// 2.3 / 2.4: the error in ERR-1 (ELD) and only errors listed.
TEST(OruReaderAck, OldVersionsUseErr1) {
    const auto segs = testing::parse_message(
        ack_for(oru("2.4", "OBX|1|NM|F1^FEV1^99BRK||two|L|||||F\rOBX|2|NM|XQ9^X^99BRK||1|L|||||F\r",
                    "ORU^R01")));
    ASSERT_EQ(segs.size(), 3u);
    EXPECT_EQ(segs[2].field(1), "OBX^1^5^102&Data type error&HL70357");
}

// The ACK answers in the received delimiters and character set.
TEST(OruReaderAck, ReceivedDelimitersAndCharsetAreKept) {
    const std::string odd =
        "MSH#$*!%#SPIROLINE#LAB2#PFTGW#KVH#20260302095000+0100##ORU$R01$ORU_R01#SL4-6#P#2.5"
        "######8859/1\r"
        "PID#1##KV7$$$KVH$MR##Vik$Tor\rOBR#1#PL-6#SL4-004715####20260302095410+0100\r"
        "OBX#1#NM#F1$FEV1$99BRK##tre#L#####F\r";
    const std::string ack = ack_for(odd);
    EXPECT_EQ(ack.substr(0, 35), "MSH#$*!%#PFTGW#KVH#SPIROLINE#LAB2#2");
    EXPECT_NE(ack.find("#ACK$R01$ACK#"), std::string::npos);
    EXPECT_NE(ack.find("######8859/1\r"), std::string::npos);
    EXPECT_NE(ack.find("\rMSA#AE#SL4-6\r"), std::string::npos);
    EXPECT_NE(ack.find("\rERR##OBX$1$5#102$Data type error$HL70357#E####"), std::string::npos);
}

}  // namespace
}  // namespace pftgw::hl7v2
