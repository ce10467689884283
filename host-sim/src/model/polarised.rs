//! Polarised antenna models: complex far-field components (E_θ, E_φ) in the antenna frame
//! of [`crate::model::coords`] (boresight `+z`, reference polarisation `x`), unnormalized
//! (common factors such as −jωμ e^{−jkr}/(4πr) dropped; directivity is a ratio).
//!
//! - a short electric dipole of moment along `axis`: E = p − (p·r̂) r̂ (Balanis, Antenna
//!   Theory, 4th ed., ch. 4, infinitesimal dipole);
//! - a thin centre-fed dipole of length L along `axis`: the same direction with amplitude
//!   (cos(kL/2·cos ψ) − cos(kL/2)) / sin² ψ, ψ from the wire (Balanis, ch. 4,
//!   finite-length dipole; sin ψ = |p − (p·r̂) r̂|);
//! - a Huygens source (crossed electric and magnetic dipoles): E = (1 + cos θ)/2 along
//!   Ludwig's third reference vector (Ludwig 1973);
//! - a uniform rectangular aperture in the x–y plane (size a along x, b along y),
//!   x-polarised with a Huygens obliquity factor (1 + cos θ)/2, plus a y-polarised
//!   cross-polar aperture field `cross_polar`·sin(2πx/a)·sin(2πy/b): zero on axis, four
//!   lobes in the diagonal planes as a horn's cross-polarisation has. With
//!   X = (ka/2) sin θ cos φ and Y = (kb/2) sin θ sin φ the aperture integrals are
//!   sinc X · sinc Y for the co-polar field and −G(X)·G(Y), G(u) = (sinc(u − π) −
//!   sinc(u + π))/2, for the cross-polar one (sinc u = sin u / u).

use num_complex::Complex64;
use sweepgate::plan::SPEED_OF_LIGHT_M_S;

use crate::model::coords::{co_cross_vectors, unit_vectors, Definition, Reference, Vec3};

/// A polarised antenna model (module notes).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum PolarisedAntenna {
    /// Short electric dipole along `axis` (antenna frame, need not be unit length).
    ShortDipole {
        /// The dipole's direction.
        axis: Vec3,
    },
    /// Thin centre-fed dipole of total length `length_m` along `axis`.
    Dipole {
        /// Total length, m (λ/2 for a half-wave dipole).
        length_m: f64,
        /// The wire's direction.
        axis: Vec3,
    },
    /// Huygens source with reference polarisation `x`.
    Huygens,
    /// Uniform rectangular aperture, x-polarised, with a cross-polar aperture term.
    Aperture {
        /// Size along x, m.
        width_m: f64,
        /// Size along y, m.
        height_m: f64,
        /// Peak of the cross-polar aperture field relative to the co-polar one (complex).
        cross_polar: Complex64,
    },
}

fn sinc(u: f64) -> f64 {
    if u.abs() < 1e-9 {
        1.0
    } else {
        u.sin() / u
    }
}

/// The cross-polar aperture integral G(u) of the module notes.
fn odd_sinc(u: f64) -> f64 {
    use std::f64::consts::PI;
    (sinc(u - PI) - sinc(u + PI)) / 2.0
}

fn dot(a: Vec3, b: Vec3) -> f64 {
    a[0] * b[0] + a[1] * b[1] + a[2] * b[2]
}

impl PolarisedAntenna {
    /// The far field (E_θ, E_φ) at `f_hz` towards (θ, φ), degrees.
    ///
    /// ```
    /// use sweepgate_host::model::polarised::PolarisedAntenna;
    /// // A vertical (z) short dipole radiates along θ̂ only, as sin θ.
    /// let (et, ep) = PolarisedAntenna::ShortDipole { axis: [0.0, 0.0, 1.0] }.field(1e9, 30.0, 10.0);
    /// assert!((et.re + 0.5).abs() < 1e-12 && ep.norm() < 1e-12);
    /// ```
    pub fn field(&self, f_hz: f64, theta_deg: f64, phi_deg: f64) -> (Complex64, Complex64) {
        let k = 2.0 * std::f64::consts::PI * f_hz / SPEED_OF_LIGHT_M_S;
        let (_, t, p) = unit_vectors(theta_deg, phi_deg);
        let real = |a: f64, b: f64| (Complex64::new(a, 0.0), Complex64::new(b, 0.0));
        match *self {
            PolarisedAntenna::ShortDipole { axis } => real(dot(axis, t), dot(axis, p)),
            PolarisedAntenna::Dipole { length_m, axis } => {
                let n = dot(axis, axis).sqrt();
                let a = axis.map(|c| c / n);
                let (at, ap) = (dot(a, t), dot(a, p));
                let sin2 = at * at + ap * ap;
                if sin2 < 1e-24 {
                    return real(0.0, 0.0);
                }
                let cos_psi = (1.0 - sin2).max(0.0).sqrt();
                let r = unit_vectors(theta_deg, phi_deg).0;
                let cos_psi = cos_psi.copysign(dot(a, r));
                let h = k * length_m / 2.0;
                let amp = ((h * cos_psi).cos() - h.cos()) / sin2;
                real(amp * at, amp * ap)
            }
            PolarisedAntenna::Huygens => {
                let (co, _) = co_cross_vectors(Definition::Third, Reference::X, theta_deg, phi_deg);
                let g = (1.0 + theta_deg.to_radians().cos()) / 2.0;
                real(g * co[0], g * co[1])
            }
            PolarisedAntenna::Aperture {
                width_m,
                height_m,
                cross_polar,
            } => {
                let st = theta_deg.to_radians().sin();
                let (sp, cp) = phi_deg.to_radians().sin_cos();
                let x = k * width_m / 2.0 * st * cp;
                let y = k * height_m / 2.0 * st * sp;
                let g = (1.0 + theta_deg.to_radians().cos()) / 2.0;
                let co_amp = Complex64::new(g * sinc(x) * sinc(y), 0.0);
                let cross_amp = -cross_polar * (g * odd_sinc(x) * odd_sinc(y));
                let (co, cr) =
                    co_cross_vectors(Definition::Third, Reference::X, theta_deg, phi_deg);
                (
                    co_amp * co[0] + cross_amp * cr[0],
                    co_amp * co[1] + cross_amp * cr[1],
                )
            }
        }
    }

    /// Ludwig-3 (co, cross) components, reference `x`, at `f_hz` towards (θ, φ).
    pub fn co_cross(&self, f_hz: f64, theta_deg: f64, phi_deg: f64) -> (Complex64, Complex64) {
        let (et, ep) = self.field(f_hz, theta_deg, phi_deg);
        crate::model::coords::co_cross(Definition::Third, Reference::X, theta_deg, phi_deg, et, ep)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_cross_polar_aperture_integral_matches_a_direct_sum() {
        // G(u) = ½∫₋₁¹ sin(πs)·sin(us) ds, by the midpoint rule.
        for u in [0.0, 0.7, 2.0, 3.2, 9.0] {
            let n = 20000;
            let direct: f64 = (0..n)
                .map(|i| {
                    let s = -1.0 + (i as f64 + 0.5) * 2.0 / n as f64;
                    (std::f64::consts::PI * s).sin() * (u * s).sin() * 2.0 / n as f64
                })
                .sum::<f64>()
                / 2.0;
            assert!(
                (direct - odd_sinc(u)).abs() < 1e-6,
                "u={u}: {direct} vs {}",
                odd_sinc(u)
            );
        }
    }

    #[test]
    fn a_huygens_source_is_all_co_polar_and_the_aperture_cross_is_off_axis() {
        let h = PolarisedAntenna::Huygens;
        let (co, x) = h.co_cross(1e9, 60.0, 33.0);
        assert!(x.norm() < 1e-12 && (co.re - 0.75).abs() < 1e-12);
        let a = PolarisedAntenna::Aperture {
            width_m: 0.3,
            height_m: 0.2,
            cross_polar: Complex64::new(0.1, 0.0),
        };
        let (co, x) = a.co_cross(10e9, 0.0, 0.0);
        assert!((co.re - 1.0).abs() < 1e-12 && x.norm() < 1e-12);
        // In the principal planes the cross-polar term vanishes (G(0) = 0).
        assert!(a.co_cross(10e9, 20.0, 0.0).1.norm() < 1e-12);
        assert!(a.co_cross(10e9, 20.0, 90.0).1.norm() < 1e-12);
        assert!(a.co_cross(10e9, 5.0, 45.0).1.norm() > 1e-4);
    }
}
