// The UCUM units the trade uses, one table: unit, dimension, factor and offset
// to the dimension's base unit. Only these spellings are known; anything else
// (including the common non-UCUM "mmHg") is "unit.unknown".
#include "gateway/core/units.hpp"

#include <array>
#include <string>

namespace pftgw {
namespace {

enum class Dimension {
    volume,
    flow,
    transfer,     // DLCO: amount of CO per time per pressure (molar step is the gateway's own)
    coefficient,  // KCO: transfer per litre of alveolar volume
    hemoglobin,   // mass concentration; mmol/L by the monomer convention
    pressure,
    length,
    mass,
    temperature,
    time,
    fraction,
    z_score,
};

const char* dimension_name(Dimension d) {
    switch (d) {
        case Dimension::volume:
            return "volume";
        case Dimension::flow:
            return "flow";
        case Dimension::transfer:
            return "transfer factor";
        case Dimension::coefficient:
            return "transfer coefficient";
        case Dimension::hemoglobin:
            return "hemoglobin concentration";
        case Dimension::pressure:
            return "pressure";
        case Dimension::length:
            return "length";
        case Dimension::mass:
            return "mass";
        case Dimension::temperature:
            return "temperature";
        case Dimension::time:
            return "time";
        case Dimension::fraction:
            return "fraction";
        case Dimension::z_score:
            return "z-score";
    }
    return "?";
}

// base = value x factor + offset.
struct UnitDef {
    std::string_view ucum;
    Dimension dimension;
    double factor;
    double offset;
};

constexpr double kFahrenheitSlope = 5.0 / 9.0;  // UCUM [degF]: 5/9 K per degree

constexpr std::array<UnitDef, 33> kUnits{{
    // volume, base L
    {"L", Dimension::volume, 1.0, 0},
    {"mL", Dimension::volume, 1e-3, 0},
    {"dL", Dimension::volume, 0.1, 0},
    // flow, base L/s
    {"L/s", Dimension::flow, 1.0, 0},
    {"L/min", Dimension::flow, 1.0 / 60.0, 0},
    {"mL/s", Dimension::flow, 1e-3, 0},
    // DLCO, base mmol/min/kPa; 1 mmol/min/kPa = 2.987 mL/min/mm[Hg] (DECISIONS.md)
    {"mmol/min/kPa", Dimension::transfer, 1.0, 0},
    {"mL/min/mm[Hg]", Dimension::transfer, 1.0 / kDlcoTraditionalPerSi, 0},
    // KCO, base mmol/min/kPa/L
    {"mmol/min/kPa/L", Dimension::coefficient, 1.0, 0},
    {"mL/min/mm[Hg]/L", Dimension::coefficient, 1.0 / kDlcoTraditionalPerSi, 0},
    // Hb, base g/dL
    {"g/dL", Dimension::hemoglobin, 1.0, 0},
    {"g/L", Dimension::hemoglobin, 0.1, 0},
    {"mmol/L", Dimension::hemoglobin, kHbGdlPerMmolL, 0},
    // pressure, base kPa
    {"kPa", Dimension::pressure, 1.0, 0},
    {"mm[Hg]", Dimension::pressure, kKpaPerMmHg, 0},
    {"cm[H2O]", Dimension::pressure, kKpaPerCmH2O, 0},
    {"hPa", Dimension::pressure, 0.1, 0},
    {"mbar", Dimension::pressure, 0.1, 0},
    // length, base cm; UCUM [in_i] = 2.54 cm
    {"cm", Dimension::length, 1.0, 0},
    {"m", Dimension::length, 100.0, 0},
    {"[in_i]", Dimension::length, 2.54, 0},
    // mass, base kg; UCUM [lb_av] = 7000 [gr] = 453.59237 g
    {"kg", Dimension::mass, 1.0, 0},
    {"g", Dimension::mass, 1e-3, 0},
    {"[lb_av]", Dimension::mass, 0.45359237, 0},
    // temperature, base Cel (affine)
    {"Cel", Dimension::temperature, 1.0, 0},
    {"K", Dimension::temperature, 1.0, -273.15},
    {"[degF]", Dimension::temperature, kFahrenheitSlope, -32.0 * kFahrenheitSlope},
    // time, base s
    {"s", Dimension::time, 1.0, 0},
    {"ms", Dimension::time, 1e-3, 0},
    {"min", Dimension::time, 60.0, 0},
    // fraction, base 1; 1 = 100 %
    {"1", Dimension::fraction, 1.0, 0},
    {"%", Dimension::fraction, 0.01, 0},
    // z-score, unitless annotation
    {"{z-score}", Dimension::z_score, 1.0, 0},
}};

const UnitDef* find_unit(std::string_view ucum) {
    for (const auto& u : kUnits)
        if (u.ucum == ucum) return &u;
    return nullptr;
}

Error unknown(std::string_view ucum) {
    return make_error("unit.unknown",
                      "unit '" + std::string(ucum) + "' is not a UCUM unit the gateway knows");
}

Result<std::pair<const UnitDef*, const UnitDef*>> lookup_pair(std::string_view from,
                                                              std::string_view to) {
    const UnitDef* a = find_unit(from);
    if (!a) return unknown(from);
    const UnitDef* b = find_unit(to);
    if (!b) return unknown(to);
    if (a->dimension != b->dimension)
        return make_error("unit.incompatible", "cannot convert '" + std::string(from) + "' (" +
                                                   dimension_name(a->dimension) + ") to '" +
                                                   std::string(to) + "' (" +
                                                   dimension_name(b->dimension) + ")");
    return std::pair{a, b};
}

}  // namespace

bool is_known_unit(std::string_view ucum) {
    return find_unit(ucum) != nullptr;
}

bool same_dimension(std::string_view from_ucum, std::string_view to_ucum) {
    const UnitDef* a = find_unit(from_ucum);
    const UnitDef* b = find_unit(to_ucum);
    return a && b && a->dimension == b->dimension;
}

Result<double> convert_unit(double value, std::string_view from_ucum, std::string_view to_ucum) {
    auto pair = lookup_pair(from_ucum, to_ucum);
    if (!pair) return pair.error();
    const auto [a, b] = *pair;
    if (a == b) return value;  // exact: no rounding through the base unit
    const double base = value * a->factor + a->offset;
    return (base - b->offset) / b->factor;
}

Result<double> unit_factor(std::string_view from_ucum, std::string_view to_ucum) {
    auto pair = lookup_pair(from_ucum, to_ucum);
    if (!pair) return pair.error();
    const auto [a, b] = *pair;
    if (a == b) return 1.0;
    if (a->offset != 0 || b->offset != 0)
        return make_error("unit.affine", "'" + std::string(from_ucum) + "' to '" +
                                             std::string(to_ucum) +
                                             "' is affine, not a factor: use convert_unit");
    return a->factor / b->factor;
}

}  // namespace pftgw
