// ASTM E1394 record reader (see record_reader.hpp). Field numbers follow
// /work/shared/reference/interop-facts.md ("ASTM E1381 ... and E1394 records",
// flagged M there); the escape sequences and the L-3 and R-9 codes are from
// memory, marked where used.
#include "adapters/astm/record_reader.hpp"

#include <algorithm>
#include <cctype>
#include <charconv>
#include <optional>

#include "gateway/core/quantity_table.hpp"

namespace pftgw::astm {

namespace {

// From memory (E1394 section 7.5, not in interop-facts.md): the escape
// sequences inside a field: &F& field, &S& component, &R& repeat, &E& escape,
// &Xhh..& bytes in hex.
constexpr char kEscField = 'F';
constexpr char kEscComponent = 'S';
constexpr char kEscRepeat = 'R';
constexpr char kEscEscape = 'E';
constexpr char kEscHex = 'X';

// From memory (E1394 L-3 termination code): T sender aborted, E unknown
// system error. A message so terminated is incomplete.
constexpr std::string_view kAbortedTerminations = "TE";

// From memory (E1394 R-9 result status): C correction, P preliminary,
// X the test could not be done.
constexpr char kStatusCorrection = 'C';
constexpr char kStatusPreliminary = 'P';
constexpr char kStatusCannotBeDone = 'X';

// interop-facts.md: O-26 report type F final, P preliminary, C correction.
constexpr char kReportFinal = 'F';

// Extension namespace for E1394 data the neutral model does not hold.
constexpr std::string_view kExtensionNamespace = "https://pftgw.example/ns/astm-e1394";

constexpr std::string_view kNotMeasured = "not-measured";
constexpr std::string_view kReplacementCharacter = "\xEF\xBF\xBD";  // U+FFFD

std::vector<std::string_view> split(std::string_view s, char sep) {
    std::vector<std::string_view> out;
    std::size_t start = 0;
    while (true) {
        const auto pos = s.find(sep, start);
        if (pos == std::string_view::npos) {
            out.push_back(s.substr(start));
            return out;
        }
        out.push_back(s.substr(start, pos - start));
        start = pos + 1;
    }
}

std::string_view trim(std::string_view s) {
    while (!s.empty() && (s.front() == ' ' || s.front() == '\t')) s.remove_prefix(1);
    while (!s.empty() && (s.back() == ' ' || s.back() == '\t')) s.remove_suffix(1);
    return s;
}

void append_utf8(std::string& out, unsigned code_point) {
    if (code_point < 0x80) {
        out += static_cast<char>(code_point);
    } else {
        out += static_cast<char>(0xC0 | (code_point >> 6));
        out += static_cast<char>(0x80 | (code_point & 0x3F));
    }
}

// Length of the valid UTF-8 sequence at s[i], or 0 (RFC 3629 ranges).
std::size_t utf8_sequence(std::string_view s, std::size_t i) {
    const auto b = [&](std::size_t k) { return static_cast<unsigned char>(s[k]); };
    const unsigned char c = b(i);
    std::size_t n = 0;
    unsigned min = 0;
    if (c >= 0xC2 && c <= 0xDF) {
        n = 2;
        min = 0x80;
    } else if (c >= 0xE0 && c <= 0xEF) {
        n = 3;
        min = 0x800;
    } else if (c >= 0xF0 && c <= 0xF4) {
        n = 4;
        min = 0x10000;
    } else {
        return 0;
    }
    if (i + n > s.size()) return 0;
    unsigned cp = c & (0x7F >> n);
    for (std::size_t k = 1; k < n; ++k) {
        if ((b(i + k) & 0xC0) != 0x80) return 0;
        cp = (cp << 6) | (b(i + k) & 0x3F);
    }
    if (cp < min || cp > 0x10FFFF || (cp >= 0xD800 && cp <= 0xDFFF)) return 0;
    return n;
}

// The profile's character set to UTF-8; bytes that do not belong are replaced
// by U+FFFD and `bad` is set.
std::string to_utf8(std::string_view bytes, const std::string& charset, bool& bad) {
    std::string out;
    out.reserve(bytes.size());
    for (std::size_t i = 0; i < bytes.size();) {
        const auto c = static_cast<unsigned char>(bytes[i]);
        if (c < 0x80) {
            out += static_cast<char>(c);
            ++i;
        } else if (charset == "ISO-8859-1") {
            append_utf8(out, c);  // ISO-8859-1 is the first 256 code points
            ++i;
        } else if (charset == "UTF-8") {
            const std::size_t n = utf8_sequence(bytes, i);
            if (n == 0) {
                out += kReplacementCharacter;
                bad = true;
                ++i;
            } else {
                out.append(bytes.substr(i, n));
                i += n;
            }
        } else {
            out += kReplacementCharacter;
            bad = true;
            ++i;
        }
    }
    return out;
}

int hex_value(char c) {
    if (c >= '0' && c <= '9') return c - '0';
    if (c >= 'A' && c <= 'F') return c - 'A' + 10;
    if (c >= 'a' && c <= 'f') return c - 'a' + 10;
    return -1;
}

// A number with the profile's decimal separator: [+-]digits[sep digits].
std::optional<double> parse_number(std::string_view text, char separator) {
    text = trim(text);
    std::string s(text);
    std::size_t i = 0, digits = 0, seps = 0;
    if (i < s.size() && (s[i] == '+' || s[i] == '-')) ++i;
    for (; i < s.size(); ++i) {
        if (std::isdigit(static_cast<unsigned char>(s[i]))) {
            ++digits;
        } else if (s[i] == separator && seps == 0) {
            ++seps;
            s[i] = '.';
        } else {
            return std::nullopt;
        }
    }
    if (digits == 0) return std::nullopt;
    const char* first = s.data() + (s[0] == '+' ? 1 : 0);
    double v = 0;
    const auto [ptr, ec] = std::from_chars(first, s.data() + s.size(), v);
    if (ec != std::errc() || ptr != s.data() + s.size()) return std::nullopt;
    return v;
}

bool all_digits(std::string_view s) {
    return !s.empty() && std::all_of(s.begin(), s.end(), [](char c) {
        return std::isdigit(static_cast<unsigned char>(c));
    });
}

int to_int(std::string_view s) {
    int v = 0;
    std::from_chars(s.data(), s.data() + s.size(), v);
    return v;
}

// A local date and time by the profile's strptime-style format
// (%Y %m %d %H %M %S %%; other characters literally).
std::optional<LocalDateTime> parse_by_format(std::string_view text, std::string_view format) {
    LocalDateTime t;
    std::size_t i = 0;
    for (std::size_t f = 0; f < format.size(); ++f) {
        if (format[f] != '%' || f + 1 == format.size()) {
            if (i >= text.size() || text[i] != format[f]) return std::nullopt;
            ++i;
            continue;
        }
        const char c = format[++f];
        if (c == '%') {
            if (i >= text.size() || text[i] != '%') return std::nullopt;
            ++i;
            continue;
        }
        const std::size_t width = c == 'Y' ? 4 : 2;
        if (i + width > text.size() || !all_digits(text.substr(i, width))) return std::nullopt;
        const int v = to_int(text.substr(i, width));
        i += width;
        switch (c) {
            case 'Y':
                t.date.year = v;
                break;
            case 'm':
                t.date.month = v;
                break;
            case 'd':
                t.date.day = v;
                break;
            case 'H':
                t.hour = v;
                break;
            case 'M':
                t.minute = v;
                break;
            case 'S':
                t.second = v;
                break;
            default:
                return std::nullopt;
        }
    }
    if (i != text.size()) return std::nullopt;
    return t;
}

bool is_valid_local(const LocalDateTime& t) {
    return is_valid_date(t.date) && t.hour >= 0 && t.hour <= 23 && t.minute >= 0 &&
           t.minute <= 59 && t.second >= 0 && t.second <= 59;
}

std::string record_path(char type, int record_no, int field = 0) {
    std::string p = std::string(1, type) + " record " + std::to_string(record_no);
    if (field > 0) p += ", field " + std::to_string(field);
    return p;
}

// One record, split by the message's delimiters, with text access that
// decodes escapes and the character set.
class Record {
public:
    Record(std::string_view raw, int number, const Delimiters& d, const DeviceProfile& profile)
        : raw_(raw), number_(number), d_(d), profile_(profile), fields_(split(raw, d.field)) {}

    char type() const {
        return static_cast<char>(
            std::toupper(static_cast<unsigned char>(raw_.empty() ? ' ' : raw_[0])));
    }
    int number() const { return number_; }
    std::string path(int field = 0) const { return record_path(type(), number_, field); }

    // Field n (1-based: field 1 is the record type), as sent.
    std::string_view raw_field(int n) const {
        return n >= 1 && static_cast<std::size_t>(n) <= fields_.size() ? fields_[n - 1]
                                                                       : std::string_view{};
    }
    std::vector<std::string_view> repeats(int n) const { return split(raw_field(n), d_.repeat); }
    // Component k (1-based) of the first repeat of field n, decoded.
    std::string text(int n, int k = 1) const { return decode(component_of(repeats(n).front(), k)); }
    std::string_view component_of(std::string_view repeat, int k) const {
        const auto comps = split(repeat, d_.component);
        return k >= 1 && static_cast<std::size_t>(k) <= comps.size() ? comps[k - 1]
                                                                     : std::string_view{};
    }
    std::size_t component_count(std::string_view repeat) const {
        return split(repeat, d_.component).size();
    }
    std::string decode(std::string_view raw_component) const {
        bool unknown = false;
        const std::string bytes = decode_escapes(raw_component, d_, &unknown);
        if (unknown) unknown_escape_ = true;
        return to_utf8(bytes, profile_.charset, bad_charset_);
    }
    bool bad_charset() const { return bad_charset_; }
    bool unknown_escape() const { return unknown_escape_; }

private:
    std::string_view raw_;
    int number_;
    Delimiters d_;
    const DeviceProfile& profile_;
    std::vector<std::string_view> fields_;
    mutable bool bad_charset_ = false;
    mutable bool unknown_escape_ = false;
};

// A variant value (FEV1.pred, FEV1.lln, ...) waiting for its base quantity.
struct PendingVariant {
    TestType test;
    const QuantityKind* kind;
    Quantity q;
    std::string path;
};

struct Session {
    NeutralResult result;
    std::vector<PendingVariant> variants;
    std::vector<std::string> order_comments;
    std::optional<Timestamp> first_value_time;
    bool status_from_order = false;
    std::size_t patient = 0;
};

struct Patient {
    Subject subject;
    std::vector<std::string> comments;
    std::vector<Finding> findings;  // copied into each of the patient's sessions
    int sessions = 0;
};

// Where a comment record attaches: the record before it.
struct CommentTarget {
    char type = 0;  // 'H', 'P', 'O', 'R'
    TestType test = TestType::spirometry;
    std::string kind;  // the value an R comment is about
    // The R record made a value of the model (not a predicted or LLN record,
    // a duplicate or an unmapped code): its comments go to that value, in
    // the trial numbered `trial` when it is a per-maneuver value.
    bool on_value = false;
    std::optional<int> trial;
};
CommentTarget comment_target(char type) {
    CommentTarget t;
    t.type = type;
    return t;
}

class Reader {
public:
    Reader(const DeviceProfile& profile, OffsetResolver resolver, std::string_view source_name)
        : profile_(profile), resolver_(resolver), source_name_(source_name) {}

    E1394Outcome run(std::string_view text) {
        int record_no = 0;
        std::size_t pos = 0;
        while (pos < text.size()) {
            std::size_t end = text.find_first_of("\r\n", pos);
            if (end == std::string_view::npos) end = text.size();
            const std::string_view line = text.substr(pos, end - pos);
            pos = end + 1;
            if (line.empty()) continue;  // CRLF or blank line between records
            ++record_no;
            on_record(line, record_no);
        }
        if (in_message_)
            discard_message("astm.truncated",
                            "the transmission ends without an L (terminator) record; the message "
                            "from record " +
                                std::to_string(header_record_) +
                                " is incomplete and gives no result");
        return std::move(outcome_);
    }

private:
    // --- findings -------------------------------------------------------

    void report(std::string rule, Severity s, std::string path, std::string message,
                std::vector<std::pair<std::string, std::string>> values = {}) {
        Finding f{std::move(rule), s, std::move(path), std::move(message), std::move(values)};
        if (!source_name_.empty()) f.values.insert(f.values.begin(), {"source", source_name_});
        if (session_)
            session_->result.findings.push_back(std::move(f));
        else if (in_message_ && patient_open_)
            patients_.back().findings.push_back(std::move(f));
        else if (in_message_)
            message_findings_.push_back(std::move(f));
        else
            outcome_.findings.push_back(std::move(f));
    }

    void after_record(const Record& r) {
        if (r.bad_charset())
            report("charset.invalid", Severity::warning, r.path(),
                   "bytes that are not " + profile_.charset + " were replaced by U+FFFD");
        if (r.unknown_escape())
            report("astm.unknown-escape", Severity::warning, r.path(),
                   "an escape sequence other than &F& &S& &R& &E& &Xhh& was kept as sent");
    }

    // --- message structure ----------------------------------------------

    void on_record(std::string_view line, int no) {
        const char type = static_cast<char>(std::toupper(static_cast<unsigned char>(line[0])));
        if (type == 'H') {
            on_header(line, no);
            return;
        }
        if (!in_message_) {
            report("astm.record-order", Severity::error, record_path(type, no),
                   "a record outside a message (no H record before it); ignored",
                   {{"record", std::string(line.substr(0, 80))}});
            return;
        }
        const Record r(line, no, delims_, profile_);
        switch (type) {
            case 'P':
                on_patient(r);
                break;
            case 'O':
                on_order(r);
                break;
            case 'R':
                on_result(r);
                break;
            case 'C':
                on_comment(r);
                break;
            case 'L':
                on_terminator(r);
                break;
            default:
                report(
                    "astm.record-ignored", Severity::info, r.path(),
                    "record type '" + std::string(1, type) + "' is not read; kept in this finding",
                    {{"record", r.decode(line)}});
        }
        after_record(r);
    }

    void on_header(std::string_view line, int no) {
        if (in_message_)
            discard_message("astm.truncated",
                            "a new H record (record " + std::to_string(no) +
                                ") before the L record of the message from record " +
                                std::to_string(header_record_) + "; that message gives no result");
        // H|\^& : field delimiter, then repeat, component and escape.
        const bool shape_ok = line.size() >= 5 && (line.size() == 5 || line[5] == line[1]);
        Delimiters d;
        if (shape_ok) d = Delimiters{line[1], line[2], line[3], line[4]};
        const std::string all{d.field, d.repeat, d.component, d.escape};
        const bool distinct = std::all_of(all.begin(), all.end(), [&](char c) {
            return std::count(all.begin(), all.end(), c) == 1 &&
                   !std::isalnum(static_cast<unsigned char>(c)) && c != ' ' &&
                   static_cast<unsigned char>(c) >= 0x20 && static_cast<unsigned char>(c) < 0x7F;
        });
        if (!shape_ok || !distinct) {
            report("astm.bad-header", Severity::error, record_path('H', no, 2),
                   "the H record does not declare four distinct delimiters (H|\\^&); the "
                   "message is not read",
                   {{"record", std::string(line.substr(0, 80))}});
            return;
        }
        in_message_ = true;
        patient_open_ = false;
        header_record_ = no;
        delims_ = d;
        message_comments_.clear();
        patients_.clear();
        pending_.clear();
        message_findings_.clear();
        session_.reset();
        header_device_ = Device{};
        message_time_.reset();
        target_ = comment_target('H');

        const Record r(line, no, delims_, profile_);
        header_device_.id = r.text(5, 1);
        header_device_.software_version = r.text(5, 2);
        message_time_ = timestamp(r, 14);
        after_record(r);
    }

    void on_terminator(const Record& r) {
        finish_session();
        // A patient without any O record: its findings must not vanish.
        for (auto& p : patients_)
            if (p.sessions == 0)
                for (auto& f : p.findings) message_findings_.push_back(std::move(f));
        const std::string code = r.text(3);
        if (code.size() == 1 && kAbortedTerminations.find(code[0]) != std::string_view::npos) {
            discard_message("astm.aborted",
                            "the L record says the transmission was aborted (termination code '" +
                                code + "'); its sessions give no result");
            return;
        }
        for (auto& f : message_findings_) outcome_.findings.push_back(std::move(f));
        for (auto& s : pending_) outcome_.results.push_back(std::move(s.result));
        pending_.clear();
        message_findings_.clear();
        in_message_ = false;
    }

    // Drops the message being read; its findings are kept in the outcome.
    void discard_message(const std::string& rule, const std::string& message) {
        finish_session();
        std::size_t dropped = pending_.size();
        for (auto& f : message_findings_) outcome_.findings.push_back(std::move(f));
        for (auto& s : pending_)
            for (auto& f : s.result.findings) outcome_.findings.push_back(std::move(f));
        pending_.clear();
        message_findings_.clear();
        in_message_ = false;
        outcome_.findings.push_back(
            Finding{rule,
                    Severity::error,
                    record_path('H', header_record_),
                    message,
                    {{"source", source_name_}, {"sessions_dropped", std::to_string(dropped)}}});
    }

    // --- P, O ------------------------------------------------------------

    void on_patient(const Record& r) {
        finish_session();
        patients_.emplace_back();
        patient_open_ = true;
        Subject& s = patients_.back().subject;
        auto add_id = [&](int field, const std::string& system, const char* type) {
            const std::string v = r.text(field);
            if (!v.empty()) s.identifiers.push_back({system, v, type});
        };
        add_id(3, profile_.patient_identifier_system, "MR");
        add_id(4, profile_.laboratory_identifier_system, "PI");
        add_id(5, "", "");
        s.family_name = r.text(6, 1);
        s.given_name = r.text(6, 2);
        if (const std::string middle = r.text(6, 3); !middle.empty())
            s.given_name += (s.given_name.empty() ? "" : " ") + middle;
        if (const std::string birth = r.text(8); !birth.empty()) {
            const std::string_view day = std::string_view(birth).substr(0, 8);
            Date d;
            if (birth.size() >= 8 && all_digits(day))
                d = {to_int(day.substr(0, 4)), to_int(day.substr(4, 2)), to_int(day.substr(6, 2))};
            if (is_valid_date(d))
                s.birth_date = d;
            else
                report("time.bad-date", Severity::error, r.path(8),
                       "birth date '" + birth + "' is not YYYYMMDD", {{"value", birth}});
        }
        // P-9 sex (M/F/U): a lung-function device asks it for its reference
        // equations, so it is read as sex at birth; the text is kept as sent.
        s.administrative_gender = r.text(9);
        if (s.administrative_gender == "M" || s.administrative_gender == "m")
            s.sex_at_birth = SexAtBirth::male;
        else if (s.administrative_gender == "F" || s.administrative_gender == "f")
            s.sex_at_birth = SexAtBirth::female;
        s.ethnicity = r.text(10);
        s.height = body_measure(r, 17, "HEIGHT", profile_.height_unit);
        s.weight = body_measure(r, 18, "WEIGHT", profile_.weight_unit);
        target_ = comment_target('P');
    }

    std::optional<Quantity> body_measure(const Record& r, int field, const char* kind,
                                         const std::string& default_unit) {
        const std::string value = r.text(field, 1);
        if (value.empty()) return std::nullopt;
        Quantity q;
        q.kind = kind;
        q.source.value_text = value;
        q.source.unit_text = r.text(field, 2);
        q.unit = resolve_unit(q.source.unit_text, default_unit, false);
        q.value = parse_number(value, profile_.decimal_separator);
        if (!q.value)
            report("value.not-numeric", Severity::error, r.path(field),
                   std::string(kind) + " '" + value + "' is not a number", {{"value", value}});
        if (q.unit.empty())
            report("unit.missing", Severity::error, r.path(field),
                   std::string(kind) + " sent without a unit and the profile names none",
                   {{"value", value}});
        return q;
    }

    void on_order(const Record& r) {
        finish_session();
        patient_open_ = false;
        session_.emplace();
        Session& s = *session_;
        if (patients_.empty()) {
            report("astm.record-order", Severity::warning, r.path(),
                   "an O record before any P record: the session has no subject");
            patients_.emplace_back();
        }
        s.patient = patients_.size() - 1;
        NeutralResult& res = s.result;
        res.subject = patients_.back().subject;
        res.findings.insert(res.findings.begin(), patients_.back().findings.begin(),
                            patients_.back().findings.end());
        ++patients_.back().sessions;
        res.order.placer_number = r.text(3, 1);
        res.device_session_number = r.text(4, 1);
        res.order.filler_number = res.device_session_number;
        res.session_time = timestamp(r, 8);  // collection time: when the test was done
        if (!res.session_time) res.session_time = timestamp(r, 7);
        const std::string report_type = r.text(26);
        if (!report_type.empty()) {
            s.status_from_order = true;
            if (report_type[0] == kStatusCorrection)
                res.status = ResultStatus::corrected;
            else if (report_type[0] == kStatusPreliminary)
                res.status = ResultStatus::preliminary;
            else if (report_type[0] != kReportFinal)
                report("astm.unknown-code", Severity::warning, r.path(26),
                       "report type '" + report_type + "' is not F, P or C; read as final",
                       {{"value", report_type}});
        }
        target_ = comment_target('O');
    }

    // --- R ---------------------------------------------------------------

    void on_result(const Record& r) {
        if (!session_) {
            report("astm.record-order", Severity::error, r.path(),
                   "an R record before any O record; its value is kept in this finding only",
                   {{"code", r.text(3, 4)}, {"value", r.text(4)}, {"unit", r.text(5)}});
            return;
        }
        // Until this R makes a value, a comment after it goes to the test.
        target_.on_value = false;
        // R-3 universal test id ^^^local-code: the 4th component; a device
        // that sends fewer components gets its first non-empty one.
        const auto test_id = r.repeats(3).front();
        std::string code = r.decode(r.component_of(test_id, 4));
        if (code.empty())
            for (std::size_t k = 1; k <= r.component_count(test_id) && code.empty(); ++k)
                code = r.decode(r.component_of(test_id, static_cast<int>(k)));
        const std::string trial_text = r.decode(r.component_of(test_id, 5));

        ValueInput in;
        in.code = code;
        in.value_text = r.text(4);
        in.unit_text = r.text(5, 1);
        in.condition_text = r.text(5, 2);
        in.path = r.path();
        in.value_path = r.path(4);
        in.trial_text = trial_text;
        in.range_text = r.text(6);
        in.flags = r.text(7);
        in.status = r.text(9);
        in.time = timestamp(r, 13);
        if (!in.time) in.time = timestamp(r, 12);
        in.instrument = r.text(14);
        add_value(in);
    }

    struct ValueInput {
        std::string code, value_text, unit_text, condition_text;
        std::string path, value_path;
        std::string trial_text, range_text, flags, status, instrument;
        std::optional<Timestamp> time;
    };

    std::string resolve_unit(const std::string& sent, const std::string& profile_unit,
                             bool override_sent) {
        if (!profile_unit.empty() && (sent.empty() || override_sent)) return profile_unit;
        if (const std::string* ucum = profile_.ucum_for(sent)) return *ucum;
        return sent;
    }

    void add_value(const ValueInput& in) {
        Session& s = *session_;
        NeutralResult& res = s.result;
        const CodeMapping* m = profile_.find_code(in.code);
        if (!m) {
            // Kept in the finding's values, so nothing the device sent is lost.
            report("profile.unmapped-code", Severity::warning, in.path + ", field 3",
                   "device code '" + in.code + "' is not mapped by profile '" + profile_.name +
                       "'; the value is kept in this finding only",
                   {{"code", in.code},
                    {"value", in.value_text},
                    {"unit", in.unit_text},
                    {"condition", in.condition_text},
                    {"reference_range", in.range_text},
                    {"flags", in.flags}});
            return;
        }
        const QuantityKind* kind = quantity_table().find(m->kind);
        if (!kind) {
            report("quantity.unknown-kind", Severity::error, in.path + ", field 3",
                   "profile maps '" + in.code + "' to '" + m->kind + "', which is not a kind",
                   {{"code", in.code}, {"value", in.value_text}});
            return;
        }
        Quantity q;
        q.kind = kind->key;
        q.source = {in.value_text, in.unit_text, in.condition_text, in.code, profile_.code_system};
        q.unit = resolve_unit(in.unit_text, m->unit, m->override_sent);
        if (!in.condition_text.empty() && !(m->override_sent && m->condition)) {
            const auto c = parse_gas_condition(in.condition_text);
            if (c)
                q.condition = *c;
            else
                report(
                    "condition.unknown", Severity::error, in.path + ", field 5",
                    "condition '" + in.condition_text + "' is not BTPS, STPD, ATPS, ATPD or none",
                    {{"condition", in.condition_text}});
        } else if (m->condition) {
            q.condition = *m->condition;
        }
        const bool cannot_be_done = !in.status.empty() && in.status[0] == kStatusCannotBeDone;
        if (in.value_text.empty() || cannot_be_done) {
            q.absent_reason = std::string(kNotMeasured);
        } else {
            q.value = parse_number(in.value_text, profile_.decimal_separator);
            if (!q.value)
                report("value.not-numeric", Severity::error, in.value_path,
                       q.kind + " value '" + in.value_text +
                           "' is not a number with decimal "
                           "separator '" +
                           std::string(1, profile_.decimal_separator) + "'",
                       {{"value", in.value_text}});
        }
        if (!in.range_text.empty()) read_range(q, in);
        if (!in.status.empty() && !s.status_from_order) {
            if (in.status[0] == kStatusCorrection) res.status = ResultStatus::corrected;
            if (in.status[0] == kStatusPreliminary && res.status == ResultStatus::final)
                res.status = ResultStatus::preliminary;
        }
        if (!in.instrument.empty() && res.device.id.empty()) res.device.id = in.instrument;
        if (in.time && !s.first_value_time) s.first_value_time = in.time;

        if (kind->test == "environment") {
            std::optional<Quantity>* slot = kind->key == "AMB_TEMP" ? &res.environment.temperature
                                            : kind->key == "PB"     ? &res.environment.pressure
                                                                    : &res.environment.humidity;
            *slot = std::move(q);
            target_ = comment_target('O');  // a comment after an ambient value is about the session
            return;
        }
        if (kind->test == "subject") {
            (kind->key == "HEIGHT" ? res.subject.height : res.subject.weight) = std::move(q);
            target_ = comment_target('O');
            return;
        }
        const auto test_type = m->test ? m->test : parse_test_type(kind->test);
        if (!test_type) {
            report("profile.no-test", Severity::error, in.path + ", field 3",
                   q.kind + " belongs to no test; the profile must say which",
                   {{"code", in.code}, {"value", in.value_text}});
            return;
        }
        if (!in.flags.empty()) flag_extension(res).properties.push_back({q.kind, in.flags});
        target_ = comment_target('R');
        target_.test = *test_type;
        target_.kind = q.kind;
        if (kind->variant != "measured") {
            s.variants.push_back({*test_type, kind, std::move(q), in.path});
            return;
        }
        Test& t = test_of(res, *test_type);
        if (in.time && !t.time) t.time = in.time;
        if (m->trial_value) {
            if (!all_digits(in.trial_text)) {
                report("astm.trial-number", Severity::error, in.path + ", field 3",
                       "a per-maneuver value without a trial number in R-3's 5th component",
                       {{"code", in.code}, {"value", in.value_text}, {"trial", in.trial_text}});
                return;
            }
            const int number = to_int(in.trial_text);
            auto it = std::find_if(t.trials.begin(), t.trials.end(),
                                   [&](const Trial& tr) { return tr.number == number; });
            if (it == t.trials.end()) {
                t.trials.push_back(Trial{});
                it = t.trials.end() - 1;
                it->number = number;
                it->time = in.time;
            }
            it->values.push_back(std::move(q));
            target_.on_value = true;
            target_.trial = number;
            return;
        }
        if (t.find(q.kind)) {
            report("astm.duplicate-value", Severity::warning, in.path,
                   q.kind + " was already sent for this session; the first value is kept",
                   {{"code", in.code}, {"value", in.value_text}, {"unit", in.unit_text}});
            return;
        }
        t.values.push_back(std::move(q));
        target_.on_value = true;
    }

    // The value an R comment is about, if its R record made one.
    static Quantity* value_of(NeutralResult& res, const CommentTarget& target) {
        if (!target.on_value) return nullptr;
        Test* t = res.find_test(target.test);
        if (!t) return nullptr;
        if (!target.trial) return t->find(target.kind);
        for (Trial& tr : t->trials) {
            if (tr.number != *target.trial) continue;
            // The last one: a trial may repeat a kind, and the comment follows the newest.
            for (auto it = tr.values.rbegin(); it != tr.values.rend(); ++it)
                if (it->kind == target.kind) return &*it;
        }
        return nullptr;
    }

    // R-6 "2.10 to 3.50" or "2.10-3.50": the device's own LLN and ULN.
    void read_range(Quantity& q, const ValueInput& in) {
        const std::string_view text = trim(in.range_text);
        std::optional<double> low, high;
        if (const auto to = text.find(" to "); to != std::string_view::npos) {
            low = parse_number(text.substr(0, to), profile_.decimal_separator);
            high = parse_number(text.substr(to + 4), profile_.decimal_separator);
        } else {
            for (std::size_t i = 1; i < text.size() && !(low && high); ++i) {
                if (text[i] != '-') continue;
                low = parse_number(text.substr(0, i), profile_.decimal_separator);
                high = parse_number(text.substr(i + 1), profile_.decimal_separator);
            }
        }
        if (!low || !high) {
            report("reference.unreadable", Severity::warning, in.path + ", field 6",
                   "reference range '" + in.range_text + "' is not 'low to high' or 'low-high'",
                   {{"reference_range", in.range_text}});
            return;
        }
        ReferenceValues& rv = reference_set(q);
        rv.lln = low;
        rv.uln = high;
    }

    ReferenceValues& reference_set(Quantity& q) {
        for (auto& r : q.reference)
            if (r.equation_set == profile_.equation_set && r.origin == Origin::device) return r;
        q.reference.push_back(ReferenceValues{});
        q.reference.back().equation_set = profile_.equation_set;
        return q.reference.back();
    }

    static Test& test_of(NeutralResult& res, TestType type) {
        if (Test* t = res.find_test(type)) return *t;
        res.tests.push_back(Test{});
        res.tests.back().type = type;
        return res.tests.back();
    }

    static Extension& extension(NeutralResult& res, std::string_view name) {
        for (auto& e : res.extensions)
            if (e.namespace_uri == kExtensionNamespace && e.name == name) return e;
        res.extensions.push_back({std::string(kExtensionNamespace), std::string(name), {}});
        return res.extensions.back();
    }
    static Extension& flag_extension(NeutralResult& res) {
        return extension(res, "abnormal-flags");
    }

    // --- C ---------------------------------------------------------------

    void on_comment(const Record& r) {
        const auto text_repeat = r.repeats(4).front();
        const std::string tag = r.decode(r.component_of(text_repeat, 1));
        bool consumed = false;
        for (const CommentValue& cv : profile_.comment_values) {
            if (cv.tag != tag) continue;
            consumed = true;
            if (!session_) {
                report("astm.record-order", Severity::error, r.path(4),
                       "a '" + tag + "' value comment outside a session", {{"comment", r.text(4)}});
                break;
            }
            const CommentTarget before = target_;
            ValueInput in;
            in.code = cv.code;
            in.value_text = r.decode(r.component_of(text_repeat, cv.component));
            if (cv.unit_component > 0)
                in.unit_text = r.decode(r.component_of(text_repeat, cv.unit_component));
            in.path = r.path();
            in.value_path = r.path(4);
            if (!in.value_text.empty()) add_value(in);
            target_ = before;
        }
        if (consumed) return;

        std::string text;
        for (const auto rep : r.repeats(4))
            for (std::size_t k = 1; k <= r.component_count(rep); ++k) {
                const std::string part = r.decode(r.component_of(rep, static_cast<int>(k)));
                if (part.empty()) continue;
                if (!text.empty()) text += ' ';
                text += part;
            }
        if (text.empty()) return;
        const std::string type = r.text(5);
        if (type == "I")
            report("device.flag", Severity::warning, r.path(4),
                   "instrument flag" + (target_.kind.empty() ? "" : " on " + target_.kind) + ": " +
                       text,
                   {{"flag", text}, {"kind", target_.kind}});
        switch (target_.type) {
            case 'R':
                // E1394: a C record after an R record is a comment on that result.
                if (!session_) break;
                if (Quantity* q = value_of(session_->result, target_))
                    q->comments.push_back(text);
                else
                    test_of(session_->result, target_.test).comments.push_back(text);
                break;
            case 'O':
                if (session_) session_->order_comments.push_back(text);
                break;
            case 'P':
                if (!patients_.empty()) patients_.back().comments.push_back(text);
                break;
            default:
                message_comments_.push_back(text);
                break;
        }
    }

    // --- times -----------------------------------------------------------

    std::optional<Timestamp> timestamp(const Record& r, int field) {
        const std::string text(trim(r.text(field)));
        if (text.empty()) return std::nullopt;
        std::optional<LocalDateTime> local;
        std::optional<int> sent_offset;
        std::string_view body = text;
        // A device that does add an offset (+hhmm) is taken at its word.
        if (body.size() > 5 && (body[body.size() - 5] == '+' || body[body.size() - 5] == '-') &&
            all_digits(body.substr(body.size() - 4))) {
            const int hhmm = to_int(body.substr(body.size() - 4));
            sent_offset = (hhmm / 100 * 60 + hhmm % 100) * (body[body.size() - 5] == '-' ? -1 : 1);
            body.remove_suffix(5);
        }
        if (all_digits(body) && (body.size() == 14 || body.size() == 12)) {
            // E1394: YYYYMMDDHHMMSS (seconds may be left off).
            local = LocalDateTime{
                {to_int(body.substr(0, 4)), to_int(body.substr(4, 2)), to_int(body.substr(6, 2))},
                to_int(body.substr(8, 2)),
                to_int(body.substr(10, 2)),
                body.size() == 14 ? to_int(body.substr(12, 2)) : 0};
        } else if (all_digits(body) && body.size() == 8) {
            report("time.date-only", Severity::warning, r.path(field),
                   "'" + text + "' has a date but no time of day; not used as a time",
                   {{"value", text}});
            return std::nullopt;
        } else {
            local = parse_by_format(body, profile_.datetime_format);
        }
        if (!local || !is_valid_local(*local)) {
            report("time.unreadable", Severity::error, r.path(field),
                   "'" + text + "' is not YYYYMMDDHHMMSS nor the profile's '" +
                       profile_.datetime_format + "'",
                   {{"value", text}});
            return std::nullopt;
        }
        std::optional<int> offset = sent_offset;
        if (!offset) {
            if (profile_.time_zone.empty() || !resolver_) {
                report("time.no-offset", Severity::error, r.path(field),
                       "'" + text + "' has no UTC offset and the profile names no time zone",
                       {{"value", text}});
                return std::nullopt;
            }
            offset = resolver_(profile_.time_zone, *local);
            if (!offset) {
                report("time.unresolved", Severity::error, r.path(field),
                       "'" + text + "' has no single UTC offset in " + profile_.time_zone +
                           " (a skipped or repeated hour, or an unknown zone)",
                       {{"value", text}, {"time_zone", profile_.time_zone}});
                return std::nullopt;
            }
        }
        Timestamp t;
        t.date = local->date;
        t.hour = local->hour;
        t.minute = local->minute;
        t.second = local->second;
        t.offset_minutes = *offset;
        return t;
    }

    // --- end of a session ---------------------------------------------------

    void finish_session() {
        if (!session_) return;
        Session s = std::move(*session_);
        session_.reset();
        NeutralResult& res = s.result;
        for (auto& v : s.variants) attach_variant(res, v);
        for (auto& t : res.tests)
            t.comments.insert(t.comments.begin(), s.order_comments.begin(), s.order_comments.end());
        if (res.tests.empty() && !s.order_comments.empty())
            for (const auto& c : s.order_comments)
                extension(res, "order-comment").properties.push_back({"text", c});
        if (s.patient < patients_.size())
            for (const auto& c : patients_[s.patient].comments)
                extension(res, "patient-comment").properties.push_back({"text", c});
        for (const auto& c : message_comments_)
            extension(res, "message-comment").properties.push_back({"text", c});
        if (!res.session_time) res.session_time = s.first_value_time;
        if (!res.session_time) res.session_time = message_time_;
        // The profile's device is the site's name for it; what the device
        // says fills only what the profile leaves empty.
        Device d = profile_.device;
        if (d.id.empty()) d.id = !res.device.id.empty() ? res.device.id : header_device_.id;
        if (d.software_version.empty()) d.software_version = header_device_.software_version;
        res.device = d;
        pending_.push_back(std::move(s));
    }

    // A predicted / LLN / ULN / z / percent-predicted value goes into its base
    // quantity's reference set named by the profile's equation_set.
    void attach_variant(NeutralResult& res, PendingVariant& v) {
        Test* t = res.find_test(v.test);
        Quantity* base = t ? t->find(v.kind->base) : nullptr;
        if (!base || !v.q.value) {
            res.findings.push_back({"reference.no-base",
                                    Severity::warning,
                                    v.path,
                                    v.q.kind + " arrived without a " + v.kind->base +
                                        " value (or without a number); kept in this finding only",
                                    {{"source", source_name_},
                                     {"code", v.q.source.code},
                                     {"value", v.q.source.value_text},
                                     {"unit", v.q.source.unit_text}}});
            return;
        }
        ReferenceValues& rv = reference_set(*base);
        const std::string& variant = v.kind->variant;
        if (variant == "z") {
            rv.z_score = v.q.value;
        } else if (variant == "percent_predicted") {
            rv.percent_predicted = v.q.value;
        } else {
            if (rv.unit.empty()) {
                rv.unit = v.q.unit;
            } else if (rv.unit != v.q.unit) {
                res.findings.push_back({"reference.unit-mismatch",
                                        Severity::warning,
                                        v.path,
                                        v.q.kind + " in '" + v.q.unit + "' while the set is in '" +
                                            rv.unit + "'; kept in this finding only",
                                        {{"source", source_name_},
                                         {"value", v.q.source.value_text},
                                         {"unit", v.q.unit}}});
                return;
            }
            (variant == "predicted" ? rv.predicted
             : variant == "lln"     ? rv.lln
                                    : rv.uln) = v.q.value;
        }
    }

    const DeviceProfile& profile_;
    OffsetResolver resolver_;
    std::string source_name_;
    E1394Outcome outcome_;

    bool in_message_ = false;
    bool patient_open_ = false;  // a P record was read and no O record since
    int header_record_ = 0;
    Delimiters delims_;
    Device header_device_;
    std::optional<Timestamp> message_time_;
    std::vector<std::string> message_comments_;
    std::vector<Finding> message_findings_;
    std::vector<Patient> patients_;
    std::optional<Session> session_;
    std::vector<Session> pending_;  // finished sessions of the message, released at L
    CommentTarget target_;
};

}  // namespace

std::string decode_escapes(std::string_view text, const Delimiters& d, bool* unknown) {
    std::string out;
    out.reserve(text.size());
    for (std::size_t i = 0; i < text.size(); ++i) {
        if (text[i] != d.escape) {
            out += text[i];
            continue;
        }
        const auto close = text.find(d.escape, i + 1);
        if (close == std::string_view::npos) {
            if (unknown) *unknown = true;
            out.append(text.substr(i));
            break;
        }
        const std::string_view seq = text.substr(i + 1, close - i - 1);
        bool known = true;
        if (seq.size() == 1 && seq[0] == kEscField) {
            out += d.field;
        } else if (seq.size() == 1 && seq[0] == kEscComponent) {
            out += d.component;
        } else if (seq.size() == 1 && seq[0] == kEscRepeat) {
            out += d.repeat;
        } else if (seq.size() == 1 && seq[0] == kEscEscape) {
            out += d.escape;
        } else if (seq.size() >= 3 && seq[0] == kEscHex && seq.size() % 2 == 1) {
            std::string bytes;
            for (std::size_t k = 1; k + 1 < seq.size() && known; k += 2) {
                const int hi = hex_value(seq[k]), lo = hex_value(seq[k + 1]);
                if (hi < 0 || lo < 0) known = false;
                bytes += static_cast<char>(hi * 16 + lo);
            }
            if (known) out += bytes;
        } else {
            known = false;
        }
        if (!known) {
            if (unknown) *unknown = true;
            out.append(text.substr(i, close - i + 1));
        }
        i = close;
    }
    return out;
}

E1394Outcome read_e1394(std::string_view message_text, const DeviceProfile& profile,
                        OffsetResolver resolve_offset, std::string_view source_name) {
    return Reader(profile, resolve_offset, source_name).run(message_text);
}

}  // namespace pftgw::astm
