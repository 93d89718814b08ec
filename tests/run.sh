#!/usr/bin/env bash
# Installs what is missing, builds (Release, build/), and runs every test:
# the clang-format check, the unit and integration tests (ctest), the
# outside-reference conformance checks, and the benchmarks as a small smoke run.
set -uo pipefail
here=$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)
cd "$here"

bash deploy/install-deps.sh || { echo "tests: install-deps failed"; exit 1; }
bash deploy/build.sh || { echo "tests: build failed"; exit 1; }

passed=0
failed=0
stage() {
  local name=$1; shift
  echo
  echo "==== $name"
  if "$@"; then passed=$((passed + 1)); else failed=$((failed + 1)); echo "!!!! $name FAILED"; fi
}

format_check() {
  git ls-files -z -- '*.cpp' '*.hpp' | xargs -0 clang-format --dry-run --Werror
}

bench_smoke() {
  local ok=0
  for b in build/tests/bench/*_bench; do
    [ -x "$b" ] || continue
    echo "-- $b (smoke run; figures: tests/bench/README.md)"
    PFTGW_BENCH_SMOKE=1 "$b" --benchmark_min_time=0.01 || ok=1
  done
  echo "-- tests/bench/archive_bench.py (smoke run: small sizes)"
  python3 tests/bench/archive_bench.py build/pftgw --messages 500 --csv-rows 500 5000 --repeat 1 || ok=1
  return $ok
}

# Fuzz targets (libFuzzer needs clang): each runs for a bounded time on a
# scratch copy of its seed corpus in tests/fuzz/corpus/<name>/.
fuzz() {
  local secs=${PFTGW_FUZZ_SECONDS:-30}
  CXX=clang++ cmake -S tests/fuzz -B build/fuzz -G Ninja -DCMAKE_BUILD_TYPE=RelWithDebInfo > /dev/null || return 1
  cmake --build build/fuzz -j "$(nproc)" || return 1
  local rc=0 n=0
  for f in build/fuzz/*_fuzz; do
    [ -x "$f" ] || continue
    local name corpus scratch
    name=$(basename "$f" _fuzz)
    corpus=tests/fuzz/corpus/$name
    scratch=$(mktemp -d)
    [ -d "$corpus" ] && cp -r "$corpus"/. "$scratch"/
    echo "-- $name: ${secs} s"
    if "$f" -max_total_time="$secs" -print_final_stats=1 "$scratch" > "build/fuzz/$name.log" 2>&1; then
      grep -E 'stat::number_of_executed_units' "build/fuzz/$name.log" || true
    else
      echo "fuzz target $name failed; see build/fuzz/$name.log"; tail -n 30 "build/fuzz/$name.log"; rc=1
    fi
    rm -rf "$scratch"
    n=$((n + 1))
  done
  [ "$n" -gt 0 ] || { echo "no fuzz targets were built"; return 1; }
  return $rc
}

stage "clang-format" format_check
stage "unit and integration tests (ctest)" ctest --test-dir build --output-on-failure -j 2
stage "conformance against outside references" bash tests/conformance/run.sh build/pftgw
stage "fuzz targets (bounded time)" fuzz
stage "benchmark smoke run" bench_smoke

echo
echo "tests: $passed passed, $failed failed"
[ "$failed" -eq 0 ]
