//! `sweepgate acquire`: its arguments and the call (see [`crate::link::acquire`]).

use std::path::PathBuf;

use crate::cli::gate::GateArgs;
use crate::link::acquire::{self, Options};
use crate::link::drive::{DriveOptions, Plan};

/// `MIN:MAX` in degrees.
fn parse_range(s: &str) -> anyhow::Result<(f64, f64)> {
    let (a, b) = s
        .split_once(':')
        .ok_or_else(|| anyhow::anyhow!("--angle-range {s:?}: expected MIN:MAX"))?;
    let num = |x: &str| {
        use anyhow::Context;
        x.trim()
            .parse::<f64>()
            .with_context(|| format!("--angle-range {s:?}: {x:?} is not a number"))
    };
    Ok((num(a)?, num(b)?))
}

/// Options of `sweepgate acquire`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Profile file (TOML) with the strings to send (default: the built-in simulated one).
    #[arg(long)]
    pub profile: Option<PathBuf>,
    /// Instrument address, HOST:PORT.
    #[arg(long)]
    pub instrument: String,
    /// Positioner line server, HOST:PORT.
    #[arg(long, conflicts_with = "positioner_sim")]
    pub positioner: Option<String>,
    /// Drive a positioner speaking the turntable line protocol, HOST:PORT or a serial
    /// device path (with --steps or
    /// --turn). Keep clear of its swept volume; software limits are no interlock.
    #[arg(long, conflicts_with_all = ["positioner", "positioner_sim"])]
    pub drive: Option<String>,
    /// Serial speed when --drive is a serial device (a path), bits per second.
    #[arg(long, default_value_t = 115200)]
    pub drive_baud: u32,
    /// Step and stop: FROM:TO:STEP degrees (move, settle, sweep, next).
    #[arg(
        long,
        requires = "drive",
        conflicts_with = "turn",
        allow_hyphen_values = true
    )]
    pub steps: Option<String>,
    /// Continuous: FROM:TO:SPEED (degrees, degrees per second): sweep while it turns.
    #[arg(long, requires = "drive", allow_hyphen_values = true)]
    pub turn: Option<String>,
    /// Speed of moves between steps and to the start, degrees per second.
    #[arg(long, default_value_t = 10.0)]
    pub move_speed_deg_s: f64,
    /// Software angle range MIN:MAX, degrees (default: the positioner's).
    #[arg(long, allow_hyphen_values = true)]
    pub angle_range: Option<String>,
    /// Software speed limit, degrees per second (default: the positioner's).
    #[arg(long)]
    pub max_speed_deg_s: Option<f64>,
    /// Acceleration, degrees per second squared (default: the positioner's highest).
    #[arg(long)]
    pub max_accel_deg_s2: Option<f64>,
    /// Settled when within this of the target, degrees.
    #[arg(long, default_value_t = 0.05)]
    pub settle_tolerance_deg: f64,
    /// ... for this long, s.
    #[arg(long, default_value_t = 0.2)]
    pub settle_s: f64,
    /// A move must settle within this, s.
    #[arg(long, default_value_t = 60.0)]
    pub settle_timeout_s: f64,
    /// Take angles from the simulator's positioner model of --scenario.
    #[arg(long, requires = "scenario")]
    pub positioner_sim: bool,
    /// Scenario for --positioner-sim (its gate is planned for the live engine).
    #[arg(long)]
    pub scenario: Option<PathBuf>,
    /// Seed for --positioner-sim (default: the scenario's).
    #[arg(long)]
    pub seed: Option<u64>,
    /// Stop after this many sweeps.
    #[arg(long)]
    pub sweeps: Option<u64>,
    /// Seconds to keep reading angle samples after the last sweep.
    #[arg(long, default_value_t = 1.0)]
    pub linger_s: f64,
    /// Recording to write.
    #[arg(long)]
    pub out: PathBuf,
    /// Gate and pattern options for the live engine (it runs when a gate can be set up:
    /// from the scenario, or from --gate-center-ns and --gate-span-ns).
    #[command(flatten)]
    pub gate: GateArgs,
    /// Angle bin width for the live engine, degrees (default: the scenario's, else 1).
    #[arg(long)]
    pub bin_width_deg: Option<f64>,
    /// Also serve the live engine's view to a browser on [ADDR:]PORT (a bare port is on
    /// 127.0.0.1); the page stays up after the scan until the command is stopped (Ctrl-C).
    #[arg(long, value_name = "[ADDR:]PORT")]
    pub web: Option<String>,
    /// An RCS scan: the calibration `rcs --save-calibration` wrote (or a recording `rcs
    /// --calibrated-recording` wrote); the live bins are shown in dBsm, with its gate,
    /// pattern frequencies and bins.
    #[arg(long, value_name = "FILE")]
    pub rcs_calibration: Option<PathBuf>,
}

/// Runs the command.
pub fn run(a: Args) -> anyhow::Result<()> {
    let drive = match &a.drive {
        None => None,
        Some(addr) => Some(DriveOptions {
            addr: addr.clone(),
            baud: a.drive_baud,
            plan: match (&a.steps, &a.turn) {
                (Some(s), None) => Plan::parse(s, false)?,
                (None, Some(t)) => Plan::parse(t, true)?,
                _ => anyhow::bail!("--drive needs one of --steps and --turn"),
            },
            move_speed_deg_s: a.move_speed_deg_s,
            angle_range_deg: a.angle_range.as_deref().map(parse_range).transpose()?,
            max_speed_deg_s: a.max_speed_deg_s,
            max_accel_deg_s2: a.max_accel_deg_s2,
            settle_tolerance_deg: a.settle_tolerance_deg,
            settle_s: a.settle_s,
            settle_timeout_s: a.settle_timeout_s,
        }),
    };
    let server = match &a.web {
        Some(spec) => Some(crate::web::start(spec, crate::web::Meta::default())?),
        None => None,
    };
    acquire::run(&Options {
        drive,
        profile: a.profile,
        instrument: a.instrument,
        positioner: a.positioner,
        positioner_sim: a.positioner_sim,
        scenario: a.scenario,
        seed: a.seed,
        sweeps: a.sweeps,
        linger_s: a.linger_s,
        out: a.out,
        gate: a.gate.into(),
        bin_width_deg: a.bin_width_deg,
        web: server.as_ref().map(|s| s.hub().clone()),
        rcs_calibration: a.rcs_calibration,
    })?;
    if let Some(s) = &server {
        crate::web::stay_up(s)?;
    }
    Ok(())
}
