// Several ORU^R01 in one file, with and without FHS/BHS/BTS/FTS batch
// segments (HL7 2.5.1 ch. 2 batch protocol, from memory: BTS-1 is the batch
// message count). Each message keeps its own delimiters, byte range and ACK.
#include <gtest/gtest.h>

#include <string>

#include "adapters/hl7v2/oru_reader.hpp"
#include "oru_reader_support.hpp"

namespace pftgw::hl7v2 {
namespace {

using testing::has_rule;
using testing::read;
using testing::spiroline_profile;

std::string one(const std::string& id, const std::string& fev1) {
    return "MSH|^~\\&|SPIROLINE|LAB2|PFTGW|KVH|20260302085000+0100||ORU^R01^ORU_R01|" + id +
           "|P|2.5.1\r"
           "PID|1||KV" +
           id +
           "^^^KVH^MR||Ilvesson^Marta\r"
           "OBR|1|PL|F" +
           id + "||||20260302085410+0100\rOBX|1|NM|F1^FEV1^99BRK||" + fev1 + "|L|||||F\r";
}

TEST(OruReaderBatch, SeveralMessagesWithoutBatchSegments) {
    const std::string a = one("A1", "2.51");
    const std::string b = one("B2", "3.02");
    // The second message declares other delimiters: they apply to it alone.
    const std::string c =
        "MSH#$*!%#SPIROLINE#LAB2#PFTGW#KVH#20260302095000+0100##ORU$R01$ORU_R01#C3#P#2.5\r"
        "PID#1##KVC3$$$KVH$MR##Vik$Tor\rOBR#1#PL#FC3####20260302095410+0100\r"
        "OBX#1#NM#F1$FEV1$99BRK##3.33#L#####F\r";
    const std::string file = a + c + b;
    const auto out = read(file, spiroline_profile());
    ASSERT_EQ(out.messages.size(), 3u);
    EXPECT_TRUE(out.findings.empty());
    EXPECT_EQ(out.messages[0].control_id, "A1");
    EXPECT_EQ(out.messages[1].control_id, "C3");
    EXPECT_EQ(out.messages[2].control_id, "B2");
    EXPECT_EQ(*out.messages[1].result->tests[0].values[0].value, 3.33);
    EXPECT_EQ(*out.messages[2].result->tests[0].values[0].value, 3.02);
    // Byte ranges: each message's own bytes.
    EXPECT_EQ(out.messages[0].begin, 0u);
    EXPECT_EQ(file.substr(out.messages[1].begin, out.messages[1].end - out.messages[1].begin), c);
    EXPECT_EQ(out.messages[2].end, file.size());
}

TEST(OruReaderBatch, BatchSegmentsAreEnvelopesNotMessages) {
    const std::string file = "FHS|^~\\&|SPIROLINE|LAB2\rBHS|^~\\&|SPIROLINE|LAB2\r" +
                             one("A1", "2.51") + one("B2", "3.02") + "BTS|2\rFTS|1\r";
    const auto out = read(file, spiroline_profile());
    ASSERT_EQ(out.messages.size(), 2u);
    EXPECT_TRUE(out.findings.empty()) << out.findings[0].message;
    EXPECT_EQ(out.messages[1].result->tests[0].values.size(), 1u);  // BTS not read as OBX data
    EXPECT_EQ(out.messages[1].parsed->segments.size(), 4u);

    // A BTS count that disagrees is reported; stray segments too. Nothing is lost.
    const auto bad =
        read("BHS|^~\\&\r" + one("A1", "2.51") + "BTS|3\rZZZ|junk\r" + one("B2", "3.02"),
             spiroline_profile());
    ASSERT_EQ(bad.messages.size(), 2u);
    EXPECT_TRUE(has_rule(bad.findings, kRuleBatchCount));
    EXPECT_TRUE(has_rule(bad.findings, kRuleStraySegment));
}

// One unreadable message does not stop the others.
TEST(OruReaderBatch, ABrokenMessageDoesNotStopTheRest) {
    const auto out =
        read(one("A1", "2.51") + "MSH|^^|X\rPID|1\r" + one("B2", "3.02"), spiroline_profile());
    ASSERT_EQ(out.messages.size(), 3u);
    EXPECT_TRUE(out.messages[0].result);
    EXPECT_TRUE(out.messages[1].rejected());
    EXPECT_TRUE(has_rule(out.messages[1].findings, kRuleMshUnreadable));
    EXPECT_TRUE(out.messages[2].result);
}

}  // namespace
}  // namespace pftgw::hl7v2
