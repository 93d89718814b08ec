// Gas conditions: ATPS, ATPD, BTPS, STPD (lung-function-facts.md, "Gas conditions").
#pragma once

#include <optional>

#include "gateway/core/model.hpp"
#include "gateway/core/result.hpp"

namespace pftgw {

inline constexpr double kBodyTemperatureCel = 37.0;
// The trade's convention for PH2O at 37 C, 47 mmHg (6.266 kPa), not the CRC 6.2795 kPa.
inline constexpr double kPh2oBodyKpa = 47.0 * 0.133322;
inline constexpr double kStandardPressureKpa = 101.325;  // 760 mmHg
inline constexpr double kZeroCelsiusK = 273.15;

// Saturated water-vapour pressure over pure water, Buck (1996), in kPa.
double saturated_vapour_pressure_kpa(double temperature_cel);
inline constexpr const char* kWaterVapourEquation = "Buck 1996";

// Ambient values of the session. Empty means not known: 0 Cel is a temperature,
// so "missing" cannot be a zero.
struct Ambient {
    std::optional<double> temperature_cel;
    std::optional<double> pressure_kpa;
};

// Factor that takes a gas volume from one condition to another:
// V_to = V_from x factor, from the amount of dry gas, n ~ (P - PH2O) V / T:
// ATPS: ambient T and PB, saturated (Buck 1996); ATPD: ambient T and PB, dry;
// BTPS: 37 C, ambient PB, PH2O 47 mmHg; STPD: 0 C, 101.325 kPa, dry.
// A conversion that involves BTPS needs the ambient pressure; ATPS/ATPD need
// ambient temperature and pressure; STPD -> STPD needs nothing.
// Errors: "condition.ambient-missing", "condition.ambient-implausible"
// (pressure not above the water-vapour pressure, temperature below 0 K),
// "condition.unsupported" (none/unspecified).
Result<double> gas_condition_factor(GasCondition from, GasCondition to, const Ambient& ambient);

// Whether converting between the two needs ambient values: true for any two
// different gas conditions (every pair but STPD/STPD involves BTPS, ATPS or ATPD).
bool needs_ambient(GasCondition from, GasCondition to);
// Whether the conversion uses the ambient temperature (ATPS or ATPD involved).
bool needs_ambient_temperature(GasCondition from, GasCondition to);
// Whether it uses the saturated vapour pressure at ambient temperature (ATPS involved).
bool uses_vapour_equation(GasCondition from, GasCondition to);

}  // namespace pftgw
