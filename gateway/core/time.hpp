// Calendar dates and timestamps with their UTC offset. No clock: time is passed in.
#pragma once

#include <optional>
#include <string>
#include <string_view>

#include "gateway/core/result.hpp"

namespace pftgw {

struct Date {
    int year = 0;
    int month = 0;
    int day = 0;
    bool operator==(const Date&) const = default;
    auto operator<=>(const Date&) const = default;
};

// A point in time as the source gave it, with its offset from UTC.
// Every timestamp in a result carries its offset (SCHEMA-NOTES.md, "Time").
struct Timestamp {
    Date date;
    int hour = 0;
    int minute = 0;
    int second = 0;
    int millisecond = 0;
    int offset_minutes = 0;  // e.g. +60 for +01:00
    bool operator==(const Timestamp&) const = default;
};

// Days since 1970-01-01 (proleptic Gregorian), H. Hinnant's days_from_civil.
long days_from_civil(const Date& d);
bool is_valid_date(const Date& d);

// "YYYY-MM-DD".
Result<Date> parse_iso_date(std::string_view text);
std::string to_iso(const Date& d);

// "YYYY-MM-DDThh:mm[:ss[.fff]](Z|+hh:mm|-hh:mm)"; an offset is required.
Result<Timestamp> parse_iso_timestamp(std::string_view text);
std::string to_iso(const Timestamp& t);  // seconds always, milliseconds when non-zero

// HL7 v2 TS: YYYYMMDDHHMMSS[.SSS]+ZZZZ, always with the offset.
std::string to_hl7_ts(const Timestamp& t);
std::string to_hl7_date(const Date& d);  // YYYYMMDD

// Seconds since the Unix epoch, in UTC.
long long to_unix_seconds(const Timestamp& t);

// Age in decimal years at a date: days / 365.25, as the GLI equations use it.
Result<double> age_years(const Date& birth, const Date& at);

}  // namespace pftgw
