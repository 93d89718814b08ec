// ASTM E1381 frames: checksum, layout, splitting and parsing, checked against the
// standard's rules as quoted in interop-facts.md ("ASTM E1381 (LIS1-A) low level").
#include "adapters/astm/frame.hpp"

#include <gtest/gtest.h>

#include <string>

namespace pftgw::astm {
namespace {

TEST(AstmFrame, ControlBytes) {
    // interop-facts.md "Bytes": ENQ 05, ACK 06, NAK 15, EOT 04, STX 02, ETX 03,
    // ETB 17, CR 0D, LF 0A.
    EXPECT_EQ(kEnq, 0x05);
    EXPECT_EQ(kAck, 0x06);
    EXPECT_EQ(kNak, 0x15);
    EXPECT_EQ(kEot, 0x04);
    EXPECT_EQ(kStx, 0x02);
    EXPECT_EQ(kEtx, 0x03);
    EXPECT_EQ(kEtb, 0x17);
    EXPECT_EQ(kCr, 0x0D);
    EXPECT_EQ(kLf, 0x0A);
}

TEST(AstmFrame, ChecksumWorkedByHand) {
    // Source: interop-facts.md (V, quoted standard text): "the sum of the bytes from
    // FN through ETB/ETX inclusive, modulo 256, as two uppercase hex digits".
    // Frame STX "1" "H|\^&" CR ETX: the summed bytes are
    //   '1' 0x31=49, 'H' 0x48=72, '|' 0x7C=124, '\' 0x5C=92, '^' 0x5E=94,
    //   '&' 0x26=38, CR 0x0D=13, ETX 0x03=3
    //   49+72+124+92+94+38+13+3 = 485; 485 - 256 = 229 = 0xE5 -> "E5".
    const std::string summed = std::string("1H|\\^&\r") + kEtx;
    EXPECT_EQ(checksum(summed), 229);
    EXPECT_EQ(checksum_hex(summed), "E5");
    EXPECT_EQ(build_frame(1, "H|\\^&\r", true), std::string("\x02") + "1H|\\^&\r\x03" + "E5\r\n");

    // An ETB frame, also past 256:
    // '2' 50 + 'L' 76 + '|' 124 + ETB 23 = 273; 273 - 256 = 17 = 0x11 -> "11".
    EXPECT_EQ(build_frame(2, "L|", false), std::string("\x02") + "2L|\x17" + "11\r\n");
    // Uppercase hex: '0' 48 + '~' 126 + '~' 126 + ETX 3 = 303; 303-256 = 47 = 0x2F -> "2F".
    EXPECT_EQ(checksum_hex(std::string("0~~") + kEtx), "2F");
}

TEST(AstmFrame, FrameNumbersWrapAfterSevenToZero) {
    // interop-facts.md: "FN is an ASCII digit starting at 1 and rolling 7 -> 0".
    const std::string text(9 * kMaxFrameTextBytes, 'x');
    const auto frames = split_into_frames(text);
    ASSERT_EQ(frames.size(), 9u);
    const std::string expected_fns = "123456701";
    for (std::size_t i = 0; i < frames.size(); ++i) {
        EXPECT_EQ(frames[i][1], expected_fns[i]) << "frame " << i;
        auto parsed = parse_frame(frames[i]);
        ASSERT_TRUE(parsed.ok()) << parsed.error().message;
        EXPECT_EQ(parsed->last, i + 1 == frames.size());
    }
    EXPECT_EQ(next_frame_number(7), 0);
    EXPECT_EQ(next_frame_number(0), 1);
}

TEST(AstmFrame, EtbContinuationAcrossThe240Boundary) {
    // interop-facts.md: at most 247 characters per frame, so more than 240 text
    // characters go into ETB frames and an ETX frame.
    std::string text;
    for (int i = 0; i < 241; ++i) text += static_cast<char>('A' + i % 26);
    const auto frames = split_into_frames(text);
    ASSERT_EQ(frames.size(), 2u);
    EXPECT_EQ(frames[0].size(), kMaxFrameBytes);  // 1 + 1 + 240 + 1 + 2 + 2 = 247
    EXPECT_EQ(frames[0][frames[0].size() - 5], kEtb);
    EXPECT_EQ(frames[1][frames[1].size() - 5], kEtx);
    auto first = parse_frame(frames[0]);
    auto second = parse_frame(frames[1]);
    ASSERT_TRUE(first.ok() && second.ok());
    EXPECT_EQ(first->frame_number, 1);
    EXPECT_EQ(second->frame_number, 2);
    EXPECT_FALSE(first->last);
    EXPECT_TRUE(second->last);
    EXPECT_EQ(first->text.size(), 240u);
    EXPECT_EQ(first->text + second->text, text);

    // Exactly 240 characters fit one ETX frame.
    const auto one = split_into_frames(std::string(240, 'z'));
    ASSERT_EQ(one.size(), 1u);
    EXPECT_EQ(one[0][one[0].size() - 5], kEtx);
}

TEST(AstmFrame, EmptyTextIsOneEmptyEndFrame) {
    const auto frames = split_into_frames("");
    ASSERT_EQ(frames.size(), 1u);
    EXPECT_EQ(frames[0].size(), kMinFrameBytes);
    auto parsed = parse_frame(frames[0]);
    ASSERT_TRUE(parsed.ok());
    EXPECT_TRUE(parsed->text.empty());
    EXPECT_TRUE(parsed->last);
}

TEST(AstmFrame, ParseRefusesBrokenFrames) {
    const std::string good = build_frame(3, "R|1|^^^FEV1|2.61|L\r", true);
    ASSERT_TRUE(parse_frame(good).ok());

    std::string bad_sum = good;
    bad_sum[bad_sum.size() - 3] = bad_sum[bad_sum.size() - 3] == '0' ? '1' : '0';
    auto r = parse_frame(bad_sum);
    ASSERT_FALSE(r.ok());
    EXPECT_EQ(r.error().code, "astm.frame.checksum");

    std::string bad_text = good;
    bad_text[4] = kLf;  // LF may not stand in the text
    EXPECT_EQ(parse_frame(bad_text).error().code, "astm.frame.text-byte");
    bad_text[4] = kStx;
    EXPECT_EQ(parse_frame(bad_text).error().code, "astm.frame.text-byte");

    std::string bad_fn = good;
    bad_fn[1] = '8';
    EXPECT_EQ(parse_frame(bad_fn).error().code, "astm.frame.number");

    std::string no_cr = good;
    no_cr[no_cr.size() - 2] = 'x';
    EXPECT_EQ(parse_frame(no_cr).error().code, "astm.frame.end");

    EXPECT_EQ(parse_frame(good.substr(1)).error().code, "astm.frame.start");
    EXPECT_EQ(parse_frame("\x02"
                          "1\x03")
                  .error()
                  .code,
              "astm.frame.length");

    // 241 text bytes make a 248-byte frame: one too many.
    EXPECT_EQ(parse_frame(build_frame(1, std::string(241, 'a'), true)).error().code,
              "astm.frame.length");
}

TEST(AstmFrame, LowercaseChecksumAcceptedOnReceipt) {
    // Our choice: built frames use uppercase (the rule); receipt is lenient on case.
    std::string frame = build_frame(1, "H|\\^&\r", true);  // checksum E5
    frame[frame.size() - 4] = 'e';
    EXPECT_TRUE(parse_frame(frame).ok());
}

}  // namespace
}  // namespace pftgw::astm
