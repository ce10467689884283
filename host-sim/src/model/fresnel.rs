//! Fresnel reflection of a plane wave off a flat half-space of a given material, TE
//! (E perpendicular to the plane of incidence) and TM (E in it), and the reflection of a
//! field vector along a ray.
//!
//! With the time convention e^{jωt} the material's complex relative permittivity is
//! ε = ε' − j·σ/(ω·ε₀). For an incidence angle θ from the plane's normal, with
//! c = cos θ and w = √(ε − sin² θ) (the root with a non-negative real part):
//!
//! ```text
//! Γ_TE = (c − w) / (c + w)          Γ_TM = (ε·c − w) / (ε·c + w)
//! ```
//!
//! Γ_TM is taken with the TM reference vectors p̂ = k̂ × ŝ on both the incident and the
//! reflected ray (ŝ the TE unit vector, k̂ the direction of travel): a perfect conductor
//! then gives Γ_TE = −1 and Γ_TM = +1, and at normal incidence Γ_TM = −Γ_TE, the same
//! physical field reflected by (1 − √ε)/(1 + √ε) (Hecht, Optics, 4th ed., §4.6.2, the
//! Fresnel equations; Balanis, Advanced Engineering Electromagnetics, 2nd ed., ch. 5,
//! oblique incidence on a lossy medium).

use num_complex::Complex64;

/// Permittivity of free space, F/m (CODATA 2018).
pub const EPSILON_0_F_M: f64 = 8.854_187_812_8e-12;

/// A reflecting half-space's material.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Medium {
    /// Relative permittivity ε' (real part), ≥ 1.
    pub relative_permittivity: f64,
    /// Conductivity σ, S/m, ≥ 0.
    pub conductivity_s_m: f64,
}

impl Medium {
    /// The complex relative permittivity ε' − j·σ/(ω·ε₀) at `f_hz`.
    pub fn complex_permittivity(&self, f_hz: f64) -> Complex64 {
        let omega = 2.0 * std::f64::consts::PI * f_hz;
        Complex64::new(
            self.relative_permittivity,
            -self.conductivity_s_m / (omega * EPSILON_0_F_M),
        )
    }

    /// (Γ_TE, Γ_TM) at `f_hz` for incidence `incidence_deg` from the normal (module
    /// notes).
    ///
    /// ```
    /// use sweepgate_host::model::fresnel::Medium;
    /// // Glass (n = 1.5) at normal incidence: Γ_TE = (1 − 1.5)/(1 + 1.5) = −0.2.
    /// let glass = Medium { relative_permittivity: 2.25, conductivity_s_m: 0.0 };
    /// let (te, tm) = glass.reflection(1e9, 0.0);
    /// assert!((te.re + 0.2).abs() < 1e-12 && (tm.re - 0.2).abs() < 1e-12);
    /// ```
    pub fn reflection(&self, f_hz: f64, incidence_deg: f64) -> (Complex64, Complex64) {
        coefficients(self.complex_permittivity(f_hz), incidence_deg)
    }
}

/// (Γ_TE, Γ_TM) for complex relative permittivity `eps` (module notes).
pub fn coefficients(eps: Complex64, incidence_deg: f64) -> (Complex64, Complex64) {
    let (s, c) = incidence_deg.to_radians().sin_cos();
    let mut w = (eps - s * s).sqrt();
    if w.re < 0.0 {
        w = -w;
    }
    let te = (c - w) / (c + w);
    let tm = (eps * c - w) / (eps * c + w);
    (te, tm)
}

/// The Brewster angle atan(√ε) of a lossless medium, degrees: Γ_TM = 0 there.
pub fn brewster_deg(relative_permittivity: f64) -> f64 {
    relative_permittivity.sqrt().atan().to_degrees()
}

/// A complex field vector `[x, y, z]`.
pub type CVec3 = [Complex64; 3];

fn dot(a: [f64; 3], b: [f64; 3]) -> f64 {
    a[0] * b[0] + a[1] * b[1] + a[2] * b[2]
}

fn cross(a: [f64; 3], b: [f64; 3]) -> [f64; 3] {
    [
        a[1] * b[2] - a[2] * b[1],
        a[2] * b[0] - a[0] * b[2],
        a[0] * b[1] - a[1] * b[0],
    ]
}

fn unit(v: [f64; 3]) -> Option<[f64; 3]> {
    let n = dot(v, v).sqrt();
    (n > 1e-12).then(|| v.map(|c| c / n))
}

fn cdot(e: &CVec3, u: [f64; 3]) -> Complex64 {
    e[0] * u[0] + e[1] * u[1] + e[2] * u[2]
}

/// Reflects field `e` travelling along unit `k` off a plane of unit normal `normal` with
/// coefficients (Γ_TE, Γ_TM): returns the reflected direction and field. At normal
/// incidence (no plane of incidence) any ŝ across the normal serves; both coefficients are
/// then the same physical reflection.
pub fn reflect(
    e: &CVec3,
    k: [f64; 3],
    normal: [f64; 3],
    te: Complex64,
    tm: Complex64,
) -> ([f64; 3], CVec3) {
    let kn = dot(k, normal);
    let kr = [0, 1, 2].map(|i| k[i] - 2.0 * kn * normal[i]);
    let s = unit(cross(k, normal)).unwrap_or_else(|| {
        let helper = if normal[0].abs() < 0.9 {
            [1.0, 0.0, 0.0]
        } else {
            [0.0, 1.0, 0.0]
        };
        unit(cross(helper, normal)).unwrap_or([0.0, 1.0, 0.0])
    });
    let p_in = cross(k, s);
    let p_out = cross(kr, s);
    let (a_s, a_p) = (cdot(e, s), cdot(e, p_in));
    let out = [0, 1, 2].map(|i| te * a_s * s[i] + tm * a_p * p_out[i]);
    (kr, out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_perfect_conductor_cancels_the_tangential_field() {
        // σ → ∞: Γ_TE → −1, Γ_TM → +1, and E_in + E_out has no tangential part at the
        // surface for any incidence and polarisation.
        let metal = Medium {
            relative_permittivity: 1.0,
            conductivity_s_m: 1e16,
        };
        for inc in [0.0, 30.0, 60.0, 85.0] {
            let (te, tm) = metal.reflection(1e9, inc);
            assert!(
                (te + 1.0).norm() < 1e-6 && (tm - 1.0).norm() < 1e-6,
                "{inc}: {te} {tm}"
            );
            let (s, c) = f64::to_radians(inc).sin_cos();
            let k = [s, 0.0, -c];
            let e_in: CVec3 = [
                Complex64::new(c * 0.6, 0.0),
                Complex64::new(0.8, 0.0),
                Complex64::new(s * 0.6, 0.0),
            ];
            let (kr, e_out) = reflect(&e_in, k, [0.0, 0.0, 1.0], te, tm);
            assert!((kr[2] - c).abs() < 1e-12);
            for i in 0..2 {
                assert!((e_in[i] + e_out[i]).norm() < 1e-5, "{inc}: {i}");
            }
        }
    }
}
