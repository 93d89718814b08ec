// Writes the example Bundles (JSON and XML) that tests/conformance/fhir_check.mjs
// and ucum_check.mjs read, into $PFTGW_FHIR_DUMP_DIR when it is set. Until
// `pftgw convert --to fhir-json|fhir-xml --out DIR` runs in CI on the samples,
// this is how the outside-reference checks get their input; the CLI-based run
// replaces it there. Without the variable the test still parses every variant.
#include <gtest/gtest.h>

#include <cstdlib>
#include <ctime>
#include <fstream>
#include <nlohmann/json.hpp>
#include <pugixml.hpp>
#include <string>
#include <utility>
#include <vector>

#include "adapters/fhir/bundle_writer.hpp"
#include "gateway/core/normalize.hpp"
#include "gateway/core/quantity_table.hpp"
#include "tests/support/examples.hpp"

namespace pftgw::fhir {
namespace {

std::vector<std::pair<std::string, NeutralResult>> variants() {
    std::vector<std::pair<std::string, NeutralResult>> out;
    out.emplace_back("example", testing::example_normalized_result());

    auto revised = testing::example_normalized_result();
    revised.revision = 2;
    revised.status = ResultStatus::corrected;
    revised.tests[0].values[0].value = 2.63;
    out.emplace_back("revision2", std::move(revised));

    auto absent = testing::example_normalized_result(2);
    Quantity& pef = absent.tests[0].values[3];
    pef.value.reset();
    pef.absent_reason = "not-measured";
    absent.tests[0].values[0].value = 1.95;  // below its LLN: interpretation L
    out.emplace_back("absent-value", std::move(absent));

    out.emplace_back("traditional", render_units(testing::example_normalized_result(3),
                                                 UnitSystem::traditional, quantity_table()));
    return out;
}

TEST(FhirDump, EveryVariantParsesAndIsWrittenWhenAsked) {
    const char* dir = std::getenv("PFTGW_FHIR_DUMP_DIR");
    const BundleOptions options;
    for (const auto& [name, result] : variants()) {
        std::string json_text, xml_text;
        write_bundle_json(result, options, quantity_table(), json_text);
        write_bundle_xml(result, options, quantity_table(), xml_text);
        const auto parsed = nlohmann::json::parse(json_text, nullptr, false);
        ASSERT_FALSE(parsed.is_discarded()) << name;
        EXPECT_EQ(parsed["type"], "transaction") << name;
        pugi::xml_document doc;
        ASSERT_TRUE(doc.load_string(xml_text.c_str())) << name;
        EXPECT_EQ(std::distance(doc.document_element().children("entry").begin(),
                                doc.document_element().children("entry").end()),
                  static_cast<std::ptrdiff_t>(parsed["entry"].size()))
            << name;
        if (dir == nullptr) continue;
        const std::string base = std::string(dir) + "/" + name;
        std::ofstream(base + ".json", std::ios::binary) << json_text;
        std::ofstream(base + ".xml", std::ios::binary) << xml_text;
        std::ifstream check(base + ".json", std::ios::binary);
        EXPECT_TRUE(check.good()) << "could not write " << base << ".json";
    }
}

double thread_cpu_seconds() {
    timespec t{};
    clock_gettime(CLOCK_THREAD_CPUTIME_ID, &t);
    return static_cast<double>(t.tv_sec) + static_cast<double>(t.tv_nsec) * 1e-9;
}

// Throughput smoke check of the streamed JSON (the project's target is
// >= 10,000 results/s per core for 25 quantities; tests/bench measures it
// properly). Thread CPU time, not wall time: the target is per core, and other
// processes on a shared machine must not count. Loose bound all the same.
TEST(FhirDump, JsonWriterIsFastEnoughForTheTarget) {
    const auto result = testing::example_normalized_result();
    const BundleOptions options;
    constexpr int kRounds = 2000;
    constexpr double kMinimumPerSecond = 2500;  // a quarter of the target
    std::string out;
    std::size_t bytes = 0;
    const double start = thread_cpu_seconds();
    for (int i = 0; i < kRounds; ++i) {
        out.clear();
        write_bundle_json(result, options, quantity_table(), out);
        bytes += out.size();
    }
    const double per_second = kRounds / (thread_cpu_seconds() - start);
    std::printf("fhir json: %.0f results/s, %zu bytes each\n", per_second, bytes / kRounds);
    EXPECT_GT(per_second, kMinimumPerSecond);
}

}  // namespace
}  // namespace pftgw::fhir
