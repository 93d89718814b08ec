// UCUM units and conversions between units of one dimension.
#include "gateway/core/units.hpp"

#include <gtest/gtest.h>
#include <rapidcheck/gtest.h>

#include <cmath>
#include <string>
#include <vector>

#include "gateway/core/quantity_table.hpp"

namespace pftgw {
namespace {

double conv(double v, const char* from, const char* to) {
    auto r = convert_unit(v, from, to);
    EXPECT_TRUE(r.ok()) << from << " -> " << to << ": " << (r.ok() ? "" : r.error().message);
    return r.ok() ? *r : std::nan("");
}

TEST(Units, KnowsTheTradesUcumSpellings) {
    for (const char* u : {"L",
                          "mL",
                          "dL",
                          "L/s",
                          "L/min",
                          "mL/s",
                          "mmol/min/kPa",
                          "mL/min/mm[Hg]",
                          "mmol/min/kPa/L",
                          "mL/min/mm[Hg]/L",
                          "g/dL",
                          "g/L",
                          "mmol/L",
                          "kPa",
                          "mm[Hg]",
                          "cm[H2O]",
                          "hPa",
                          "mbar",
                          "cm",
                          "m",
                          "[in_i]",
                          "kg",
                          "g",
                          "[lb_av]",
                          "Cel",
                          "[degF]",
                          "K",
                          "s",
                          "ms",
                          "min",
                          "1",
                          "%",
                          "{z-score}"})
        EXPECT_TRUE(is_known_unit(u)) << u;
}

TEST(Units, RefusesSpellingsThatAreNotUcum) {
    // lung-function-facts.md (V, @lhncbc/ucum-lhc 7.1.10): `mL/min/mmHg` is NOT valid UCUM.
    for (const char* u : {"mL/min/mmHg", "mmHg", "cmH2O", "l", "ml/min/mm[Hg]", "", "degC", "%%"})
        EXPECT_FALSE(is_known_unit(u)) << u;
    auto r = convert_unit(1.0, "mL/min/mmHg", "mmol/min/kPa");
    ASSERT_FALSE(r.ok());
    EXPECT_EQ(r.error().code, "unit.unknown");
    EXPECT_NE(r.error().message.find("mL/min/mmHg"), std::string::npos);
    auto f = unit_factor("mmol/min/kPa", "nope");
    ASSERT_FALSE(f.ok());
    EXPECT_EQ(f.error().code, "unit.unknown");
}

TEST(Units, DifferentDimensionsAreIncompatible) {
    EXPECT_FALSE(same_dimension("L", "L/s"));
    EXPECT_FALSE(same_dimension("mmol/min/kPa", "mmol/min/kPa/L"));
    EXPECT_FALSE(same_dimension("1", "{z-score}"));
    EXPECT_FALSE(same_dimension("L", "mL/min/mmHg"));  // unknown is never the same dimension
    EXPECT_TRUE(same_dimension("mL", "dL"));
    EXPECT_TRUE(same_dimension("%", "1"));
    auto r = convert_unit(3.0, "L", "L/s");
    ASSERT_FALSE(r.ok());
    EXPECT_EQ(r.error().code, "unit.incompatible");
    auto f = unit_factor("kPa", "cm");
    ASSERT_FALSE(f.ok());
    EXPECT_EQ(f.error().code, "unit.incompatible");
}

TEST(Units, VolumeFlowTimeLengthMass) {
    EXPECT_DOUBLE_EQ(conv(2610, "mL", "L"), 2.61);
    EXPECT_DOUBLE_EQ(conv(26.1, "dL", "L"), 2.61);
    EXPECT_DOUBLE_EQ(conv(366, "L/min", "L/s"), 6.1);
    EXPECT_DOUBLE_EQ(conv(6100, "mL/s", "L/s"), 6.1);
    EXPECT_DOUBLE_EQ(conv(10200, "ms", "s"), 10.2);
    EXPECT_DOUBLE_EQ(conv(1.5, "min", "s"), 90);
    EXPECT_DOUBLE_EQ(conv(1.66, "m", "cm"), 166);
    // UCUM: [in_i] = 2.54 cm exactly (international inch).
    EXPECT_DOUBLE_EQ(conv(1, "[in_i]", "cm"), 2.54);
    EXPECT_DOUBLE_EQ(conv(64000, "g", "kg"), 64);
    // UCUM: [lb_av] = 7000 [gr], [gr] = 64.79891 mg, so 1 lb = 0.45359237 kg.
    EXPECT_DOUBLE_EQ(conv(1, "[lb_av]", "kg"), 0.45359237);
}

TEST(Units, PressureFollowsUcumDefinitions) {
    // UCUM: mm[Hg] = 133.322 Pa (m[Hg] = 133.3220 kPa); cm[H2O] = 98.0665 Pa (m[H2O] = 9.80665
    // kPa).
    EXPECT_NEAR(*unit_factor("mm[Hg]", "kPa"), 0.133322, 1e-15);
    EXPECT_NEAR(*unit_factor("cm[H2O]", "kPa"), 0.0980665, 1e-15);
    EXPECT_NEAR(conv(760, "mm[Hg]", "kPa"), 101.32472, 1e-9);
    EXPECT_DOUBLE_EQ(conv(1013.25, "hPa", "kPa"), 101.325);
    EXPECT_DOUBLE_EQ(conv(1013.25, "mbar", "kPa"), 101.325);
}

TEST(Units, DlcoFactorIsTheGli2017InterceptDifference) {
    // GLI-2017 (Stanojevic 2017, Table 2 as corrected 2020; shared/data/gli/coefficients.csv):
    // male a0 TLCO_SI = -8.129189, a0 DLCO_TRAD = -7.03492; the SI and traditional
    // equations differ only in a0, so exp(a0_trad - a0_si) is the unit factor.
    const double a0_si = -8.129189;
    const double a0_trad = -7.03492;
    EXPECT_NEAR(a0_trad - a0_si, 1.094269, 1e-9);
    EXPECT_NEAR(std::exp(a0_trad - a0_si), kDlcoTraditionalPerSi, 5e-6);
    // Females: a0 TLCO_SI = -6.25372, a0 DLCO_TRAD = -5.159451, the same difference.
    EXPECT_NEAR(std::exp(-5.159451 - -6.25372), kDlcoTraditionalPerSi, 5e-6);

    EXPECT_NEAR(*unit_factor("mmol/min/kPa", "mL/min/mm[Hg]"), 2.987, 1e-12);
    EXPECT_NEAR(*unit_factor("mmol/min/kPa/L", "mL/min/mm[Hg]/L"), 2.987, 1e-12);
    // GLI-2017 check value (lung-function-facts.md): male 45 y, 178 cm, TLCO predicted
    // 30.3 mL/min/mmHg is 10.14 mmol/min/kPa.
    EXPECT_NEAR(conv(30.3, "mL/min/mm[Hg]", "mmol/min/kPa"), 30.3 / 2.987, 1e-12);
}

TEST(Units, HemoglobinMassAndMolar) {
    EXPECT_DOUBLE_EQ(conv(129, "g/L", "g/dL"), 12.9);
    // From memory (lung-function-facts.md, flag M): g/dL = 1.611 x mmol/L (monomer).
    EXPECT_NEAR(conv(8.0, "mmol/L", "g/dL"), 12.888, 1e-12);
    EXPECT_NEAR(conv(12.888, "g/dL", "mmol/L"), 8.0, 1e-12);
}

TEST(Units, TemperatureIsAffine) {
    EXPECT_DOUBLE_EQ(conv(22, "Cel", "K"), 295.15);
    EXPECT_DOUBLE_EQ(conv(295.15, "K", "Cel"), 22);
    // UCUM [degF]: 32 [degF] = 0 Cel, 212 [degF] = 100 Cel.
    EXPECT_NEAR(conv(32, "[degF]", "Cel"), 0, 1e-12);
    EXPECT_NEAR(conv(212, "[degF]", "Cel"), 100, 1e-12);
    EXPECT_NEAR(conv(-40, "Cel", "[degF]"), -40, 1e-12);
    auto f = unit_factor("[degF]", "Cel");
    ASSERT_FALSE(f.ok());
    EXPECT_EQ(f.error().code, "unit.affine");
    EXPECT_DOUBLE_EQ(*unit_factor("Cel", "Cel"), 1.0);
}

TEST(Units, FractionAndPercent) {
    EXPECT_DOUBLE_EQ(conv(76.8, "%", "1"), 0.768);
    EXPECT_DOUBLE_EQ(conv(1, "1", "%"), 100);
    EXPECT_DOUBLE_EQ(conv(-1.2, "{z-score}", "{z-score}"), -1.2);
}

TEST(Units, EveryTableUnitIsKnownAndFitsItsCanonicalUnit) {
    for (const auto& k : quantity_table().rows()) {
        EXPECT_TRUE(is_known_unit(k.canonical_unit)) << k.key;
        EXPECT_TRUE(k.accepts(k.canonical_unit)) << k.key;
        EXPECT_TRUE(k.accepts(k.traditional_unit)) << k.key;
        for (const auto& u : k.accepted_units) {
            EXPECT_TRUE(is_known_unit(u)) << k.key << " " << u;
            EXPECT_TRUE(same_dimension(u, k.canonical_unit)) << k.key << " " << u;
        }
    }
}

// Property: a -> b -> a is the identity within rounding, for every pair of units of
// one dimension the gateway knows (DECISIONS.md: a tolerance that admits rounding).
RC_GTEST_PROP(UnitsProperty, RoundTripIsIdentity, ()) {
    static const std::vector<std::vector<const char*>> dims{
        {"L", "mL", "dL"},
        {"L/s", "L/min", "mL/s"},
        {"mmol/min/kPa", "mL/min/mm[Hg]"},
        {"mmol/min/kPa/L", "mL/min/mm[Hg]/L"},
        {"g/dL", "g/L", "mmol/L"},
        {"kPa", "mm[Hg]", "cm[H2O]", "hPa", "mbar"},
        {"cm", "m", "[in_i]"},
        {"kg", "g", "[lb_av]"},
        {"Cel", "[degF]", "K"},
        {"s", "ms", "min"},
        {"1", "%"},
    };
    const auto& dim = *rc::gen::elementOf(dims);
    const char* a = *rc::gen::elementOf(dim);
    const char* b = *rc::gen::elementOf(dim);
    const double x =
        *rc::gen::map(rc::gen::inRange(-1000000, 1000000), [](int i) { return i / 997.0; });
    auto there = convert_unit(x, a, b);
    RC_ASSERT(there.ok());
    auto back = convert_unit(*there, b, a);
    RC_ASSERT(back.ok());
    RC_ASSERT(std::abs(*back - x) <= 1e-12 * std::max(1.0, std::abs(x)));
}

}  // namespace
}  // namespace pftgw
