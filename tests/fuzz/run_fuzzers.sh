#!/usr/bin/env bash
# Runs the libFuzzer targets of the `fuzz` preset (build/fuzz) for a bounded time each, starting from
# a copy of its committed corpus tests/fuzz/corpus/<target>/, so a run never changes the repository.
# A crash, a sanitizer report, a leak or a broken invariant stops that target and fails the script;
# the input that did it is written to the output directory as <target>-crash-<hash> (or -leak-,
# -timeout-, -oom-), and the commands to reproduce it are printed.
#
#   tests/fuzz/run_fuzzers.sh [--seconds N] [--out DIR] [TARGET...]
#
# --seconds: per target (default 60); --out: where the working corpora and crash inputs go (default
# a new temporary directory, removed after a clean run); targets: design_binary design_text tell.
set -euo pipefail
cd "$(dirname "$0")/../.."

seconds=60
out=""
targets=()
while [ $# -gt 0 ]; do
  case "$1" in
    --seconds) seconds="$2"; shift 2 ;;
    --out) out="$2"; shift 2 ;;
    -h|--help) sed -n '2,12p' "$0"; exit 0 ;;
    *) targets+=("$1"); shift ;;
  esac
done
if [ ${#targets[@]} -eq 0 ]; then targets=(design_binary design_text tell); fi
keep=1
if [ -z "$out" ]; then
  out="$(mktemp -d /tmp/ogive-fuzz.XXXXXX)"
  keep=0
fi
mkdir -p "$out"

# UBSan findings are errors: stop at the first, with a stack. (ASan's defaults are kept; no false
# container-overflow reports were seen from our code passing std::string to Debian's libprotobuf.)
export UBSAN_OPTIONS="${UBSAN_OPTIONS:-halt_on_error=1:print_stacktrace=1}"

# Per-target flags. The tell target runs a whole program of requests per input and so reaches very
# many coverage features; libFuzzer's entropic schedule then spends most of the time on its own
# bookkeeping (measured: 80% of the run), so it is switched off there.
flags_for() {
  case "$1" in
    tell) echo "-entropic=0" ;;
    *) echo "" ;;
  esac
}

failed=()
for t in "${targets[@]}"; do
  binary="build/fuzz/tests/fuzz/${t}_fuzz"
  if [ ! -x "$binary" ]; then
    echo "run_fuzzers: $binary is missing; build it with: cmake --preset fuzz && cmake --build --preset fuzz -j2" >&2
    exit 2
  fi
  corpus="$out/corpus-$t"
  rm -rf "$corpus"
  cp -r "tests/fuzz/corpus/$t" "$corpus"
  start=$SECONDS
  echo "run_fuzzers: $t for ${seconds}s from $(ls "$corpus" | wc -l) inputs"
  # shellcheck disable=SC2046
  if "$binary" $(flags_for "$t") -max_total_time="$seconds" -timeout=30 -rss_limit_mb=2048 \
      -print_final_stats=1 -artifact_prefix="$out/$t-" "$corpus" > "$out/$t.log" 2>&1; then
    echo "run_fuzzers: $t: no crash in $((SECONDS - start)) s; $(grep -a '^stat::number_of_executed_units' "$out/$t.log" | awk '{print $2}') inputs run, corpus now $(ls "$corpus" | wc -l)"
  else
    echo "run_fuzzers: $t FAILED after $((SECONDS - start)) s; the end of its log ($out/$t.log):"
    grep -av '^#[0-9]' "$out/$t.log" | tail -60
    for artifact in "$out/$t"-*; do
      [ -f "$artifact" ] || continue
      echo "run_fuzzers: input kept as $artifact; reproduce with:"
      echo "    $binary $(flags_for "$t") $artifact"
      echo "    or, without libFuzzer: build/<preset>/tests/fuzz/${t}_replay $artifact"
    done
    failed+=("$t")
    keep=1
  fi
done

if [ ${#failed[@]} -gt 0 ]; then
  echo "run_fuzzers: failed: ${failed[*]} (logs, corpora and inputs in $out)"
  exit 1
fi
if [ "$keep" -eq 0 ]; then rm -rf "$out"; else echo "run_fuzzers: logs and corpora in $out"; fi
