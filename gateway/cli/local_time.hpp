// Local device times to UTC offsets with the system's time-zone database
// (howardhinnant date/tz.h over /usr/share/zoneinfo). The core has no tz
// database; readers get this as their OffsetResolver.
#pragma once

#include <optional>
#include <string>

#include "gateway/core/device_profile.hpp"

namespace pftgw::cli {

// The UTC offset in minutes of `local` in `zone` (an IANA name). Empty when
// the zone is unknown, or when the local time is ambiguous (the hour repeated
// when clocks go back) or does not exist (skipped when they go forward):
// such a time is a finding, never a guess.
std::optional<int> resolve_utc_offset(const std::string& zone, const LocalDateTime& local);

}  // namespace pftgw::cli
