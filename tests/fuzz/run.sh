#!/usr/bin/env bash
# Runs every fuzz target for SECONDS each (default 30), one after another, and fails on the
# first finding (libFuzzer exits non-zero on a crash, a failed assertion, a leak, a timeout
# or running out of memory). Needs the nightly toolchain and cargo-fuzz
# (`cargo install cargo-fuzz --locked`). Corpora are kept in tests/fuzz/corpus/<target>,
# findings in tests/fuzz/artifacts/<target>. Prints each target's execution count.
#
#   tests/fuzz/run.sh 20        # CI (13 targets: about 4.5 min of fuzzing)
#   tests/fuzz/run.sh 300       # the longer run
set -euo pipefail
secs="${1:-30}"
here="$(cd "$(dirname "$0")" && pwd)"
cd "$here/../.."
cargo +nightly fuzz build --fuzz-dir tests/fuzz
# Every target in Cargo.toml, unless FUZZ_TARGETS names some.
targets="${FUZZ_TARGETS:-$(cargo +nightly fuzz list --fuzz-dir tests/fuzz)}"
for t in $targets; do
  log="$(mktemp)"
  echo "fuzz $t: ${secs} s"
  if ! cargo +nightly fuzz run --fuzz-dir tests/fuzz "$t" -- \
      -max_total_time="$secs" -timeout=10 -rss_limit_mb=2048 -print_final_stats=1 >"$log" 2>&1; then
    tail -n 60 "$log"
    echo "fuzz $t: FINDING (see tests/fuzz/artifacts/$t)" >&2
    exit 1
  fi
  runs="$(grep -o 'stat::number_of_executed_units: *[0-9]*' "$log" | grep -o '[0-9]*$' || echo '?')"
  echo "fuzz $t: ${runs} executions, no finding"
  rm -f "$log"
done
