"""The gating chain written again in numpy, from its description (README "Gate settings",
src/gate.rs module notes), as the independent reference of the tests.

Chain, for K swept points zero-padded to an M-point transform:
1. multiply by the band window w[n] (symmetric, x = n/(K-1)), pad with zeros to M;
2. inverse FFT (numpy's, scaled 1/M) -> impulse response at times m/(M*df);
3. multiply by the time gate: a window of the chosen shape across the span, placed
   circularly around the centre (delays wrap with the alias-free period 1/df);
4. forward FFT, keep the first K points;
5. divide by r[k] = (gated response of an ideal impulse at the gate centre) / (that impulse):
   edge renormalization (Dunsmore, "Gating effects in time domain transforms", ARFTG).

Window definitions on x in [0, 1] (0 outside): Kaiser I0(b*sqrt(1-(2x-1)^2))/I0(b) (Kaiser
1974; numpy's np.i0); Tukey with taper fraction a (Harris 1978); Hann 0.5-0.5cos(2 pi x);
Hamming 0.54-0.46cos(2 pi x); 4-term Blackman-Harris 0.35875, 0.48829, 0.14128, 0.01168
(Harris 1978). Kaiser beta for a sidelobe level A dB in spectrum analysis: Kaiser & Schafer,
IEEE Trans. ASSP 28(1), 1980.
"""

import numpy as np


def kaiser_beta_for_sidelobe_db(a_db):
    """Kaiser & Schafer (1980), spectrum-analysis form."""
    if a_db <= 13.26:
        return 0.0
    if a_db <= 60.0:
        d = a_db - 13.26
        return 0.76609 * d**0.4 + 0.09834 * d
    return 0.12438 * (a_db + 6.3)


def window_function(spelling):
    """The window of a command-line spelling as a function of x (numpy array)."""
    name, _, value = spelling.strip().lower().partition(":")
    if name == "kaiser":
        beta = float(value) if value else 6.0
        return lambda x: np.i0(beta * np.sqrt(np.clip(1 - (2 * x - 1) ** 2, 0, None))) / np.i0(beta)
    if name == "kaiser-sidelobe":
        beta = kaiser_beta_for_sidelobe_db(float(value))
        return lambda x: np.i0(beta * np.sqrt(np.clip(1 - (2 * x - 1) ** 2, 0, None))) / np.i0(beta)
    if name == "tukey":
        a = float(value) if value else 0.5

        def tukey(x):
            if a <= 0:
                return np.ones_like(x)
            edge = np.minimum(x, 1 - x)
            return np.where(edge < a / 2, 0.5 * (1 - np.cos(2 * np.pi * edge / a)), 1.0)

        return tukey
    if name == "hann":
        return lambda x: 0.5 - 0.5 * np.cos(2 * np.pi * x)
    if name == "hamming":
        return lambda x: 0.54 - 0.46 * np.cos(2 * np.pi * x)
    if name == "blackman-harris":
        return lambda x: (
            0.35875
            - 0.48829 * np.cos(2 * np.pi * x)
            + 0.14128 * np.cos(4 * np.pi * x)
            - 0.01168 * np.cos(6 * np.pi * x)
        )
    if name == "rectangular":
        return lambda x: np.ones_like(x)
    raise ValueError(spelling)


def window_at(spelling, x):
    """Window value at positions x, zero outside [0, 1]."""
    x = np.asarray(x, dtype=np.float64)
    inside = (x >= 0) & (x <= 1)
    return np.where(inside, window_function(spelling)(np.clip(x, 0, 1)), 0.0)


def band_window(spelling, k):
    """Symmetric window over K points."""
    return window_at(spelling, np.arange(k) / (k - 1))


def gate_window(m, step_hz, center_s, span_s, shape):
    """Time gate at the M impulse-response samples, placed circularly around the centre."""
    dt = 1.0 / (step_hz * m)
    period = 1.0 / step_hz
    d = np.arange(m) * dt - center_s
    d = d - period * np.floor(d / period + 0.5)
    return window_at(shape, (d + span_s / 2) / span_s)


def impulse_response(x, band, m):
    """Steps 1-2 on rows of x (N x K)."""
    x = np.atleast_2d(np.asarray(x, dtype=np.complex128))
    k = x.shape[1]
    padded = np.zeros((x.shape[0], m), dtype=np.complex128)
    padded[:, :k] = x * band_window(band, k)
    return np.fft.ifft(padded, axis=1)


def renormalization(k, step_hz, center_s, span_s, band, shape, m):
    """r[k]: the gated response of an ideal impulse at the gate centre over that impulse."""
    g = gate_window(m, step_hz, center_s, span_s, shape)
    u = np.exp(-2j * np.pi * np.arange(k) * step_hz * center_s)
    yu = np.fft.fft(impulse_response(u, band, m) * g, axis=1)[0, :k]
    return yu / u


def gate_chain(x, step_hz, center_s, span_s, band, shape, m, renormalize=True):
    """The whole chain on rows of x; returns (gated N x K, echo level dB per row)."""
    x = np.atleast_2d(np.asarray(x, dtype=np.complex128))
    k = x.shape[1]
    g = gate_window(m, step_hz, center_s, span_s, shape)
    h = impulse_response(x, band, m)
    y = np.fft.fft(h * g, axis=1)[:, :k]
    e = np.abs(h) ** 2
    with np.errstate(divide="ignore"):
        echo_db = 10 * np.log10(e[:, g == 0].sum(axis=1) / e.sum(axis=1))
    if renormalize:
        y = y / renormalization(k, step_hz, center_s, span_s, band, shape, m)
    return y, echo_db


def renormalized_difference(got, want, r):
    """Largest difference of two renormalized outputs measured before the division by r:
    max|got - want|*|r| over max|want*r|. The division magnifies single-precision rounding
    by 1/|r| (up to 80 dB, the core's limit) where the band window is small; measured this
    way a chain that is right everywhere scores at the single-precision level."""
    got = np.asarray(got, dtype=np.complex128)
    want = np.asarray(want, dtype=np.complex128)
    return float(np.max(np.abs(got - want) * np.abs(r)) / np.max(np.abs(want * r)))


def two_path(frequencies_hz, delays_s, amplitudes):
    """Sum of ideal paths a*exp(-j 2 pi f tau)."""
    f = np.asarray(frequencies_hz, dtype=np.float64)
    return sum(a * np.exp(-2j * np.pi * f * t) for a, t in zip(amplitudes, delays_s))


def largest_relative_difference(a, b):
    """max|a - b| over max|b|."""
    a = np.asarray(a, dtype=np.complex128)
    b = np.asarray(b, dtype=np.complex128)
    return float(np.max(np.abs(a - b)) / np.max(np.abs(b)))
