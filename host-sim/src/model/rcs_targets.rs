//! Reference targets for radar cross section: the exact monostatic RCS of a perfectly
//! conducting sphere by the Mie series, and the closed forms of the flat plate at normal
//! incidence, the dihedral and the triangular trihedral at their peaks.
//!
//! Each target gives a complex backscatter amplitude `A` in m (so σ = |A|² in m²) in the
//! e^(+jωt) convention of a VNA, its phase referenced to the target's reference point (the
//! sphere's centre; the plate's face; the corner's apex): a calibration divides a
//! measurement of the target by `A` to find the range's complex response.
//!
//! Signs, common practice, no source: a perfect conductor reflects the electric field with
//! −1, so a single bounce (plate, optical sphere) has amplitude −√σ, a double bounce
//! (dihedral) +√σ, a triple bounce (trihedral) −√σ.

use std::f64::consts::PI;
use std::fmt;

use num_complex::Complex64;
use sweepgate::plan::SPEED_OF_LIGHT_M_S;

/// Largest electrical size ka of a sphere accepted. The series is stable well beyond the
/// sizes used on a range (ka of a few hundred); past this its cost (≈ ka terms) is the limit.
pub const MAX_SPHERE_KA: f64 = 20_000.0;

/// A reference target whose RCS is known exactly or by a closed form.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum ReferenceTarget {
    /// A perfectly conducting sphere of this diameter (m): the Mie series.
    Sphere {
        /// Diameter, m.
        diameter_m: f64,
    },
    /// A flat perfectly conducting plate of this area (m²) seen at normal incidence:
    /// σ = 4πA²/λ² (Knott, Shaeffer & Tuley, *Radar Cross Section*, 2nd ed., ch. 5).
    Plate {
        /// Area of the plate, m² (any shape large against λ).
        area_m2: f64,
    },
    /// A right-angle dihedral of two a × b faces (b along the fold), seen at its broadside
    /// peak: σ = 8πa²b²/λ² (Knott, Shaeffer & Tuley, *Radar Cross Section*, 2nd ed.).
    Dihedral {
        /// Width of each face across the fold, m.
        width_m: f64,
        /// Length of the fold, m.
        length_m: f64,
    },
    /// A triangular trihedral corner of edge a, seen along its symmetry axis:
    /// σ = 4πa⁴/(3λ²) (Knott, Shaeffer & Tuley, *Radar Cross Section*, 2nd ed.).
    Trihedral {
        /// Length of the three edges that meet at the apex, m.
        edge_m: f64,
    },
}

/// Why a reference target's RCS could not be computed.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum TargetError {
    /// A size is not a finite number above zero.
    SizeNotPositive,
    /// The frequency is not a finite number above zero.
    FrequencyNotPositive,
    /// The sphere's ka is above [`MAX_SPHERE_KA`].
    SphereTooLarge {
        /// The sphere's ka.
        ka: f64,
    },
}

impl fmt::Display for TargetError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::SizeNotPositive => f.write_str("target size must be a finite number above 0 m"),
            Self::FrequencyNotPositive => {
                f.write_str("frequency must be a finite number above 0 Hz")
            }
            Self::SphereTooLarge { ka } => write!(
                f,
                "sphere's ka is {ka:.0}, above the {MAX_SPHERE_KA:.0} the series is computed to"
            ),
        }
    }
}

impl std::error::Error for TargetError {}

fn wavelength_m(frequency_hz: f64) -> Result<f64, TargetError> {
    if !(frequency_hz.is_finite() && frequency_hz > 0.0) {
        return Err(TargetError::FrequencyNotPositive);
    }
    Ok(SPEED_OF_LIGHT_M_S / frequency_hz)
}

fn positive(v: f64) -> Result<f64, TargetError> {
    if v.is_finite() && v > 0.0 {
        Ok(v)
    } else {
        Err(TargetError::SizeNotPositive)
    }
}

impl ReferenceTarget {
    /// The complex backscatter amplitude at `frequency_hz`, m (σ = |A|²; see the module
    /// notes for its phase and sign).
    ///
    /// ```
    /// use sweepgate_host::model::rcs_targets::ReferenceTarget;
    /// let plate = ReferenceTarget::Plate { area_m2: 1.0 };
    /// // 4π·1²/λ², λ = c/10 GHz: 13 982 m² (41.46 dBsm).
    /// let sigma = plate.rcs_m2(10e9).unwrap();
    /// assert!((sigma - 13_982.0).abs() < 1.0);
    /// ```
    pub fn amplitude(&self, frequency_hz: f64) -> Result<Complex64, TargetError> {
        let lambda = wavelength_m(frequency_hz)?;
        let real = |sigma: f64, sign: f64| Complex64::new(sign * sigma.sqrt(), 0.0);
        Ok(match *self {
            Self::Sphere { diameter_m } => sphere_amplitude(positive(diameter_m)? / 2.0, lambda)?,
            Self::Plate { area_m2 } => {
                let a = positive(area_m2)?;
                real(4.0 * PI * a * a / (lambda * lambda), -1.0)
            }
            Self::Dihedral { width_m, length_m } => {
                let (a, b) = (positive(width_m)?, positive(length_m)?);
                real(8.0 * PI * (a * b).powi(2) / (lambda * lambda), 1.0)
            }
            Self::Trihedral { edge_m } => {
                let a = positive(edge_m)?;
                real(4.0 * PI * a.powi(4) / (3.0 * lambda * lambda), -1.0)
            }
        })
    }

    /// The radar cross section at `frequency_hz`, m².
    pub fn rcs_m2(&self, frequency_hz: f64) -> Result<f64, TargetError> {
        Ok(self.amplitude(frequency_hz)?.norm_sqr())
    }
}

/// Number of Mie terms summed for a sphere of size `x` = ka: ka + 4·ka^(1/3) + 10
/// (Wiscombe, "Improved Mie scattering algorithms", Appl. Opt. 19(9), 1980, with a margin).
pub fn sphere_terms(ka: f64) -> usize {
    (ka + 4.0 * ka.cbrt() + 10.0).ceil() as usize
}

/// ψₙ(x) = x·jₙ(x), n = 0…n_max, by downward recurrence from well above n_max (Miller's
/// method, stable for every n), normalised by the exact ψ₀ = sin x or ψ₁ = sin x/x − cos x,
/// whichever is larger.
fn riccati_psi(x: f64, n_max: usize) -> Vec<f64> {
    // Well above both n_max and x: below n ≈ x the recurrence no longer decays downward.
    let top = n_max.max(sphere_terms(x));
    let start = top + 16 + 2 * ((top as f64).sqrt().ceil() as usize);
    let mut psi = vec![0.0; n_max + 1];
    let (mut above, mut here) = (0.0f64, 1e-30f64);
    for n in (1..=start).rev() {
        // ψ_{n−1} = (2n+1)/x · ψ_n − ψ_{n+1}
        let below = (2 * n + 1) as f64 / x * here - above;
        above = here;
        here = below;
        if n <= n_max {
            psi[n] = above;
        }
        if here.abs() > 1e200 {
            above *= 1e-200;
            here *= 1e-200;
            psi.iter_mut().for_each(|p| *p *= 1e-200);
        }
    }
    psi[0] = here;
    let (s, c) = x.sin_cos();
    let psi1 = s / x - c;
    let scale = if s.abs() >= psi1.abs() {
        s / psi[0]
    } else {
        psi1 / psi[1]
    };
    psi.iter_mut().for_each(|p| *p *= scale);
    psi
}

/// The Mie sum S = Σₙ (−1)ⁿ(2n+1)(aₙ − bₙ) of a perfectly conducting sphere of size x = ka,
/// with aₙ = ψₙ'(x)/ξₙ'(x), bₙ = ψₙ(x)/ξₙ(x), ξₙ = x·hₙ⁽¹⁾(x) (Bohren & Huffman,
/// *Absorption and Scattering of Light by Small Particles*, §4.4, with the refractive index
/// taken to infinity; their e^(−iωt) convention). σ = πa²·|S|²/x².
pub fn sphere_mie_sum(ka: f64) -> Result<Complex64, TargetError> {
    if !(ka.is_finite() && ka > 0.0) {
        return Err(TargetError::SizeNotPositive);
    }
    if ka > MAX_SPHERE_KA {
        return Err(TargetError::SphereTooLarge { ka });
    }
    let x = ka;
    let n_max = sphere_terms(x);
    let psi = riccati_psi(x, n_max);
    let (s, c) = x.sin_cos();
    // ηₙ = x·yₙ(x) by upward recurrence (stable: yₙ grows with n).
    let (mut eta_prev, mut eta) = (-c, -c / x - s);
    let mut xi_prev = Complex64::new(psi[0], eta_prev);
    let mut sum = Complex64::new(0.0, 0.0);
    for n in 1..=n_max {
        let nf = n as f64;
        let xi = Complex64::new(psi[n], eta);
        if !(xi.re.is_finite() && xi.im.is_finite()) {
            break; // the terms left are below the sum's rounding
        }
        let psi_d = psi[n - 1] - nf * psi[n] / x;
        let xi_d = xi_prev - xi * (nf / x);
        let (a, b) = (psi_d / xi_d, psi[n] / xi);
        let sign = if n % 2 == 0 { 1.0 } else { -1.0 };
        sum += (a - b) * (sign * (2.0 * nf + 1.0));
        let eta_next = (2.0 * nf + 1.0) / x * eta - eta_prev;
        eta_prev = eta;
        eta = eta_next;
        xi_prev = xi;
    }
    Ok(sum)
}

/// The complex backscatter amplitude of a perfectly conducting sphere of radius `radius_m`
/// at wavelength `lambda_m`, in the VNA's e^(+jωt) convention with its phase at the centre:
/// A = j·conj(S)·√π·a/x, which tends to −√(πa²)·e^(+j2ka) (the front face's reflection)
/// in the optical region.
fn sphere_amplitude(radius_m: f64, lambda_m: f64) -> Result<Complex64, TargetError> {
    let ka = 2.0 * PI * radius_m / lambda_m;
    let s = sphere_mie_sum(ka)?;
    Ok(Complex64::new(0.0, 1.0) * s.conj() * (PI.sqrt() * radius_m / ka))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ratio(ka: f64) -> f64 {
        sphere_mie_sum(ka).unwrap().norm_sqr() / (ka * ka)
    }

    #[test]
    fn psi_matches_closed_forms() {
        // ψ₂(x) = (3/x² − 1)·sin x − 3·cos x/x (spherical Bessel closed form, Abramowitz &
        // Stegun 10.1.11).
        for &x in &[0.3, 1.0, PI, 7.5, 40.0] {
            let p = riccati_psi(x, 5);
            let want = (3.0 / (x * x) - 1.0) * x.sin() - 3.0 * x.cos() / x;
            assert!((p[2] - want).abs() < 1e-12 * want.abs().max(1e-3), "x {x}");
        }
    }

    #[test]
    fn rayleigh_and_optical_limits() {
        // Rayleigh 9πa²(ka)⁴ and optical πa² (Ruck et al., Radar Cross Section Handbook).
        for &ka in &[0.005, 0.01, 0.02] {
            let r = ratio(ka) / (9.0 * ka.powi(4));
            assert!((r - 1.0).abs() < 2.0 * ka, "ka {ka}: {r}");
        }
        for &ka in &[50.0, 100.0, 300.0, 1000.0] {
            assert!((ratio(ka) - 1.0).abs() < 0.5 / ka, "ka {ka}: {}", ratio(ka));
        }
    }

    #[test]
    fn optical_phase_is_the_front_face() {
        // A → −√(πa²)·e^(+j2ka): the specular point a ahead of the centre.
        let (radius, lambda) = (0.1, 0.003);
        let a = sphere_amplitude(radius, lambda).unwrap();
        let ka = 2.0 * PI * radius / lambda;
        let want = -Complex64::from_polar(PI.sqrt() * radius, 2.0 * ka);
        assert!((a - want).norm() < 0.02 * want.norm(), "{a} vs {want}");
    }

    #[test]
    fn bad_input_is_refused() {
        let s = ReferenceTarget::Sphere { diameter_m: -1.0 };
        assert_eq!(s.rcs_m2(1e9), Err(TargetError::SizeNotPositive));
        let s = ReferenceTarget::Sphere { diameter_m: 0.1 };
        assert_eq!(s.rcs_m2(f64::NAN), Err(TargetError::FrequencyNotPositive));
        let big = ReferenceTarget::Sphere { diameter_m: 100.0 };
        assert!(matches!(
            big.rcs_m2(100e9),
            Err(TargetError::SphereTooLarge { .. })
        ));
    }
}
