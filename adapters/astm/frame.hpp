// ASTM E1381 (CLSI LIS1-A) frames: the control bytes, the checksum, building a
// frame, splitting a message's text into frames, and parsing one frame.
//
// Frame layout (interop-facts.md, "ASTM E1381 (LIS1-A) low level"):
//   STX FN text (ETB | ETX) C1 C2 CR LF
// FN is an ASCII digit 1..7, 0, 1, ...; a frame holds at most 247 bytes, so at
// most 240 text bytes; a longer text goes into ETB frames and a last ETX frame.
// Pure functions: no I/O, no clock.
#pragma once

#include <cstddef>
#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

#include "gateway/core/result.hpp"

namespace pftgw::astm {

// Control bytes (interop-facts.md, "Bytes").
inline constexpr char kEnq = 0x05;
inline constexpr char kAck = 0x06;
inline constexpr char kNak = 0x15;
inline constexpr char kEot = 0x04;
inline constexpr char kStx = 0x02;
inline constexpr char kEtx = 0x03;
inline constexpr char kEtb = 0x17;
inline constexpr char kCr = 0x0D;
inline constexpr char kLf = 0x0A;

// interop-facts.md: "at most 247 characters in all" = STX + FN + 240 text +
// ETB/ETX + C1 C2 + CR LF.
inline constexpr std::size_t kMaxFrameBytes = 247;
inline constexpr std::size_t kMaxFrameTextBytes = 240;
// STX FN ETX C1 C2 CR LF: a frame with empty text.
inline constexpr std::size_t kMinFrameBytes = 7;
// Frame numbers roll 1..7, 0 (interop-facts.md): modulo 8.
inline constexpr int kFrameNumberModulus = 8;
inline constexpr int kFirstFrameNumber = 1;

inline constexpr int next_frame_number(int frame_number) {
    return (frame_number + 1) % kFrameNumberModulus;
}

// The sum of `bytes` modulo 256 (interop-facts.md: "the sum of the bytes from
// FN through ETB/ETX inclusive, modulo 256"). The caller passes exactly that span.
std::uint8_t checksum(std::string_view bytes);

// The checksum as two uppercase hex digits.
std::string checksum_hex(std::string_view bytes);

// Whether a byte may stand in a frame's text. CR ends each record inside the
// text; every other C0 control byte and DEL are refused (stricter than the
// standard's list of restricted characters, which we only know from memory:
// no record field needs another control byte). Bytes 0x80..0xFF pass: the
// device profile's character set decides what they mean.
bool is_text_byte(unsigned char byte);

// One frame: STX FN text ETB|ETX C1 C2 CR LF. `frame_number` is taken modulo 8;
// `text` must be at most 240 bytes of text bytes (checked by parse_frame, not here).
std::string build_frame(int frame_number, std::string_view text, bool last);

// The frames of one message: 240-byte pieces, ETB frames then one ETX frame,
// numbered from `first_frame_number` and rolling 7 -> 0. An empty text gives
// one empty ETX frame.
std::vector<std::string> split_into_frames(std::string_view text,
                                           int first_frame_number = kFirstFrameNumber);

struct ParsedFrame {
    int frame_number = 0;  // 0..7
    std::string text;      // between FN and ETB/ETX
    bool last = false;     // true: ETX (end frame); false: ETB (intermediate)
};

// Parses and verifies one whole frame (STX through LF). Errors (codes):
// astm.frame.length, astm.frame.start, astm.frame.number, astm.frame.end,
// astm.frame.text-byte, astm.frame.checksum. Checksum digits are accepted in
// either case on receipt (built frames always use uppercase).
Result<ParsedFrame> parse_frame(std::string_view frame);

}  // namespace pftgw::astm
