// Plain E1394 text cut into messages at each H record (ASTM E1394 / CLSI
// LIS2-A2 as quoted in interop-facts.md: a message runs from its H record to
// its L record, records end in CR), whatever the pieces it arrives in.
#include <gtest/gtest.h>

#include <string>
#include <vector>

#include "adapters/astm/message_splitter.hpp"

namespace pftgw::astm {
namespace {

std::vector<std::string> split(const std::string& text, std::size_t piece) {
    std::vector<std::string> out;
    E1394Splitter splitter;
    const E1394Splitter::MessageFn fn = [&](std::string_view m) { out.emplace_back(m); };
    for (std::size_t at = 0; at < text.size(); at += piece)
        splitter.feed(std::string_view(text).substr(at, piece), fn);
    splitter.finish(fn);
    return out;
}

TEST(E1394Splitter, CutsBeforeEachHRecordWhateverThePieces) {
    const std::string a = "H|\\^&|||FQ3\rP|1|KV1\rO|1|S1\rR|1|^^^F1|2010|ml\rL|1|N\r";
    // Another message with other delimiters and CRLF record ends; an 'H' inside
    // a record or a line starting "HB" (a letter after H) is no H record.
    const std::string b = "H#~!@###FQ3\r\nP#1#KV2\r\nC#1#I#HB low\r\nHB#x\r\nL#1#N\r\n";
    const std::string c = "H|\\^&|||FQ3\rL|1|N";  // the last one without its final CR
    const std::string text = a + b + c;
    for (const std::size_t piece :
         {std::size_t{1}, std::size_t{2}, std::size_t{3}, std::size_t{17}, text.size()}) {
        const auto got = split(text, piece);
        ASSERT_EQ(got.size(), 3u) << "pieces of " << piece;
        EXPECT_EQ(got[0], a) << piece;
        EXPECT_EQ(got[1], b) << piece;
        EXPECT_EQ(got[2], c) << piece;
    }
}

TEST(E1394Splitter, BlankTextIsNoMessage) {
    EXPECT_TRUE(split("", 4).empty());
    EXPECT_TRUE(split("\r\n \r", 1).empty());
    // Text before the first H record is a message of its own: the reader
    // reports it, it is not glued to the first real message.
    const auto got = split("junk\rH|\\^&\rL|1\r", 5);
    ASSERT_EQ(got.size(), 2u);
    EXPECT_EQ(got[0], "junk\r");
}

}  // namespace
}  // namespace pftgw::astm
