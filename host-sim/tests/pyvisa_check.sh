#!/usr/bin/env bash
# Cross-check of the VNA link with an outside client: pyvisa + pyvisa-py (from PyPI, in a
# virtual environment) against `sweepgate instrument`, and the core decoder against
# blocks built by pyvisa's own to_ieee_block from numpy data.
#
# Usage: host-sim/tests/pyvisa_check.sh [PATH_TO_SWEEPGATE_BINARY]
#   binary default: $CARGO_TARGET_DIR/debug/sweepgate (CARGO_TARGET_DIR default: target)
#   PYVISA_VENV: virtual environment to create or reuse
#                (default: $CARGO_TARGET_DIR/pyvisa-venv)
# Prints `pyvisa check: N passed, M failed` last; exits non-zero on any failure.
set -euo pipefail
here="$(cd "$(dirname "$0")" && pwd)"
root="$(cd "$here/../.." && pwd)"
target="${CARGO_TARGET_DIR:-$root/target}"
bin="${1:-$target/debug/sweepgate}"
venv="${PYVISA_VENV:-$target/pyvisa-venv}"

if [ ! -x "$bin" ]; then
  echo "pyvisa check: sweepgate binary not found at $bin (build it first)" >&2
  exit 2
fi
if [ ! -x "$venv/bin/python" ]; then
  python3 -m venv "$venv"
fi
"$venv/bin/python" -m pip install --quiet --disable-pip-version-check pyvisa pyvisa-py numpy
exec "$venv/bin/python" "$here/pyvisa_check.py" "$bin"
