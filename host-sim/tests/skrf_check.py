#!/usr/bin/env python3
"""Write scikit-rf's reading of every Touchstone file in its data folder as JSON.

Usage: skrf_check.py OUT_DIR

For each .sNp / .ts file under the folder of the installed `skrf.data` package, writes
OUT_DIR/<n>.json with the file's path, port count, frequencies in Hz and every S-parameter
(real and imaginary part, full double precision), as scikit-rf reads them with
`skrf.Network(path)`. Files scikit-rf cannot read, and files of three or more ports, are
listed in OUT_DIR/skipped.json with the reason. The Rust side
(host-sim/tests/touchstone_skrf.rs) parses the same files and compares.
"""
import json
import os
import re
import sys

import skrf


def main() -> int:
    if len(sys.argv) != 2:
        print(__doc__, file=sys.stderr)
        return 2
    out = sys.argv[1]
    os.makedirs(out, exist_ok=True)
    for old in os.listdir(out):
        if old.endswith(".json"):
            os.remove(os.path.join(out, old))
    data_dir = os.path.dirname(os.path.abspath(skrf.data.__file__))
    print(f"scikit-rf {skrf.__version__}, data folder {data_dir}")
    pattern = re.compile(r"\.(s\d+p|ts)$", re.IGNORECASE)
    paths = []
    for root, _dirs, files in os.walk(data_dir):
        for name in files:
            if pattern.search(name):
                paths.append(os.path.join(root, name))
    paths.sort()
    skipped = []
    written = 0
    for path in paths:
        try:
            ntwk = skrf.Network(path)
        except Exception as e:  # scikit-rf cannot read it: list it, do not compare
            skipped.append({"file": path, "reason": f"scikit-rf cannot read it: {e}"})
            continue
        if ntwk.nports > 2:
            skipped.append({"file": path, "reason": f"{ntwk.nports} ports (the check covers 1- and 2-port files)"})
            continue
        k, n, _ = ntwk.s.shape
        record = {
            "file": path,
            "ports": int(n),
            "f_hz": [float(x) for x in ntwk.f],
            # s[k] is the N×N matrix at frequency k, row by row, each element [re, im].
            "s": [
                [[float(ntwk.s[i, r, c].real), float(ntwk.s[i, r, c].imag)] for r in range(n) for c in range(n)]
                for i in range(k)
            ],
        }
        with open(os.path.join(out, f"{written:03}.json"), "w") as fh:
            # json writes floats with repr(): the shortest text that reads back exactly.
            json.dump(record, fh)
        written += 1
    with open(os.path.join(out, "skipped.json"), "w") as fh:
        json.dump(skipped, fh, indent=1)
    print(f"wrote {written} readings, skipped {len(skipped)}, to {out}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
