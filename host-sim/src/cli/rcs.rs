//! `sweepgate rcs`: its arguments and the call (see [`crate::pipeline::rcs_command`]).

use std::path::PathBuf;

use anyhow::bail;

use crate::cli::gate::GateArgs;
use crate::model::rcs_targets::ReferenceTarget;
use crate::pipeline::rcs_command::{self, RcsOptions, ZoneOptions};

/// Options of `sweepgate rcs`.
#[derive(clap::Args, Debug, Clone)]
#[command(group(clap::ArgGroup::new("reference_target").required(true).args(
    ["sphere_diameter_m", "plate_area_m2", "dihedral_m", "trihedral_edge_m"]
)))]
pub struct Args {
    /// The target on the turntable: a manifest CSV (`angle_deg,file`) of per-angle 1- or
    /// 2-port Touchstone files (S11 or S21), or a recording (each sweep at the angle of
    /// its position records).
    pub target: PathBuf,
    /// The empty zone, mount in place: one Touchstone file for every angle, or a manifest
    /// or recording with a sweep at each of the target's angles.
    #[arg(long)]
    pub background: PathBuf,
    /// The reference target measured in the zone (Touchstone file, or a manifest or
    /// recording whose sweep nearest 0° is taken).
    #[arg(long)]
    pub reference: PathBuf,
    /// The background of the reference measurement (default: the background's sweep
    /// nearest 0°).
    #[arg(long)]
    pub reference_background: Option<PathBuf>,
    /// The reference is a metal sphere of this diameter, m (RCS by the Mie series).
    #[arg(long)]
    pub sphere_diameter_m: Option<f64>,
    /// The reference is a flat metal plate of this area, m², at normal incidence.
    #[arg(long)]
    pub plate_area_m2: Option<f64>,
    /// The reference is a right-angle dihedral: face width across the fold and fold
    /// length, m, as `WIDTH,LENGTH`.
    #[arg(long, value_name = "WIDTH,LENGTH")]
    pub dihedral_m: Option<String>,
    /// The reference is a triangular trihedral corner of this edge length, m.
    #[arg(long)]
    pub trihedral_edge_m: Option<f64>,
    /// Gate and pattern options (without a gate, the gate is made from the target zone).
    #[command(flatten)]
    pub gate: GateArgs,
    /// Distance from the antennas to the target zone's centre (the turntable axis), m.
    #[arg(long)]
    pub zone_distance_m: Option<f64>,
    /// Diameter of the target zone, m.
    #[arg(long)]
    pub zone_size_m: Option<f64>,
    /// Distance between the transmit and receive antennas, m (0 for one antenna, S11).
    #[arg(long, default_value_t = 0.0)]
    pub antenna_separation_m: f64,
    /// Delay from the VNA's time zero to the antennas (cables, feeds), ns.
    #[arg(long, default_value_t = 0.0)]
    pub time_zero_ns: f64,
    /// Distance from the antennas to the mount's strongest echo, m; the zone's gate must
    /// keep it out.
    #[arg(long)]
    pub mount_distance_m: Option<f64>,
    /// Report folder (default: `<target stem>-rcs/` next to the target manifest).
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// Also write this copy of the target's recording (the target must be one) carrying
    /// the calibration, the gate and the background (recording kind 9): `replay` shows it
    /// in dBsm.
    #[arg(long)]
    pub calibrated_recording: Option<PathBuf>,
    /// Also write the calibration (factor per pattern frequency, the gate, the bin width,
    /// the background per angle) to this file: `acquire --rcs-calibration FILE` then shows
    /// the next scans of the same range in dBsm as they run.
    #[arg(long, value_name = "FILE")]
    pub save_calibration: Option<PathBuf>,
}

/// The reference target the options name.
fn reference_target(a: &Args) -> anyhow::Result<ReferenceTarget> {
    if let Some(d) = a.sphere_diameter_m {
        return Ok(ReferenceTarget::Sphere { diameter_m: d });
    }
    if let Some(area) = a.plate_area_m2 {
        return Ok(ReferenceTarget::Plate { area_m2: area });
    }
    if let Some(e) = a.trihedral_edge_m {
        return Ok(ReferenceTarget::Trihedral { edge_m: e });
    }
    match a.dihedral_m.as_deref().map(|t| t.split_once(',')) {
        Some(Some((w, l))) => match (w.trim().parse(), l.trim().parse()) {
            (Ok(width_m), Ok(length_m)) => Ok(ReferenceTarget::Dihedral { width_m, length_m }),
            _ => bail!("--dihedral-m: expected two numbers WIDTH,LENGTH in m"),
        },
        _ => bail!("--dihedral-m: expected WIDTH,LENGTH in m"),
    }
}

/// Runs the command.
pub fn run(a: Args) -> anyhow::Result<()> {
    let out = a
        .out
        .clone()
        .unwrap_or_else(|| rcs_command::default_out(&a.target));
    let written = rcs_command::run(&RcsOptions {
        reference_target: reference_target(&a)?,
        target: a.target,
        background: a.background,
        reference: a.reference,
        reference_background: a.reference_background,
        gate: a.gate.into(),
        zone: ZoneOptions {
            distance_m: a.zone_distance_m,
            size_m: a.zone_size_m,
            separation_m: a.antenna_separation_m,
            time_zero_ns: a.time_zero_ns,
            mount_distance_m: a.mount_distance_m,
        },
        out,
        calibrated_recording: a.calibrated_recording,
        save_calibration: a.save_calibration,
    })?;
    for p in written {
        println!("wrote {}", p.display());
    }
    Ok(())
}
