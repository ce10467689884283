"""Errors raise SweepgateError (a ValueError) with the command line's messages."""

import numpy as np
import pytest

import sweepgate
from conftest import REPO, run_cli

F = np.linspace(8e9, 12e9, 801)
X = np.ones((3, 801), dtype=np.complex64)


def cli_error(program, *args):
    """The command line's error message, without its `error: ` prefix."""
    p = run_cli(program, *args, check=False)
    assert p.returncode == 1, p.stderr
    line = p.stderr.strip().splitlines()[-1]
    assert line.startswith("error: "), line
    return line[len("error: "):]


def test_the_error_type_is_a_value_error():
    assert issubclass(sweepgate.SweepgateError, ValueError)
    assert sweepgate.SweepgateError.__module__ == "sweepgate"


@pytest.mark.parametrize(
    "spelling, says",
    [
        ("triangle", "window `triangle` is not known; use one of kaiser:BETA"),
        ("kaiser:99", "window `kaiser:99`: "),
        ("kaiser:x", "beta `x` is not a number"),
        ("tukey:1.5", "window `tukey:1.5`: "),
        ("hann:2", "`hann` takes no value"),
        ("kaiser-sidelobe", "give the sidelobe level in dB"),
    ],
)
def test_bad_window_spellings(spelling, says):
    with pytest.raises(sweepgate.SweepgateError, match="^band_window: ") as e:
        sweepgate.gate(X, F, center_s=20e-9, span_s=4e-9, band_window=spelling)
    assert says in str(e.value)
    with pytest.raises(sweepgate.SweepgateError, match="^shape: "):
        sweepgate.gate(X, F, center_s=20e-9, span_s=4e-9, shape=spelling)
    with pytest.raises(sweepgate.SweepgateError) as e2:
        sweepgate.parse_window(spelling)
    assert says in str(e2.value)


def test_window_message_equals_the_command_lines(sweepgate_bin, demo_recording):
    # Same options, same resolution: the same sentence, option name included.
    for option, value in [("band-window", "triangle"), ("gate-shape", "kaiser:99")]:
        want = cli_error(sweepgate_bin, "process", "--recording", demo_recording,
                         f"--{option}", value, "--out", demo_recording.parent / "never")
        with pytest.raises(sweepgate.SweepgateError) as e:
            sweepgate.process(recording=demo_recording, **{option.replace("-", "_"): value})
        assert str(e.value) == want


def test_missing_files_say_what_the_command_line_says(sweepgate_bin, tmp_path):
    missing = tmp_path / "nothing-here.rec"
    want = cli_error(sweepgate_bin, "process", "--recording", missing)
    with pytest.raises(sweepgate.SweepgateError) as e:
        sweepgate.process(recording=missing)
    assert str(e.value) == want
    with pytest.raises(sweepgate.SweepgateError, match="^reading .*nothing-here.rec: "):
        sweepgate.read_recording(missing)
    plan_missing = tmp_path / "nothing.toml"
    want = cli_error(sweepgate_bin, "plan", "--scenario", plan_missing)
    with pytest.raises(sweepgate.SweepgateError) as e:
        sweepgate.plan(plan_missing)
    assert str(e.value) == want


def test_bad_plan_file_says_what_the_command_line_says(sweepgate_bin, tmp_path):
    bad = tmp_path / "room.toml"
    bad.write_text("[sweep]\nstart_hz = 3e9\nstop_hz = 1e9\npoints = 3\nsweep_duration_s = 1\n"
                   "[range]\ndistance_m = 5\naut_height_m = 1\nprobe_height_m = 1\n")
    want = cli_error(sweepgate_bin, "plan", "--scenario", bad)
    with pytest.raises(sweepgate.SweepgateError) as e:
        sweepgate.plan(bad)
    assert str(e.value) == want and "\n" not in want


@pytest.mark.parametrize(
    "sweeps, freqs, says",
    [
        (np.ones((2, 3, 801)), F, "not an array of shape (2, 3, 801)"),
        (np.ones((3, 800)), F, "3 × 800 array, but frequencies_hz has 801 points"),
        (np.ones(800), F, "1 × 800 array, but frequencies_hz has 801 points"),
        (X, F.reshape(1, -1), "frequencies_hz: one frequency per sweep point"),
        (X, np.r_[F[:400], F[400:] + 1e5], "frequencies_hz: not evenly spaced: point 400"),
        (X[:, :1], F[:1], "frequencies_hz: 1 frequencies; a sweep needs at least 2"),
        (np.array([["a", "b"]]), F[:2], "numbers are expected"),
        (X, F + 1j, "frequencies_hz: real numbers are expected"),
    ],
)
def test_bad_shapes(sweeps, freqs, says):
    with pytest.raises(sweepgate.SweepgateError) as e:
        sweepgate.gate(sweeps, freqs, center_s=20e-9, span_s=4e-9)
    assert says in str(e.value)


def test_not_finite_values():
    for bad, text in [(np.nan, "nan"), (np.inf, "inf"), (complex(0, -np.inf), "-infj")]:
        x = X.astype(np.complex128)
        x[2, 17] = bad
        with pytest.raises(sweepgate.SweepgateError, match=r"sweeps: row 2, point 17 is not finite") as e:
            sweepgate.gate(x, F, center_s=20e-9, span_s=4e-9)
        assert text in str(e.value).lower()
        with pytest.raises(sweepgate.SweepgateError, match="row 2, point 17"):
            sweepgate.impulse_response(x, F)
        with pytest.raises(sweepgate.SweepgateError, match="row 2, point 17"):
            sweepgate.peak_gate(x, F)
    # Beyond single precision: refused, not silently infinite.
    big = X.astype(np.complex128)
    big[0, 3] = 1e39
    with pytest.raises(sweepgate.SweepgateError, match="row 0, point 3 is not finite"):
        sweepgate.gate(big, F, center_s=20e-9, span_s=4e-9)
    f = F.copy()
    f[5] = np.nan
    with pytest.raises(sweepgate.SweepgateError, match="frequencies_hz: point 5 is not finite"):
        sweepgate.gate(X, f, center_s=20e-9, span_s=4e-9)
    with pytest.raises(sweepgate.SweepgateError, match="gate: "):
        sweepgate.gate(X, F, center_s=np.nan, span_s=4e-9)


def test_gate_settings_the_core_refuses():
    # 8-12 GHz in 801 points: alias-free range 200 ns, time step 0.195 ns at M = 1024.
    cases = [
        (dict(center_s=250e-9, span_s=4e-9), "centre must lie in 0 s up to the alias-free range"),
        (dict(center_s=-1e-9, span_s=4e-9), "centre must lie in 0 s up to the alias-free range"),
        (dict(center_s=20e-9, span_s=0.0), "span must be above 0 s"),
        (dict(center_s=20e-9, span_s=300e-9), "span must be shorter than the alias-free range"),
        (dict(center_s=20e-9, span_s=0.1e-9), "span covers fewer than 2 time samples"),
    ]
    for c, says in cases:
        with pytest.raises(sweepgate.SweepgateError, match="^gate: gate ") as e:
            sweepgate.gate(X, F, **c)
        assert says in str(e.value)
    with pytest.raises(sweepgate.SweepgateError, match="fft_size 1000 is not one of 64, 128"):
        sweepgate.gate(X, F, center_s=20e-9, span_s=4e-9, fft_size=1000)
    with pytest.raises(sweepgate.SweepgateError, match="^gate: .*801.*256"):
        sweepgate.gate(X, F, center_s=20e-9, span_s=4e-9, fft_size=256)
    with pytest.raises(sweepgate.SweepgateError, match="path: `fast` is not known"):
        sweepgate.gate(X, F, center_s=20e-9, span_s=4e-9, path="fast")
    with pytest.raises(sweepgate.SweepgateError, match="threads: 0"):
        sweepgate.gate(X, F, center_s=20e-9, span_s=4e-9, threads=0)
    with pytest.raises(sweepgate.SweepgateError, match="not on or near the grid"):
        sweepgate.gate(X, F, center_s=20e-9, span_s=4e-9, at_hz=[20e9])
    g = sweepgate.make_gate(F, center_s=20e-9, span_s=4e-9)
    with pytest.raises(sweepgate.SweepgateError, match="grid index 801 is not below"):
        g.apply_at(X, [0, 801])
    with pytest.raises(sweepgate.SweepgateError, match="no sweeps to find a gate in"):
        sweepgate.gate(np.zeros((0, 801)), F)


def test_process_and_plan_argument_errors(tmp_path):
    with pytest.raises(sweepgate.SweepgateError, match="nothing to process"):
        sweepgate.process()
    with pytest.raises(sweepgate.SweepgateError, match="needs both gain_table and reference"):
        sweepgate.process(recording=tmp_path / "x.rec", gain_table=tmp_path / "g.csv")
    with pytest.raises(sweepgate.SweepgateError, match="^plan dict: "):
        sweepgate.plan({"sweep": {"start_hz": 1e9}})
    with pytest.raises(sweepgate.SweepgateError, match="^plan dict: .*not a number, text"):
        sweepgate.plan({"sweep": {"start_hz": object()}})
    with pytest.raises(sweepgate.SweepgateError, match="^band_window: "):
        sweepgate.plan(REPO / "host-sim" / "plans" / "narrow-patch.toml", band_window="oval")
