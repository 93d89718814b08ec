// ASTM E1394 (CLSI LIS2-A2) record reader: the text of one or more completed
// E1381 messages (H ... L records, each ending in CR) into neutral results,
// mapped through a device profile. One NeutralResult per O record; each P
// starts a subject. The result is as received: units and conditions as sent
// or as the profile says, Quantity::source exactly as sent; no unit
// conversion (normalize() does that). A message without its L record gives a
// finding and no result. Rules and field use: schemas/device-profile.md,
// "How the ASTM E1394 reader uses a profile".
#pragma once

#include <string>
#include <string_view>
#include <vector>

#include "gateway/core/device_profile.hpp"
#include "gateway/core/model.hpp"

namespace pftgw::astm {

struct E1394Outcome {
    std::vector<NeutralResult> results;  // complete sessions only, in the order of their O records
    // Findings about the transmission itself (truncation, record order, bad
    // header) and those of sessions that were discarded with their message.
    // A session's own findings are in its NeutralResult::findings.
    std::vector<Finding> findings;
};

// The four delimiters an H record declares (`H|\^&`: field, repeat, component, escape).
struct Delimiters {
    char field = '|';
    char repeat = '\\';
    char component = '^';
    char escape = '&';
};

// Reads the records of `message_text`. Times without an offset are local to
// profile.time_zone and converted through `resolve_offset` (may be null: such
// times are then refused). `source_name` names the input in findings.
E1394Outcome read_e1394(std::string_view message_text, const DeviceProfile& profile,
                        OffsetResolver resolve_offset, std::string_view source_name);

// E1394 escape sequences inside one component (&F& &S& &R& &E&, &Xhh..&); an
// unknown or unterminated sequence is kept as sent and `unknown` is set.
std::string decode_escapes(std::string_view text, const Delimiters& d, bool* unknown = nullptr);

}  // namespace pftgw::astm
