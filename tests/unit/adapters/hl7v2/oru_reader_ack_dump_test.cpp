// Input for tests/conformance/hl7_ack_check.py (python3-hl7 0.4.5 create_ack):
// reads each tests/conformance/hl7_ack_inputs/*.hl7 with the test profile,
// normalizes, and writes the project's ACK of message n of <name>.hl7 to
// $PFTGW_HL7_ACK_DIR/<name>.<n>.ack. Stands in until the CLI has an ACK
// command. Without the variable it checks the same ACKs here: the expected
// MSA-1 per input (AA, AE, AR as the inputs were written to give) and MSA-2
// equal to each message's MSH-10.
#include <gtest/gtest.h>

#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <map>
#include <sstream>
#include <string>
#include <vector>

#include "adapters/hl7v2/ack_writer.hpp"
#include "gateway/core/normalize.hpp"
#include "hl7_split.hpp"
#include "oru_reader_support.hpp"

namespace pftgw::hl7v2 {
namespace {

namespace fs = std::filesystem;

struct Ack {
    std::string name;  // <input>.<n>
    std::string control_id;
    std::string bytes;
};

std::vector<Ack> acks() {
    std::vector<Ack> out;
    const fs::path dir = fs::path(PFTGW_SOURCE_DIR) / "tests/conformance/hl7_ack_inputs";
    std::vector<fs::path> files;
    for (const auto& e : fs::directory_iterator(dir))
        if (e.path().extension() == ".hl7") files.push_back(e.path());
    std::sort(files.begin(), files.end());
    const auto profile = testing::spiroline_profile();
    for (const auto& path : files) {
        std::ifstream in(path, std::ios::binary);
        std::stringstream ss;
        ss << in.rdbuf();
        const auto read = testing::read(ss.str(), profile);
        int n = 0;
        for (const auto& m : read.messages) {
            std::vector<Finding> later;
            if (m.result) {
                NeutralResult r = *m.result;
                later = normalize(r, quantity_table());
            }
            AckOptions o;
            o.message_time = Timestamp{{2026, 3, 2}, 10, 0, 0, 0, 60};
            out.push_back({path.stem().string() + "." + std::to_string(++n), m.control_id,
                           acknowledge(m, later, o)});
        }
    }
    return out;
}

TEST(OruReaderAckDump, AcksOfTheConformanceInputs) {
    // What each invented input was written to provoke (see its content).
    const std::map<std::string, std::string> expected = {
        {"accept_23_lf.1", "AA"}, {"accept_251.1", "AA"},       {"batch_two.1", "AA"},
        {"batch_two.2", "AE"},    {"error_text_in_nm.1", "AE"}, {"odd_delimiters.1", "AA"},
        {"reject_adt.1", "AR"}};
    const auto all = acks();
    ASSERT_EQ(all.size(), expected.size());
    for (const auto& a : all) {
        ASSERT_TRUE(expected.count(a.name)) << a.name;
        if (a.name.rfind("odd_delimiters", 0) == 0) {
            EXPECT_NE(a.bytes.find("\rMSA#AA#" + a.control_id + "\r"), std::string::npos);
            continue;
        }
        const auto segs = testing::parse_message(a.bytes);
        ASSERT_GE(segs.size(), 2u) << a.name;
        EXPECT_EQ(segs[1].field(1), expected.at(a.name)) << a.name;
        EXPECT_EQ(segs[1].field(2), a.control_id) << a.name;
    }
}

TEST(OruReaderAckDump, WritesAcksWhenAsked) {
    const char* dir = std::getenv("PFTGW_HL7_ACK_DIR");
    const auto all = acks();
    EXPECT_FALSE(all.empty());
    if (!dir || !*dir) GTEST_SKIP() << "PFTGW_HL7_ACK_DIR not set: no files written";
    for (const auto& a : all) {
        std::ofstream out(fs::path(dir) / (a.name + ".ack"), std::ios::binary);
        out << a.bytes;
        EXPECT_TRUE(out.good()) << a.name;
    }
}

}  // namespace
}  // namespace pftgw::hl7v2
