"""scikit-rf bridge: sweepgate's gate on ``skrf.Network`` objects.

Needs scikit-rf (``pip install scikit-rf``); importing this module without it raises an
``ImportError`` saying so.

- :func:`gate_network`: one Network in, the gated Network out.
- :func:`gate_networks`: a scan, one Network per turntable angle, gated with one gate
  (the same for every angle, as a pattern must be), gated Networks out.
- :func:`write_manifest`: a scan written as Touchstone files and a manifest, ready for
  :func:`sweepgate.process` or ``sweepgate process --manifest``.

Each S-parameter is gated on its own (a transmission and a reflection arrive at different
delays). With ``center_s`` and ``span_s`` given, every gated parameter uses that gate;
left out, each parameter's gate is chosen from its strongest sweep as ``sweepgate process``
does (:func:`sweepgate.peak_gate`). Parameters not named in ``parameters`` are copied
unchanged. The gated values come from the core in single precision.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any, Dict, List, Optional, Sequence, Tuple

import numpy as np

try:
    import skrf as _skrf  # type: ignore[import-untyped]  # noqa: F401  (only its presence matters)
except ImportError as e:  # pragma: no cover - depends on the environment
    raise ImportError(
        "sweepgate.skrf needs scikit-rf: pip install scikit-rf"
    ) from e

import sweepgate

__all__ = ["gate_network", "gate_networks", "write_manifest", "parameter_index"]


def parameter_index(name: str, ports: int) -> Tuple[int, int]:
    """``"S21"`` → (1, 0), the (row, column) of ``Network.s[:, row, column]``. Ports above 9
    are written with a comma: ``"S10,2"``."""
    text = name.strip().upper()
    if not text.startswith("S"):
        raise sweepgate.SweepgateError(
            f"parameter `{name}`: only S parameters are gated (S11, S21, ...)"
        )
    digits = text[1:]
    parts = digits.split(",") if "," in digits else list(digits)
    if len(parts) != 2 or not all(p.isdigit() for p in parts):
        raise sweepgate.SweepgateError(
            f"parameter `{name}`: write it as S<row><column>, e.g. S21 (S10,2 above port 9)"
        )
    row, col = int(parts[0]) - 1, int(parts[1]) - 1
    if not (0 <= row < ports and 0 <= col < ports):
        raise sweepgate.SweepgateError(
            f"parameter `{name}`: the network has {ports} port(s)"
        )
    return row, col


def _all_parameters(ports: int) -> List[Tuple[int, int]]:
    return [(r, c) for r in range(ports) for c in range(ports)]


def _chosen(parameters: Optional[Sequence[str]], ports: int) -> List[Tuple[int, int]]:
    if parameters is None:
        return _all_parameters(ports)
    return [parameter_index(p, ports) for p in parameters]


def _check_same_grid(networks: Sequence[Any]) -> np.ndarray:
    if len(networks) == 0:
        raise sweepgate.SweepgateError("networks: none given")
    first = networks[0]
    f = np.asarray(first.f, dtype=np.float64)
    for i, n in enumerate(networks[1:], start=1):
        if n.s.shape != first.s.shape or not np.array_equal(np.asarray(n.f, dtype=np.float64), f):
            raise sweepgate.SweepgateError(
                f"networks: network {i} ({n.name}) has other frequencies or ports than "
                f"network 0 ({first.name}); a scan shares one frequency grid"
            )
    return f


def gate_networks(
    networks: Sequence[Any],
    angles_deg: Optional[Sequence[float]] = None,
    *,
    center_s: Optional[float] = None,
    span_s: Optional[float] = None,
    band_window: Optional[str] = None,
    shape: Optional[str] = None,
    renormalize: bool = True,
    parameters: Optional[Sequence[str]] = None,
    path: str = "fft",
    fft_size: Optional[int] = None,
) -> List[Any]:
    """Gates a scan: every Network on the same frequency grid, one gate for all of them.

    ``angles_deg`` (one per Network, optional) names the gated Networks
    (``"<name> gated"``, ``"<name> gated at 30°"``) and is kept in each one's ``params``.
    Returns new Networks in the order given; the inputs are not changed.
    """
    if angles_deg is not None and len(angles_deg) != len(networks):
        raise sweepgate.SweepgateError(
            f"angles_deg: {len(angles_deg)} angles for {len(networks)} networks"
        )
    f = _check_same_grid(networks)
    ports = networks[0].s.shape[1]
    stack = np.stack([np.asarray(n.s) for n in networks])  # N × K × P × P
    gated = stack.astype(np.complex128, copy=True)
    for row, col in _chosen(parameters, ports):
        values = sweepgate.gate(
            stack[:, :, row, col],
            f,
            center_s=center_s,
            span_s=span_s,
            band_window=band_window,
            shape=shape,
            renormalize=renormalize,
            path=path,
            fft_size=fft_size,
        )
        gated[:, :, row, col] = values
    out = []
    for i, n in enumerate(networks):
        g = n.copy()
        g.s = gated[i]
        label = f"{n.name or 'network'} gated"
        if angles_deg is not None:
            label += f" at {float(angles_deg[i]):g}°"
            params: Dict[str, Any] = dict(getattr(n, "params", None) or {})
            params["angle_deg"] = float(angles_deg[i])
            g.params = params
        g.name = label
        out.append(g)
    return out


def gate_network(
    network: Any,
    *,
    center_s: Optional[float] = None,
    span_s: Optional[float] = None,
    band_window: Optional[str] = None,
    shape: Optional[str] = None,
    renormalize: bool = True,
    parameters: Optional[Sequence[str]] = None,
    path: str = "fft",
    fft_size: Optional[int] = None,
) -> Any:
    """Gates one Network (every S-parameter, or those in ``parameters``); returns a new
    Network named ``"<name> gated"``."""
    return gate_networks(
        [network],
        center_s=center_s,
        span_s=span_s,
        band_window=band_window,
        shape=shape,
        renormalize=renormalize,
        parameters=parameters,
        path=path,
        fft_size=fft_size,
    )[0]


def write_manifest(
    networks: Sequence[Any],
    angles_deg: Sequence[float],
    folder: "os.PathLike[str] | str",
    *,
    name: str = "scan",
) -> Path:
    """Writes each Network as a Touchstone file and a manifest (``angle_deg,file``) listing
    them, in ``folder``; returns the manifest's path, for :func:`sweepgate.process`."""
    if len(angles_deg) != len(networks):
        raise sweepgate.SweepgateError(
            f"angles_deg: {len(angles_deg)} angles for {len(networks)} networks"
        )
    _check_same_grid(networks)
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    rows = ["angle_deg,file"]
    for i, (n, a) in enumerate(zip(networks, angles_deg)):
        stem = f"{name}-{i:04d}"
        n.write_touchstone(filename=stem, dir=str(folder), form="ri")
        ports = n.s.shape[1]
        rows.append(f"{float(a)!r},{stem}.s{ports}p")
    manifest = folder / f"{name}.csv"
    manifest.write_text("\n".join(rows) + "\n")
    return manifest
