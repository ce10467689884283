"""The Mie sum of a perfectly conducting sphere, written for the tests with scipy's spherical
Bessel functions (independent of sweepgate's recurrences).

S = sum_n (-1)^n (2n+1) (a_n - b_n), a_n = psi_n'(x)/xi_n'(x), b_n = psi_n(x)/xi_n(x),
psi_n = x j_n(x), xi_n = x h_n^(1)(x) (Bohren & Huffman, Absorption and Scattering of Light
by Small Particles, section 4.4, refractive index to infinity). sigma / (pi a^2) = |S|^2 / x^2.

Usage: mie_scipy.py KA [KA ...]; prints "ka ratio re_S im_S" per line.
"""
import sys

import numpy as np
from scipy import special


def mie_sum(x):
    n_max = int(np.ceil(x + 4.0 * x ** (1.0 / 3.0) + 10.0))
    n = np.arange(1, n_max + 1)
    j = special.spherical_jn(n, x)
    y = special.spherical_yn(n, x)
    jd = special.spherical_jn(n, x, derivative=True)
    yd = special.spherical_yn(n, x, derivative=True)
    h = j + 1j * y
    hd = jd + 1j * yd
    psi, psi_d = x * j, j + x * jd
    xi, xi_d = x * h, h + x * hd
    ok = np.isfinite(xi) & np.isfinite(xi_d)
    a = np.where(ok, psi_d / np.where(ok, xi_d, 1.0), 0.0)
    b = np.where(ok, psi / np.where(ok, xi, 1.0), 0.0)
    return np.sum((-1.0) ** n * (2 * n + 1) * (a - b))


def main():
    for arg in sys.argv[1:]:
        x = float(arg)
        s = mie_sum(x)
        print(f"{x!r} {float(abs(s) ** 2 / x ** 2)!r} {float(s.real)!r} {float(s.imag)!r}")


if __name__ == "__main__":
    main()
