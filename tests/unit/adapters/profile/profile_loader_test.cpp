// Device profile loader: every validation error names the file, the line and
// the key; the sample profiles load; the documentation lists every key.
// Line numbers are 1-based as toml++ 3.3 reports them (toml::source_position,
// "line: The line number. Lines are 1-based"); the TOML syntax rules checked
// are those of TOML v1.0.0 (a key defined twice is invalid).
#include <gtest/gtest.h>

#include <fstream>
#include <sstream>
#include <string>

#include "adapters/profile/profile_loader.hpp"

namespace {

using pftgw::profile::parse_profile;
using pftgw::profile::ProfileOutcome;

// A valid profile; tests append one broken line or table after it.
// Line numbers below count from this text: it has 9 lines.
const std::string kBase =
    "name = \"test-device\"\n"       // 1
    "code_system = \"Test\"\n"       // 2
    "time_zone = \"Europe/Oslo\"\n"  // 3
    "decimal_separator = \",\"\n"    // 4
    "charset = \"ISO-8859-1\"\n"     // 5
    "[[codes]]\n"                    // 6
    "code = \"F1\"\n"                // 7
    "kind = \"FEV1\"\n"              // 8
    "unit = \"mL\"\n";               // 9

// The one error of `text`, checked for file, line, key and rule.
void expect_one_error(const std::string& text, int line, const std::string& key,
                      const std::string& rule) {
    const ProfileOutcome out = parse_profile(text, "dev.toml");
    ASSERT_EQ(out.errors.size(), 1u) << (out.errors.empty() ? "" : out.errors[0].to_string());
    const auto& e = out.errors[0];
    EXPECT_EQ(e.file, "dev.toml");
    EXPECT_EQ(e.line, line) << e.to_string();
    EXPECT_EQ(e.key, key) << e.to_string();
    EXPECT_EQ(e.rule, rule) << e.to_string();
    EXPECT_NE(e.to_string().find("dev.toml:" + std::to_string(line) + ": " + key),
              std::string::npos)
        << e.to_string();
    EXPECT_FALSE(out.profile.has_value());
}

TEST(ProfileLoader, BaseProfileLoads) {
    const ProfileOutcome out = parse_profile(kBase, "dev.toml");
    ASSERT_TRUE(out.ok()) << out.errors[0].to_string();
    const auto& p = *out.profile;
    EXPECT_EQ(p.name, "test-device");
    EXPECT_EQ(p.source_file, "dev.toml");
    EXPECT_EQ(p.decimal_separator, ',');
    EXPECT_EQ(p.charset, "ISO-8859-1");
    ASSERT_EQ(p.codes.size(), 1u);
    EXPECT_EQ(p.codes[0].kind, "FEV1");
    EXPECT_EQ(p.codes[0].unit, "mL");
    EXPECT_FALSE(p.codes[0].condition.has_value());
    EXPECT_EQ(p.datetime_format, "%Y%m%d%H%M%S");  // the default
}

TEST(ProfileLoader, UnknownKeyInCodesTable) {
    // TOML v1.0.0: keys after a [[codes]] header belong to that table.
    expect_one_error(kBase + "colour = \"blue\"\n", 10, "codes[0].colour", "profile.unknown-key");
}

TEST(ProfileLoader, UnknownKeyAtTopBeforeTables) {
    expect_one_error("colour = 1\n" + kBase, 1, "colour", "profile.unknown-key");
}

TEST(ProfileLoader, UnknownKeyInDeviceTable) {
    expect_one_error(kBase + "[device]\nid = \"X\"\nserial = \"9\"\n", 12, "device.serial",
                     "profile.unknown-key");
}

TEST(ProfileLoader, UnknownQuantityKind) {
    expect_one_error(kBase + "[[codes]]\ncode = \"F2\"\nkind = \"FEV2\"\n", 12, "codes[1].kind",
                     "profile.unknown-kind");
}

TEST(ProfileLoader, UnitThatDoesNotFitTheKind) {
    // schemas/quantities.csv: FEV1 accepts "L mL" only.
    expect_one_error(kBase + "[[codes]]\ncode = \"P\"\nkind = \"FEV1\"\nunit = \"L/s\"\n", 13,
                     "codes[1].unit", "profile.unit-mismatch");
}

TEST(ProfileLoader, BadConditionName) {
    expect_one_error(kBase + "condition = \"BPTS\"\n", 10, "codes[0].condition",
                     "profile.bad-condition");
}

TEST(ProfileLoader, ConditionThatDoesNotFitTheKind) {
    // FEV1_FVC is a ratio: no gas condition (quantity table, canonical "none").
    expect_one_error(kBase + "[[codes]]\ncode = \"R\"\nkind = \"FEV1_FVC\"\ncondition = \"ATPS\"\n",
                     13, "codes[1].condition", "profile.bad-condition");
}

TEST(ProfileLoader, BadTimeZoneForm) {
    std::string text = kBase;
    text.replace(text.find("Europe/Oslo"), 11, "+01:00");
    expect_one_error(text, 3, "time_zone", "profile.bad-time-zone");
}

TEST(ProfileLoader, TimeZoneForms) {
    using pftgw::profile::is_time_zone_form;
    EXPECT_TRUE(is_time_zone_form("UTC"));
    EXPECT_TRUE(is_time_zone_form("Europe/Oslo"));
    EXPECT_TRUE(is_time_zone_form("America/Argentina/Buenos_Aires"));
    EXPECT_TRUE(is_time_zone_form("Etc/GMT+1"));
    EXPECT_FALSE(is_time_zone_form(""));
    EXPECT_FALSE(is_time_zone_form("Europe/"));
    EXPECT_FALSE(is_time_zone_form("/Oslo"));
    EXPECT_FALSE(is_time_zone_form("Europe/Oslo City"));
    EXPECT_FALSE(is_time_zone_form("../etc/passwd"));
}

TEST(ProfileLoader, DecimalSeparatorOtherThanPointOrComma) {
    std::string text = kBase;
    text.replace(text.find("\",\""), 3, "\";\"");
    expect_one_error(text, 4, "decimal_separator", "profile.bad-decimal-separator");
}

TEST(ProfileLoader, UnknownCharset) {
    std::string text = kBase;
    text.replace(text.find("ISO-8859-1"), 10, "EBCDIC");
    expect_one_error(text, 5, "charset", "profile.bad-charset");
}

TEST(ProfileLoader, WrongType) {
    expect_one_error(kBase + "override_sent = \"yes\"\n", 10, "codes[0].override_sent",
                     "profile.wrong-type");
}

TEST(ProfileLoader, MissingRequiredKeyNamesTheTableLine) {
    expect_one_error(kBase + "[[codes]]\ncode = \"X\"\n", 10, "codes[1].kind",
                     "profile.missing-key");
}

TEST(ProfileLoader, DuplicateCode) {
    expect_one_error(kBase + "[[codes]]\ncode = \"F1\"\nkind = \"FVC\"\n", 11, "codes[1].code",
                     "profile.duplicate-code");
}

TEST(ProfileLoader, UnitAliasToUnknownUnit) {
    expect_one_error(kBase + "[units]\n\"mmHg\" = \"mmHg\"\n", 11, "units.\"mmHg\"",
                     "profile.unit-unknown");
}

TEST(ProfileLoader, CommentValueNamesAnUnmappedCode) {
    expect_one_error(kBase + "[[comment_values]]\ntag = \"AMB\"\ncode = \"TX\"\n", 12,
                     "comment_values[0].code", "profile.unknown-code");
}

TEST(ProfileLoader, BadDatetimeFormat) {
    expect_one_error("datetime_format = \"%d.%m.%y\"\n" + kBase, 1, "datetime_format",
                     "profile.bad-datetime-format");
}

TEST(ProfileLoader, CsvColumnUnitMismatch) {
    expect_one_error(
        kBase + "[csv]\n[[csv.columns]]\ncolumn = \"PEF\"\ntarget = \"PEF\"\nunit = \"L\"\n", 14,
        "csv.columns[0].unit", "profile.unit-mismatch");
}

TEST(ProfileLoader, SeveralErrorsAreAllReported) {
    const ProfileOutcome out =
        parse_profile(kBase + "colour = 1\n[[codes]]\ncode = \"X\"\nkind = \"NOPE\"\n", "dev.toml");
    ASSERT_EQ(out.errors.size(), 2u);
    EXPECT_EQ(out.errors[0].line, 10);
    EXPECT_EQ(out.errors[1].line, 13);
}

TEST(ProfileLoader, TomlSyntaxErrorNamesTheLine) {
    // TOML v1.0.0: "Defining a key multiple times is invalid."
    const ProfileOutcome out = parse_profile(kBase + "code = \"F9\"\n", "dev.toml");
    ASSERT_EQ(out.errors.size(), 1u);
    EXPECT_EQ(out.errors[0].rule, "profile.syntax");
    EXPECT_EQ(out.errors[0].line, 10);
}

TEST(ProfileLoader, UnreadableFile) {
    const ProfileOutcome out = pftgw::profile::load_profile_file("/nonexistent/dev.toml");
    ASSERT_EQ(out.errors.size(), 1u);
    EXPECT_EQ(out.errors[0].rule, "profile.unreadable");
}

TEST(ProfileLoader, SampleProfilesLoad) {
    for (const char* name : {"aldercrest-flowquill-3.toml", "quillon-plethora-b2.toml"}) {
        const std::string path = std::string(PFTGW_SOURCE_DIR) + "/samples/profiles/" + name;
        const ProfileOutcome out = pftgw::profile::load_profile_file(path);
        ASSERT_TRUE(out.ok()) << out.errors[0].to_string();
        EXPECT_FALSE(out.profile->codes.empty()) << name;
        EXPECT_FALSE(out.profile->device.id.empty()) << name;
    }
    const auto spx3 = pftgw::profile::load_profile_file(
        std::string(PFTGW_SOURCE_DIR) + "/samples/profiles/aldercrest-flowquill-3.toml");
    ASSERT_TRUE(spx3.ok());
    ASSERT_EQ(spx3.profile->comment_values.size(), 3u);
    EXPECT_EQ(spx3.profile->comment_values[1].component, 4);
    ASSERT_NE(spx3.profile->ucum_for("mmHg"), nullptr);
    EXPECT_EQ(*spx3.profile->ucum_for("mmHg"), "mm[Hg]");
}

TEST(ProfileLoader, DocumentationListsEveryKey) {
    std::ifstream in(std::string(PFTGW_SOURCE_DIR) + "/schemas/device-profile.md");
    ASSERT_TRUE(in);
    std::stringstream doc;
    doc << in.rdbuf();
    for (const auto& k : pftgw::profile::profile_keys())
        EXPECT_NE(doc.str().find("`" + std::string(k.key) + "`"), std::string::npos)
            << "schemas/device-profile.md does not document " << k.table << "." << k.key;
}

}  // namespace
