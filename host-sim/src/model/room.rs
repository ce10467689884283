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
//!
//! # Polarisation
//!
//! When the scenario sets `simulation.aut_polarisation_deg` or `probe_polarisation_deg`,
//! or gives a plane a `material`, the room couples field vectors (otherwise everything
//! above stays as it is, with Γ the planes' constants). Each antenna has a polarisation
//! vector p (a dipole: its wire; otherwise the set angle across its boresight); its field
//! leaves along a path's direction k as the unit vector e = p − (p·k)k, normalized (a
//! dipole-like polarisation, common practice, no source). At each plane met the field is
//! reflected with the Fresnel coefficients of its incidence angle (a `material`, see
//! [`crate::model::fresnel`]), or with Γ_TE = Γ and Γ_TM = −Γ for a plane given by its
//! constant Γ (the same physical reflection Γ at normal incidence, a perfect conductor at
//! Γ = −1). A point scatterer passes the field on unchanged. The path's Γ in the formula
//! above is replaced by the projection of the arriving field on the probe's unit vector,
//! e_arrive · h, which is also applied to the direct path (1 for matched antennas on
//! boresight).

use std::f64::consts::PI;

use num_complex::Complex64;
use sweepgate::plan::SPEED_OF_LIGHT_M_S;

use crate::model::antennas::AntennaModel;
use crate::model::fresnel::{reflect, CVec3, Medium};
use crate::model::geometry::{self, to_aut_frame, to_probe_frame, Path, PathKind, Vec3};
use crate::model::scenario::{Antenna, AxisName, Scenario};

/// The room with its antennas: paths and the response at any angle.
#[derive(Debug, Clone)]
pub struct Room {
    paths: Vec<Path>,
    aut: AntennaModel,
    probe: AntennaModel,
    cable_delay_s: f64,
    polarised: Option<Polarised>,
}

/// One plane's optics for polarised coupling.
#[derive(Debug, Clone, Copy)]
struct PlaneOptics {
    normal: Vec3,
    constant: f64,
    medium: Option<Medium>,
}

impl PlaneOptics {
    fn coefficients(&self, f_hz: f64, k: Vec3) -> (Complex64, Complex64) {
        match self.medium {
            Some(m) => {
                let c = (k[0] * self.normal[0] + k[1] * self.normal[1] + k[2] * self.normal[2])
                    .abs()
                    .min(1.0);
                m.reflection(f_hz, c.acos().to_degrees())
            }
            None => (
                Complex64::new(self.constant, 0.0),
                Complex64::new(-self.constant, 0.0),
            ),
        }
    }
}

/// What the room needs to couple field vectors (module notes).
#[derive(Debug, Clone)]
struct Polarised {
    /// The AUT's polarisation vector in its own frame.
    aut_vector: Vec3,
    /// The probe's polarisation vector in the room frame.
    probe_vector: Vec3,
    planes: Vec<PlaneOptics>,
}

fn axis_vector(a: AxisName) -> Vec3 {
    match a {
        AxisName::X => [1.0, 0.0, 0.0],
        AxisName::Y => [0.0, 1.0, 0.0],
        AxisName::Z => [0.0, 0.0, 1.0],
    }
}

/// Polarisation vector across boresight +x at `deg` from horizontal (y).
fn across_boresight(deg: f64) -> Vec3 {
    let (s, c) = deg.to_radians().sin_cos();
    [0.0, c, s]
}

/// The part of `p` across unit `k`, normalized; zero when `p` lies along `k`.
fn transverse(p: Vec3, k: Vec3) -> Vec3 {
    let d = p[0] * k[0] + p[1] * k[1] + p[2] * k[2];
    let t = [p[0] - d * k[0], p[1] - d * k[1], p[2] - d * k[2]];
    let n = (t[0] * t[0] + t[1] * t[1] + t[2] * t[2]).sqrt();
    if n < 1e-12 {
        [0.0; 3]
    } else {
        t.map(|c| c / n)
    }
}

impl Polarised {
    fn of(s: &Scenario) -> Option<Self> {
        let sim = &s.simulation;
        let wanted = sim.aut_polarisation_deg.is_some()
            || sim.probe_polarisation_deg.is_some()
            || s.planes.iter().any(|p| p.material.is_some());
        wanted.then(|| Self::build(s))
    }

    fn build(s: &Scenario) -> Self {
        let sim = &s.simulation;
        let aut_vector = match &s.aut {
            Antenna::Dipole { axis, .. } => axis_vector(*axis),
            _ => across_boresight(sim.aut_polarisation_deg.unwrap_or(0.0)),
        };
        let probe_vector = match &s.probe {
            Antenna::Dipole { axis, .. } => to_probe_frame(axis_vector(*axis)),
            _ => across_boresight(sim.probe_polarisation_deg.unwrap_or(0.0)),
        };
        let planes = s
            .planes
            .iter()
            .map(|p| PlaneOptics {
                normal: axis_vector(p.axis),
                constant: p.reflection,
                medium: p.material.map(|m| Medium {
                    relative_permittivity: m.relative_permittivity,
                    conductivity_s_m: m.conductivity_s_m,
                }),
            })
            .collect();
        Self {
            aut_vector,
            probe_vector,
            planes,
        }
    }

    /// e_arrive · h for `path` at `f_hz` with the AUT at `angle_deg` (module notes).
    fn coupling(&self, path: &Path, f_hz: f64, angle_deg: f64) -> Complex64 {
        let p_room = to_aut_frame(self.aut_vector, -angle_deg);
        let e0 = transverse(p_room, path.depart);
        let mut e: CVec3 = e0.map(|c| Complex64::new(c, 0.0));
        let mut k = path.depart;
        let bounces: &[usize] = match &path.kind {
            PathKind::Bounce { plane } => &[*plane][..],
            PathKind::DoubleBounce { first, second } => &[*first, *second][..],
            _ => &[],
        };
        for &i in bounces {
            let pl = &self.planes[i];
            let (te, tm) = pl.coefficients(f_hz, k);
            (k, e) = reflect(&e, k, pl.normal, te, tm);
        }
        let h = transverse(self.probe_vector, path.arrive);
        e[0] * h[0] + e[1] * h[1] + e[2] * h[2]
    }
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
            polarised: Polarised::of(s),
        }
    }

    /// The same room seen by a probe polarised at `deg` from horizontal across the range
    /// (e.g. the cross-polar port of a dual-polarised probe); couples field vectors from
    /// then on (module notes). A dipole probe keeps the angle given here.
    pub fn with_probe_polarisation_deg(mut self, s: &Scenario, deg: f64) -> Self {
        let mut p = self.polarised.take().unwrap_or_else(|| Polarised::build(s));
        p.probe_vector = across_boresight(deg);
        self.polarised = Some(p);
        self
    }

    /// Whether the room couples field vectors (module notes).
    pub fn is_polarised(&self) -> bool {
        self.polarised.is_some()
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
        let phase = -2.0 * PI * f_hz * (path.delay_s() + self.cable_delay_s);
        if let Some(pol) = &self.polarised {
            let weight = match path.kind {
                PathKind::Scatter { .. } => path.weight_per_m,
                _ => 1.0 / path.length_m,
            };
            let amp = weight * lambda / (4.0 * PI) * g_aut * g_probe;
            return Complex64::from_polar(amp, phase) * pol.coupling(path, f_hz, angle_deg);
        }
        let amp = path.weight_per_m * lambda / (4.0 * PI) * g_aut * g_probe;
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
