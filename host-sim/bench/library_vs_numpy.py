#!/usr/bin/env python3
"""The host library's FFT-path gating against the same chain in numpy, same data, one run.

    python3 -m venv target/bench-venv && target/bench-venv/bin/pip install numpy scikit-rf
    target/bench-venv/bin/python host-sim/bench/library_vs_numpy.py [target/release/examples/gate_bench]

Runs `cargo run --release -p sweepgate-host --example gate_bench -- --out FILE` (361 bins of
an 8-12 GHz, 801-point sweep, M = 1024), which prints its own bins per second for each way
of gating and writes the inputs, the gate settings and the library call's outputs. Then gates
the same inputs with numpy (band Kaiser window, zero pad, inverse FFT, Kaiser time gate, FFT,
renormalization by the gated response of an impulse at the gate centre): bin by bin, as a
per-sweep script does it, and all bins in one batched call, each in complex64 (the library's
precision) and complex128 (numpy's default). Checks that numpy and the library agree (largest
difference over the largest value, at most 1e-4) and prints every ratio.
"""
import os
import re
import subprocess
import sys
import tempfile
import time

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))


def gate_window(m, dt, period, centre, span, beta):
    """The gate, placed circularly around the centre (as src/gate.rs places it)."""
    t = np.arange(m) * dt - centre
    t -= period * np.floor(t / period + 0.5)
    x = (t + span / 2) / span
    inside = (x >= 0) & (x <= 1)
    r = 2 * np.clip(x, 0, 1) - 1
    w = np.i0(beta * np.sqrt(np.clip(1 - r * r, 0, None))) / np.i0(beta)
    return np.where(inside, w, 0.0)


def read_data(path):
    raw = open(path, "rb").read()
    assert raw[:4] == b"SGTP"
    k, m, n = np.frombuffer(raw, dtype="<u4", count=3, offset=4)
    start, step, centre, span, band_beta, gate_beta = np.frombuffer(raw, dtype="<f8", count=6, offset=16)
    data = np.frombuffer(raw, dtype="<f4", offset=64).reshape(2, n, k, 2)
    x = data[0, :, :, 0] + 1j * data[0, :, :, 1]
    ours = data[1, :, :, 0] + 1j * data[1, :, :, 1]
    return int(k), int(m), int(n), step, centre, span, band_beta, gate_beta, x, ours


def numpy_gates(k, m, n, step, centre, span, band_beta, gate_beta, x, dtype):
    band = np.kaiser(k, band_beta).astype(dtype().real.dtype)
    g = gate_window(m, 1 / (m * step), 1 / step, centre, span, gate_beta).astype(band.dtype)
    u = np.exp(-2j * np.pi * np.arange(k) * step * centre)
    x = x.astype(dtype)

    def chain(sweeps):
        pad = np.zeros((sweeps.shape[0], m), dtype=dtype)
        pad[:, :k] = sweeps * band
        return np.fft.fft(np.fft.ifft(pad, axis=1) * g, axis=1)[:, :k]

    renorm = (u / chain(u[None, :].astype(dtype))[0]).astype(dtype)

    def per_bin():
        out = np.empty((n, k), dtype=dtype)
        for i in range(n):
            pad = np.zeros(m, dtype=dtype)
            pad[:k] = x[i] * band
            out[i] = np.fft.fft(np.fft.ifft(pad) * g)[:k] * renorm
        return out

    def batched():
        return chain(x) * renorm

    return per_bin, batched


def best_rate(n, fn, passes=25):
    fn()
    best = float("inf")
    for _ in range(passes):
        t = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t)
    return n / best


def main():
    # An already built example may be named (skips cargo): library_vs_numpy.py PATH
    command = sys.argv[1:2] or ["cargo", "run", "-q", "--release", "-p", "sweepgate-host",
                                "--example", "gate_bench", "--"]
    print("load average %.2f %.2f %.2f" % os.getloadavg())
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "gate.bin")
        run = subprocess.run(command + ["--out", path],
                             cwd=ROOT, check=True, capture_output=True, text=True)
        print(run.stdout.strip())
        ours = {m.group(1): float(m.group(2))
                for m in re.finditer(r"^(.*): ([0-9.]+) bins/s", run.stdout, re.M)}
        k, m, n, step, centre, span, band_beta, gate_beta, x, out = read_data(path)
    print(f"numpy {np.__version__}")
    worst = 0.0
    rates = {}
    for dtype in (np.complex64, np.complex128):
        per_bin, batched = numpy_gates(k, m, n, step, centre, span, band_beta, gate_beta, x, dtype)
        for name, fn in (("bin by bin", per_bin), ("batched", batched)):
            ref = fn()
            err = np.max(np.abs(out - ref)) / np.max(np.abs(ref))
            worst = max(worst, err)
            rates[f"numpy {name}, {np.dtype(dtype).name}"] = best_rate(n, fn)
    print(f"agreement with numpy: largest difference {worst:.2e} of the largest value")
    if worst > 1e-4:
        print("MISMATCH: the library and numpy disagree")
        return 1
    for name, rate in rates.items():
        print(f"{name}: {rate:.0f} bins/s")
    print("ratios (library's bins/s over numpy's):")
    for ours_name, ours_rate in ours.items():
        cells = ", ".join(f"{ours_rate / r:.1f}x {name}" for name, r in rates.items())
        print(f"  {ours_name}: {cells}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
