//! `sweepgate plan --scenario FILE [--json] [--aut-size-m D] [--fractional-bandwidth B]
//! [--band-window W] [--rotation-deg-s S]`: turns a scenario (or a smaller plan file) into
//! the core planner's input ([`sweepgate::plan::PlanInput`]), runs [`sweepgate::plan::plan`]
//! and prints a readable table or JSON.
//!
//! Two kinds of file are read, with the same section structs as [`crate::model::scenario`]:
//! - a whole scenario (it has a `[positioner]` section);
//! - a plan file: only `[sweep]`, `[range]`, `[[planes]]`, `[[scatterers]]`, and the AUT
//!   size (`[plan] aut_size_m`, or an `[aut]` model); `[pattern] bin_width_deg` is read too.
//!   `host-sim/plans/` has examples.
//!
//! What the planner is given:
//! - AUT size D: `--aut-size-m`, else `[plan] aut_size_m`, else from the `[aut]` model: the
//!   aperture's diagonal √(w² + h²), the dipole's length, the array's length N·d (element
//!   spacing times element count, so each end element's half spacing counts); for models
//!   without a size (isotropic, cos^n) the diagonal √(2A) of a square aperture with the
//!   model's effective area A = D₀λ²/(4π) at the top frequency (D₀ = 1 isotropic,
//!   D₀ = 2(n + 1) for cos^n; Balanis, Antenna Theory, directivity of cos^n patterns).
//! - fractional bandwidth: `--fractional-bandwidth`, else `[plan] aut_fractional_bandwidth`,
//!   else no ring-down check;
//! - band window: `--band-window`, else `[plan] band_window`, else a Kaiser window for 50 dB
//!   sidelobes (`options::default_band_window`, the same as `replay` and `process`);
//! - bin step: `[pattern] bin_width_deg` (1° when absent); sweep duration and cable delay
//!   from `[sweep]` and `[range]`;
//! - rotation speed: `--rotation-deg-s`, else the positioner's top speed in continuous mode;
//!   step mode and plan files have none (the turntable stands still during sweeps);
//! - scatterers' reflection: the echo's field relative to the direct path between isotropic
//!   antennas, √(σ/4π)·R/(r₁·r₂) (radar equation; `sweepgate::plan::Scatterer::from_rcs`,
//!   the level the simulator uses too).
//!
//! Findings are warnings: the command fails only when the file cannot be read or planned.
//!
//! JSON (`--json`, the [`PlanReport`] fields; every number carries its unit in its name):
//! `file`, `file_kind` (`scenario`/`plan_file`), `name`, `cautions` (sentences), `inputs`
//! (`start_hz`, `stop_hz`, `points`, `step_hz`, `aut_size_m`, `aut_size_source`,
//! `aut_fractional_bandwidth`, `band_window`, `band_window_mainlobe_bins`, `aut_position_m`,
//! `probe_position_m`, `bin_step_deg`, `sweep_duration_s`, `cable_delay_s`, `rotation_deg_s`,
//! `longest_path_m`), `far_field` (`top_wavelength_m`, `far_field_m`, `range_m`,
//! `meets_far_field`), `paths` (`direct_path_m`, `direct_delay_s`, `echoes`: `source`,
//! `name`, `path_m`, `delay_s`, `excess_delay_s`, `reflection`, `relative_level_db`,
//! `bounce_point_m`, `first`), `time_axis` (`bandwidth_hz`, `resolution_s`, `mainlobe_s`,
//! `alias_free_s`, `alias_free_m`, `longest_path_m`, `longest_delay_s`, `longest_source`,
//! `all_alias_free`, `max_step_hz`, `min_points`), `gate` (`center_s`, `span_s`, `start_s`,
//! `stop_s`, `band_window`; `null` when none), `bandwidth_needed_hz`, `rotation`
//! (`max_rotation_deg_s`, `planned_rotation_deg_s`, `planned_source`, `within_limit`),
//! `ring_down_s`, `findings` (`kind`, `text`).

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use anyhow::{anyhow, Context};
use serde::Serialize;
use sweepgate::plan::{
    self, Finding, PathSource, Plan, PlanInput, Point, Scatterer as CoreScatterer,
    SPEED_OF_LIGHT_M_S,
};
use sweepgate::window::WindowKind;

use crate::model::scenario::{
    Antenna, Mode, Pattern, PlanSettings, PlaneSpec, Positioner, Range, Scatterer, Scenario, Sweep,
};
use crate::pipeline::options::{default_band_window, format_window, parse_window};

/// The cautions every plan carries, one sentence each.
pub const CAUTIONS: [&str; 3] = [
    "Caution: a transmitting AUT or probe can exceed RF exposure limits near its aperture; keep people out of the beam and away from the aperture while transmitting.",
    "Caution: the turntable and positioner are moving machinery; keep clear while they move and use the lab's stop and interlock arrangements.",
    "This plan concerns the measurement set-up only; follow local regulations and the lab's licensed practice.",
];

/// Options of `sweepgate plan`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Scenario file or plan file (TOML).
    #[arg(long)]
    pub scenario: PathBuf,
    /// Print JSON instead of the table.
    #[arg(long)]
    pub json: bool,
    /// The AUT's largest dimension, m (overrides the file).
    #[arg(long)]
    pub aut_size_m: Option<f64>,
    /// The AUT's own fractional bandwidth, bandwidth / centre frequency (overrides the file).
    #[arg(long)]
    pub fractional_bandwidth: Option<f64>,
    /// Band window: kaiser:BETA, tukey:ALPHA, hann, hamming, blackman-harris, rectangular.
    #[arg(long, value_parser = parse_window)]
    pub band_window: Option<WindowKind>,
    /// Planned rotation speed, degrees per second (overrides the positioner's).
    #[arg(long)]
    pub rotation_deg_s: Option<f64>,
}

/// Values from the command line that override the file.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Overrides {
    /// `--aut-size-m`.
    pub aut_size_m: Option<f64>,
    /// `--fractional-bandwidth`.
    pub fractional_bandwidth: Option<f64>,
    /// `--band-window`.
    pub band_window: Option<WindowKind>,
    /// `--rotation-deg-s`.
    pub rotation_deg_s: Option<f64>,
}

/// Which kind of file was read.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum FileKind {
    /// A whole scenario.
    Scenario,
    /// A plan file (no positioner).
    PlanFile,
}

/// A file read for planning: a scenario (a plan file is completed with a still positioner
/// so the scenario's own validation applies to it unchanged).
#[derive(Debug, Clone)]
pub struct PlanSource {
    /// The scenario.
    pub scenario: Scenario,
    /// What the file was.
    pub kind: FileKind,
}

/// A plan file: the scenario sections the planner reads, and nothing else.
#[derive(Debug, serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct PlanFile {
    #[serde(default)]
    name: Option<String>,
    #[serde(default)]
    description: String,
    sweep: Sweep,
    range: Range,
    #[serde(default)]
    planes: Vec<PlaneSpec>,
    #[serde(default)]
    scatterers: Vec<Scatterer>,
    #[serde(default)]
    aut: Antenna,
    #[serde(default)]
    pattern: Pattern,
    #[serde(default)]
    plan: PlanSettings,
}

/// A positioner that never moves during a sweep, for plan files.
fn still_positioner() -> Positioner {
    Positioner {
        mode: Mode::Step,
        start_deg: 0.0,
        stop_deg: 1.0,
        speed_deg_s: 10.0,
        acceleration_deg_s2: 100.0,
        step_deg: Some(1.0),
        settle_s: 0.0,
        sweeps_per_step: 1,
        counts_per_turn: 36_000,
        sample_interval_s: 0.01,
        timing_jitter_s: 0.0,
    }
}

/// Parses scenario or plan-file text (`origin` names it in errors). Errors are one line.
pub fn parse_plan_source(text: &str, origin: &str) -> anyhow::Result<PlanSource> {
    let table: toml::Table = toml::from_str(text).map_err(|e| {
        anyhow!(
            "{origin}: not valid TOML: {}",
            crate::model::scenario::toml_one_line(text, &e)
        )
    })?;
    let (scenario, kind) = if table.contains_key("positioner") {
        let s: Scenario = toml::from_str(text).map_err(|e| {
            anyhow!(
                "{origin}: {}",
                crate::model::scenario::toml_one_line(text, &e)
            )
        })?;
        (s, FileKind::Scenario)
    } else {
        let p: PlanFile = toml::from_str(text).map_err(|e| {
            anyhow!(
                "{origin}: {} (a plan file holds sweep, range, planes, scatterers, aut, pattern and plan; a scenario also needs positioner)",
                crate::model::scenario::toml_one_line(text, &e)
            )
        })?;
        let s = Scenario {
            name: p.name.unwrap_or_else(|| origin.to_string()),
            description: p.description,
            sweep: p.sweep,
            range: p.range,
            planes: p.planes,
            scatterers: p.scatterers,
            aut: p.aut,
            probe: Antenna::Isotropic,
            positioner: still_positioner(),
            pattern: p.pattern,
            simulation: Default::default(),
            plan: p.plan,
        };
        (s, FileKind::PlanFile)
    };
    scenario.validate().with_context(|| origin.to_string())?;
    if let Some(w) = &scenario.plan.band_window {
        parse_window(w).map_err(|e| anyhow!("{origin}: scenario field `plan.band_window`: {e}"))?;
    }
    Ok(PlanSource { scenario, kind })
}

/// Reads a scenario or plan file. Errors are one line and name the file.
pub fn load_plan_source(path: &Path) -> anyhow::Result<PlanSource> {
    let text = std::fs::read_to_string(path)
        .with_context(|| format!("{}: cannot be read", path.display()))?;
    parse_plan_source(&text, &path.display().to_string())
}

/// Where the AUT size came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum SizeSource {
    /// `--aut-size-m`.
    CommandLine,
    /// `[plan] aut_size_m`.
    PlanSection,
    /// The aperture's diagonal.
    ApertureDiagonal,
    /// The dipole's length.
    DipoleLength,
    /// The array's length N·d.
    ArrayLength,
    /// A square aperture of the model's effective area at the top frequency.
    EffectiveArea,
}

impl SizeSource {
    fn text(self) -> &'static str {
        match self {
            Self::CommandLine => "given on the command line",
            Self::PlanSection => "from [plan] aut_size_m",
            Self::ApertureDiagonal => "the aperture's diagonal",
            Self::DipoleLength => "the dipole's length",
            Self::ArrayLength => "the array's length (elements x spacing)",
            Self::EffectiveArea => {
                "a square aperture with the model's effective area at the top frequency"
            }
        }
    }
}

/// The planner's view of a scenario's room.
#[derive(Debug, Clone)]
pub struct RoomGeometry {
    /// AUT phase centre.
    pub aut: sweepgate::plan::Point,
    /// Probe phase centre.
    pub probe: sweepgate::plan::Point,
    /// Reflecting planes.
    pub planes: Vec<sweepgate::plan::Plane>,
    /// Point scatterers, each with its field level relative to the direct path from the
    /// radar equation, √(σ/4π)·R/(r₁·r₂) — the same as the simulator's.
    pub scatterers: Vec<CoreScatterer>,
}

/// The room of a scenario as the core planner takes it.
pub fn room_geometry(s: &Scenario) -> RoomGeometry {
    let (aut, probe) = (s.aut_position(), s.probe_position());
    let planes = s.planes.iter().map(PlaneSpec::plane).collect();
    let scatterers = s
        .scatterers
        .iter()
        .map(|sc| CoreScatterer::from_rcs(sc.point(), sc.rcs_m2, &aut, &probe))
        .collect();
    RoomGeometry {
        aut,
        probe,
        planes,
        scatterers,
    }
}

/// The AUT's largest dimension by the rule in the module documentation.
pub fn aut_size_m(s: &Scenario, overrides: &Overrides) -> (f64, SizeSource) {
    if let Some(d) = overrides.aut_size_m {
        return (d, SizeSource::CommandLine);
    }
    if let Some(d) = s.plan.aut_size_m {
        return (d, SizeSource::PlanSection);
    }
    let lambda = SPEED_OF_LIGHT_M_S / s.sweep.stop_hz;
    let from_directivity = |d0: f64| {
        let area = d0 * lambda * lambda / (4.0 * std::f64::consts::PI);
        ((2.0 * area).sqrt(), SizeSource::EffectiveArea)
    };
    match &s.aut {
        Antenna::Aperture {
            width_m, height_m, ..
        } => (width_m.hypot(*height_m), SizeSource::ApertureDiagonal),
        Antenna::Dipole { length_m, .. } => (*length_m, SizeSource::DipoleLength),
        Antenna::Array {
            elements,
            spacing_m,
            ..
        } => (*elements as f64 * spacing_m, SizeSource::ArrayLength),
        Antenna::Isotropic => from_directivity(1.0),
        Antenna::CosPower { n } => from_directivity(2.0 * (n + 1.0)),
    }
}

/// The plan's inputs as used, with units.
#[derive(Debug, Clone, Serialize)]
pub struct InputsReport {
    /// First frequency.
    pub start_hz: f64,
    /// Last frequency.
    pub stop_hz: f64,
    /// Frequency points.
    pub points: usize,
    /// Frequency step.
    pub step_hz: f64,
    /// AUT largest dimension.
    pub aut_size_m: f64,
    /// Where it came from.
    pub aut_size_source: SizeSource,
    /// AUT fractional bandwidth, if given.
    pub aut_fractional_bandwidth: Option<f64>,
    /// Band window spelling.
    pub band_window: String,
    /// Band window main-lobe width in units of 1/B.
    pub band_window_mainlobe_bins: f64,
    /// AUT phase centre `[x, y, z]`.
    pub aut_position_m: [f64; 3],
    /// Probe position `[x, y, z]`.
    pub probe_position_m: [f64; 3],
    /// Angle bin step.
    pub bin_step_deg: f64,
    /// Sweep duration.
    pub sweep_duration_s: f64,
    /// Cable delay.
    pub cable_delay_s: f64,
    /// Planned rotation speed, if any.
    pub rotation_deg_s: Option<f64>,
    /// Configured longest path, if any.
    pub longest_path_m: Option<f64>,
}

/// Far-field figures.
#[derive(Debug, Clone, Serialize)]
pub struct FarFieldReport {
    /// Wavelength at the top frequency.
    pub top_wavelength_m: f64,
    /// 2D²/λ at the top frequency.
    pub far_field_m: f64,
    /// AUT-to-probe distance.
    pub range_m: f64,
    /// Whether the range meets the far field.
    pub meets_far_field: bool,
}

/// One echo.
#[derive(Debug, Clone, Serialize)]
pub struct EchoReport {
    /// `plane 0`, `scatterer 1`.
    pub source: String,
    /// Its label in the file.
    pub name: String,
    /// Path length.
    pub path_m: f64,
    /// Arrival from the VNA's time zero.
    pub delay_s: f64,
    /// Arrival after the direct path.
    pub excess_delay_s: f64,
    /// Plane: reflection coefficient; scatterer: field relative to the direct path.
    pub reflection: f64,
    /// Echo field relative to the direct path between isotropic antennas, dB.
    pub relative_level_db: f64,
    /// Where a plane echo meets its plane.
    pub bounce_point_m: Option<[f64; 3]>,
    /// Whether this is the first echo.
    pub first: bool,
}

/// Direct path and echoes.
#[derive(Debug, Clone, Serialize)]
pub struct PathsReport {
    /// Direct path length.
    pub direct_path_m: f64,
    /// Direct-path delay from the VNA's time zero.
    pub direct_delay_s: f64,
    /// Echoes in file order (planes, then scatterers).
    pub echoes: Vec<EchoReport>,
}

/// Time axis and aliasing.
#[derive(Debug, Clone, Serialize)]
pub struct TimeAxisReport {
    /// Swept bandwidth.
    pub bandwidth_hz: f64,
    /// 1/B.
    pub resolution_s: f64,
    /// Band window main lobe, null to null.
    pub mainlobe_s: f64,
    /// 1/Δf.
    pub alias_free_s: f64,
    /// 1/Δf as a path length.
    pub alias_free_m: f64,
    /// Longest plausible path.
    pub longest_path_m: f64,
    /// Its delay.
    pub longest_delay_s: f64,
    /// Which path it is.
    pub longest_source: String,
    /// Whether everything arrives inside 1/Δf.
    pub all_alias_free: bool,
    /// Largest alias-free step.
    pub max_step_hz: f64,
    /// Fewest alias-free points.
    pub min_points: u32,
}

/// Recommended gate.
#[derive(Debug, Clone, Serialize)]
pub struct GateReport {
    /// Gate centre from the VNA's time zero.
    pub center_s: f64,
    /// Full width.
    pub span_s: f64,
    /// Opens.
    pub start_s: f64,
    /// Closes.
    pub stop_s: f64,
    /// The band window it was computed for.
    pub band_window: String,
}

/// Rotation limit.
#[derive(Debug, Clone, Serialize)]
pub struct RotationReport {
    /// Fastest speed keeping smear under half a bin.
    pub max_rotation_deg_s: f64,
    /// The planned speed, if any.
    pub planned_rotation_deg_s: Option<f64>,
    /// Where the planned speed came from.
    pub planned_source: String,
    /// Whether the planned speed is within the limit (`None`: no speed planned).
    pub within_limit: Option<bool>,
}

/// One finding.
#[derive(Debug, Clone, Serialize)]
pub struct FindingReport {
    /// Short name: `below_far_field`, `no_echoes`, `not_separable`, `aliased`,
    /// `step_too_coarse`, `gate_beyond_alias_free`, `gate_shorter_than_ring_down`,
    /// `rotation_too_fast`.
    pub kind: &'static str,
    /// One plain sentence.
    pub text: String,
}

/// Everything `sweepgate plan` prints.
#[derive(Debug, Clone, Serialize)]
pub struct PlanReport {
    /// The file read.
    pub file: String,
    /// What kind of file it was.
    pub file_kind: FileKind,
    /// Scenario name.
    pub name: String,
    /// Safety cautions.
    pub cautions: Vec<String>,
    /// Inputs as used.
    pub inputs: InputsReport,
    /// Far field.
    pub far_field: FarFieldReport,
    /// Paths and echoes.
    pub paths: PathsReport,
    /// Time axis and aliasing.
    pub time_axis: TimeAxisReport,
    /// Recommended gate (`null` when none).
    pub gate: Option<GateReport>,
    /// Bandwidth needed to separate the first echo with this window.
    pub bandwidth_needed_hz: Option<f64>,
    /// Rotation limit.
    pub rotation: RotationReport,
    /// Estimated AUT ring-down, if the fractional bandwidth was given.
    pub ring_down_s: Option<f64>,
    /// Findings, in the order the checks ran.
    pub findings: Vec<FindingReport>,
}

fn finding_kind(f: &Finding) -> &'static str {
    match f {
        Finding::BelowFarField { .. } => "below_far_field",
        Finding::NoEchoes => "no_echoes",
        Finding::NotSeparable { .. } => "not_separable",
        Finding::Aliased { .. } => "aliased",
        Finding::StepTooCoarse { .. } => "step_too_coarse",
        Finding::GateBeyondAliasFree { .. } => "gate_beyond_alias_free",
        Finding::GateShorterThanRingDown { .. } => "gate_shorter_than_ring_down",
        Finding::RotationTooFast { .. } => "rotation_too_fast",
    }
}

fn source_text(s: &Scenario, src: &PathSource) -> String {
    let plane = |i: u32| {
        let name = s
            .planes
            .get(i as usize)
            .map(|p| p.name.as_str())
            .unwrap_or("");
        if name.is_empty() {
            format!("plane {i}")
        } else {
            format!("plane {i} ({name})")
        }
    };
    match *src {
        PathSource::Direct => "direct".into(),
        PathSource::Plane { index } => plane(index),
        PathSource::Scatterer { index } => format!("scatterer {index}"),
        PathSource::SecondOrder { first, second } => {
            format!("double bounce, {} then {}", plane(first), plane(second))
        }
        PathSource::Configured => "configured longest path".into(),
    }
}

fn xyz(p: &Point) -> [f64; 3] {
    [p.x_m, p.y_m, p.z_m]
}

/// Plans a read file. Fails only when the core planner refuses the input.
pub fn plan_report(
    source: &PlanSource,
    origin: &str,
    overrides: &Overrides,
) -> anyhow::Result<PlanReport> {
    let s = &source.scenario;
    let grid = s
        .grid()
        .map_err(|e| anyhow!("{origin}: sweep is not a usable grid: {e}"))?;
    let (size_m, size_source) = aut_size_m(s, overrides);
    let band_window = match (overrides.band_window, &s.plan.band_window) {
        (Some(w), _) => w,
        (None, Some(text)) => parse_window(text).map_err(|e| anyhow!("{origin}: {e}"))?,
        (None, None) => default_band_window(),
    };
    let fbw = overrides
        .fractional_bandwidth
        .or(s.plan.aut_fractional_bandwidth);
    let (rotation, rotation_source) = match (overrides.rotation_deg_s, source.kind) {
        (Some(w), _) => (Some(w), "given on the command line"),
        (None, FileKind::Scenario) if s.positioner.mode == Mode::Continuous => (
            Some(s.positioner.speed_deg_s),
            "the positioner's top speed (continuous mode)",
        ),
        (None, FileKind::Scenario) => (
            None,
            "none: step mode, the turntable stands still while sweeping",
        ),
        (None, FileKind::PlanFile) => (None, "none given"),
    };
    let RoomGeometry {
        aut,
        probe,
        planes,
        scatterers,
    } = room_geometry(s);
    let range_m = aut.distance_m(&probe);
    let input = PlanInput {
        grid,
        aut_size_m: size_m,
        aut,
        probe,
        planes: &planes,
        scatterers: &scatterers,
        band_window,
        bin_step_deg: s.bin_width_deg(),
        sweep_duration_s: s.sweep.sweep_duration_s,
        cable_delay_s: s.range.cable_delay_s,
        aut_fractional_bandwidth: fbw,
        longest_path_m: s.plan.longest_path_m,
        rotation_deg_s: rotation,
    };
    let p: Plan = plan::plan(&input).map_err(|e| anyhow!("{origin}: cannot plan: {e}"))?;

    let echoes = p
        .echoes
        .iter()
        .enumerate()
        .map(|(i, e)| {
            let (name, rel) = match e.source {
                PathSource::Plane { index } => (
                    s.planes
                        .get(index as usize)
                        .map(|x| x.name.clone())
                        .unwrap_or_default(),
                    e.reflection * range_m / e.path_m,
                ),
                PathSource::Scatterer { index } => (
                    s.scatterers
                        .get(index as usize)
                        .map(|x| x.name.clone())
                        .unwrap_or_default(),
                    e.reflection,
                ),
                _ => (String::new(), e.reflection),
            };
            let source = match e.source {
                PathSource::Plane { index } => format!("plane {index}"),
                other => source_text(s, &other),
            };
            EchoReport {
                source,
                name,
                path_m: e.path_m,
                delay_s: e.delay_s,
                excess_delay_s: e.excess_delay_s,
                reflection: e.reflection,
                relative_level_db: 20.0 * rel.abs().max(1e-15).log10(),
                bounce_point_m: e.bounce_point.as_ref().map(xyz),
                first: p.first_echo == Some(i),
            }
        })
        .collect();
    Ok(PlanReport {
        file: origin.to_string(),
        file_kind: source.kind,
        name: s.name.clone(),
        cautions: CAUTIONS.iter().map(|c| c.to_string()).collect(),
        inputs: InputsReport {
            start_hz: grid.start_hz(),
            stop_hz: grid.stop_hz(),
            points: grid.points(),
            step_hz: grid.step_hz(),
            aut_size_m: size_m,
            aut_size_source: size_source,
            aut_fractional_bandwidth: fbw,
            band_window: format_window(&band_window),
            band_window_mainlobe_bins: band_window.mainlobe_width(),
            aut_position_m: xyz(&aut),
            probe_position_m: xyz(&probe),
            bin_step_deg: s.bin_width_deg(),
            sweep_duration_s: s.sweep.sweep_duration_s,
            cable_delay_s: s.range.cable_delay_s,
            rotation_deg_s: rotation,
            longest_path_m: s.plan.longest_path_m,
        },
        far_field: FarFieldReport {
            top_wavelength_m: p.top_wavelength_m,
            far_field_m: p.far_field_m,
            range_m: p.range_m,
            meets_far_field: p.meets_far_field,
        },
        paths: PathsReport {
            direct_path_m: p.range_m,
            direct_delay_s: p.direct_delay_s,
            echoes,
        },
        time_axis: TimeAxisReport {
            bandwidth_hz: p.bandwidth_hz,
            resolution_s: p.resolution_s,
            mainlobe_s: p.mainlobe_s,
            alias_free_s: p.alias_free_s,
            alias_free_m: p.alias_free_s * SPEED_OF_LIGHT_M_S,
            longest_path_m: p.longest_path_m,
            longest_delay_s: p.longest_delay_s,
            longest_source: source_text(s, &p.longest_source),
            all_alias_free: p.all_alias_free,
            max_step_hz: p.max_step_hz,
            min_points: p.min_points,
        },
        gate: p.gate.map(|g| GateReport {
            center_s: g.center_s,
            span_s: g.span_s,
            start_s: g.start_s(),
            stop_s: g.stop_s(),
            band_window: format_window(&g.band_window),
        }),
        bandwidth_needed_hz: p.bandwidth_needed_hz,
        rotation: RotationReport {
            max_rotation_deg_s: p.max_rotation_deg_s,
            planned_rotation_deg_s: rotation,
            planned_source: rotation_source.to_string(),
            within_limit: rotation.map(|w| w <= p.max_rotation_deg_s),
        },
        ring_down_s: p.ring_down_s,
        findings: p
            .findings
            .iter()
            .map(|f| FindingReport {
                kind: finding_kind(f),
                text: f.to_string(),
            })
            .collect(),
    })
}

fn ns(t_s: f64) -> String {
    format!("{:.3} ns", t_s * 1e9)
}

fn ghz(f_hz: f64) -> String {
    format!("{:.4} GHz", f_hz * 1e-9)
}

/// The readable table.
pub fn render_text(r: &PlanReport) -> String {
    let mut o = String::new();
    let w = &mut o;
    let _ = writeln!(w, "Measurement plan: {} ({})", r.name, r.file);
    for c in &r.cautions {
        let _ = writeln!(w, "{c}");
    }
    let i = &r.inputs;
    let _ = writeln!(w, "\nInputs");
    let _ = writeln!(
        w,
        "  sweep                 {} to {}, {} points, step {:.4} MHz",
        ghz(i.start_hz),
        ghz(i.stop_hz),
        i.points,
        i.step_hz * 1e-6
    );
    let _ = writeln!(
        w,
        "  AUT size D            {:.4} m ({})",
        i.aut_size_m,
        SizeSource::text(i.aut_size_source)
    );
    let _ = writeln!(
        w,
        "  AUT fractional bandw. {}",
        i.aut_fractional_bandwidth
            .map_or("not given (no ring-down check)".into(), |b| format!("{b}"))
    );
    let _ = writeln!(
        w,
        "  band window           {} (main lobe {:.3}/B)",
        i.band_window, i.band_window_mainlobe_bins
    );
    let _ = writeln!(
        w,
        "  bin step, sweep time  {} deg, {} s; cable delay {}",
        i.bin_step_deg,
        i.sweep_duration_s,
        ns(i.cable_delay_s)
    );

    let f = &r.far_field;
    let _ = writeln!(w, "\nFar field");
    let _ = writeln!(
        w,
        "  range {:.3} m, 2D²/λ at the top frequency {:.3} m (λ = {:.4} m): {}",
        f.range_m,
        f.far_field_m,
        f.top_wavelength_m,
        if f.meets_far_field { "met" } else { "NOT met" }
    );

    let p = &r.paths;
    let _ = writeln!(w, "\nPaths and echoes");
    let _ = writeln!(
        w,
        "  {:<44} {:>9} {:>12} {:>12} {:>9}",
        "source", "path (m)", "delay (ns)", "excess (ns)", "rel. (dB)"
    );
    let _ = writeln!(
        w,
        "  {:<44} {:>9.3} {:>12.3} {:>12.3} {:>9}",
        "direct",
        p.direct_path_m,
        p.direct_delay_s * 1e9,
        0.0,
        "0.0"
    );
    for e in &p.echoes {
        let label = if e.name.is_empty() {
            e.source.clone()
        } else {
            format!("{} ({})", e.source, e.name)
        };
        let label = if e.first {
            format!("{label} [first]")
        } else {
            label
        };
        let _ = writeln!(
            w,
            "  {:<44} {:>9.3} {:>12.3} {:>12.3} {:>9.1}",
            label,
            e.path_m,
            e.delay_s * 1e9,
            e.excess_delay_s * 1e9,
            e.relative_level_db
        );
    }
    if p.echoes.is_empty() {
        let _ = writeln!(w, "  (no planes or scatterers given)");
    }
    let _ = writeln!(
        w,
        "  rel.: echo field relative to the direct path between isotropic antennas"
    );

    let t = &r.time_axis;
    let _ = writeln!(w, "\nTime axis and aliasing");
    let _ = writeln!(
        w,
        "  bandwidth B {}, resolution 1/B {}, window main lobe {}",
        ghz(t.bandwidth_hz),
        ns(t.resolution_s),
        ns(t.mainlobe_s)
    );
    let _ = writeln!(
        w,
        "  alias-free range 1/Δf {} ({:.2} m of path)",
        ns(t.alias_free_s),
        t.alias_free_m
    );
    let _ = writeln!(
        w,
        "  longest plausible path {:.3} m ({}), arriving at {}: {}",
        t.longest_path_m,
        t.longest_source,
        ns(t.longest_delay_s),
        if t.all_alias_free {
            "every path is alias-free"
        } else {
            "SOME PATHS ALIAS"
        }
    );
    let _ = writeln!(
        w,
        "  largest alias-free step {:.4} MHz, fewest points {}",
        t.max_step_hz * 1e-6,
        t.min_points
    );

    let _ = writeln!(w, "\nRecommended gate");
    match &r.gate {
        Some(g) => {
            let _ = writeln!(
                w,
                "  centre {}, span {} ({} to {}), band window {}",
                ns(g.center_s),
                ns(g.span_s),
                ns(g.start_s),
                ns(g.stop_s),
                g.band_window
            );
        }
        None => {
            let _ = writeln!(w, "  none (see the findings)");
        }
    }
    if let Some(b) = r.bandwidth_needed_hz {
        let _ = writeln!(
            w,
            "  bandwidth this window needs to separate the first echo: {}",
            ghz(b)
        );
    }
    if let Some(rd) = r.ring_down_s {
        let _ = writeln!(w, "  estimated AUT ring-down {}", ns(rd));
    }

    let q = &r.rotation;
    let _ = writeln!(w, "\nRotation limit");
    let _ = writeln!(
        w,
        "  fastest rotation keeping smear under half a bin: {:.3} deg/s",
        q.max_rotation_deg_s
    );
    let _ = writeln!(
        w,
        "  planned: {}{}",
        q.planned_rotation_deg_s
            .map_or(String::new(), |v| format!("{v:.3} deg/s, ")),
        q.planned_source
    );

    let _ = writeln!(w, "\nFindings");
    if r.findings.is_empty() {
        let _ = writeln!(w, "  none: the set-up passes every check.");
    }
    for f in &r.findings {
        let _ = writeln!(w, "  - {}", f.text);
    }
    o
}

/// Runs the command.
pub fn run(args: Args) -> anyhow::Result<()> {
    let origin = args.scenario.display().to_string();
    let source = load_plan_source(&args.scenario)?;
    let overrides = Overrides {
        aut_size_m: args.aut_size_m,
        fractional_bandwidth: args.fractional_bandwidth,
        band_window: args.band_window,
        rotation_deg_s: args.rotation_deg_s,
    };
    let report = plan_report(&source, &origin, &overrides)?;
    if args.json {
        println!("{}", serde_json::to_string_pretty(&report)?);
    } else {
        print!("{}", render_text(&report));
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn size_rule_follows_the_model() {
        let base = |aut: &str| {
            format!(
                "[sweep]\nstart_hz = 1e9\nstop_hz = 3e9\npoints = 201\nsweep_duration_s = 0.1\n\
                 [range]\ndistance_m = 5\naut_height_m = 1\nprobe_height_m = 1\n{aut}"
            )
        };
        let size = |aut: &str, o: &Overrides| {
            aut_size_m(&parse_plan_source(&base(aut), "t").unwrap().scenario, o)
        };
        let none = Overrides::default();
        let ap = "[aut]\nkind = \"aperture\"\nwidth_m = 0.3\nheight_m = 0.4\n";
        assert_eq!(size(ap, &none), (0.5, SizeSource::ApertureDiagonal));
        let arr = "[aut]\nkind = \"array\"\nelements = 8\nspacing_m = 0.05\n";
        assert_eq!(size(arr, &none).1, SizeSource::ArrayLength);
        assert!((size(arr, &none).0 - 0.4).abs() < 1e-12);
        let dip = "[aut]\nkind = \"dipole\"\nlength_m = 0.05\naxis = \"z\"\n";
        assert_eq!(size(dip, &none), (0.05, SizeSource::DipoleLength));
        // Isotropic: effective area λ²/(4π), square diagonal λ/√(2π) (λ = c/3 GHz).
        let (d, src) = size("", &none);
        let lambda = SPEED_OF_LIGHT_M_S / 3e9;
        assert_eq!(src, SizeSource::EffectiveArea);
        assert!((d - lambda / (2.0 * std::f64::consts::PI).sqrt()).abs() < 1e-12);
        let with_plan = format!("{ap}[plan]\naut_size_m = 0.7\n");
        assert_eq!(size(&with_plan, &none), (0.7, SizeSource::PlanSection));
        let cli = Overrides {
            aut_size_m: Some(0.9),
            ..none
        };
        assert_eq!(size(&with_plan, &cli), (0.9, SizeSource::CommandLine));
    }

    #[test]
    fn errors_are_one_line_and_name_the_origin() {
        for text in [
            "[sweep\nstart_hz = 1",
            "[sweep]\nstart_hz = 1e9\n",
            "[sweep]\nstart_hz = 3e9\nstop_hz = 1e9\npoints = 3\nsweep_duration_s = 1\n\
             [range]\ndistance_m = 5\naut_height_m = 1\nprobe_height_m = 1\n",
            "[sweep]\nstart_hz = 1e9\nstop_hz = 3e9\npoints = 3\nsweep_duration_s = 1\n\
             [range]\ndistance_m = 5\naut_height_m = 1\nprobe_height_m = 1\n[plan]\nband_window = \"oval\"\n",
        ] {
            let e = format!("{:#}", parse_plan_source(text, "room.toml").unwrap_err());
            assert!(e.starts_with("room.toml: "), "{e}");
            assert!(!e.contains('\n'), "{e}");
        }
    }

    #[test]
    fn a_bad_band_window_is_refused_by_name() {
        let text = "[sweep]\nstart_hz = 1e9\nstop_hz = 3e9\npoints = 3\nsweep_duration_s = 1\n\
                    [range]\ndistance_m = 5\naut_height_m = 1\nprobe_height_m = 1\n\
                    [plan]\nband_window = \"kaiser:99\"\n";
        let e = format!("{:#}", parse_plan_source(text, "room.toml").unwrap_err());
        assert!(
            e.contains("plan.band_window") && e.contains("kaiser:99"),
            "{e}"
        );
        let good = text.replace("kaiser:99", "hann");
        assert!(parse_plan_source(&good, "room.toml").is_ok());
    }
}
