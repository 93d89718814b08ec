// UCUM units the trade uses, and conversion between units of one dimension.
// The molar step for DLCO (mmol/min/kPa <-> mL/min/mm[Hg]) is the gateway's own:
// UCUM cannot turn mmol of gas into mL.
#pragma once

#include <string_view>

#include "gateway/core/result.hpp"

namespace pftgw {

// 1 mmol/min/kPa = 2.987 mL/min/mm[Hg] (and per litre for KCO).
// Source: GLI-2017 (Stanojevic 2017) SI and traditional intercepts differ by
// ln 2.98700 for both sexes, TLCO and KCO; the ERS/ATS standards quote 2.987.
// DECISIONS.md: this one factor is used everywhere.
inline constexpr double kDlcoTraditionalPerSi = 2.987;
inline constexpr double kKpaPerMmHg = 0.133322;    // UCUM: 1 mm[Hg] = 133.322 Pa
inline constexpr double kKpaPerCmH2O = 0.0980665;  // UCUM: 1 cm[H2O] = 98.0665 Pa
inline constexpr double kHbGdlPerMmolL =
    1.611;  // from memory (lung-function-facts.md, flag M): monomer Hb

// True when the gateway knows the UCUM unit string. Case-sensitive and exact:
// only the spellings of units.cpp's table (L, mL, dL; L/s, L/min, mL/s;
// mmol/min/kPa, mL/min/mm[Hg] and both per L; g/dL, g/L, mmol/L; kPa, mm[Hg],
// cm[H2O], hPa, mbar; cm, m, [in_i]; kg, g, [lb_av]; Cel, [degF], K; s, ms,
// min; 1, %; {z-score}). "mL/min/mmHg" is not UCUM and is not known.
bool is_known_unit(std::string_view ucum);

// Units of the same dimension (volume, flow, ...) convert into each other.
bool same_dimension(std::string_view from_ucum, std::string_view to_ucum);

// Converts a value between two known units of one dimension (affine for
// temperatures). Errors: "unit.unknown", "unit.incompatible".
Result<double> convert_unit(double value, std::string_view from_ucum, std::string_view to_ucum);

// The multiplicative factor from one unit to another. Errors: "unit.unknown",
// "unit.incompatible", and "unit.affine" between two different temperature
// units (a unit to itself is 1).
Result<double> unit_factor(std::string_view from_ucum, std::string_view to_ucum);

}  // namespace pftgw
