// Throughput of the conversion core, one core: neutral XML -> HL7 ORU^R01 and
// neutral XML -> FHIR JSON Bundle, each result read, normalized, validated,
// rendered and written to a memory sink (DECISIONS.md: measure the program,
// not the disk). Results are processed one at a time; peak RSS is printed.
// Targets (issue 2): >= 30,000 results/s (HL7) and >= 10,000 results/s (FHIR JSON).
#include <benchmark/benchmark.h>
#include <sys/resource.h>

#include <cstdio>
#include <cstdlib>
#include <string>
#include <vector>

#include "adapters/fhir/bundle_writer.hpp"
#include "adapters/hl7v2/oru_writer.hpp"
#include "adapters/neutral/neutral_io.hpp"
#include "gateway/core/normalize.hpp"
#include "gateway/core/prepare.hpp"
#include "gateway/core/quantity_table.hpp"
#include "gateway/core/validate.hpp"
#include "tests/support/examples.hpp"

namespace {

using namespace pftgw;

// A ring of distinct documents, so caches see varied input without holding
// the whole batch in memory.
constexpr int kDistinctDocuments = 64;

const std::vector<std::string>& documents() {
    static const std::vector<std::string> docs = [] {
        std::vector<std::string> out;
        for (int i = 0; i < kDistinctDocuments; ++i) {
            std::string xml;
            neutral::write_xml(testing::example_normalized_result(i), xml);
            out.push_back(std::move(xml));
        }
        return out;
    }();
    return docs;
}

long peak_rss_kib() {
    rusage u{};
    getrusage(RUSAGE_SELF, &u);
    return u.ru_maxrss;
}

template <class Write>
void convert_batch(benchmark::State& state, Target target, Write write) {
    const auto& docs = documents();
    const auto& table = quantity_table();
    const long results = state.range(0);
    std::string sink;
    std::size_t bytes = 0;
    for (auto _ : state) {
        for (long i = 0; i < results; ++i) {
            const auto& doc = docs[static_cast<std::size_t>(i % kDistinctDocuments)];
            auto read = neutral::read_xml(doc, "bench");
            if (!read.result) {
                state.SkipWithError("a benchmark document did not read");
                return;
            }
            NeutralResult& r = *read.result;
            PrepareOptions options;
            options.targets = {target};
            prepare_result(r, options, table);
            const NeutralResult rendered = render_units(r, UnitSystem::si, table);
            sink.clear();
            write(rendered, table, sink);
            bytes += sink.size();
            benchmark::DoNotOptimize(sink.data());
        }
    }
    state.SetItemsProcessed(state.iterations() * results);
    state.counters["results_per_s"] = benchmark::Counter(
        static_cast<double>(state.iterations() * results), benchmark::Counter::kIsRate);
    state.counters["bytes_per_result"] =
        static_cast<double>(bytes) / static_cast<double>(state.iterations() * results);
    state.counters["peak_rss_MiB"] = static_cast<double>(peak_rss_kib()) / 1024.0;
}

long batch_size() {
    return std::getenv("PFTGW_BENCH_SMOKE") ? 200 : 10000;
}

void BM_NeutralXmlToHl7(benchmark::State& state) {
    hl7v2::OruOptions options;
    convert_batch(state, Target::hl7v2,
                  [&](const NeutralResult& r, const QuantityTable& t, std::string& out) {
                      hl7v2::write_oru_r01(r, options, t, out);
                  });
}

void BM_NeutralXmlToFhirJson(benchmark::State& state) {
    fhir::BundleOptions options;
    convert_batch(state, Target::fhir,
                  [&](const NeutralResult& r, const QuantityTable& t, std::string& out) {
                      fhir::write_bundle_json(r, options, t, out);
                  });
}

// Each stage alone, to say what limits the figure.
void BM_ReadXmlOnly(benchmark::State& state) {
    const auto& docs = documents();
    long i = 0;
    for (auto _ : state) {
        auto read =
            neutral::read_xml(docs[static_cast<std::size_t>(i++ % kDistinctDocuments)], "bench");
        benchmark::DoNotOptimize(read.result);
    }
    state.counters["results_per_s"] =
        benchmark::Counter(static_cast<double>(state.iterations()), benchmark::Counter::kIsRate);
}

void BM_PrepareAndRender(benchmark::State& state) {
    const auto& table = quantity_table();
    const NeutralResult base = *neutral::read_xml(documents()[0], "bench").result;
    PrepareOptions options;
    options.targets = {Target::fhir};
    for (auto _ : state) {
        NeutralResult r = base;
        const bool ok = prepare_result(r, options, table);
        auto rendered = render_units(r, UnitSystem::si, table);
        benchmark::DoNotOptimize(rendered);
        benchmark::DoNotOptimize(ok);
    }
    state.counters["results_per_s"] =
        benchmark::Counter(static_cast<double>(state.iterations()), benchmark::Counter::kIsRate);
}

void BM_WriteHl7Only(benchmark::State& state) {
    const auto& table = quantity_table();
    NeutralResult r = *neutral::read_xml(documents()[0], "bench").result;
    normalize(r, table);
    hl7v2::OruOptions options;
    std::string out;
    for (auto _ : state) {
        out.clear();
        hl7v2::write_oru_r01(r, options, table, out);
        benchmark::DoNotOptimize(out.data());
    }
    state.counters["results_per_s"] =
        benchmark::Counter(static_cast<double>(state.iterations()), benchmark::Counter::kIsRate);
}

void BM_WriteFhirJsonOnly(benchmark::State& state) {
    const auto& table = quantity_table();
    NeutralResult r = *neutral::read_xml(documents()[0], "bench").result;
    normalize(r, table);
    fhir::BundleOptions options;
    std::string out;
    for (auto _ : state) {
        out.clear();
        fhir::write_bundle_json(r, options, table, out);
        benchmark::DoNotOptimize(out.data());
    }
    state.counters["results_per_s"] =
        benchmark::Counter(static_cast<double>(state.iterations()), benchmark::Counter::kIsRate);
}

}  // namespace

BENCHMARK(BM_NeutralXmlToHl7)->Arg(batch_size())->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(BM_NeutralXmlToFhirJson)->Arg(batch_size())->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(BM_ReadXmlOnly);
BENCHMARK(BM_PrepareAndRender);
BENCHMARK(BM_WriteHl7Only);
BENCHMARK(BM_WriteFhirJsonOnly);

BENCHMARK_MAIN();
