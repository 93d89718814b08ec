// Normalization: every quantity to its canonical unit and gas condition
// (schemas/quantities.csv), keeping what was sent in Quantity::source.
#pragma once

#include <vector>

#include "gateway/core/model.hpp"
#include "gateway/core/quantity_table.hpp"

namespace pftgw {

// Converts every quantity of `result` in place to canonical unit and condition
// and records the Derivation. A value whose unit or condition cannot be
// determined is left unconverted and reported: "unit.missing", "unit.unknown",
// "unit.mismatch", "condition.missing", "condition.ambient-missing",
// "quantity.unknown-kind", "value.not-numeric". Never a silent default.
// Then runs derive_quantities(). Findings are also appended to result.findings.
std::vector<Finding> normalize(NeutralResult& result, const QuantityTable& table);

// Re-expresses a normalized result in SI or traditional units for one target.
// The one place units change for output; writers write what they are given.
NeutralResult render_units(const NeutralResult& normalized, UnitSystem system,
                           const QuantityTable& table);

}  // namespace pftgw
