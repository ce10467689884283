//! Room scenarios: a TOML description of a range, its echoes, the antennas, the sweep and
//! the positioner, as pure data. This module imports nothing else of the crate: the checks
//! of each field live here ([`Scenario::check_fields`]); reading a file and the checks of
//! the scan as a whole, which need the schedule and the paths, live in
//! [`crate::model::load`] ([`Scenario::from_toml`], [`Scenario::validate`]).
//!
//! Geometry follows the core's convention (`sweepgate::plan`): the turntable axis is
//! vertical through the origin, x points from the AUT to the probe, y to the left, z up
//! from the floor at z = 0. The AUT's phase centre sits on the turntable axis at
//! `range.aut_height_m`; the probe sits at `(range.distance_m, 0, range.probe_height_m)`
//! and looks back along −x.
//!
//! Sections (all names are ours; `host-sim/scenarios/example-annotated.toml` documents
//! every field):
//!
//! | section | fields |
//! |---|---|
//! | top level | `name`, `description` |
//! | `[sweep]` | `start_hz`, `stop_hz`, `points`, `sweep_duration_s`, `sweep_gap_s`, `noise_db` |
//! | `[range]` | `distance_m`, `aut_height_m`, `probe_height_m`, `cable_delay_s` |
//! | `[[planes]]` | `name`, `axis` (`x`/`y`/`z`), `position_m`, `reflection`, `material` (`relative_permittivity`, `conductivity_s_m`) |
//! | `[[scatterers]]` | `name`, `position_m = [x, y, z]`, `rcs_m2` |
//! | `[aut]`, `[probe]` | `kind` = `isotropic`, `aperture`, `dipole`, `cos_power`, `array`, and its fields |
//! | `[positioner]` | `mode` = `continuous` or `step`, `start_deg`, `stop_deg`, `speed_deg_s`, `acceleration_deg_s2`, `step_deg`, `settle_s`, `sweeps_per_step`, `counts_per_turn`, `sample_interval_s`, `timing_jitter_s` |
//! | `[pattern]` | `frequencies_hz`, `bin_width_deg` |
//! | `[simulation]` | `second_order`, `seed`, `aut_polarisation_deg`, `probe_polarisation_deg` |
//! | `[plan]` | `aut_size_m`, `aut_fractional_bandwidth`, `longest_path_m`, `band_window` (all optional; read by `sweepgate plan`) |

use std::fmt;

use serde::{Deserialize, Serialize};
use sweepgate::grid::Grid;
use sweepgate::plan::{Axis, Plane, Point};

pub use crate::limits::MAX_SWEEPS;
use crate::limits::{
    MAX_BIN_WIDTH_DEG, MAX_SAMPLE_INTERVAL_S, MAX_SETTLE_S, MAX_SPEED_DEG_S, MIN_BIN_WIDTH_DEG,
    MIN_SAMPLE_INTERVAL_S, MIN_SPEED_DEG_S,
};

/// A scenario field that failed validation, with the reason.
#[derive(Debug, Clone, PartialEq)]
pub struct ScenarioError {
    /// Dotted path of the field, e.g. `sweep.stop_hz` or `planes[2].reflection`.
    pub field: String,
    /// What is wrong with it.
    pub reason: String,
}

impl fmt::Display for ScenarioError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "scenario field `{}`: {}", self.field, self.reason)
    }
}

impl std::error::Error for ScenarioError {}

pub(crate) fn bad(field: impl Into<String>, reason: impl Into<String>) -> ScenarioError {
    ScenarioError {
        field: field.into(),
        reason: reason.into(),
    }
}

/// A whole scenario as read from TOML. Fields are public so that tests and tools can
/// adjust a shipped scenario (for instance a shorter scan) before [`Scenario::validate`].
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Scenario {
    /// Short name, used in titles.
    pub name: String,
    /// One or two sentences about the room.
    #[serde(default)]
    pub description: String,
    /// The VNA sweep.
    pub sweep: Sweep,
    /// Range geometry.
    pub range: Range,
    /// Reflecting planes (floor, ceiling, walls).
    #[serde(default)]
    pub planes: Vec<PlaneSpec>,
    /// Point scatterers (a mast, a fixture).
    #[serde(default)]
    pub scatterers: Vec<Scatterer>,
    /// The antenna under test, on the turntable.
    pub aut: Antenna,
    /// The probe (range antenna), fixed, looking at the AUT.
    #[serde(default)]
    pub probe: Antenna,
    /// The turntable's motion and its encoder.
    pub positioner: Positioner,
    /// What the scan is for: pattern frequencies and angle bins.
    #[serde(default)]
    pub pattern: Pattern,
    /// Simulation switches.
    #[serde(default)]
    pub simulation: Simulation,
    /// Figures only the planner reads.
    #[serde(default)]
    pub plan: PlanSettings,
}

/// `[sweep]`: the VNA's frequency sweep.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Sweep {
    /// First frequency, Hz.
    pub start_hz: f64,
    /// Last frequency, Hz (measured).
    pub stop_hz: f64,
    /// Number of frequency points.
    pub points: usize,
    /// Time one sweep takes, first point to end, s. Point k is measured at
    /// `start + k·sweep_duration_s/points`.
    pub sweep_duration_s: f64,
    /// Dead time between the end of one sweep and the start of the next, s.
    #[serde(default)]
    pub sweep_gap_s: f64,
    /// RMS magnitude of the additive complex Gaussian noise, dB relative to |S21| = 1.
    /// Absent: no noise.
    #[serde(default)]
    pub noise_db: Option<f64>,
}

/// `[range]`: where the antennas are.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Range {
    /// Horizontal distance from the turntable axis to the probe, m.
    pub distance_m: f64,
    /// Height of the AUT's phase centre above the floor, m.
    pub aut_height_m: f64,
    /// Height of the probe above the floor, m.
    pub probe_height_m: f64,
    /// Extra delay of the cables and adapters (all paths), s.
    #[serde(default)]
    pub cable_delay_s: f64,
}

/// Axis names in TOML: `x`, `y`, `z`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum AxisName {
    /// A wall across the range: x = const.
    X,
    /// A side wall: y = const.
    Y,
    /// Floor or ceiling: z = const.
    Z,
}

impl From<AxisName> for Axis {
    fn from(a: AxisName) -> Self {
        match a {
            AxisName::X => Axis::X,
            AxisName::Y => Axis::Y,
            AxisName::Z => Axis::Z,
        }
    }
}

/// `[[planes]]`: one infinite axis-aligned reflecting plane.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PlaneSpec {
    /// A label ("floor", "left wall").
    #[serde(default)]
    pub name: String,
    /// Which coordinate is constant on the plane.
    pub axis: AxisName,
    /// Value of that coordinate, m.
    pub position_m: f64,
    /// Field reflection coefficient, −1…1 (−1: bare metal). The planner's figure; the
    /// simulator's too unless `material` is given.
    pub reflection: f64,
    /// The plane's material: the simulator then reflects each ray with the Fresnel TE and
    /// TM coefficients of its incidence angle (see [`crate::model::fresnel`]).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub material: Option<Material>,
}

/// `material` of a plane: a homogeneous half-space.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Material {
    /// Relative permittivity ε' (≥ 1; concrete about 5, dry ground 4…15).
    pub relative_permittivity: f64,
    /// Conductivity σ, S/m (≥ 0). Absent: 0.
    #[serde(default)]
    pub conductivity_s_m: f64,
}

impl PlaneSpec {
    /// The core's plane.
    pub fn plane(&self) -> Plane {
        Plane {
            axis: self.axis.into(),
            position_m: self.position_m,
            reflection: self.reflection,
        }
    }
}

/// `[[scatterers]]`: a point that re-radiates isotropically.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Scatterer {
    /// A label ("mast").
    #[serde(default)]
    pub name: String,
    /// Position `[x, y, z]`, m.
    pub position_m: [f64; 3],
    /// Bistatic radar cross-section σ, m² (frequency independent). The path amplitude is
    /// √σ·λ / ((4π)^1.5·r1·r2) times the antenna patterns (radar equation).
    pub rcs_m2: f64,
}

impl Scatterer {
    /// Position as a core point.
    pub fn point(&self) -> Point {
        Point::new(self.position_m[0], self.position_m[1], self.position_m[2])
    }
}

/// How an aperture's illumination falls off towards its edges (in one dimension).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Taper {
    /// Uniform illumination (sinc pattern, −13.3 dB sidelobes).
    #[default]
    Uniform,
    /// Cosine illumination (−23 dB sidelobes, wider beam).
    Cosine,
}

/// `[aut]` / `[probe]`: a built-in analytic antenna. Each antenna's boresight is its own
/// +x axis (for the probe: pointing back at the AUT), y left, z up.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, Default)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum Antenna {
    /// Gain 1 in every direction (for checks against closed forms).
    #[default]
    Isotropic,
    /// A rectangular aperture in the antenna's y–z plane (a horn mouth, a flat panel).
    Aperture {
        /// Horizontal size (along y), m.
        width_m: f64,
        /// Vertical size (along z), m.
        height_m: f64,
        /// Illumination across the width.
        #[serde(default)]
        width_taper: Taper,
        /// Illumination across the height.
        #[serde(default)]
        height_taper: Taper,
    },
    /// A thin centre-fed dipole of fixed length (half-wave at `length_m = λ/2`).
    Dipole {
        /// Total length, m.
        length_m: f64,
        /// Which antenna axis the wire lies along (`y`: horizontal, `z`: vertical).
        axis: AxisName,
    },
    /// Power pattern cos^n θ in front (θ from boresight), nothing behind; frequency
    /// independent.
    CosPower {
        /// Power exponent n.
        n: f64,
    },
    /// A uniform linear array along the antenna's y axis of cos^n elements.
    Array {
        /// Number of elements.
        elements: usize,
        /// Element spacing, m.
        spacing_m: f64,
        /// Power exponent of each element's cos^n pattern (0: isotropic elements).
        #[serde(default)]
        element_n: f64,
    },
}

/// Motion modes of the turntable.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Mode {
    /// One move from start to stop (trapezoidal speed profile); sweeps run back to back
    /// throughout.
    Continuous,
    /// Move by `step_deg`, wait `settle_s`, take `sweeps_per_step` sweeps, repeat.
    Step,
}

/// `[positioner]`: the turntable and its encoder.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Positioner {
    /// Continuous or step-and-stop.
    pub mode: Mode,
    /// First angle, degrees (AUT boresight towards the probe at 0).
    pub start_deg: f64,
    /// Last angle, degrees.
    pub stop_deg: f64,
    /// Top speed, degrees per second.
    pub speed_deg_s: f64,
    /// Acceleration and deceleration, degrees per second².
    pub acceleration_deg_s2: f64,
    /// Step size in step mode, degrees.
    #[serde(default)]
    pub step_deg: Option<f64>,
    /// Wait after each step before sweeping, s.
    #[serde(default)]
    pub settle_s: f64,
    /// Sweeps taken at each step.
    #[serde(default = "one")]
    pub sweeps_per_step: usize,
    /// Encoder counts per full turn (angle resolution 360°/counts).
    pub counts_per_turn: u32,
    /// Interval between positioner samples, s.
    pub sample_interval_s: f64,
    /// Standard deviation of the error of each sample's timestamp, s.
    #[serde(default)]
    pub timing_jitter_s: f64,
}

fn one() -> usize {
    1
}

impl Positioner {
    /// The angles a step-and-stop scan stands at: start + i·step towards stop, at most
    /// [`MAX_SWEEPS`] + 1 of them (1° steps when `step_deg` is absent).
    pub fn step_angles_deg(&self) -> Vec<f64> {
        let step = self.step_deg.unwrap_or(1.0);
        let span = (self.stop_deg - self.start_deg).abs();
        let dir = (self.stop_deg - self.start_deg).signum();
        let n = ((span / step + 1e-9).floor() as usize + 1).min(MAX_SWEEPS + 1);
        (0..n)
            .map(|i| self.start_deg + dir * step * i as f64)
            .collect()
    }

    fn validate(&self) -> Result<(), ScenarioError> {
        let q = self;
        finite("positioner.start_deg", q.start_deg)?;
        finite("positioner.stop_deg", q.stop_deg)?;
        if q.start_deg == q.stop_deg {
            return Err(bad("positioner.stop_deg", "must differ from start_deg"));
        }
        if (q.stop_deg - q.start_deg).abs() > 3600.0 {
            return Err(bad("positioner.stop_deg", "span above 10 turns"));
        }
        within(
            "positioner.speed_deg_s",
            q.speed_deg_s,
            (MIN_SPEED_DEG_S, MAX_SPEED_DEG_S),
            "deg/s",
        )?;
        positive("positioner.acceleration_deg_s2", q.acceleration_deg_s2)?;
        within("positioner.settle_s", q.settle_s, (0.0, MAX_SETTLE_S), "s")?;
        if q.mode == Mode::Step {
            match q.step_deg {
                None => return Err(bad("positioner.step_deg", "required in step mode")),
                Some(st) => {
                    positive("positioner.step_deg", st)?;
                }
            }
            if !(1..=MAX_SWEEPS).contains(&q.sweeps_per_step) {
                return Err(bad(
                    "positioner.sweeps_per_step",
                    format!(
                        "{} is outside 1…{MAX_SWEEPS} (the most sweeps of a scan)",
                        q.sweeps_per_step
                    ),
                ));
            }
        }
        if q.counts_per_turn == 0 {
            return Err(bad("positioner.counts_per_turn", "must be at least 1"));
        }
        within(
            "positioner.sample_interval_s",
            q.sample_interval_s,
            (MIN_SAMPLE_INTERVAL_S, MAX_SAMPLE_INTERVAL_S),
            "s",
        )?;
        non_negative("positioner.timing_jitter_s", q.timing_jitter_s)?;
        if q.timing_jitter_s > q.sample_interval_s {
            return Err(bad(
                "positioner.timing_jitter_s",
                "must not exceed sample_interval_s",
            ));
        }
        Ok(())
    }
}

/// `[pattern]`: what the scan is for. The simulator writes the true free-space pattern
/// at these frequencies, at the centre of each bin.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct Pattern {
    /// Pattern frequencies, Hz (each snapped to the nearest sweep point). Empty: the
    /// sweep's centre point.
    #[serde(default)]
    pub frequencies_hz: Vec<f64>,
    /// Angle bin width, degrees. Absent: 1°.
    #[serde(default)]
    pub bin_width_deg: Option<f64>,
}

/// `[simulation]`: simulator switches.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct Simulation {
    /// Also model two-bounce echoes (via two different planes).
    #[serde(default)]
    pub second_order: bool,
    /// Seed of the noise and jitter generator (the command line's `--seed` wins).
    #[serde(default)]
    pub seed: u64,
    /// The AUT's polarisation angle in its aperture (its own y–z plane), degrees from
    /// horizontal (0: along y, 90: along z); a dipole's is its wire. Setting this or
    /// `probe_polarisation_deg`, or giving a plane a `material`, makes the simulator couple
    /// field vectors (see [`crate::model::room`]). Absent: 0.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub aut_polarisation_deg: Option<f64>,
    /// The probe's polarisation angle from horizontal (room y) in the plane across the
    /// range, degrees (0: horizontal, 90: vertical). Absent: 0.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub probe_polarisation_deg: Option<f64>,
}

/// `[plan]`: figures only the planner (`sweepgate plan`) reads; every field is optional.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct PlanSettings {
    /// The AUT's largest dimension D, m, for the far-field distance 2D²/λ. Absent: taken
    /// from the `[aut]` model ([`Antenna::largest_size_m`]).
    #[serde(default)]
    pub aut_size_m: Option<f64>,
    /// The AUT's own fractional bandwidth (bandwidth / centre frequency, 0…2], for the
    /// ring-down check. Absent: no check.
    #[serde(default)]
    pub aut_fractional_bandwidth: Option<f64>,
    /// The room's longest plausible path, m (for the alias-free check).
    #[serde(default)]
    pub longest_path_m: Option<f64>,
    /// Band window, spelled as on the command line (`kaiser:6`, `hann`, …). The spelling
    /// is checked by the planner, its only reader (`crate::pipeline::plan`), so that this
    /// description imports nothing of the pipeline.
    #[serde(default)]
    pub band_window: Option<String>,
}

impl PlanSettings {
    fn validate(&self) -> Result<(), ScenarioError> {
        if let Some(d) = self.aut_size_m {
            positive("plan.aut_size_m", d)?;
        }
        if let Some(b) = self.aut_fractional_bandwidth {
            if positive("plan.aut_fractional_bandwidth", b)? > 2.0 {
                return Err(bad("plan.aut_fractional_bandwidth", "must be at most 2"));
            }
        }
        if let Some(l) = self.longest_path_m {
            positive("plan.longest_path_m", l)?;
        }
        Ok(())
    }
}

pub(crate) fn finite(field: &str, v: f64) -> Result<f64, ScenarioError> {
    if v.is_finite() {
        Ok(v)
    } else {
        Err(bad(field, "must be a finite number"))
    }
}

pub(crate) fn positive(field: &str, v: f64) -> Result<f64, ScenarioError> {
    if finite(field, v)? > 0.0 {
        Ok(v)
    } else {
        Err(bad(field, format!("must be above 0 (got {v})")))
    }
}

/// `v` if it lies within `lo…hi` (inclusive; `unit` is written after the range), else the
/// field, the value and the range.
pub(crate) fn within(
    field: &str,
    v: f64,
    (lo, hi): (f64, f64),
    unit: &str,
) -> Result<f64, ScenarioError> {
    if (lo..=hi).contains(&v) {
        Ok(v)
    } else {
        Err(bad(
            field,
            format!("{} is outside {lo}…{hi} {unit}", short_number(v)),
        ))
    }
}

/// A number as a person would write it: plain between 1e-4 and 1e6, else in exponent form
/// (`1e-9`, `1e300`, not thirty zeros).
pub(crate) fn short_number(v: f64) -> String {
    if v == 0.0 || (1e-4..1e6).contains(&v.abs()) || !v.is_finite() {
        format!("{v}")
    } else {
        format!("{v:e}")
    }
}

pub(crate) fn non_negative(field: &str, v: f64) -> Result<f64, ScenarioError> {
    if finite(field, v)? >= 0.0 {
        Ok(v)
    } else {
        Err(bad(field, format!("must not be negative (got {v})")))
    }
}

impl Antenna {
    fn validate(&self, section: &str) -> Result<(), ScenarioError> {
        let f = |name: &str| format!("{section}.{name}");
        match self {
            Antenna::Isotropic => {}
            Antenna::Aperture {
                width_m, height_m, ..
            } => {
                positive(&f("width_m"), *width_m)?;
                positive(&f("height_m"), *height_m)?;
            }
            Antenna::Dipole { length_m, axis } => {
                positive(&f("length_m"), *length_m)?;
                if *axis == AxisName::X {
                    return Err(bad(
                        f("axis"),
                        "a dipole along its own boresight (x) is not modelled; use y or z",
                    ));
                }
            }
            Antenna::CosPower { n } => {
                non_negative(&f("n"), *n)?;
            }
            Antenna::Array {
                elements,
                spacing_m,
                element_n,
            } => {
                if !(1..=1024).contains(elements) {
                    return Err(bad(f("elements"), "must be 1…1024"));
                }
                positive(&f("spacing_m"), *spacing_m)?;
                non_negative(&f("element_n"), *element_n)?;
            }
        }
        Ok(())
    }
}

/// A TOML error as one line: `line L, column C: message` (the toml crate's own display
/// spans several lines with a snippet).
pub(crate) fn toml_one_line(text: &str, e: &toml::de::Error) -> String {
    let msg = crate::quote::clip_quotes(&e.message().trim().replace('\n', " "));
    match e.span() {
        Some(span) => {
            let before = text.get(..span.start).unwrap_or(text);
            let line = before.matches('\n').count() + 1;
            let column = before
                .rfind('\n')
                .map_or(before.len(), |i| before.len() - i - 1)
                + 1;
            // A value of the wrong type: its key, which the toml crate shows only in the
            // snippet this form leaves out.
            let on_line = &before[before.rfind('\n').map_or(0, |i| i + 1)..];
            let key = on_line
                .trim_end()
                .strip_suffix('=')
                .map(str::trim)
                .filter(|k| !k.is_empty())
                .map_or(String::new(), |k| {
                    format!(", key `{}`", crate::quote::clipped(k))
                });
            format!("line {line}, column {column}{key}: {msg}")
        }
        None => msg,
    }
}

impl Scenario {
    /// Checks every field on its own and against the others (the sweep is a usable grid,
    /// each plane has both antennas on one side, pattern frequencies lie in the sweep, …);
    /// the error names the first bad field. [`Scenario::validate`] (in
    /// [`crate::model::load`]) adds the checks of the scan as a whole.
    pub fn check_fields(&self) -> Result<(), ScenarioError> {
        if self.name.trim().is_empty() {
            return Err(bad("name", "must not be empty"));
        }
        self.check_sweep()?;
        self.check_range()?;
        self.check_planes()?;
        self.check_scatterers()?;
        for (name, v) in [
            (
                "simulation.aut_polarisation_deg",
                self.simulation.aut_polarisation_deg,
            ),
            (
                "simulation.probe_polarisation_deg",
                self.simulation.probe_polarisation_deg,
            ),
        ] {
            if let Some(v) = v {
                finite(name, v)?;
            }
        }
        self.aut.validate("aut")?;
        self.probe.validate("probe")?;
        self.plan.validate()?;
        self.positioner.validate()?;
        self.check_pattern()
    }

    fn check_sweep(&self) -> Result<(), ScenarioError> {
        let s = &self.sweep;
        positive("sweep.start_hz", s.start_hz)?;
        positive("sweep.stop_hz", s.stop_hz)?;
        if s.stop_hz <= s.start_hz {
            return Err(bad("sweep.stop_hz", "must be above sweep.start_hz"));
        }
        if !(2..=usize::from(u16::MAX)).contains(&s.points) {
            return Err(bad("sweep.points", "must be 2…65535"));
        }
        positive("sweep.sweep_duration_s", s.sweep_duration_s)?;
        non_negative("sweep.sweep_gap_s", s.sweep_gap_s)?;
        if let Some(n) = s.noise_db {
            finite("sweep.noise_db", n)?;
        }
        self.grid()
            .map_err(|e| bad("sweep", format!("not a usable grid: {e}")))?;
        Ok(())
    }

    fn check_range(&self) -> Result<(), ScenarioError> {
        let r = &self.range;
        positive("range.distance_m", r.distance_m)?;
        finite("range.aut_height_m", r.aut_height_m)?;
        finite("range.probe_height_m", r.probe_height_m)?;
        non_negative("range.cable_delay_s", r.cable_delay_s)?;
        Ok(())
    }

    fn check_planes(&self) -> Result<(), ScenarioError> {
        let (a, p) = (self.aut_position(), self.probe_position());
        for (i, pl) in self.planes.iter().enumerate() {
            let field = |n: &str| format!("planes[{i}].{n}");
            finite(&field("position_m"), pl.position_m)?;
            let g = finite(&field("reflection"), pl.reflection)?;
            if !(-1.0..=1.0).contains(&g) {
                return Err(bad(field("reflection"), "must be within −1…1"));
            }
            if let Some(m) = &pl.material {
                let eps = finite(
                    &field("material.relative_permittivity"),
                    m.relative_permittivity,
                )?;
                if eps < 1.0 {
                    return Err(bad(
                        field("material.relative_permittivity"),
                        "must be at least 1",
                    ));
                }
                non_negative(&field("material.conductivity_s_m"), m.conductivity_s_m)?;
            }
            if pl.plane().bounce_point(&a, &p).is_none() {
                return Err(bad(
                    field("position_m"),
                    "the AUT and the probe must both be strictly on the same side of the plane",
                ));
            }
        }
        Ok(())
    }

    fn check_scatterers(&self) -> Result<(), ScenarioError> {
        let (a, p) = (self.aut_position(), self.probe_position());
        for (i, sc) in self.scatterers.iter().enumerate() {
            let field = |n: &str| format!("scatterers[{i}].{n}");
            for v in sc.position_m {
                finite(&field("position_m"), v)?;
            }
            non_negative(&field("rcs_m2"), sc.rcs_m2)?;
            if sc.point().distance_m(&a) < 1e-3 || sc.point().distance_m(&p) < 1e-3 {
                return Err(bad(
                    field("position_m"),
                    "must not coincide with the AUT or the probe",
                ));
            }
        }
        Ok(())
    }

    fn check_pattern(&self) -> Result<(), ScenarioError> {
        let grid = self.grid().map_err(|e| bad("sweep", e.to_string()))?;
        for (i, f) in self.pattern.frequencies_hz.iter().enumerate() {
            let field = format!("pattern.frequencies_hz[{i}]");
            finite(&field, *f)?;
            if grid.nearest_index(*f).is_none() {
                return Err(bad(field, "lies outside the sweep"));
            }
        }
        if let Some(b) = self.pattern.bin_width_deg {
            within(
                "pattern.bin_width_deg",
                b,
                (MIN_BIN_WIDTH_DEG, MAX_BIN_WIDTH_DEG),
                "deg",
            )?;
        }
        Ok(())
    }

    /// The sweep's frequency grid.
    pub fn grid(&self) -> Result<Grid, sweepgate::error::GridError> {
        Grid::from_start_stop(self.sweep.start_hz, self.sweep.stop_hz, self.sweep.points)
    }

    /// AUT phase centre.
    pub fn aut_position(&self) -> Point {
        Point::new(0.0, 0.0, self.range.aut_height_m)
    }

    /// Probe position.
    pub fn probe_position(&self) -> Point {
        Point::new(self.range.distance_m, 0.0, self.range.probe_height_m)
    }

    /// Direct path length, m.
    pub fn range_length_m(&self) -> f64 {
        self.aut_position().distance_m(&self.probe_position())
    }

    /// Pattern frequencies snapped to the grid (the centre point when none are given).
    pub fn pattern_frequencies_hz(&self) -> Vec<f64> {
        let Ok(grid) = self.grid() else {
            return Vec::new();
        };
        if self.pattern.frequencies_hz.is_empty() {
            return vec![grid.frequency_hz(grid.points() / 2)];
        }
        self.pattern
            .frequencies_hz
            .iter()
            .filter_map(|f| grid.nearest_index(*f))
            .map(|i| grid.frequency_hz(i))
            .collect()
    }

    /// Bin width, degrees.
    pub fn bin_width_deg(&self) -> f64 {
        self.pattern.bin_width_deg.unwrap_or(1.0)
    }

    /// Centres of the angle bins covering the scan, degrees, in scan order: the step angles
    /// of a step-and-stop scan (where the turntable stands while sweeping), the centres of
    /// `bin_width_deg` bins of a continuous one.
    pub fn bin_centres_deg(&self) -> Vec<f64> {
        let q = &self.positioner;
        if q.mode == Mode::Step {
            return q.step_angles_deg();
        }
        let span = (q.stop_deg - q.start_deg).abs();
        let dir = (q.stop_deg - q.start_deg).signum();
        let w = self.bin_width_deg();
        let n = ((span / w).floor() as usize).max(1);
        (0..n)
            .map(|i| q.start_deg + dir * (i as f64 + 0.5) * w)
            .collect()
    }
}

impl Antenna {
    /// Largest dimension of the antenna, m (`None` for the size-less models).
    pub fn largest_size_m(&self) -> Option<f64> {
        match self {
            Antenna::Aperture {
                width_m, height_m, ..
            } => Some(width_m.hypot(*height_m)),
            Antenna::Dipole { length_m, .. } => Some(*length_m),
            Antenna::Array {
                elements,
                spacing_m,
                ..
            } => Some(*elements as f64 * spacing_m),
            Antenna::Isotropic | Antenna::CosPower { .. } => None,
        }
    }
}
