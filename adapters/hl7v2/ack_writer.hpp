// HL7 v2 original-mode acknowledgments (ACK) for received ORU^R01 messages,
// as bytes ready for the daemon to frame and send (segments end in CR; no MLLP).
//
// Layout (interop-facts.md, HL7 section; python3-hl7 0.4.5 create_ack does the same
// for the MSH and MSA fields it fills):
//   MSH  MSH-1/MSH-2 as received (the copied fields keep their escapes);
//        MSH-3/4 = received MSH-5/6 and MSH-5/6 = received MSH-3/4, byte for byte;
//        MSH-7 the caller's time, else the received MSH-7 (no clock here);
//        MSH-9 "ACK^<received trigger>^ACK"; for a 2.3 message "ACK^<trigger>"
//        (the message structure component came with 2.3.1: from memory);
//        MSH-10 a new id: the first 20 base32 characters of SHA-256 over
//        "pftgw-ack-1", received MSH-3, MSH-4, MSH-10 and the ACK code
//        (same message, same answer: the same id); MSH-11 and MSH-12 copied;
//        MSH-18 copied, so the sender reads the ACK in its own character set.
//   MSA  MSA-1 AA / AE / AR, MSA-2 = the received MSH-10 exactly.
//   ERR  one per error or warning finding (at most kMaxErrSegments). 2.5 and
//        later: ERR-2 location "OBX^1^5", ERR-3 table 0357 code^text^HL70357,
//        ERR-4 severity E / W, ERR-8 the finding's message. 2.3 and 2.4 have
//        only ERR-1 (ELD "OBX^1^5^102&Data type error&HL70357") and no
//        severity, so only errors are listed there (from memory).
// Code rule (ack_code_for): AR when the message cannot be read as an ORU^R01
// at all (MSH unreadable or not ORU^R01, MSH-10 empty, MSH-12 outside
// 2.3-2.6, MSH-18 unknown); AE when it was read but a finding of severity
// error holds (the reader's, or normalize / validate's passed in); AA otherwise.
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "adapters/hl7v2/hl7_parser.hpp"
#include "adapters/hl7v2/oru_reader.hpp"
#include "gateway/core/model.hpp"

namespace pftgw::hl7v2 {

enum class AckCode { accept, error, reject };  // MSA-1 AA, AE, AR (table 0008)
std::string_view to_string(AckCode c);         // "AA", "AE", "AR"

inline constexpr std::size_t kMaxErrSegments = 50;  // own limit: an ACK stays small

struct AckOptions {
    std::optional<Timestamp> message_time;  // MSH-7; empty: the received MSH-7
};

// The ACK for a parsed message. Each finding's HL7 place is its ("location",
// "OBX^1^5") value and its table 0357 code its ("hl7.error", "102") value;
// without them the code follows the rule id (value.*, time.* 102; *.missing,
// complete.* 101; unit.*, condition.*, quantity.*, profile.* 103; else 207).
std::string make_ack(const ParsedMessage& received, AckCode code,
                     const std::vector<Finding>& findings, const AckOptions& options = {});

// AA / AE / AR for a read message and the findings later steps added.
AckCode ack_code_for(const ReadMessage& message, const std::vector<Finding>& later = {});

// The whole step: locates `later` findings (normalize, validate) through the
// message's locations, picks the code and writes the ACK with the reader's and
// the later findings. Empty when the MSH could not be read (nothing to echo).
std::string acknowledge(const ReadMessage& message, const std::vector<Finding>& later = {},
                        const AckOptions& options = {});

}  // namespace pftgw::hl7v2
