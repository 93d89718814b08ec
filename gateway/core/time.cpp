// Date and timestamp parsing and formatting (see time.hpp).
#include "gateway/core/time.hpp"

#include <cstdio>

namespace pftgw {
namespace {

bool digits(std::string_view s, std::size_t pos, std::size_t n, int& out) {
    if (pos + n > s.size()) return false;
    int v = 0;
    for (std::size_t i = pos; i < pos + n; ++i) {
        if (s[i] < '0' || s[i] > '9') return false;
        v = v * 10 + (s[i] - '0');
    }
    out = v;
    return true;
}

Error time_error(std::string_view text, const char* expected) {
    return make_error("time.invalid", "'" + std::string(text) + "' is not a valid " + expected);
}

}  // namespace

long days_from_civil(const Date& d) {
    // H. Hinnant, "chrono-Compatible Low-Level Date Algorithms" (public domain algorithm).
    const int y = d.year - (d.month <= 2 ? 1 : 0);
    const long era = (y >= 0 ? y : y - 399) / 400;
    const unsigned yoe = static_cast<unsigned>(y - era * 400);
    const unsigned mp = static_cast<unsigned>(d.month > 2 ? d.month - 3 : d.month + 9);
    const unsigned doy = (153 * mp + 2) / 5 + static_cast<unsigned>(d.day) - 1;
    const unsigned doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
    return era * 146097 + static_cast<long>(doe) - 719468;
}

bool is_valid_date(const Date& d) {
    if (d.year < 1800 || d.year > 2999 || d.month < 1 || d.month > 12 || d.day < 1) return false;
    static constexpr int kDays[] = {31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31};
    const bool leap = (d.year % 4 == 0 && d.year % 100 != 0) || d.year % 400 == 0;
    const int max = kDays[d.month - 1] + (d.month == 2 && leap ? 1 : 0);
    return d.day <= max;
}

Result<Date> parse_iso_date(std::string_view text) {
    Date d;
    if (text.size() != 10 || text[4] != '-' || text[7] != '-' || !digits(text, 0, 4, d.year) ||
        !digits(text, 5, 2, d.month) || !digits(text, 8, 2, d.day) || !is_valid_date(d))
        return time_error(text, "date (expected YYYY-MM-DD)");
    return d;
}

std::string to_iso(const Date& d) {
    char buf[16];
    std::snprintf(buf, sizeof buf, "%04d-%02d-%02d", d.year, d.month, d.day);
    return buf;
}

Result<Timestamp> parse_iso_timestamp(std::string_view text) {
    const char* expected = "timestamp (expected YYYY-MM-DDThh:mm:ss with Z or +hh:mm)";
    if (text.size() < 16) return time_error(text, expected);
    auto date = parse_iso_date(text.substr(0, 10));
    if (!date) return time_error(text, expected);
    Timestamp t;
    t.date = date.value();
    if (text[10] != 'T' || !digits(text, 11, 2, t.hour) || text[13] != ':' ||
        !digits(text, 14, 2, t.minute))
        return time_error(text, expected);
    std::size_t pos = 16;
    if (pos < text.size() && text[pos] == ':') {
        if (!digits(text, pos + 1, 2, t.second)) return time_error(text, expected);
        pos += 3;
        if (pos < text.size() && text[pos] == '.') {
            ++pos;
            int ms = 0, n = 0;
            while (pos < text.size() && text[pos] >= '0' && text[pos] <= '9') {
                if (n < 3) ms = ms * 10 + (text[pos] - '0');
                ++n;
                ++pos;
            }
            if (n == 0) return time_error(text, expected);
            for (; n < 3; ++n) ms *= 10;
            t.millisecond = ms;
        }
    }
    if (pos >= text.size())
        return make_error("time.no-offset", "timestamp '" + std::string(text) +
                                                "' has no UTC offset (add Z or +hh:mm)");
    if (text[pos] == 'Z' && pos + 1 == text.size()) {
        t.offset_minutes = 0;
    } else if ((text[pos] == '+' || text[pos] == '-') && pos + 6 == text.size() &&
               text[pos + 3] == ':') {
        int oh = 0, om = 0;
        if (!digits(text, pos + 1, 2, oh) || !digits(text, pos + 4, 2, om) || oh > 14 || om > 59)
            return time_error(text, expected);
        t.offset_minutes = (text[pos] == '-' ? -1 : 1) * (oh * 60 + om);
    } else {
        return time_error(text, expected);
    }
    if (t.hour > 23 || t.minute > 59 || t.second > 60) return time_error(text, expected);
    return t;
}

std::string to_iso(const Timestamp& t) {
    char buf[48];
    const int off = t.offset_minutes < 0 ? -t.offset_minutes : t.offset_minutes;
    const char sign = t.offset_minutes < 0 ? '-' : '+';
    if (t.millisecond != 0)
        std::snprintf(buf, sizeof buf, "%04d-%02d-%02dT%02d:%02d:%02d.%03d%c%02d:%02d", t.date.year,
                      t.date.month, t.date.day, t.hour, t.minute, t.second, t.millisecond, sign,
                      off / 60, off % 60);
    else
        std::snprintf(buf, sizeof buf, "%04d-%02d-%02dT%02d:%02d:%02d%c%02d:%02d", t.date.year,
                      t.date.month, t.date.day, t.hour, t.minute, t.second, sign, off / 60,
                      off % 60);
    return buf;
}

std::string to_hl7_ts(const Timestamp& t) {
    char buf[40];
    const int off = t.offset_minutes < 0 ? -t.offset_minutes : t.offset_minutes;
    const char sign = t.offset_minutes < 0 ? '-' : '+';
    if (t.millisecond != 0)
        std::snprintf(buf, sizeof buf, "%04d%02d%02d%02d%02d%02d.%03d%c%02d%02d", t.date.year,
                      t.date.month, t.date.day, t.hour, t.minute, t.second, t.millisecond, sign,
                      off / 60, off % 60);
    else
        std::snprintf(buf, sizeof buf, "%04d%02d%02d%02d%02d%02d%c%02d%02d", t.date.year,
                      t.date.month, t.date.day, t.hour, t.minute, t.second, sign, off / 60,
                      off % 60);
    return buf;
}

std::string to_hl7_date(const Date& d) {
    char buf[16];
    std::snprintf(buf, sizeof buf, "%04d%02d%02d", d.year, d.month, d.day);
    return buf;
}

long long to_unix_seconds(const Timestamp& t) {
    return static_cast<long long>(days_from_civil(t.date)) * 86400LL + t.hour * 3600LL +
           t.minute * 60LL + t.second - t.offset_minutes * 60LL;
}

Result<double> age_years(const Date& birth, const Date& at) {
    if (!is_valid_date(birth) || !is_valid_date(at))
        return make_error("age.invalid-date", "birth date or test date is not a valid date");
    const long days = days_from_civil(at) - days_from_civil(birth);
    if (days < 0)
        return make_error("age.negative",
                          "birth date " + to_iso(birth) + " is after the test date " + to_iso(at));
    return static_cast<double>(days) / 365.25;
}

}  // namespace pftgw
