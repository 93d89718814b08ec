// HL7 v2 ACK bytes for a received message (see ack_writer.hpp for the layout).
#include "adapters/hl7v2/ack_writer.hpp"

#include "gateway/core/identity.hpp"

namespace pftgw::hl7v2 {
namespace {

constexpr std::size_t kControlIdLength = 20;  // HL7 2.5.1 MSH-10 length (interop-facts.md, M)
constexpr std::string_view kAckIdRecipe = "pftgw-ack-1";
constexpr std::string_view kTable0357 = "HL70357";

// HL7 table 0357 texts (from memory, interop-facts.md flag M).
std::string_view table_0357_text(std::string_view code) {
    if (code == "100") return "Segment sequence error";
    if (code == "101") return "Required field missing";
    if (code == "102") return "Data type error";
    if (code == "103") return "Table value not found";
    if (code == "200") return "Unsupported message type";
    if (code == "201") return "Unsupported event code";
    if (code == "202") return "Unsupported processing id";
    if (code == "203") return "Unsupported version id";
    return "Application internal error";
}

bool starts_with(std::string_view s, std::string_view p) {
    return s.substr(0, p.size()) == p;
}
bool ends_with(std::string_view s, std::string_view p) {
    return s.size() >= p.size() && s.substr(s.size() - p.size()) == p;
}

std::string error_code_of(const Finding& f) {
    for (const auto& [name, value] : f.values)
        if (name == "hl7.error" && !value.empty()) return value;
    const std::string_view r = f.rule;
    if (starts_with(r, "value.") || starts_with(r, "time.")) return "102";
    if (ends_with(r, ".missing") || starts_with(r, "complete.")) return "101";
    if (starts_with(r, "unit.") || starts_with(r, "condition.") || starts_with(r, "quantity.") ||
        starts_with(r, "profile."))
        return "103";
    return "207";
}

std::optional<Hl7Location> location_value(const Finding& f) {
    ReadMessage none;
    for (const auto& [name, value] : f.values)
        if (name == "location") return none.locate(f);
    return std::nullopt;
}

// Versions before 2.5 carry the error in ERR-1 (ELD) and have no severity.
bool old_err_form(std::string_view version) {
    return starts_with(version, "2.1") || starts_with(version, "2.2") ||
           starts_with(version, "2.3") || starts_with(version, "2.4");
}

std::string ack_control_id(const ParsedMessage& m, AckCode code) {
    const Segment& msh = m.msh();
    std::string key(kAckIdRecipe);
    for (std::string_view part : {m.field(msh, 3), m.field(msh, 4), m.field(msh, 10)}) {
        key += '\x1f';
        key += part;
    }
    key += '\x1f';
    key += to_string(code);
    const auto digest = sha256(key);
    return base32(digest.data(), digest.size()).substr(0, kControlIdLength);
}

}  // namespace

std::string_view to_string(AckCode c) {
    switch (c) {
        case AckCode::accept:
            return "AA";
        case AckCode::error:
            return "AE";
        case AckCode::reject:
            return "AR";
    }
    return "AR";
}

std::string make_ack(const ParsedMessage& m, AckCode code, const std::vector<Finding>& findings,
                     const AckOptions& options) {
    const Delimiters& d = m.delimiters;
    const Segment& msh = m.msh();
    const char f = d.field;
    const char c = d.component;
    const std::string version(m.raw(msh, 12, 1, 1));
    std::string out;
    out.reserve(256);
    out += "MSH";
    out += f;
    out += m.field(msh, 2);
    for (std::size_t n : {5, 6, 3, 4}) {
        out += f;
        out += m.field(msh, n);
    }
    out += f;
    if (options.message_time)
        out += to_hl7_ts(*options.message_time);
    else
        out += m.field(msh, 7);
    out += f;  // MSH-8 security
    out += f;
    out += "ACK";
    out += c;
    out += m.raw(msh, 9, 1, 2);
    if (version != "2.3") {
        out += c;
        out += "ACK";
    }
    out += f;
    out += ack_control_id(m, code);
    out += f;
    out += m.field(msh, 11);
    out += f;
    out += m.field(msh, 12);
    const std::string_view msh18 = m.field(msh, 18);
    if (!msh18.empty()) {
        for (int n = 13; n <= 18; ++n) out += f;
        out += msh18;
    }
    out += '\r';

    out += "MSA";
    out += f;
    out += to_string(code);
    out += f;
    out += m.field(msh, 10);
    out += '\r';

    const bool old_form = old_err_form(version);
    std::size_t written = 0;
    for (const Finding& finding : findings) {
        if (written >= kMaxErrSegments) break;
        if (finding.severity == Severity::info) continue;
        if (old_form && finding.severity != Severity::error) continue;
        const std::string err = error_code_of(finding);
        const auto loc = location_value(finding);
        const auto append_location = [&]() {
            if (!loc) return;
            out += loc->segment;
            out += c;
            out += std::to_string(loc->sequence);
            if (loc->field > 0) {
                out += c;
                out += std::to_string(loc->field);
            }
        };
        out += "ERR";
        out += f;
        if (old_form) {
            // ERR-1 ELD: segment ^ sequence ^ field ^ code&text&HL70357
            append_location();
            if (!loc) {
                out += c;
                out += c;
            } else if (loc->field == 0) {
                out += c;
            }
            out += c;
            out += err;
            out += d.subcomponent;
            out += table_0357_text(err);
            out += d.subcomponent;
            out += kTable0357;
        } else {
            out += f;  // ERR-1 empty (deprecated from 2.5)
            append_location();
            out += f;
            out += err;
            out += c;
            out += table_0357_text(err);
            out += c;
            out += kTable0357;
            out += f;
            out += finding.severity == Severity::error ? 'E' : 'W';
            out += f;  // ERR-5
            out += f;  // ERR-6
            out += f;  // ERR-7
            out += f;
            append_field_text(finding.message, d, m.charset, out);  // ERR-8 user message
        }
        out += '\r';
        ++written;
    }
    return out;
}

AckCode ack_code_for(const ReadMessage& message, const std::vector<Finding>& later) {
    if (message.rejected()) return AckCode::reject;
    if (has_errors(message.findings) || has_errors(later)) return AckCode::error;
    return AckCode::accept;
}

std::string acknowledge(const ReadMessage& message, const std::vector<Finding>& later,
                        const AckOptions& options) {
    if (!message.parsed) return {};
    std::vector<Finding> all = message.findings;
    for (Finding f : later) {
        bool has_location = false;
        for (const auto& v : f.values) has_location = has_location || v.first == "location";
        if (!has_location)
            if (const auto loc = message.locate(f))
                f.values.emplace_back("location", to_string(*loc));
        all.push_back(std::move(f));
    }
    return make_ack(*message.parsed, ack_code_for(message, later), all, options);
}

}  // namespace pftgw::hl7v2
