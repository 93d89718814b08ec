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
  return $ok
}

stage "clang-format" format_check
stage "unit and integration tests (ctest)" ctest --test-dir build --output-on-failure -j 2
stage "conformance against outside references" bash tests/conformance/run.sh build/pftgw
stage "benchmark smoke run" bench_smoke

echo
echo "tests: $passed passed, $failed failed"
[ "$failed" -eq 0 ]
