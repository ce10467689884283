//! The plan of `sweepgate plan` (the command itself is `crate::cli::plan`): reads a
//! scenario or a smaller plan file, turns it into the core planner's input
//! ([`sweepgate::plan::PlanInput`]), runs [`sweepgate::plan::plan`] and builds the
//! [`PlanReport`] that `crate::output::plan_text` prints as a table or JSON.
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
//! The report's JSON fields are listed in [`crate::output::plan_text`].

use std::path::Path;

use anyhow::{anyhow, Context};
use sweepgate::plan::{
    self, Finding, PathSource, Plan, PlanInput, Point, Scatterer as CoreScatterer,
    SPEED_OF_LIGHT_M_S,
};
use sweepgate::window::WindowKind;

use crate::model::scenario::{
    Antenna, Mode, Pattern, PlanSettings, PlaneSpec, Positioner, Range, Scatterer, Scenario, Sweep,
};
use crate::pipeline::options::{default_band_window, format_window, parse_window};

// The report's fields live with the table that prints them (`output/plan_text.rs`); they
// are re-exported here unchanged so that the plan's pieces keep one path.
pub use crate::output::plan_text::{
    EchoReport, FarFieldConditions, FarFieldReport, FileKind, FindingReport, GateReport,
    InputsReport, PathsReport, PlanReport, RotationReport, SizeSource, TimeAxisReport,
};

/// The cautions every plan carries, one sentence each.
pub const CAUTIONS: [&str; 3] = [
    "Caution: a transmitting AUT or probe can exceed RF exposure limits near its aperture; keep people out of the beam and away from the aperture while transmitting.",
    "Caution: the turntable and positioner are moving machinery; keep clear while they move and use the lab's stop and interlock arrangements.",
    "This plan concerns the measurement set-up only; follow local regulations and the lab's licensed practice.",
];

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
///
/// A TOML error is rendered by `toml_one_line` (message and position on one line) rather
/// than kept as a cause: the toml crate's own message spans several lines with a snippet.
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

fn finding_kind(f: &Finding) -> &'static str {
    match f {
        Finding::BelowFarField { .. } => "below_far_field",
        Finding::NotFarFromAntenna { .. } => "not_far_from_antenna",
        Finding::TooFewWavelengths { .. } => "too_few_wavelengths",
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

/// What the planner is given besides the room, each chosen from the command line, the
/// file or the default by the rules in the module documentation.
struct Choices {
    size_m: f64,
    size_source: SizeSource,
    band_window: WindowKind,
    fractional_bandwidth: Option<f64>,
    rotation_deg_s: Option<f64>,
    rotation_source: &'static str,
}

fn choices(source: &PlanSource, origin: &str, overrides: &Overrides) -> anyhow::Result<Choices> {
    let s = &source.scenario;
    let (size_m, size_source) = aut_size_m(s, overrides);
    let band_window = match (overrides.band_window, &s.plan.band_window) {
        (Some(w), _) => w,
        // The spelling error is a sentence of our own, with no cause behind it.
        (None, Some(text)) => parse_window(text).map_err(|e| anyhow!("{origin}: {e}"))?,
        (None, None) => default_band_window(),
    };
    let (rotation_deg_s, rotation_source) = match (overrides.rotation_deg_s, source.kind) {
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
    Ok(Choices {
        size_m,
        size_source,
        band_window,
        fractional_bandwidth: overrides
            .fractional_bandwidth
            .or(s.plan.aut_fractional_bandwidth),
        rotation_deg_s,
        rotation_source,
    })
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
        .with_context(|| format!("{origin}: sweep is not a usable grid"))?;
    let c = choices(source, origin, overrides)?;
    let room = room_geometry(s);
    let input = PlanInput {
        grid,
        aut_size_m: c.size_m,
        aut: room.aut,
        probe: room.probe,
        planes: &room.planes,
        scatterers: &room.scatterers,
        band_window: c.band_window,
        bin_step_deg: s.bin_width_deg(),
        sweep_duration_s: s.sweep.sweep_duration_s,
        cable_delay_s: s.range.cable_delay_s,
        aut_fractional_bandwidth: c.fractional_bandwidth,
        longest_path_m: s.plan.longest_path_m,
        rotation_deg_s: c.rotation_deg_s,
    };
    let p: Plan = plan::plan(&input).with_context(|| format!("{origin}: cannot plan"))?;
    Ok(PlanReport {
        file: origin.to_string(),
        file_kind: source.kind,
        name: s.name.clone(),
        cautions: CAUTIONS.iter().map(|c| c.to_string()).collect(),
        inputs: inputs_report(&input, s, &c),
        far_field: FarFieldReport {
            top_wavelength_m: p.top_wavelength_m,
            far_field_m: p.far_field_m,
            range_m: p.range_m,
            meets_far_field: p.meets_far_field,
            conditions: [p.far_field_low, p.far_field_high]
                .iter()
                .map(FarFieldConditions::of)
                .collect(),
        },
        paths: PathsReport {
            direct_path_m: p.range_m,
            direct_delay_s: p.direct_delay_s,
            echoes: echo_reports(s, &p),
        },
        time_axis: time_axis_report(s, &p),
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
            planned_rotation_deg_s: c.rotation_deg_s,
            planned_source: c.rotation_source.to_string(),
            within_limit: c.rotation_deg_s.map(|w| w <= p.max_rotation_deg_s),
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

fn inputs_report(input: &PlanInput<'_>, s: &Scenario, c: &Choices) -> InputsReport {
    let grid = &input.grid;
    InputsReport {
        start_hz: grid.start_hz(),
        stop_hz: grid.stop_hz(),
        points: grid.points(),
        step_hz: grid.step_hz(),
        aut_size_m: c.size_m,
        aut_size_source: c.size_source,
        aut_fractional_bandwidth: c.fractional_bandwidth,
        band_window: format_window(&c.band_window),
        band_window_mainlobe_bins: c.band_window.mainlobe_width(),
        aut_position_m: xyz(&input.aut),
        probe_position_m: xyz(&input.probe),
        bin_step_deg: s.bin_width_deg(),
        sweep_duration_s: s.sweep.sweep_duration_s,
        cable_delay_s: s.range.cable_delay_s,
        rotation_deg_s: c.rotation_deg_s,
        longest_path_m: s.plan.longest_path_m,
    }
}

/// The echoes in the planner's order, with their names from the file and their level
/// relative to the direct path (a plane echo's reflection times R/L).
fn echo_reports(s: &Scenario, p: &Plan) -> Vec<EchoReport> {
    let plane_name = |i: u32| s.planes.get(i as usize).map(|x| x.name.clone());
    let scatterer_name = |i: u32| s.scatterers.get(i as usize).map(|x| x.name.clone());
    p.echoes
        .iter()
        .enumerate()
        .map(|(i, e)| {
            let (name, rel) = match e.source {
                PathSource::Plane { index } => (
                    plane_name(index).unwrap_or_default(),
                    e.reflection * p.range_m / e.path_m,
                ),
                PathSource::Scatterer { index } => {
                    (scatterer_name(index).unwrap_or_default(), e.reflection)
                }
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
        .collect()
}

fn time_axis_report(s: &Scenario, p: &Plan) -> TimeAxisReport {
    TimeAxisReport {
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
    }
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
