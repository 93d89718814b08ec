// HL7 v2.5.1 ORU^R01 writer: a normalized neutral result to one message.
#pragma once

#include <string>

#include "gateway/core/model.hpp"
#include "gateway/core/quantity_table.hpp"

namespace pftgw::hl7v2 {

struct OruOptions {
    std::string sending_application = "PFTGW";
    std::string sending_facility;
    std::string receiving_application;
    std::string receiving_facility;
    std::string target = "hl7v2";       // part of the MSH-10 key (DECISIONS.md)
    char processing_id = 'P';           // MSH-11: P, D or T
    UnitSystem units = UnitSystem::si;  // only names the rendering in NTE; values come rendered
    std::string message_time_iso;       // MSH-7; empty: the session time (no clock in writers)
};

// Appends one ORU^R01 message (segments ending in CR, no MLLP framing) to `out`.
// The result must be normalized, validated for Target::hl7v2 and rendered
// in the target's units (core's render_units).
void write_oru_r01(const NeutralResult& result, const OruOptions& options,
                   const QuantityTable& table, std::string& out);

// HL7 v2 escaping of a text value with the default delimiters |^~\&.
void append_escaped(std::string_view text, std::string& out);

}  // namespace pftgw::hl7v2
