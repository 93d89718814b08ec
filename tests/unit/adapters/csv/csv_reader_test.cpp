// CSV archive reader: separators, quoting (RFC 4180), encodings, decimal
// commas, truncated rows, streaming, one row per value.
#include "adapters/csv/csv_reader.hpp"

#include <gtest/gtest.h>

namespace pftgw::csv {
namespace {

DeviceProfile session_profile(char sep = ',', char decimal = '.') {
    DeviceProfile p;
    p.name = "test-archive";
    p.code_system = "Test archive";
    p.patient_identifier_system = "https://lab.example/mrn";
    p.decimal_separator = decimal;
    p.device.id = "SPX9";
    CsvLayout l;
    l.separator = sep;
    l.columns = {{"mrn", "subject.identifier", "", std::nullopt},
                 {"name", "subject.family_name", "", std::nullopt},
                 {"sex", "subject.sex_at_birth", "", std::nullopt},
                 {"when", "session_time", "", std::nullopt},
                 {"session", "device_session_number", "", std::nullopt},
                 {"fev1_ml", "FEV1", "mL", GasCondition::btps},
                 {"fvc", "FVC", "L", GasCondition::btps},
                 {"fev1_pred", "FEV1.pred", "L", std::nullopt},
                 {"note", "test.comment", "", std::nullopt}};
    p.csv = l;
    return p;
}

std::vector<CsvRecord> read_all(const DeviceProfile& p, std::string_view bytes,
                                std::size_t chunk = 0) {
    std::vector<CsvRecord> out;
    CsvReader r(p, nullptr, "a.csv");
    const Emit emit = [&](CsvRecord&& rec) { out.push_back(std::move(rec)); };
    if (chunk == 0) {
        r.feed(bytes, emit);
    } else {
        for (std::size_t i = 0; i < bytes.size(); i += chunk) r.feed(bytes.substr(i, chunk), emit);
    }
    r.finish(emit);
    return out;
}

const char* kHeader = "mrn,name,sex,when,session,fev1_ml,fvc,fev1_pred,note\n";

TEST(CsvReader, OneRowPerSession) {
    const std::string csv = std::string(kHeader) +
                            "H1,Arden,F,2019-05-02T10:00:00+02:00,0001,2810,3.55,2.95,fine\n"
                            "H2,Brook,M,2019-05-02T11:00:00+02:00,0002,3300,4.10,3.40,\n";
    auto recs = read_all(session_profile(), csv);
    ASSERT_EQ(recs.size(), 2u);
    const NeutralResult& r = *recs[0].result;
    EXPECT_EQ(recs[0].source, "a.csv:2");
    EXPECT_EQ(r.subject.identifiers.at(0).value, "H1");
    EXPECT_EQ(r.subject.identifiers.at(0).system, "https://lab.example/mrn");
    EXPECT_EQ(r.subject.sex_at_birth, SexAtBirth::female);
    EXPECT_EQ(r.device_session_number, "0001");
    const Quantity* fev1 = r.tests.at(0).find("FEV1");
    ASSERT_NE(fev1, nullptr);
    EXPECT_EQ(*fev1->value, 2810);
    EXPECT_EQ(fev1->unit, "mL");  // as sent: normalize() converts
    EXPECT_EQ(fev1->source.value_text, "2810");
    EXPECT_EQ(fev1->source.code, "fev1_ml");
    ASSERT_EQ(fev1->reference.size(), 1u);
    EXPECT_EQ(*fev1->reference[0].predicted, 2.95);
    EXPECT_EQ(fev1->reference[0].unit, "L");
    EXPECT_EQ(r.tests[0].comments.at(0), "fine");
    EXPECT_TRUE(recs[1].result->tests[0].comments.empty());  // an empty cell is not a value
}

TEST(CsvReader, SemicolonsAndDecimalCommas) {
    // Common practice in locales that write 2,81: ';' separates the fields.
    const std::string csv =
        "mrn;name;sex;when;session;fev1_ml;fvc;fev1_pred;note\n"
        "H1;Arden;F;2019-05-02T10:00:00+02:00;1;2810;3,55;2,95;x\n";
    auto recs = read_all(session_profile(';', ','), csv);
    ASSERT_EQ(recs.size(), 1u);
    EXPECT_DOUBLE_EQ(*recs[0].result->tests[0].find("FVC")->value, 3.55);
    EXPECT_EQ(recs[0].result->tests[0].find("FVC")->source.value_text, "3,55");  // kept exactly
}

TEST(CsvReader, QuotedFieldsWithSeparatorsQuotesAndNewlines) {
    // RFC 4180: a quoted field may hold the separator, a doubled quote and a line break.
    const std::string csv = std::string(kHeader) +
                            "H1,\"Arden, Jr.\",F,2019-05-02T10:00:00+02:00,1,2810,3.55,2.95,\"said "
                            "\"\"ok\"\"\nthen left\"\n"
                            "H2,Brook,M,2019-05-02T11:00:00+02:00,2,3300,4.10,3.40,\n";
    auto recs = read_all(session_profile(), csv);
    ASSERT_EQ(recs.size(), 2u);
    EXPECT_EQ(recs[0].result->subject.family_name, "Arden, Jr.");
    EXPECT_EQ(recs[0].result->tests[0].comments.at(0), "said \"ok\"\nthen left");
    EXPECT_EQ(recs[1].source, "a.csv:4");  // line numbers count the line inside the quotes
}

TEST(CsvReader, Latin1NamesBecomeUtf8) {
    // ISO-8859-1 0xF8 is U+00F8 (o with stroke), UTF-8 C3 B8 (Unicode code charts).
    DeviceProfile p = session_profile();
    p.charset = "ISO-8859-1";
    const std::string csv =
        std::string(kHeader) + "H1,Bj\xF8rk,F,2019-05-02T10:00:00+02:00,1,2810,3.55,,\n";
    auto recs = read_all(p, csv);
    ASSERT_EQ(recs.size(), 1u);
    EXPECT_EQ(recs[0].result->subject.family_name, "Bj\xC3\xB8rk");
}

TEST(CsvReader, TruncatedLastLineGivesAFindingNotHalfAResult) {
    const std::string cut_in_quotes =
        std::string(kHeader) + "H1,Arden,F,2019-05-02T10:00:00+02:00,1,2810,3.55,2.95,\"unfinished";
    auto recs = read_all(session_profile(), cut_in_quotes);
    ASSERT_EQ(recs.size(), 1u);
    EXPECT_FALSE(recs[0].result.has_value());
    EXPECT_EQ(recs[0].findings.at(0).rule, "csv.truncated");

    const std::string short_row =
        std::string(kHeader) + "H1,Arden,F,2019-05-02T10:00:00+02:00,1,28";
    recs = read_all(session_profile(), short_row);
    ASSERT_EQ(recs.size(), 1u);
    EXPECT_FALSE(recs[0].result.has_value());
    EXPECT_EQ(recs[0].findings.at(0).rule, "csv.short-row");
}

TEST(CsvReader, CrlfAndNoFinalNewline) {
    const std::string csv =
        "mrn,name,sex,when,session,fev1_ml,fvc,fev1_pred,note\r\n"
        "H1,Arden,F,2019-05-02T10:00:00+02:00,1,2810,3.55,2.95,end\r\n"
        "H2,Brook,M,2019-05-02T11:00:00+02:00,2,3300,4.10,3.40,last";
    auto recs = read_all(session_profile(), csv);
    ASSERT_EQ(recs.size(), 2u);
    EXPECT_EQ(recs[0].result->tests[0].comments.at(0), "end");
    EXPECT_EQ(recs[1].result->tests[0].comments.at(0), "last");
}

TEST(CsvReader, ByteAtATimeGivesTheSameResults) {
    const std::string csv =
        std::string(kHeader) +
        "H1,\"Arden, Jr.\",F,2019-05-02T10:00:00+02:00,1,2810,3.55,2.95,\"a \"\"b\"\"\"\r\n"
        "H2,Brook,M,2019-05-02T11:00:00+02:00,2,3300,4.10,3.40,\n";
    auto whole = read_all(session_profile(), csv);
    auto bytes = read_all(session_profile(), csv, 1);
    auto sevens = read_all(session_profile(), csv, 7);
    ASSERT_EQ(whole.size(), 2u);
    ASSERT_EQ(bytes.size(), 2u);
    ASSERT_EQ(sevens.size(), 2u);
    for (std::size_t i = 0; i < 2; ++i) {
        EXPECT_EQ(*whole[i].result, *bytes[i].result);
        EXPECT_EQ(*whole[i].result, *sevens[i].result);
    }
}

TEST(CsvReader, LocalTimesNeedAZone) {
    DeviceProfile p = session_profile();
    p.datetime_format = "%d.%m.%Y %H:%M";
    const std::string csv = std::string(kHeader) + "H1,Arden,F,02.05.2019 10:00,1,2810,3.55,,\n";
    auto recs = read_all(p, csv);  // no resolver: never guessed
    ASSERT_EQ(recs.size(), 1u);
    EXPECT_EQ(recs[0].findings.at(0).rule, "time.no-offset");

    p.time_zone = "Europe/Oslo";
    std::vector<CsvRecord> out;
    CsvReader r(
        p, [](const std::string&, const LocalDateTime&) -> std::optional<int> { return 120; },
        "a.csv");
    r.feed(csv, [&](CsvRecord&& rec) { out.push_back(std::move(rec)); });
    r.finish([&](CsvRecord&& rec) { out.push_back(std::move(rec)); });
    ASSERT_EQ(out.size(), 1u);
    ASSERT_TRUE(out[0].result->session_time.has_value());
    EXPECT_EQ(to_iso(*out[0].result->session_time), "2019-05-02T10:00:00+02:00");
}

TEST(CsvReader, OneRowPerValueGroupsRowsIntoSessions) {
    DeviceProfile p;
    p.name = "test-values";
    p.patient_identifier_system = "https://lab.example/mrn";
    p.codes = {{"F1", "FEV1", std::nullopt, "L", GasCondition::btps, false, false},
               {"FV", "FVC", std::nullopt, "L", GasCondition::btps, false, false}};
    CsvLayout l;
    l.shape = CsvLayout::Shape::row_per_value;
    l.session_column = "session";
    l.code_column = "code";
    l.value_column = "value";
    l.unit_column = "unit";
    l.columns = {{"mrn", "subject.identifier", "", std::nullopt},
                 {"when", "session_time", "", std::nullopt},
                 {"session", "device_session_number", "", std::nullopt}};
    p.csv = l;
    const std::string csv =
        "session,mrn,when,code,value,unit\n"
        "7,H1,2019-05-02T10:00:00+02:00,F1,2.81,\n"
        "7,H1,2019-05-02T10:00:00+02:00,FV,3550,mL\n"
        "7,H1,2019-05-02T10:00:00+02:00,ZZ,1.0,\n"
        "8,H2,2019-05-02T11:00:00+02:00,F1,3.30,L\n";
    auto recs = read_all(p, csv);
    ASSERT_EQ(recs.size(), 2u);
    const NeutralResult& a = *recs[0].result;
    EXPECT_EQ(a.device_session_number, "7");
    EXPECT_EQ(a.tests.at(0).find("FEV1")->unit, "L");  // from the profile: none was sent
    EXPECT_EQ(a.tests.at(0).find("FVC")->unit, "mL");  // as sent
    ASSERT_EQ(recs[0].findings.size(), 1u);
    EXPECT_EQ(recs[0].findings[0].rule, "profile.unmapped-code");  // kept, not dropped
    EXPECT_EQ(recs[0].findings[0].values.at(0).second, "ZZ");
    EXPECT_EQ(recs[1].result->device_session_number, "8");
}

}  // namespace
}  // namespace pftgw::csv
