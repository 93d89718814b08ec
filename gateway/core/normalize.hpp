// Normalization: every quantity to its canonical unit and gas condition
// (schemas/quantities.csv), keeping what was sent in Quantity::source.
#pragma once

#include <vector>

#include "gateway/core/model.hpp"
#include "gateway/core/quantity_table.hpp"

namespace pftgw {

// Converts every quantity of `result` in place (subject height and weight, the
// environment, every test's values and every trial's values) to the kind's
// canonical unit and condition, and records the Derivation: factor (value =
// sent number x factor; for a temperature unit, the slope, the offset being
// in the steps' unit names), steps ("mL->L; ATPS->BTPS"; "STPD implied by
// definition" when the table's implied_condition was used), the ambient
// temperature and pressure used, "Buck 1996" when the vapour pressure at
// ambient temperature was. Reference predicted / LLN / ULN get the same
// conversion; z and percent predicted are unitless. A device quantity whose
// source is empty (no value, unit or condition text) gets it filled from what
// it holds before conversion. The ambient values come from the normalized
// environment (AMB_TEMP in Cel, PB in kPa).
//
// A value whose unit or condition cannot be determined is left unconverted and
// reported (severity error), never defaulted: "unit.missing", "unit.unknown",
// "unit.mismatch" (not in the kind's accepted_units), "condition.missing",
// "condition.ambient-missing" (also for ambient values that cannot be used,
// e.g. PB below the water-vapour pressure), "condition.mismatch",
// "quantity.unknown-kind", "value.not-numeric". Absent quantities are skipped.
//
// Then runs derive_quantities(). Returns this run's findings (normalization and
// derivation) and appends to result.findings those it does not already hold,
// so normalizing a normalized result changes nothing (idempotent).
std::vector<Finding> normalize(NeutralResult& result, const QuantityTable& table);

// Re-expresses a normalized result in SI or traditional units for one target:
// every quantity and its reference predicted / LLN / ULN in the kind's
// canonical_unit (si) or traditional_unit (traditional); the Derivation's
// factor is multiplied and a step appended, or the last step cancelled when
// this one is its inverse (SI -> traditional -> SI gives the same steps back).
// Conditions are not changed. A quantity whose unit normalization could not
// settle is left as it is. The one place units change for output; writers
// write what they are given.
NeutralResult render_units(const NeutralResult& normalized, UnitSystem system,
                           const QuantityTable& table);
// The same, reusing the given result instead of copying it.
NeutralResult render_units(NeutralResult&& normalized, UnitSystem system,
                           const QuantityTable& table);

}  // namespace pftgw
