#!/usr/bin/env python3
"""`sweepgate process` on a manifest of Touchstone files against a plain scikit-rf script
doing the same gating, in one run; and, with --scale, process's time and peak memory over
files x points on one and two threads.

    cargo build --release -p sweepgate-host --bin sweepgate
    python3 -m venv target/bench-venv && target/bench-venv/bin/pip install numpy scikit-rf
    target/bench-venv/bin/python host-sim/bench/process_vs_skrf.py            # 1,440 files, 3 rounds
    target/bench-venv/bin/python host-sim/bench/process_vs_skrf.py --scale    # the table
    target/bench-venv/bin/python host-sim/bench/process_vs_skrf.py --pairs 21 # 2 threads / 1

The scan (made once, kept under target/bench-data/): FILES two-port Touchstone files (RI,
Hz) of POINTS points over 8-12 GHz, one per angle over a full turn, S21 a direct path at 18 ns
whose level follows the angle plus a wall echo at 24 ns and a little noise, the other three
parameters small constants; and the manifest (`angle_deg,file`) listing them.

scikit-rf, in this process (its import and the interpreter's start not counted, nor the parts
of scipy it imports on its first read and gate, done once on the first file before): for each
file, `skrf.Network(path)`, `ntwk.s21.time_gate(center=18, span=4, t_unit="ns")` (a Kaiser
beta 6 gate, scikit-rf's default) and the gated values at the three pattern frequencies.

sweepgate, as a program (its start, reading, gating and the whole report folder counted):
`target/release/sweepgate process --manifest M --gate-center-ns 18 --gate-span-ns 4
--band-window kaiser:6 --gate-shape kaiser:6 --frequencies-hz 9e9,10e9,11e9 --threads N`;
its peak resident memory (from /usr/bin/time when there is one, else
wait4's ru_maxrss) and CPU time from the kernel (wait4's ru_utime + ru_stime). On a shared
machine the CPU times are the steadier figure.

Prints process on one thread and on two (best of REPEAT each), then ROUNDS rounds: the
scikit-rf script once, and just after it process with default threads (every core) REPEAT
times, the round's ratio being scikit-rf's time over the median of those runs; a drift in
the machine's speed within a round falls on both. Then the median of the rounds' ratios
(the figure to quote), the CPU-time ratio and process's speed-up from one thread to two,
with the load average along the way, and after each round the share of the processors' time
the hypervisor gave to others during it (steal, from /proc/stat, where there is one).

With --pairs N, no scikit-rf: process on one thread and on two, run in turn N times each
(1, 2, 1, 2, ...), so that a drift in the machine's speed falls on both; prints the median
and smallest wall time of each, the median of the N pairs' ratios (one thread's time over
two threads'), the load average before and after, and the share of the processors' time
the hypervisor gave to others meanwhile (steal, from /proc/stat, where there is one).
"""
import argparse
import os
import subprocess
import sys
import tempfile
import time

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
CENTER_NS, SPAN_NS = 18.0, 4.0
FREQS_HZ = [9e9, 10e9, 11e9]
TIMER = "/usr/bin/time"


def make_scan(files, points):
    """Writes the scan once; returns the manifest's path."""
    folder = os.path.join(ROOT, "target", "bench-data", f"{files}x{points}")
    manifest = os.path.join(folder, "scan.csv")
    if os.path.exists(manifest):
        return manifest
    os.makedirs(folder, exist_ok=True)
    rng = np.random.default_rng(19)
    f = np.linspace(8e9, 12e9, points)
    rows = ["angle_deg,file"]
    for i in range(files):
        angle = -180.0 + 360.0 * i / files
        level = 0.1 + 0.9 * np.cos(np.radians(angle) / 2) ** 2
        echo = 0.05 + 0.3 * np.sin(np.radians(angle)) ** 2
        s21 = (level * np.exp(-2j * np.pi * f * 18e-9) + echo * np.exp(-2j * np.pi * f * 24e-9)
               + 1e-3 * (rng.standard_normal(points) + 1j * rng.standard_normal(points)))
        cols = np.column_stack([f, np.full(points, 0.1), np.zeros(points), s21.real, s21.imag,
                                s21.real, s21.imag, np.full(points, 0.1), np.zeros(points)])
        name = f"a{i:04d}.s2p"
        np.savetxt(os.path.join(folder, name), cols, fmt="%.9g", header="Hz S RI R 50",
                   comments="# ")
        rows.append(f"{angle!r},{name}")
    tmp = manifest + ".tmp"
    with open(tmp, "w") as fh:
        fh.write("\n".join(rows) + "\n")
    os.replace(tmp, manifest)
    return manifest


def manifest_rows(manifest):
    """The manifest's (angle, file) rows."""
    with open(manifest) as fh:
        return [line.strip().split(",", 1) for line in fh.readlines()[1:] if line.strip()]


def skrf_warm(manifest):
    """Reads and gates the first file once, untimed: scikit-rf imports parts of scipy the
    first time it reads and gates (0.9-2.3 s on our 2-core machine), which is import
    time, not the script's work. Returns the seconds it took."""
    import skrf

    t = time.perf_counter()
    name = manifest_rows(manifest)[0][1]
    ntwk = skrf.Network(os.path.join(os.path.dirname(manifest), name))
    ntwk.s21.time_gate(center=CENTER_NS, span=SPAN_NS, t_unit="ns")
    return time.perf_counter() - t


def skrf_script(manifest):
    """The plain scikit-rf script; returns its time in seconds and the gated values."""
    import skrf

    folder = os.path.dirname(manifest)
    rows = manifest_rows(manifest)
    t = time.perf_counter()
    cpu = time.process_time()
    values = []
    for _angle, name in rows:
        ntwk = skrf.Network(os.path.join(folder, name))
        gated = ntwk.s21.time_gate(center=CENTER_NS, span=SPAN_NS, t_unit="ns")
        idx = [int(np.argmin(np.abs(ntwk.f - fz))) for fz in FREQS_HZ]
        values.append(gated.s[idx, 0, 0])
    return time.perf_counter() - t, time.process_time() - cpu, np.array(values)


def sweepgate_run(binary, manifest, threads, out):
    """One run of process; returns (seconds, peak resident MiB, CPU seconds)."""
    args = [binary, "process", "--manifest", manifest, "--gate-center-ns", str(CENTER_NS),
            "--gate-span-ns", str(SPAN_NS), "--band-window", "kaiser:6", "--gate-shape", "kaiser:6",
            "--frequencies-hz", ",".join(repr(fz) for fz in FREQS_HZ), "--out", out]
    if threads is not None:
        args += ["--threads", str(threads)]
    elapsed, peak_mib, cpu, _err = timed(args)
    return elapsed, peak_mib, cpu


def timed(args):
    """Runs a sweepgate command; returns (wall s, peak resident MiB, CPU s, its standard
    error). Started through /usr/bin/time when there is one: a child forked from this Python
    process counts the interpreter's resident memory (numpy's included) in its peak until it
    execs, which put a floor of about 27-35 MiB under every figure; time's own child starts
    small. CPU time from wait4 counts time and its child."""
    if os.path.exists(TIMER):
        args = [TIMER, "-f", "sweepgate-peak-kib %M"] + args
    t = time.perf_counter()
    p = subprocess.Popen(args, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    _, status, usage = os.wait4(p.pid, 0)
    elapsed = time.perf_counter() - t
    err = p.stderr.read().decode()
    p.stderr.close()
    code = os.waitstatus_to_exitcode(status)
    if code != 0:
        raise SystemExit(f"sweepgate failed ({code}): {err}")
    peak_kib = usage.ru_maxrss
    for line in err.splitlines():
        if line.startswith("sweepgate-peak-kib "):
            peak_kib = int(line.split()[1])
    return elapsed, peak_kib / 1024.0, usage.ru_utime + usage.ru_stime, err


def best(binary, manifest, threads, repeat, tmp):
    runs = [sweepgate_run(binary, manifest, threads, os.path.join(tmp, "report"))
            for _ in range(repeat)]
    return min(r[0] for r in runs), max(r[1] for r in runs), min(r[2] for r in runs)


def load():
    return "load average %.2f %.2f %.2f" % os.getloadavg()


def compare(binary, files, points, repeat, rounds):
    manifest = make_scan(files, points)
    print(f"scan: {files} files of {points} points ({manifest})")
    with tempfile.TemporaryDirectory() as tmp:
        best(binary, manifest, None, 1, tmp)  # warm the file cache
        print(load())
        one = best(binary, manifest, 1, repeat, tmp)
        print(f"sweepgate process, 1 thread: {one[0]:.3f} s, peak {one[1]:.0f} MiB, "
              f"CPU {one[2]:.3f} s (best of {repeat})")
        print(load())
        two = best(binary, manifest, 2, repeat, tmp)
        print(f"sweepgate process, 2 threads: {two[0]:.3f} s, peak {two[1]:.0f} MiB, "
              f"CPU {two[2]:.3f} s (best of {repeat})")
        print(load())
        print(f"scikit-rf's first read and gate of one file (imports, not timed below): "
              f"{skrf_warm(manifest):.2f} s")
        ratios, cpu_skrf = [], []
        for r in range(rounds):
            ticks = cpu_ticks()
            t_skrf, cpu, values = skrf_script(manifest)
            every = [sweepgate_run(binary, manifest, None, os.path.join(tmp, "report"))[0]
                     for _ in range(repeat)]
            t_every = float(np.median(every))
            ratios.append(t_skrf / t_every)
            cpu_skrf.append(cpu)
            print(f"round {r + 1}: scikit-rf script {t_skrf:.2f} s (CPU {cpu:.2f} s, "
                  f"{values.shape[0]} files, {values.shape[1]} frequencies); process, default "
                  f"threads ({os.cpu_count()} cores), median of {repeat} runs just after it "
                  f"{t_every:.3f} s; ratio {t_skrf / t_every:.1f}x; {load()}"
                  f"{steal_since(ticks)}")
    cpu = float(np.median(cpu_skrf))
    print(f"ratio scikit-rf / process (default threads), median of {rounds} rounds: "
          f"{np.median(ratios):.1f}x (rounds from {min(ratios):.1f}x to {max(ratios):.1f}x)")
    print(f"CPU-time ratio scikit-rf (median of rounds) / process (1 thread, best): "
          f"{cpu / one[2]:.1f}x")
    print(f"process: 2 threads over 1 thread: {one[0] / two[0]:.2f}x")


def cpu_ticks():
    """(steal, total) ticks of all processors so far, or None without /proc/stat."""
    try:
        with open("/proc/stat") as fh:
            fields = [int(x) for x in fh.readline().split()[1:9]]
    except OSError:
        return None
    return fields[7], sum(fields)


def steal_since(ticks):
    """The text '; steal N %': the share of the processors' time the hypervisor gave to
    others since `ticks` (from `cpu_ticks`), or "" where that cannot be read."""
    after = cpu_ticks()
    if not ticks or not after or after[1] <= ticks[1]:
        return ""
    return f"; steal {100 * (after[0] - ticks[0]) / (after[1] - ticks[1]):.0f} %"


def pairs(binary, files, points, n):
    manifest = make_scan(files, points)
    print(f"scan: {files} files of {points} points ({manifest})")
    with tempfile.TemporaryDirectory() as tmp:
        out = os.path.join(tmp, "report")
        sweepgate_run(binary, manifest, 1, out)  # warm the file cache
        print(load())
        ticks = cpu_ticks()
        one, two = [], []
        for _ in range(n):
            one.append(sweepgate_run(binary, manifest, 1, out)[0])
            two.append(sweepgate_run(binary, manifest, 2, out)[0])
        steal = steal_since(ticks)
    print(load() + steal)
    ratios = [a / b for a, b in zip(one, two)]
    for name, t in (("1 thread", one), ("2 threads", two)):
        print(f"sweepgate process, {name}: median {np.median(t):.3f} s, smallest {min(t):.3f} s")
    print(f"process: 2 threads over 1 thread, median of {n} pairs: {np.median(ratios):.2f}x "
          f"(pairs from {min(ratios):.2f}x to {max(ratios):.2f}x)")


def scale(binary, repeat):
    print("| files x points | 1 thread: time, peak memory | 2 threads: time, peak memory | speed-up |")
    print("|---|---:|---:|---:|")
    with tempfile.TemporaryDirectory() as tmp:
        for files in (360, 1440):
            for points in (201, 801, 1601):
                manifest = make_scan(files, points)
                best(binary, manifest, 1, 1, tmp)
                one = best(binary, manifest, 1, repeat, tmp)
                two = best(binary, manifest, 2, repeat, tmp)
                print(f"| {files} x {points} | {one[0]:.3f} s, {one[1]:.0f} MiB | "
                      f"{two[0]:.3f} s, {two[1]:.0f} MiB | {one[0] / two[0]:.2f}x |", flush=True)
    print(load())


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--binary", default=os.path.join(ROOT, "target", "release", "sweepgate"))
    ap.add_argument("--files", type=int, default=1440)
    ap.add_argument("--points", type=int, default=801)
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--rounds", type=int, default=3,
                    help="scikit-rf runs, each followed by REPEAT runs of process")
    ap.add_argument("--scale", action="store_true", help="the files x points table instead")
    ap.add_argument("--pairs", type=int, metavar="N",
                    help="one thread against two, N runs each in turn, instead")
    a = ap.parse_args()
    if a.scale:
        scale(a.binary, a.repeat)
    elif a.pairs:
        pairs(a.binary, a.files, a.points, a.pairs)
    else:
        compare(a.binary, a.files, a.points, a.repeat, a.rounds)
    return 0


if __name__ == "__main__":
    sys.exit(main())
