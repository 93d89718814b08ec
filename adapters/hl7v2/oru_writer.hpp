// HL7 v2.5.1 ORU^R01 writer: a normalized neutral result to one message.
//
// Layout (structure from the 2.5.1 ORU_R01 data in npm hl7v2-dictionary 1.8.0):
//   MSH PID { ORC OBR [NTE...] { OBX [NTE...] } }   one ORC/OBR group per test
// Choices this writer makes (DEVELOPERS.md "Decisions of our own" lists them too):
// - segments end in CR; no MLLP framing; MSH-18 is always "UNICODE UTF-8";
// - OBX-7 / OBX-8 use one reference set: the first the gateway computed (the
//   reference policy, a GLI set) when it has a limit, else the first set; with
//   two or more sets an NTE names the one used. OBX-8 is L / H / N against its
//   LLN / ULN only, compared at the displayed decimals; a value equal to LLN or
//   ULN is N; never LL / HH / A. z-score bands (-1.645 / -2.5 / -4.0) are NTE text;
// - every set goes out (OBX-4 = set number), named in an NTE and in OBX-17
//   (CE text) of its predicted-value OBX;
// - grades (finding quality.grade) are ST OBX coded FEV1.grade / FVC.grade /
//   DLCO.grade in 99PFTGW after the test's quantities; warnings, errors and the
//   info findings quality.* and adjust.* are NTE under the OBX or OBR their
//   path names; other info findings are for `pftgw check` only;
// - predicted, LLN, ULN, z-score and percent predicted are OBX of their own,
//   coded by the quantity table's variant rows, OBX-4 = the reference set number;
// - an absent quantity is an OBX with empty OBX-2/OBX-5 and OBX-11 "X"
//   (table 0085 "results cannot be obtained"; "N" only means "not asked", which
//   the gateway cannot know), followed by an NTE with the reason;
// - a value's own comments are NTE (NTE-2 "L") directly after its OBX, before
//   the writer's notes on it; the test's comments are NTE after the OBR;
// - CR, LF and every other control byte in text are hex escapes (\X0D\, \X0A\),
//   never ".br": exact round trip in any text type, and no MLLP byte can leak.
#pragma once

#include <optional>
#include <string>
#include <string_view>

#include "gateway/core/model.hpp"
#include "gateway/core/quantity_table.hpp"
#include "gateway/core/result.hpp"

namespace pftgw::hl7v2 {

struct OruOptions {
    std::string sending_application = "PFTGW";  // MSH-3..6: HD namespace ids, escaped
    std::string sending_facility;
    std::string receiving_application;
    std::string receiving_facility;
    std::string target = "hl7v2";       // part of the MSH-10 key (DECISIONS.md)
    char processing_id = 'P';           // MSH-11: P, D or T (table 0103)
    UnitSystem units = UnitSystem::si;  // picks display decimals; values come rendered
    std::string message_time_iso;       // MSH-7; empty: the session time (no clock in writers)
};

// Options a writer cannot repair: an unparsable message_time_iso, a processing
// id outside table 0103. Check once at start-up; write_oru_r01 then falls back
// to the session time for a bad message_time_iso rather than failing.
std::optional<Error> check_oru_options(const OruOptions& options);

// Appends one ORU^R01 message (segments ending in CR, no MLLP framing) to `out`.
// The result must be normalized, validated for Target::hl7v2 and rendered
// in the target's units (core's render_units). Same input, same bytes.
void write_oru_r01(const NeutralResult& result, const OruOptions& options,
                   const QuantityTable& table, std::string& out);

// HL7 v2 escaping of a text value with the default delimiters |^~\&:
// | \F\, ^ \S\, & \T\, ~ \R\, \ \E\, control bytes (CR, LF, ...) as \Xhh\.
void append_escaped(std::string_view text, std::string& out);

// The OBX-8 flag for a value against LLN / ULN at `decimals` places:
// "L" below LLN, "H" above ULN, "N" otherwise (equal to a limit is N),
// "" when neither limit is known.
std::string_view abnormal_flag(double value, std::optional<double> lln, std::optional<double> uln,
                               int decimals);

}  // namespace pftgw::hl7v2
