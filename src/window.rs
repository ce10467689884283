//! Window functions for the band window (over the K swept points) and the time gate.
//!
//! Each window is defined on a continuous position x ∈ [0, 1] across its length, so the
//! same definition serves a band window of K samples (x = n/(K−1), the symmetric textbook
//! form) and a time gate whose edges fall between samples. Coefficients are computed in
//! `f64` at set-up; the hot path only ever sees the stored `f32` values.

use crate::error::WindowError;
use core::f64::consts::PI;

/// Largest Kaiser β accepted. β = 50 already gives sidelobes far below f32 resolution.
pub const MAX_KAISER_BETA: f32 = 50.0;

/// A window shape with its parameter.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum WindowKind {
    /// All ones.
    Rectangular,
    /// Kaiser window with shape parameter β (Kaiser 1974; Oppenheim & Schafer).
    Kaiser {
        /// Shape parameter β, 0…50.
        beta: f32,
    },
    /// Tukey (tapered cosine) window; α is the fraction of the length inside the cosine
    /// tapers (Harris 1978): α = 0 is rectangular, α = 1 is Hann.
    Tukey {
        /// Taper fraction α, 0…1.
        alpha: f32,
    },
    /// Hann (raised cosine).
    Hann,
    /// Hamming (0.54 − 0.46·cos).
    Hamming,
    /// 4-term Blackman-Harris, −92 dB sidelobes (Harris 1978).
    BlackmanHarris,
}

impl WindowKind {
    /// Kaiser window designed for a peak sidelobe `sidelobe_db` below the main lobe.
    pub fn kaiser_for_sidelobe_db(sidelobe_db: f64) -> Self {
        Self::Kaiser {
            beta: kaiser_beta_for_sidelobe_db(sidelobe_db) as f32,
        }
    }

    /// Checks the parameter; `Ok` means [`WindowKind::at`] is finite everywhere.
    pub fn validate(&self) -> Result<(), WindowError> {
        match *self {
            Self::Kaiser { beta } if !(0.0..=MAX_KAISER_BETA).contains(&beta) => {
                Err(WindowError::KaiserBeta)
            }
            Self::Tukey { alpha } if !(0.0..=1.0).contains(&alpha) => Err(WindowError::TukeyAlpha),
            _ => Ok(()),
        }
    }

    /// Window value at position `x` ∈ [0, 1] (0 and 1 are the end samples). Outside that
    /// range the value is 0. Assumes a validated parameter.
    pub fn at(&self, x: f64) -> f64 {
        if !(0.0..=1.0).contains(&x) {
            return 0.0;
        }
        // Cosines in f32 (the stored values are f32): on a small board this keeps the f64
        // trigonometry, several KiB of flash, out of the image.
        let c = |k: f64| f64::from(libm::cosf((2.0 * PI * k * x) as f32));
        match *self {
            Self::Rectangular => 1.0,
            Self::Kaiser { beta } => {
                let beta = beta as f64;
                let r = 2.0 * x - 1.0;
                bessel_i0(beta * libm::sqrt((1.0 - r * r).max(0.0))) / bessel_i0(beta)
            }
            Self::Tukey { alpha } => {
                let a = alpha as f64;
                if a <= 0.0 {
                    return 1.0;
                }
                let edge = x.min(1.0 - x);
                if edge < a / 2.0 {
                    0.5 * (1.0 - f64::from(libm::cosf((2.0 * PI * edge / a) as f32)))
                } else {
                    1.0
                }
            }
            Self::Hann => 0.5 - 0.5 * c(1.0),
            Self::Hamming => 0.54 - 0.46 * c(1.0),
            Self::BlackmanHarris => {
                0.35875 - 0.48829 * c(1.0) + 0.14128 * c(2.0) - 0.01168 * c(3.0)
            }
        }
    }

    /// Fills `out` with the symmetric window of length `out.len()`: `out[n] = at(n/(L−1))`.
    /// A length-1 window is `[1]`.
    pub fn fill(&self, out: &mut [f32]) {
        let len = out.len();
        if len == 1 {
            out[0] = 1.0;
            return;
        }
        let last = (len.max(2) - 1) as f64;
        for (n, v) in out.iter_mut().enumerate() {
            *v = self.at(n as f64 / last) as f32;
        }
    }

    /// Null-to-null width of the main lobe of this window's transform, in units of
    /// 1/(window length): for a band window over bandwidth B the impulse main lobe is
    /// this many times 1/B wide.
    ///
    /// Closed forms where the transform is known: rectangular 2, Hann and Hamming 4,
    /// 4-term Blackman-Harris 8 (Harris 1978), Kaiser (2/π)·√(β²+π²) (from the Kaiser
    /// window transform). Tukey has no closed form and is found numerically as the first
    /// minimum of its transform.
    pub fn mainlobe_width(&self) -> f64 {
        match *self {
            Self::Rectangular => 2.0,
            Self::Hann | Self::Hamming => 4.0,
            Self::BlackmanHarris => 8.0,
            Self::Kaiser { beta } => {
                let b = beta as f64;
                2.0 / PI * libm::sqrt(b * b + PI * PI)
            }
            Self::Tukey { .. } => 2.0 * self.first_null(),
        }
    }

    /// First minimum of |W(ν)| for ν > 0 (ν in cycles per window length), by evaluating
    /// the continuous transform on a fine grid. Set-up only.
    fn first_null(&self) -> f64 {
        const SAMPLES: usize = 256;
        let mag = |nu: f64| {
            let (mut re, mut im) = (0.0, 0.0);
            for n in 0..SAMPLES {
                let x = (n as f64 + 0.5) / SAMPLES as f64;
                let w = self.at(x);
                re += w * libm::cos(2.0 * PI * nu * x);
                im -= w * libm::sin(2.0 * PI * nu * x);
            }
            libm::sqrt(re * re + im * im)
        };
        let step = 0.005;
        let mut prev = mag(0.0);
        let mut nu = step;
        while nu < 8.0 {
            let m = mag(nu);
            let next = mag(nu + step);
            if m <= prev && m <= next {
                return nu;
            }
            prev = m;
            nu += step;
        }
        8.0
    }
}

/// Kaiser β for a target peak sidelobe level `a_db` (positive dB below the main lobe), in
/// spectrum analysis: Kaiser & Schafer, IEEE Trans. ASSP 28(1):105–107, 1980:
/// β = 0.12438·(A + 6.3) for A > 60; 0.76609·(A − 13.26)^0.4 + 0.09834·(A − 13.26) for
/// 13.26 < A ≤ 60; 0 otherwise. (Not the FIR-design formula.)
///
/// ```
/// let beta = sweepgate::window::kaiser_beta_for_sidelobe_db(50.0);
/// assert!((beta - 6.851).abs() < 1e-3);
/// ```
pub fn kaiser_beta_for_sidelobe_db(a_db: f64) -> f64 {
    if !a_db.is_finite() || a_db <= 13.26 {
        0.0
    } else if a_db <= 60.0 {
        let d = a_db - 13.26;
        0.76609 * libm::pow(d, 0.4) + 0.09834 * d
    } else {
        0.12438 * (a_db + 6.3)
    }
}

/// Modified Bessel function of the first kind, order 0, by its power series
/// Σ ((x/2)^k / k!)², summed until the term is below 1e-17 of the sum (well beyond f32
/// accuracy). Accurate for |x| ≤ 60.
pub fn bessel_i0(x: f64) -> f64 {
    let half = x / 2.0;
    let mut term = 1.0;
    let mut sum = 1.0;
    let mut k = 1.0;
    while k < 500.0 {
        let r = half / k;
        term *= r * r;
        sum += term;
        if term < sum * 1e-17 {
            break;
        }
        k += 1.0;
    }
    sum
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn validation() {
        assert!(WindowKind::Kaiser { beta: -0.1 }.validate().is_err());
        assert!(WindowKind::Kaiser { beta: f32::NAN }.validate().is_err());
        assert!(WindowKind::Kaiser { beta: 51.0 }.validate().is_err());
        assert!(WindowKind::Tukey { alpha: 1.5 }.validate().is_err());
        assert!(WindowKind::Tukey { alpha: f32::NAN }.validate().is_err());
        assert!(WindowKind::Tukey { alpha: 0.5 }.validate().is_ok());
    }

    #[test]
    fn tukey_limits_are_rectangular_and_hann() {
        // Harris 1978: α = 0 rectangular, α = 1 Hann.
        for i in 0..=20 {
            let x = i as f64 / 20.0;
            assert_eq!(WindowKind::Tukey { alpha: 0.0 }.at(x), 1.0);
            let d = WindowKind::Tukey { alpha: 1.0 }.at(x) - WindowKind::Hann.at(x);
            assert!(d.abs() < 1e-7, "x {x}: {d}");
        }
    }

    #[test]
    fn symmetric_and_peaked() {
        let kinds = [
            WindowKind::Kaiser { beta: 6.0 },
            WindowKind::Tukey { alpha: 0.4 },
            WindowKind::Hann,
            WindowKind::Hamming,
            WindowKind::BlackmanHarris,
        ];
        for k in kinds {
            let mut w = [0f32; 33];
            k.fill(&mut w);
            for n in 0..33 {
                assert!((w[n] - w[32 - n]).abs() < 1e-6, "{k:?}");
            }
            assert!((w[16] - 1.0).abs() < 1e-6, "{k:?} centre {}", w[16]);
        }
    }

    #[test]
    fn kaiser_main_lobe_widths() {
        // Computed from the Kaiser window transform (shared REFERENCES): 2/B at β = 0,
        // 4.31/B at β = 6, 6.07/B at β = 9.
        let w = |b: f32| WindowKind::Kaiser { beta: b }.mainlobe_width();
        assert!((w(0.0) - 2.0).abs() < 1e-12);
        assert!((w(6.0) - 4.31).abs() < 0.005);
        assert!((w(9.0) - 6.07).abs() < 0.005);
    }

    #[test]
    fn tukey_main_lobe_between_rectangular_and_hann() {
        let r = WindowKind::Tukey { alpha: 0.0 }.mainlobe_width();
        let h = WindowKind::Tukey { alpha: 1.0 }.mainlobe_width();
        let m = WindowKind::Tukey { alpha: 0.5 }.mainlobe_width();
        assert!((r - 2.0).abs() < 0.02, "{r}");
        assert!((h - 4.0).abs() < 0.02, "{h}");
        assert!(m > r && m < h, "{m}");
    }
}
