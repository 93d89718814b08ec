// The quantity table compiled from schemas/quantities.csv.
#include "gateway/core/quantity_table.hpp"

#include <gtest/gtest.h>

#include <set>

namespace pftgw {
namespace {

// LOINC codes end in a mod-10 check digit (LOINC Users' Guide, "check digit").
bool loinc_check_digit_ok(const std::string& code) {
    const auto dash = code.find('-');
    if (dash == std::string::npos || dash + 2 != code.size()) return false;
    const std::string body = code.substr(0, dash);
    // Mod 10: double every other digit starting from the rightmost of the body.
    int sum = 0;
    bool dbl = true;
    for (auto it = body.rbegin(); it != body.rend(); ++it) {
        int d = *it - '0';
        if (dbl) {
            d *= 2;
            if (d > 9) d -= 9;
        }
        sum += d;
        dbl = !dbl;
    }
    return (10 - sum % 10) % 10 == code.back() - '0';
}

TEST(QuantityTable, LoadsEveryKindTheIssueNames) {
    const auto& t = quantity_table();
    for (const char* key :
         {"FEV1",    "FVC",       "FEV1_FVC", "PEF",      "FEF25_75", "FET",          "VC",
          "TLC",     "RV",        "FRC",      "ERV",      "IC",       "RV_TLC",       "DLCO",
          "DLCO_HB", "VA",        "KCO",      "VI",       "VI_VC",    "BHT",          "HB",
          "COHB",    "FEV1.pred", "FEV1.lln", "FEV1.uln", "FEV1.z",   "FEV1.pctpred", "DLCO.pred"})
        EXPECT_NE(t.find(key), nullptr) << key;
    EXPECT_EQ(t.find("NOPE"), nullptr);
}

TEST(QuantityTable, LoincCodesFromTheFactsFile) {
    // lung-function-facts.md "Codes (LOINC)", taken from public FHIR IG value sets.
    const auto& t = quantity_table();
    EXPECT_EQ(t.find("DLCO")->code, "19911-7");
    EXPECT_EQ(t.find("DLCO_HB")->code, "19913-3");
    EXPECT_EQ(t.find("KCO")->code, "19916-6");
    EXPECT_EQ(t.find("FEV1")->code, "20150-9");
    EXPECT_EQ(t.find("FEV1_FVC")->code, "19926-5");  // not 19866-3 (a VC code)
    EXPECT_EQ(t.find("IC")->code, "19848-1");
    EXPECT_EQ(t.find("DLCO.pred")->code, "19910-9");
    EXPECT_EQ(t.find("DLCO.pctpred")->code, "98130-8");
    // No LOINC for VA: the project's own code, never 19850-7 (a helium IC).
    EXPECT_EQ(t.find("VA")->code_system, "PFTGW");
    EXPECT_EQ(t.find("FEV1.z")->code_system, "PFTGW");
}

TEST(QuantityTable, EveryLoincCodePassesItsCheckDigit) {
    for (const auto& k : quantity_table().rows()) {
        if (k.code_system == "LN") {
            EXPECT_TRUE(loinc_check_digit_ok(k.code)) << k.key << " " << k.code;
        }
    }
}

TEST(QuantityTable, CanonicalUnitsFollowTheArchitecture) {
    const auto& t = quantity_table();
    EXPECT_EQ(t.find("FEV1")->canonical_unit, "L");
    EXPECT_EQ(t.find("FEV1")->canonical_condition, GasCondition::btps);
    EXPECT_EQ(t.find("DLCO")->canonical_unit, "mmol/min/kPa");
    EXPECT_EQ(t.find("DLCO")->canonical_condition, GasCondition::stpd);
    EXPECT_EQ(t.find("DLCO")->traditional_unit, "mL/min/mm[Hg]");
    EXPECT_EQ(t.find("KCO")->canonical_unit, "mmol/min/kPa/L");
    EXPECT_EQ(t.find("HB")->canonical_unit, "g/dL");
    EXPECT_EQ(t.find("FEV1_FVC")->canonical_unit, "1");
    EXPECT_FALSE(t.find("FEV1")->implied_condition.has_value());
}

TEST(QuantityTable, VariantsPointAtTheirBase) {
    const auto& t = quantity_table();
    const auto* v = t.variant_of("FEV1", "predicted");
    ASSERT_NE(v, nullptr);
    EXPECT_EQ(v->key, "FEV1.pred");
    EXPECT_EQ(v->code, "20149-1");
    std::set<std::string> codes;
    for (const auto& k : t.rows())
        EXPECT_TRUE(codes.insert(k.code_system + "|" + k.code).second) << k.key;
}

TEST(QuantityTable, RejectsABrokenTable) {
    auto r = QuantityTable::parse_csv("key,trade_name\nFEV1,FEV1\n");
    ASSERT_FALSE(r.ok());
    EXPECT_EQ(r.error().line, 1);
}

}  // namespace
}  // namespace pftgw
