// libFuzzer target for the ASTM E1394 record reader (RELIABILITY.md: fuzzed
// input gives no crash and no half result). The input is the text of E1381
// messages. Checks, aborting on failure:
// - the reader never crashes, whatever the profile's charset and separator;
// - a transmission without an L record gives no result;
// - reading is deterministic (the same input twice gives the same outcome);
// - every result text is valid UTF-8 after the charset conversion (spot check
//   on subject names and comments).
// Seed corpus: tests/fuzz/corpus/e1394_reader/.
#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <string>
#include <string_view>

#include "adapters/astm/record_reader.hpp"

namespace {

void check(bool ok) {
    if (!ok) std::abort();
}

std::optional<int> fixed_offset(const std::string&, const pftgw::LocalDateTime& local) {
    if (local.hour == 2) return std::nullopt;  // stands in for a skipped hour
    return 60;
}

pftgw::DeviceProfile make_profile(std::uint8_t selector) {
    using namespace pftgw;
    DeviceProfile p;
    p.name = "fuzz";
    p.code_system = "Fuzz";
    p.time_zone = (selector & 1) ? "Europe/Oslo" : "";
    p.charset = (selector & 6) == 0 ? "ASCII" : (selector & 6) == 2 ? "ISO-8859-1" : "UTF-8";
    p.decimal_separator = (selector & 8) ? ',' : '.';
    p.equation_set = "GLI-2012";
    p.height_unit = "cm";
    p.unit_aliases = {{"ml", "mL"}, {"mmHg", "mm[Hg]"}};
    p.codes = {
        {"F1", "FEV1", std::nullopt, "", GasCondition::atps, false, false},
        {"FVC", "FVC", std::nullopt, "mL", GasCondition::atps, (selector & 16) != 0, false},
        {"F1P", "FEV1.pred", std::nullopt, "L", std::nullopt, false, false},
        {"F1Z", "FEV1.z", std::nullopt, "", std::nullopt, false, false},
        {"F1T", "FEV1", std::nullopt, "mL", GasCondition::atps, false, true},
        {"TA", "AMB_TEMP", std::nullopt, "Cel", std::nullopt, false, false},
        {"PA", "PB", std::nullopt, "mm[Hg]", std::nullopt, false, false},
        {"HT", "HEIGHT", std::nullopt, "cm", std::nullopt, false, false},
        {"DL", "DLCO", std::nullopt, "mL/min/mm[Hg]", std::nullopt, false, false},
    };
    p.comment_values = {{"AMB", 2, "TA", 3}, {"AMB", 4, "PA", 0}};
    return p;
}

bool valid_utf8(std::string_view s) {
    for (std::size_t i = 0; i < s.size();) {
        const auto c = static_cast<unsigned char>(s[i]);
        std::size_t n = c < 0x80         ? 1
                        : (c >> 5) == 6  ? 2
                        : (c >> 4) == 14 ? 3
                        : (c >> 3) == 30 ? 4
                                         : 0;
        if (n == 0 || i + n > s.size()) return false;
        for (std::size_t k = 1; k < n; ++k)
            if ((static_cast<unsigned char>(s[i + k]) & 0xC0) != 0x80) return false;
        i += n;
    }
    return true;
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
    if (size == 0) return 0;
    const pftgw::DeviceProfile profile = make_profile(data[0]);
    const std::string_view text(reinterpret_cast<const char*>(data + 1), size - 1);

    const auto out = pftgw::astm::read_e1394(text, profile, fixed_offset, "fuzz");
    const auto again = pftgw::astm::read_e1394(text, profile, fixed_offset, "fuzz");
    check(out.results == again.results);
    check(out.findings == again.findings);

    // No L record anywhere (as a record start): no result can be complete.
    bool has_l = !text.empty() && (text[0] == 'L' || text[0] == 'l');
    for (std::size_t i = 0; i + 1 < text.size() && !has_l; ++i)
        has_l = (text[i] == '\r' || text[i] == '\n') && (text[i + 1] == 'L' || text[i + 1] == 'l');
    if (!has_l) check(out.results.empty());

    for (const auto& r : out.results) {
        check(valid_utf8(r.subject.family_name));
        check(valid_utf8(r.subject.given_name));
        for (const auto& t : r.tests)
            for (const auto& c : t.comments) check(valid_utf8(c));
    }
    return 0;
}
