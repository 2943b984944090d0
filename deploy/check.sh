#!/usr/bin/env bash
# Builds ogive and runs every test: the README's test command, and what CI runs.
#   1. installs missing Debian packages (deploy/install-deps.sh; headless Chromium too, for the
#      report's rendering test);
#   2. the `ci` preset (optimized, assertions kept, warnings are errors): build and ctest;
#   3. the `asan` preset: the same tests under AddressSanitizer and UndefinedBehaviorSanitizer;
#   4. the `tsan` preset (clang++): the whole tree built with -Wthread-safety (clang's check of the
#      ABSL_GUARDED_BY annotations; a finding is an error), and the concurrent tests (storage,
#      service, client, the process tests of ogived and ogive work) run under ThreadSanitizer;
#   5. the `fuzz` preset (clang++ and libFuzzer): each fuzz target for OGIVE_FUZZ_SECONDS (default
#      60) from a copy of its committed corpus (tests/fuzz/run_fuzzers.sh).
# Any failure, sanitizer report or fuzzer crash fails the whole check. Each step prints its time.
set -euo pipefail
cd "$(dirname "$0")/.."

jobs="$(nproc)"
fuzz_seconds="${OGIVE_FUZZ_SECONDS:-60}"
check_start=$SECONDS
timings=()

step() {
  local name="$1"
  shift
  local start=$SECONDS
  echo "==== check: $name"
  "$@"
  timings+=("$(printf '%-22s %5d s' "$name" $((SECONDS - start)))")
  echo "==== check: $name took $((SECONDS - start)) s"
}

# Every test runs under the sanitizers, the benchmarks' short smoke runs and the process, interop
# and fuzz-corpus tests included (at -O1 they take about two minutes in all). A UBSan finding is an
# error, reported with its stack.
asan_tests() {
  UBSAN_OPTIONS=halt_on_error=1:print_stacktrace=1 \
    LSAN_OPTIONS="suppressions=$PWD/deploy/lsan-suppressions.txt" \
    ctest --preset asan -j "$jobs" --timeout 1200
}

step install-deps bash deploy/install-deps.sh --report-tests
step "ci configure" cmake --preset ci
step "ci build" cmake --build --preset ci -j "$jobs"
step "ci tests" ctest --preset ci -j "$jobs" --timeout 1200
step "asan configure" cmake --preset asan
step "asan build" cmake --build --preset asan -j "$jobs"
step "asan tests" asan_tests
step "tsan configure" cmake --preset tsan
step "tsan build" cmake --build --preset tsan -j "$jobs"
step "tsan tests" ctest --preset tsan -j "$jobs" --timeout 1200
step "fuzz configure" cmake --preset fuzz
step "fuzz build" cmake --build --preset fuzz -j "$jobs"
step "fuzz run" bash tests/fuzz/run_fuzzers.sh --seconds "$fuzz_seconds"

echo "==== check: all passed in $((SECONDS - check_start)) s"
printf '  %s\n' "${timings[@]}"
