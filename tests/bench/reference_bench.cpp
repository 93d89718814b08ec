// Throughput of the GLI reference values: 1,000,000 (age, height, sex,
// quantity) tuples per iteration, one core. Target (issue 5): >= 5,000,000
// tuples per second, so reference values never bound a conversion.
// Run: build/tests/bench/reference_bench  (items_per_second is tuples per second)
#include <benchmark/benchmark.h>

#include <cstdint>
#include <random>
#include <vector>

#include "gateway/core/reference/reference_values.hpp"

namespace pftgw {
namespace {

constexpr std::size_t kTuples = 1'000'000;

struct Tuple {
    EquationSet set;
    GliQuantity quantity;
    ReferenceSubject subject;
    double measured;
};

// Every table quantity in turn, with the set that holds it; ages 5-80 y fit every set.
const std::vector<Tuple>& tuples() {
    static const std::vector<Tuple> all = [] {
        struct Pair {
            EquationSet set;
            GliQuantity q;
        };
        const Pair pairs[] = {
            {EquationSet::gli_global_2022, GliQuantity::fev1},
            {EquationSet::gli_global_2022, GliQuantity::fvc},
            {EquationSet::gli_global_2022, GliQuantity::fev1_fvc},
            {EquationSet::gli_2012, GliQuantity::fev1},
            {EquationSet::gli_2012, GliQuantity::fef25_75},
            {EquationSet::gli_2012, GliQuantity::fef75},
            {EquationSet::gli_2017, GliQuantity::tlco_si},
            {EquationSet::gli_2017, GliQuantity::dlco_traditional},
            {EquationSet::gli_2017, GliQuantity::kco_si},
            {EquationSet::gli_2017, GliQuantity::va},
            {EquationSet::gli_2021, GliQuantity::frc},
            {EquationSet::gli_2021, GliQuantity::tlc},
            {EquationSet::gli_2021, GliQuantity::rv},
            {EquationSet::gli_2021, GliQuantity::rv_tlc},
            {EquationSet::gli_2021, GliQuantity::erv},
            {EquationSet::gli_2021, GliQuantity::ic},
            {EquationSet::gli_2021, GliQuantity::vc},
        };
        std::mt19937_64 rng(20260314);  // fixed seed: the same tuples every run
        std::uniform_real_distribution<double> age(5.0, 80.0);
        std::uniform_real_distribution<double> height(140.0, 200.0);
        std::vector<Tuple> out;
        out.reserve(kTuples);
        for (std::size_t i = 0; i < kTuples; ++i) {
            const Pair& p = pairs[i % (sizeof pairs / sizeof pairs[0])];
            Tuple t;
            t.set = p.set;
            t.quantity = p.q;
            t.subject.age_years = age(rng);
            t.subject.height_cm = height(rng);
            t.subject.sex = (rng() & 1) ? SexAtBirth::male : SexAtBirth::female;
            t.subject.group = Gli2012Group::other;
            t.measured = 1.0;
            out.push_back(t);
        }
        return out;
    }();
    return all;
}

// Predicted, LLN and ULN for every tuple (the core computation).
void BM_PredictedLlnUln(benchmark::State& state) {
    const auto& all = tuples();
    if (!gli::gli_tables().ok()) {
        state.SkipWithError("GLI tables did not load");
        return;
    }
    std::size_t failures = 0;
    for (auto _ : state) {
        double sum = 0;
        for (const Tuple& t : all) {
            auto r = gli_reference(t.set, t.quantity, t.subject);
            if (r.ok())
                sum += r->predicted + r->lln + r->uln;
            else
                ++failures;
        }
        benchmark::DoNotOptimize(sum);
    }
    if (failures) state.SkipWithError("some tuples failed");
    state.SetItemsProcessed(static_cast<std::int64_t>(state.iterations() * all.size()));
}
BENCHMARK(BM_PredictedLlnUln)->Unit(benchmark::kMillisecond);

// The same plus z and percent predicted from a measured value.
void BM_WithZAndPercentPredicted(benchmark::State& state) {
    const auto& all = tuples();
    for (auto _ : state) {
        double sum = 0;
        for (const Tuple& t : all) {
            auto r = gli_reference(t.set, t.quantity, t.subject);
            if (!r.ok()) continue;
            sum += r->lln + lms_z_score(r->lms, t.measured) +
                   lms_percent_predicted(r->lms, t.measured);
        }
        benchmark::DoNotOptimize(sum);
    }
    state.SetItemsProcessed(static_cast<std::int64_t>(state.iterations() * all.size()));
}
BENCHMARK(BM_WithZAndPercentPredicted)->Unit(benchmark::kMillisecond);

}  // namespace
}  // namespace pftgw

BENCHMARK_MAIN();
