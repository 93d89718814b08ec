// HL7 v2 ORU^R01 reader (versions 2.3 to 2.6) for results as devices send
// them: one file or stream may hold several messages, with or without
// FHS/BHS/BTS/FTS batch segments. Each message becomes the result AS RECEIVED
// (units and conditions as sent, or as the device profile says; what was sent
// kept in Quantity::source), plus findings. No unit conversion: normalize() does it.
//
// Mapping (field numbers per HL7 2.5.1, the same in 2.3-2.6 for these fields):
//   MSH-4.1          device id when no OBX-18 names one
//   PID-3 (repeats)  identifiers: CX-1 value, CX-4 assigning authority
//                    (&oid&ISO -> "urn:oid:oid", &uri&URI -> uri, else the
//                    namespace id; none -> the profile's patient_identifier_system),
//                    CX-5 type
//   PID-5 (first)    family name (XPN-1.1) and given name (XPN-2)
//   PID-7            birth date;  PID-8 M/F -> sex at birth and administrative gender
//   OBR-2.1 / 3.1 / 18  placer / filler (also the device session number) / accession
//   OBR-7            test time and session time (the first OBR's)
//   OBX-3            code: OBX-3.1, looked up in the profile first as
//                    "code^^system" (OBX-3.3) then as "code"; then the same with
//                    the alternate code OBX-3.4 / OBX-3.6
//   OBX-5            value (NM; the profile's decimal separator)
//   OBX-6.1          unit; a trailing " BTPS" / "(BTPS)" (any condition) is the
//                    condition. The profile's unit/condition fill what is not sent,
//                    and replace what is sent when override_sent.
//   OBX-7            range "low-high", ">low", "<high" -> reference LLN / ULN
//   OBX-11           F final, C corrected (revision 2, status corrected; the
//                    store renumbers from its history), P/I/R/S preliminary,
//                    X/N absent ("not-measured"), D/W withdrawn (skipped, warning)
//   OBX-14           the value's time: the test time when OBR-7 is empty; trial time
//   OBX-4            the trial number of a per-maneuver value (CodeMapping.trial_value)
//   OBX-18.1         device id
//   NTE              after an OBX that made a value of a test (reported or
//                    per-maneuver): that value's comments; after the OBR, or
//                    after an OBX that made none (unmapped, withdrawn, a variant,
//                    a subject or ambient value): comments of the test the OBR
//                    group's values belong to
// Variant kinds ("FEV1.pred", ".lln", ".uln", ".z", ".pctpred") go into the
// base quantity's first ReferenceValues (the profile's equation_set).
// A code the profile does not map is a "profile.unmapped-code" warning holding
// code, coding system, value and unit: kept, never dropped.
//
// Times without an offset are local to the profile's time_zone and resolved
// through the OffsetResolver; without a zone, a resolver or an answer they
// are "time.no-offset" errors and left out.
#pragma once

#include <functional>
#include <optional>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "adapters/hl7v2/hl7_parser.hpp"
#include "gateway/core/device_profile.hpp"
#include "gateway/core/model.hpp"
#include "gateway/core/quantity_table.hpp"

namespace pftgw::hl7v2 {

// Where in the message a part of the result came from, for ERR-2.
struct Hl7Location {
    std::string segment;  // "OBX"
    int sequence = 1;     // occurrence of that segment id in the message, 1-based
    int field = 0;        // 0: the whole segment
};
std::string to_string(const Hl7Location& l);  // "OBX^3^5" (with the default ^)

// A neutral path prefix ("tests[0].values[FEV1]") and the segment it came from.
struct PathLocation {
    std::string path;
    Hl7Location location;
};

struct ReadMessage {
    std::string control_id;  // MSH-10 exactly as received (raw)
    std::size_t begin = 0;   // the message's bytes in the input: [begin, end)
    std::size_t end = 0;
    std::optional<ParsedMessage> parsed;  // empty when even the MSH is unreadable
    std::optional<NeutralResult> result;  // empty when it is not a readable ORU^R01
    std::vector<Finding> findings;        // the reader's; also in result->findings
    std::vector<PathLocation> locations;  // for locate()

    // The HL7 place of a finding: its ("location", "OBX^3^5") value when it has
    // one, else the longest `locations` prefix of its path, the field chosen by
    // the path's last part (.value 5, .unit and .condition 6, .kind 3,
    // .reference 7); nullopt when unknown.
    std::optional<Hl7Location> locate(const Finding& f) const;
    // True when this message cannot be read as an ORU^R01 at all (AR).
    bool rejected() const;
};

struct Hl7ReadOutcome {
    std::vector<ReadMessage> messages;
    std::vector<Finding> findings;  // about the file: stray segments, batch counts
};

struct Hl7ReadOptions {
    const DeviceProfile* profile = nullptr;  // required for OBX mapping; none: every code unmapped
    OffsetResolver resolve_offset = nullptr;
    const QuantityTable* table = nullptr;  // nullptr: quantity_table()
};

// All the messages of `bytes`, in order: split_hl7() then read_hl7_message() on each.
Hl7ReadOutcome read_hl7(std::string_view bytes, const Hl7ReadOptions& options);

// The two halves of read_hl7(), for a caller that splits on one thread and
// reads the messages on others. split_hl7() only finds where each message
// starts and ends (MSH to the next MSH, batch segment or the end) and what is
// wrong with the file itself (stray segments, batch counts); it parses nothing.
struct MessageRange {
    std::size_t begin = 0;  // [begin, end) in the input, segment end included
    std::size_t end = 0;
};
struct Hl7Split {
    std::vector<MessageRange> messages;
    std::vector<Finding> findings;  // about the file, as Hl7ReadOutcome::findings
};
Hl7Split split_hl7(std::string_view bytes);

// split_hl7() for a stream: bytes are fed in pieces of any size, and each
// message is handed over (its bytes, valid during the call only, and where
// they start in the stream) as soon as the segment after it, or the end,
// shows it complete.
// Memory holds one message and one segment, whatever the stream's length.
// File findings (stray segments, batch counts) collect in findings() as they
// are found; take_findings() hands over those found so far.
class Hl7Splitter {
public:
    using MessageFn = std::function<void(std::string_view bytes, std::size_t offset)>;
    void feed(std::string_view bytes, const MessageFn& fn);
    void finish(const MessageFn& fn);  // the end of the stream
    std::vector<Finding> take_findings() { return std::exchange(findings_, {}); }

private:
    void lines(bool at_end, const MessageFn& fn);
    void line(std::size_t b, std::size_t e, bool terminated, const MessageFn& fn);
    void flush(const MessageFn& fn);
    std::string buf_;       // from the current message's start (or the current line's)
    std::size_t base_ = 0;  // stream offset of buf_[0]
    std::size_t scan_ = 0;  // buf_ index where the next line starts
    bool in_message_ = false;
    std::size_t msg_begin_ = 0;  // buf_ indexes: the message so far, segment ends included
    std::size_t msg_end_ = 0;
    int batch_messages_ = 0;
    bool in_batch_ = false;
    std::vector<Finding> findings_;
};
// Reads the one message at bytes[begin, end) (a range split_hl7 gave).
ReadMessage read_hl7_message(std::string_view bytes, std::size_t begin, std::size_t end,
                             const Hl7ReadOptions& options);

// Rule ids of this reader (DEVELOPERS.md lists the core's).
inline constexpr std::string_view kRuleMshUnreadable = "hl7.msh-unreadable";      // AR
inline constexpr std::string_view kRuleMessageType = "hl7.message-type";          // AR
inline constexpr std::string_view kRuleVersion = "hl7.version-unsupported";       // AR
inline constexpr std::string_view kRuleControlId = "hl7.control-id-missing";      // AR
inline constexpr std::string_view kRuleCharset = "hl7.charset-unsupported";       // AR
inline constexpr std::string_view kRuleCharsetMismatch = "hl7.charset-mismatch";  // warning
inline constexpr std::string_view kRuleSegmentOrder = "hl7.segment-order";        // error
inline constexpr std::string_view kRuleObxStatus = "hl7.obx-status";              // warning
inline constexpr std::string_view kRuleStraySegment = "hl7.stray-segment";        // warning
inline constexpr std::string_view kRuleBatchCount = "hl7.batch-count";            // warning
inline constexpr std::string_view kRuleUnmapped = "profile.unmapped-code";        // warning
inline constexpr std::string_view kRuleNoOffset = "time.no-offset";               // error
inline constexpr std::string_view kRuleTimeInvalid = "time.invalid";              // error
inline constexpr std::string_view kRuleTrialNumber = "hl7.trial-number";          // error

}  // namespace pftgw::hl7v2
