"""Comparisons of Python results with what the `sweepgate` program writes."""

import csv
import math

from conftest import record

TOL = 1e-6


def read_csv(path):
    with open(path, newline="") as fh:
        return list(csv.DictReader(fh))


def json_leaves(a, b, where=""):
    """Yields (where, a, b) for every leaf of two JSON values, after checking that both have
    the same structure."""
    if isinstance(a, dict):
        assert isinstance(b, dict) and sorted(a) == sorted(b), f"{where}: keys differ"
        for k in a:
            yield from json_leaves(a[k], b[k], f"{where}.{k}")
    elif isinstance(a, list):
        assert isinstance(b, list) and len(a) == len(b), f"{where}: lengths differ"
        for i, (x, y) in enumerate(zip(a, b)):
            yield from json_leaves(x, y, f"{where}[{i}]")
    else:
        yield where, a, b


def largest_json_difference(a, b):
    """Largest relative difference of the numbers of two JSON values; other leaves equal."""
    worst = 0.0
    for where, x, y in json_leaves(a, b):
        if isinstance(x, (int, float)) and not isinstance(x, bool):
            assert isinstance(y, (int, float)), where
            scale = max(abs(x), abs(y), 1e-300)
            worst = max(worst, abs(x - y) / scale)
        else:
            assert x == y, f"{where}: {x!r} != {y!r}"
    return worst


def compare_with_pattern_csv(result, csv_path, label):
    """Every row of the command's pattern.csv against the Python arrays: equal to the
    printed digits (a difference of at most half the last printed digit)."""
    rows = read_csv(csv_path)
    nb, nf = result.gated.shape
    assert len(rows) == nb * nf
    worst = 0.0
    raw_db, gated_db, phase = result.raw_db, result.gated_db, result.gated_phase_deg
    truth_db = result.truth_db
    for i, row in enumerate(rows):
        b, fi = divmod(i, nf)
        pairs = [
            (float(row["angle_deg"]), result.angle_deg[b], 5e-4),
            (float(row["frequency_hz"]), result.frequencies_hz[fi], 0.5),
            (float(row["raw_db"]), raw_db[b, fi], 5e-5),
            (float(row["gated_db"]), gated_db[b, fi], 5e-5),
        ]
        if row["echo_db"]:
            pairs.append((float(row["echo_db"]), result.echo_db[b], 5e-3))
        else:
            assert math.isnan(result.echo_db[b])
        if "truth_db" in row:
            pairs.append((float(row["truth_db"]), truth_db[b, fi], 5e-5))
        if "gain_dbi" in row:
            pairs.append((float(row["gain_dbi"]), result.gain_dbi[b, fi], 5e-5))
        for printed, value, half_digit in pairs:
            d = abs(printed - value)
            assert d <= half_digit + TOL, (i, row, value)
            worst = max(worst, d - half_digit if d > half_digit else 0.0)
        dphase = (float(row["gated_phase_deg"]) - phase[b, fi] + 180.0) % 360.0 - 180.0
        assert abs(dphase) <= 5e-4 + TOL
        assert int(row["sweeps"]) == result.sweeps[b]
        assert row["flags"] == result.flag_words[b]
    record(f"{label}: pattern.csv beyond its printed digits", worst, TOL)
