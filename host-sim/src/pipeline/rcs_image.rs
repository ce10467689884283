//! Down-range profiles and the turntable (inverse synthetic aperture) image from the
//! calibrated angle × frequency data of [`RcsResult`].
//!
//! Coordinates are the turntable's at 0°: x down-range, away from the antennas, y
//! cross-range; positive angles turn the target counter-clockwise seen from above. A point
//! at (x, y) turned by θ comes nearer the antennas by u = −(x·cos θ − y·sin θ), so its
//! calibrated amplitude carries e^(+j2ku) (phase referenced at the turntable centre, where
//! the reference target stood).
//!
//! Profile at angle θ: P(u) = Σₙ wₙ·H(θ, fₙ)·e^(+j2kₙu) / Σₙ wₙ (a Kaiser window over the
//! band), u down-range. Image: the profiles added coherently over angle at each pixel's
//! down-range u(θ) = x·cos θ − y·sin θ, with a Kaiser window over angle (backprojection;
//! the profiles are sampled at a tenth of the resolution and interpolated linearly at
//! baseband).
//! Nominal resolution: down-range c/(2B), cross-range λc/(2Δθ) at the centre wavelength
//! λc over the turn Δθ in radians (Mensa, *High Resolution Radar Cross-Section Imaging*).

use std::f64::consts::PI;

use num_complex::Complex64;
use sweepgate::plan::SPEED_OF_LIGHT_M_S;
use sweepgate::window::WindowKind;

use crate::pipeline::rcs::RcsResult;

/// Kaiser β of the windows over band and angle (about 40 dB sidelobes; common practice,
/// no source).
const IMAGE_KAISER_BETA: f32 = 5.0;

/// Complex down-range profiles, one per angle, on a common down-range axis.
#[derive(Debug, Clone, PartialEq)]
pub struct Profiles {
    /// Down-range positions, m (0 at the turntable centre, positive away from the antennas).
    pub range_m: Vec<f64>,
    /// Per angle, the profile at each position (m, calibrated amplitude), at baseband: the
    /// centre frequency's e^(+j2k_c·u) taken out, so that it varies on the scale of the
    /// resolution and interpolates well.
    pub values: Vec<Vec<Complex64>>,
    /// Two times the centre wavenumber, 2k_c (rad/m): the profile is `values`·e^(+j·this·u).
    pub carrier_rad_m: f64,
    /// Nominal down-range resolution c/(2B), m.
    pub resolution_m: f64,
}

/// The image on a square grid.
#[derive(Debug, Clone, PartialEq)]
pub struct Image {
    /// Down-range pixel centres, m.
    pub x_m: Vec<f64>,
    /// Cross-range pixel centres, m.
    pub y_m: Vec<f64>,
    /// Level per pixel, dB relative to the image's peak, rows by cross-range: `db[iy][ix]`.
    pub db: Vec<Vec<f64>>,
    /// Nominal down-range resolution c/(2B), m.
    pub down_range_resolution_m: f64,
    /// Nominal cross-range resolution λc/(2Δθ), m (infinite for a single angle).
    pub cross_range_resolution_m: f64,
}

/// Window of `n` values (a Kaiser, β = [`IMAGE_KAISER_BETA`]).
fn window(n: usize) -> Vec<f64> {
    let w = WindowKind::Kaiser {
        beta: IMAGE_KAISER_BETA,
    };
    (0..n)
        .map(|i| {
            if n < 2 {
                1.0
            } else {
                w.at(i as f64 / (n - 1) as f64)
            }
        })
        .collect()
}

/// Down-range profiles of every angle over ±`half_m` (see the module notes).
pub fn profiles(result: &RcsResult, half_m: f64) -> Profiles {
    let grid = result.grid;
    let k_count = grid.points();
    let resolution_m = SPEED_OF_LIGHT_M_S / (2.0 * grid.step_hz() * k_count as f64);
    let step_m = resolution_m / 10.0;
    let count = (2.0 * half_m / step_m).ceil() as usize + 1;
    let range_m: Vec<f64> = (0..count).map(|i| -half_m + i as f64 * step_m).collect();
    let w = window(k_count);
    let norm: f64 = w.iter().sum();
    let k0 = 2.0 * PI * grid.start_hz() / SPEED_OF_LIGHT_M_S;
    let dk = 2.0 * PI * grid.step_hz() / SPEED_OF_LIGHT_M_S;
    let kc = k0 + dk * (k_count - 1) as f64 / 2.0;
    let values = result
        .calibrated
        .iter()
        .map(|h| {
            range_m
                .iter()
                .map(|&u| {
                    // e^(+j2(kₙ − k_c)u) by a running product over n.
                    let step = Complex64::from_polar(1.0, 2.0 * dk * u);
                    let mut ph = Complex64::from_polar(1.0, 2.0 * (k0 - kc) * u);
                    let mut sum = Complex64::new(0.0, 0.0);
                    for (v, wn) in h.iter().zip(&w) {
                        sum += v * ph * wn;
                        ph *= step;
                    }
                    sum / norm
                })
                .collect()
        })
        .collect();
    Profiles {
        range_m,
        values,
        carrier_rad_m: 2.0 * kc,
        resolution_m,
    }
}

/// A profile at down-range `u`: its baseband linearly interpolated (zero outside the
/// axis), with the carrier put back.
fn at(profiles: &Profiles, p: &[Complex64], u: f64) -> Complex64 {
    let range_m = profiles.range_m.as_slice();
    let (first, step) = match range_m {
        [a, b, ..] => (*a, b - a),
        _ => return Complex64::new(0.0, 0.0),
    };
    let pos = (u - first) / step;
    if pos < 0.0 || pos >= (p.len() - 1) as f64 {
        return Complex64::new(0.0, 0.0);
    }
    let i = pos.floor() as usize;
    let t = pos - i as f64;
    (p[i] * (1.0 - t) + p[i + 1] * t) * Complex64::from_polar(1.0, profiles.carrier_rad_m * u)
}

/// The image over ±`half_m` in both directions with `pixels` per side.
pub fn image(result: &RcsResult, profiles: &Profiles, half_m: f64, pixels: usize) -> Image {
    let pixels = pixels.max(2);
    let axis: Vec<f64> = (0..pixels)
        .map(|i| -half_m + 2.0 * half_m * i as f64 / (pixels - 1) as f64)
        .collect();
    let w = window(result.angles_deg.len());
    let trig: Vec<(f64, f64)> = result
        .angles_deg
        .iter()
        .map(|a| a.to_radians().sin_cos())
        .collect();
    let mut power = vec![vec![0.0f64; pixels]; pixels];
    for (iy, &y) in axis.iter().enumerate() {
        for (ix, &x) in axis.iter().enumerate() {
            let mut sum = Complex64::new(0.0, 0.0);
            for ((p, &(s, c)), wa) in profiles.values.iter().zip(&trig).zip(&w) {
                sum += at(profiles, p, x * c - y * s) * wa;
            }
            power[iy][ix] = sum.norm_sqr();
        }
    }
    let peak = power.iter().flatten().cloned().fold(0.0f64, f64::max);
    let db = power
        .iter()
        .map(|row| {
            row.iter()
                .map(|&p| (10.0 * (p / peak).log10()).max(-300.0))
                .collect()
        })
        .collect();
    let (lo, hi) = result
        .angles_deg
        .iter()
        .fold((f64::MAX, f64::MIN), |(a, b), &v| (a.min(v), b.max(v)));
    let turn_rad = (hi - lo).to_radians();
    let centre_hz = (result.grid.start_hz() + result.grid.stop_hz()) / 2.0;
    Image {
        x_m: axis.clone(),
        y_m: axis,
        db,
        down_range_resolution_m: profiles.resolution_m,
        cross_range_resolution_m: SPEED_OF_LIGHT_M_S / centre_hz / (2.0 * turn_rad),
    }
}
