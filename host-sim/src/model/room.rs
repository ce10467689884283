//! The room with its antennas: the swept S21 its paths add up to at any turntable angle.
//!
//! For a path of length L the probe receives, at frequency f (λ = c/f),
//!
//! ```text
//! S21 += Γ · F_aut(f, d_dep in the turning AUT's frame) · F_probe(f, d_arr) · λ/(4π·L)
//!        · exp(−j·2π·f·(L/c + τ_cable))
//! ```
//!
//! where Γ is the product of the reflection coefficients met and F are the field patterns
//! of [`crate::model::antennas`]. A point scatterer of radar cross-section σ at distances
//! r1 (from the AUT) and r2 (to the probe) contributes with λ/(4π) · √(σ/4π)/(r1·r2) in
//! place of λ/(4π·L) (radar equation). The paths are those of [`crate::model::geometry`].

use std::f64::consts::PI;

use num_complex::Complex64;
use sweepgate::plan::SPEED_OF_LIGHT_M_S;

use crate::model::antennas::AntennaModel;
use crate::model::geometry::{self, to_aut_frame, to_probe_frame, Path};
use crate::model::scenario::Scenario;

/// The room with its antennas: paths and the response at any angle.
#[derive(Debug, Clone)]
pub struct Room {
    paths: Vec<Path>,
    aut: AntennaModel,
    probe: AntennaModel,
    cable_delay_s: f64,
}

impl Room {
    /// The paths and antenna models of a (validated) scenario.
    pub fn new(s: &Scenario) -> Self {
        let (f0, f1) = (s.sweep.start_hz, s.sweep.stop_hz);
        Self {
            paths: geometry::paths(s),
            aut: AntennaModel::new(&s.aut, f0, f1),
            probe: AntennaModel::new(&s.probe, f0, f1),
            cable_delay_s: s.range.cable_delay_s,
        }
    }

    /// All paths, the direct one first.
    pub fn paths(&self) -> &[Path] {
        &self.paths
    }

    /// The AUT's model.
    pub fn aut(&self) -> &AntennaModel {
        &self.aut
    }

    /// The probe's model.
    pub fn probe(&self) -> &AntennaModel {
        &self.probe
    }

    /// One path's contribution at `f_hz` with the AUT at `angle_deg`.
    pub fn path_response(&self, path: &Path, f_hz: f64, angle_deg: f64) -> Complex64 {
        let lambda = SPEED_OF_LIGHT_M_S / f_hz;
        let g_aut = self.aut.field(f_hz, to_aut_frame(path.depart, angle_deg));
        let g_probe = self.probe.field(f_hz, to_probe_frame(path.arrive));
        let amp = path.weight_per_m * lambda / (4.0 * PI) * g_aut * g_probe;
        let phase = -2.0 * PI * f_hz * (path.delay_s() + self.cable_delay_s);
        Complex64::from_polar(amp, phase)
    }

    /// Noise-free S21 at `f_hz` with the AUT held at `angle_deg` (all paths).
    pub fn response(&self, f_hz: f64, angle_deg: f64) -> Complex64 {
        self.paths
            .iter()
            .map(|p| self.path_response(p, f_hz, angle_deg))
            .sum()
    }

    /// The free-space S21 (direct path only, no noise) at `f_hz`, `angle_deg`.
    pub fn free_space(&self, f_hz: f64, angle_deg: f64) -> Complex64 {
        self.path_response(&self.paths[0], f_hz, angle_deg)
    }
}

/// The ground truth: free-space S21 (direct path only, no noise, AUT held still) at each
/// angle (outer) and frequency (inner).
pub fn truth(s: &Scenario, frequencies_hz: &[f64], angles_deg: &[f64]) -> Vec<Vec<Complex64>> {
    let room = Room::new(s);
    angles_deg
        .iter()
        .map(|a| {
            frequencies_hz
                .iter()
                .map(|f| room.free_space(*f, *a))
                .collect()
        })
        .collect()
}
