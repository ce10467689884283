"""`sweepgate.process` and `sweepgate.read_recording` against the real `sweepgate` program on
the same files: a recording made by `sweepgate simulate`, and a manifest of Touchstone files
written here."""

import json
import math
import struct
import tempfile
import zlib
from pathlib import Path

import numpy as np
import pytest

import sweepgate
from compare import compare_with_pattern_csv, largest_json_difference
from conftest import record, run_cli
from reference import gate_chain, renormalization, renormalized_difference, two_path

TOL = 1e-6


def test_recording_process_equals_the_command(sweepgate_bin, demo_recording, tmp_path):
    cli_out = tmp_path / "cli"
    run_cli(sweepgate_bin, "process", "--recording", demo_recording, "--out", cli_out)
    result = sweepgate.process(recording=demo_recording)
    assert result.out is None
    assert result.gated.shape == (360, 3) and result.truth is not None
    compare_with_pattern_csv(result, cli_out / "pattern.csv", "recording, default settings")
    summary = json.loads((cli_out / "summary.json").read_text())
    d = largest_json_difference(result.summary, summary)
    record("recording, default settings: summary.json numbers (relative)", d, TOL)
    assert d <= TOL
    assert result.gate["source"] == "planner"
    assert result.gate["center_s"] * 1e9 == pytest.approx(
        summary["settings"]["gate"]["center_ns"], rel=1e-12)

    # With out=..., the report folder is the command's, byte for byte.
    py_out = tmp_path / "py"
    again = sweepgate.process(demo_recording, out=py_out)
    assert again.out == py_out
    for name in ["pattern.csv", "summary.json"]:
        assert (py_out / name).read_bytes() == (cli_out / name).read_bytes(), name
    assert sorted(p.name for p in py_out.iterdir()) == sorted(p.name for p in cli_out.iterdir())


def test_recording_process_with_options(sweepgate_bin, demo_recording, tmp_path):
    opts = dict(gate_center_ns=13.1, gate_span_ns=3.2, band_window="kaiser:8",
                gate_shape="kaiser:4")
    freqs = [9.5e9, 10.5e9, 10.51e9]
    run_cli(sweepgate_bin, "process", "--recording", demo_recording, "--out", tmp_path,
            "--gate-center-ns", "13.1", "--gate-span-ns", "3.2", "--band-window", "kaiser:8",
            "--gate-shape", "kaiser:4", "--frequencies-hz", "9.5e9,10.5e9,10.51e9")
    result = sweepgate.process(recording=demo_recording, frequencies_hz=freqs, **opts)
    compare_with_pattern_csv(result, tmp_path / "pattern.csv", "recording, options")
    d = largest_json_difference(result.summary, json.loads((tmp_path / "summary.json").read_text()))
    record("recording, options: summary.json numbers (relative)", d, TOL)
    assert d <= TOL
    assert result.gate["band_window"] == "kaiser:8" and result.gate["shape"] == "kaiser:4"
    assert result.gate["source"] == "command line"
    assert any("nearest grid point" in w for w in result.warnings)


# --- a manifest of Touchstone files written here ------------------------------------------

F = np.linspace(8e9, 12e9, 401)  # step 10 MHz, alias-free 100 ns
ANGLES = np.arange(-90.0, 91.0, 5.0)


def scan_sweeps():
    """A direct path at 14 ns with a cos^2 pattern, a floor echo at 19.5 ns and a wall echo
    at 31 ns that do not turn with the antenna."""
    rows = []
    for a in ANGLES:
        level = max(math.cos(math.radians(a)) ** 2, 0.01)
        rows.append(two_path(F, [14e-9, 19.5e-9, 31e-9], [1e-2 * level, 3e-3, 1e-3]))
    return np.array(rows)


def write_touchstone(path, s21, s11):
    lines = ["! written by the sweepgate Python tests", "# Hz S RI R 50"]
    for f, a, b in zip(F.tolist(), s11.tolist(), s21.tolist()):
        lines.append(f"{f!r} {a.real!r} {a.imag!r} {b.real!r} {b.imag!r} {b.real!r} {b.imag!r} "
                     f"{a.real!r} {a.imag!r}")
    path.write_text("\n".join(lines) + "\n")


@pytest.fixture(scope="module")
def manifest(tmp_path_factory):
    folder = tmp_path_factory.mktemp("manifest")
    x = scan_sweeps()
    reflection = two_path(F, [2e-9], [0.1])
    rows = ["angle_deg,file"]
    for i, a in enumerate(ANGLES.tolist()):
        name = f"a{i:03d}.s2p"
        write_touchstone(folder / name, x[i], reflection)
        rows.append(f"{a!r},{name}")
    (folder / "scan.csv").write_text("\n".join(rows) + "\n")
    return folder / "scan.csv", x


def test_manifest_process_equals_the_command_and_the_gate(sweepgate_bin, manifest, tmp_path):
    path, x = manifest
    run_cli(sweepgate_bin, "process", "--manifest", path, "--out", tmp_path,
            "--gate-center-ns", "14", "--gate-span-ns", "4", "--frequencies-hz", "9e9,10e9,11e9")
    result = sweepgate.process(path, gate_center_ns=14, gate_span_ns=4,
                               frequencies_hz=[9e9, 10e9, 11e9])
    compare_with_pattern_csv(result, tmp_path / "pattern.csv", "manifest")
    d = largest_json_difference(result.summary, json.loads((tmp_path / "summary.json").read_text()))
    record("manifest: summary.json numbers (relative)", d, TOL)
    assert d <= TOL
    assert np.array_equal(result.angle_deg, ANGLES)
    # The same sweeps through sweepgate.gate (the Touchstone reader narrows to single
    # precision as the array conversion does): the same numbers.
    idx = [100, 200, 300]
    mine = sweepgate.gate(x, F, center_s=14e-9, span_s=4e-9, at_hz=[9e9, 10e9, 11e9])
    d = float(np.max(np.abs(result.gated - mine)) / np.max(np.abs(mine)))
    record("manifest: process vs sweepgate.gate (relative)", d, TOL)
    assert d <= TOL
    assert np.array_equal(result.raw, x.astype(np.complex64)[:, idx])
    # And the chain in numpy (tests/reference.py).
    shape, band = sweepgate.DEFAULT_GATE_SHAPE, sweepgate.DEFAULT_BAND_WINDOW
    want, _ = gate_chain(x.astype(np.complex64), F[1] - F[0], 14e-9, 4e-9, band, shape, 1024)
    r = renormalization(401, F[1] - F[0], 14e-9, 4e-9, band, shape, 1024)
    d = renormalized_difference(result.gated, want[:, idx], r[idx])
    record("manifest: process vs numpy chain", d, 1e-5)
    assert d < 1e-5
    # Gating removes the echoes: the gated pattern follows cos^2 within 0.2 dB down to -20 dB.
    level = np.maximum(np.cos(np.radians(ANGLES)) ** 2, 0.01) * 1e-2
    err = np.abs(result.gated_db[:, 1] - 20 * np.log10(level))
    assert np.max(err[level > 1e-4]) < 0.2


def test_manifest_automatic_gate_is_the_data_gate(manifest):
    path, x = manifest
    result = sweepgate.process(manifest=path)
    d = sweepgate.data_gate(x, F, angles_deg=ANGLES)
    assert result.gate["center_s"] == pytest.approx(d.center_s, rel=1e-12)
    assert result.gate["span_s"] == pytest.approx(d.span_s, rel=1e-12)
    assert result.gate["source"] == "chosen from the data"
    p = sweepgate.peak_gate(x, F)
    assert float(ANGLES[p.row]) == 0.0  # the strongest sweep is at boresight
    assert result.impulse is not None and result.impulse["angle_deg"] == 0.0
    t, h = sweepgate.impulse_response(x[p.row], F)
    assert np.allclose(result.impulse["time_ns"], t * 1e9, rtol=1e-12)
    assert np.allclose(result.impulse["magnitude"], np.abs(h), rtol=1e-6, atol=0)


def test_gain_by_substitution_equals_the_command(sweepgate_bin, manifest, tmp_path):
    path, _ = manifest
    table = tmp_path / "horn.csv"
    table.write_text("frequency_hz,gain_dbi\n8e9,15.0\n12e9,17.0\n")
    reference = path.parent / "a018.s2p"  # the sweep at boresight
    run_cli(sweepgate_bin, "process", "--manifest", path, "--out", tmp_path / "cli",
            "--gate-center-ns", "14", "--gate-span-ns", "4", "--gain-table", table,
            "--reference", reference)
    def temporary_reports():
        return set(Path(tempfile.gettempdir()).glob("sweepgate-python-report-*"))

    before = temporary_reports()
    result = sweepgate.process(manifest=path, gate_center_ns=14, gate_span_ns=4,
                               gain_table=table, reference=reference)
    assert result.gain_dbi is not None and result.out is None
    assert temporary_reports() == before  # the report it needed was removed again
    compare_with_pattern_csv(result, tmp_path / "cli" / "pattern.csv", "gain by substitution")
    # At boresight the AUT is the reference: its gain is the table's, 16 dBi at 10 GHz.
    b = int(np.flatnonzero(result.angle_deg == 0.0)[0])
    assert result.gain_dbi[b, 0] == pytest.approx(16.0, abs=1e-9)


# --- recordings read into arrays ----------------------------------------------------------

SYNC = bytes([0xA5, 0x53, 0x47, 0x52])


def parse_recording(data):
    """An independent reader of the recording format as host-sim/src/formats/recording.rs
    documents it: 12-byte file header, then records of sync, u32 length, u8 kind, payload,
    u32 CRC-32 (zlib's) of length, kind and payload. Stops at the first bad record."""
    assert data[:8] == b"SWEEPREC"
    at, out = 12, {"header": None, "sweeps": [], "index": [], "positions": [], "truth": [],
                   "end": None, "complete_records_end": 12}
    while at + 13 <= len(data):
        assert data[at:at + 4] == SYNC
        (length,) = struct.unpack_from("<I", data, at + 4)
        kind = data[at + 8]
        if at + 13 + length > len(data):
            break
        payload = data[at + 9:at + 9 + length]
        (crc,) = struct.unpack_from("<I", data, at + 9 + length)
        assert crc == zlib.crc32(data[at + 4:at + 9 + length])
        if kind == 1:
            out["header"] = json.loads(payload)
        elif kind == 2:
            index, _, _, k = struct.unpack_from("<IQQI", payload, 0)
            v = np.frombuffer(payload, dtype="<f4", offset=24, count=2 * k)
            out["sweeps"].append(v[0::2] + 1j * v[1::2])
            out["index"].append(index)
        elif kind == 3:
            out["positions"].append(struct.unpack_from("<Qqd", payload, 0))
        elif kind == 4:
            angle, n = struct.unpack_from("<dI", payload, 0)
            out["truth"].append((angle, n))
        elif kind == 5:
            out["end"] = struct.unpack_from("<QQQ", payload, 0)
        at += 13 + length
        out["complete_records_end"] = at
    return out


def test_read_recording_equals_an_independent_reader(demo_recording):
    data = demo_recording.read_bytes()
    want = parse_recording(data)
    rec = sweepgate.read_recording(demo_recording)
    assert rec.complete and rec.damage == [] and rec.version == 1
    assert rec.header == want["header"]
    assert rec.sweeps.dtype == np.complex64
    assert rec.sweeps.shape == (len(want["sweeps"]), want["header"]["grid"]["points"])
    assert np.array_equal(rec.sweeps, np.array(want["sweeps"]).astype(np.complex64))
    assert list(rec.sweep_index) == want["index"]
    pos = np.array(want["positions"])
    assert np.array_equal(rec.position_t_us, pos[:, 0].astype(np.uint64))
    assert np.array_equal(rec.position_angle_deg, pos[:, 2])
    assert [(t["angle_deg"], len(t["s21"])) for t in rec.truth] == want["truth"]
    assert (rec.end["sweeps"], rec.end["positions"], rec.end["truths"]) == want["end"]
    g = want["header"]["grid"]
    assert np.allclose(rec.frequencies_hz, g["start_hz"] + g["step_hz"] * np.arange(g["points"]),
                       rtol=1e-15, atol=0)
    assert rec.stop.startswith("complete")


def test_cut_recording_is_recovered_as_the_command_does(sweepgate_bin, demo_recording, tmp_path):
    data = demo_recording.read_bytes()
    cut = tmp_path / "cut.rec"
    cut.write_bytes(data[: int(len(data) * 0.6)])
    want = parse_recording(cut.read_bytes())
    rec = sweepgate.read_recording(cut)
    assert not rec.complete and rec.end is None
    assert rec.stop_offset == want["complete_records_end"]
    assert "ends inside a record" in rec.stop
    assert len(rec.sweeps) == len(want["sweeps"]) > 0
    run_cli(sweepgate_bin, "process", "--recording", cut, "--out", tmp_path / "cli")
    result = sweepgate.process(recording=cut)
    compare_with_pattern_csv(result, tmp_path / "cli" / "pattern.csv", "cut recording")
