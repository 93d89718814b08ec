// Gas conditions: ATPS, ATPD, BTPS, STPD (lung-function-facts.md, "Gas conditions").
#pragma once

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

struct Ambient {
    double temperature_cel = 0;
    double pressure_kpa = 0;
};

// Factor that takes a gas volume from one condition to another:
// V_to = V_from x factor. BTPS needs the ambient pressure; ATPS/ATPD need
// ambient temperature and pressure. Errors: "condition.ambient-missing",
// "condition.unsupported" (none/unspecified).
Result<double> gas_condition_factor(GasCondition from, GasCondition to, const Ambient& ambient);

// Whether converting between the two needs ambient values.
bool needs_ambient(GasCondition from, GasCondition to);

}  // namespace pftgw
