#!/usr/bin/env bash
# Compares our Touchstone reader with scikit-rf (PyPI `scikit-rf`, BSD licensed) on every
# Touchstone file shipped in its data folder. Nothing of scikit-rf is committed: it is
# installed into a virtual environment here.
#
#   SKRF_VENV      virtual environment to use or create (default: <target dir>/skrf-venv)
#   SKRF_JSON_DIR  where scikit-rf's readings are written (default: <target dir>/skrf-json)
#
# Ends with the line `skrf check: N passed, M failed`; exits non-zero on any failure or if
# no file was compared.
set -euo pipefail
here="$(cd "$(dirname "$0")" && pwd)"
repo="$(cd "$here/../.." && pwd)"
target="${CARGO_TARGET_DIR:-$repo/target}"
venv="${SKRF_VENV:-$target/skrf-venv}"
json="${SKRF_JSON_DIR:-$target/skrf-json}"

if [ ! -x "$venv/bin/python" ]; then
  python3 -m venv "$venv"
fi
if ! "$venv/bin/python" -c "import skrf" 2>/dev/null; then
  "$venv/bin/pip" install --quiet --disable-pip-version-check scikit-rf
fi
"$venv/bin/python" "$here/skrf_check.py" "$json"

log="$(mktemp)"
trap 'rm -f "$log"' EXIT
status=0
(cd "$repo" && SKRF_JSON_DIR="$json" cargo test -p sweepgate-host --test touchstone_skrf \
  -- --ignored --nocapture) 2>&1 | tee "$log" || status=$?
line="$(grep '^skrf check:' "$log" | tail -1 || true)"
if [ -z "$line" ]; then
  echo "skrf check: 0 passed, 0 failed (the checker did not run)"
  exit 1
fi
echo "$line"
exit "$status"
