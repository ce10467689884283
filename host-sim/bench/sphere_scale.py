#!/usr/bin/env python3
"""`sweepgate process` on sphere manifests (`theta_deg,phi_deg,file`, `--co S21 --cross S31`
on 3-port files): wall time and peak memory over rows x points, one and two threads, on the
bounded path (`--bounded-memory`) and, where it is taken by default (under 256 MiB of raw
sweeps, `limits::BOUNDED_ABOVE_BYTES`), the whole path.

    cargo build --release -p sweepgate-host --bin sweepgate
    PY=/work/main/target/rooms-venv/bin/python   # any python with numpy
    $PY host-sim/bench/sphere_scale.py                       # 10, 5 and 2 degrees
    $PY host-sim/bench/sphere_scale.py --steps 10,5,2,1      # and the full 1 degree sphere
    $PY host-sim/bench/sphere_scale.py --steps 1 --points 1601 --bounded-only --gate-from-data

The data (made once, kept under target/bench-data/sphere-<points>/): DISTINCT 3-port
Touchstone files (RI, Hz, 8-12 GHz, POINTS points), S21 a direct path at 18 ns whose level
follows a beam over (theta, phi) plus a wall echo at 24 ns, S31 a weaker copy (the
cross-polar port), a little noise, the other parameters small constants; and per step a
sphere manifest (theta 0..180, phi 0..360-step) whose rows name these files in turn. A full
sphere of distinct 1601-point 3-port files would be some 16 GB of text; the rows reuse
DISTINCT files, so the files are read from the page cache (every row is still read and
parsed: no cache in the program).

Each run: `target/release/sweepgate process M --co S21 --cross S31 --gate-center-ns 18
--gate-span-ns 4 --band-window kaiser:6 --gate-shape kaiser:6 --frequencies-hz
9e9,10e9,11e9 --threads N [--bounded-memory] --out DIR` (with --gate-from-data, no gate
options: the gate is chosen from the data), one run each (the 1 degree runs
take minutes), the report folder removed before each run. Wall time from this script; peak
resident memory from /usr/bin/time (`%M`, the program's own, started small) and the
program's own VmHWM line; CPU time from wait4. The load average before each run is printed
(the machine is shared).
"""
import argparse
import os
import shutil
import sys
import tempfile

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from process_vs_skrf import timed  # noqa: E402  (the same timing as the one-cut bench)

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
DISTINCT = 64
WHOLE_LIMIT_BYTES = 256 << 20  # limits::BOUNDED_ABOVE_BYTES


def make_files(points):
    """Writes the DISTINCT 3-port files once; returns their folder."""
    folder = os.path.join(ROOT, "target", "bench-data", f"sphere-{points}")
    done = os.path.join(folder, "done")
    if os.path.exists(done):
        return folder
    os.makedirs(folder, exist_ok=True)
    rng = np.random.default_rng(23)
    f = np.linspace(8e9, 12e9, points)
    for i in range(DISTINCT):
        theta = np.radians(180.0 * (i % 8) / 7)
        phi = np.radians(360.0 * (i // 8) / 8)
        level = 0.05 + 0.95 * np.cos(theta / 2) ** 4 * (1 - 0.2 * np.sin(phi) ** 2)
        echo = 0.05 + 0.2 * np.sin(theta) ** 2
        noise = 1e-3 * (rng.standard_normal(points) + 1j * rng.standard_normal(points))
        s21 = (level * np.exp(-2j * np.pi * f * 18e-9) + echo * np.exp(-2j * np.pi * f * 24e-9)
               + noise)
        s31 = 0.03 * s21 + 0.01 * np.exp(-2j * np.pi * f * 24e-9)
        small = np.full(points, 0.1)
        zero = np.zeros(points)
        # Touchstone 1 of 3 ports: the matrix's three rows on three lines.
        r1 = np.column_stack([f, small, zero, small, zero, small, zero])
        r2 = np.column_stack([s21.real, s21.imag, small, zero, small, zero])
        r3 = np.column_stack([s31.real, s31.imag, small, zero, small, zero])
        lines = ["# Hz S RI R 50"]
        for a, b, c in zip(r1, r2, r3):
            lines.append(" ".join("%.9g" % v for v in a))
            lines.append(" " + " ".join("%.9g" % v for v in b))
            lines.append(" " + " ".join("%.9g" % v for v in c))
        with open(os.path.join(folder, f"d{i:02d}.s3p"), "w") as fh:
            fh.write("\n".join(lines) + "\n")
    open(done, "w").close()
    return folder


def make_manifest(folder, step):
    """A sphere manifest at `step` degrees over the files of `folder`; returns (path, rows)."""
    path = os.path.join(folder, f"sphere-{step}deg.csv")
    thetas = np.arange(0, 180 + step / 2, step)
    phis = np.arange(0, 360 - step / 2, step)
    rows = len(thetas) * len(phis)
    if not os.path.exists(path):
        out = ["theta_deg,phi_deg,file"]
        k = 0
        for phi in phis:
            for theta in thetas:
                out.append(f"{theta:g},{phi:g},d{k % DISTINCT:02d}.s3p")
                k += 1
        with open(path + ".tmp", "w") as fh:
            fh.write("\n".join(out) + "\n")
        os.replace(path + ".tmp", path)
    return path, rows


def run(binary, manifest, threads, bounded, out, from_data=False):
    """One run; returns (wall s, peak MiB from time, CPU s, the program's own peak line)."""
    shutil.rmtree(out, ignore_errors=True)
    gate = [] if from_data else ["--gate-center-ns", "18", "--gate-span-ns", "4"]
    args = [binary, "process", manifest, "--co", "S21", "--cross", "S31"] + gate + [
            "--band-window", "kaiser:6", "--gate-shape", "kaiser:6",
            "--frequencies-hz", "9e9,10e9,11e9", "--threads", str(threads), "--out", out]
    if bounded:
        args.append("--bounded-memory")
    elapsed, peak_mib, cpu, err = timed(args)
    own = "?"
    for line in err.splitlines():
        if line.startswith("peak resident memory: "):
            own = line[len("peak resident memory: "):]
    return elapsed, peak_mib, cpu, own


def load():
    return "%.2f" % os.getloadavg()[0]


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--steps", default="10,5,2", help="sphere steps in degrees, e.g. 10,5,2,1")
    ap.add_argument("--points", default="201,801,1601")
    ap.add_argument("--binary", default=os.path.join(ROOT, "target", "release", "sweepgate"))
    ap.add_argument("--gate-from-data", action="store_true",
                    help="no gate given: chosen from the data (the bounded path's first look)")
    ap.add_argument("--bounded-only", action="store_true", help="no runs of the whole path")
    a = ap.parse_args()
    steps = [float(s) for s in a.steps.split(",")]
    points = [int(p) for p in a.points.split(",")]
    print("| rows x points | path | 1 thread: wall, peak (time %M) | 2 threads: wall, peak "
          "(time %M) | 2 threads: CPU | load before (1 / 2 threads) |")
    print("|---|---|---:|---:|---:|---|")
    with tempfile.TemporaryDirectory() as tmp:
        out = os.path.join(tmp, "report")
        for step in steps:
            for n in points:
                folder = make_files(n)
                manifest, rows = make_manifest(folder, step if step % 1 else int(step))
                paths = [True]
                if rows * 2 * n * 8 <= WHOLE_LIMIT_BYTES and not a.bounded_only:
                    paths.append(False)
                for bounded in paths:
                    cells = []
                    loads = []
                    for threads in (1, 2):
                        loads.append(load())
                        w, peak, cpu, own = run(a.binary, manifest, threads, bounded, out,
                                                a.gate_from_data)
                        cells.append((w, peak, cpu, own))
                    name = "bounded" if bounded else "whole"
                    if a.gate_from_data:
                        name += ", gate from the data"
                    print(f"| {rows} x {n} ({step:g} deg) | {name} | {cells[0][0]:.2f} s, "
                          f"{cells[0][1]:.0f} MiB | {cells[1][0]:.2f} s, {cells[1][1]:.0f} MiB | "
                          f"{cells[1][2]:.2f} s | {loads[0]} / {loads[1]} |", flush=True)
                    for c in cells:
                        sys.stderr.write(f"  own VmHWM line: {c[3]}\n")


if __name__ == "__main__":
    main()
