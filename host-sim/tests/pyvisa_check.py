"""Cross-check of the VNA link with outside, general-purpose reference libraries.

1. pyvisa with the pyvisa-py backend opens TCPIP::127.0.0.1::<port>::SOCKET to
   `sweepgate instrument`, queries *IDN? and sweeps with query_binary_values in REAL,32
   and REAL,64, both byte orders (FORMat:BORDer NORMal and SWAPped), and ASCii with
   query_ascii_values, and compares every value with what the simulator wrote (the
   instrument's `--dump` JSON files, the exact f32 values it holds).
2. The Rust core decoder (`sweepgate read-block`) parses blocks built by pyvisa's own
   pyvisa.util.to_ieee_block from numpy data, and the values must come back exactly.

Usage: python pyvisa_check.py PATH_TO_SWEEPGATE_BINARY
Prints `pyvisa check: N passed, M failed` last; exit status 1 on any failure.
"""

import json
import os
import subprocess
import sys
import tempfile

import numpy as np
import pyvisa
from pyvisa.util import to_ieee_block

PASSED = 0
FAILED = 0


def check(name, ok, detail=""):
    global PASSED, FAILED
    if ok:
        PASSED += 1
        print(f"ok   {name}")
    else:
        FAILED += 1
        print(f"FAIL {name} {detail}")


def dumped(dump_dir, n):
    with open(os.path.join(dump_dir, f"sweep-{n}.json")) as f:
        d = json.load(f)
    inter = np.empty(2 * d["points"], dtype=np.float32)
    inter[0::2] = np.array(d["re"], dtype=np.float32)
    inter[1::2] = np.array(d["im"], dtype=np.float32)
    return d["index"], inter


def instrument_checks(binary, tmp):
    dump_dir = os.path.join(tmp, "dump")
    os.makedirs(dump_dir)
    proc = subprocess.Popen(
        [binary, "instrument", "--port", "0", "--dump", dump_dir],
        stdout=subprocess.PIPE,
        stderr=subprocess.DEVNULL,
        text=True,
    )
    try:
        first = proc.stdout.readline().strip()
        check("instrument prints its port", first.startswith("listening on 127.0.0.1:"), first)
        port = int(first.rsplit(":", 1)[1])
        rm = pyvisa.ResourceManager("@py")
        inst = rm.open_resource(
            f"TCPIP::127.0.0.1::{port}::SOCKET",
            read_termination="\n",
            write_termination="\n",
            timeout=10000,
        )
        idn = inst.query("*IDN?").strip()
        fields = idn.split(",")
        check("*IDN? names our product", fields[:3] == ["sweepgate", "simulated-vna", "0"], idn)
        check("*IDN? has the four IEEE 488.2 fields", len(fields) == 4, idn)

        points = 101
        inst.write(f"SENSe:SWEep:POINts {points}")
        inst.write("INITiate:IMMediate")
        check("*OPC? after INITiate", inst.query("*OPC?").strip() == "1")
        index, expected = dumped(dump_dir, 0)
        check("first sweep is sweep 0 of the scan", index == 0, index)
        check("the sweep is not empty", float(np.max(np.abs(expected))) > 1e-4)

        cases = [
            ("REAL,32", "NORMal", "f", True),
            ("REAL,32", "SWAPped", "f", False),
            ("REAL,64", "NORMal", "d", True),
            ("REAL,64", "SWAPped", "d", False),
        ]
        for form, bord, dt, big in cases:
            inst.write(f"FORMat:DATA {form};FORMat:BORDer {bord}")
            vals = inst.query_binary_values(
                "TRACe:DATA?", datatype=dt, is_big_endian=big, container=np.array
            )
            same = len(vals) == 2 * points and np.array_equal(
                vals, expected.astype(vals.dtype)
            )
            check(f"query_binary_values {form} {bord} ('{dt}') equals the simulator's sweep", same)
        # The comparison can fail: the wrong byte order gives other values.
        inst.write("FORMat:DATA REAL,32;FORMat:BORDer SWAPped")
        wrong = inst.query_binary_values(
            "TRACe:DATA?", datatype="f", is_big_endian=True, container=np.array
        )
        check("wrong byte order is detected", not np.array_equal(wrong, expected))

        inst.write("FORMat:DATA ASCii")
        vals = inst.query_ascii_values("TRACe:DATA?", container=np.array)
        check(
            "query_ascii_values ASCii equals the simulator's sweep",
            len(vals) == 2 * points and np.array_equal(vals.astype(np.float32), expected),
        )

        inst.write("INITiate")
        inst.query("*OPC?")
        index1, expected1 = dumped(dump_dir, 1)
        inst.write("FORMat:DATA REAL,64;FORMat:BORDer NORMal")
        vals = inst.query_binary_values(
            "TRACe:DATA?", datatype="d", is_big_endian=True, container=np.array
        )
        check("next INITiate takes the next sweep", index1 == 1, index1)
        check(
            "second sweep equals the simulator's",
            np.array_equal(vals, expected1.astype(np.float64))
            and not np.array_equal(expected1, expected),
        )

        inst.write("SENSe:BOGus 1")
        err = inst.query("SYSTem:ERRor?").strip()
        check("error queue reports -113", err == '-113,"Undefined header"', err)
        err = inst.query("SYSTem:ERRor?").strip()
        check("error queue then empty", err == '0,"No error"', err)
        inst.close()
        rm.close()
    finally:
        proc.terminate()
        proc.wait(timeout=10)


def read_block(binary, path, points, fmt, order):
    r = subprocess.run(
        [binary, "read-block", path, "--points", str(points), "--format", fmt,
         "--byte-order", order],
        capture_output=True,
        text=True,
    )
    if r.returncode != 0:
        return None, r.stderr.strip()
    d = json.loads(r.stdout)
    inter = np.empty(2 * points, dtype=np.float32)
    inter[0::2] = np.array(d["re"], dtype=np.float32)
    inter[1::2] = np.array(d["im"], dtype=np.float32)
    return inter, ""


def to_ieee_block_checks(binary, tmp):
    # Reference: pyvisa to_ieee_block with numpy, general-purpose reference libraries.
    rng = np.random.default_rng(20260)
    for points in (1, 64, 700):
        data64 = rng.standard_normal(2 * points) * 10.0 ** rng.uniform(-6, 3, 2 * points)
        for dt, fmt in (("f", "real32"), ("d", "real64")):
            data = data64.astype(np.float32) if dt == "f" else data64
            for big, order in ((True, "normal"), (False, "swapped")):
                block = to_ieee_block(data, datatype=dt, is_big_endian=big)
                path = os.path.join(tmp, f"block-{points}-{dt}-{order}.bin")
                with open(path, "wb") as f:
                    f.write(block)
                got, err = read_block(binary, path, points, fmt, order)
                # REAL,64 is narrowed to f32 by the core: compare with numpy's rounding.
                want = data.astype(np.float32)
                check(
                    f"core decodes to_ieee_block {points} points '{dt}' {order}",
                    got is not None and np.array_equal(got, want),
                    err,
                )
    # And refuses one built for another point count.
    data = rng.standard_normal(2 * 63).astype(np.float32)
    path = os.path.join(tmp, "block-short.bin")
    with open(path, "wb") as f:
        f.write(to_ieee_block(data, datatype="f", is_big_endian=True))
    got, err = read_block(binary, path, 64, "real32", "normal")
    check("core rejects a to_ieee_block of 63 points when 64 are expected",
          got is None and "63 points" in err, err)


def main():
    binary = os.path.abspath(sys.argv[1])
    with tempfile.TemporaryDirectory(prefix="sweepgate-pyvisa-") as tmp:
        for part in (instrument_checks, to_ieee_block_checks):
            try:
                part(binary, tmp)
            except Exception as e:  # a crash counts as a failure, and the rest still runs
                check(f"{part.__name__} ran to the end", False, repr(e))
    print(f"pyvisa check: {PASSED} passed, {FAILED} failed")
    sys.exit(1 if FAILED else 0)


if __name__ == "__main__":
    main()
