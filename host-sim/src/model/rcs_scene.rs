//! The RCS range of the product's simulator: targets on the turntable (point scatterers,
//! spheres, flat plates), the mount, the coupling between the antennas, room clutter and
//! noise; a scene gives the target, background and reference measurements as S21 per angle.
//!
//! Geometry: the antennas side by side at (−R, ±s/2, 0) looking along +x at the turntable
//! axis (the origin); positive turntable angles turn the target counter-clockwise seen from
//! above. A scatterer at p gives S21 = a(f)·A·e^(−j2πf·τ(p)), τ(p) = t0 + (|p − tx| + |p −
//! rx|)/c, with a(f) = G·λ/((4π)^1.5·R²) the radar equation's amplitude at the turntable
//! axis (far field: the same for every scatterer of the zone) and A its complex amplitude
//! in m ([`crate::model::rcs_targets`] for spheres). A flat plate facing the antennas at 0°
//! follows physical optics, σ(θ) = 4π(wh)²/λ²·[cos θ·sinc(kw·sin θ)]² (Knott, Shaeffer &
//! Tuley, *Radar Cross Section*, 2nd ed.).

use std::f64::consts::PI;

use num_complex::Complex64;
use serde::Deserialize;
use sweepgate::plan::SPEED_OF_LIGHT_M_S;

use crate::model::rcs_targets::{ReferenceTarget, TargetError};

/// One thing that scatters.
#[derive(Debug, Clone, Deserialize, PartialEq)]
#[serde(tag = "kind", rename_all = "lowercase", deny_unknown_fields)]
pub enum Scatterer {
    /// A point of constant RCS.
    Point {
        /// Position on the turntable at 0°, m.
        at_m: [f64; 3],
        /// RCS, m².
        rcs_m2: f64,
    },
    /// A metal sphere (Mie series).
    Sphere {
        /// Centre on the turntable at 0°, m.
        at_m: [f64; 3],
        /// Diameter, m.
        diameter_m: f64,
    },
    /// A flat metal plate w × h, facing the antennas at 0°, turning about the vertical.
    Plate {
        /// Centre on the turntable at 0°, m.
        at_m: [f64; 3],
        /// Width in the turning plane, m.
        width_m: f64,
        /// Height, m.
        height_m: f64,
    },
}

/// An RCS range and what stands in it.
#[derive(Debug, Clone, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RcsScene {
    /// First frequency, Hz.
    pub start_hz: f64,
    /// Last frequency, Hz.
    pub stop_hz: f64,
    /// Points per sweep.
    pub points: usize,
    /// Turntable angles: first, last, step, degrees.
    pub angles_deg: [f64; 3],
    /// Distance from the antennas to the turntable axis, m.
    pub distance_m: f64,
    /// Distance between the antennas, m.
    pub separation_m: f64,
    /// Delay from the VNA's time zero to the antennas, ns.
    pub time_zero_ns: f64,
    /// Gain of each antenna, dBi.
    pub antenna_gain_dbi: f64,
    /// Coupling between the antennas, dB.
    pub coupling_db: f64,
    /// Receiver noise per point (rms of the complex value), dB.
    pub noise_db: f64,
    /// Room clutter: (one-way distance, m; level, dB) per echo, fixed.
    #[serde(default)]
    pub clutter: Vec<[f64; 2]>,
    /// The mount: scatterers that stay in the background run (they turn with the table).
    #[serde(default)]
    pub mount: Vec<Scatterer>,
    /// The target.
    pub target: Vec<Scatterer>,
    /// The reference sphere's diameter, m (measured at the turntable axis at 0°).
    pub reference_sphere_m: f64,
    /// Seed of the noise.
    #[serde(default)]
    pub seed: u64,
}

/// A point turned by `angle_deg` about the vertical axis.
fn rotate(p: [f64; 3], angle_deg: f64) -> [f64; 3] {
    let (s, c) = angle_deg.to_radians().sin_cos();
    [c * p[0] - s * p[1], s * p[0] + c * p[1], p[2]]
}

fn dist(a: [f64; 3], b: [f64; 3]) -> f64 {
    ((a[0] - b[0]).powi(2) + (a[1] - b[1]).powi(2) + (a[2] - b[2]).powi(2)).sqrt()
}

impl RcsScene {
    /// The frequencies, Hz.
    pub fn frequencies_hz(&self) -> Vec<f64> {
        let n = self.points.max(2);
        let step = (self.stop_hz - self.start_hz) / (n - 1) as f64;
        (0..n).map(|k| self.start_hz + step * k as f64).collect()
    }

    /// The turntable angles, degrees (at most one more than [`crate::limits::MAX_BINS`], so
    /// that a scene asking for more is seen and refused without making them all).
    pub fn angles(&self) -> Vec<f64> {
        let [a, b, step] = self.angles_deg;
        let n = if step > 0.0 && b >= a {
            ((b - a) / step + 1e-9)
                .floor()
                .min(crate::limits::MAX_BINS as f64) as usize
                + 1
        } else {
            1
        };
        (0..n).map(|i| a + step * i as f64).collect()
    }

    /// Delay of the two-way path through `p`, s.
    pub fn delay_s(&self, p: [f64; 3]) -> f64 {
        let tx = [-self.distance_m, self.separation_m / 2.0, 0.0];
        let rx = [-self.distance_m, -self.separation_m / 2.0, 0.0];
        self.time_zero_ns * 1e-9 + (dist(p, tx) + dist(p, rx)) / SPEED_OF_LIGHT_M_S
    }

    /// The radar equation's amplitude at the turntable axis at `f`.
    fn spreading(&self, f: f64) -> f64 {
        let g = 10f64.powf(self.antenna_gain_dbi / 10.0);
        g * (SPEED_OF_LIGHT_M_S / f) / ((4.0 * PI).powf(1.5) * self.distance_m.powi(2))
    }

    /// A scatterer's complex amplitude (m) at `f` with the table at `angle_deg`, and where
    /// it is.
    pub fn amplitude(
        &self,
        s: &Scatterer,
        f: f64,
        angle_deg: f64,
    ) -> Result<(Complex64, [f64; 3]), TargetError> {
        Ok(match *s {
            Scatterer::Point { at_m, rcs_m2 } => (
                Complex64::new(rcs_m2.max(0.0).sqrt(), 0.0),
                rotate(at_m, angle_deg),
            ),
            Scatterer::Sphere { at_m, diameter_m } => (
                ReferenceTarget::Sphere { diameter_m }.amplitude(f)?,
                rotate(at_m, angle_deg),
            ),
            Scatterer::Plate {
                at_m,
                width_m,
                height_m,
            } => {
                let k = 2.0 * PI * f / SPEED_OF_LIGHT_M_S;
                let (sin, cos) = angle_deg.to_radians().sin_cos();
                let u = k * width_m * sin;
                let sinc = if u.abs() < 1e-12 { 1.0 } else { u.sin() / u };
                let peak = ReferenceTarget::Plate {
                    area_m2: width_m * height_m,
                }
                .amplitude(f)?;
                (peak * (cos * sinc), rotate(at_m, angle_deg))
            }
        })
    }

    /// S21 of `items` at every frequency with the table at `angle_deg`.
    pub fn s21_of(
        &self,
        items: &[Scatterer],
        angle_deg: f64,
    ) -> Result<Vec<Complex64>, TargetError> {
        self.frequencies_hz()
            .iter()
            .map(|&f| {
                let mut v = Complex64::new(0.0, 0.0);
                for s in items {
                    let (a, p) = self.amplitude(s, f, angle_deg)?;
                    let ph = -2.0 * PI * f * self.delay_s(p);
                    v += a * self.spreading(f) * Complex64::from_polar(1.0, ph);
                }
                Ok(v)
            })
            .collect()
    }

    /// What is there whatever the zone holds: coupling and clutter, at every frequency.
    pub fn fixed(&self) -> Vec<Complex64> {
        let t0 = self.time_zero_ns * 1e-9;
        let coupling = 10f64.powf(self.coupling_db / 20.0);
        self.frequencies_hz()
            .iter()
            .map(|&f| {
                let w = -2.0 * PI * f;
                let mut v = Complex64::from_polar(
                    coupling,
                    w * (t0 + self.separation_m / SPEED_OF_LIGHT_M_S),
                );
                for &[d, level_db] in &self.clutter {
                    let a = 10f64.powf(level_db / 20.0);
                    v += Complex64::from_polar(a, w * (t0 + 2.0 * d / SPEED_OF_LIGHT_M_S));
                }
                v
            })
            .collect()
    }
}

/// A small, fixed noise generator (xorshift64* and Box–Muller): the same scene and seed give
/// the same files.
pub struct Noise(u64);

impl Noise {
    /// A generator from `seed`.
    pub fn new(seed: u64) -> Self {
        Self(seed ^ 0x9E37_79B9_7F4A_7C15 | 1)
    }

    fn uniform(&mut self) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        let x = self.0.wrapping_mul(0x2545_F491_4F6C_DD1D);
        ((x >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }

    /// A complex Gaussian value of rms `rms`.
    pub fn complex(&mut self, rms: f64) -> Complex64 {
        let (u, v) = (self.uniform(), self.uniform());
        let r = (-2.0 * u.ln()).sqrt() * rms / 2f64.sqrt();
        Complex64::from_polar(r, 2.0 * PI * v)
    }
}
