// See local_time.hpp.
#include "gateway/cli/local_time.hpp"

#include <date/tz.h>

#include <chrono>

namespace pftgw::cli {

std::optional<int> resolve_utc_offset(const std::string& zone, const LocalDateTime& l) {
    const date::time_zone* tz = nullptr;
    try {
        tz = date::locate_zone(zone);
    } catch (const std::exception&) {
        return std::nullopt;  // unknown zone name
    }
    const auto day = date::local_days{date::year{l.date.year} / l.date.month / l.date.day};
    const auto t = day + std::chrono::hours{l.hour} + std::chrono::minutes{l.minute} +
                   std::chrono::seconds{l.second};
    const date::local_info info = tz->get_info(t);
    if (info.result != date::local_info::unique) return std::nullopt;
    return static_cast<int>(
        std::chrono::duration_cast<std::chrono::minutes>(info.first.offset).count());
}

}  // namespace pftgw::cli
