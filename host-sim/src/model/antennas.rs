//! The antennas' field patterns: the built-in analytic models of the scenario (`[aut]`,
//! `[probe]`), each normalized so that |F|² is the gain (the average of |F|² over the
//! sphere is 1), so the direct path between isotropic antennas is the Friis free-space
//! value λ/(4πR).

use std::f64::consts::PI;

use sweepgate::plan::SPEED_OF_LIGHT_M_S;

use crate::model::geometry::Vec3;
use crate::model::scenario::{Antenna, AxisName, Taper};

/// A pattern-bearing antenna with its gain normalization over the band.
#[derive(Debug, Clone)]
pub struct AntennaModel {
    antenna: Antenna,
    /// (frequency, scale) pairs: scale² · |raw field|² is the gain.
    scale: Vec<(f64, f64)>,
}

fn sinc(u: f64) -> f64 {
    if u.abs() < 1e-9 {
        1.0
    } else {
        u.sin() / u
    }
}

fn taper_field(u: f64, taper: Taper) -> f64 {
    match taper {
        Taper::Uniform => sinc(u),
        Taper::Cosine => {
            // Cosine illumination: cos u / (1 − (2u/π)²), value π/4 at u = ±π/2
            // (common practice, no source).
            let d = 1.0 - (2.0 * u / PI).powi(2);
            if d.abs() < 1e-9 {
                PI / 4.0
            } else {
                u.cos() / d
            }
        }
    }
}

impl AntennaModel {
    /// Models `antenna` over `start_hz…stop_hz`, computing its gain normalization by
    /// quadrature over the sphere at a few frequencies (interpolated between them).
    pub fn new(antenna: &Antenna, start_hz: f64, stop_hz: f64) -> Self {
        let mut scale = Vec::new();
        if matches!(antenna, Antenna::Isotropic) {
            scale.push((start_hz, 1.0));
        } else {
            const STEPS: usize = 16;
            for i in 0..=STEPS {
                let f = start_hz + (stop_hz - start_hz) * i as f64 / STEPS as f64;
                scale.push((f, Self::normalization(antenna, f)));
                if stop_hz <= start_hz {
                    break;
                }
            }
        }
        Self {
            antenna: antenna.clone(),
            scale,
        }
    }

    /// √(Σw / Σw·|F|²) over a midpoint grid in (θ, φ): makes the mean gain 1.
    fn normalization(antenna: &Antenna, f_hz: f64) -> f64 {
        const NT: usize = 120;
        const NP: usize = 240;
        let (mut sw, mut swf) = (0.0, 0.0);
        for i in 0..NT {
            let th = (i as f64 + 0.5) * PI / NT as f64;
            let w = th.sin();
            for j in 0..NP {
                let ph = (j as f64 + 0.5) * 2.0 * PI / NP as f64;
                let d = [th.sin() * ph.cos(), th.sin() * ph.sin(), th.cos()];
                let f = raw_field(antenna, f_hz, d);
                sw += w;
                swf += w * f * f;
            }
        }
        if swf > 0.0 {
            (sw / swf).sqrt()
        } else {
            0.0
        }
    }

    fn scale_at(&self, f_hz: f64) -> f64 {
        let s = &self.scale;
        if s.len() == 1 || f_hz <= s[0].0 {
            return s[0].1;
        }
        for w in s.windows(2) {
            if f_hz <= w[1].0 {
                let t = (f_hz - w[0].0) / (w[1].0 - w[0].0);
                return w[0].1 + t * (w[1].1 - w[0].1);
            }
        }
        s[s.len() - 1].1
    }

    /// Field pattern (signed, real) in direction `d` of the antenna's own frame
    /// (boresight +x): its square is the gain.
    pub fn field(&self, f_hz: f64, d: Vec3) -> f64 {
        self.scale_at(f_hz) * raw_field(&self.antenna, f_hz, d)
    }

    /// Gain at boresight, dBi.
    pub fn boresight_gain_dbi(&self, f_hz: f64) -> f64 {
        20.0 * self.field(f_hz, [1.0, 0.0, 0.0]).abs().log10()
    }
}

/// Unnormalized field pattern of `antenna` at unit direction `d` (antenna frame).
fn raw_field(antenna: &Antenna, f_hz: f64, d: Vec3) -> f64 {
    let k = 2.0 * PI * f_hz / SPEED_OF_LIGHT_M_S;
    let [x, y, z] = d;
    match antenna {
        Antenna::Isotropic => 1.0,
        Antenna::Aperture {
            width_m,
            height_m,
            width_taper,
            height_taper,
        } => {
            // Rectangular aperture in the y–z plane with a Huygens obliquity factor
            // (1 + cos θ)/2 (common practice, no source).
            let u = k * width_m * y / 2.0;
            let v = k * height_m * z / 2.0;
            taper_field(u, *width_taper) * taper_field(v, *height_taper) * (1.0 + x) / 2.0
        }
        Antenna::Dipole { length_m, axis } => {
            // Thin centre-fed dipole: (cos(kL/2·cos ψ) − cos(kL/2)) / sin ψ, ψ from the
            // wire (Balanis, Antenna Theory, finite-length dipole).
            let c = match axis {
                AxisName::X => x,
                AxisName::Y => y,
                AxisName::Z => z,
            };
            let s = (1.0 - c * c).max(0.0).sqrt();
            if s < 1e-9 {
                0.0
            } else {
                let h = k * length_m / 2.0;
                ((h * c).cos() - h.cos()) / s
            }
        }
        Antenna::CosPower { n } => {
            if x > 0.0 {
                x.powf(n / 2.0)
            } else {
                0.0
            }
        }
        Antenna::Array {
            elements,
            spacing_m,
            element_n,
        } => {
            let e = if *element_n == 0.0 {
                1.0
            } else if x > 0.0 {
                x.powf(element_n / 2.0)
            } else {
                0.0
            };
            // Array factor of N equal elements along y: sin(Nψ/2) / (N·sin(ψ/2)),
            // ψ = k·d·sin(angle from broadside) (Balanis, Antenna Theory, ch. 6).
            let n = *elements as f64;
            let psi = k * spacing_m * y;
            let den = (psi / 2.0).sin();
            let af = if den.abs() < 1e-9 {
                (n * psi / 2.0).cos() / (psi / 2.0).cos()
            } else {
                (n * psi / 2.0).sin() / (n * den)
            };
            e * af
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn gains_match_textbook_directivities() {
        // Half-wave dipole D = 1.641 (2.15 dBi); cos^n power pattern D = 2(n+1) (see
        // shared REFERENCES: Balanis, Antenna Theory; cos^n computed).
        let f = 10e9;
        let half = SPEED_OF_LIGHT_M_S / f / 2.0;
        let d = AntennaModel::new(
            &Antenna::Dipole {
                length_m: half,
                axis: AxisName::Z,
            },
            f,
            f,
        );
        assert!(
            (d.boresight_gain_dbi(f) - 2.15).abs() < 0.02,
            "{}",
            d.boresight_gain_dbi(f)
        );
        let c = AntennaModel::new(&Antenna::CosPower { n: 4.0 }, f, f);
        assert!(
            (c.boresight_gain_dbi(f) - 10.0).abs() < 0.03,
            "{}",
            c.boresight_gain_dbi(f)
        );
        // Uniform aperture of many wavelengths: D ≈ 4πA/λ² (Balanis, Antenna Theory).
        let a = AntennaModel::new(
            &Antenna::Aperture {
                width_m: 0.2,
                height_m: 0.2,
                width_taper: Taper::Uniform,
                height_taper: Taper::Uniform,
            },
            f,
            f,
        );
        let lambda = SPEED_OF_LIGHT_M_S / f;
        let want = 10.0 * (4.0 * PI * 0.04 / (lambda * lambda)).log10();
        assert!(
            (a.boresight_gain_dbi(f) - want).abs() < 0.5,
            "{} vs {want}",
            a.boresight_gain_dbi(f)
        );
    }
}
