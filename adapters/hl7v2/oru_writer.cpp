// HL7 v2.5.1 ORU^R01 writer (see oru_writer.hpp for the layout and choices).
// Appends into one std::string: no streams, no regex, numbers via std::to_chars.
#include "adapters/hl7v2/oru_writer.hpp"

#include <array>
#include <charconv>
#include <cmath>
#include <cstdio>

#include "gateway/core/identity.hpp"
#include "gateway/core/time.hpp"

namespace pftgw::hl7v2 {
namespace {

constexpr char kSegmentEnd = '\r';  // HL7 2.5.1 ch. 2: segments end in CR

// MSH-1 and MSH-2 (the default delimiters); written literally, never escaped.
constexpr std::string_view kMshStart = "MSH|^~\\&";
constexpr std::string_view kMessageType = "ORU^R01^ORU_R01";  // MSH-9 (interop-facts.md)
constexpr std::string_view kVersion = "2.5.1";                // MSH-12
constexpr std::string_view kCharacterSet = "UNICODE UTF-8";   // MSH-18, table 0211

// OBR-4 per test. LOINC 81459-0 is the spirometry panel (lung-function-facts.md,
// "Codes"). That file names only it and the whole-PFT panel 81458-2, so lung
// volumes and diffusing capacity get project codes in 99PFTGW rather than a
// borrowed number.
struct PanelCode {
    std::string_view code;
    std::string_view display;
    std::string_view system;
};
constexpr PanelCode kSpirometryPanel{"81459-0", "Spirometry panel", "LN"};
constexpr PanelCode kLungVolumesPanel{"LUNG_VOLUMES", "Lung volumes panel", "99PFTGW"};
constexpr PanelCode kDiffusingPanel{"DIFFUSING_CAPACITY", "Diffusing capacity panel", "99PFTGW"};

// OBR-24 diagnostic service section, table 0074 "PF" pulmonary function (from memory).
constexpr std::string_view kServiceSection = "PF";

// NTE-2 source of comment, table 0105 (from memory): L ancillary (filler)
// department, O other system. Lab text is L; what the gateway adds is O.
constexpr std::string_view kNoteFromLab = "L";
constexpr std::string_view kNoteFromGateway = "O";

constexpr std::string_view kCaution =
    "Results moved and checked by the gateway; interpretation belongs to licensed "
    "staff and local rules. OBX-8 flags compare with LLN/ULN only (L below LLN, H above "
    "ULN). z-score bands -1.645 / -2.5 / -4.0 (Stanojevic 2022) are text for staff, "
    "never flags.";

// HL7 v2 escape sequences (2.5.1 ch. 2, "Escape sequences supporting multiple
// character sets"; interop-facts.md V).
void append_hex_escape(unsigned char c, std::string& out) {
    static constexpr char kHex[] = "0123456789ABCDEF";
    out += "\\X";
    out += kHex[c >> 4];
    out += kHex[c & 0x0F];
    out += '\\';
}

// One lookup per byte: the delimiters, the escape character and control bytes.
constexpr std::array<bool, 256> kNeedsEscape = [] {
    std::array<bool, 256> t{};
    for (int c = 0; c < 0x20; ++c) t[static_cast<std::size_t>(c)] = true;
    for (unsigned char c : std::string_view("|^&~\\")) t[c] = true;
    t[0x7F] = true;
    return t;
}();

bool needs_escape(unsigned char c) {
    return kNeedsEscape[c];
}

void append_text(std::string_view text, std::string& out) {
    append_escaped(text, out);
}

void append_int(long long v, std::string& out) {
    char buf[24];
    auto r = std::to_chars(buf, buf + sizeof buf, v);
    out.append(buf, r.ptr);
}

// Fixed decimals; "-0.00" becomes "0.00" (a bare NM, no signed zero).
std::size_t format_fixed(double v, int decimals, char* buf, std::size_t size) {
    auto r = std::to_chars(buf, buf + size, v, std::chars_format::fixed, decimals);
    std::size_t n = static_cast<std::size_t>(r.ptr - buf);
    if (n > 1 && buf[0] == '-') {
        bool all_zero = true;
        for (std::size_t i = 1; i < n; ++i)
            if (buf[i] != '0' && buf[i] != '.') all_zero = false;
        if (all_zero) {
            for (std::size_t i = 1; i < n; ++i) buf[i - 1] = buf[i];
            --n;
        }
    }
    return n;
}

void append_fixed(double v, int decimals, std::string& out) {
    char buf[64];
    out.append(buf, format_fixed(v, decimals, buf, sizeof buf));
}

double rounded(double v, int decimals) {
    char buf[64];
    const std::size_t n = format_fixed(v, decimals, buf, sizeof buf);
    double back = v;
    std::from_chars(buf, buf + n, back);
    return back;
}

void append_2(int v, std::string& out) {
    out += static_cast<char>('0' + (v / 10) % 10);
    out += static_cast<char>('0' + v % 10);
}

void append_date(const Date& d, std::string& out) {
    char buf[8];
    const int y = d.year;
    buf[0] = static_cast<char>('0' + (y / 1000) % 10);
    buf[1] = static_cast<char>('0' + (y / 100) % 10);
    buf[2] = static_cast<char>('0' + (y / 10) % 10);
    buf[3] = static_cast<char>('0' + y % 10);
    out.append(buf, 4);
    append_2(d.month, out);
    append_2(d.day, out);
}

// Same form as core's to_hl7_ts (YYYYMMDDHHMMSS[.SSS]+ZZZZ, offset always),
// without a temporary string.
void append_ts(const Timestamp& t, std::string& out) {
    append_date(t.date, out);
    append_2(t.hour, out);
    append_2(t.minute, out);
    append_2(t.second, out);
    if (t.millisecond != 0) {
        out += '.';
        out += static_cast<char>('0' + (t.millisecond / 100) % 10);
        append_2(t.millisecond % 100, out);
    }
    const int off = t.offset_minutes < 0 ? -t.offset_minutes : t.offset_minutes;
    out += t.offset_minutes < 0 ? '-' : '+';
    append_2(off / 60, out);
    append_2(off % 60, out);
}

void append_opt_ts(const Timestamp* t, std::string& out) {
    if (t) append_ts(*t, out);
}

// PID-8 from table 0001 (M, F, U): administrative gender when the record has
// one, else sex at birth.
char administrative_sex(const Subject& s) {
    const std::string& g = s.administrative_gender;
    if (!g.empty()) {
        const char c = g[0];
        if (c == 'f' || c == 'F') return 'F';
        if (c == 'm' || c == 'M') return 'M';
        return 'U';
    }
    switch (s.sex_at_birth) {
        case SexAtBirth::female:
            return 'F';
        case SexAtBirth::male:
            return 'M';
        default:
            return 'U';
    }
}

// OBR-25 (table 0123) and OBX-11 (table 0085) share F / C / P here.
char result_status(const NeutralResult& r) {
    if (r.status == ResultStatus::preliminary) return 'P';
    if (r.status == ResultStatus::corrected || r.revision > 1) return 'C';
    return 'F';
}
constexpr char kStatusCannotObtain = 'X';  // table 0085

// CX-4 assigning authority as HD: "urn:oid:" -> &oid&ISO; another URI -> &uri&URI;
// anything else is a local namespace id.
void append_assigning_authority(std::string_view system, std::string& out) {
    constexpr std::string_view kOidPrefix = "urn:oid:";
    if (system.empty()) return;
    if (system.substr(0, kOidPrefix.size()) == kOidPrefix) {
        out += '&';
        append_text(system.substr(kOidPrefix.size()), out);
        out += "&ISO";
    } else if (system.find(':') != std::string_view::npos) {
        out += '&';
        append_text(system, out);
        out += "&URI";
    } else {
        append_text(system, out);
    }
}

const PanelCode& panel_for(TestType t) {
    switch (t) {
        case TestType::spirometry:
            return kSpirometryPanel;
        case TestType::lung_volumes:
            return kLungVolumesPanel;
        default:
            return kDiffusingPanel;
    }
}

void append_ce(std::string_view code, std::string_view display, std::string_view system,
               std::string& out) {
    append_text(code, out);
    out += '^';
    append_text(display, out);
    out += '^';
    out += system;
}

std::string_view hl7_coding_system(const QuantityKind& k) {
    return k.code_system == "LN" ? std::string_view("LN") : kProjectHl7CodingSystem;
}

// The variant row (FEV1.pred, ...): first by the table's key convention
// (binary search), confirmed against base/variant; else the table's own scan.
const QuantityKind* variant_row(const QuantityTable& table, std::string_view base,
                                std::string_view variant, std::string_view key_suffix) {
    char buf[64];
    if (base.size() + key_suffix.size() <= sizeof buf) {
        std::size_t n = 0;
        for (char c : base) buf[n++] = c;
        for (char c : key_suffix) buf[n++] = c;
        const QuantityKind* k = table.find(std::string_view(buf, n));
        if (k && k->base == base && k->variant == variant) return k;
    }
    return table.variant_of(base, variant);
}

// Where a finding belongs, from its path "tests[i]" or "tests[i].values[KIND]...".
struct FindingPlace {
    int test = -1;
    std::string_view kind;
};
FindingPlace place_of(std::string_view path) {
    constexpr std::string_view kTests = "tests[";
    constexpr std::string_view kValues = "].values[";
    FindingPlace p;
    if (path.substr(0, kTests.size()) != kTests) return p;
    std::size_t i = kTests.size();
    int n = 0;
    const std::size_t digits_start = i;
    while (i < path.size() && path[i] >= '0' && path[i] <= '9') n = n * 10 + (path[i++] - '0');
    if (i == digits_start || i >= path.size() || path[i] != ']') return p;
    p.test = n;
    if (path.substr(i, kValues.size()) == kValues) {
        const std::size_t start = i + kValues.size();
        const std::size_t end = path.find(']', start);
        if (end != std::string_view::npos) p.kind = path.substr(start, end - start);
    }
    return p;
}

class Writer {
public:
    Writer(const NeutralResult& r, const OruOptions& o, const QuantityTable& t, std::string& out)
        : result_(r), options_(o), table_(t), out_(out), status_(result_status(r)) {}

    void write() {
        write_msh();
        write_pid();
        for (std::size_t i = 0; i < result_.tests.size(); ++i)
            write_test(static_cast<int>(i), result_.tests[i]);
    }

private:
    void write_msh() {
        out_ += kMshStart;
        out_ += '|';
        append_text(options_.sending_application, out_);
        out_ += '|';
        append_text(options_.sending_facility, out_);
        out_ += '|';
        append_text(options_.receiving_application, out_);
        out_ += '|';
        append_text(options_.receiving_facility, out_);
        out_ += '|';
        write_message_time();
        out_ += "||";  // MSH-8 security: empty
        out_ += kMessageType;
        out_ += '|';
        const std::string id = result_.id.empty() ? result_identifier(result_) : result_.id;
        out_ += hl7_control_id(id, result_.revision, options_.target);
        out_ += '|';
        out_ += options_.processing_id;
        out_ += '|';
        out_ += kVersion;
        out_ += "||||||";  // MSH-13..17 empty: original acknowledgment mode
        out_ += kCharacterSet;
        out_ += kSegmentEnd;
    }

    void write_message_time() {
        if (!options_.message_time_iso.empty()) {
            auto t = parse_iso_timestamp(options_.message_time_iso);
            if (t) {
                append_ts(*t, out_);
                return;
            }
        }
        if (result_.session_time) {
            append_ts(*result_.session_time, out_);
            return;
        }
        for (const auto& test : result_.tests)
            if (test.time) {
                append_ts(*test.time, out_);
                return;
            }
    }

    void write_pid() {
        const Subject& s = result_.subject;
        out_ += "PID|1||";
        bool first = true;
        for (const auto& id : s.identifiers) {
            if (!first) out_ += '~';
            first = false;
            append_text(id.value, out_);
            out_ += "^^^";
            append_assigning_authority(id.system, out_);
            if (!id.type.empty()) {
                out_ += '^';
                append_text(id.type, out_);
            }
        }
        out_ += "||";
        append_text(s.family_name, out_);
        if (!s.given_name.empty()) {
            out_ += '^';
            append_text(s.given_name, out_);
        }
        out_ += "||";
        if (s.birth_date) append_date(*s.birth_date, out_);
        out_ += '|';
        out_ += administrative_sex(s);
        out_ += kSegmentEnd;
    }

    const Timestamp* time_of(const Test& t) const {
        if (t.time) return &*t.time;
        if (result_.session_time) return &*result_.session_time;
        return nullptr;
    }

    void write_test(int index, const Test& test) {
        const Order& order = result_.order;
        const Timestamp* when = time_of(test);

        out_ += "ORC|RE|";
        append_text(order.placer_number, out_);
        out_ += '|';
        append_text(order.filler_number, out_);
        out_ += kSegmentEnd;

        out_ += "OBR|";
        append_int(index + 1, out_);
        out_ += '|';
        append_text(order.placer_number, out_);
        out_ += '|';
        append_text(order.filler_number, out_);
        out_ += '|';
        const PanelCode& panel = panel_for(test.type);
        append_ce(panel.code, panel.display, panel.system, out_);
        out_ += "|||";  // OBR-5, OBR-6
        append_opt_ts(when, out_);
        // OBR-18 placer field 1 carries the accession number (common practice).
        out_ += "|||||||||||";
        append_text(order.accession_number, out_);
        out_ += "||||||";  // OBR-19..23
        out_ += kServiceSection;
        out_ += '|';
        out_ += status_;
        out_ += kSegmentEnd;

        nte_set_ = 0;
        write_test_context_note(test);
        for (const auto& c : test.comments) write_nte(kNoteFromLab, c);
        write_findings(index, {});
        write_nte(kNoteFromGateway, kCaution);

        obx_set_ = 0;
        for (const auto& q : test.values) write_quantity(index, q, when);
    }

    // Method, device and gas conditions, so a reader of the message alone knows
    // how the numbers were taken and at which condition they are expressed.
    void write_test_context_note(const Test& test) {
        note_.clear();
        if (!test.method.empty()) {
            note_ += "Method: ";
            note_ += test.method;
            note_ += ". ";
        }
        const Device& d = result_.device;
        note_ += "Device ";
        note_ += d.id;
        if (!d.manufacturer.empty() || !d.model.empty()) {
            note_ += ": ";
            note_ += d.manufacturer;
            if (!d.manufacturer.empty() && !d.model.empty()) note_ += ' ';
            note_ += d.model;
        }
        if (!d.serial_number.empty()) {
            note_ += ", serial ";
            note_ += d.serial_number;
        }
        if (!d.software_version.empty()) {
            note_ += ", software ";
            note_ += d.software_version;
        }
        note_ += ". Units: ";
        note_ += to_string(options_.units);
        note_ += '.';
        constexpr std::array<GasCondition, 4> kGas{GasCondition::btps, GasCondition::stpd,
                                                   GasCondition::atps, GasCondition::atpd};
        for (GasCondition g : kGas) {
            bool any = false;
            for (const auto& q : test.values) {
                if (q.condition != g) continue;
                note_ += any ? ", " : " At ";
                if (!any) {
                    note_ += to_string(g);
                    note_ += ": ";
                }
                note_ += q.kind;
                any = true;
            }
            if (any) note_ += '.';
        }
        write_nte(kNoteFromGateway, note_);
    }

    // Where a finding is written: under the value its path names, else under
    // the test it names, else under the first test, so every finding travels.
    FindingPlace home_of(const Finding& f) const {
        FindingPlace p = place_of(f.path);
        if (p.test < 0 || p.test >= static_cast<int>(result_.tests.size())) return {0, {}};
        if (!p.kind.empty() && !result_.tests[static_cast<std::size_t>(p.test)].find(p.kind))
            p.kind = {};
        return p;
    }

    // Warning and error findings as NTE (info findings are for `check` only).
    // kind empty: the findings of the test itself.
    void write_findings(int test_index, std::string_view kind) {
        for (const auto& f : result_.findings) {
            if (f.severity == Severity::info) continue;
            const FindingPlace home = home_of(f);
            if (home.test != test_index || home.kind != kind) continue;
            note_.clear();
            note_ += f.severity == Severity::error ? "Error " : "Warning ";
            note_ += f.rule;
            if (!f.path.empty()) {
                note_ += " at ";
                note_ += f.path;
            }
            note_ += ": ";
            note_ += f.message;
            if (!f.values.empty()) {
                note_ += " (";
                for (std::size_t i = 0; i < f.values.size(); ++i) {
                    if (i) note_ += "; ";
                    note_ += f.values[i].first;
                    note_ += '=';
                    note_ += f.values[i].second;
                }
                note_ += ')';
            }
            write_nte(kNoteFromGateway, note_);
        }
    }

    void write_nte(std::string_view source, std::string_view text) {
        out_ += "NTE|";
        append_int(++nte_set_, out_);
        out_ += '|';
        out_ += source;
        out_ += '|';
        append_text(text, out_);
        out_ += kSegmentEnd;
    }

    void write_quantity(int test_index, const Quantity& q, const Timestamp* when) {
        const QuantityKind* kind = table_.find(q.kind);
        const int decimals = kind ? kind->decimals_for(options_.units) : 2;
        const bool present = q.value.has_value() && std::isfinite(*q.value);
        const ReferenceValues* first_ref = q.reference.empty() ? nullptr : &q.reference.front();

        begin_obx(present, kind, q.kind, {});
        if (present) append_fixed(*q.value, decimals, out_);
        out_ += '|';
        append_unit(q.unit);
        out_ += '|';
        if (present && first_ref) append_range(*first_ref, decimals);
        out_ += '|';
        if (present && first_ref)
            out_ += abnormal_flag(*q.value, first_ref->lln, first_ref->uln, decimals);
        end_obx(present ? status_ : kStatusCannotObtain, when);

        nte_set_ = 0;
        if (!present) {
            note_.assign("Not reported: ");
            note_ += q.absent_reason ? *q.absent_reason : std::string("no value");
            write_nte(kNoteFromLab, note_);
        }
        if (q.origin == Origin::gateway) {
            note_.assign("Computed by the gateway");
            for (std::size_t i = 0; i < q.derived_from.size(); ++i) {
                note_ += i ? ", " : " from ";
                note_ += q.derived_from[i];
            }
            note_ += '.';
            write_nte(kNoteFromGateway, note_);
        }
        for (std::size_t i = 0; i < q.reference.size(); ++i) write_reference_note(q, i);
        write_findings(test_index, q.kind);

        for (std::size_t i = 0; i < q.reference.size(); ++i)
            write_reference_values(q, kind, q.reference[i], static_cast<int>(i + 1), decimals,
                                   when);
    }

    void write_reference_note(const Quantity& q, std::size_t i) {
        const ReferenceValues& r = q.reference[i];
        note_.assign("Reference set ");
        char buf[16];
        auto res = std::to_chars(buf, buf + sizeof buf, static_cast<int>(i + 1));
        note_.append(buf, res.ptr);
        note_ += " (OBX-4 ";
        note_.append(buf, res.ptr);
        note_ += ") for ";
        note_ += q.kind;
        note_ += ": ";
        note_ += r.equation_set.empty() ? std::string_view("unnamed equation set")
                                        : std::string_view(r.equation_set);
        if (!r.equation_version.empty()) {
            note_ += ", version ";
            note_ += r.equation_version;
        }
        note_ += "; computed by the ";
        note_ += to_string(r.origin);
        note_ += '.';
        write_nte(r.origin == Origin::device ? kNoteFromLab : kNoteFromGateway, note_);
    }

    void write_reference_values(const Quantity& q, const QuantityKind* kind,
                                const ReferenceValues& r, int set, int decimals,
                                const Timestamp* when) {
        const std::string_view base = kind ? std::string_view(kind->base) : q.kind;
        struct Item {
            const std::optional<double>& value;
            std::string_view variant;
            std::string_view suffix;
            bool own_unit;  // z and percent have their own unit; the rest the quantity's
        };
        const std::array<Item, 5> items{{
            {r.predicted, "predicted", ".pred", false},
            {r.lln, "lln", ".lln", false},
            {r.uln, "uln", ".uln", false},
            {r.z_score, "z", ".z", true},
            {r.percent_predicted, "percent_predicted", ".pctpred", true},
        }};
        char sub_id[16];
        auto res = std::to_chars(sub_id, sub_id + sizeof sub_id, set);
        const std::string_view sub(sub_id, static_cast<std::size_t>(res.ptr - sub_id));
        for (const Item& it : items) {
            if (!it.value || !std::isfinite(*it.value)) continue;
            const QuantityKind* vk = variant_row(table_, base, it.variant, it.suffix);
            if (!vk) continue;  // no code for it: a value without a code is not sent
            const int d = it.own_unit ? vk->decimals_for(options_.units) : decimals;
            begin_obx(true, vk, vk->key, sub);
            append_fixed(*it.value, d, out_);
            out_ += '|';
            append_unit(it.own_unit ? std::string_view(vk->unit_for(options_.units))
                                    : std::string_view(q.unit));
            out_ += "||";  // OBX-7, OBX-8 empty: limits and flags belong to the measured value
            end_obx(status_, when);
        }
    }

    // OBX-1..4 and the separator before OBX-5.
    void begin_obx(bool numeric, const QuantityKind* kind, std::string_view key,
                   std::string_view sub_id) {
        out_ += "OBX|";
        append_int(++obx_set_, out_);
        out_ += '|';
        if (numeric) out_ += "NM";
        out_ += '|';
        if (kind)
            append_ce(kind->code, kind->display, hl7_coding_system(*kind), out_);
        else
            append_ce(key, key, kProjectHl7CodingSystem, out_);
        out_ += '|';
        out_ += sub_id;
        out_ += '|';
    }

    // OBX-9 .. OBX-18, after OBX-8. The part after OBX-11 is the same for
    // every OBX of a test, so it is built once per test (obx_tail_).
    void end_obx(char status, const Timestamp* when) {
        if (when != tail_time_ || !tail_ready_) {
            obx_tail_.assign("|||");  // OBX-12, OBX-13
            append_opt_ts(when, obx_tail_);
            obx_tail_ += "||||";  // OBX-15..17
            append_equipment(obx_tail_);
            obx_tail_ += kSegmentEnd;
            tail_time_ = when;
            tail_ready_ = true;
        }
        out_ += "|||";  // OBX-9, OBX-10
        out_ += status;
        out_ += obx_tail_;
    }

    void append_unit(std::string_view unit) {
        if (unit.empty()) return;
        append_text(unit, out_);
        out_ += '^';
        append_text(unit, out_);
        out_ += "^UCUM";
    }

    void append_range(const ReferenceValues& r, int decimals) {
        const bool lln = r.lln && std::isfinite(*r.lln);
        const bool uln = r.uln && std::isfinite(*r.uln);
        if (lln && uln) {
            append_fixed(*r.lln, decimals, out_);
            out_ += '-';
            append_fixed(*r.uln, decimals, out_);
        } else if (lln) {
            out_ += '>';
            append_fixed(*r.lln, decimals, out_);
        } else if (uln) {
            out_ += '<';
            append_fixed(*r.uln, decimals, out_);
        }
    }

    // OBX-18 EI: device id ^ namespace (manufacturer and model). 2.5.1 allows
    // 22 characters for the field (hl7v2-dictionary 1.8.0), so the namespace is
    // sent only when it fits; the test's NTE always names the whole device.
    void append_equipment(std::string& out) const {
        constexpr std::size_t kObx18MaxLength = 22;  // HL7 2.5.1 OBX-18 length
        const Device& d = result_.device;
        append_text(d.id, out);
        const std::size_t len = d.id.size();
        const std::size_t ns = d.manufacturer.size() + d.model.size() +
                               (d.manufacturer.empty() || d.model.empty() ? 0 : 1);
        if (ns == 0 || len + 1 + ns > kObx18MaxLength) return;
        for (char c : d.manufacturer)
            if (needs_escape(static_cast<unsigned char>(c))) return;
        for (char c : d.model)
            if (needs_escape(static_cast<unsigned char>(c))) return;
        out += '^';
        out += d.manufacturer;
        if (!d.manufacturer.empty() && !d.model.empty()) out += ' ';
        out += d.model;
    }

    const NeutralResult& result_;
    const OruOptions& options_;
    const QuantityTable& table_;
    std::string& out_;
    const char status_;
    int obx_set_ = 0;
    int nte_set_ = 0;
    std::string note_;  // reused buffer for NTE text
    std::string obx_tail_;
    const Timestamp* tail_time_ = nullptr;
    bool tail_ready_ = false;
};

}  // namespace

void append_escaped(std::string_view text, std::string& out) {
    std::size_t run = 0;  // start of the pending run of plain bytes
    for (std::size_t i = 0; i < text.size(); ++i) {
        const auto c = static_cast<unsigned char>(text[i]);
        if (!needs_escape(c)) continue;
        out.append(text.data() + run, i - run);
        run = i + 1;
        switch (c) {
            case '|':
                out += "\\F\\";
                break;
            case '^':
                out += "\\S\\";
                break;
            case '&':
                out += "\\T\\";
                break;
            case '~':
                out += "\\R\\";
                break;
            case '\\':
                out += "\\E\\";
                break;
            default:
                append_hex_escape(c, out);
                break;
        }
    }
    out.append(text.data() + run, text.size() - run);
}

std::string_view abnormal_flag(double value, std::optional<double> lln, std::optional<double> uln,
                               int decimals) {
    const bool has_lln = lln && std::isfinite(*lln);
    const bool has_uln = uln && std::isfinite(*uln);
    if (!has_lln && !has_uln) return {};
    const double v = rounded(value, decimals);
    if (has_lln && v < rounded(*lln, decimals)) return "L";
    if (has_uln && v > rounded(*uln, decimals)) return "H";
    return "N";
}

std::optional<Error> check_oru_options(const OruOptions& options) {
    if (!options.message_time_iso.empty()) {
        auto t = parse_iso_timestamp(options.message_time_iso);
        if (!t) return t.error();
    }
    // Table 0103: D debugging, P production, T training (interop-facts.md).
    const char p = options.processing_id;
    if (p != 'P' && p != 'D' && p != 'T')
        return make_error("hl7v2.processing-id",
                          std::string("MSH-11 processing id '") + p + "' is not one of P, D, T",
                          "processing_id");
    return std::nullopt;
}

void write_oru_r01(const NeutralResult& result, const OruOptions& options,
                   const QuantityTable& table, std::string& out) {
    Writer(result, options, table, out).write();
}

}  // namespace pftgw::hl7v2
