//! `sweepgate rcs`: read the target, background and reference measurements, process them
//! ([`crate::pipeline::rcs`]) and write the report: `pattern.csv` (RCS in dBsm with the raw
//! and background-subtracted levels at the pattern frequencies), `profiles.svg` (the
//! down-range profile at each angle), `image.svg` (the turntable image, resolution stated)
//! and `summary.json` (the calibration, the gate, the residual background, the image).

use std::fmt::Write;
use std::path::{Path, PathBuf};

use anyhow::{bail, Context};
use serde_json::{json, Value};
use sweepgate::plan::SPEED_OF_LIGHT_M_S;
use sweepgate::rcs::Zone;

use crate::formats::files::{check_output_dir, refuse_if_same_file, write_set};
use crate::formats::rcs_calibration;
use crate::model::rcs_targets::ReferenceTarget;
use crate::output::colour_map::{colour_map_svg, ColourMap};
use crate::pipeline::options::{
    default_band_window, describe_window, GateOptions, DEFAULT_GATE_SHAPE,
};
use crate::pipeline::rcs::{self, BackgroundInput, RcsGate, RcsResult, RcsSettings};
use crate::pipeline::rcs_image::{self, Image, Profiles};
use crate::pipeline::rcs_input::{self, RcsFiles};
use crate::pipeline::rcs_mark;

/// Pixels per side of the image.
pub const IMAGE_PIXELS: usize = 81;

/// The target zone as the user gave it (`--zone-distance-m` and friends).
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct ZoneOptions {
    /// Distance from the antennas to the zone centre, m.
    pub distance_m: Option<f64>,
    /// Zone diameter, m.
    pub size_m: Option<f64>,
    /// Distance between the transmit and receive antennas, m (0: one antenna, S11).
    pub separation_m: f64,
    /// Delay from the VNA's time zero to the antennas, ns.
    pub time_zero_ns: f64,
    /// Distance from the antennas to the mount's strongest echo (behind or before the
    /// zone), m; checked to lie outside the gate.
    pub mount_distance_m: Option<f64>,
}

/// What `sweepgate rcs` was asked to do.
#[derive(Debug, Clone, PartialEq)]
pub struct RcsOptions {
    /// Manifest of the target's per-angle Touchstone files, or a recording.
    pub target: PathBuf,
    /// Background: one Touchstone file, a manifest or a recording.
    pub background: PathBuf,
    /// The reference target's measurement.
    pub reference: PathBuf,
    /// The reference's background (default: the background's sweep nearest 0°).
    pub reference_background: Option<PathBuf>,
    /// What the reference target is.
    pub reference_target: ReferenceTarget,
    /// The gate and pattern options shared with `process`.
    pub gate: GateOptions,
    /// The target zone.
    pub zone: ZoneOptions,
    /// Report folder.
    pub out: PathBuf,
    /// Also write a copy of the target's recording carrying the calibration (kind 9), for
    /// `replay` in dBsm.
    pub calibrated_recording: Option<PathBuf>,
    /// Also write the calibration as a file (`formats::rcs_calibration`), for `acquire
    /// --rcs-calibration` to show the next scans in dBsm as they run.
    pub save_calibration: Option<PathBuf>,
}

fn ns(s: f64) -> f64 {
    s * 1e9
}

/// The gate from the options: the given centre and span, else the target zone's.
fn gate_choice(opts: &RcsOptions) -> anyhow::Result<RcsGate> {
    let g = &opts.gate;
    match (g.gate_center_ns, g.gate_span_ns) {
        (Some(c), Some(s)) => {
            return Ok(RcsGate::Given {
                center_s: c * 1e-9,
                span_s: s * 1e-9,
            })
        }
        (None, None) => {}
        _ => bail!("--gate-center-ns and --gate-span-ns go together (or neither: the gate from the target zone)"),
    }
    let z = &opts.zone;
    let (Some(distance_m), Some(size_m)) = (z.distance_m, z.size_m) else {
        bail!("no gate: give --zone-distance-m and --zone-size-m (or --gate-center-ns and --gate-span-ns)");
    };
    let zone = Zone {
        time_zero_s: z.time_zero_ns * 1e-9,
        distance_m,
        size_m,
        separation_m: z.separation_m,
    };
    // The coupling: straight from one antenna to the other (one antenna: its own mismatch).
    let mut echoes_s = vec![zone.time_zero_s + z.separation_m / SPEED_OF_LIGHT_M_S];
    if let Some(m) = z.mount_distance_m {
        echoes_s.push(zone.time_zero_s + 2.0 * m / SPEED_OF_LIGHT_M_S);
    }
    Ok(RcsGate::Zone { zone, echoes_s })
}

/// Refuses, before any work, a `--save-calibration` or `--calibrated-recording` file that is
/// one of the four measurements read.
fn refuse_outputs_over_inputs(opts: &RcsOptions) -> anyhow::Result<()> {
    let mut inputs = vec![
        opts.target.as_path(),
        opts.background.as_path(),
        opts.reference.as_path(),
    ];
    inputs.extend(opts.reference_background.as_deref());
    let outputs = [
        ("--save-calibration", &opts.save_calibration),
        ("--calibrated-recording", &opts.calibrated_recording),
    ];
    for (option, out) in outputs {
        if let Some(out) = out {
            refuse_if_same_file(out, &inputs).context(option)?;
        }
    }
    Ok(())
}

/// Reads, processes and writes the report; returns the files written.
pub fn run(opts: &RcsOptions) -> anyhow::Result<Vec<PathBuf>> {
    refuse_outputs_over_inputs(opts)?;
    let choices = opts.gate.choices()?;
    let files = RcsFiles {
        target: &opts.target,
        background: Some(&opts.background),
        reference: &opts.reference,
        reference_background: opts.reference_background.as_deref(),
    };
    let input = rcs_input::read(&files, opts.reference_target)?;
    let centre_hz = (input.grid.start_hz() + input.grid.stop_hz()) / 2.0;
    let settings = RcsSettings {
        gate: gate_choice(opts)?,
        band_window: choices.band_window.unwrap_or_else(default_band_window),
        gate_shape: choices.gate_shape.unwrap_or(DEFAULT_GATE_SHAPE),
        frequencies_hz: choices.frequencies_hz.unwrap_or_else(|| vec![centre_hz]),
    };
    let result = rcs::process(&input, &settings)?;
    let half_m = match &result.gate {
        Some(g) => g.span_s * SPEED_OF_LIGHT_M_S / 4.0,
        None => 1.0,
    };
    let profiles = rcs_image::profiles(&result, half_m * 1.5);
    let image = rcs_image::image(&result, &profiles, half_m, IMAGE_PIXELS);
    let background = match &input.background {
        BackgroundInput::One(_) => "one sweep for every angle",
        BackgroundInput::PerAngle(_) => "one sweep per angle",
        BackgroundInput::Off => "none",
    };
    let report = Report {
        opts,
        settings: &settings,
        result: &result,
        profiles: &profiles,
        image: &image,
        background,
    };
    let made = report.files()?;
    check_output_dir(&opts.out)?;
    let set: Vec<(PathBuf, Vec<u8>)> = made
        .into_iter()
        .map(|(n, b)| (opts.out.join(n), b))
        .collect();
    write_set(&set)?;
    let mut written: Vec<PathBuf> = set.into_iter().map(|(p, _)| p).collect();
    if opts.calibrated_recording.is_some() || opts.save_calibration.is_some() {
        let cal = rcs_mark::calibration(&input, &settings, &result)?;
        if let Some(path) = &opts.save_calibration {
            rcs_calibration::write(path, &cal).context("--save-calibration")?;
            written.push(path.clone());
        }
        if let Some(path) = &opts.calibrated_recording {
            rcs_mark::write(&opts.target, cal, path)?;
            written.push(path.clone());
        }
    }
    Ok(written)
}

/// Everything the report is made from.
struct Report<'a> {
    opts: &'a RcsOptions,
    settings: &'a RcsSettings,
    result: &'a RcsResult,
    profiles: &'a Profiles,
    image: &'a Image,
    background: &'static str,
}

impl Report<'_> {
    fn files(&self) -> anyhow::Result<Vec<(String, Vec<u8>)>> {
        let summary =
            serde_json::to_string_pretty(&self.summary()).context("making summary.json")?;
        Ok(vec![
            ("pattern.csv".into(), pattern_csv(self.result).into_bytes()),
            ("profiles.svg".into(), self.profiles_svg().into_bytes()),
            ("image.svg".into(), self.image_svg().into_bytes()),
            ("summary.json".into(), (summary + "\n").into_bytes()),
        ])
    }

    fn profiles_svg(&self) -> String {
        let p = self.profiles;
        // Every third sample: still over three per resolution cell, a third of the file.
        let every = |row: &[f64]| row.iter().step_by(3).cloned().collect::<Vec<f64>>();
        let power: Vec<Vec<f64>> = p
            .values
            .iter()
            .map(|row| every(&row.iter().map(|v| rcs::dbsm(*v)).collect::<Vec<_>>()))
            .collect();
        let range_m = every(&p.range_m);
        let top = power
            .iter()
            .flatten()
            .cloned()
            .fold(-300.0, f64::max)
            .ceil();
        let notes = vec![
            format!(
                "calibrated, dBsm per range cell; down-range resolution c/(2B) = {:.1} mm",
                p.resolution_m * 1e3
            ),
            "range 0 at the turntable centre, positive away from the antennas".to_string(),
        ];
        colour_map_svg(&ColourMap {
            title: "Down-range profile at each angle",
            notes: &notes,
            x_label: "down-range (m)",
            x: &range_m,
            y_label: "turntable angle (deg)",
            y: &self.result.angles_deg,
            levels: &power,
            floor_db: top - 50.0,
            top_db: top,
        })
    }

    fn image_svg(&self) -> String {
        let im = self.image;
        let notes = vec![
            format!(
                "resolution: down-range c/(2B) = {:.1} mm, cross-range λc/(2Δθ) = {:.1} mm",
                im.down_range_resolution_m * 1e3,
                im.cross_range_resolution_m * 1e3
            ),
            "dB relative to the image's peak; turntable frame at 0°".to_string(),
        ];
        colour_map_svg(&ColourMap {
            title: "Turntable image of the target",
            notes: &notes,
            x_label: "down-range x (m), away from the antennas",
            x: &im.x_m,
            y_label: "cross-range y (m)",
            y: &im.y_m,
            levels: &im.db,
            floor_db: -40.0,
            top_db: 0.0,
        })
    }

    fn summary(&self) -> Value {
        let r = self.result;
        let calibration: Vec<Value> = r
            .frequencies
            .iter()
            .map(|&(k, f)| {
                let c = r.calibration[k];
                json!({
                    "frequency_hz": f,
                    "factor_db": 20.0 * c.norm().log10(),
                    "factor_phase_deg": c.arg().to_degrees(),
                    "reference_rcs_dbsm": r.reference_dbsm[k],
                })
            })
            .collect();
        json!({
            "target": self.opts.target,
            "reference": {
                "measurement": self.opts.reference,
                "target": describe_target(&self.opts.reference_target),
            },
            "calibration": calibration,
            "gate": self.gate_json(),
            "background": self.background,
            "residual_background_dbsm": r.residual_background_dbsm,
            "image": {
                "down_range_resolution_m": self.image.down_range_resolution_m,
                "cross_range_resolution_m": self.image.cross_range_resolution_m,
                "pixels": IMAGE_PIXELS,
                "half_width_m": self.image.x_m.last(),
            },
            "angles": r.angles_deg.len(),
            "points_per_sweep": r.grid.points(),
            "caution": "A transmitting antenna can exceed RF exposure limits near its aperture and a positioner is moving machinery: follow local regulations and the lab's licensed practice.",
        })
    }

    fn gate_json(&self) -> Value {
        let origin = match &self.settings.gate {
            RcsGate::Zone { .. } => "the target zone",
            RcsGate::Given { .. } => "the command line",
            RcsGate::Off => "none",
        };
        let echoes: Vec<f64> = match &self.settings.gate {
            RcsGate::Zone { echoes_s, .. } => echoes_s.iter().map(|&t| ns(t)).collect(),
            _ => Vec::new(),
        };
        json!({
            "from": origin,
            "center_ns": self.result.gate.map(|g| ns(g.center_s)),
            "span_ns": self.result.gate.map(|g| ns(g.span_s)),
            "band_window": describe_window(&self.settings.band_window),
            "gate_shape": describe_window(&self.settings.gate_shape),
            "echoes_checked_outside_ns": echoes,
        })
    }
}

/// The reference target in words and sizes.
fn describe_target(t: &ReferenceTarget) -> Value {
    match *t {
        ReferenceTarget::Sphere { diameter_m } => {
            json!({"kind": "sphere (Mie series)", "diameter_m": diameter_m})
        }
        ReferenceTarget::Plate { area_m2 } => {
            json!({"kind": "flat plate at normal incidence", "area_m2": area_m2})
        }
        ReferenceTarget::Dihedral { width_m, length_m } => {
            json!({"kind": "dihedral", "width_m": width_m, "length_m": length_m})
        }
        ReferenceTarget::Trihedral { edge_m } => {
            json!({"kind": "triangular trihedral", "edge_m": edge_m})
        }
    }
}

/// `pattern.csv`: one row per angle and pattern frequency.
pub fn pattern_csv(r: &RcsResult) -> String {
    let mut s = String::from("angle_deg,frequency_hz,rcs_dbsm,raw_db,background_subtracted_db\n");
    for (i, a) in r.angles_deg.iter().enumerate() {
        for (j, &(k, f)) in r.frequencies.iter().enumerate() {
            let _ = writeln!(
                s,
                "{a},{f},{:.4},{:.4},{:.4}",
                rcs::dbsm(r.calibrated[i][k]),
                r.raw_db[i][j],
                r.subtracted_db[i][j]
            );
        }
    }
    s
}

/// The report folder's default: `<target stem>-rcs/` beside the target manifest.
pub fn default_out(target: &Path) -> PathBuf {
    let stem = target
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "scan".into());
    target.with_file_name(format!("{stem}-rcs"))
}
