// Device local times to UTC offsets through the system tz database.
#include "gateway/cli/local_time.hpp"

#include <gtest/gtest.h>

namespace pftgw::cli {
namespace {

LocalDateTime at(int y, int m, int d, int h, int mi) {
    return LocalDateTime{Date{y, m, d}, h, mi, 0};
}

// EU summer time (Directive 2000/84/EC): from the last Sunday of March to the
// last Sunday of October, changing at 01:00 UTC. Central European Time is
// UTC+1, its summer time UTC+2. In 2026 those Sundays are 29 March and 25 October.
TEST(LocalTime, CentralEuropeWinterAndSummer) {
    EXPECT_EQ(resolve_utc_offset("Europe/Oslo", at(2026, 1, 15, 9, 0)), 60);
    EXPECT_EQ(resolve_utc_offset("Europe/Oslo", at(2026, 7, 15, 9, 0)), 120);
    EXPECT_EQ(resolve_utc_offset("UTC", at(2026, 7, 15, 9, 0)), 0);
}

TEST(LocalTime, SkippedAndRepeatedHoursAreNotGuessed) {
    // 29 March 2026, 02:30 local does not exist; 25 October 2026, 02:30 happens twice.
    EXPECT_EQ(resolve_utc_offset("Europe/Oslo", at(2026, 3, 29, 2, 30)), std::nullopt);
    EXPECT_EQ(resolve_utc_offset("Europe/Oslo", at(2026, 10, 25, 2, 30)), std::nullopt);
    EXPECT_EQ(resolve_utc_offset("Europe/Oslo", at(2026, 3, 29, 3, 30)), 120);
}

TEST(LocalTime, UnknownZone) {
    EXPECT_EQ(resolve_utc_offset("Mars/Olympus", at(2026, 1, 1, 0, 0)), std::nullopt);
}

}  // namespace
}  // namespace pftgw::cli
