// HL7 v2 ORU^R01 reader: messages of a file into neutral results as received.
#include "adapters/hl7v2/oru_reader.hpp"

#include <algorithm>
#include <array>
#include <charconv>
#include <cstdlib>
#include <map>

namespace pftgw::hl7v2 {
namespace {

// Versions this reader knows the ORU^R01 layout of (MSH-12.1).
constexpr std::array<std::string_view, 6> kVersions = {"2.3", "2.3.1", "2.4",
                                                       "2.5", "2.5.1", "2.6"};

// HL7 table 0357 message error condition codes (from memory, interop-facts.md flag M).
constexpr std::string_view kErrRequiredMissing = "101";
constexpr std::string_view kErrDataType = "102";
constexpr std::string_view kErrTableValue = "103";
constexpr std::string_view kErrSegmentSequence = "100";
constexpr std::string_view kErrMessageType = "200";
constexpr std::string_view kErrEventCode = "201";
constexpr std::string_view kErrVersion = "203";

constexpr std::string_view kAbsentReason = "not-measured";
constexpr std::string_view kRuleReferenceOrphan = "hl7.reference-without-value";
constexpr std::string_view kRuleRange = "hl7.range-unreadable";

bool is_batch_segment(std::string_view id) {
    return id == "FHS" || id == "BHS" || id == "BTS" || id == "FTS";
}

std::string_view segment_id(std::string_view line) {
    return line.substr(0, 3);
}

std::string trim(std::string_view s) {
    while (!s.empty() && (s.front() == ' ' || s.front() == '\t')) s.remove_prefix(1);
    while (!s.empty() && (s.back() == ' ' || s.back() == '\t')) s.remove_suffix(1);
    return std::string(s);
}

// An HL7 NM: [+|-]digits[sep digits], spaces around allowed; nothing else.
std::optional<double> parse_number(std::string_view text, char decimal_separator) {
    std::string s = trim(text);
    if (s.empty()) return std::nullopt;
    std::size_t i = (s[0] == '+' || s[0] == '-') ? 1 : 0;
    bool digits = false;
    bool sep = false;
    for (std::size_t k = i; k < s.size(); ++k) {
        if (s[k] >= '0' && s[k] <= '9') {
            digits = true;
        } else if (s[k] == decimal_separator && !sep) {
            sep = true;
            s[k] = '.';
        } else {
            return std::nullopt;
        }
    }
    if (!digits) return std::nullopt;
    if (s[0] == '+') s.erase(0, 1);
    double v = 0;
    const auto r = std::from_chars(s.data(), s.data() + s.size(), v);
    if (r.ec != std::errc() || r.ptr != s.data() + s.size()) return std::nullopt;
    return v;
}

struct Range {
    std::optional<double> low;
    std::optional<double> high;
};

// OBX-7 "2.10-3.50", ">1.2", "<5", "-1.64-1.64" (a sign may lead either bound).
std::optional<Range> parse_range(std::string_view text, char decimal_separator) {
    const std::string s = trim(text);
    if (s.empty()) return std::nullopt;
    Range r;
    if (s[0] == '>' || s[0] == '<') {
        std::string_view rest = std::string_view(s).substr(1);
        if (!rest.empty() && rest[0] == '=') rest.remove_prefix(1);
        const auto v = parse_number(rest, decimal_separator);
        if (!v) return std::nullopt;
        (s[0] == '>' ? r.low : r.high) = v;
        return r;
    }
    for (std::size_t i = 1; i < s.size(); ++i) {
        if (s[i] != '-') continue;
        const char before = s[i - 1];
        if (!(before >= '0' && before <= '9') && before != ' ') continue;
        r.low = parse_number(std::string_view(s).substr(0, i), decimal_separator);
        r.high = parse_number(std::string_view(s).substr(i + 1), decimal_separator);
        if (r.low && r.high) return r;
        return std::nullopt;
    }
    return std::nullopt;
}

// OBX-6.1 "L BTPS", "L(BTPS)", "L [BTPS]": the unit and the condition text.
std::pair<std::string, std::string> split_condition(const std::string& unit_text) {
    for (std::string_view cond : {"BTPS", "STPD", "ATPS", "ATPD"}) {
        const std::string_view u = unit_text;
        if (u.size() <= cond.size()) continue;
        std::string_view head = u;
        std::string_view tail;
        if (u.back() == ')' || u.back() == ']') {
            const char open = u.back() == ')' ? '(' : '[';
            const auto at = u.rfind(open);
            if (at == std::string_view::npos) continue;
            tail = u.substr(at + 1, u.size() - at - 2);
            head = u.substr(0, at);
        } else {
            const auto at = u.rfind(' ');
            if (at == std::string_view::npos) continue;
            tail = u.substr(at + 1);
            head = u.substr(0, at);
        }
        if (tail.size() != cond.size()) continue;
        bool same = true;
        for (std::size_t i = 0; i < cond.size(); ++i)
            same = same && std::toupper(static_cast<unsigned char>(tail[i])) == cond[i];
        if (same) return {trim(head), std::string(tail)};
    }
    return {unit_text, {}};
}

int parse_digits(std::string_view s, std::size_t at, std::size_t n) {
    int v = 0;
    for (std::size_t i = at; i < at + n; ++i) v = v * 10 + (s[i] - '0');
    return v;
}

bool all_digits(std::string_view s) {
    for (char c : s)
        if (c < '0' || c > '9') return false;
    return true;
}

// An HL7 TS / DTM "YYYYMMDD[HH[MM[SS[.S[S[S[S]]]]]]][+/-ZZZZ]" (at least a date).
struct TimeRead {
    std::optional<Timestamp> time;
    std::optional<LocalDateTime> local;  // parsed, but without an offset
    bool invalid = false;
};
TimeRead parse_ts(std::string_view text) {
    TimeRead out;
    std::size_t zone = text.find_first_of("+-");
    std::string_view main = text.substr(0, zone);
    std::string_view fraction;
    if (const auto dot = main.find('.'); dot != std::string_view::npos) {
        fraction = main.substr(dot + 1);
        main = main.substr(0, dot);
    }
    const bool sizes_ok =
        main.size() == 8 || main.size() == 10 || main.size() == 12 || main.size() == 14;
    if (!sizes_ok || !all_digits(main) || !all_digits(fraction) || fraction.size() > 4 ||
        (!fraction.empty() && main.size() != 14)) {
        out.invalid = true;
        return out;
    }
    Timestamp t;
    t.date = {parse_digits(main, 0, 4), parse_digits(main, 4, 2), parse_digits(main, 6, 2)};
    if (main.size() >= 10) t.hour = parse_digits(main, 8, 2);
    if (main.size() >= 12) t.minute = parse_digits(main, 10, 2);
    if (main.size() >= 14) t.second = parse_digits(main, 12, 2);
    for (std::size_t i = 0; i < 3; ++i)
        t.millisecond = t.millisecond * 10 + (i < fraction.size() ? fraction[i] - '0' : 0);
    if (!is_valid_date(t.date) || t.hour > 23 || t.minute > 59 || t.second > 59) {
        out.invalid = true;
        return out;
    }
    if (zone == std::string_view::npos) {
        out.local = LocalDateTime{t.date, t.hour, t.minute, t.second};
        out.time = t;  // offset still to be resolved
        return out;
    }
    const std::string_view off = text.substr(zone + 1);
    if (off.size() != 4 || !all_digits(off)) {
        out.invalid = true;
        return out;
    }
    constexpr int kMaxOffsetHours = 14;  // UTC-12 .. UTC+14 are the zones in use
    const int hh = parse_digits(off, 0, 2);
    const int mm = parse_digits(off, 2, 2);
    if (hh > kMaxOffsetHours || mm > 59) {
        out.invalid = true;
        return out;
    }
    t.offset_minutes = (text[zone] == '-' ? -1 : 1) * (hh * 60 + mm);
    out.time = t;
    return out;
}

std::optional<Date> parse_date(std::string_view text) {
    if (text.size() < 8 || !all_digits(text.substr(0, 8))) return std::nullopt;
    Date d{parse_digits(text, 0, 4), parse_digits(text, 4, 2), parse_digits(text, 6, 2)};
    if (!is_valid_date(d)) return std::nullopt;
    return d;
}

// CX-4 assigning authority to an identifier system (the writer's inverse).
std::string identifier_system(const ParsedMessage& m, const Segment& pid, std::size_t rep,
                              const DeviceProfile* profile) {
    const std::string ns = m.text_of(pid, 3, rep, 4, 1);
    const std::string universal = m.text_of(pid, 3, rep, 4, 2);
    const std::string type = m.text_of(pid, 3, rep, 4, 3);
    if (!universal.empty()) return type == "ISO" ? "urn:oid:" + universal : universal;
    if (!ns.empty()) return ns;
    return profile ? profile->patient_identifier_system : std::string();
}

struct PendingVariant {
    std::string base;
    std::string variant;
    std::optional<double> value;
    std::string unit;
    std::optional<TestType> test;
    Hl7Location location;
    std::string code;
    std::string value_text;
};

class MessageMapper {
public:
    MessageMapper(const ParsedMessage& m, const Hl7ReadOptions& o, ReadMessage& out)
        : m_(m),
          options_(o),
          profile_(o.profile),
          table_(o.table ? *o.table : quantity_table()),
          out_(out) {}

    void run() {
        NeutralResult r;
        result_ = &r;
        std::map<std::string, int> seen;
        for (std::size_t i = 1; i < m_.segments.size(); ++i) {
            const Segment& s = m_.segments[i];
            const int occurrence = ++seen[s.id];
            if (s.id == "PID") {
                if (occurrence == 1) read_pid(s);
            } else if (s.id == "OBR") {
                read_obr(s, occurrence);
            } else if (s.id == "OBX") {
                read_obx(s, occurrence);
            } else if (s.id == "NTE") {
                read_nte(s);
            }
        }
        attach_variants();
        attach_comments();
        finish_device();
        if (corrected_) {
            r.status = ResultStatus::corrected;
            r.revision = 2;  // at least the second; the store renumbers from its history
        } else if (preliminary_) {
            r.status = ResultStatus::preliminary;
        }
        if (!r.session_time)
            for (const auto& t : r.tests)
                if (t.time) {
                    r.session_time = t.time;
                    break;
                }
        r.findings = out_.findings;
        out_.result = std::move(r);
    }

private:
    void add(std::string_view rule, Severity sev, std::string path, std::string message,
             std::vector<std::pair<std::string, std::string>> values, const Hl7Location& loc,
             std::string_view err) {
        out_.findings.push_back(add_finding(rule, sev, std::move(path), std::move(message),
                                            std::move(values), loc, err));
    }

public:
    static Finding add_finding(std::string_view rule, Severity sev, std::string path,
                               std::string message,
                               std::vector<std::pair<std::string, std::string>> values,
                               const Hl7Location& loc, std::string_view err) {
        Finding f;
        f.rule = std::string(rule);
        f.severity = sev;
        f.path = path.empty() ? to_string(loc) : std::move(path);
        f.message = std::move(message);
        f.values = std::move(values);
        f.values.emplace_back("location", to_string(loc));
        f.values.emplace_back("hl7.error", std::string(err));
        return f;
    }

private:
    char decimal() const { return profile_ ? profile_->decimal_separator : '.'; }

    // A TS field into a Timestamp with an offset, or a finding.
    std::optional<Timestamp> time_of(const Segment& s, std::size_t field, const Hl7Location& loc,
                                     const std::string& path) {
        const std::string text = m_.text_of(s, field, 1, 1);
        if (text.empty()) return std::nullopt;
        TimeRead t = parse_ts(text);
        if (t.invalid) {
            add(kRuleTimeInvalid, Severity::error, path,
                "'" + text + "' is not an HL7 timestamp YYYYMMDD[HHMM[SS[.S]]][+/-ZZZZ]",
                {{"time", text}}, loc, kErrDataType);
            return std::nullopt;
        }
        if (!t.local) return t.time;
        const std::string zone = profile_ ? profile_->time_zone : std::string();
        std::optional<int> offset;
        if (!zone.empty() && options_.resolve_offset)
            offset = options_.resolve_offset(zone, *t.local);
        if (!offset) {
            add(kRuleNoOffset, Severity::error, path,
                "'" + text + "' has no UTC offset and " +
                    (zone.empty() ? std::string("the device profile names no time zone")
                                  : "its offset in " + zone + " is unknown"),
                {{"time", text}, {"zone", zone}}, loc, kErrDataType);
            return std::nullopt;
        }
        t.time->offset_minutes = *offset;
        return t.time;
    }

    void read_pid(const Segment& s) {
        Subject& subj = result_->subject;
        const Hl7Location loc{"PID", 1, 3};
        for (std::size_t rep = 1; rep <= m_.repetitions(s, 3); ++rep) {
            Identifier id;
            id.value = m_.text_of(s, 3, rep, 1);
            if (id.value.empty()) continue;
            id.system = identifier_system(m_, s, rep, profile_);
            id.type = m_.text_of(s, 3, rep, 5);
            subj.identifiers.push_back(std::move(id));
        }
        out_.locations.push_back({"subject.identifiers", loc});
        subj.family_name = m_.text_of(s, 5, 1, 1, 1);
        subj.given_name = m_.text_of(s, 5, 1, 2);
        out_.locations.push_back({"subject.family_name", {"PID", 1, 5}});
        out_.locations.push_back({"subject.given_name", {"PID", 1, 5}});
        const std::string birth = m_.text_of(s, 7, 1, 1);
        if (!birth.empty()) {
            subj.birth_date = parse_date(birth);
            if (!subj.birth_date)
                add(kRuleTimeInvalid, Severity::error, "subject.birth_date",
                    "birth date '" + birth + "' is not YYYYMMDD", {{"birth_date", birth}},
                    {"PID", 1, 7}, kErrDataType);
        }
        out_.locations.push_back({"subject.birth_date", {"PID", 1, 7}});
        // PID-8 is administrative sex (table 0001); a device sends the sex its
        // reference equations used, so M / F also give the sex at birth.
        const std::string sex = m_.text_of(s, 8, 1, 1);
        if (sex == "F") {
            subj.sex_at_birth = SexAtBirth::female;
            subj.administrative_gender = "female";
        } else if (sex == "M") {
            subj.sex_at_birth = SexAtBirth::male;
            subj.administrative_gender = "male";
        } else if (sex == "O" || sex == "A") {
            subj.administrative_gender = "other";
        } else if (sex == "U") {
            subj.administrative_gender = "unknown";
        }
    }

    void read_obr(const Segment& s, int occurrence) {
        obr_ = occurrence;
        last_value_.reset();
        group_time_.reset();
        group_test_.reset();
        Order& o = result_->order;
        if (o.placer_number.empty()) o.placer_number = m_.text_of(s, 2, 1, 1);
        if (o.filler_number.empty()) o.filler_number = m_.text_of(s, 3, 1, 1);
        if (o.accession_number.empty()) o.accession_number = m_.text_of(s, 18, 1, 1);
        if (result_->device_session_number.empty())
            result_->device_session_number = o.filler_number;
        const std::string path = occurrence == 1 ? "session_time" : "";
        group_time_ = time_of(s, 7, {"OBR", occurrence, 7}, path);
        if (occurrence == 1) {
            result_->session_time = group_time_;
            out_.locations.push_back({"session_time", {"OBR", 1, 7}});
        }
    }

    // A value the last OBX made, by index (later OBX grow the vectors).
    struct ValueRef {
        std::size_t test;
        std::optional<std::size_t> trial;
        std::size_t index;
    };

    Quantity& value_at(const ValueRef& v) {
        Test& t = result_->tests[v.test];
        return v.trial ? t.trials[*v.trial].values[v.index] : t.values[v.index];
    }

    // HL7 v2.5.1 ch. 7 (ORU^R01 structure): an NTE after an OBX is a comment
    // on that observation, one after the OBR a comment on the whole order.
    void read_nte(const Segment& s) {
        if (obr_ == 0) return;  // NTE after PID: patient notes, not results
        const std::string text = m_.text_of(s, 3);
        if (text.empty()) return;
        if (last_value_) {
            value_at(*last_value_).comments.push_back(text);
            return;
        }
        // After the OBR, or after an OBX that made no value of a test (unmapped,
        // withdrawn, a predicted or LLN value, a subject or ambient value): the test's.
        comments_.push_back({group_test_, text});
    }

    const CodeMapping* find_mapping(const std::string& code, const std::string& system) const {
        if (!profile_ || code.empty()) return nullptr;
        if (!system.empty())
            if (const CodeMapping* c = profile_->find_code(code + "^^" + system)) return c;
        return profile_->find_code(code);
    }

    Test& test_for(TestType type, std::size_t* index) {
        for (std::size_t i = 0; i < result_->tests.size(); ++i)
            if (result_->tests[i].type == type) {
                *index = i;
                return result_->tests[i];
            }
        result_->tests.push_back(Test{});
        result_->tests.back().type = type;
        *index = result_->tests.size() - 1;
        return result_->tests.back();
    }

    void read_obx(const Segment& s, int occurrence) {
        const Hl7Location loc{"OBX", occurrence, 0};
        last_value_.reset();  // until this OBX makes a value of a test
        if (obr_ == 0 && !warned_order_) {
            warned_order_ = true;
            add(kRuleSegmentOrder, Severity::warning, "", "OBX before any OBR; read anyway", {},
                {"OBX", occurrence, 0}, kErrSegmentSequence);
        }
        std::string code = m_.text_of(s, 3, 1, 1);
        std::string system = m_.text_of(s, 3, 1, 3);
        const CodeMapping* mapping = find_mapping(code, system);
        if (!mapping) {
            const std::string alt = m_.text_of(s, 3, 1, 4);
            const std::string alt_system = m_.text_of(s, 3, 1, 6);
            if ((mapping = find_mapping(alt, alt_system))) {
                code = alt;
                system = alt_system;
            }
        }
        const std::string value_text = m_.text_of(s, 5);
        const std::string unit_text = m_.text_of(s, 6, 1, 1);
        const std::string status = m_.text_of(s, 11);
        if (!mapping) {
            add(kRuleUnmapped, Severity::warning, "",
                "OBX-3 code '" + code + "'" + (system.empty() ? "" : " (" + system + ")") +
                    " is not mapped by " +
                    (profile_ ? "device profile '" + profile_->name + "'"
                              : std::string("any device profile")) +
                    "; its value is kept in this finding",
                {{"code", code},
                 {"coding_system", system},
                 {"value", value_text},
                 {"unit", unit_text},
                 {"status", status}},
                {"OBX", occurrence, 3}, kErrTableValue);
            return;
        }
        const QuantityKind* kind = table_.find(mapping->kind);
        if (!kind) {
            add("quantity.unknown-kind", Severity::error, "",
                "profile maps '" + code + "' to kind '" + mapping->kind +
                    "', which the quantity table does not know",
                {{"code", code}, {"kind", mapping->kind}, {"value", value_text}},
                {"OBX", occurrence, 3}, kErrTableValue);
            return;
        }

        // OBX-11 (table 0085).
        bool absent = false;
        if (status == "C") {
            corrected_ = true;
        } else if (status == "P" || status == "I" || status == "R" || status == "S") {
            preliminary_ = true;
        } else if (status == "X" || status == "N") {
            absent = true;
        } else if (status == "D" || status == "W") {
            add(kRuleObxStatus, Severity::warning, "",
                "OBX-11 '" + status + "': the device withdrew this " + kind->key +
                    " value; not read",
                {{"code", code}, {"value", value_text}, {"status", status}},
                {"OBX", occurrence, 11}, kErrTableValue);
            return;
        } else if (status != "F") {
            add(kRuleObxStatus, Severity::warning, "",
                "OBX-11 '" + status + "' is not F, C or P; read as final",
                {{"code", code}, {"status", status}}, {"OBX", occurrence, 11},
                status.empty() ? kErrRequiredMissing : kErrTableValue);
        }

        Quantity q;
        q.kind = kind->base.empty() ? kind->key : kind->base;
        q.source.value_text = value_text;
        q.source.unit_text = unit_text;
        q.source.code = code;
        q.source.code_system = !system.empty() ? system : profile_->code_system;
        auto [sent_unit, condition_text] = split_condition(unit_text);
        q.source.condition_text = condition_text;
        // The device's own unit spellings ("ml", "mmHg") map to UCUM through the
        // profile's [units] table; what was sent stays in source.unit_text.
        const std::string* alias = profile_->ucum_for(sent_unit);
        const std::string ucum_unit = alias ? *alias : sent_unit;
        q.unit = (mapping->override_sent || ucum_unit.empty()) && !mapping->unit.empty()
                     ? mapping->unit
                     : ucum_unit;
        const auto sent_condition =
            condition_text.empty() ? std::nullopt : parse_gas_condition(condition_text);
        if (mapping->condition && (mapping->override_sent || !sent_condition))
            q.condition = *mapping->condition;
        else if (sent_condition)
            q.condition = *sent_condition;
        if (absent && trim(value_text).empty())
            q.absent_reason = std::string(kAbsentReason);
        else
            q.value = parse_number(value_text, decimal());

        const std::optional<Timestamp> when = time_of(s, 14, {"OBX", occurrence, 14}, "");
        std::optional<TestType> type = mapping->test;
        if (!type) type = parse_test_type(kind->test);

        if (kind->variant != "measured") {
            PendingVariant v;
            v.base = q.kind;
            v.variant = kind->variant;
            v.value = q.value;
            v.unit = q.unit;
            v.test = type;
            v.location = Hl7Location{"OBX", occurrence, 5};
            v.code = code;
            v.value_text = value_text;
            variants_.push_back(std::move(v));
            return;
        }
        // OBX-7 range: the device's LLN and ULN.
        const std::string range_text = m_.text_of(s, 7);
        if (!range_text.empty()) {
            const auto range = parse_range(range_text, decimal());
            if (range) {
                ReferenceValues& ref = reference_of(q);
                ref.lln = range->low;
                ref.uln = range->high;
            } else {
                add(kRuleRange, Severity::warning, "",
                    "OBX-7 '" + range_text + "' is not a range low-high, >low or <high",
                    {{"range", range_text}}, {"OBX", occurrence, 7}, kErrDataType);
            }
        }

        if (!type) {  // subject or environment quantities
            place_outside_tests(std::move(q), occurrence);
            return;
        }
        std::size_t ti = 0;
        Test& test = test_for(*type, &ti);
        group_test_ = ti;
        if (!test.time) test.time = group_time_ ? group_time_ : when;
        out_.locations.push_back(
            {"tests[" + std::to_string(ti) + "].time",
             group_time_ ? Hl7Location{"OBR", obr_, 7} : Hl7Location{"OBX", occurrence, 14}});
        if (!mapping->trial_value) {
            out_.locations.push_back(
                {"tests[" + std::to_string(ti) + "].values[" + q.kind + "]", loc});
            test.values.push_back(std::move(q));
            last_value_ = ValueRef{ti, std::nullopt, test.values.size() - 1};
            return;
        }
        int number = 0;
        const std::string sub_id = trim(m_.text_of(s, 4));
        const auto r = std::from_chars(sub_id.data(), sub_id.data() + sub_id.size(), number);
        if (sub_id.empty() || r.ec != std::errc() || r.ptr != sub_id.data() + sub_id.size() ||
            number <= 0) {
            add(kRuleTrialNumber, Severity::error, "",
                kind->key + " is a per-maneuver value but OBX-4 '" + sub_id +
                    "' is not a trial number",
                {{"code", code}, {"value", value_text}, {"sub_id", sub_id}}, {"OBX", occurrence, 4},
                kErrDataType);
            return;
        }
        std::size_t tj = 0;
        while (tj < test.trials.size() && test.trials[tj].number != number) ++tj;
        if (tj == test.trials.size()) {
            test.trials.push_back(Trial{});
            test.trials.back().number = number;
        }
        Trial& trial = test.trials[tj];
        if (!trial.time) trial.time = when;
        out_.locations.push_back({"tests[" + std::to_string(ti) + "].trials[" + std::to_string(tj) +
                                      "].values[" + q.kind + "]",
                                  loc});
        trial.values.push_back(std::move(q));
        last_value_ = ValueRef{ti, tj, trial.values.size() - 1};
    }

    ReferenceValues& reference_of(Quantity& q) {
        if (q.reference.empty()) {
            q.reference.emplace_back();
            q.reference.back().equation_set = profile_ ? profile_->equation_set : std::string();
        }
        return q.reference.front();
    }

    void place_outside_tests(Quantity q, int occurrence) {
        const Hl7Location loc{"OBX", occurrence, 0};
        const std::string k = q.kind;
        std::optional<Quantity>* slot = nullptr;
        std::string path;
        if (k == "HEIGHT") slot = &result_->subject.height, path = "subject.height";
        if (k == "WEIGHT") slot = &result_->subject.weight, path = "subject.weight";
        if (k == "AMB_TEMP")
            slot = &result_->environment.temperature, path = "environment.temperature";
        if (k == "PB") slot = &result_->environment.pressure, path = "environment.pressure";
        if (k == "RH") slot = &result_->environment.humidity, path = "environment.humidity";
        if (!slot) {
            add(kRuleUnmapped, Severity::warning, "",
                "kind '" + k + "' belongs to no test and no subject or environment field",
                {{"kind", k}, {"value", q.source.value_text}}, {"OBX", occurrence, 3},
                kErrTableValue);
            return;
        }
        *slot = std::move(q);
        out_.locations.push_back({path, loc});
    }

    Quantity* find_base(const PendingVariant& v) {
        for (auto& t : result_->tests) {
            if (v.test && t.type != *v.test) continue;
            if (Quantity* q = t.find(v.base)) return q;
        }
        if (v.base == "HEIGHT" && result_->subject.height) return &*result_->subject.height;
        if (v.base == "WEIGHT" && result_->subject.weight) return &*result_->subject.weight;
        return nullptr;
    }

    void attach_variants() {
        for (const auto& v : variants_) {
            Quantity* q = find_base(v);
            if (!q) {
                add(kRuleReferenceOrphan, Severity::warning, "",
                    v.variant + " of " + v.base +
                        " sent without the measured value; kept in this finding",
                    {{"code", v.code},
                     {"kind", v.base},
                     {"variant", v.variant},
                     {"value", v.value_text},
                     {"unit", v.unit}},
                    v.location, kErrRequiredMissing);
                continue;
            }
            ReferenceValues& ref = reference_of(*q);
            if (v.variant == "predicted") ref.predicted = v.value;
            if (v.variant == "lln") ref.lln = v.value;
            if (v.variant == "uln") ref.uln = v.value;
            if (v.variant == "z") ref.z_score = v.value;
            if (v.variant == "percent_predicted") ref.percent_predicted = v.value;
            const bool has_unit =
                v.variant == "predicted" || v.variant == "lln" || v.variant == "uln";
            if (has_unit && !v.unit.empty() && v.unit != q->unit) ref.unit = v.unit;
        }
    }

    void attach_comments() {
        for (const auto& [test, text] : comments_) {
            if (test && *test < result_->tests.size()) {
                result_->tests[*test].comments.push_back(text);
            } else if (!result_->tests.empty()) {
                result_->tests.front().comments.push_back(text);
            } else {
                add("hl7.comment-without-test", Severity::warning, "",
                    "NTE outside any test with values; kept in this finding", {{"text", text}},
                    {"NTE", 1, 3}, kErrSegmentSequence);
            }
        }
    }

    void finish_device() {
        Device& d = result_->device;
        if (profile_) d = profile_->device;
        std::string id;
        int seen = 0;
        for (const auto& s : m_.segments) {
            if (s.id != "OBX") continue;
            ++seen;
            id = m_.text_of(s, 18, 1, 1);
            if (!id.empty()) break;
        }
        if (id.empty()) id = m_.text_of(m_.msh(), 4, 1, 1);
        if (!id.empty()) d.id = id;
    }

    const ParsedMessage& m_;
    const Hl7ReadOptions& options_;
    const DeviceProfile* profile_;
    const QuantityTable& table_;
    ReadMessage& out_;
    NeutralResult* result_ = nullptr;
    int obr_ = 0;
    std::optional<Timestamp> group_time_;
    std::optional<std::size_t> group_test_;
    std::optional<ValueRef> last_value_;  // an NTE after it is about that value
    std::vector<std::pair<std::optional<std::size_t>, std::string>> comments_;
    std::vector<PendingVariant> variants_;
    bool corrected_ = false;
    bool preliminary_ = false;
    bool warned_order_ = false;
};

void reject(ReadMessage& rm, std::string_view rule, std::string message, Hl7Location loc,
            std::string_view err, std::vector<std::pair<std::string, std::string>> values = {}) {
    rm.findings.push_back(MessageMapper::add_finding(rule, Severity::error, "", std::move(message),
                                                     std::move(values), loc, err));
}

ReadMessage read_one(std::string_view bytes, std::size_t begin, std::size_t end,
                     const std::vector<Line>& lines, const Hl7ReadOptions& options) {
    ReadMessage rm;
    rm.begin = begin;
    rm.end = end;
    std::optional<Charset> fallback;
    if (options.profile)
        fallback = charset_from_hl7(
            options.profile->charset == "ISO-8859-1" ? "8859/1" : options.profile->charset);
    ParseOutcome p = parse_message(bytes, begin, end, lines, fallback);
    if (!p.message) {
        reject(rm, kRuleMshUnreadable, p.failure->message, {"MSH", 1, 2}, kErrRequiredMissing);
        return rm;
    }
    rm.parsed = std::move(p.message);
    const ParsedMessage& m = *rm.parsed;
    const Segment& msh = m.msh();
    rm.control_id.assign(m.field(msh, 10));
    if (!p.unknown_charset.empty())
        reject(rm, kRuleCharset,
               "MSH-18 '" + p.unknown_charset + "' is not ASCII, 8859/1 or UNICODE UTF-8",
               {"MSH", 1, 18}, kErrTableValue, {{"charset", p.unknown_charset}});
    const std::string type(m.raw(msh, 9, 1, 1));
    const std::string trigger(m.raw(msh, 9, 1, 2));
    if (type != "ORU")
        reject(rm, kRuleMessageType, "MSH-9 '" + std::string(m.raw(msh, 9)) + "' is not ORU^R01",
               {"MSH", 1, 9}, kErrMessageType, {{"type", type}});
    else if (trigger != "R01")
        reject(rm, kRuleMessageType, "MSH-9 trigger '" + trigger + "' is not R01", {"MSH", 1, 9},
               kErrEventCode, {{"trigger", trigger}});
    if (rm.control_id.empty())
        reject(rm, kRuleControlId, "MSH-10 message control id is empty", {"MSH", 1, 10},
               kErrRequiredMissing);
    const std::string version(m.raw(msh, 12, 1, 1));
    bool known = false;
    for (auto v : kVersions) known = known || v == version;
    if (!known)
        reject(rm, kRuleVersion, "MSH-12 version '" + version + "' is not one of 2.3 to 2.6",
               {"MSH", 1, 12}, kErrVersion, {{"version", version}});
    if (!rm.findings.empty()) return rm;  // not an ORU^R01 this reader can read: AR

    // Text that does not fit the declared character set (a Latin-1 byte in a
    // message that says ASCII or UTF-8): read with U+FFFD, and said so.
    bool lossy = false;
    for (const auto& s : m.segments) {
        const std::string_view whole =
            std::string_view(m.text).substr(s.whole.begin, s.whole.size());
        if (!s.header && !is_plain_text(whole, m.delimiters.escape)) (void)m.decode(whole, &lossy);
    }
    if (lossy)
        rm.findings.push_back(MessageMapper::add_finding(
            kRuleCharsetMismatch, Severity::warning, "",
            "bytes that are not valid in the declared character set were replaced by U+FFFD",
            {{"charset", std::string(m.raw(msh, 18))}}, {"MSH", 1, 18}, kErrTableValue));

    MessageMapper(m, options, rm).run();
    return rm;
}

}  // namespace

std::string to_string(const Hl7Location& l) {
    std::string s = l.segment + "^" + std::to_string(l.sequence);
    if (l.field > 0) s += "^" + std::to_string(l.field);
    return s;
}

bool ReadMessage::rejected() const {
    return !result.has_value();
}

std::optional<Hl7Location> ReadMessage::locate(const Finding& f) const {
    for (const auto& [name, value] : f.values) {
        if (name != "location") continue;
        Hl7Location l;
        const auto a = value.find('^');
        if (a == std::string::npos) return std::nullopt;
        l.segment = value.substr(0, a);
        const auto b = value.find('^', a + 1);
        l.sequence = std::atoi(value.c_str() + a + 1);
        if (b != std::string::npos) l.field = std::atoi(value.c_str() + b + 1);
        return l;
    }
    const PathLocation* best = nullptr;
    for (const auto& pl : locations) {
        if (f.path.compare(0, pl.path.size(), pl.path) != 0) continue;
        if (f.path.size() > pl.path.size() && f.path[pl.path.size()] != '.') continue;
        if (!best || pl.path.size() > best->path.size()) best = &pl;
    }
    if (!best) return std::nullopt;
    Hl7Location l = best->location;
    if (l.field == 0) {
        const std::string_view rest = std::string_view(f.path).substr(best->path.size());
        if (rest.rfind(".value", 0) == 0)
            l.field = 5;
        else if (rest.rfind(".unit", 0) == 0 || rest.rfind(".condition", 0) == 0)
            l.field = 6;
        else if (rest.rfind(".kind", 0) == 0)
            l.field = 3;
        else if (rest.rfind(".reference", 0) == 0)
            l.field = 7;
    }
    return l;
}

void Hl7Splitter::feed(std::string_view bytes, const MessageFn& fn) {
    buf_.append(bytes);
    lines(false, fn);
}

void Hl7Splitter::finish(const MessageFn& fn) {
    lines(true, fn);
    flush(fn);
    buf_.clear();
    base_ += scan_;
    scan_ = 0;
}

// Every complete line of buf_ (at the end: the rest too), then buf_ is cut to
// what a message still open needs.
void Hl7Splitter::lines(bool at_end, const MessageFn& fn) {
    // The next CR and the next LF, each searched again only once passed (memchr).
    std::size_t cr = buf_.find('\r', scan_);
    std::size_t lf = buf_.find('\n', scan_);
    for (;;) {
        if (cr != std::string::npos && cr < scan_) cr = buf_.find('\r', scan_);
        if (lf != std::string::npos && lf < scan_) lf = buf_.find('\n', scan_);
        const std::size_t e = std::min(cr, lf);
        if (e == std::string::npos) {
            if (at_end && scan_ < buf_.size()) {
                line(scan_, buf_.size(), false, fn);
                scan_ = buf_.size();
            }
            break;
        }
        line(scan_, e, true, fn);
        scan_ = e + 1;
    }
    const std::size_t keep = in_message_ ? msg_begin_ : scan_;
    if (keep > 0) {
        buf_.erase(0, keep);
        base_ += keep;
        scan_ -= keep;
        if (in_message_) {
            msg_end_ -= keep;
            msg_begin_ = 0;
        }
    }
}

// One line buf_[b, e), ended by buf_[e] when `terminated` (split_lines' rules).
void Hl7Splitter::line(std::size_t b, std::size_t e, bool terminated, const MessageFn& fn) {
    const std::size_t end_with_terminator = terminated ? e + 1 : e;
    std::size_t start = b;
    while (start < e && (buf_[start] == '\x0b' || buf_[start] == '\x1c')) ++start;
    if (start == e) {
        // An empty line: the LF of a CRLF belongs to the segment before it.
        if (in_message_ && msg_end_ == b && b > 0 && buf_[b - 1] == '\r' && terminated &&
            buf_[e] == '\n' && b == e)
            msg_end_ = end_with_terminator;
        return;
    }
    const std::string_view text(buf_.data() + start, e - start);
    const std::string_view id = segment_id(text);
    if (id == "MSH") {
        flush(fn);
        in_message_ = true;
        msg_begin_ = start;
        msg_end_ = end_with_terminator;
    } else if (is_batch_segment(id)) {
        flush(fn);
        if (id == "BHS") {
            in_batch_ = true;
            batch_messages_ = 0;
        } else if (id == "BTS") {
            // BTS-1 batch message count, when sent.
            const char sep = text.size() > 3 ? text[3] : '|';
            const std::string_view rest = text.substr(std::min<std::size_t>(4, text.size()));
            const std::string count(rest.substr(0, rest.find(sep)));
            if (!count.empty() && (!in_batch_ || std::atoi(count.c_str()) != batch_messages_)) {
                Finding f;
                f.rule = std::string(kRuleBatchCount);
                f.severity = Severity::warning;
                f.path = "byte " + std::to_string(base_ + start);  // the BTS segment
                f.message = "BTS-1 says " + count + " messages; the batch holds " +
                            std::to_string(batch_messages_);
                f.values = {{"count", count}, {"read", std::to_string(batch_messages_)}};
                findings_.push_back(std::move(f));
            }
            in_batch_ = false;
        }
    } else if (in_message_) {
        msg_end_ = end_with_terminator;
    } else {
        Finding f;
        f.rule = std::string(kRuleStraySegment);
        f.severity = Severity::warning;
        f.path = "byte " + std::to_string(base_ + start);
        f.message = "segment '" + std::string(id) + "' outside any message; not read";
        f.values = {{"segment", std::string(text.substr(0, 64))}};
        findings_.push_back(std::move(f));
    }
}

void Hl7Splitter::flush(const MessageFn& fn) {
    if (!in_message_) return;
    in_message_ = false;
    ++batch_messages_;
    fn(std::string_view(buf_).substr(msg_begin_, msg_end_ - msg_begin_), base_ + msg_begin_);
}

Hl7Split split_hl7(std::string_view bytes) {
    Hl7Split out;
    Hl7Splitter splitter;
    const Hl7Splitter::MessageFn fn = [&](std::string_view message, std::size_t offset) {
        out.messages.push_back({offset, offset + message.size()});
    };
    splitter.feed(bytes, fn);
    splitter.finish(fn);
    out.findings = splitter.take_findings();
    return out;
}

ReadMessage read_hl7_message(std::string_view bytes, std::size_t begin, std::size_t end,
                             const Hl7ReadOptions& options) {
    std::vector<Line> lines = split_lines(bytes.substr(begin, end - begin));
    for (auto& l : lines) l.offset += begin;
    return read_one(bytes, begin, end, lines, options);
}

Hl7ReadOutcome read_hl7(std::string_view bytes, const Hl7ReadOptions& options) {
    Hl7Split split = split_hl7(bytes);
    Hl7ReadOutcome out;
    out.findings = std::move(split.findings);
    out.messages.reserve(split.messages.size());
    for (const auto& m : split.messages)
        out.messages.push_back(read_hl7_message(bytes, m.begin, m.end, options));
    return out;
}

}  // namespace pftgw::hl7v2
