#!/usr/bin/env python3
"""Our FFT-path gating against the same chain written with numpy, on the same data, in one run.

numpy is what an engineer would otherwise script this with. Not part of CI:

    python3 -m venv /tmp/np && /tmp/np/bin/pip install numpy
    /tmp/np/bin/python examples/numpy_compare.py

It runs `cargo run --release --example gate_throughput -- --out FILE`, reads the inputs, the
gate settings and our outputs, gates the inputs with numpy (band Kaiser window, zero pad,
inverse FFT, Kaiser time gate, FFT, renormalization by the gated response of an impulse at the
gate centre), checks that both agree, and prints both throughputs and their ratio: numpy bin
by bin (as a per-sweep script would do it) and numpy batched over all bins at once.
"""
import os
import re
import struct
import subprocess
import sys
import tempfile
import time

import numpy as np


def gate_window(m, dt, period, centre, span, beta):
    t = np.arange(m) * dt - centre
    t -= period * np.floor(t / period + 0.5)
    x = (t + span / 2) / span
    inside = (x >= 0) & (x <= 1)
    r = 2 * np.clip(x, 0, 1) - 1
    w = np.i0(beta * np.sqrt(np.clip(1 - r * r, 0, None))) / np.i0(beta)
    return np.where(inside, w, 0.0)


def main():
    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    with tempfile.TemporaryDirectory() as tmp:
        path = os.path.join(tmp, "gate.bin")
        run = subprocess.run(
            ["cargo", "run", "-q", "--release", "--example", "gate_throughput", "--", "--out", path],
            cwd=root, check=True, capture_output=True, text=True)
        print(run.stdout.strip())
        ours = float(re.search(r"([0-9.]+) bins/s", run.stdout).group(1))
        raw = open(path, "rb").read()
    assert raw[:4] == b"SGTP"
    k, m, n = struct.unpack_from("<3I", raw, 4)
    start, step, centre, span, band_beta, gate_beta = struct.unpack_from("<6d", raw, 16)
    data = np.frombuffer(raw, dtype="<f4", offset=64).reshape(2, n, k, 2)
    x = (data[0, :, :, 0] + 1j * data[0, :, :, 1]).astype(np.complex64)
    ours_out = data[1, :, :, 0] + 1j * data[1, :, :, 1]

    band = np.kaiser(k, band_beta)  # numpy's Kaiser: I0(β√(1−(2n/(K−1)−1)²))/I0(β)
    g = gate_window(m, 1 / (m * step), 1 / step, centre, span, gate_beta)
    u = np.exp(-2j * np.pi * np.arange(k) * step * centre)

    def chain(sweeps):
        pad = np.zeros((sweeps.shape[0], m), dtype=np.complex64)
        pad[:, :k] = sweeps * band
        h = np.fft.ifft(pad, axis=1)
        return np.fft.fft(h * g, axis=1)[:, :k]

    renorm = u / chain(u[None, :])[0]

    def per_bin():
        out = np.empty((n, k), dtype=np.complex128)
        for i in range(n):
            pad = np.zeros(m, dtype=np.complex64)
            pad[:k] = x[i] * band
            out[i] = np.fft.fft(np.fft.ifft(pad) * g)[:k] * renorm
        return out

    def batched():
        return chain(x) * renorm

    results = {}
    for name, fn in (("numpy, bin by bin", per_bin), ("numpy, batched", batched)):
        fn()
        best = min(timed(fn) for _ in range(5))
        results[name] = (n / best, fn())

    ref = results["numpy, bin by bin"][1]
    err = np.max(np.abs(ours_out - ref)) / np.max(np.abs(ref))
    print(f"agreement with numpy: largest difference {err:.2e} of the largest value")
    if err > 1e-4:
        print("MISMATCH: the two implementations disagree")
        return 1
    for name, (rate, _) in results.items():
        print(f"{name}: {rate:.0f} bins/s; sweepgate is {ours / rate:.1f}x")
    return 0


def timed(fn):
    t = time.perf_counter()
    fn()
    return time.perf_counter() - t


if __name__ == "__main__":
    sys.exit(main())
