#!/usr/bin/env python3
"""A polarised antenna measured over the whole sphere in a room with echoes, for the
end-to-end test of the sphere analysis (host-sim/tests/sphere_end_to_end.rs).

Written for the test alone: it shares no code with sweepgate's simulator or its antenna
models.

The AUT is a rectangular aperture in its x-y plane (boresight +z), a = 0.12 m along x,
b = 0.09 m along y, with an x-polarised field cos(pi y / b) (uniform in x) and a small
y-polarised field C * (2x/a) * sin(2 pi y / b) (odd in x and in y, so zero on axis and in
the principal planes). Each aperture point is a Huygens source (crossed electric and
magnetic dipoles), whose far field is (1 + cos theta) times Ludwig's third-definition
vector of its polarisation (Ludwig, IEEE Trans. AP-21, 1973), so the far field is

    E_co    = (1 + cos theta)/2 * FT{E_x}(k_x, k_y)
    E_cross = (1 + cos theta)/2 * FT{E_y}(k_x, k_y)

in Ludwig-3 components, k_x = k sin theta cos phi, k_y = k sin theta sin phi; the Fourier
integrals are done here by the midpoint rule over the aperture (separable, 48 x 36 points).

The room: the AUT on a positioner at (0, 0, 1.5 m), a dual-polarised probe at
(3 m, 0, 1.5 m) looking back along -x with its co port along the room's y and its cross
port along z, amplitude pattern cos^2 of the angle off its boresight. Room frame x -> the
AUT's z at the positioner's home, y -> the AUT's x, z -> the AUT's y. At positioner
setting (theta, phi) the AUT is turned so that the probe lies at (theta, phi) of the AUT
and the probe's co port along the AUT's Ludwig-3 co vector there (the AUT frame is the room
frame rotated by the matrix with columns r, co, cross): the direct path then measures the
Ludwig-3 co and cross components.

Echoes by the image method (a reflection off an infinite plane is the field of the
mirrored source times the plane's reflection coefficients; Balanis, Antenna Theory, 4th
ed., ch. 4): a floor z = 0 (relative permittivity 4, 0.01 S/m), a side wall y = 2 m
(6, 0.05 S/m) and a wall x = -2 m behind the AUT (3, 0). Each reflection splits the field
into its parts across and in the plane of incidence and scales them with Fresnel's
coefficients, computed here from the impedances and the complex transmission angle
(Balanis, Advanced Engineering Electromagnetics, 2nd ed., ch. 5), with the in-plane part
referred to k x s on both rays (so a perfect conductor gives -1 across and +1 in plane).
Free space: amplitude lambda/(4 pi L), delay L/c (Friis).

Writes into OUT:

- `s3p/c<cut>_a<angle>.s3p`: 3-port Touchstone files (RI, Hz), S21 = co port, S31 = cross
  port, the rest 0, one per positioner setting: cut planes phi = 0, 5, ..., 175 degrees,
  signed angle -175 ... 180 in 5 degree steps (negative: theta = -angle at phi + 180);
- `manifest.csv` (`theta_deg,phi_deg,file`) of every file, and `cut_<cut>.csv`
  (`angle_deg,file`) per cut plane;
- `truth.csv` (`theta_deg,phi_deg,frequency_hz,co_re,co_im,cross_re,cross_im`): the direct
  path alone (free-space truth) at the pattern frequencies;
- `truth.json`: the AUT's directivity at the pattern frequencies from its own pattern on a
  fine grid (0.25 degree midpoint rule in theta and phi), its gain (the field is scaled to
  EFFICIENCY times the 10 GHz directivity at boresight), and the sampling used;
- `reference.csv` (`frequency_hz,re,im`): S21 of a reference antenna of REFERENCE_DBI gain
  in the AUT's place, direct path alone (the substitution measurement).

Usage: sphere_room.py OUT_DIR
"""

import json
import os
import sys

import numpy as np

C = 299_792_458.0
EPS0 = 8.8541878128e-12

A_M, B_M = 0.12, 0.09
CROSS = 0.35 + 0.2j
AUT = np.array([0.0, 0.0, 1.5])
PROBE = np.array([3.0, 0.0, 1.5])
# (axis, position, relative permittivity, conductivity S/m)
PLANES = [(2, 0.0, 4.0, 0.01), (1, 2.0, 6.0, 0.05), (0, -2.0, 3.0, 0.0)]
F_START, F_STOP, POINTS = 8e9, 12e9, 101
PATTERN_HZ = [9.6e9, 10e9, 10.4e9]
STEP_DEG = 5.0
# The AUT's field is scaled so that its boresight gain is EFFICIENCY times its directivity at
# 10 GHz (the same scale at every frequency: its gain is then that value throughout).
EFFICIENCY = 0.8
# The reference antenna of the substitution measurement: gain REFERENCE_DBI at boresight,
# co-polarised, measured on the direct path alone.
REFERENCE_DBI = 15.0
SCALE = [1.0]


def aperture_ft(kx, ky):
    """FT of the co (E_x) and cross (E_y) aperture fields at wavenumbers kx, ky (arrays of
    one shape), normalized so that FT{E_x}(0, 0) = 1."""
    nx, ny = 48, 36
    x = (np.arange(nx) + 0.5) / nx * A_M - A_M / 2
    y = (np.arange(ny) + 0.5) / ny * B_M - B_M / 2
    ex = np.exp(1j * np.multiply.outer(kx, x))
    ey = np.exp(1j * np.multiply.outer(ky, y))
    co_x = ex.mean(axis=-1)
    co_y = (ey * np.cos(np.pi * y / B_M)).mean(axis=-1)
    cr_x = (ex * (2 * x / A_M)).mean(axis=-1)
    cr_y = (ey * np.sin(2 * np.pi * y / B_M)).mean(axis=-1)
    norm = np.cos(np.pi * y / B_M).mean()
    return co_x * co_y / norm, CROSS * cr_x * cr_y / norm


def spherical(d):
    """theta, phi and the Ludwig-3 co and cross unit vectors of unit directions d (..., 3)."""
    theta = np.arccos(np.clip(d[..., 2], -1, 1))
    phi = np.arctan2(d[..., 1], d[..., 0])
    ct, st, cp, sp = np.cos(theta), np.sin(theta), np.cos(phi), np.sin(phi)
    th = np.stack([ct * cp, ct * sp, -st], axis=-1)
    ph = np.stack([-sp, cp, np.zeros_like(sp)], axis=-1)
    co = cp[..., None] * th - sp[..., None] * ph
    cr = sp[..., None] * th + cp[..., None] * ph
    return theta, phi, co, cr


def aut_field(d, f):
    """The AUT's far-field vector (AUT frame) towards unit directions d (..., 3) at
    frequencies f (broadcast against d's leading shape)."""
    theta, phi, co, cr = spherical(d)
    k = 2 * np.pi * f / C
    kx = k * np.sin(theta) * np.cos(phi)
    ky = k * np.sin(theta) * np.sin(phi)
    fco, fcr = aperture_ft(kx, ky)
    g = SCALE[0] * (1 + np.cos(theta)) / 2
    return (g * fco)[..., None] * co + (g * fcr)[..., None] * cr


def rotation(theta_deg, phi_deg):
    """Room -> AUT frame at a positioner setting: columns r, co, cross (module notes)."""
    t, p = np.radians(theta_deg), np.radians(phi_deg)
    ct, st, cp, sp = np.cos(t), np.sin(t), np.cos(p), np.sin(p)
    r = np.array([st * cp, st * sp, ct])
    th = np.array([ct * cp, ct * sp, -st])
    ph = np.array([-sp, cp, 0.0])
    return np.stack([r, cp * th - sp * ph, sp * th + cp * ph], axis=1)


def fresnel(eps_r, sigma, f, cos_i):
    """(across, in-plane) reflection coefficients from the impedances and the complex
    transmission angle; in-plane referred to k x s on both rays (module notes)."""
    eps = eps_r - 1j * sigma / (2 * np.pi * f * EPS0)
    sin_i = np.sqrt(1 - cos_i**2)
    sin_t = sin_i / np.sqrt(eps)
    cos_t = np.sqrt(1 - sin_t**2)
    cos_t = np.where(cos_t.real < 0, -cos_t, cos_t)
    eta1, eta2 = 1.0, 1.0 / np.sqrt(eps)
    across = (eta2 * cos_i - eta1 * cos_t) / (eta2 * cos_i + eta1 * cos_t)
    parallel = (eta2 * cos_t - eta1 * cos_i) / (eta2 * cos_t + eta1 * cos_i)
    return across, -parallel


def paths():
    """(length, departure direction from the AUT, arrival direction at the probe (of
    travel), plane or None)."""
    out = []
    d = PROBE - AUT
    out.append((np.linalg.norm(d), d / np.linalg.norm(d), d / np.linalg.norm(d), None))
    for plane in PLANES:
        axis, pos = plane[0], plane[1]
        img = PROBE.copy()
        img[axis] = 2 * pos - img[axis]
        d = img - AUT
        length = np.linalg.norm(d)
        k_in = d / length
        k_out = k_in.copy()
        k_out[axis] = -k_out[axis]
        out.append((length, k_in, k_out, plane))
    return out


def reflect(e, k_in, k_out, plane, f):
    """Reflects field vectors e (..., 3) travelling along k_in off `plane` at f (...)."""
    axis, _, eps_r, sigma = plane
    n = np.zeros(3)
    n[axis] = 1.0
    cos_i = abs(k_in[axis])
    s = np.cross(k_in, n)
    if np.linalg.norm(s) < 1e-12:
        # Normal incidence: no plane of incidence; any s across the normal serves.
        s = np.cross(np.array([0.0, 0.0, 1.0]) if axis != 2 else np.array([1.0, 0.0, 0.0]), n)
    s = s / np.linalg.norm(s)
    p_in, p_out = np.cross(k_in, s), np.cross(k_out, s)
    across, inplane = fresnel(eps_r, sigma, f, cos_i)
    a_s = e @ s
    a_p = e @ p_in
    return (across * a_s)[..., None] * s + (inplane * a_p)[..., None] * p_out


def probe_ports(e, k_arrive):
    """(co, cross) port voltages for field vectors e arriving travelling along k_arrive."""
    look = -k_arrive  # from the probe towards the source
    gain = max(np.dot(look, np.array([-1.0, 0.0, 0.0])), 0.0) ** 2
    out = []
    for port in (np.array([0.0, 1.0, 0.0]), np.array([0.0, 0.0, 1.0])):
        t = port - np.dot(port, look) * look
        t = t / np.linalg.norm(t)
        out.append(gain * (e @ t))
    return out


def respond(settings, f, direct_only):
    """(co, cross) port voltages at positioner settings [(theta, phi)] and frequencies f:
    arrays (settings, frequencies); with `direct_only` the free-space truth."""
    rots = np.stack([rotation(t, p) for t, p in settings])  # room -> AUT: v_aut = R v_room
    co = np.zeros((len(settings), len(f)), complex)
    cr = np.zeros_like(co)
    lam = C / f
    for length, k_in, k_out, plane in paths():
        if direct_only and plane is not None:
            continue
        d_aut = np.einsum("sji,i->sj", rots, k_in)  # (S, 3)
        dd = np.broadcast_to(d_aut[:, None, :], (len(settings), len(f), 3))
        ff = np.broadcast_to(f[None, :], (len(settings), len(f)))
        e_aut = aut_field(dd, ff)  # (S, F, 3) in the AUT frame
        e_room = np.einsum("sji,sfj->sfi", rots, e_aut)
        if plane is not None:
            e_room = reflect(e_room, k_in, k_out, plane, ff)
        pc, px = probe_ports(e_room, k_out)
        spread = lam / (4 * np.pi * length) * np.exp(-2j * np.pi * f * length / C)
        co += pc * spread
        cr += px * spread
    return co, cr


def write_s3p(path, f, s21, s31):
    zero = "0 0 0 0"
    with open(path, "w") as fh:
        fh.write("! sphere_room.py: S21 co port, S31 cross port\n# HZ S RI R 50\n")
        for i in range(len(f)):
            fh.write(f"{f[i]:.0f} 0 0 0 0 0 0\n")
            fh.write(f"{s21[i].real:.8e} {s21[i].imag:.8e} {zero}\n")
            fh.write(f"{s31[i].real:.8e} {s31[i].imag:.8e} {zero}\n")


def directivity(f):
    """The AUT's directivity at f from its own pattern, 0.25 degree midpoint rule."""
    step = 0.25
    t = np.radians((np.arange(int(180 / step)) + 0.5) * step)
    p = np.radians((np.arange(int(360 / step)) + 0.5) * step)
    total, peak = 0.0, 0.0
    for i0 in range(0, len(t), 60):
        tt = t[i0 : i0 + 60]
        T, P = np.meshgrid(tt, p, indexing="ij")
        d = np.stack([np.sin(T) * np.cos(P), np.sin(T) * np.sin(P), np.cos(T)], axis=-1)
        e = aut_field(d, np.full(T.shape, f))
        u = (np.abs(e) ** 2).sum(axis=-1)
        total += (u * np.sin(T)).sum() * np.radians(step) ** 2
        peak = max(peak, u.max())
    # The peak is on boresight (theta = 0), which the midpoint grid misses: take it there.
    e0 = aut_field(np.array([[0.0, 0.0, 1.0]]), np.array([f]))
    peak = max(peak, float((np.abs(e0) ** 2).sum()))
    return 10 * np.log10(4 * np.pi * peak / total)


def main():
    out = sys.argv[1]
    os.makedirs(os.path.join(out, "s3p"), exist_ok=True)
    directivities = [directivity(x) for x in PATTERN_HZ]
    gain = EFFICIENCY * 10 ** (directivities[PATTERN_HZ.index(10e9)] / 10)
    SCALE[0] = np.sqrt(gain)  # boresight |E|^2 is 1 before scaling
    f = np.linspace(F_START, F_STOP, POINTS)
    cuts = np.arange(0.0, 180.0, STEP_DEG)
    angles = np.arange(-180.0 + STEP_DEG, 180.0 + 1e-9, STEP_DEG)
    settings, names, rows = [], [], []
    for c in cuts:
        for a in angles:
            theta, phi = (a, c) if a >= 0 else (-a, c + 180.0)
            settings.append((theta, phi))
            name = f"c{c:03.0f}_a{a:+04.0f}.s3p"
            names.append(name)
            rows.append((c, a, theta, phi, name))
    co, cr = respond(settings, f, direct_only=False)
    for k, name in enumerate(names):
        write_s3p(os.path.join(out, "s3p", name), f, co[k], cr[k])
    with open(os.path.join(out, "manifest.csv"), "w") as fh:
        fh.write("theta_deg,phi_deg,file\n")
        for c, a, theta, phi, name in rows:
            fh.write(f"{theta:g},{phi:g},s3p/{name}\n")
    for c in cuts:
        with open(os.path.join(out, f"cut_{c:03.0f}.csv"), "w") as fh:
            fh.write("angle_deg,file\n")
            for c2, a, _, _, name in rows:
                if c2 == c:
                    fh.write(f"{a:g},s3p/{name}\n")
    pf = np.array(PATTERN_HZ)
    tco, tcr = respond(settings, pf, direct_only=True)
    with open(os.path.join(out, "truth.csv"), "w") as fh:
        fh.write("theta_deg,phi_deg,frequency_hz,co_re,co_im,cross_re,cross_im\n")
        for k, (theta, phi) in enumerate(settings):
            for j, fj in enumerate(pf):
                fh.write(
                    f"{theta:g},{phi:g},{fj:.0f},{tco[k, j].real:.10e},{tco[k, j].imag:.10e},"
                    f"{tcr[k, j].real:.10e},{tcr[k, j].imag:.10e}\n"
                )
    probe = PROBE - AUT
    r = np.linalg.norm(probe)
    with open(os.path.join(out, "reference.csv"), "w") as fh:
        fh.write("frequency_hz,re,im\n")
        for fj in PATTERN_HZ:
            s21 = (
                np.sqrt(10 ** (REFERENCE_DBI / 10))
                * C / fj / (4 * np.pi * r)
                * np.exp(-2j * np.pi * fj * r / C)
            )
            fh.write(f"{fj:.0f},{s21.real:.10e},{s21.imag:.10e}\n")
    truth = {
        "frequencies_hz": PATTERN_HZ,
        "directivity_dbi": directivities,
        "gain_dbi": 10 * np.log10(gain),
        "reference_gain_dbi": REFERENCE_DBI,
        "step_deg": STEP_DEG,
        "cut_planes_deg": cuts.tolist(),
    }
    with open(os.path.join(out, "truth.json"), "w") as fh:
        json.dump(truth, fh, indent=1)


if __name__ == "__main__":
    main()
