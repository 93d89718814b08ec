// HL7 v2 reader, message level: the library pitfalls of interop-facts.md
// ("What users of open-source HL7 libraries most often report broken"):
// escapes, repetitions, MSH numbering, unusual MSH-2, LF / CRLF, MSH-18.
// Expected values are worked by hand from HL7 2.5.1 ch. 2 as quoted in
// interop-facts.md (escapes, MSH-1 = separator); MSH-18 names from memory.
#include <gtest/gtest.h>

#include <string>

#include "adapters/hl7v2/hl7_parser.hpp"
#include "adapters/hl7v2/oru_reader.hpp"
#include "oru_reader_support.hpp"

namespace pftgw::hl7v2 {
namespace {

using testing::read;
using testing::spiroline_profile;

const char* const kMsh =
    "MSH|^~\\&|SPIROLINE|LAB2|PFTGW|KVH|20260302085000+0100||ORU^R01^ORU_R01|MSG0001|P|2.5.1\r";

ParsedMessage parse(const std::string& text) {
    const auto lines = split_lines(text);
    auto p = parse_message(text, 0, text.size(), lines, std::nullopt);
    EXPECT_TRUE(p.message.has_value()) << (p.failure ? p.failure->message : "");
    return p.message ? *p.message : ParsedMessage{};
}

// MSH-1 is the field separator itself, so MSH-9 is the 9th field counting
// the separator as MSH-1 (HL7 2.5.1 ch. 2; hl7_split.hpp numbers the same).
TEST(OruReaderParse, MshFieldNumberingCountsTheSeparatorAsMsh1) {
    const ParsedMessage m = parse(kMsh);
    const Segment& msh = m.msh();
    EXPECT_EQ(m.field(msh, 1), "|");
    EXPECT_EQ(m.field(msh, 2), "^~\\&");
    EXPECT_EQ(m.field(msh, 3), "SPIROLINE");
    EXPECT_EQ(m.field(msh, 7), "20260302085000+0100");
    EXPECT_EQ(m.raw(msh, 9, 1, 1), "ORU");
    EXPECT_EQ(m.raw(msh, 9, 1, 2), "R01");
    EXPECT_EQ(m.field(msh, 10), "MSG0001");
    EXPECT_EQ(m.field(msh, 12), "2.5.1");
    // MSH-2 holds ~ and ^ but is one value: never split into repetitions.
    EXPECT_EQ(m.repetitions(msh, 2), 1u);
    EXPECT_EQ(m.text_of(msh, 2), "^~\\&");
}

// Escapes (interop-facts.md: \F\ | \S\ ^ \T\ & \R\ ~ \E\ \ \Xhh\ hex), one pass.
TEST(OruReaderParse, EscapesDecodeIncludingHexAndEscapeNextToDelimiter) {
    const std::string msg = std::string(kMsh) +
                            "NTE|1||a\\F\\b\\S\\c\\T\\d\\R\\e\\E\\f|x\\E\\|y\\E\\\\F\\z|"
                            "line1\\X0D\\line2\\X0A\\end|\\E\\F\\E\\|\\X414243\\|\\Zq\\|open\\X4\r";
    const ParsedMessage m = parse(msg);
    const Segment& nte = m.segments[1];
    EXPECT_EQ(m.text_of(nte, 3), "a|b^c&d~e\\f");
    // "\E\" right before the field separator ends the escape; the | still separates.
    EXPECT_EQ(m.text_of(nte, 4), "x\\");
    EXPECT_EQ(m.text_of(nte, 5), "y\\|z");
    // \X0D\ is a CR inside the text, not a segment end.
    EXPECT_EQ(m.segments.size(), 2u);
    EXPECT_EQ(m.text_of(nte, 6), "line1\rline2\nend");
    // Left to right: "\E\" then "F" then "\E\" is the text \F\, never "|".
    EXPECT_EQ(m.text_of(nte, 7), "\\F\\");
    EXPECT_EQ(m.text_of(nte, 8), "ABC");
    EXPECT_EQ(m.text_of(nte, 9), "\\Zq\\");     // unknown escape kept as written
    EXPECT_EQ(m.text_of(nte, 10), "open\\X4");  // unterminated kept as written
}

// \Xhh\ bytes are in the message's character set (MSH-18).
TEST(OruReaderParse, HexEscapeDecodedInTheMessageCharset) {
    std::string latin = std::string(kMsh);
    latin.insert(latin.size() - 1, "||||||8859/1");
    latin += "NTE|1||R\\XF8\\getest\r";
    EXPECT_EQ(parse(latin).text_of(parse(latin).segments[1], 3), "R\xc3\xb8getest");

    std::string utf8 = std::string(kMsh);
    utf8.insert(utf8.size() - 1, "||||||UNICODE UTF-8");
    utf8 += "NTE|1||R\\XC3B8\\getest\r";
    const ParsedMessage m = parse(utf8);
    EXPECT_EQ(m.text_of(m.segments[1], 3), "R\xc3\xb8getest");
}

// Repetitions (~) must not break component access of the first or later ones.
TEST(OruReaderParse, RepetitionsKeepComponentsApart) {
    const std::string msg = std::string(kMsh) +
                            "PID|1||KV100231^^^KVH&2.999.1.1&ISO^MR~19580411-1234^^^NATREG^PI||"
                            "Ilvesson^Marta~ILVESSON^M\r";
    const ParsedMessage m = parse(msg);
    const Segment& pid = m.segments[1];
    EXPECT_EQ(m.repetitions(pid, 3), 2u);
    EXPECT_EQ(m.text_of(pid, 3, 1, 1), "KV100231");
    EXPECT_EQ(m.text_of(pid, 3, 1, 4, 2), "2.999.1.1");
    EXPECT_EQ(m.text_of(pid, 3, 1, 5), "MR");
    EXPECT_EQ(m.text_of(pid, 3, 2, 1), "19580411-1234");
    EXPECT_EQ(m.text_of(pid, 3, 2, 4), "NATREG");
    EXPECT_EQ(m.text_of(pid, 3, 2, 5), "PI");
    EXPECT_EQ(m.text_of(pid, 5, 1, 2), "Marta");
    EXPECT_EQ(m.text_of(pid, 5, 2, 2), "M");

    const auto out = read(msg + "OBR|1\r", spiroline_profile());
    ASSERT_EQ(out.messages.size(), 1u);
    const auto& subj = out.messages[0].result->subject;
    ASSERT_EQ(subj.identifiers.size(), 2u);
    EXPECT_EQ(subj.identifiers[0].system, "urn:oid:2.999.1.1");
    EXPECT_EQ(subj.identifiers[1].system, "NATREG");
    EXPECT_EQ(subj.family_name, "Ilvesson");
    EXPECT_EQ(subj.given_name, "Marta");
}

// Unusual MSH-2: a 2.7-style fifth character (truncation '#') and delimiters
// other than |^~\& are used as declared, never assumed.
TEST(OruReaderParse, UnusualEncodingCharactersAreUsedAsDeclared) {
    const std::string trunc =
        "MSH|^~\\&#|SPIROLINE|LAB2|||20260302085000+0100||ORU^R01^ORU_R01|T1|P|2.5.1\r"
        "NTE|1||a^b#c\r";
    const ParsedMessage t = parse(trunc);
    EXPECT_EQ(t.delimiters.truncation, '#');
    EXPECT_EQ(t.field(t.msh(), 2), "^~\\&#");
    EXPECT_EQ(t.field(t.msh(), 10), "T1");
    EXPECT_EQ(t.text_of(t.segments[1], 3, 1, 2), "b#c");  // truncation char is data

    const std::string odd =
        "MSH#$*!%#SPIROLINE#LAB2###20260302085000+0100##ORU$R01$ORU_R01#T2#P#2.5.1\r"
        "PID#1##KV7$$$KVH$MR*KV8##Aas!F!Berg$Per\r";
    const ParsedMessage o = parse(odd);
    EXPECT_EQ(o.delimiters.field, '#');
    EXPECT_EQ(o.delimiters.component, '$');
    EXPECT_EQ(o.delimiters.repetition, '*');
    EXPECT_EQ(o.delimiters.escape, '!');
    EXPECT_EQ(o.delimiters.subcomponent, '%');
    EXPECT_EQ(o.raw(o.msh(), 9, 1, 2), "R01");
    EXPECT_EQ(o.field(o.msh(), 10), "T2");
    const Segment& pid = o.segments[1];
    EXPECT_EQ(o.text_of(pid, 3, 2, 1), "KV8");
    EXPECT_EQ(o.text_of(pid, 5, 1, 1), "Aas#Berg");  // !F! is the declared field separator
    // '|' is plain data when it is not the declared separator.
    EXPECT_EQ(parse("MSH#$*!%#A|B\r").text_of(parse("MSH#$*!%#A|B\r").msh(), 3), "A|B");

    // Too few encoding characters, or one declared twice: unreadable (AR).
    std::string why;
    EXPECT_FALSE(read_delimiters("MSH|^~|A", &why));
    EXPECT_FALSE(read_delimiters("MSH|^^\\&|A", &why));
    EXPECT_FALSE(read_delimiters("MSH|^~\\|", &why));
}

// CR is the segment end (interop-facts.md); LF and CRLF files read the same.
TEST(OruReaderParse, LfAndCrlfSegmentEndsGiveTheSameResult) {
    const std::string cr = std::string(kMsh) +
                           "PID|1||KV100231^^^KVH^MR||Ilvesson^Marta||19580411|F\r"
                           "OBR|1|PL1|FL1||||20260302085000+0100\r"
                           "OBX|1|NM|F1^FEV1^99BRK||2.51|L|2.10-3.50||||F\r";
    std::string lf = cr;
    std::string crlf;
    for (char& c : lf)
        if (c == '\r') c = '\n';
    for (char c : cr) crlf += c == '\r' ? std::string("\r\n") : std::string(1, c);

    const auto profile = spiroline_profile();
    const auto a = read(cr, profile);
    const auto b = read(lf, profile);
    const auto c = read(crlf, profile);
    ASSERT_EQ(a.messages.size(), 1u);
    ASSERT_EQ(b.messages.size(), 1u);
    ASSERT_EQ(c.messages.size(), 1u);
    ASSERT_TRUE(a.messages[0].result);
    EXPECT_EQ(*a.messages[0].result, *b.messages[0].result);
    EXPECT_EQ(*a.messages[0].result, *c.messages[0].result);
    ASSERT_EQ(a.messages[0].result->tests.size(), 1u);
    EXPECT_EQ(*a.messages[0].result->tests[0].values[0].value, 2.51);
    // The byte range covers the whole message with its last segment end.
    EXPECT_EQ(c.messages[0].end, crlf.size());
    // An MLLP-framed capture (0x0B ... 0x1C 0x0D) reads the same.
    const auto d = read("\x0b" + cr + "\x1c\r", profile);
    ASSERT_EQ(d.messages.size(), 1u);
    EXPECT_EQ(*a.messages[0].result, *d.messages[0].result);
}

// MSH-18: 8859/1 text converted to UTF-8; UTF-8 kept; empty means ASCII, and
// 8-bit bytes there are replaced and reported, never passed on garbled.
TEST(OruReaderParse, Msh18CharsetIsHonoured) {
    const std::string body =
        "PID|1||KV5^^^KVH^MR||Br\xe6nd\xf8y^\xc5se\r"
        "OBR|1|||||||\r";
    auto with_charset = [&](const std::string& cs) {
        return std::string(
                   "MSH|^~\\&|SPIROLINE|LAB2|||20260302085000+0100||ORU^R01^ORU_R01|C1|P|2.5.1"
                   "||||||") +
               cs + "\r" + body;
    };
    auto profile = spiroline_profile();
    const auto latin = read(with_charset("8859/1"), profile);
    ASSERT_TRUE(latin.messages[0].result);
    EXPECT_EQ(latin.messages[0].result->subject.family_name, "Br\xc3\xa6nd\xc3\xb8y");
    EXPECT_EQ(latin.messages[0].result->subject.given_name, "\xc3\x85se");
    EXPECT_FALSE(testing::has_rule(latin.messages[0].findings, kRuleCharsetMismatch));

    // The same name sent in UTF-8 and declared so gives the same text.
    std::string utf8_body = "PID|1||KV5^^^KVH^MR||Br\xc3\xa6nd\xc3\xb8y^\xc3\x85se\rOBR|1\r";
    const auto utf8 = read(std::string("MSH|^~\\&|A|B|||20260302085000+0100||ORU^R01|C2|P|2.5.1"
                                       "||||||UNICODE UTF-8\r") +
                               utf8_body,
                           profile);
    EXPECT_EQ(utf8.messages[0].result->subject.family_name, "Br\xc3\xa6nd\xc3\xb8y");

    // Latin-1 bytes in a message that declares nothing: ASCII, replaced and reported.
    const auto ascii = read(with_charset(""), profile);
    EXPECT_EQ(ascii.messages[0].result->subject.family_name, "Br\xef\xbf\xbdnd\xef\xbf\xbdy");
    EXPECT_TRUE(testing::has_rule(ascii.messages[0].findings, kRuleCharsetMismatch));

    // A device profile that says ISO-8859-1 covers a device that leaves MSH-18 empty.
    profile.charset = "ISO-8859-1";
    const auto fallback = read(with_charset(""), profile);
    EXPECT_EQ(fallback.messages[0].result->subject.family_name, "Br\xc3\xa6nd\xc3\xb8y");

    // An unknown MSH-18 cannot be decoded: the message is rejected.
    const auto unknown = read(with_charset("ISO IR87"), profile);
    EXPECT_FALSE(unknown.messages[0].result);
    EXPECT_TRUE(testing::has_rule(unknown.messages[0].findings, kRuleCharset));
}

}  // namespace
}  // namespace pftgw::hl7v2
