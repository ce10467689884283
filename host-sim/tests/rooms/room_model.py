#!/usr/bin/env python3
"""Rooms for the acceptance test of the gate chosen from the data.

Written for the test alone: it shares no code with sweepgate's simulator. Each room is a
turntable scan of an antenna under test (AUT) seen by a fixed probe, with first-order
reflections by the image method (image theory: a reflection off an infinite plane is the
field of the source mirrored in the plane, times the reflection coefficient; Balanis,
Antenna Theory, ch. 4) and free-space transmission by the Friis transmission equation
(amplitude lambda/(4 pi L) for a path of length L, delay L/c).

For every room it writes, in OUT/<room>/:

- one 2-port Touchstone file per angle (RI format, Hz; S21 = S12 = the scan's signal,
  S11 = S22 = 0) and `manifest.csv` (`angle_deg,file`), the input of `sweepgate process`;
- `truth.csv` (`angle_deg,frequency_hz,truth_db`): the free-space truth, the direct path
  alone, at every angle and frequency;
- `room.json`: the room's description and whether its nearest echo can be gated away
  (its delay beyond the direct path against the band's resolution).

Usage: room_model.py OUT_DIR
"""

import json
import math
import os
import sys

import numpy as np

C = 299_792_458.0


def unit(v):
    return v / np.linalg.norm(v)


def aut_amplitude(direction, boresight, n, back, f_hz, fc_hz):
    """cos^n amplitude pattern of the AUT with a back level `back` (amplitude) and a gain
    tilt proportional to frequency (an aperture's gain grows with frequency)."""
    c = float(np.dot(unit(direction), boresight))
    return (back + (1.0 - back) * max(c, 0.0) ** n) * (f_hz / fc_hz)


def probe_amplitude(direction, boresight, n):
    """cos^n amplitude pattern of the probe, zero behind it."""
    c = float(np.dot(unit(direction), boresight))
    return max(c, 0.0) ** n


def mirror(point, plane):
    """The image of `point` in the plane (axis index, position)."""
    axis, pos = plane
    q = point.copy()
    q[axis] = 2.0 * pos - q[axis]
    return q


def paths(room, angle_deg):
    """Direct and first-order reflected paths at one turntable angle: (length m,
    departure direction from the AUT, arrival direction seen from the probe, reflection
    coefficient), the direct path first."""
    th = math.radians(angle_deg)
    bore = np.array([math.cos(th), math.sin(th), 0.0])
    # The AUT's phase centre sits off the turntable axis, along its boresight.
    aut = np.array([0.0, 0.0, room["height_m"]]) + room["offset_m"] * bore
    probe = np.array([room["range_m"], 0.0, room["probe_height_m"]])
    out = [(np.linalg.norm(probe - aut), probe - aut, aut - probe, 1.0)]
    for plane in room["planes"]:
        p = (plane["axis"], plane["position_m"])
        probe_image = mirror(probe, p)
        aut_image = mirror(aut, p)
        # Both on the same side of the plane, or there is no reflection.
        side_a = aut[p[0]] - p[1]
        side_b = probe[p[0]] - p[1]
        if side_a * side_b <= 0:
            continue
        length = np.linalg.norm(probe_image - aut)
        out.append((length, probe_image - aut, aut_image - probe, plane["reflection"]))
    return bore, out


def sweep(room, angle_deg, f_hz):
    """S21 over the band at one angle, and the free-space truth (direct path only)."""
    bore, ps = paths(room, angle_deg)
    probe_bore = np.array([-1.0, 0.0, 0.0])
    fc = 0.5 * (f_hz[0] + f_hz[-1])
    total = np.zeros(len(f_hz), complex)
    truth = None
    for k, (length, dep, arr, gamma) in enumerate(ps):
        amp = np.array(
            [aut_amplitude(dep, bore, room["aut_n"], room["aut_back"], f, fc) for f in f_hz]
        )
        amp *= probe_amplitude(arr, probe_bore, room["probe_n"])
        # Friis transmission equation: lambda / (4 pi L), delay L / c.
        friis = C / (4.0 * math.pi * f_hz * length)
        s = gamma * amp * friis * np.exp(-2j * math.pi * f_hz * (length / C + room["cable_s"]))
        total += s
        if k == 0:
            truth = s
    return total, truth


def write_touchstone(path, f_hz, s21):
    with open(path, "w") as fh:
        fh.write("! written by room_model.py for the sweepgate acceptance test\n")
        fh.write("# HZ S RI R 50\n")
        for f, s in zip(f_hz, s21):
            fh.write(
                f"{f:.6f} 0 0 {s.real:.12e} {s.imag:.12e} {s.real:.12e} {s.imag:.12e} 0 0\n"
            )


ROOMS = [
    # A 2-4 GHz lab: floor, back wall behind the AUT, two side walls.
    {
        "name": "lab-2-4ghz",
        "start_hz": 2.0e9,
        "stop_hz": 4.0e9,
        "points": 401,
        "range_m": 4.0,
        "height_m": 1.6,
        "probe_height_m": 1.6,
        "offset_m": 0.05,
        "cable_s": 2.0e-9,
        "aut_n": 4.0,
        "aut_back": 10 ** (-35 / 20),
        "probe_n": 2.0,
        "planes": [
            {"axis": 2, "position_m": 0.0, "reflection": -0.5},
            {"axis": 0, "position_m": -2.5, "reflection": -0.7},
            {"axis": 1, "position_m": 3.0, "reflection": -0.5},
            {"axis": 1, "position_m": -3.2, "reflection": -0.5},
        ],
        "noise": 1e-7,
    },
    # An 8-12 GHz bench: the table 0.75 m below the antennas, a cabinet to one side.
    {
        "name": "bench-8-12ghz",
        "start_hz": 8.0e9,
        "stop_hz": 12.0e9,
        "points": 801,
        "range_m": 2.0,
        "height_m": 1.75,
        "probe_height_m": 1.75,
        "offset_m": 0.03,
        "cable_s": 1.0e-9,
        "aut_n": 6.0,
        "aut_back": 10 ** (-40 / 20),
        "probe_n": 4.0,
        "planes": [
            {"axis": 2, "position_m": 1.0, "reflection": -0.4},
            {"axis": 1, "position_m": 1.2, "reflection": -0.4},
        ],
        "noise": 1e-7,
    },
    # A 1-2 GHz outdoor range: 6 m towers, 20 m apart, over ground reflecting -0.8.
    {
        "name": "outdoor-1-2ghz",
        "start_hz": 1.0e9,
        "stop_hz": 2.0e9,
        "points": 201,
        "range_m": 20.0,
        "height_m": 6.0,
        "probe_height_m": 6.0,
        "offset_m": 0.08,
        "cable_s": 5.0e-9,
        "aut_n": 2.0,
        "aut_back": 10 ** (-30 / 20),
        "probe_n": 2.0,
        "planes": [{"axis": 2, "position_m": 0.0, "reflection": -0.8}],
        "noise": 1e-7,
    },
    # The same range with 1.5 m towers: the ground bounce comes 0.75 ns after the direct
    # path, inside the main lobe of a 1 GHz band. No gate can separate them.
    {
        "name": "low-towers-1-2ghz",
        "start_hz": 1.0e9,
        "stop_hz": 2.0e9,
        "points": 201,
        "range_m": 20.0,
        "height_m": 1.5,
        "probe_height_m": 1.5,
        "offset_m": 0.0,
        "cable_s": 5.0e-9,
        "aut_n": 2.0,
        "aut_back": 10 ** (-30 / 20),
        "probe_n": 2.0,
        "planes": [{"axis": 2, "position_m": 0.0, "reflection": -0.8}],
        "noise": 1e-7,
    },
]

# Null-to-null main lobe of a Kaiser window with 50 dB sidelobes, in 1/bandwidth:
# (2/pi) sqrt(beta^2 + pi^2), beta = 0.76609 (A - 13.26)^0.4 + 0.09834 (A - 13.26) for a
# sidelobe level A = 50 dB (Kaiser and Schafer, "On the use of the I0-sinh window for
# spectrum analysis", IEEE Trans. ASSP 28, 1980).
BETA = 0.76609 * (50.0 - 13.26) ** 0.4 + 0.09834 * (50.0 - 13.26)
MAINLOBE = 2.0 / math.pi * math.sqrt(BETA**2 + math.pi**2)


def write_room(room, out, rng):
    d = os.path.join(out, room["name"])
    os.makedirs(os.path.join(d, "sweeps"), exist_ok=True)
    f = np.linspace(room["start_hz"], room["stop_hz"], room["points"])
    rows = ["angle_deg,file"]
    truth_rows = ["angle_deg,frequency_hz,truth_db"]
    nearest = math.inf
    direct = [math.inf, -math.inf]
    earliest_echo = math.inf
    # Noise relative to the direct path at boresight.
    noise = room["noise"] * np.max(np.abs(sweep(room, 0.0, f)[1]))
    for a in range(-180, 180):
        s, t = sweep(room, float(a), f)
        s = s + noise * (rng.standard_normal(len(f)) + 1j * rng.standard_normal(len(f)))
        name = f"sweeps/a{a + 180:03d}.s2p"
        write_touchstone(os.path.join(d, name), f, s)
        rows.append(f"{a},{name}")
        for fi, ti in zip(f, t):
            truth_rows.append(f"{a},{fi:.6f},{20 * math.log10(abs(ti)):.9f}")
        _, ps = paths(room, float(a))
        d0 = ps[0][0] / C + room["cable_s"]
        direct = [min(direct[0], d0), max(direct[1], d0)]
        for length, *_ in ps[1:]:
            nearest = min(nearest, (length - ps[0][0]) / C)
            earliest_echo = min(earliest_echo, length / C + room["cable_s"])
    with open(os.path.join(d, "manifest.csv"), "w") as fh:
        fh.write("\n".join(rows) + "\n")
    with open(os.path.join(d, "truth.csv"), "w") as fh:
        fh.write("\n".join(truth_rows) + "\n")
    bandwidth = room["stop_hz"] - room["start_hz"]
    info = {
        "name": room["name"],
        "frequencies_hz": [float(x) for x in f],
        "nearest_echo_after_direct_ns": float(nearest * 1e9),
        "mainlobe_ns": MAINLOBE / bandwidth * 1e9,
        # Delays (path length / c, plus the cable) of the direct path over all angles and
        # of the earliest reflection at any angle.
        "direct_ns": [direct[0] * 1e9, direct[1] * 1e9],
        "earliest_echo_ns": float(earliest_echo * 1e9),
        # An echo inside the direct path's main lobe cannot be gated away.
        "separable": bool(nearest > MAINLOBE / bandwidth),
    }
    with open(os.path.join(d, "room.json"), "w") as fh:
        json.dump(info, fh, indent=1)
    return info


def main():
    if len(sys.argv) != 2:
        sys.exit("usage: room_model.py OUT_DIR")
    out = sys.argv[1]
    rng = np.random.default_rng(13)
    for room in ROOMS:
        info = write_room(room, out, rng)
        print(
            f"{info['name']}: nearest echo {info['nearest_echo_after_direct_ns']:.3f} ns after "
            f"the direct path, main lobe {info['mainlobe_ns']:.3f} ns, "
            f"{'separable' if info['separable'] else 'unseparable'}"
        )


if __name__ == "__main__":
    main()
