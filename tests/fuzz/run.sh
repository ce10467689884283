#!/usr/bin/env bash
# Runs every fuzz target for SECONDS each (default 30) and fails on a finding (libFuzzer exits
# non-zero on a crash, a failed assertion, a leak, a timeout or running out of memory). Targets
# run side by side, one per processor (FUZZ_JOBS, at most 4 unless set), each for its full
# SECONDS and under its own 2 GiB memory limit (so up to FUZZ_JOBS x 2 GiB at once). Needs
# the nightly toolchain and cargo-fuzz (`cargo install cargo-fuzz --locked`).
# Corpora are kept in tests/fuzz/corpus/<target>, findings in tests/fuzz/artifacts/<target>.
# Prints each target's execution count.
#
#   tests/fuzz/run.sh 20        # CI (13 targets of 20 s: about 2.5 min on 2 processors)
#   tests/fuzz/run.sh 300       # the longer run
#   FUZZ_TARGETS="touchstone manifest" FUZZ_JOBS=1 tests/fuzz/run.sh 60
set -euo pipefail
if (( BASH_VERSINFO[0] < 5 || (BASH_VERSINFO[0] == 5 && BASH_VERSINFO[1] < 1) )); then
  echo "tests/fuzz/run.sh needs bash 5.1 or newer (wait -n -p); this is bash $BASH_VERSION" >&2
  exit 2
fi
secs="${1:-30}"
if ! [[ "$secs" =~ ^[1-9][0-9]*$ ]]; then
  echo "fuzz: SECONDS must be a whole number of 1 or more, not \"$secs\"" >&2
  exit 2
fi
here="$(cd "$(dirname "$0")" && pwd)"
cd "$here/../.."
cores="$(nproc 2>/dev/null || echo 1)"
jobs="${FUZZ_JOBS:-$((cores < 4 ? cores : 4))}"
if ! [[ "$jobs" =~ ^[1-9][0-9]*$ ]]; then
  echo "fuzz: FUZZ_JOBS must be a whole number of 1 or more, not \"$jobs\"" >&2
  exit 2
fi
cargo +nightly fuzz build --fuzz-dir tests/fuzz
# Every target in Cargo.toml, unless FUZZ_TARGETS names some.
targets="${FUZZ_TARGETS:-$(cargo +nightly fuzz list --fuzz-dir tests/fuzz)}"
if [ -z "${targets//[[:space:]]/}" ]; then
  echo "fuzz: no targets to run (cargo fuzz list gave none, or FUZZ_TARGETS names none): failing" >&2
  exit 1
fi
logs="$(mktemp -d)"
trap 'rm -rf "$logs"' EXIT

# One target, its output into its own log; its exit status is libFuzzer's.
fuzz_one() {
  cargo +nightly fuzz run --fuzz-dir tests/fuzz "$1" -- \
    -max_total_time="$secs" -timeout=10 -rss_limit_mb=2048 -print_final_stats=1 \
    >"$logs/$1.log" 2>&1
}

# Says how a finished target went; fails (after its log's tail) on a finding.
report() {
  local t="$1" status="$2" runs
  if [ "$status" -ne 0 ]; then
    tail -n 60 "$logs/$t.log"
    echo "fuzz $t: FAILED: a finding (see tests/fuzz/artifacts/$t), or the target did not run (its log above)" >&2
    return 1
  fi
  runs="$(grep -o 'stat::number_of_executed_units: *[0-9]*' "$logs/$t.log" | grep -o '[0-9]*$' || echo '?')"
  echo "fuzz $t: ${runs} executions, no finding"
}

echo "fuzz: ${secs} s per target, ${jobs} at a time"
declare -A running=()   # pid -> target
failed=0
wait_one() {
  local pid status=0
  # `wait -n -p` names the job that ended (bash 5.1); its status is wait's.
  wait -n -p pid "${!running[@]}" || status=$?
  report "${running[$pid]}" "$status" || failed=1
  unset "running[$pid]"
}
for t in $targets; do
  while [ "${#running[@]}" -ge "$jobs" ]; do
    wait_one
  done
  [ "$failed" -eq 0 ] || break
  fuzz_one "$t" &
  running[$!]="$t"
done
while [ "${#running[@]}" -gt 0 ]; do
  wait_one
done
exit "$failed"
