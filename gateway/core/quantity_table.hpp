// The quantity table: one row per quantity kind, read from schemas/quantities.csv
// (compiled in at build time). Code and docs read this one table.
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <unordered_map>
#include <vector>

#include "gateway/core/model.hpp"
#include "gateway/core/result.hpp"

namespace pftgw {

enum class UnitSystem { si, traditional };
std::string_view to_string(UnitSystem u);  // "si", "traditional"
std::optional<UnitSystem> parse_unit_system(std::string_view text);

struct QuantityKind {
    std::string key;         // "FEV1", "DLCO.pred"
    std::string trade_name;  // "FEV1", "DLCO pred"
    std::string
        test;  // "spirometry", "lung-volumes", "diffusing-capacity", "subject", "environment"
    std::string base;         // the measured kind a variant belongs to ("DLCO" for "DLCO.pred")
    std::string variant;      // "measured", "predicted", "lln", "uln", "z", "percent_predicted"
    std::string code_system;  // "LN" (LOINC) or "PFTGW" (the project's own code system)
    std::string code;
    std::string display;
    std::string canonical_unit;  // UCUM; also the SI rendering
    GasCondition canonical_condition = GasCondition::none;
    // Condition that holds by definition when a source sends none (DLCO is
    // STPD by the standard's definition; a ratio has none). Empty: a source
    // that sends no condition gets a finding.
    std::optional<GasCondition> implied_condition;
    std::vector<std::string> accepted_units;  // UCUM units a source may send
    std::string traditional_unit;
    double plausible_min = 0;  // in canonical_unit
    double plausible_max = 0;
    int decimals_si = 2;
    int decimals_traditional = 2;
    std::string description;

    const std::string& unit_for(UnitSystem s) const {
        return s == UnitSystem::si ? canonical_unit : traditional_unit;
    }
    int decimals_for(UnitSystem s) const {
        return s == UnitSystem::si ? decimals_si : decimals_traditional;
    }
    bool accepts(std::string_view ucum) const;
};

class QuantityTable {
public:
    static Result<QuantityTable> parse_csv(std::string_view csv);

    const QuantityKind* find(std::string_view key) const;
    // The variant row of a base kind, e.g. variant_of("FEV1", "predicted") -> FEV1.pred.
    const QuantityKind* variant_of(std::string_view base, std::string_view variant) const;
    const std::vector<QuantityKind>& rows() const { return rows_; }

private:
    std::vector<QuantityKind> rows_;
    // Row indices by key and by "base|variant": find() and variant_of() run for
    // every value of every result, so they are hashed, not searched.
    std::unordered_map<std::string, std::size_t> by_key_;
    std::unordered_map<std::string, std::size_t> by_variant_;
};

// The table compiled from schemas/quantities.csv; parsed once, then constant.
const QuantityTable& quantity_table();

// The project's code system and the HL7 v2 coding-system name used for it.
// Documented in schemas/README.md; sites may override them in writer options.
inline constexpr std::string_view kProjectCodeSystemUri =
    "https://pftgw.example/fhir/CodeSystem/pft-quantity";
inline constexpr std::string_view kProjectHl7CodingSystem = "99PFTGW";
inline constexpr std::string_view kLoincUri = "http://loinc.org";

}  // namespace pftgw
