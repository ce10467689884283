#!/usr/bin/env python3
"""sweepgate.gate on 360 sweeps of 801 points against numpy's batched gating, same data, same
run: agreement checked, times and ratios printed. A benchmark, not a test (no timed
assertions anywhere); after `pip install ./host-sim/python`:

    python host-sim/python/bench/gate_vs_numpy.py [--repeats 30]

The numpy side is the same chain (band window, zero pad to 1024, inverse FFT, time gate,
FFT, edge renormalization) on all 360 rows in one call per step, with the windows and the
renormalization computed once outside the timed part, as a batch script would keep them.
It runs in complex128 (numpy's default) and in complex64 (numpy 2 transforms single
precision natively); sweepgate runs in single precision, on one thread and on every core.
Each figure is the best of the repeats, the variants taking turns.
"""

import argparse
import os
import sys
import time

import numpy as np

import sweepgate

N, K, M = 360, 801, 1024
CENTER_S, SPAN_S = 20e-9, 4e-9


def kaiser_beta_for_sidelobe_db(a_db):
    """Kaiser & Schafer (1980), spectrum-analysis form (the default band window's rule)."""
    d = a_db - 13.26
    return 0.76609 * d**0.4 + 0.09834 * d if a_db <= 60 else 0.12438 * (a_db + 6.3)


def windows(f):
    """Band window (Kaiser for 50 dB sidelobes), time gate (Tukey 0.3), renormalization."""
    step = f[1] - f[0]
    beta = kaiser_beta_for_sidelobe_db(50.0)
    x = np.arange(K) / (K - 1)
    band = np.i0(beta * np.sqrt(1 - (2 * x - 1) ** 2)) / np.i0(beta)
    period, dt = 1 / step, 1 / (step * M)
    d = np.arange(M) * dt - CENTER_S
    d -= period * np.floor(d / period + 0.5)
    xg = (d + SPAN_S / 2) / SPAN_S
    edge = np.minimum(xg, 1 - xg)
    gate = np.where((xg >= 0) & (xg <= 1),
                    np.where(edge < 0.15, 0.5 * (1 - np.cos(2 * np.pi * edge / 0.3)), 1.0), 0.0)
    u = np.exp(-2j * np.pi * np.arange(K) * step * CENTER_S)
    padded = np.zeros(M, complex)
    padded[:K] = u * band
    r = np.fft.fft(np.fft.ifft(padded) * gate)[:K] / u
    return band, gate, r


def numpy_gate(x, band, gate, inv_r, dtype):
    """The batched chain: one call per step over all rows."""
    padded = np.zeros((x.shape[0], M), dtype=dtype)
    padded[:, :K] = x * band
    h = np.fft.ifft(padded, axis=1)
    y = np.fft.fft(h * gate, axis=1)[:, :K]
    return y * inv_r


def best_of(repeats, variants):
    """Best wall time, best CPU time of the calling thread, and last result of each variant,
    the variants taking turns in every round so that a change in the machine's load falls on
    all of them alike. The thread's CPU time counts only this thread's work, so on a busy
    machine it is the steadier figure for the single-threaded variants (for a call that
    spreads over several threads it counts only the caller's share and is not shown)."""
    wall = {name: float("inf") for name in variants}
    cpu = {name: float("inf") for name in variants}
    out = {}
    for _ in range(repeats):
        for name, fn in variants.items():
            c0, t0 = time.thread_time(), time.perf_counter()
            out[name] = fn()
            wall[name] = min(wall[name], time.perf_counter() - t0)
            cpu[name] = min(cpu[name], time.thread_time() - c0)
    return wall, cpu, out


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeats", type=int, default=30)
    args = ap.parse_args()

    f = np.linspace(8e9, 12e9, K)
    rng = np.random.default_rng(1)
    amp = 0.1 + np.abs(np.cos(np.radians(np.arange(N))))[:, None]
    x = (amp * np.exp(-2j * np.pi * f * 20e-9) + 0.3 * np.exp(-2j * np.pi * f * 31e-9)
         + 0.01 * (rng.standard_normal((N, K)) + 1j * rng.standard_normal((N, K))))
    x64 = x.astype(np.complex64)

    band, gate, r = windows(f)
    inv_r = 1 / r
    prepared = {
        "complex128": (band, gate, inv_r),
        "complex64": (band.astype(np.float32), gate.astype(np.float32), inv_r.astype(np.complex64)),
    }
    cores = os.cpu_count() or 1

    def ours(threads):
        return sweepgate.gate(x64, f, center_s=CENTER_S, span_s=SPAN_S, threads=threads)

    g = sweepgate.make_gate(f, center_s=CENTER_S, span_s=SPAN_S)
    # Warm up every variant once (first-call costs: imports, page faults, FFT plans).
    ours(1)
    for dt, (b, gt, ir) in prepared.items():
        numpy_gate(x64 if dt == "complex64" else x, b, gt, ir, dt)

    t, cpu, out = best_of(args.repeats, {
        "ours1": lambda: ours(1),
        "ours": lambda: ours(None),
        "apply": lambda: g.apply(x64, threads=1)[0],
        "np128": lambda: numpy_gate(x, *prepared["complex128"], "complex128"),
        "np64": lambda: numpy_gate(x64, *prepared["complex64"], "complex64"),
    })
    t_ours1, t_ours, t_apply, t_np128, t_np64 = (
        t[k] for k in ["ours1", "ours", "apply", "np128", "np64"])
    y1, y, ya, ref, ref64 = (out[k] for k in ["ours1", "ours", "apply", "np128", "np64"])

    # Agreement, measured before the renormalization's division (which magnifies single
    # precision rounding where the band window is small): max|a-b|*|r| / max|b*r|.
    def diff(a, b):
        return float(np.max(np.abs(a - b) * np.abs(r)) / np.max(np.abs(b * r)))

    d = max(diff(y1, ref), diff(y, ref), diff(ya, ref))
    d64 = diff(ref64, ref)
    same = np.array_equal(y1, y) and np.array_equal(y1, ya)

    print(f"gating {N} sweeps of {K} points, M = {M}, numpy {np.__version__}, {cores} core(s)")
    print(f"agreement with numpy complex128: {d:.2e} (numpy complex64: {d64:.2e}); "
          f"threads and calls bit-identical: {same}")
    rows = [
        ("sweepgate.gate, 1 thread", t_ours1, cpu["ours1"]),
        (f"sweepgate.gate, {cores} threads", t_ours, None),
        ("Gate.apply (gate built once), 1 thread", t_apply, cpu["apply"]),
        ("numpy batched, complex128", t_np128, cpu["np128"]),
        ("numpy batched, complex64", t_np64, cpu["np64"]),
    ]
    print(f"  {'':<42} {'wall':>8}     {'CPU':>8}     sweeps/s (wall)")
    for name, w, c in rows:
        ctext = "       -   " if c is None else f"{c * 1e3:8.2f} ms"
        print(f"  {name:<42} {w * 1e3:8.2f} ms  {ctext}  {N / w:10.0f}")
    fastest_numpy = min(t_np128, t_np64)
    fastest_numpy_cpu = min(cpu["np128"], cpu["np64"])
    print(f"ratio, fastest numpy / sweepgate.gate: {fastest_numpy_cpu / cpu['ours1']:.2f}x in CPU "
          f"time on 1 thread; wall time {fastest_numpy / t_ours1:.2f}x on 1 thread, "
          f"{fastest_numpy / t_ours:.2f}x on {cores} threads")
    if not (d < 1e-5 and same):
        print("FAILED: the results disagree", file=sys.stderr)
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
