"""Type stubs of the compiled module ``sweepgate._native`` (src/*.rs)."""

from os import PathLike
from typing import Any, List, Optional, Tuple, Union, final

import numpy as np
import numpy.typing as npt

_Path = Union[str, PathLike[str]]

__all__ = [
    "SweepgateError",
    "Gate",
    "parse_window_spelling",
    "default_windows",
    "FFT_SIZES",
    "plan",
    "process",
    "peak_gate",
    "data_gate",
    "read_recording",
]

FFT_SIZES: List[int]

class SweepgateError(ValueError):
    """An error from sweepgate, with the message the command line prints."""

@final
class Gate:
    """A time gate validated once by the core, applied to N × K arrays of sweeps."""

    def __new__(
        cls,
        frequencies_hz: npt.NDArray[np.float64],
        *,
        center_s: float,
        span_s: float,
        band_window: Optional[str] = None,
        shape: Optional[str] = None,
        renormalize: bool = True,
        fft_size: Optional[int] = None,
    ) -> "Gate": ...
    def apply(
        self, sweeps: npt.NDArray[np.complex64], *, threads: Optional[int] = None
    ) -> Tuple[npt.NDArray[np.complex64], npt.NDArray[np.float32]]:
        """FFT path: gated sweeps (N × K) and echo levels in dB (N)."""
    def apply_at(
        self,
        sweeps: npt.NDArray[np.complex64],
        indices: List[int],
        *,
        threads: Optional[int] = None,
    ) -> npt.NDArray[np.complex64]:
        """Kernel path: gated values at the grid indices (N × len(indices))."""
    def impulse_response(
        self, sweeps: npt.NDArray[np.complex64], *, threads: Optional[int] = None
    ) -> npt.NDArray[np.complex64]:
        """Windowed, zero-padded impulse responses (N × M)."""
    def nearest_index(self, frequency_hz: float) -> int:
        """The grid index nearest a frequency."""
    @property
    def fft_size(self) -> int: ...
    @property
    def points(self) -> int: ...
    @property
    def center_s(self) -> float: ...
    @property
    def span_s(self) -> float: ...
    @property
    def band_window(self) -> str: ...
    @property
    def shape(self) -> str: ...
    @property
    def renormalize(self) -> bool: ...
    @property
    def frequencies_hz(self) -> npt.NDArray[np.float64]: ...
    @property
    def time_s(self) -> npt.NDArray[np.float64]: ...
    @property
    def gate_window(self) -> npt.NDArray[np.float32]: ...
    @property
    def band_window_values(self) -> npt.NDArray[np.float32]: ...
    @property
    def alias_free_s(self) -> float: ...
    @property
    def time_step_s(self) -> float: ...

def parse_window_spelling(text: str) -> str: ...
def default_windows() -> Tuple[str, str]: ...
def peak_gate(
    sweeps: npt.NDArray[np.complex64],
    frequencies_hz: npt.NDArray[np.float64],
    *,
    band_window: Optional[str] = None,
) -> Tuple[float, float, str, int]: ...
def data_gate(
    sweeps: npt.NDArray[np.complex64],
    frequencies_hz: npt.NDArray[np.float64],
    *,
    angles_deg: Optional[npt.NDArray[np.float64]] = None,
    band_window: Optional[str] = None,
) -> Tuple[float, float, str, Optional[str]]: ...
def plan(
    path: Optional[str] = None,
    table_json: Optional[str] = None,
    *,
    aut_size_m: Optional[float] = None,
    fractional_bandwidth: Optional[float] = None,
    band_window: Optional[str] = None,
    rotation_deg_s: Optional[float] = None,
    text: bool = False,
) -> Any: ...
def process(
    input: Optional[_Path] = None,
    *,
    manifest: Optional[_Path] = None,
    recording: Optional[_Path] = None,
    gate_center_ns: Optional[float] = None,
    gate_span_ns: Optional[float] = None,
    frequencies_hz: Optional[List[float]] = None,
    band_window: Optional[str] = None,
    gate_shape: Optional[str] = None,
    parameter: Optional[str] = None,
    resample: bool = False,
    settings: Optional[_Path] = None,
    gain_table: Optional[_Path] = None,
    reference: Optional[_Path] = None,
    out: Optional[_Path] = None,
) -> dict: ...
def read_recording(path: _Path) -> dict: ...
