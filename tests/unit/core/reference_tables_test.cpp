// The compiled-in GLI tables load and pass their checks; broken copies of
// them are refused (gateway/core/reference/gli_tables.cpp).
#include <gtest/gtest.h>

#include <string>

#include "gateway/core/reference/gli_tables.hpp"
#include "gateway/core/reference/reference_values.hpp"

namespace pftgw {
namespace {

using gli::GliSources;
using gli::parse_gli_tables;

TEST(ReferenceTables, CompiledTablesLoadAndPassTheirChecks) {
    // Fails loudly, with the checker's message, if a table in
    // schemas/reference/gli/ is broken.
    const auto& t = gli::gli_tables();
    ASSERT_TRUE(t.ok()) << t.error().where << ":" << t.error().line << ": " << t.error().message;
    // schemas/reference/gli/README.md: 3 + 5 + 5 + 7 spline quantities, 2 sexes
    // each, one coefficients row per equation (40 rows).
    EXPECT_EQ(t->equation_count(), 40u);
}

TEST(ReferenceTables, EveryEquationCoversItsDocumentedAgesInQuarterYears) {
    // Row counts from the README ("Files"): (max - min) x 4 + 1 rows per quantity and sex.
    const auto& t = gli::gli_tables();
    ASSERT_TRUE(t.ok());
    struct Want {
        EquationSet set;
        GliQuantity q;
        double min_years, max_years;
    };
    const Want wants[] = {
        {EquationSet::gli_global_2022, GliQuantity::fvc, 3, 95},
        {EquationSet::gli_2012, GliQuantity::fef75, 3, 90},
        {EquationSet::gli_2012, GliQuantity::fev1_fvc, 3, 95},
        {EquationSet::gli_2017, GliQuantity::kco_traditional, 5, 90},
        {EquationSet::gli_2021, GliQuantity::rv_tlc, 5, 80},
    };
    for (const auto& w : wants)
        for (SexAtBirth sex : {SexAtBirth::male, SexAtBirth::female}) {
            const auto* eq = t->find(w.set, w.q, sex);
            ASSERT_NE(eq, nullptr);
            EXPECT_EQ(eq->table_age_min_years, w.min_years);
            EXPECT_EQ(eq->table_age_max_years, w.max_years);
            EXPECT_EQ(eq->rows.size(),
                      static_cast<std::size_t>((w.max_years - w.min_years) * 4) + 1);
        }
    // Sets hold only their own quantities (GLI Global 2022 has no FEF).
    EXPECT_EQ(t->find(EquationSet::gli_global_2022, GliQuantity::fef25_75, SexAtBirth::male),
              nullptr);
    EXPECT_EQ(t->find(EquationSet::gli_2021, GliQuantity::fev1, SexAtBirth::female), nullptr);
}

// Copies of the compiled sources, one of which a test breaks.
struct Copies {
    std::string coefficients, g2012, g2017, g2021, g2022;
    Copies() {
        const auto s = gli::compiled_gli_sources();
        coefficients = s.coefficients;
        g2012 = s.gli2012;
        g2017 = s.gli2017;
        g2021 = s.gli2021;
        g2022 = s.gli2022;
    }
    GliSources sources() const { return {coefficients, g2012, g2017, g2021, g2022}; }
};

void erase_line_containing(std::string& text, const std::string& needle) {
    const auto at = text.find(needle);
    ASSERT_NE(at, std::string::npos) << needle;
    // The needle starts with the line's leading newline.
    const auto start = at + 1;
    const auto end = text.find('\n', start);
    text.erase(start, end - start + 1);
}

void expect_refused(const Copies& c, const std::string& word) {
    auto r = parse_gli_tables(c.sources());
    ASSERT_FALSE(r.ok()) << "a broken table was accepted";
    EXPECT_EQ(r.error().code, "reference.tables-invalid");
    EXPECT_NE(r.error().message.find(word), std::string::npos) << r.error().message;
}

TEST(ReferenceTables, UnchangedCopiesAreAccepted) {
    Copies c;
    EXPECT_TRUE(parse_gli_tables(c.sources()).ok());
}

TEST(ReferenceTables, MissingRowIsRefused) {
    Copies c;
    erase_line_containing(c.g2017, "\nTLCO_SI,M,45.25,");
    expect_refused(c, "3410");
}

TEST(ReferenceTables, GapInAgesIsRefusedEvenWithTheRightRowCount) {
    // Drop a middle row and add one at the end of the same sheet: the count
    // is right, the ages are not consecutive quarter years.
    Copies c;
    erase_line_containing(c.g2021, "\nTLC,F,57.5,");
    c.g2021 += "TLC,F,80.25,0,0,0\n";
    expect_refused(c, "57.75");
}

TEST(ReferenceTables, RepeatedAgeIsRefused) {
    Copies c;
    const std::string row = "FEV1,M,3.25,";
    const auto at = c.g2022.find(row);
    ASSERT_NE(at, std::string::npos);
    // Turn the 3.25 row into a second 3.0 row.
    c.g2022.replace(at, row.size(), "FEV1,M,3,");
    expect_refused(c, "was expected");
}

TEST(ReferenceTables, MissingSexIsRefused) {
    // Relabel every female FEF75 row as male: the count is right, one sex is missing.
    Copies c;
    std::string::size_type at = 0;
    while ((at = c.g2012.find("\nFEF75,F,", at)) != std::string::npos) {
        c.g2012.replace(at, 9, "\nFEF75,M,");
        ++at;
    }
    expect_refused(c, "FEF75");
}

TEST(ReferenceTables, BadNumberAndMissingCoefficientsAreRefused) {
    Copies a;
    const auto at = a.g2017.find("\nVA,F,60,");
    ASSERT_NE(at, std::string::npos);
    a.g2017.insert(at + 9, "x");
    expect_refused(a, "number");

    Copies b;
    erase_line_containing(b.coefficients, "\nGLI-2021,ERV,F,");
    expect_refused(b, "40");
}

TEST(ReferenceTables, EmptySheetIsRefused) {
    Copies c;
    c.g2022.clear();
    expect_refused(c, "header");
}

}  // namespace
}  // namespace pftgw
