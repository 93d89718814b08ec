// Parses the quantity table (schemas/quantities.csv) into QuantityKind rows.
#include "gateway/core/quantity_table.hpp"

#include <algorithm>
#include <charconv>
#include <cstdlib>
#include <stdexcept>

#include "gateway/core/csv_line.hpp"
#include "gateway/core/quantities_csv.hpp"  // generated: kQuantitiesCsv

namespace pftgw {
namespace {

std::vector<std::string> split_spaces(std::string_view s) {
    std::vector<std::string> out;
    std::size_t pos = 0;
    while (pos < s.size()) {
        const auto end = s.find(' ', pos);
        const auto word = s.substr(pos, end == std::string_view::npos ? s.npos : end - pos);
        if (!word.empty()) out.emplace_back(word);
        if (end == std::string_view::npos) break;
        pos = end + 1;
    }
    return out;
}

bool to_double(const std::string& s, double& out) {
    const char* b = s.data();
    const char* e = b + s.size();
    auto [p, ec] = std::from_chars(b, e, out);
    return ec == std::errc() && p == e;
}

constexpr const char* kColumns[] = {"key",
                                    "trade_name",
                                    "test",
                                    "base",
                                    "variant",
                                    "code_system",
                                    "code",
                                    "display",
                                    "canonical_unit",
                                    "canonical_condition",
                                    "implied_condition",
                                    "accepted_units",
                                    "traditional_unit",
                                    "plausible_min",
                                    "plausible_max",
                                    "decimals_si",
                                    "decimals_traditional",
                                    "description"};
constexpr std::size_t kColumnCount = sizeof kColumns / sizeof kColumns[0];

}  // namespace

std::string_view to_string(UnitSystem u) {
    return u == UnitSystem::si ? "si" : "traditional";
}
std::optional<UnitSystem> parse_unit_system(std::string_view t) {
    if (t == "si" || t == "SI") return UnitSystem::si;
    if (t == "traditional") return UnitSystem::traditional;
    return std::nullopt;
}

bool QuantityKind::accepts(std::string_view ucum) const {
    return std::find(accepted_units.begin(), accepted_units.end(), ucum) != accepted_units.end();
}

Result<QuantityTable> QuantityTable::parse_csv(std::string_view csv) {
    QuantityTable table;
    std::size_t pos = 0;
    int line_no = 0;
    while (pos < csv.size()) {
        auto end = csv.find('\n', pos);
        if (end == std::string_view::npos) end = csv.size();
        std::string_view line = csv.substr(pos, end - pos);
        pos = end + 1;
        ++line_no;
        if (!line.empty() && line.back() == '\r') line.remove_suffix(1);
        if (line.empty()) continue;
        auto f = split_csv_line(line);
        auto fail = [&](const std::string& why) {
            Error e = make_error("quantity-table.invalid", why, "schemas/quantities.csv");
            e.line = line_no;
            return e;
        };
        if (f.size() != kColumnCount)
            return fail("expected " + std::to_string(kColumnCount) + " columns, found " +
                        std::to_string(f.size()));
        if (line_no == 1) {
            for (std::size_t i = 0; i < kColumnCount; ++i)
                if (f[i] != kColumns[i])
                    return fail("column " + std::to_string(i + 1) + " must be '" + kColumns[i] +
                                "'");
            continue;
        }
        QuantityKind k;
        k.key = f[0];
        k.trade_name = f[1];
        k.test = f[2];
        k.base = f[3];
        k.variant = f[4];
        k.code_system = f[5];
        k.code = f[6];
        k.display = f[7];
        k.canonical_unit = f[8];
        auto cond = parse_gas_condition(f[9]);
        if (!cond) return fail("canonical_condition '" + f[9] + "' is not a gas condition");
        k.canonical_condition = *cond;
        if (!f[10].empty()) {
            auto implied = parse_gas_condition(f[10]);
            if (!implied) return fail("implied_condition '" + f[10] + "' is not a gas condition");
            k.implied_condition = *implied;
        }
        k.accepted_units = split_spaces(f[11]);
        k.traditional_unit = f[12];
        if (!to_double(f[13], k.plausible_min) || !to_double(f[14], k.plausible_max) ||
            k.plausible_min > k.plausible_max)
            return fail("plausible range '" + f[13] + "'..'" + f[14] + "' is not a range");
        k.decimals_si = std::atoi(f[15].c_str());
        k.decimals_traditional = std::atoi(f[16].c_str());
        k.description = f[17];
        if (k.key.empty() || k.code.empty() || k.canonical_unit.empty() || k.accepted_units.empty())
            return fail("key, code, canonical_unit and accepted_units are required");
        if (k.code_system != "LN" && k.code_system != "PFTGW")
            return fail("code_system must be LN or PFTGW, not '" + k.code_system + "'");
        for (const auto& r : table.rows_)
            if (r.key == k.key) return fail("duplicate key '" + k.key + "'");
        table.rows_.push_back(std::move(k));
    }
    for (std::size_t i = 0; i < table.rows_.size(); ++i) {
        const QuantityKind& k = table.rows_[i];
        table.by_key_.emplace(k.key, i);
        table.by_variant_.emplace(k.base + "|" + k.variant, i);
    }
    return table;
}

const QuantityKind* QuantityTable::find(std::string_view key) const {
    const auto it = by_key_.find(std::string(key));  // keys are short: no allocation (SSO)
    return it == by_key_.end() ? nullptr : &rows_[it->second];
}

const QuantityKind* QuantityTable::variant_of(std::string_view base,
                                              std::string_view variant) const {
    std::string k;
    k.reserve(base.size() + 1 + variant.size());
    k.append(base).append(1, '|').append(variant);
    const auto it = by_variant_.find(k);
    return it == by_variant_.end() ? nullptr : &rows_[it->second];
}

const QuantityTable& quantity_table() {
    static const QuantityTable table = [] {
        auto parsed = QuantityTable::parse_csv(kQuantitiesCsv);
        // The table is compiled in and checked by tests; a broken table is a build defect.
        if (!parsed) throw std::logic_error("schemas/quantities.csv: " + parsed.error().message);
        return std::move(parsed).value();
    }();
    return table;
}

}  // namespace pftgw
