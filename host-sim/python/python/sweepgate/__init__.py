"""sweepgate from Python: time-domain gating of VNA antenna-pattern scans.

Thin bindings over the Rust core and host library, not a reimplementation: the same gate,
planner, offline processing and recording reader as the ``sweepgate`` command, so Python
and the command agree on the same data.

- :func:`gate` gates sweeps held in a numpy array (N × K complex) by the FFT path or the
  kernel path; :class:`Gate` keeps a validated gate for many calls and also gives echo
  levels, impulse responses and the time axis.
- :func:`impulse_response` and :func:`time_s`: the windowed impulse response and its time
  axis.
- :func:`data_gate`: the gate ``sweepgate process`` chooses when none is given.
- :func:`peak_gate`: the gate on the strongest impulse-response peak (the default of
  :func:`gate` for single sweeps).
- :func:`plan` / :func:`plan_text`: the planner, from a scenario or plan file or a dict.
- :func:`process`: ``sweepgate process`` on a manifest or a recording, as arrays and the
  summary.
- :func:`read_recording`: a recording's sweeps, positioner samples and truth as arrays.
- :mod:`sweepgate.skrf`: the same gate on scikit-rf ``Network`` objects.

Windows are spelled as on the command line: ``kaiser:B``, ``kaiser-sidelobe:DB``,
``tukey:A``, ``hann``, ``hamming``, ``blackman-harris``, ``rectangular``. Every error is a
:class:`SweepgateError` (a ``ValueError``) with the message the command line prints.

Long work (gating, processing, reading) runs with the GIL released.
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Mapping, NamedTuple, Optional, Sequence, Tuple, Union

import numpy as np

from . import _native
from ._native import FFT_SIZES, Gate, SweepgateError

__version__ = "0.1.0"

__all__ = [
    "DEFAULT_BAND_WINDOW",
    "DEFAULT_GATE_SHAPE",
    "FFT_SIZES",
    "Gate",
    "PeakGate",
    "ProcessResult",
    "Recording",
    "SweepgateError",
    "gate",
    "impulse_response",
    "make_gate",
    "parse_window",
    "peak_gate",
    "data_gate",
    "DataGate",
    "plan",
    "plan_text",
    "process",
    "read_recording",
    "time_s",
]

PathLike = Union[str, "os.PathLike[str]"]

DEFAULT_BAND_WINDOW, DEFAULT_GATE_SHAPE = _native.default_windows()
"""The band window and gate shape every command uses when none is given."""


def parse_window(text: str) -> str:
    """Checks a window spelling as the command line does; returns its canonical spelling
    (``"kaiser"`` → ``"kaiser:6"``). Raises :class:`SweepgateError` naming what is wrong."""
    return _native.parse_window_spelling(text)


def _sweeps(sweeps: Any) -> Tuple[np.ndarray, bool]:
    """Sweeps as a C-contiguous N × K complex64 array, and whether one 1-D sweep was given."""
    a = np.asarray(sweeps)
    if a.ndim not in (1, 2):
        raise SweepgateError(
            f"sweeps: one sweep (K values) or an N × K array of sweeps is expected, "
            f"not an array of shape {a.shape}"
        )
    if not (np.issubdtype(a.dtype, np.number) or a.dtype == np.bool_):
        raise SweepgateError(f"sweeps: numbers are expected, not dtype {a.dtype}")
    with np.errstate(over="ignore", invalid="ignore"):
        # Values beyond single precision become infinite here and are refused by name.
        x = np.ascontiguousarray(np.atleast_2d(a), dtype=np.complex64)
    return x, a.ndim == 1


def _frequencies(frequencies_hz: Any) -> np.ndarray:
    f = np.asarray(frequencies_hz)
    if f.ndim != 1:
        raise SweepgateError(
            f"frequencies_hz: one frequency per sweep point (a 1-D array) is expected, "
            f"not an array of shape {f.shape}"
        )
    if not np.issubdtype(f.dtype, np.number) or np.iscomplexobj(f):
        raise SweepgateError(f"frequencies_hz: real numbers are expected, not dtype {f.dtype}")
    return np.ascontiguousarray(f, dtype=np.float64)


class PeakGate(NamedTuple):
    """A gate chosen from the data (see :func:`peak_gate`)."""

    center_s: float
    span_s: float
    rule: str
    row: int


class DataGate(NamedTuple):
    """The gate chosen from the data (see :func:`data_gate`)."""

    center_s: float
    span_s: float
    rule: str
    unseparable: Optional[str]


def data_gate(
    sweeps: Any,
    frequencies_hz: Any,
    *,
    angles_deg: Any = None,
    band_window: Optional[str] = None,
) -> DataGate:
    """The gate ``sweepgate process`` chooses when no centre or span is given.

    Every sweep's impulse response is surveyed: the gate holds the direct path's main lobe
    over its whole delay swing and closes before the nearest echo that matters at any angle
    (in 30° regions of ``angles_deg`` when given, else by row order). Returns the centre
    and span in seconds, the rule in words and, when no gate can separate the direct path
    from an echo, the ``unseparable`` warning.
    """
    x, _ = _sweeps(sweeps)
    f = _frequencies(frequencies_hz)
    a = None if angles_deg is None else np.ascontiguousarray(angles_deg, dtype=np.float64)
    return DataGate(*_native.data_gate(x, f, angles_deg=a, band_window=band_window))


def peak_gate(
    sweeps: Any, frequencies_hz: Any, *, band_window: Optional[str] = None
) -> PeakGate:
    """The gate on the strongest impulse-response peak (``sweepgate process`` chooses
    :func:`data_gate`'s).

    The strongest sweep (largest Σ|S|²) is windowed and transformed; the gate is centred on
    its impulse-response peak and spans four band-window main lobes (at most half the
    alias-free range). Returns the centre and span in seconds, the rule in words and the
    row of ``sweeps`` it came from.
    """
    x, _ = _sweeps(sweeps)
    f = _frequencies(frequencies_hz)
    return PeakGate(*_native.peak_gate(x, f, band_window=band_window))


def make_gate(
    frequencies_hz: Any,
    *,
    center_s: float,
    span_s: float,
    band_window: Optional[str] = None,
    shape: Optional[str] = None,
    renormalize: bool = True,
    fft_size: Optional[int] = None,
) -> Gate:
    """A validated :class:`Gate` for sweeps on ``frequencies_hz`` (evenly spaced, Hz).

    ``center_s``: gate centre, seconds from the VNA's time zero (0 ≤ centre < 1/Δf);
    ``span_s``: full width; ``band_window`` and ``shape`` in the command line's spellings
    (defaults :data:`DEFAULT_BAND_WINDOW`, :data:`DEFAULT_GATE_SHAPE`); ``fft_size`` M
    (default: the smallest of 1024, 2048, 4096 that holds K, as the commands choose).
    """
    return Gate(
        _frequencies(frequencies_hz),
        center_s=float(center_s),
        span_s=float(span_s),
        band_window=band_window,
        shape=shape,
        renormalize=renormalize,
        fft_size=fft_size,
    )


def _indices(g: Gate, at_hz: Any) -> list:
    at = np.atleast_1d(np.asarray(at_hz, dtype=np.float64))
    if at.ndim != 1:
        raise SweepgateError(f"at_hz: a list of frequencies is expected, not shape {at.shape}")
    return [g.nearest_index(float(v)) for v in at]


def gate(
    sweeps: Any,
    frequencies_hz: Any,
    *,
    center_s: Optional[float] = None,
    span_s: Optional[float] = None,
    band_window: Optional[str] = None,
    shape: Optional[str] = None,
    renormalize: bool = True,
    path: str = "fft",
    at_hz: Any = None,
    fft_size: Optional[int] = None,
    threads: Optional[int] = None,
) -> np.ndarray:
    """Gates sweeps: band window → zero pad → inverse FFT → time gate → FFT → edge
    renormalization, by the core.

    ``sweeps``: N × K complex (or one sweep of K); ``frequencies_hz``: the K evenly spaced
    frequencies. ``center_s`` / ``span_s``: the gate in seconds; either left out is chosen as
    ``sweepgate process`` does (:func:`peak_gate`). ``path``: ``"fft"`` (the whole chain) or
    ``"kernel"`` (one dot product per output frequency; equal to the FFT path to about 1e-4
    of the largest value). ``at_hz``: output only at the grid points nearest these
    frequencies (default: all K). ``threads``: rows are split over this many threads
    (default: every core).

    Returns complex64 (the core computes in single precision): N × K, or N × len(at_hz);
    1-D when one sweep was given.
    """
    x, one = _sweeps(sweeps)
    f = _frequencies(frequencies_hz)
    if path not in ("fft", "kernel"):
        raise SweepgateError(f"path: `{path}` is not known; use `fft` or `kernel`")
    if center_s is None or span_s is None:
        auto = peak_gate(x, f, band_window=band_window)
        center_s = auto.center_s if center_s is None else center_s
        span_s = auto.span_s if span_s is None else span_s
    g = make_gate(
        f,
        center_s=center_s,
        span_s=span_s,
        band_window=band_window,
        shape=shape,
        renormalize=renormalize,
        fft_size=fft_size,
    )
    columns = None if at_hz is None else _indices(g, at_hz)
    if path == "fft":
        y, _ = g.apply(x, threads=threads)
        if columns is not None:
            y = np.ascontiguousarray(y[:, columns])
    else:
        y = g.apply_at(x, list(range(g.points)) if columns is None else columns, threads=threads)
    return y[0] if one else y


def impulse_response(
    sweeps: Any,
    frequencies_hz: Any,
    *,
    band_window: Optional[str] = None,
    fft_size: Optional[int] = None,
    threads: Optional[int] = None,
) -> Tuple[np.ndarray, np.ndarray]:
    """The windowed, zero-padded impulse response of each sweep, by the core.

    Returns ``(time_s, h)``: the M sample times m/(M·Δf) and h (N × M complex64, or M for
    one sweep), on the scale of the core's inverse FFT (1/M).
    """
    x, one = _sweeps(sweeps)
    g = _window_only_gate(_frequencies(frequencies_hz), band_window, fft_size)
    h = g.impulse_response(x, threads=threads)
    return g.time_s, (h[0] if one else h)


def time_s(frequencies_hz: Any, *, fft_size: Optional[int] = None) -> np.ndarray:
    """Time of each impulse-response sample, s: m/(M·Δf) for m < M."""
    return _window_only_gate(_frequencies(frequencies_hz), None, fft_size).time_s


def _window_only_gate(f: np.ndarray, band_window: Optional[str], fft_size: Optional[int]) -> Gate:
    # The impulse response depends on the band window alone; the time gate here is a
    # placeholder (the host does the same to find the strongest peak).
    if f.size >= 2 and np.isfinite(f[0]) and np.isfinite(f[-1]) and f[-1] != f[0]:
        half_alias_free_s = 0.5 * (f.size - 1) / (f[-1] - f[0])
    else:
        half_alias_free_s = 1.0  # the core refuses the grid itself, with its own message
    return Gate(
        f,
        center_s=0.0,
        span_s=abs(half_alias_free_s),
        band_window=band_window,
        shape="rectangular",
        renormalize=False,
        fft_size=fft_size,
    )


def _plan_source(source: Union[PathLike, Mapping[str, Any]]) -> Tuple[Optional[str], Optional[str]]:
    if isinstance(source, Mapping):
        def plain(o: Any) -> Any:
            if isinstance(o, np.generic):
                return o.item()
            if isinstance(o, np.ndarray):
                return o.tolist()
            raise TypeError(f"{type(o).__name__} is not a number, text, list or table")

        try:
            return None, json.dumps(source, default=plain, allow_nan=False)
        except (TypeError, ValueError) as e:
            raise SweepgateError(f"plan dict: {e}") from None
    return os.fspath(source), None


def plan(
    source: Union[PathLike, Mapping[str, Any]],
    *,
    aut_size_m: Optional[float] = None,
    fractional_bandwidth: Optional[float] = None,
    band_window: Optional[str] = None,
    rotation_deg_s: Optional[float] = None,
) -> dict:
    """The planner's report, as ``sweepgate plan --json`` prints it, as a dict.

    ``source``: a scenario or plan file, or a dict with the same tables (``sweep``,
    ``range``, ``planes``, ``scatterers``, ``aut``, ``pattern``, ``plan``, and
    ``positioner`` for a scenario). The keyword options override the file as the command
    line's do.
    """
    path, table = _plan_source(source)
    return _native.plan(
        path,
        table,
        aut_size_m=aut_size_m,
        fractional_bandwidth=fractional_bandwidth,
        band_window=band_window,
        rotation_deg_s=rotation_deg_s,
    )


def plan_text(
    source: Union[PathLike, Mapping[str, Any]],
    *,
    aut_size_m: Optional[float] = None,
    fractional_bandwidth: Optional[float] = None,
    band_window: Optional[str] = None,
    rotation_deg_s: Optional[float] = None,
) -> str:
    """The planner's table, as ``sweepgate plan`` prints it."""
    path, table = _plan_source(source)
    return _native.plan(
        path,
        table,
        aut_size_m=aut_size_m,
        fractional_bandwidth=fractional_bandwidth,
        band_window=band_window,
        rotation_deg_s=rotation_deg_s,
        text=True,
    )


def _db(z: np.ndarray) -> np.ndarray:
    """20·log10|z| with the report's floor of −300 dB."""
    with np.errstate(divide="ignore"):
        return np.maximum(20.0 * np.log10(np.abs(z)), -300.0)


@dataclass
class ProcessResult:
    """What ``sweepgate process`` computes, bins in the order of ``pattern.csv``.

    Arrays are B bins × F pattern frequencies; ``raw`` (averaged) and ``gated`` S21 are
    complex128; ``truth`` (free-space S21) and ``gain_dbi`` are ``None`` when unknown.
    ``summary`` is what ``summary.json`` holds; ``out`` the report folder when one was
    written.
    """

    angle_deg: np.ndarray
    mean_deg: np.ndarray
    frequencies_hz: np.ndarray
    raw: np.ndarray
    gated: np.ndarray
    truth: Optional[np.ndarray]
    gain_dbi: Optional[np.ndarray]
    echo_db: np.ndarray
    sweeps: np.ndarray
    flags: np.ndarray
    flag_words: list
    summary: dict
    warnings: list
    impulse: Optional[dict]
    gate: dict
    out: Optional[Path]

    @property
    def raw_db(self) -> np.ndarray:
        """20·log10|raw|, as ``pattern.csv``'s ``raw_db`` (floor −300 dB)."""
        return _db(self.raw)

    @property
    def gated_db(self) -> np.ndarray:
        """20·log10|gated|, as ``pattern.csv``'s ``gated_db``."""
        return _db(self.gated)

    @property
    def gated_phase_deg(self) -> np.ndarray:
        """Argument of the gated value, degrees."""
        return np.degrees(np.angle(self.gated))

    @property
    def truth_db(self) -> Optional[np.ndarray]:
        """20·log10|truth|, or ``None``."""
        return None if self.truth is None else _db(self.truth)


def _opt_path(p: Optional[PathLike]) -> Optional[str]:
    return None if p is None else os.fspath(p)


def process(
    input: Optional[PathLike] = None,
    *,
    manifest: Optional[PathLike] = None,
    recording: Optional[PathLike] = None,
    gate_center_ns: Optional[float] = None,
    gate_span_ns: Optional[float] = None,
    frequencies_hz: Optional[Sequence[float]] = None,
    band_window: Optional[str] = None,
    gate_shape: Optional[str] = None,
    parameter: Optional[str] = None,
    resample: bool = False,
    settings: Optional[PathLike] = None,
    gain_table: Optional[PathLike] = None,
    reference: Optional[PathLike] = None,
    out: Optional[PathLike] = None,
) -> ProcessResult:
    """``sweepgate process`` from Python: the same options by the same names, the same
    processing, the results as arrays.

    Give ``input`` (a manifest when its first line starts with ``angle_deg``, else a
    recording), or ``manifest``, or ``recording``. With ``out`` the report folder is
    written as the command writes it; without, nothing is written.
    """
    freqs = None
    if frequencies_hz is not None:
        freqs = [float(v) for v in np.atleast_1d(np.asarray(frequencies_hz, dtype=np.float64))]
    d = _native.process(
        _opt_path(input),
        manifest=_opt_path(manifest),
        recording=_opt_path(recording),
        gate_center_ns=gate_center_ns,
        gate_span_ns=gate_span_ns,
        frequencies_hz=freqs,
        band_window=band_window,
        gate_shape=gate_shape,
        parameter=parameter,
        resample=resample,
        settings=_opt_path(settings),
        gain_table=_opt_path(gain_table),
        reference=_opt_path(reference),
        out=_opt_path(out),
    )
    d["out"] = None if d["out"] is None else Path(d["out"])
    return ProcessResult(**d)


@dataclass
class Recording:
    """A recording's contents (see :func:`read_recording`).

    ``sweeps`` is N × K complex64 (the sweeps whose length matches the grid, in file order)
    with ``sweep_index``, ``start_us``, ``end_us`` and the byte offset of each;
    ``position_*`` the positioner samples; ``truth`` the free-space S21 records;
    ``damage`` the stretches recovery skipped; ``stop`` why reading stopped.
    """

    version: int
    header: Optional[dict]
    frequencies_hz: Optional[np.ndarray]
    sweeps: np.ndarray
    sweep_index: np.ndarray
    start_us: np.ndarray
    end_us: np.ndarray
    sweep_offset: np.ndarray
    sweeps_of_other_length: list
    position_t_us: np.ndarray
    position_counts: np.ndarray
    position_angle_deg: np.ndarray
    truth: list
    end: Optional[dict]
    damage: list
    stop: str
    complete: bool
    stop_offset: int
    unknown_records: int


def read_recording(path: PathLike) -> Recording:
    """Reads a recording (``sweepgate simulate``, ``acquire`` or ``replay --record``),
    recovering every intact record of a cut-off or damaged file as the commands do."""
    return Recording(**_native.read_recording(os.fspath(path)))
