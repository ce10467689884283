"""Gating numpy arrays: the core through Python against the chain written in numpy
(tests/reference.py), the kernel path against the FFT path, impulse responses and the time
axis."""

import numpy as np
import pytest

import sweepgate
from conftest import record
from reference import (
    gate_chain,
    gate_window,
    impulse_response,
    kaiser_beta_for_sidelobe_db,
    largest_relative_difference,
    renormalization,
    renormalized_difference,
    two_path,
)

TOL = 1e-5

WINDOWS = [
    "kaiser:6",
    "kaiser-sidelobe:50",
    "tukey:0.5",
    "hann",
    "hamming",
    "blackman-harris",
    "rectangular",
]


def grid(start_hz, stop_hz, k):
    return np.linspace(start_hz, stop_hz, k)


def random_sweeps(n, k, seed):
    rng = np.random.default_rng(seed)
    return (rng.standard_normal((n, k)) + 1j * rng.standard_normal((n, k))).astype(np.complex64)


def room_sweeps(f, n, seed):
    """N sweeps of a direct path at 20 ns and two echoes, amplitudes varying by row."""
    rng = np.random.default_rng(seed)
    rows = []
    for _ in range(n):
        a = rng.uniform(0.2, 1.0)
        rows.append(two_path(f, [20e-9, 27.3e-9, 41.1e-9], [a, 0.4 * rng.uniform(), 0.2]))
    return np.array(rows).astype(np.complex64)


@pytest.mark.parametrize("band", WINDOWS)
@pytest.mark.parametrize("shape", ["tukey:0.3", "kaiser:4", "hann", "rectangular"])
def test_fft_path_equals_numpy_chain(band, shape):
    # Reference: the chain written in numpy (tests/reference.py), double precision.
    f = grid(8e9, 12e9, 801)
    step = f[1] - f[0]
    x = np.vstack([room_sweeps(f, 6, 1), random_sweeps(4, 801, 2)])
    r = renormalization(801, step, 20.1e-9, 4.3e-9, band, shape, 1024)
    if np.min(np.abs(r)) < 1e-4:
        # The core refuses a renormalization that would amplify by more than 80 dB
        # (|r| < 1e-4); numpy's r says where that is.
        with pytest.raises(sweepgate.SweepgateError, match="amplify by over 80 dB"):
            sweepgate.gate(x, f, center_s=20.1e-9, span_s=4.3e-9, band_window=band, shape=shape)
        return
    got = sweepgate.gate(x, f, center_s=20.1e-9, span_s=4.3e-9, band_window=band, shape=shape)
    want, _ = gate_chain(x, step, 20.1e-9, 4.3e-9, band, shape, 1024)
    assert got.shape == x.shape and got.dtype == np.complex64
    d = renormalized_difference(got, want, r)
    record("FFT path vs numpy chain, K=801, M=1024, 28 window pairs", d, TOL)
    assert d < TOL, f"{band} / {shape}: {d:.3e}"
    # Where the renormalization divides by at most 2 (|r| >= 0.5), plainly.
    inner = np.abs(r) >= 0.5
    d_inner = float(np.max(np.abs(got - want)[:, inner]) / np.max(np.abs(want)))
    record("FFT path vs numpy chain where |r| >= 0.5, plain", d_inner, TOL)
    assert d_inner < TOL


@pytest.mark.parametrize(
    "k, fft_size, start, stop",
    [(201, 256, 1e9, 3e9), (201, None, 1e9, 3e9), (1601, None, 2e9, 18e9), (3201, 4096, 6e9, 10e9), (60, 64, 2e9, 2.5e9)],
)
def test_fft_path_sizes(k, fft_size, start, stop):
    # Reference: numpy chain; default FFT size is the commands' choice (1024, 2048, 4096).
    f = grid(start, stop, k)
    step = f[1] - f[0]
    x = random_sweeps(5, k, k)
    alias_free = 1 / step
    center, span = 0.31 * alias_free, 0.07 * alias_free
    g = sweepgate.make_gate(f, center_s=center, span_s=span, fft_size=fft_size)
    m = fft_size or next(s for s in (1024, 2048, 4096) if s >= k)
    assert g.fft_size == m
    got, echo = g.apply(x)
    want, want_echo = gate_chain(x, step, center, span, g.band_window, g.shape, m)
    r = renormalization(k, step, center, span, g.band_window, g.shape, m)
    d = renormalized_difference(got, want, r)
    record("FFT path vs numpy chain, sizes 64...4096", d, TOL)
    assert d < TOL
    # Echo level: energy outside the gate over the total, dB (single-precision sums).
    e = float(np.max(np.abs(echo - want_echo)))
    record("echo level vs numpy (dB)", e, 1e-3)
    assert e < 1e-3


def test_without_renormalization():
    # Reference: numpy chain without step 5.
    f = grid(8e9, 12e9, 801)
    x = room_sweeps(f, 8, 3)
    got = sweepgate.gate(x, f, center_s=20e-9, span_s=5e-9, renormalize=False)
    want, _ = gate_chain(x, f[1] - f[0], 20e-9, 5e-9, sweepgate.DEFAULT_BAND_WINDOW,
                         sweepgate.DEFAULT_GATE_SHAPE, 1024, renormalize=False)
    d = largest_relative_difference(got, want)
    record("FFT path without renormalization vs numpy", d, TOL)
    assert d < TOL


@pytest.mark.parametrize("band", ["kaiser-sidelobe:60", "hamming", "tukey:0.25"])
def test_kernel_path_equals_numpy_and_fft_path(band):
    # Reference: numpy chain at the chosen points; kernel vs FFT path to 1e-4 (src/gate.rs).
    f = grid(8e9, 12e9, 801)
    x = room_sweeps(f, 12, 4)
    at = [8e9, 9.0e9, 10.0e9, 11.0e9, 12e9]
    kern = sweepgate.gate(x, f, center_s=20e-9, span_s=4e-9, band_window=band, path="kernel", at_hz=at)
    full = sweepgate.gate(x, f, center_s=20e-9, span_s=4e-9, band_window=band, path="fft")
    idx = [int(round((a - f[0]) / (f[1] - f[0]))) for a in at]
    shape = sweepgate.DEFAULT_GATE_SHAPE
    want, _ = gate_chain(x, f[1] - f[0], 20e-9, 4e-9, band, shape, 1024)
    r = renormalization(801, f[1] - f[0], 20e-9, 4e-9, band, shape, 1024)
    assert kern.shape == (12, len(at))
    d = renormalized_difference(kern, want[:, idx], r[idx])
    record("kernel path vs numpy chain", d, TOL)
    assert d < TOL
    # src/gate.rs: the two paths agree to 1e-4 (measured before the renormalization's
    # division, as above).
    d2 = renormalized_difference(kern, full[:, idx], r[idx])
    record("kernel path vs FFT path", d2, 1e-4)
    assert d2 < 1e-4
    # One frequency (the band window applied on the fly instead of once per row).
    single = sweepgate.gate(x, f, center_s=20e-9, span_s=4e-9, band_window=band, path="kernel", at_hz=10e9)
    assert single.shape == (12, 1)
    d1 = renormalized_difference(single[:, 0], want[:, 400], r[400])
    record("kernel path vs numpy chain", d1, TOL)
    assert d1 < TOL
    # The whole spectrum by the kernel path, too.
    whole = sweepgate.gate(x, f, center_s=20e-9, span_s=4e-9, band_window=band, path="kernel")
    d3 = renormalized_difference(whole, want, r)
    record("kernel path, all K points, vs numpy chain", d3, TOL)
    assert d3 < TOL


def test_impulse_at_gate_centre_passes_unchanged():
    # Closed form (src/gate.rs, renormalization): an ideal response at the gate centre comes
    # back exactly as it went in, band edges included.
    f = grid(8e9, 12e9, 801)
    x = two_path(f, [20e-9], [1.0])
    y = sweepgate.gate(x, f, center_s=20e-9, span_s=4e-9)
    d = float(np.max(np.abs(y - x)))
    record("impulse at the gate centre: |out - in|", d, 1e-4)
    assert d < 1e-4


def test_echo_is_removed():
    # Two-path closed form: direct path at 20 ns, echo of 0.5 at 32 ns; the gated sweep is the
    # direct path alone over the central 80 % of the band (edges: gate ringing).
    f = grid(8e9, 12e9, 801)
    direct = two_path(f, [20e-9], [1.0])
    x = direct + two_path(f, [32e-9], [0.5])
    y = sweepgate.gate(x, f, center_s=20e-9, span_s=4e-9)
    inner = slice(80, 721)
    raw_err = np.max(np.abs(20 * np.log10(np.abs(x[inner]))))
    gated_err = np.max(np.abs(20 * np.log10(np.abs(y[inner]))))
    assert raw_err > 5.0  # the echo's ripple, 20log10(1.5) = 3.5 dB up, 6 dB down
    assert gated_err < 0.5


def test_paths_rows_threads_and_one_sweep():
    f = grid(8e9, 12e9, 801)
    x = random_sweeps(37, 801, 5)
    a = sweepgate.gate(x, f, center_s=15e-9, span_s=6e-9, threads=1)
    b = sweepgate.gate(x, f, center_s=15e-9, span_s=6e-9, threads=3)
    assert np.array_equal(a, b)  # rows are independent: any split gives the same bits
    one = sweepgate.gate(x[7], f, center_s=15e-9, span_s=6e-9)
    assert one.shape == (801,) and np.array_equal(one, a[7])
    # Input dtype: complex128 rows equal their complex64 rounding.
    c = sweepgate.gate(x.astype(np.complex128), f, center_s=15e-9, span_s=6e-9)
    assert np.array_equal(c, a)
    # Non-contiguous input (every other row).
    s = sweepgate.gate(x[::2], f, center_s=15e-9, span_s=6e-9)
    assert np.array_equal(s, a[::2])
    empty = sweepgate.gate(np.zeros((0, 801), np.complex64), f, center_s=15e-9, span_s=6e-9)
    assert empty.shape == (0, 801)


def test_automatic_gate_is_the_peak_gate():
    # The gate `process` chooses: centred on the strongest sweep's impulse-response peak,
    # four band-window main lobes wide: mainlobe (2/pi)sqrt(b^2+pi^2)/(K df) for Kaiser.
    f = grid(8e9, 12e9, 801)
    x = room_sweeps(f, 10, 6)
    p = sweepgate.peak_gate(x, f)
    energy = np.sum(np.abs(x.astype(np.complex128)) ** 2, axis=1)
    assert p.row == int(np.argmax(energy))
    t, h = sweepgate.impulse_response(x[p.row], f)
    assert p.center_s == pytest.approx(t[np.argmax(np.abs(h))], abs=1e-15)
    assert abs(p.center_s - 20e-9) < 0.25e-9  # the direct path, within one time step
    beta = kaiser_beta_for_sidelobe_db(50.0)
    mainlobe = 2 / np.pi * np.sqrt(beta**2 + np.pi**2) / (801 * (f[1] - f[0]))
    assert p.span_s == pytest.approx(4 * mainlobe, rel=1e-6)
    auto = sweepgate.gate(x, f)
    manual = sweepgate.gate(x, f, center_s=p.center_s, span_s=p.span_s)
    assert np.array_equal(auto, manual)


def test_impulse_response_and_time_axis():
    # Reference: numpy steps 1-2; time axis m/(M df) (src/grid.rs).
    f = grid(8e9, 12e9, 801)
    x = room_sweeps(f, 4, 7)
    for band in ["kaiser-sidelobe:50", "hann"]:
        t, h = sweepgate.impulse_response(x, f, band_window=band)
        want = impulse_response(x, band, 1024)
        d = largest_relative_difference(h, want)
        record("impulse response vs numpy", d, TOL)
        assert d < TOL
    step = f[1] - f[0]
    assert np.allclose(t, np.arange(1024) / (1024 * step), rtol=1e-12, atol=0)
    t2 = sweepgate.time_s(f, fft_size=2048)
    assert len(t2) == 2048 and t2[1] == pytest.approx(1 / (2048 * step), rel=1e-12)


def test_gate_object_describes_itself():
    f = grid(8e9, 12e9, 801)
    g = sweepgate.make_gate(f, center_s=20e-9, span_s=4e-9, band_window="kaiser:6", shape="hann")
    assert g.band_window == "kaiser:6" and g.shape == "hann" and g.renormalize
    assert g.points == 801 and g.fft_size == 1024
    assert g.alias_free_s == pytest.approx(200e-9, rel=1e-12)
    assert g.time_step_s == pytest.approx(200e-9 / 1024, rel=1e-12)
    assert np.allclose(g.frequencies_hz, f, rtol=1e-12)
    # The gate window is the time gate of the reference.
    want = gate_window(1024, f[1] - f[0], 20e-9, 4e-9, "hann")
    assert np.max(np.abs(g.gate_window - want)) < 1e-6
    assert len(g.band_window_values) == 801
    assert g.nearest_index(10e9) == 400
    assert "center_s=2e-8" in repr(g)
    assert sweepgate.parse_window("Kaiser:6") == "kaiser:6"
    # A Kaiser window without its parameter is refused, as on the command line.
    with pytest.raises(sweepgate.SweepgateError, match="give β"):
        sweepgate.parse_window("Kaiser")
    assert sweepgate.DEFAULT_GATE_SHAPE == "tukey:0.3"
