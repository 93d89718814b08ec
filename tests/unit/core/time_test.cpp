// Dates, timestamps and age at test.
#include "gateway/core/time.hpp"

#include <gtest/gtest.h>

namespace pftgw {
namespace {

TEST(Time, ParsesOffsetAndFormatsHl7) {
    auto t = parse_iso_timestamp("2026-03-14T09:12:05+01:00");
    ASSERT_TRUE(t.ok()) << t.error().message;
    EXPECT_EQ(t->offset_minutes, 60);
    EXPECT_EQ(to_hl7_ts(*t), "20260314091205+0100");
    EXPECT_EQ(to_iso(*t), "2026-03-14T09:12:05+01:00");
}

TEST(Time, NegativeOffsetAndMilliseconds) {
    auto t = parse_iso_timestamp("2026-03-14T09:12:05.25-05:30");
    ASSERT_TRUE(t.ok());
    EXPECT_EQ(t->millisecond, 250);
    EXPECT_EQ(t->offset_minutes, -330);
    EXPECT_EQ(to_hl7_ts(*t), "20260314091205.250-0530");
}

TEST(Time, RefusesTimestampWithoutOffset) {
    auto t = parse_iso_timestamp("2026-03-14T09:12:05");
    ASSERT_FALSE(t.ok());
    EXPECT_EQ(t.error().code, "time.no-offset");
}

TEST(Time, RefusesImpossibleDate) {
    EXPECT_FALSE(parse_iso_date("2025-02-29").ok());
    EXPECT_TRUE(parse_iso_date("2024-02-29").ok());
}

TEST(Time, UnixSecondsMatchesPosixEpoch) {
    // POSIX: 2000-01-01T00:00:00Z is 946684800 s after the epoch (well-known constant).
    auto t = parse_iso_timestamp("2000-01-01T01:00:00+01:00");
    ASSERT_TRUE(t.ok());
    EXPECT_EQ(to_unix_seconds(*t), 946684800LL);
}

TEST(Time, AgeInDecimalYearsUsesDaysOver365_25) {
    // GLI practice: decimal age = days / 365.25 (common practice).
    auto age = age_years(Date{1980, 1, 1}, Date{2025, 1, 1});
    ASSERT_TRUE(age.ok());
    EXPECT_NEAR(*age, 16437.0 / 365.25, 1e-12);  // 16437 days from 1980-01-01 to 2025-01-01
    EXPECT_FALSE(age_years(Date{2025, 1, 2}, Date{2025, 1, 1}).ok());
}

}  // namespace
}  // namespace pftgw
