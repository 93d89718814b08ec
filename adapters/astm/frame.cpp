// ASTM E1381 frames: checksum, build, split, parse (see frame.hpp).
#include "adapters/astm/frame.hpp"

#include <algorithm>

namespace pftgw::astm {
namespace {

constexpr char kHexDigits[] = "0123456789ABCDEF";

int hex_value(char c) {
    if (c >= '0' && c <= '9') return c - '0';
    if (c >= 'A' && c <= 'F') return c - 'A' + 10;
    if (c >= 'a' && c <= 'f') return c - 'a' + 10;
    return -1;
}

// Offsets from the end of a frame: ... ETB|ETX C1 C2 CR LF.
constexpr std::size_t kTrailerBytes = 5;

}  // namespace

std::uint8_t checksum(std::string_view bytes) {
    unsigned sum = 0;
    for (char c : bytes) sum += static_cast<unsigned char>(c);
    return static_cast<std::uint8_t>(sum % 256);
}

std::string checksum_hex(std::string_view bytes) {
    const std::uint8_t sum = checksum(bytes);
    return {kHexDigits[sum >> 4], kHexDigits[sum & 0x0F]};
}

bool is_text_byte(unsigned char byte) {
    if (byte == static_cast<unsigned char>(kCr)) return true;
    return byte >= 0x20 && byte != 0x7F;
}

std::string build_frame(int frame_number, std::string_view text, bool last) {
    std::string frame;
    frame.reserve(text.size() + kMinFrameBytes);
    frame += kStx;
    frame += static_cast<char>('0' + ((frame_number % kFrameNumberModulus) + kFrameNumberModulus) %
                                         kFrameNumberModulus);
    frame += text;
    frame += last ? kEtx : kEtb;
    // The checksum covers FN through ETB/ETX: everything after STX so far.
    frame += checksum_hex(std::string_view(frame).substr(1));
    frame += kCr;
    frame += kLf;
    return frame;
}

std::vector<std::string> split_into_frames(std::string_view text, int first_frame_number) {
    std::vector<std::string> frames;
    int frame_number = first_frame_number;
    std::size_t pos = 0;
    do {
        const std::size_t n = std::min(kMaxFrameTextBytes, text.size() - pos);
        const bool last = pos + n == text.size();
        frames.push_back(build_frame(frame_number, text.substr(pos, n), last));
        frame_number = next_frame_number(frame_number);
        pos += n;
    } while (pos < text.size());
    return frames;
}

Result<ParsedFrame> parse_frame(std::string_view frame) {
    if (frame.size() < kMinFrameBytes || frame.size() > kMaxFrameBytes) {
        return make_error("astm.frame.length", "a frame is " + std::to_string(kMinFrameBytes) +
                                                   " to " + std::to_string(kMaxFrameBytes) +
                                                   " bytes; saw " + std::to_string(frame.size()));
    }
    if (frame.front() != kStx) return make_error("astm.frame.start", "a frame starts with STX");
    const char fn = frame[1];
    if (fn < '0' || fn > '7') {
        return make_error("astm.frame.number", "the frame number is an ASCII digit 0..7");
    }
    const std::size_t end_pos = frame.size() - kTrailerBytes;
    const char end = frame[end_pos];
    if ((end != kEtx && end != kEtb) || frame[frame.size() - 2] != kCr || frame.back() != kLf) {
        return make_error("astm.frame.end", "a frame ends with ETB|ETX C1 C2 CR LF");
    }
    const std::string_view text = frame.substr(2, end_pos - 2);
    for (std::size_t i = 0; i < text.size(); ++i) {
        if (!is_text_byte(static_cast<unsigned char>(text[i]))) {
            return make_error("astm.frame.text-byte",
                              "byte " + std::to_string(static_cast<unsigned char>(text[i])) +
                                  " may not stand in a frame's text",
                              "offset " + std::to_string(i + 2));
        }
    }
    const int c1 = hex_value(frame[end_pos + 1]);
    const int c2 = hex_value(frame[end_pos + 2]);
    const std::uint8_t expected = checksum(frame.substr(1, end_pos));  // FN..ETB/ETX
    if (c1 < 0 || c2 < 0 || (c1 * 16 + c2) != expected) {
        return make_error("astm.frame.checksum", "checksum " +
                                                     std::string(frame.substr(end_pos + 1, 2)) +
                                                     " does not match the bytes (expected " +
                                                     checksum_hex(frame.substr(1, end_pos)) + ")");
    }
    return ParsedFrame{fn - '0', std::string(text), end == kEtx};
}

}  // namespace pftgw::astm
