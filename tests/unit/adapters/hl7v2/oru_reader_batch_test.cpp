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

// Split on one thread and read on others (pftgw convert): split_hl7 gives the
// ranges and file findings read_hl7 gives, and reading each range alone, even
// copied out of the file, gives the same result.
TEST(OruReaderBatch, SplitThenReadEachGivesWhatReadHl7Gives) {
    std::string b = one("B2", "3.02");
    for (std::size_t at = b.find('\r'); at != std::string::npos; at = b.find('\r', at + 2))
        b.replace(at, 1, "\r\n");  // CRLF segment ends in the second message
    const std::string file = "ZZZ|before any message\r" + one("A1", "2.51") + "\x0b" + b +
                             "\x1c\r" + "BHS|^~\\&\r" + one("C3", "1.97") + "BTS|2\r";
    Hl7ReadOptions options;
    const auto profile = spiroline_profile();
    options.profile = &profile;
    const Hl7ReadOutcome whole = read_hl7(file, options);
    const Hl7Split split = split_hl7(file);
    ASSERT_EQ(split.messages.size(), 3u);
    ASSERT_EQ(whole.messages.size(), 3u);
    ASSERT_EQ(split.findings.size(), 2u);  // the stray ZZZ and the BTS count (2, holds 1)
    EXPECT_EQ(split.findings[0].rule, kRuleStraySegment);
    EXPECT_EQ(split.findings[1].rule, kRuleBatchCount);
    for (std::size_t i = 0; i < 3; ++i) {
        const MessageRange r = split.messages[i];
        EXPECT_EQ(r.begin, whole.messages[i].begin);
        EXPECT_EQ(r.end, whole.messages[i].end);
        const std::string copy = file.substr(r.begin, r.end - r.begin);
        const ReadMessage alone = read_hl7_message(copy, 0, copy.size(), options);
        ASSERT_TRUE(alone.result) << i;
        EXPECT_EQ(*alone.result, *whole.messages[i].result) << i;
        EXPECT_EQ(alone.control_id, whole.messages[i].control_id);
    }
    // The CRLF message's range ends after its last LF; the MLLP end byte is not in it.
    EXPECT_EQ(file.substr(split.messages[1].end - 2, 2), "\r\n");
    EXPECT_EQ(*whole.messages[2].result->tests[0].values[0].value, 1.97);
}

// The streaming splitter (pftgw convert reads HL7 files in pieces): fed a
// byte at a time or in pieces of any size, it hands over the same messages,
// byte for byte, and the same file findings as split_hl7 on the whole file,
// a CR and its LF in two pieces included.
TEST(OruReaderBatch, StreamingSplitterMatchesTheWholeFileWhateverThePieces) {
    std::string b = one("B2", "3.02");
    for (std::size_t at = b.find('\r'); at != std::string::npos; at = b.find('\r', at + 2))
        b.replace(at, 1, "\r\n");
    const std::string file = "ZZZ|stray\r\n" + one("A1", "2.51") + "\x0b" + b + "\x1c\r" +
                             "BHS|^~\\&\r" + one("C3", "1.97") + "BTS|2\rFTS|1";
    const Hl7Split whole = split_hl7(file);
    ASSERT_EQ(whole.messages.size(), 3u);
    // Each message is exactly what was put in: MLLP bytes and batch segments are not.
    const std::string expected[] = {one("A1", "2.51"), b, one("C3", "1.97")};
    for (std::size_t i = 0; i < 3; ++i)
        EXPECT_EQ(
            file.substr(whole.messages[i].begin, whole.messages[i].end - whole.messages[i].begin),
            expected[i]);
    for (const std::size_t piece :
         {std::size_t{1}, std::size_t{2}, std::size_t{7}, std::size_t{64}, file.size()}) {
        Hl7Splitter splitter;
        std::vector<std::pair<std::string, std::size_t>> got;
        const Hl7Splitter::MessageFn fn = [&](std::string_view bytes, std::size_t offset) {
            got.emplace_back(std::string(bytes), offset);
        };
        for (std::size_t at = 0; at < file.size(); at += piece)
            splitter.feed(std::string_view(file).substr(at, piece), fn);
        splitter.finish(fn);
        const auto findings = splitter.take_findings();
        ASSERT_EQ(got.size(), 3u) << "pieces of " << piece;
        for (std::size_t i = 0; i < 3; ++i) {
            const MessageRange r = whole.messages[i];
            EXPECT_EQ(got[i].second, r.begin) << piece;
            EXPECT_EQ(got[i].first, file.substr(r.begin, r.end - r.begin)) << piece << " #" << i;
        }
        ASSERT_EQ(findings.size(), whole.findings.size()) << piece;
        for (std::size_t i = 0; i < findings.size(); ++i) {
            EXPECT_EQ(findings[i].rule, whole.findings[i].rule);
            EXPECT_EQ(findings[i].path, whole.findings[i].path);  // "byte 0" for the stray one
        }
    }
    // The message after the CRLF one ends with "\r\n" though the LF came alone.
    EXPECT_EQ(file.substr(whole.messages[1].end - 2, 2), "\r\n");
}

}  // namespace
}  // namespace pftgw::hl7v2
