#!/usr/bin/env python3
"""Where `sweepgate process` spends its time on a manifest: each step's wall time, from the
program's own marks (SWEEPGATE_PHASE_TIMES), on one thread and on two, for one binary or
two side by side.

    cargo build --release -p sweepgate-host --bin sweepgate
    target/bench-venv/bin/python host-sim/bench/process_phases.py --rounds 15
    target/bench-venv/bin/python host-sim/bench/process_phases.py --rounds 15 \\
        --other OLD_BINARY     # a build of another commit, with the same marks, beside it

The scan is process_vs_skrf.py's (made once under target/bench-data/, FILES x POINTS, the
same gate and pattern frequencies). Each round runs every binary on one thread and on two,
in turn, so that a drift in the machine's speed falls on all of them. Per binary and thread
count it prints the median (and smallest) of each step, the time from starting the program
to its first mark and from its last mark to its exit, and the whole run; then the median of
the rounds' ratios of one thread's whole run over two threads'. The load average before and
after, and the share of the processors' time the hypervisor gave to others meanwhile (steal,
from /proc/stat, where there is one), are printed with them.
"""
import argparse
import collections
import os
import statistics
import subprocess
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from process_vs_skrf import (  # noqa: E402
    CENTER_NS, FREQS_HZ, ROOT, SPAN_NS, cpu_ticks, load, make_scan, steal_since)


def run(binary, manifest, threads, out):
    """One run: {step: ms} from the program's marks, and the outside times."""
    args = [binary, "process", "--manifest", manifest, "--gate-center-ns", str(CENTER_NS),
            "--gate-span-ns", str(SPAN_NS), "--band-window", "kaiser:6", "--gate-shape",
            "kaiser:6", "--frequencies-hz", ",".join(repr(f) for f in FREQS_HZ), "--out", out,
            "--threads", str(threads)]
    env = dict(os.environ, SWEEPGATE_PHASE_TIMES="1")
    start = time.perf_counter()
    p = subprocess.Popen(args, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, env=env,
                         text=True)
    steps, first, last, err = {}, None, None, []
    for line in p.stderr:
        now = time.perf_counter()
        if line.startswith("phase "):
            name, rest = line[len("phase "):].split(": ", 1)
            steps[name] = float(rest.split()[0])
            first = first or now
            last = now
        else:
            err.append(line)
    if p.wait() != 0:
        raise SystemExit(f"sweepgate process failed: {''.join(err)}")
    end = time.perf_counter()
    if first is None:
        raise SystemExit(f"{binary} printed no marks: a build without SWEEPGATE_PHASE_TIMES?")
    steps.pop("start", None)
    steps["(program start to the first mark)"] = (first - start) * 1e3
    steps["(last mark to the program's exit)"] = (end - last) * 1e3
    steps["(whole run)"] = (end - start) * 1e3
    return steps


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--binary", default=os.path.join(ROOT, "target", "release", "sweepgate"))
    ap.add_argument("--other", help="a second binary (another commit's build) run beside it")
    ap.add_argument("--files", type=int, default=1440)
    ap.add_argument("--points", type=int, default=801)
    ap.add_argument("--rounds", type=int, default=7)
    a = ap.parse_args()
    manifest = make_scan(a.files, a.points)
    binaries = {"this": a.binary}
    if a.other:
        binaries["other"] = a.other
    times = collections.defaultdict(lambda: collections.defaultdict(list))
    print(f"scan: {a.files} files of {a.points} points ({manifest})")
    print("before:", load())
    ticks = cpu_ticks()
    out = os.path.join(ROOT, "target", "bench-data", "phases-report")
    for _ in range(a.rounds):
        for name, binary in binaries.items():
            for threads in (1, 2):
                for step, ms in run(binary, manifest, threads, out).items():
                    times[(name, threads)][step].append(ms)
    print("after:", load() + steal_since(ticks))
    for (name, threads), steps in times.items():
        print(f"== {name} ({binaries[name]}), {threads} thread(s), {a.rounds} runs: median ms")
        for step, ms in steps.items():
            print(f"   {step:36s} {statistics.median(ms):8.2f}  (smallest {min(ms):.2f})")
    for name in binaries:
        one, two = times[(name, 1)]["(whole run)"], times[(name, 2)]["(whole run)"]
        ratios = [x / y for x, y in zip(one, two)]
        print(f"{name}: 2 threads over 1 thread, median of {a.rounds} rounds: "
              f"{statistics.median(ratios):.2f}x (from {min(ratios):.2f}x to {max(ratios):.2f}x)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
