//! The plan as people read it: the figures of `sweepgate plan` ([`PlanReport`]) and the
//! readable table ([`render_text`]). `crate::pipeline::plan` fills the report from the core planner.
//!
//! JSON (`--json`, the [`PlanReport`] fields; every number carries its unit in its name):
//! `file`, `file_kind` (`scenario`/`plan_file`), `name`, `cautions` (sentences), `inputs`
//! (`start_hz`, `stop_hz`, `points`, `step_hz`, `aut_size_m`, `aut_size_source`,
//! `aut_fractional_bandwidth`, `band_window`, `band_window_mainlobe_bins`, `aut_position_m`,
//! `probe_position_m`, `bin_step_deg`, `sweep_duration_s`, `cable_delay_s`, `rotation_deg_s`,
//! `longest_path_m`), `far_field` (`top_wavelength_m`, `far_field_m`, `range_m`,
//! `meets_far_field`, `conditions`: `frequency_hz`, `wavelength_m`,
//! `two_d_squared_over_lambda_m`, `ten_d_m`, `ten_lambda_m`, `met` at the lowest and highest
//! frequency), `paths` (`direct_path_m`, `direct_delay_s`, `echoes`: `source`,
//! `name`, `path_m`, `delay_s`, `excess_delay_s`, `reflection`, `relative_level_db`,
//! `bounce_point_m`, `first`), `time_axis` (`bandwidth_hz`, `resolution_s`, `mainlobe_s`,
//! `alias_free_s`, `alias_free_m`, `longest_path_m`, `longest_delay_s`, `longest_source`,
//! `all_alias_free`, `max_step_hz`, `min_points`), `gate` (`center_s`, `span_s`, `start_s`,
//! `stop_s`, `band_window`; `null` when none), `bandwidth_needed_hz`, `rotation`
//! (`max_rotation_deg_s`, `planned_rotation_deg_s`, `planned_source`, `within_limit`),
//! `ring_down_s`, `findings` (`kind`, `text`).

use std::fmt::Write as _;

use serde::Serialize;

/// Which kind of file was read.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum FileKind {
    /// A whole scenario.
    Scenario,
    /// A plan file (no positioner).
    PlanFile,
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
    /// The source as words, for the table.
    pub fn text(self) -> &'static str {
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
    /// Whether the range meets every far-field condition at both band edges.
    pub meets_far_field: bool,
    /// The conditions at the lowest and the highest frequency.
    pub conditions: Vec<FarFieldConditions>,
}

/// The far-field conditions at one frequency: R ≥ 2D²/λ, R ≥ 10·D, R ≥ 10·λ (Balanis,
/// Antenna Theory, §2.2.4; the factor 10 for "≫" is common practice, no source).
#[derive(Debug, Clone, Serialize)]
pub struct FarFieldConditions {
    /// The frequency.
    pub frequency_hz: f64,
    /// Its wavelength.
    pub wavelength_m: f64,
    /// 2D²/λ.
    pub two_d_squared_over_lambda_m: f64,
    /// 10·D.
    pub ten_d_m: f64,
    /// 10·λ.
    pub ten_lambda_m: f64,
    /// Whether the range meets all three.
    pub met: bool,
}

impl FarFieldConditions {
    /// From the core's check.
    pub fn of(c: &sweepgate::plan::FarFieldCheck) -> Self {
        Self {
            frequency_hz: c.frequency_hz,
            wavelength_m: c.wavelength_m,
            two_d_squared_over_lambda_m: c.rayleigh_m,
            ten_d_m: c.size_m,
            ten_lambda_m: c.wavelengths_m,
            met: c.met,
        }
    }
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
    /// Short name: `below_far_field`, `not_far_from_antenna`, `too_few_wavelengths`,
    /// `no_echoes`, `not_separable`, `aliased`,
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

fn ns(t_s: f64) -> String {
    format!("{:.3} ns", t_s * 1e9)
}

fn ghz(f_hz: f64) -> String {
    format!("{:.4} GHz", f_hz * 1e-9)
}

/// The readable table: a title with the cautions, then one section per part of the report.
pub fn render_text(r: &PlanReport) -> String {
    let mut o = String::new();
    let _ = writeln!(o, "Measurement plan: {} ({})", r.name, r.file);
    for c in &r.cautions {
        let _ = writeln!(o, "{c}");
    }
    let sections: [fn(&mut String, &PlanReport) -> std::fmt::Result; 7] = [
        inputs, far_field, paths, time_axis, gate, rotation, findings,
    ];
    for section in sections {
        // Writing to a String cannot fail.
        let _ = section(&mut o, r);
    }
    o
}

fn inputs(w: &mut String, r: &PlanReport) -> std::fmt::Result {
    let i = &r.inputs;
    writeln!(w, "\nInputs")?;
    writeln!(
        w,
        "  sweep                 {} to {}, {} points, step {:.4} MHz",
        ghz(i.start_hz),
        ghz(i.stop_hz),
        i.points,
        i.step_hz * 1e-6
    )?;
    writeln!(
        w,
        "  AUT size D            {:.4} m ({})",
        i.aut_size_m,
        SizeSource::text(i.aut_size_source)
    )?;
    writeln!(
        w,
        "  AUT fractional bandw. {}",
        i.aut_fractional_bandwidth
            .map_or("not given (no ring-down check)".into(), |b| format!("{b}"))
    )?;
    writeln!(
        w,
        "  band window           {} (main lobe {:.3}/B)",
        i.band_window, i.band_window_mainlobe_bins
    )?;
    writeln!(
        w,
        "  bin step, sweep time  {} deg, {} s; cable delay {}",
        i.bin_step_deg,
        i.sweep_duration_s,
        ns(i.cable_delay_s)
    )
}

fn far_field(w: &mut String, r: &PlanReport) -> std::fmt::Result {
    let f = &r.far_field;
    writeln!(w, "\nFar field")?;
    writeln!(
        w,
        "  range {:.3} m, 2D²/λ at the top frequency {:.3} m (λ = {:.4} m); all conditions: {}",
        f.range_m,
        f.far_field_m,
        f.top_wavelength_m,
        if f.meets_far_field { "met" } else { "NOT met" }
    )?;
    for c in &f.conditions {
        writeln!(
            w,
            "  at {:.3} MHz: 2D²/λ {:.3} m, 10·D {:.3} m, 10·λ {:.3} m: {}",
            c.frequency_hz / 1e6,
            c.two_d_squared_over_lambda_m,
            c.ten_d_m,
            c.ten_lambda_m,
            if c.met { "met" } else { "NOT met" }
        )?;
    }
    Ok(())
}

fn paths(w: &mut String, r: &PlanReport) -> std::fmt::Result {
    let p = &r.paths;
    writeln!(w, "\nPaths and echoes")?;
    writeln!(
        w,
        "  {:<44} {:>9} {:>12} {:>12} {:>9}",
        "source", "path (m)", "delay (ns)", "excess (ns)", "rel. (dB)"
    )?;
    writeln!(
        w,
        "  {:<44} {:>9.3} {:>12.3} {:>12.3} {:>9}",
        "direct",
        p.direct_path_m,
        p.direct_delay_s * 1e9,
        0.0,
        "0.0"
    )?;
    for e in &p.echoes {
        let mut label = if e.name.is_empty() {
            e.source.clone()
        } else {
            format!("{} ({})", e.source, e.name)
        };
        if e.first {
            label.push_str(" [first]");
        }
        writeln!(
            w,
            "  {:<44} {:>9.3} {:>12.3} {:>12.3} {:>9.1}",
            label,
            e.path_m,
            e.delay_s * 1e9,
            e.excess_delay_s * 1e9,
            e.relative_level_db
        )?;
    }
    if p.echoes.is_empty() {
        writeln!(w, "  (no planes or scatterers given)")?;
    }
    writeln!(
        w,
        "  rel.: echo field relative to the direct path between isotropic antennas"
    )
}

fn time_axis(w: &mut String, r: &PlanReport) -> std::fmt::Result {
    let t = &r.time_axis;
    writeln!(w, "\nTime axis and aliasing")?;
    writeln!(
        w,
        "  bandwidth B {}, resolution 1/B {}, window main lobe {}",
        ghz(t.bandwidth_hz),
        ns(t.resolution_s),
        ns(t.mainlobe_s)
    )?;
    writeln!(
        w,
        "  alias-free range 1/Δf {} ({:.2} m of path)",
        ns(t.alias_free_s),
        t.alias_free_m
    )?;
    writeln!(
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
    )?;
    writeln!(
        w,
        "  largest alias-free step {:.4} MHz, fewest points {}",
        t.max_step_hz * 1e-6,
        t.min_points
    )
}

fn gate(w: &mut String, r: &PlanReport) -> std::fmt::Result {
    writeln!(w, "\nRecommended gate")?;
    match &r.gate {
        Some(g) => writeln!(
            w,
            "  centre {}, span {} ({} to {}), band window {}",
            ns(g.center_s),
            ns(g.span_s),
            ns(g.start_s),
            ns(g.stop_s),
            g.band_window
        )?,
        None => writeln!(w, "  none (see the findings)")?,
    }
    if let Some(b) = r.bandwidth_needed_hz {
        writeln!(
            w,
            "  bandwidth this window needs to separate the first echo: {}",
            ghz(b)
        )?;
    }
    if let Some(rd) = r.ring_down_s {
        writeln!(w, "  estimated AUT ring-down {}", ns(rd))?;
    }
    Ok(())
}

fn rotation(w: &mut String, r: &PlanReport) -> std::fmt::Result {
    let q = &r.rotation;
    writeln!(w, "\nRotation limit")?;
    writeln!(
        w,
        "  fastest rotation keeping smear under half a bin: {:.3} deg/s",
        q.max_rotation_deg_s
    )?;
    writeln!(
        w,
        "  planned: {}{}",
        q.planned_rotation_deg_s
            .map_or(String::new(), |v| format!("{v:.3} deg/s, ")),
        q.planned_source
    )
}

fn findings(w: &mut String, r: &PlanReport) -> std::fmt::Result {
    writeln!(w, "\nFindings")?;
    if r.findings.is_empty() {
        writeln!(w, "  none: the set-up passes every check.")?;
    }
    for f in &r.findings {
        writeln!(w, "  - {}", f.text)?;
    }
    Ok(())
}
