"""An RCS range modelled for the tests alone (numpy and scipy; no code of sweepgate's
simulator): two horns side by side looking at a turntable, a quasi-monostatic S21 sweep per
turntable angle with

- the coupling between the horns (direct path, with a slow ripple over the band),
- the target's mount: a foam column with a metal fitting inside the zone, turning with the
  table, and the metal turntable ring behind the zone, both in the background,
- room clutter: back wall, side walls and floor (image-method paths, fixed),
- receiver noise, independent in every file, and a small drift of the coupling between
  the background run and the target run,
- the target: a perfectly conducting sphere (Mie series from scipy's spherical Bessel
  functions) and/or point scatterers, with the amplitude of the radar equation taken at the
  zone centre (far field) and the exact two-way path phase.

Writes, for each scene, Touchstone files (2-port, RI, Hz) with manifests:
  target.csv (angle_deg,file), background.csv (the empty mount at each angle),
  reference.s2p and reference_background.s2p (a sphere of known diameter at 0 deg, and the
  mount alone), truth.csv (angle_deg,frequency_hz,rcs_dbsm: the target's own RCS),
  scatterers.csv (x_m,y_m,rcs_m2 of the point scatterers, turntable frame at 0 deg; x away
  from the horns) and range.json (the geometry the command is told).

Usage: rcs_range.py OUT_DIR
"""
import json
import os
import sys

import numpy as np
from scipy import special

C = 299_792_458.0
F = np.linspace(8e9, 12e9, 401)
ANGLES = np.arange(-12.0, 12.0 + 1e-9, 0.5)
RANGE_M = 4.0  # horn midpoint to turntable centre
SEPARATION_M = 0.3  # between the horns
TIME_ZERO_S = 1.5e-9  # cables and feeds
GAIN = 10.0  # each horn, 10 dBi, over the whole zone
ZONE_M = 0.6
REFERENCE_DIAMETER_M = 0.3
RING_RADIUS_M = 0.7  # turntable ring, around the zone (its near side behind it)
RNG = np.random.default_rng(20261202)
NOISE = 3e-7


def mie_sphere_amplitude(radius_m, f_hz):
    """Complex backscatter amplitude (m) of a PEC sphere, e^(+jwt), phase at the centre:
    A = j conj(S) sqrt(pi) a / x, S = sum (-1)^n (2n+1)(a_n - b_n) (Bohren & Huffman)."""
    out = np.empty(len(f_hz), dtype=complex)
    for i, f in enumerate(f_hz):
        x = 2 * np.pi * f * radius_m / C
        n = np.arange(1, int(np.ceil(x + 4 * x ** (1 / 3) + 10)) + 1)
        j = special.spherical_jn(n, x)
        y = special.spherical_yn(n, x)
        jd = special.spherical_jn(n, x, derivative=True)
        yd = special.spherical_yn(n, x, derivative=True)
        h, hd = j + 1j * y, jd + 1j * yd
        a = (j + x * jd) / (h + x * hd)
        b = j / h
        s = np.sum((-1.0) ** n * (2 * n + 1) * (a - b))
        out[i] = 1j * np.conj(s) * np.sqrt(np.pi) * radius_m / x
    return out


def horns():
    tx = np.array([-RANGE_M, +SEPARATION_M / 2, 0.0])
    rx = np.array([-RANGE_M, -SEPARATION_M / 2, 0.0])
    return tx, rx


def spreading(f_hz):
    """Radar-equation amplitude at the zone centre: G lambda / ((4 pi)^1.5 R^2)."""
    lam = C / f_hz
    return GAIN * lam / ((4 * np.pi) ** 1.5 * RANGE_M**2)


def path_delay(p):
    tx, rx = horns()
    return TIME_ZERO_S + (np.linalg.norm(p - tx) + np.linalg.norm(p - rx)) / C


def rotate(p, angle_deg):
    t = np.radians(angle_deg)
    c, s = np.cos(t), np.sin(t)
    return np.array([c * p[0] - s * p[1], s * p[0] + c * p[1], p[2]])


def scatterer(p, amplitude):
    """S21 of a scatterer at p with complex amplitude (m), same for every frequency or per
    frequency; delay measured from the zone centre's path via the exact geometry."""
    return spreading(F) * amplitude * np.exp(-2j * np.pi * F * path_delay(p))


def coupling(drift):
    tx, rx = horns()
    t = TIME_ZERO_S + np.linalg.norm(tx - rx) / C
    ripple = 1 + 0.1 * np.cos(2 * np.pi * (F - F[0]) / 1.3e9)
    return 0.01 * drift * ripple * np.exp(-2j * np.pi * F * t)


def room():
    """Back wall 7 m beyond the table, side walls 2.5 m either side, floor 1.4 m below:
    absorber-covered (reflection 0.1), by images of the horn midpoint."""
    lam = C / F
    s = np.zeros(len(F), dtype=complex)
    for extra_path, refl in [(2 * 7.0 + 2 * RANGE_M, 0.1), (2 * np.hypot(2.5, 0), 0.08),
                             (2 * np.hypot(2.8, 0.6), 0.06), (2 * 1.4, 0.05)]:
        s += GAIN * lam / (4 * np.pi * extra_path) * refl * np.exp(
            -2j * np.pi * F * (TIME_ZERO_S + extra_path / C))
    return s


def mount(angle_deg):
    """Foam column with its metal fitting inside the zone (0.06 m), turning with the table,
    and the metal ring around the table (0.05 m; the same at every angle: its strongest
    return is the point of the ring's far side facing the horns)."""
    column = scatterer(rotate(np.array([0.02, 0.01, -0.2]), angle_deg), 0.06)
    ring = scatterer(np.array([RING_RADIUS_M, 0.0, -0.3]), 0.05)
    return column + ring


def noise():
    return NOISE * (RNG.standard_normal(len(F)) + 1j * RNG.standard_normal(len(F))) / np.sqrt(2)


def measure(target, angle_deg, drift=1.0):
    return coupling(drift) + room() + mount(angle_deg) + target + noise()


def write_s2p(path, s21):
    s11 = 0.05 * np.exp(-2j * np.pi * F * 0.3e-9)
    with open(path, "w") as fh:
        fh.write("! rcs_range.py: quasi-monostatic S21, written for the tests\n# Hz S RI R 50\n")
        for f, a, b in zip(F, s11, s21):
            fh.write(f"{f:.1f} {a.real:.9e} {a.imag:.9e} {b.real:.9e} {b.imag:.9e} "
                     f"{b.real:.9e} {b.imag:.9e} {a.real:.9e} {a.imag:.9e}\n")


def write_scene(out, name, target_of, points):
    d = os.path.join(out, name)
    os.makedirs(os.path.join(d, "sweeps"), exist_ok=True)
    rows_t, rows_b, truth = [], [], []
    for ang in ANGLES:
        tag = f"{'m' if ang < 0 else 'p'}{abs(ang) * 10:04.0f}"
        s, amp = target_of(ang)
        write_s2p(os.path.join(d, "sweeps", f"t{tag}.s2p"), measure(s, ang))
        write_s2p(os.path.join(d, "sweeps", f"b{tag}.s2p"), measure(0.0, ang, drift=1.002))
        rows_t.append(f"{ang:g},sweeps/t{tag}.s2p")
        rows_b.append(f"{ang:g},sweeps/b{tag}.s2p")
        for f, a in zip(F, amp):
            truth.append(f"{ang:g},{f:.1f},{10 * np.log10(abs(a) ** 2):.6f}")
    for fname, rows in [("target.csv", rows_t), ("background.csv", rows_b)]:
        with open(os.path.join(d, fname), "w") as fh:
            fh.write("angle_deg,file\n" + "\n".join(rows) + "\n")
    with open(os.path.join(d, "truth.csv"), "w") as fh:
        fh.write("angle_deg,frequency_hz,rcs_dbsm\n" + "\n".join(truth) + "\n")
    ref = mie_sphere_amplitude(REFERENCE_DIAMETER_M / 2, F)
    write_s2p(os.path.join(d, "reference.s2p"), measure(scatterer(np.zeros(3), ref), 0.0))
    write_s2p(os.path.join(d, "reference_background.s2p"), measure(0.0, 0.0, drift=0.998))
    with open(os.path.join(d, "scatterers.csv"), "w") as fh:
        fh.write("x_m,y_m,rcs_m2\n")
        for p, sigma in points:
            fh.write(f"{p[0]},{p[1]},{sigma}\n")


def main():
    out = sys.argv[1]
    sphere_amp = mie_sphere_amplitude(0.09, F)  # a 0.18 m sphere at the centre

    def sphere(ang):
        return scatterer(np.zeros(3), sphere_amp), sphere_amp

    points = [(np.array([0.0, 0.0, 0.0]), 0.01), (np.array([0.15, 0.06, 0.0]), 0.006),
              (np.array([-0.12, -0.10, 0.0]), 0.008)]

    def cluster(ang):
        s = np.zeros(len(F), dtype=complex)
        amp = np.zeros(len(F), dtype=complex)
        for p, sigma in points:
            q = rotate(p, ang)
            s += scatterer(q, np.sqrt(sigma))
            # Own RCS: phases referenced to the turntable centre, seen from the horns.
            amp += np.sqrt(sigma) * np.exp(-2j * np.pi * F * (path_delay(q) - path_delay(np.zeros(3))))
        return s, amp

    write_scene(out, "sphere", sphere, [])
    write_scene(out, "points", cluster, points)
    tx, rx = horns()
    geometry = {
        "time_zero_s": TIME_ZERO_S,
        "distance_m": RANGE_M,
        "separation_m": SEPARATION_M,
        "zone_m": ZONE_M,
        "reference_diameter_m": REFERENCE_DIAMETER_M,
        "coupling_s": TIME_ZERO_S + np.linalg.norm(tx - rx) / C,
        "mount_s": float(path_delay(np.array([RING_RADIUS_M, 0.0, -0.3]))),
        "target_sphere_diameter_m": 0.18,
    }
    with open(os.path.join(out, "range.json"), "w") as fh:
        json.dump(geometry, fh, indent=1)


if __name__ == "__main__":
    main()
