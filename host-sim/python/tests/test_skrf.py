"""scikit-rf interop: Networks in, gated Networks out, through the same core gate; a scan of
Networks written as a manifest and processed by `sweepgate.process` and the command."""

import numpy as np
import pytest

skrf = pytest.importorskip("skrf")

import sweepgate  # noqa: E402
import sweepgate.skrf as sgskrf  # noqa: E402
from conftest import record, run_cli  # noqa: E402
from reference import gate_chain, renormalization, renormalized_difference, two_path  # noqa: E402
from compare import compare_with_pattern_csv  # noqa: E402

F = np.linspace(8e9, 12e9, 401)
ANGLES = np.arange(-60.0, 61.0, 10.0)


def scan():
    """One 2-port Network per angle: S21 a direct path at 14 ns with a cos pattern and a
    fixed echo at 22 ns; S11 a reflection at 2 ns with a fixed echo at 6 ns."""
    freq = skrf.Frequency.from_f(F, unit="hz")
    out = []
    for a in ANGLES:
        s = np.zeros((len(F), 2, 2), dtype=complex)
        s21 = two_path(F, [14e-9, 22e-9], [0.1 * np.cos(np.radians(a)), 0.03])
        s[:, 1, 0] = s[:, 0, 1] = s21
        s[:, 0, 0] = s[:, 1, 1] = two_path(F, [2e-9, 6e-9], [0.2, 0.05])
        out.append(skrf.Network(frequency=freq, s=s, z0=50, name=f"horn {a:+.0f}"))
    return out


def test_gated_networks_equal_the_array_gate_and_numpy():
    nets = scan()
    before = [n.s.copy() for n in nets]
    gated = sgskrf.gate_networks(nets, ANGLES, center_s=14e-9, span_s=4e-9)
    assert len(gated) == len(nets)
    stack = np.stack([n.s for n in nets])
    for row, col in [(1, 0), (0, 1), (0, 0), (1, 1)]:
        got = np.stack([g.s[:, row, col] for g in gated])
        mine = sweepgate.gate(stack[:, :, row, col], F, center_s=14e-9, span_s=4e-9)
        assert np.array_equal(got, mine.astype(complex))
    # S21 against the chain in numpy (tests/reference.py).
    band, shape = sweepgate.DEFAULT_BAND_WINDOW, sweepgate.DEFAULT_GATE_SHAPE
    x = stack[:, :, 1, 0].astype(np.complex64)
    want, _ = gate_chain(x, F[1] - F[0], 14e-9, 4e-9, band, shape, 1024)
    r = renormalization(401, F[1] - F[0], 14e-9, 4e-9, band, shape, 1024)
    d = renormalized_difference(np.stack([g.s[:, 1, 0] for g in gated]), want, r)
    record("scikit-rf: gated S21 vs numpy chain", d, 1e-5)
    assert d < 1e-5
    # The Networks keep their frequencies and impedances; the inputs are untouched.
    for n, g, a, s in zip(nets, gated, ANGLES, before):
        assert np.array_equal(g.f, n.f) and np.array_equal(g.z0, n.z0)
        assert g.name == f"{n.name} gated at {a:g}°"
        assert g.params["angle_deg"] == a
        assert np.array_equal(n.s, s)


def test_only_the_named_parameters_are_gated():
    nets = scan()
    gated = sgskrf.gate_networks(nets, center_s=14e-9, span_s=4e-9, parameters=["S21"])
    for n, g in zip(nets, gated):
        assert np.array_equal(g.s[:, 0, 0], n.s[:, 0, 0])
        assert np.array_equal(g.s[:, 0, 1], n.s[:, 0, 1])
        assert not np.allclose(g.s[:, 1, 0], n.s[:, 1, 0], atol=1e-3)
        assert g.name == f"{n.name} gated"


def test_automatic_gate_per_parameter_and_the_kernel_path():
    n = scan()[6]  # boresight
    g = sgskrf.gate_network(n)
    for row, col, delay in [(1, 0, 14e-9), (0, 0, 2e-9)]:
        p = sweepgate.peak_gate(n.s[:, row, col], F)
        assert abs(p.center_s - delay) < 0.1e-9  # each parameter's own arrival
        assert np.array_equal(g.s[:, row, col], sweepgate.gate(n.s[:, row, col], F).astype(complex))
    # Gating removed the echoes: |S21| is the direct path's 0.1 within 0.1 dB mid-band.
    mid = slice(40, 361)
    assert np.max(np.abs(20 * np.log10(np.abs(g.s[mid, 1, 0]) / 0.1))) < 0.1
    k = sgskrf.gate_network(n, center_s=14e-9, span_s=4e-9, path="kernel", parameters=["S21"])
    f = sgskrf.gate_network(n, center_s=14e-9, span_s=4e-9, parameters=["S21"])
    assert np.max(np.abs(k.s[:, 1, 0] - f.s[:, 1, 0])) < 1e-4 * np.max(np.abs(f.s[:, 1, 0]))


def test_touchstone_round_trip_through_the_command(sweepgate_bin, tmp_path):
    nets = scan()
    manifest = sgskrf.write_manifest(nets, ANGLES, tmp_path / "scan")
    gated = sgskrf.gate_networks(nets, center_s=14e-9, span_s=4e-9, parameters=["S21"])
    result = sweepgate.process(manifest, gate_center_ns=14, gate_span_ns=4,
                               frequencies_hz=[9e9, 10e9, 11e9])
    idx = [100, 200, 300]
    mine = np.stack([g.s[idx, 1, 0] for g in gated])
    d = float(np.max(np.abs(result.gated - mine)) / np.max(np.abs(mine)))
    record("scikit-rf: gated Networks vs process of their Touchstone files", d, 1e-6)
    assert d < 1e-6
    assert np.array_equal(result.angle_deg, ANGLES)
    run_cli(sweepgate_bin, "process", "--manifest", manifest, "--out", tmp_path / "cli",
            "--gate-center-ns", "14", "--gate-span-ns", "4", "--frequencies-hz", "9e9,10e9,11e9")
    compare_with_pattern_csv(result, tmp_path / "cli" / "pattern.csv", "scikit-rf manifest")
    # A gated Network written by scikit-rf reads back equal.
    gated[0].write_touchstone(filename="gated", dir=str(tmp_path))
    back = skrf.Network(str(tmp_path / "gated.s2p"))
    assert np.array_equal(back.s, gated[0].s)


def test_refusals():
    nets = scan()
    with pytest.raises(sweepgate.SweepgateError, match="the network has 2 port"):
        sgskrf.gate_network(nets[0], parameters=["S31"])
    with pytest.raises(sweepgate.SweepgateError, match="only S parameters"):
        sgskrf.gate_network(nets[0], parameters=["Z21"])
    with pytest.raises(sweepgate.SweepgateError, match="angles_deg: 2 angles for 13 networks"):
        sgskrf.gate_networks(nets, [0.0, 1.0])
    other = nets[1].copy()
    other.frequency = skrf.Frequency.from_f(F * 1.01, unit="hz")
    with pytest.raises(sweepgate.SweepgateError, match="network 1 .* other frequencies"):
        sgskrf.gate_networks([nets[0], other])
    assert sgskrf.parameter_index("s21", 2) == (1, 0)
    assert sgskrf.parameter_index("S10,2", 12) == (9, 1)
