// HL7 v2.5.1 ORU^R01 writer (see oru_writer.hpp for the layout and choices).
// One pass into the caller's std::string through a raw write pointer (Sink):
// no streams, no temporary strings per field, numbers by integer scaling with
// std::to_chars where rounding is close, the quantity table's codes and units
// escaped once per process (KindCache), text escaping with a scan for the
// first special byte before any byte-wise work.
#include "adapters/hl7v2/oru_writer.hpp"

#include <algorithm>
#include <array>
#include <charconv>
#include <cmath>
#include <cstdint>
#include <cstring>
#include <vector>

#if defined(__SSE2__)
#include <emmintrin.h>
#endif

#include "gateway/core/identity.hpp"
#include "gateway/core/time.hpp"

namespace pftgw::hl7v2 {
namespace {

// A finding's value as a person reads it in an NTE: a decimal number with
// more digits than a display needs (a computed ratio, 0.9703703704) at 4
// significant digits, trailing zeros dropped; any other text as it is. The
// finding itself keeps every digit (neutral output, pftgw check --format json).
constexpr int kNoteSignificantDigits = 4;
constexpr std::size_t kNoteNumberChars = 7;  // "12.3456" and shorter stay as they are
std::string readable_value(std::string_view text) {
    if (text.size() <= kNoteNumberChars || text.find('.') == std::string_view::npos)
        return std::string(text);
    double v = 0;
    const auto [end, ec] = std::from_chars(text.data(), text.data() + text.size(), v);
    if (ec != std::errc() || end != text.data() + text.size() || !std::isfinite(v) || v == 0)
        return std::string(text);
    const int magnitude = static_cast<int>(std::floor(std::log10(std::fabs(v))));
    const int decimals = std::max(0, kNoteSignificantDigits - 1 - magnitude);
    char buf[64];
    const auto r = std::to_chars(buf, buf + sizeof buf, v, std::chars_format::fixed, decimals);
    std::string out(buf, r.ptr);
    if (out.find('.') != std::string::npos) {
        while (out.back() == '0') out.pop_back();
        if (out.back() == '.') out.pop_back();
    }
    return out;
}

constexpr char kSegmentEnd = '\r';  // HL7 2.5.1 ch. 2: segments end in CR

// MSH-1 and MSH-2 (the default delimiters); written literally, never escaped.
constexpr std::string_view kMshStart = "MSH|^~\\&|";
constexpr std::string_view kMessageType = "ORU^R01^ORU_R01";  // MSH-9 (interop-facts.md)
constexpr std::string_view kVersion = "2.5.1";                // MSH-12
constexpr std::string_view kCharacterSet = "UNICODE UTF-8";   // MSH-18, table 0211

// OBR-4 per test. LOINC 81459-0 is the spirometry panel (lung-function-facts.md,
// "Codes"). That file names only it and the whole-PFT panel 81458-2, so lung
// volumes and diffusing capacity get project codes in 99PFTGW rather than a
// borrowed number (schemas/README.md, "Codes that are not quantities").
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

// Test grades travel as findings (rule quality.grade, values ("FEV1", "A") ...);
// each gets an ST OBX coded in 99PFTGW (no LOINC for a grade; schemas/README.md,
// "Codes that are not quantities").
constexpr std::string_view kGradeRule = "quality.grade";
struct GradeCode {
    std::string_view name;  // the finding's value name
    std::string_view ce;    // OBX-3, already free of characters to escape
};
constexpr std::array<GradeCode, 3> kGradeCodes{{
    {"FEV1", "FEV1.grade^FEV1 quality grade (ATS/ERS 2019)^99PFTGW"},
    {"FVC", "FVC.grade^FVC quality grade (ATS/ERS 2019)^99PFTGW"},
    {"DLCO", "DLCO.grade^DLCO quality grade (ERS/ATS 2017)^99PFTGW"},
}};

// Info findings that travel in the message: the core decides
// (info_travels_to_record: quality.* and adjust.*, not "not assessed" notes).
bool info_travels(const Finding& f) {
    return info_travels_to_record(f);
}

// z-score band edges (Stanojevic 2022, lung-function-facts.md, V); the band
// names mild / moderate / severe are from memory of the same paper. Text only:
// OBX-8 stays L / H / N from LLN / ULN (DECISIONS.md, patient safety).
constexpr double kZMild = -1.645;
constexpr double kZModerate = -2.5;
constexpr double kZSevere = -4.0;
constexpr std::string_view kZCaution =
    "text only, not a flag; interpretation belongs to licensed staff.";

// Worst-case growth of escaped text: one byte becomes "\Xhh\" (5 bytes).
constexpr std::size_t kEscapeGrowth = 5;
// Room for one number: to_chars of a double with up to 17 decimals fits in 64.
constexpr std::size_t kNumberRoom = 64;

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

constexpr bool has_special(std::string_view text) {
    for (char c : text)
        if (kNeedsEscape[static_cast<unsigned char>(c)]) return true;
    return false;
}
static_assert(!has_special(kCaution), "kCaution is written without escaping");

// Index of the first byte that needs an escape, or text.size().
std::size_t first_special(const char* p, std::size_t n) {
    std::size_t i = 0;
#if defined(__SSE2__)
    // 16 bytes at a time: control bytes (<= 0x1F, unsigned), DEL and | ^ & ~ \.
    const __m128i max_control = _mm_set1_epi8(0x1F);
    const __m128i pipe = _mm_set1_epi8('|');
    const __m128i caret = _mm_set1_epi8('^');
    const __m128i amp = _mm_set1_epi8('&');
    const __m128i tilde = _mm_set1_epi8('~');
    const __m128i backslash = _mm_set1_epi8('\\');
    const __m128i del = _mm_set1_epi8(0x7F);
    for (; i + 16 <= n; i += 16) {
        const __m128i x = _mm_loadu_si128(reinterpret_cast<const __m128i*>(p + i));
        __m128i hit = _mm_cmpeq_epi8(_mm_min_epu8(x, max_control), x);
        hit = _mm_or_si128(hit, _mm_cmpeq_epi8(x, pipe));
        hit = _mm_or_si128(hit, _mm_cmpeq_epi8(x, caret));
        hit = _mm_or_si128(hit, _mm_cmpeq_epi8(x, amp));
        hit = _mm_or_si128(hit, _mm_cmpeq_epi8(x, tilde));
        hit = _mm_or_si128(hit, _mm_cmpeq_epi8(x, backslash));
        hit = _mm_or_si128(hit, _mm_cmpeq_epi8(x, del));
        const int mask = _mm_movemask_epi8(hit);
        if (mask != 0) return i + static_cast<std::size_t>(__builtin_ctz(mask));
    }
#endif
    for (; i < n; ++i)
        if (needs_escape(static_cast<unsigned char>(p[i]))) return i;
    return n;
}

// HL7 v2 escape sequences (2.5.1 ch. 2, "Escape sequences supporting multiple
// character sets"; interop-facts.md V). Writes at `w`, returns the new end;
// the caller has room for kEscapeGrowth bytes per input byte.
char* write_escaped(std::string_view text, char* w) {
    static constexpr char kHex[] = "0123456789ABCDEF";
    const char* p = text.data();
    const std::size_t n = text.size();
    std::size_t i = first_special(p, n);
    std::memcpy(w, p, i);
    w += i;
    for (; i < n; ++i) {
        const auto c = static_cast<unsigned char>(p[i]);
        if (!needs_escape(c)) {
            *w++ = static_cast<char>(c);
            continue;
        }
        *w++ = '\\';
        switch (c) {
            case '|':
                *w++ = 'F';
                break;
            case '^':
                *w++ = 'S';
                break;
            case '&':
                *w++ = 'T';
                break;
            case '~':
                *w++ = 'R';
                break;
            case '\\':
                *w++ = 'E';
                break;
            default:
                *w++ = 'X';
                *w++ = kHex[c >> 4];
                *w++ = kHex[c & 0x0F];
                break;
        }
        *w++ = '\\';
    }
    return w;
}

std::string escaped_copy(std::string_view text) {
    std::string out;
    append_escaped(text, out);
    return out;
}

// ---- numbers ----

constexpr int kMaxFastDecimals = 9;
constexpr std::array<double, kMaxFastDecimals + 1> kPow10{1e0, 1e1, 1e2, 1e3, 1e4,
                                                          1e5, 1e6, 1e7, 1e8, 1e9};
constexpr std::array<long long, kMaxFastDecimals + 1> kPow10Int{
    1, 10, 100, 1000, 10000, 100000, 1000000, 10000000, 100000000, 1000000000};
// Below 2^30 the product v x 10^d is within 2^-22 of the exact decimal; a
// fraction this far from one half cannot round the other way, so the integer
// agrees with std::to_chars' exact rounding. Closer to a tie, to_chars decides.
constexpr double kFastScaledLimit = 1073741824.0;  // 2^30
constexpr double kTieMargin = 1e-4;

// v rounded to `decimals` places as an integer count of 10^-decimals, exactly
// as std::to_chars(fixed, decimals) rounds it; false when the fast path does not
// apply (the caller then uses to_chars itself).
bool fast_scaled(double v, int decimals, long long& n) {
    if (decimals < 0 || decimals > kMaxFastDecimals) return false;
    const double s = v * kPow10[static_cast<std::size_t>(decimals)];
    if (!(std::fabs(s) < kFastScaledLimit)) return false;
    const double f = std::floor(s);
    const double frac = s - f;
    if (std::fabs(frac - 0.5) < kTieMargin) return false;
    n = static_cast<long long>(frac > 0.5 ? f + 1 : f);
    return true;
}

// Fixed decimals via to_chars; "-0.00" becomes "0.00" (a bare NM, no signed zero).
std::size_t format_fixed_slow(double v, int decimals, char* buf, std::size_t size) {
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

// Writes a scaled integer as a fixed decimal; no sign for zero.
char* write_scaled(long long n, int decimals, char* w) {
    if (n < 0) {
        *w++ = '-';
        n = -n;
    }
    const long long scale = kPow10Int[static_cast<std::size_t>(decimals)];
    const long long whole = n / scale;
    long long frac = n % scale;
    w = std::to_chars(w, w + 24, whole).ptr;
    if (decimals > 0) {
        *w++ = '.';
        for (int i = decimals - 1; i >= 0; --i) {
            w[i] = static_cast<char>('0' + frac % 10);
            frac /= 10;
        }
        w += decimals;
    }
    return w;
}

// At most kNumberRoom bytes.
char* write_fixed(double v, int decimals, char* w) {
    long long n = 0;
    if (fast_scaled(v, decimals, n)) return write_scaled(n, decimals, w);
    return w + format_fixed_slow(v, decimals, w, kNumberRoom);
}

// The displayed value as the double it reads back as (for the flag comparison).
double rounded(double v, int decimals) {
    long long n = 0;
    if (fast_scaled(v, decimals, n))
        return static_cast<double>(n) / kPow10[static_cast<std::size_t>(decimals)];
    char buf[kNumberRoom];
    const std::size_t len = format_fixed_slow(v, decimals, buf, sizeof buf);
    double back = v;
    std::from_chars(buf, buf + len, back);
    return back;
}

// ---- the write pointer ----

// Appends to the caller's string through a raw pointer: room is made per item
// (need), the string is trimmed to what was written at the end (finish).
class Sink {
public:
    // `room`: the bytes expected; resize() zero-fills, so the string is grown
    // by that much, not to its whole capacity.
    Sink(std::string& s, std::size_t room) : s_(s) {
        const std::size_t used = s_.size();
        s_.resize(used + room);
        w_ = s_.data() + used;
        end_ = s_.data() + s_.size();
    }
    Sink(const Sink&) = delete;
    Sink& operator=(const Sink&) = delete;

    void finish() { s_.resize(static_cast<std::size_t>(w_ - s_.data())); }

    void put(char c) {
        need(1);
        *w_++ = c;
    }
    void put(std::string_view text) {
        need(text.size());
        std::memcpy(w_, text.data(), text.size());
        w_ += text.size();
    }
    void text(std::string_view t) {
        need(t.size() * kEscapeGrowth);
        w_ = write_escaped(t, w_);
    }
    void integer(long long v) {
        need(24);
        w_ = std::to_chars(w_, w_ + 24, v).ptr;
    }
    void fixed(double v, int decimals) {
        need(kNumberRoom);
        w_ = write_fixed(v, decimals, w_);
    }
    void two_digits(int v) {
        need(2);
        *w_++ = static_cast<char>('0' + (v / 10) % 10);
        *w_++ = static_cast<char>('0' + v % 10);
    }

private:
    void need(std::size_t n) {
        if (static_cast<std::size_t>(end_ - w_) < n) grow(n);
    }
    void grow(std::size_t n) {
        constexpr std::size_t kMinGrowth = 4096;
        const std::size_t used = static_cast<std::size_t>(w_ - s_.data());
        std::size_t size = s_.size() + s_.size() / 2;
        if (size < used + n) size = used + n;
        if (size < used + kMinGrowth) size = used + kMinGrowth;
        s_.resize(size);
        w_ = s_.data() + used;
        end_ = s_.data() + s_.size();
    }

    std::string& s_;
    char* w_ = nullptr;
    char* end_ = nullptr;
};

void put_date(const Date& d, Sink& out) {
    const int y = d.year;
    out.two_digits(y / 100);
    out.two_digits(y % 100);
    out.two_digits(d.month);
    out.two_digits(d.day);
}

// Same form as core's to_hl7_ts (YYYYMMDDHHMMSS[.SSS]+ZZZZ, offset always),
// without a temporary string.
void put_ts(const Timestamp& t, Sink& out) {
    put_date(t.date, out);
    out.two_digits(t.hour);
    out.two_digits(t.minute);
    out.two_digits(t.second);
    if (t.millisecond != 0) {
        out.put('.');
        out.put(static_cast<char>('0' + (t.millisecond / 100) % 10));
        out.two_digits(t.millisecond % 100);
    }
    const int off = t.offset_minutes < 0 ? -t.offset_minutes : t.offset_minutes;
    out.put(t.offset_minutes < 0 ? '-' : '+');
    out.two_digits(off / 60);
    out.two_digits(off % 60);
}

// ---- the quantity table, escaped once ----

enum VariantSlot : std::size_t { kPred, kLln, kUln, kZ, kPctPred, kVariantSlots };
struct VariantName {
    std::string_view variant;
    std::string_view suffix;
    bool own_unit;  // z and percent have their own unit; the rest the quantity's
};
constexpr std::array<VariantName, kVariantSlots> kVariants{{
    {"predicted", ".pred", false},
    {"lln", ".lln", false},
    {"uln", ".uln", false},
    {"z", ".z", true},
    {"percent_predicted", ".pctpred", true},
}};

std::string_view hl7_coding_system(const QuantityKind& k) {
    return k.code_system == "LN" ? std::string_view("LN") : kProjectHl7CodingSystem;
}

// What the writer needs of one table row, escaped and looked up once.
struct KindInfo {
    const QuantityKind* kind = nullptr;
    std::string ce;                             // OBX-3: code^display^system, escaped
    std::array<std::string, 2> unit_ce;         // OBX-6 for the si / traditional unit, escaped
    std::array<int, kVariantSlots> variants{};  // row index of FEV1.pred ...; -1 none
};

std::size_t system_index(UnitSystem s) {
    return s == UnitSystem::si ? 0 : 1;
}

void put_unit_ce(std::string_view unit, std::string& out) {
    if (unit.empty()) return;
    append_escaped(unit, out);
    out += '^';
    append_escaped(unit, out);
    out += "^UCUM";
}

// Kind key -> row, by an open-addressing hash (FNV-1a) over the table's keys.
class KindCache {
public:
    explicit KindCache(const QuantityTable& table) : table_(table) {
        const auto& rows = table.rows();
        info_.resize(rows.size());
        std::size_t slots = 16;
        while (slots < rows.size() * 4) slots *= 2;
        slots_.assign(slots, -1);
        for (std::size_t i = 0; i < rows.size(); ++i) {
            const QuantityKind& k = rows[i];
            KindInfo& info = info_[i];
            info.kind = &k;
            info.ce = escaped_copy(k.code) + '^' + escaped_copy(k.display) + '^' +
                      std::string(hl7_coding_system(k));
            put_unit_ce(k.unit_for(UnitSystem::si), info.unit_ce[0]);
            put_unit_ce(k.unit_for(UnitSystem::traditional), info.unit_ce[1]);
            std::size_t h = hash(k.key) & (slots - 1);
            while (slots_[h] >= 0) h = (h + 1) & (slots - 1);
            slots_[h] = static_cast<int>(i);
        }
        for (std::size_t i = 0; i < rows.size(); ++i)
            for (std::size_t v = 0; v < kVariantSlots; ++v) {
                const QuantityKind* vk = variant_row(rows[i].base, kVariants[v]);
                info_[i].variants[v] = vk ? static_cast<int>(vk - rows.data()) : -1;
            }
    }

    const KindInfo* find(std::string_view key) const {
        const std::size_t mask = slots_.size() - 1;
        for (std::size_t h = hash(key) & mask;; h = (h + 1) & mask) {
            const int i = slots_[h];
            if (i < 0) return nullptr;
            if (info_[static_cast<std::size_t>(i)].kind->key == key)
                return &info_[static_cast<std::size_t>(i)];
        }
    }
    const KindInfo& at(int row) const { return info_[static_cast<std::size_t>(row)]; }

    // The variant row of an unknown base kind (not in the table): the table's own scan.
    const QuantityKind* variant_row(std::string_view base, const VariantName& v) const {
        // By the table's key convention first (FEV1 + .pred), confirmed against base/variant.
        std::string key(base);
        key += v.suffix;
        const QuantityKind* k = table_.find(key);
        if (k && k->base == base && k->variant == v.variant) return k;
        return table_.variant_of(base, v.variant);
    }

private:
    static std::size_t hash(std::string_view s) {
        constexpr std::uint64_t kFnvOffset = 14695981039346656037ull;  // FNV-1a 64-bit
        constexpr std::uint64_t kFnvPrime = 1099511628211ull;
        std::uint64_t h = kFnvOffset;
        for (char c : s) h = (h ^ static_cast<unsigned char>(c)) * kFnvPrime;
        return static_cast<std::size_t>(h);
    }

    const QuantityTable& table_;
    std::vector<KindInfo> info_;
    std::vector<int> slots_;
};

// The compiled-in table lives for the whole process: its cache is built once.
// Any other table gets a cache for the one message.
const KindCache* shared_cache_for(const QuantityTable& table) {
    const QuantityTable& compiled = quantity_table();
    if (&table != &compiled) return nullptr;
    static const KindCache cache(compiled);
    return &cache;
}

// ---- fields ----

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
void put_assigning_authority(std::string_view system, Sink& out) {
    constexpr std::string_view kOidPrefix = "urn:oid:";
    if (system.empty()) return;
    if (system.substr(0, kOidPrefix.size()) == kOidPrefix) {
        out.put('&');
        out.text(system.substr(kOidPrefix.size()));
        out.put("&ISO");
    } else if (system.find(':') != std::string_view::npos) {
        out.put('&');
        out.text(system);
        out.put("&URI");
    } else {
        out.text(system);
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

// Bytes a message of this result needs at most, roughly: reserving it up front
// keeps the string from growing while the message is written.
std::size_t size_estimate(const NeutralResult& r) {
    constexpr std::size_t kPerMessage = 1024;
    constexpr std::size_t kPerTest = 1024;
    constexpr std::size_t kPerValue = 160;
    constexpr std::size_t kPerReference = 5 * 120;
    constexpr std::size_t kPerFinding = 256;
    std::size_t n = kPerMessage + kPerFinding * r.findings.size();
    for (const auto& t : r.tests) {
        n += kPerTest;
        for (const auto& q : t.values) n += kPerValue + kPerReference * q.reference.size();
    }
    return n;
}

class Writer {
public:
    Writer(const NeutralResult& r, const OruOptions& o, const KindCache& cache, Sink& out)
        : result_(r),
          options_(o),
          cache_(cache),
          out_(out),
          status_(result_status(r)),
          units_(system_index(o.units)) {}

    void write() {
        place_findings();
        write_msh();
        write_pid();
        for (std::size_t i = 0; i < result_.tests.size(); ++i)
            write_test(static_cast<int>(i), result_.tests[i]);
    }

private:
    void write_msh() {
        out_.put(kMshStart);
        out_.text(options_.sending_application);
        out_.put('|');
        out_.text(options_.sending_facility);
        out_.put('|');
        out_.text(options_.receiving_application);
        out_.put('|');
        out_.text(options_.receiving_facility);
        out_.put('|');
        write_message_time();
        out_.put("||");  // MSH-8 security: empty
        out_.put(kMessageType);
        out_.put('|');
        const std::string control_id =
            hl7_control_id(result_.id.empty() ? result_identifier(result_) : result_.id,
                           result_.revision, options_.target);
        out_.put(control_id);
        out_.put('|');
        out_.put(options_.processing_id);
        out_.put('|');
        out_.put(kVersion);
        out_.put("||||||");  // MSH-13..17 empty: original acknowledgment mode
        out_.put(kCharacterSet);
        out_.put(kSegmentEnd);
    }

    void write_message_time() {
        if (!options_.message_time_iso.empty()) {
            auto t = parse_iso_timestamp(options_.message_time_iso);
            if (t) {
                put_ts(*t, out_);
                return;
            }
        }
        if (result_.session_time) {
            put_ts(*result_.session_time, out_);
            return;
        }
        for (const auto& test : result_.tests)
            if (test.time) {
                put_ts(*test.time, out_);
                return;
            }
    }

    void write_pid() {
        const Subject& s = result_.subject;
        out_.put("PID|1||");
        bool first = true;
        for (const auto& id : s.identifiers) {
            if (!first) out_.put('~');
            first = false;
            out_.text(id.value);
            out_.put("^^^");
            put_assigning_authority(id.system, out_);
            if (!id.type.empty()) {
                out_.put('^');
                out_.text(id.type);
            }
        }
        out_.put("||");
        out_.text(s.family_name);
        if (!s.given_name.empty()) {
            out_.put('^');
            out_.text(s.given_name);
        }
        out_.put("||");
        if (s.birth_date) put_date(*s.birth_date, out_);
        out_.put('|');
        out_.put(administrative_sex(s));
        out_.put(kSegmentEnd);
    }

    const Timestamp* time_of(const Test& t) const {
        if (t.time) return &*t.time;
        if (result_.session_time) return &*result_.session_time;
        return nullptr;
    }

    void write_test(int index, const Test& test) {
        const Order& order = result_.order;
        const Timestamp* when = time_of(test);
        build_obx_tail(when);

        out_.put("ORC|RE|");
        out_.text(order.placer_number);
        out_.put('|');
        out_.text(order.filler_number);
        out_.put(kSegmentEnd);

        out_.put("OBR|");
        out_.integer(index + 1);
        out_.put('|');
        out_.text(order.placer_number);
        out_.put('|');
        out_.text(order.filler_number);
        out_.put('|');
        const PanelCode& panel = panel_for(test.type);
        out_.text(panel.code);
        out_.put('^');
        out_.text(panel.display);
        out_.put('^');
        out_.put(panel.system);
        out_.put("|||");  // OBR-5, OBR-6
        if (when) put_ts(*when, out_);
        // OBR-18 placer field 1 carries the accession number (common practice).
        out_.put("|||||||||||");
        out_.text(order.accession_number);
        out_.put("||||||");  // OBR-19..23
        out_.put(kServiceSection);
        out_.put('|');
        out_.put(status_);
        out_.put(kSegmentEnd);

        nte_set_ = 0;
        write_test_context_note(test);
        for (const auto& c : test.comments) write_nte(kNoteFromLab, c);
        write_findings(index, {});
        begin_nte(kNoteFromGateway);
        out_.put(kCaution);
        out_.put(kSegmentEnd);

        obx_set_ = 0;
        for (const auto& q : test.values) write_quantity(index, q);
        write_grades(index);
    }

    // One ST OBX per grade of the test's quality.grade findings.
    void write_grades(int test_index) {
        for (std::size_t i = 0; i < homes_.size(); ++i) {
            const Finding& f = result_.findings[i];
            if (homes_[i].test != test_index || f.rule != kGradeRule) continue;
            for (const auto& [name, grade] : f.values) {
                const GradeCode* code = nullptr;
                for (const GradeCode& g : kGradeCodes)
                    if (g.name == name) code = &g;
                if (!code || grade.empty()) continue;
                out_.put("OBX|");
                out_.integer(++obx_set_);
                out_.put("|ST|");
                out_.put(code->ce);
                out_.put("||");
                out_.text(grade);
                out_.put("|||");  // OBX-6..8 empty: a grade has no unit, range or flag
                end_obx(status_);
            }
        }
    }

    // Method, device and gas conditions, so a reader of the message alone knows
    // how the numbers were taken and at which condition they are expressed.
    void write_test_context_note(const Test& test) {
        begin_nte(kNoteFromGateway);
        if (!test.method.empty()) {
            out_.put("Method: ");
            out_.text(test.method);
            out_.put(". ");
        }
        const Device& d = result_.device;
        out_.put("Device ");
        out_.text(d.id);
        if (!d.manufacturer.empty() || !d.model.empty()) {
            out_.put(": ");
            out_.text(d.manufacturer);
            if (!d.manufacturer.empty() && !d.model.empty()) out_.put(' ');
            out_.text(d.model);
        }
        if (!d.serial_number.empty()) {
            out_.put(", serial ");
            out_.text(d.serial_number);
        }
        if (!d.software_version.empty()) {
            out_.put(", software ");
            out_.text(d.software_version);
        }
        out_.put(". Units: ");
        out_.text(to_string(options_.units));
        out_.put('.');
        constexpr std::array<GasCondition, 4> kGas{GasCondition::btps, GasCondition::stpd,
                                                   GasCondition::atps, GasCondition::atpd};
        for (GasCondition g : kGas) {
            bool any = false;
            for (const auto& q : test.values) {
                if (q.condition != g) continue;
                if (any) {
                    out_.put(", ");
                } else {
                    out_.put(" At ");
                    out_.text(to_string(g));
                    out_.put(": ");
                }
                out_.text(q.kind);
                any = true;
            }
            if (any) out_.put('.');
        }
        out_.put(kSegmentEnd);
    }

    // Where each finding is written: under the value its path names, else
    // under the test it names, else under the first test, so every finding travels.
    void place_findings() {
        homes_.clear();
        homes_.reserve(result_.findings.size());
        for (const auto& f : result_.findings) {
            FindingPlace p = place_of(f.path);
            if (p.test < 0 || p.test >= static_cast<int>(result_.tests.size())) {
                p = {0, {}};
            } else if (!p.kind.empty() &&
                       !result_.tests[static_cast<std::size_t>(p.test)].find(p.kind)) {
                p.kind = {};
            }
            if (f.severity == Severity::info && !info_travels(f)) p.test = -1;
            homes_.push_back(p);
        }
    }

    // The findings placed at (test, kind) as NTE; kind empty: the test itself.
    void write_findings(int test_index, std::string_view kind) {
        for (std::size_t i = 0; i < homes_.size(); ++i) {
            const FindingPlace& home = homes_[i];
            if (home.test != test_index || home.kind != kind) continue;
            const Finding& f = result_.findings[i];
            begin_nte(kNoteFromGateway);
            out_.put(f.severity == Severity::error     ? std::string_view("Error ")
                     : f.severity == Severity::warning ? std::string_view("Warning ")
                                                       : std::string_view("Info "));
            out_.text(f.rule);
            if (!f.path.empty()) {
                out_.put(" at ");
                out_.text(f.path);
            }
            out_.put(": ");
            out_.text(f.message);
            if (!f.values.empty()) {
                out_.put(" (");
                for (std::size_t v = 0; v < f.values.size(); ++v) {
                    if (v) out_.put("; ");
                    out_.text(f.values[v].first);
                    out_.put('=');
                    out_.text(readable_value(f.values[v].second));
                }
                out_.put(')');
            }
            out_.put(kSegmentEnd);
        }
    }

    // NTE-1..2 and the separator before NTE-3; the caller writes the text and CR.
    void begin_nte(std::string_view source) {
        out_.put("NTE|");
        out_.integer(++nte_set_);
        out_.put('|');
        out_.put(source);
        out_.put('|');
    }

    void write_nte(std::string_view source, std::string_view text) {
        begin_nte(source);
        out_.text(text);
        out_.put(kSegmentEnd);
    }

    void write_quantity(int test_index, const Quantity& q) {
        const KindInfo* info = cache_.find(q.kind);
        const QuantityKind* kind = info ? info->kind : nullptr;
        const int decimals = kind ? kind->decimals_for(options_.units) : 2;
        const bool present = q.value.has_value() && std::isfinite(*q.value);
        const std::size_t flag_set = flag_set_of(q);
        const ReferenceValues* first_ref =
            flag_set < q.reference.size() ? &q.reference[flag_set] : nullptr;

        begin_obx(present, info, q.kind, {});
        if (present) out_.fixed(*q.value, decimals);
        out_.put('|');
        put_unit(q.unit, info);
        out_.put('|');
        if (present && first_ref) put_range(*first_ref, decimals);
        out_.put('|');
        if (present && first_ref)
            out_.put(abnormal_flag(*q.value, first_ref->lln, first_ref->uln, decimals));
        end_obx(present ? status_ : kStatusCannotObtain);

        nte_set_ = 0;
        // HL7 v2.5.1 ch. 7: an NTE after an OBX is a comment on that
        // observation, so the value's own comments come first, right after it.
        for (const auto& c : q.comments) write_nte(kNoteFromLab, c);
        if (!present) {
            begin_nte(kNoteFromLab);
            out_.put("Not reported: ");
            out_.text(q.absent_reason ? std::string_view(*q.absent_reason)
                                      : std::string_view("no value"));
            out_.put(kSegmentEnd);
        }
        if (q.origin == Origin::gateway) {
            begin_nte(kNoteFromGateway);
            out_.put("Computed by the gateway");
            for (std::size_t i = 0; i < q.derived_from.size(); ++i) {
                out_.put(i ? std::string_view(", ") : std::string_view(" from "));
                out_.text(q.derived_from[i]);
            }
            // Which adjustment or computation made it (physiology's derivation steps).
            if (q.derivation && !q.derivation->steps.empty()) {
                out_.put(": ");
                out_.text(q.derivation->steps);
            }
            out_.put('.');
            out_.put(kSegmentEnd);
        }
        for (std::size_t i = 0; i < q.reference.size(); ++i) write_reference_note(q, i);
        if (present && q.reference.size() > 1) {
            begin_nte(kNoteFromGateway);
            out_.put("OBX-7 and OBX-8 use reference set ");
            out_.integer(static_cast<long long>(flag_set + 1));
            out_.put(" (");
            put_set_name(q.reference[flag_set]);
            out_.put(").");
            out_.put(kSegmentEnd);
        }
        write_findings(test_index, q.kind);

        for (std::size_t i = 0; i < q.reference.size(); ++i)
            write_reference_values(q, info, q.reference[i], static_cast<int>(i + 1), decimals);
    }

    // The set OBX-7 and OBX-8 compare with: the first set the gateway computed
    // (the reference policy, always a GLI set) when it has a limit, else the
    // first set. A lab that turns the policy on has chosen that set for its
    // record; the device's set still goes out in full, with its own OBX-4.
    static std::size_t flag_set_of(const Quantity& q) {
        for (std::size_t i = 0; i < q.reference.size(); ++i) {
            const ReferenceValues& r = q.reference[i];
            if (r.origin == Origin::gateway && (r.lln || r.uln)) return i;
        }
        return 0;
    }

    void put_set_name(const ReferenceValues& r) {
        out_.text(r.equation_set.empty() ? std::string_view("unnamed equation set")
                                         : std::string_view(r.equation_set));
        if (!r.equation_version.empty()) {
            out_.put(", version ");
            out_.text(r.equation_version);
        }
    }

    // The z-score's place among the band edges, as text (never a flag).
    void write_z_band_note(const Quantity& q, const KindInfo* info, std::size_t i) {
        const ReferenceValues& r = q.reference[i];
        if (!r.z_score || !std::isfinite(*r.z_score)) return;
        const KindInfo* zinfo = info ? variant_of(q, info, kZ) : nullptr;
        const int d = zinfo ? zinfo->kind->decimals_for(options_.units) : 2;
        const double z = rounded(*r.z_score, d);
        begin_nte(kNoteFromGateway);
        out_.put("z-score ");
        out_.fixed(*r.z_score, d);
        out_.put(" (reference set ");
        out_.integer(static_cast<long long>(i + 1));
        out_.put("): ");
        if (z < kZSevere)
            out_.put("below -4.0 (Stanojevic 2022 band: severe)");
        else if (z < kZModerate)
            out_.put("from -4.0 to below -2.5 (Stanojevic 2022 band: moderate)");
        else if (z < kZMild)
            out_.put("from -2.5 to below -1.645 (Stanojevic 2022 band: mild)");
        else if (z > -kZMild)
            out_.put("above +1.645");
        else
            out_.put("from -1.645 to +1.645");
        out_.put("; bands -1.645 / -2.5 / -4.0 are ");
        out_.put(kZCaution);
        out_.put(kSegmentEnd);
    }

    void write_reference_note(const Quantity& q, std::size_t i) {
        const ReferenceValues& r = q.reference[i];
        begin_nte(r.origin == Origin::device ? kNoteFromLab : kNoteFromGateway);
        out_.put("Reference set ");
        out_.integer(static_cast<long long>(i + 1));
        out_.put(" (OBX-4 ");
        out_.integer(static_cast<long long>(i + 1));
        out_.put(") for ");
        out_.text(q.kind);
        out_.put(": ");
        put_set_name(r);
        out_.put("; computed by the ");
        out_.text(to_string(r.origin));
        out_.put('.');
        out_.put(kSegmentEnd);
        write_z_band_note(q, cache_.find(q.kind), i);
    }

    void write_reference_values(const Quantity& q, const KindInfo* info, const ReferenceValues& r,
                                int set, int decimals) {
        const std::array<const std::optional<double>*, kVariantSlots> values{
            &r.predicted, &r.lln, &r.uln, &r.z_score, &r.percent_predicted};
        char sub_id[16];
        auto res = std::to_chars(sub_id, sub_id + sizeof sub_id, set);
        const std::string_view sub(sub_id, static_cast<std::size_t>(res.ptr - sub_id));
        for (std::size_t v = 0; v < kVariantSlots; ++v) {
            const std::optional<double>& value = *values[v];
            if (!value || !std::isfinite(*value)) continue;
            const KindInfo* vinfo = variant_of(q, info, v);
            if (!vinfo) continue;  // no code for it: a value without a code is not sent
            const QuantityKind& vk = *vinfo->kind;
            const bool own_unit = kVariants[v].own_unit;
            const int d = own_unit ? vk.decimals_for(options_.units) : decimals;
            begin_obx(true, vinfo, vk.key, sub);
            out_.fixed(*value, d);
            out_.put('|');
            if (own_unit)
                out_.put(vinfo->unit_ce[units_]);
            else
                put_unit(q.unit, info);
            out_.put("||");  // OBX-7, OBX-8 empty: limits and flags belong to the measured value
            if (v == kPred)
                end_obx_with_method(status_, r);
            else
                end_obx(status_);
        }
    }

    const KindInfo* variant_of(const Quantity& q, const KindInfo* info, std::size_t v) const {
        if (info) {
            const int row = info->variants[v];
            return row < 0 ? nullptr : &cache_.at(row);
        }
        const QuantityKind* vk = cache_.variant_row(q.kind, kVariants[v]);
        return vk ? cache_.find(vk->key) : nullptr;
    }

    // OBX-1..4 and the separator before OBX-5.
    void begin_obx(bool numeric, const KindInfo* info, std::string_view key,
                   std::string_view sub_id) {
        out_.put("OBX|");
        out_.integer(++obx_set_);
        out_.put(numeric ? std::string_view("|NM|") : std::string_view("||"));
        if (info) {
            out_.put(info->ce);
        } else {
            out_.text(key);
            out_.put('^');
            out_.text(key);
            out_.put('^');
            out_.put(kProjectHl7CodingSystem);
        }
        out_.put('|');
        out_.put(sub_id);
        out_.put('|');
    }

    // OBX-12 .. OBX-18 and the CR: the same for every OBX of a test.
    void build_obx_tail(const Timestamp* when) {
        obx_tail_.clear();
        std::string& t = obx_tail_;
        t += "|||";  // OBX-12, OBX-13
        if (when) {
            constexpr std::size_t kTimestampRoom = 32;
            Sink s(t, kTimestampRoom);
            put_ts(*when, s);
            s.finish();
        }
        t += "|||";  // OBX-15, OBX-16
        obx17_at_ = t.size();
        t += '|';  // OBX-17 (empty but for predicted values), then OBX-18
        append_equipment(t);
        t += kSegmentEnd;
    }

    // As end_obx, with OBX-17 observation method naming the equation set
    // (CE text component only: the sets have no code system).
    void end_obx_with_method(char status, const ReferenceValues& r) {
        out_.put("|||");
        out_.put(status);
        const std::string_view tail(obx_tail_);
        out_.put(tail.substr(0, obx17_at_));
        out_.put('^');
        put_set_name(r);
        out_.put(tail.substr(obx17_at_));
    }

    // OBX-9 .. OBX-18, after OBX-8.
    void end_obx(char status) {
        out_.put("|||");  // OBX-9, OBX-10
        out_.put(status);
        out_.put(obx_tail_);
    }

    void put_unit(std::string_view unit, const KindInfo* info) {
        if (unit.empty()) return;
        if (info) {
            // The usual case: the unit the table renders for this system.
            const QuantityKind& k = *info->kind;
            if (unit == k.unit_for(options_.units)) {
                out_.put(info->unit_ce[units_]);
                return;
            }
        }
        out_.text(unit);
        out_.put('^');
        out_.text(unit);
        out_.put("^UCUM");
    }

    void put_range(const ReferenceValues& r, int decimals) {
        const bool lln = r.lln && std::isfinite(*r.lln);
        const bool uln = r.uln && std::isfinite(*r.uln);
        if (lln && uln) {
            out_.fixed(*r.lln, decimals);
            out_.put('-');
            out_.fixed(*r.uln, decimals);
        } else if (lln) {
            out_.put('>');
            out_.fixed(*r.lln, decimals);
        } else if (uln) {
            out_.put('<');
            out_.fixed(*r.uln, decimals);
        }
    }

    // OBX-18 EI: device id ^ namespace (manufacturer and model). 2.5.1 allows
    // 22 characters for the field (hl7v2-dictionary 1.8.0), so the namespace is
    // sent only when it fits; the test's NTE always names the whole device.
    void append_equipment(std::string& out) const {
        constexpr std::size_t kObx18MaxLength = 22;  // HL7 2.5.1 OBX-18 length
        const Device& d = result_.device;
        append_escaped(d.id, out);
        const std::size_t len = d.id.size();
        const std::size_t ns = d.manufacturer.size() + d.model.size() +
                               (d.manufacturer.empty() || d.model.empty() ? 0 : 1);
        if (ns == 0 || len + 1 + ns > kObx18MaxLength) return;
        if (has_special(d.manufacturer) || has_special(d.model)) return;
        out += '^';
        out += d.manufacturer;
        if (!d.manufacturer.empty() && !d.model.empty()) out += ' ';
        out += d.model;
    }

    const NeutralResult& result_;
    const OruOptions& options_;
    const KindCache& cache_;
    Sink& out_;
    const char status_;
    const std::size_t units_;  // 0 si, 1 traditional: index into KindInfo::unit_ce
    int obx_set_ = 0;
    int nte_set_ = 0;
    std::vector<FindingPlace> homes_;  // per finding; test -1: not written
    std::string obx_tail_;
    std::size_t obx17_at_ = 0;  // where OBX-17 goes in obx_tail_
};

}  // namespace

void append_escaped(std::string_view text, std::string& out) {
    const std::size_t used = out.size();
    out.resize(used + text.size() * kEscapeGrowth);
    char* end = write_escaped(text, out.data() + used);
    out.resize(static_cast<std::size_t>(end - out.data()));
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
    const KindCache* shared = shared_cache_for(table);
    std::optional<KindCache> own;
    if (!shared) own.emplace(table);
    Sink sink(out, size_estimate(result));
    Writer(result, options, shared ? *shared : *own, sink).write();
    sink.finish();
}

}  // namespace pftgw::hl7v2
