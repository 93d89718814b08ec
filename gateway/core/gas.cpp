// Gas-condition factors from the amount of dry gas in a volume (lung-function-facts.md,
// "Gas conditions"): n ~ (P - PH2O) x V / T, so V_to = V_from x (P_from - PH2O_from) /
// (P_to - PH2O_to) x T_to / T_from.
#include "gateway/core/gas.hpp"

#include <cmath>
#include <string>

namespace pftgw {
namespace {

bool is_gas(GasCondition c) {
    return c == GasCondition::btps || c == GasCondition::stpd || c == GasCondition::atps ||
           c == GasCondition::atpd;
}

bool is_ambient_temperature(GasCondition c) {
    return c == GasCondition::atps || c == GasCondition::atpd;
}

// Temperature (K), total pressure and water-vapour partial pressure (kPa) of one condition.
struct State {
    double temperature_k;
    double pressure_kpa;
    double ph2o_kpa;
};

State state_of(GasCondition c, const Ambient& a) {
    switch (c) {
        case GasCondition::stpd:
            return {kZeroCelsiusK, kStandardPressureKpa, 0.0};
        case GasCondition::btps:
            return {kZeroCelsiusK + kBodyTemperatureCel, *a.pressure_kpa, kPh2oBodyKpa};
        case GasCondition::atps:
            return {kZeroCelsiusK + *a.temperature_cel, *a.pressure_kpa,
                    saturated_vapour_pressure_kpa(*a.temperature_cel)};
        case GasCondition::atpd:
            return {kZeroCelsiusK + *a.temperature_cel, *a.pressure_kpa, 0.0};
        default:
            return {0, 0, 0};  // not reached: callers check is_gas()
    }
}

std::string number(double v) {
    std::string s = std::to_string(v);
    while (!s.empty() && s.back() == '0') s.pop_back();
    if (!s.empty() && s.back() == '.') s.pop_back();
    return s;
}

}  // namespace

double saturated_vapour_pressure_kpa(double temperature_cel) {
    // Buck (1996) over water: 6.1121 exp((18.678 - T/234.5) T / (257.14 + T)) hPa.
    const double t = temperature_cel;
    const double hpa = 6.1121 * std::exp((18.678 - t / 234.5) * t / (257.14 + t));
    return hpa / 10.0;
}

bool needs_ambient(GasCondition from, GasCondition to) {
    return from != to && is_gas(from) && is_gas(to);
}

bool needs_ambient_temperature(GasCondition from, GasCondition to) {
    return needs_ambient(from, to) && (is_ambient_temperature(from) || is_ambient_temperature(to));
}

bool uses_vapour_equation(GasCondition from, GasCondition to) {
    return needs_ambient(from, to) && (from == GasCondition::atps || to == GasCondition::atps);
}

Result<double> gas_condition_factor(GasCondition from, GasCondition to, const Ambient& ambient) {
    if (!is_gas(from) || !is_gas(to))
        return make_error("condition.unsupported", "no gas-condition factor from '" +
                                                       std::string(to_string(from)) + "' to '" +
                                                       std::string(to_string(to)) +
                                                       "': both must be BTPS, STPD, ATPS or ATPD");
    if (from == to) return 1.0;
    const std::string what = std::string(to_string(from)) + "->" + std::string(to_string(to));
    if (!ambient.pressure_kpa)
        return make_error("condition.ambient-missing",
                          what + " needs the ambient barometric pressure, which is not known");
    if (needs_ambient_temperature(from, to) && !ambient.temperature_cel)
        return make_error("condition.ambient-missing",
                          what + " needs the ambient temperature, which is not known");
    if (needs_ambient_temperature(from, to) && *ambient.temperature_cel <= -kZeroCelsiusK)
        return make_error("condition.ambient-implausible", what + ": ambient temperature " +
                                                               number(*ambient.temperature_cel) +
                                                               " Cel is not above absolute zero");

    const State a = state_of(from, ambient);
    const State b = state_of(to, ambient);
    if (!(a.pressure_kpa > a.ph2o_kpa) || !(b.pressure_kpa > b.ph2o_kpa))
        return make_error("condition.ambient-implausible",
                          what + ": barometric pressure " + number(*ambient.pressure_kpa) +
                              " kPa is not above the water-vapour pressure");
    return (a.pressure_kpa - a.ph2o_kpa) / (b.pressure_kpa - b.ph2o_kpa) * b.temperature_k /
           a.temperature_k;
}

}  // namespace pftgw
