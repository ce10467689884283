//! Window functions for the band window (over the K swept points) and the time gate.
//!
//! Each window is defined on a continuous position x ∈ [0, 1] across its length, so the
//! same definition serves a band window of K samples (x = n/(K−1), the symmetric textbook
//! form) and a time gate whose edges fall between samples. [`WindowKind::at`] evaluates in
//! `f64` (the reference); the stored coefficients come from the `f32` [`Shape`], which a
//! board without double-precision hardware evaluates in a fraction of the time. The hot
//! path only ever sees the stored `f32` values.

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
    ///
    /// Evaluated in f32 ([`WindowKind::shape`]), in step with the f64 [`WindowKind::at`] to
    /// a few parts in a million (checked in `tests/gate_reference.rs`).
    pub fn fill(&self, out: &mut [f32]) {
        let len = out.len();
        if len == 1 {
            out[0] = 1.0;
            return;
        }
        let shape = self.shape();
        let last = len.max(2) - 1;
        let span = last as f32;
        for (n, v) in out.iter_mut().enumerate() {
            // Both distances from the ends from integers, each rounded once.
            *v = shape.at(n as f32 / span, (last - n) as f32 / span);
        }
    }

    /// This window ready for evaluation in f32: the set-up of a gate on a board without
    /// double-precision hardware. Kaiser's I0(β) is computed here, once.
    ///
    /// ```
    /// use sweepgate::window::WindowKind;
    /// let k = WindowKind::Kaiser { beta: 6.0 };
    /// let s = k.shape();
    /// assert_eq!(s.at(0.5, 0.5), 1.0);
    /// assert!((f64::from(s.at(0.1, 0.9)) - k.at(0.1)).abs() < 1e-6);
    /// assert_eq!(s.at(-0.01, 1.01), 0.0);
    /// ```
    pub fn shape(&self) -> Shape {
        let i0_beta = match *self {
            Self::Kaiser { beta } => bessel_i0_f32(beta),
            _ => 1.0,
        };
        Shape {
            kind: *self,
            i0_beta,
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
    /// the transform of the window sampled at 256 mid-points on a grid of ν in steps of
    /// 0.005. Set-up only.
    ///
    /// Worked in f32 with the window's [`Shape`] and our own cosine ([`cos_sin_turns`]),
    /// so that a board without double-precision hardware keeps the f64 sine and cosine out
    /// of its flash. The window is symmetric about x = 1/2 and so are the sample points, so
    /// |W(ν)| = |Σ w(xₙ)·cos(2πν(xₙ − 1/2))|: a real sum over half the points, doubled.
    /// Gives the same ν as the f64 complex sum (`first_null_f64` in the tests, checked for
    /// α from 0 to 1 in steps of 0.001).
    fn first_null(&self) -> f64 {
        const SAMPLES: usize = 256;
        const HALF: usize = SAMPLES / 2;
        let shape = self.shape();
        // Distances from the centre in turns per cycle, (n + 1/2)/256 − 1/2 for the upper
        // half (exact in f32), and the window there.
        let mut w = [0.0f32; HALF];
        for (i, v) in w.iter_mut().enumerate() {
            let x = (HALF + i) as f32 + 0.5;
            *v = shape.at(x / SAMPLES as f32, (SAMPLES as f32 - x) / SAMPLES as f32);
        }
        let mag = |nu: f64| {
            let mut sum = 0.0f32;
            for (i, &wi) in w.iter().enumerate() {
                // ν·d turns, d = (i + 1/2)/256: wrapped to a 32-bit fraction of a turn.
                let turns = nu * (i as f64 + 0.5) / SAMPLES as f64;
                let frac = turns - libm::floor(turns);
                let (cos, _) = cos_sin_turns((frac * 4_294_967_296.0) as u64 as u32);
                sum += wi * cos;
            }
            2.0 * sum.abs()
        };
        let step = 0.005;
        let mut prev = mag(0.0);
        let mut nu = step;
        let mut m = mag(nu);
        while nu < 8.0 {
            let next = mag(nu + step);
            if m <= prev && m <= next {
                return nu;
            }
            prev = m;
            m = next;
            nu += step;
        }
        8.0
    }
}

/// A [`WindowKind`] ready for evaluation in f32 (see [`WindowKind::shape`]).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Shape {
    kind: WindowKind,
    /// I0(β) by [`bessel_i0_f32`] for a Kaiser window (the same sum as each value's
    /// numerator, so the peak comes out as exactly 1), else 1.
    i0_beta: f32,
}

impl Shape {
    /// The window at position x ∈ [0, 1], given as `x` and `rest` = 1 − x, each as exact as
    /// the caller can make it (a Kaiser window near its ends depends on the small one to
    /// full relative precision). 0 outside [0, 1]. Assumes a validated parameter.
    pub fn at(&self, x: f32, rest: f32) -> f32 {
        if !(x >= 0.0 && rest >= 0.0) {
            return 0.0;
        }
        // Cosines of whole multiples of 2πx are symmetric about x = 1/2: the nearer end
        // keeps the argument small.
        let edge = if x < rest { x } else { rest };
        let c = |k: f32| cos_turns(k * edge);
        match self.kind {
            WindowKind::Rectangular => 1.0,
            WindowKind::Kaiser { beta } => {
                // β·√(1 − r²) with r = 2x − 1, and 1 − r² = 4·x·(1 − x).
                bessel_i0_f32(beta * 2.0 * libm::sqrtf(x * rest)) / self.i0_beta
            }
            WindowKind::Tukey { alpha } => {
                if alpha <= 0.0 {
                    return 1.0;
                }
                if edge < alpha / 2.0 {
                    0.5 * (1.0 - cos_turns(edge / alpha))
                } else {
                    1.0
                }
            }
            WindowKind::Hann => 0.5 - 0.5 * c(1.0),
            WindowKind::Hamming => 0.54 - 0.46 * c(1.0),
            WindowKind::BlackmanHarris => {
                0.35875 - 0.48829 * c(1.0) + 0.14128 * c(2.0) - 0.01168 * c(3.0)
            }
        }
    }
}

/// (cos, sin) of 2π·t/2^32, t a fraction of a turn in 32 bits. The quadrant is taken off
/// in integers (exactly), leaving |x| ≤ π/4, where the Taylor series to x^9 (sine) and
/// x^10 (cosine) are within 2e-9 of the true values (the first terms left out, at π/4:
/// x^11/11! = 1.8e-9, x^12/12! = 1.2e-10), so the f32 rounding of a few operations is all
/// the error. (libm's f32 sine and cosine work in f64, which a Cortex-M4 emulates in
/// software at hundreds of instructions a call.)
pub(crate) fn cos_sin_turns(t: u32) -> (f32, f32) {
    // Nearest quarter turn, and what is left of t beyond it: within ±1/8 turn.
    let quadrant = t.wrapping_add(1 << 29) >> 30;
    let left = t.wrapping_sub(quadrant << 30) as i32;
    let x = left as f32 * (2.0 * core::f32::consts::PI / 4_294_967_296.0);
    let x2 = x * x;
    let s = x
        * (1.0
            + x2 * (-1.0 / 6.0
                + x2 * (1.0 / 120.0 + x2 * (-1.0 / 5040.0 + x2 * (1.0 / 362_880.0)))));
    let c = 1.0
        + x2 * (-0.5
            + x2 * (1.0 / 24.0
                + x2 * (-1.0 / 720.0 + x2 * (1.0 / 40_320.0 + x2 * (-1.0 / 3_628_800.0)))));
    match quadrant {
        0 => (c, s),
        1 => (-s, c),
        2 => (-c, -s),
        _ => (s, -c),
    }
}

/// cos(2π·turns) for 0 ≤ turns < 2, by [`cos_sin_turns`].
fn cos_turns(turns: f32) -> f32 {
    let whole = if turns >= 1.0 { 1.0 } else { 0.0 };
    cos_sin_turns(((turns - whole) * 4_294_967_296.0) as u32).0
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

/// [`bessel_i0`] in f32: the same power series, summed until a term is below 1e-9 of the
/// sum (below f32 resolution). Against the f64 series its relative error stays below 2e-6
/// for |x| ≤ 50 (each term carries the rounding of the products before it; checked in
/// `tests/gate_reference.rs`).
pub fn bessel_i0_f32(x: f32) -> f32 {
    let half = x / 2.0;
    let mut term = 1.0f32;
    let mut sum = 1.0f32;
    let mut k = 1.0f32;
    while k < 500.0 {
        let r = half / k;
        term *= r * r;
        sum += term;
        if term < sum * 1e-9 {
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

    /// The first null as it was computed before, in f64: the complex transform of the
    /// window by [`WindowKind::at`] with libm's f64 sine and cosine (common practice, no
    /// source).
    fn first_null_f64(kind: WindowKind) -> f64 {
        const SAMPLES: usize = 256;
        let mag = |nu: f64| {
            let (mut re, mut im) = (0.0, 0.0);
            for n in 0..SAMPLES {
                let x = (n as f64 + 0.5) / SAMPLES as f64;
                let w = kind.at(x);
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

    #[test]
    fn f32_first_null_equals_the_f64_one() {
        for i in 0..=1000 {
            let kind = WindowKind::Tukey {
                alpha: i as f32 / 1000.0,
            };
            assert_eq!(kind.first_null(), first_null_f64(kind), "{kind:?}");
        }
        for kind in [
            WindowKind::Rectangular,
            WindowKind::Hann,
            WindowKind::Hamming,
            WindowKind::BlackmanHarris,
            WindowKind::Kaiser { beta: 6.0 },
        ] {
            assert_eq!(kind.first_null(), first_null_f64(kind), "{kind:?}");
        }
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
