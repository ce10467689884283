//! `sweepgate plan-rcs`: its arguments and the call (see [`crate::pipeline::rcs_plan`]).

use sweepgate::rcs::Zone;

use crate::pipeline::options::{default_band_window, window_option};
use crate::pipeline::rcs_plan::{plan_text, RcsPlanOptions};

/// Options of `sweepgate plan-rcs`.
#[derive(clap::Args, Debug, Clone)]
pub struct Args {
    /// Distance from the antennas to the target zone's centre (the turntable axis), m.
    #[arg(long)]
    pub zone_distance_m: f64,
    /// Diameter of the target zone, m.
    #[arg(long)]
    pub zone_size_m: f64,
    /// Distance between the transmit and receive antennas, m (0 for one antenna, S11).
    #[arg(long, default_value_t = 0.0)]
    pub antenna_separation_m: f64,
    /// Delay from the VNA's time zero to the antennas, ns.
    #[arg(long, default_value_t = 0.0)]
    pub time_zero_ns: f64,
    /// Distance from the antennas to the mount's strongest echo, m.
    #[arg(long)]
    pub mount_distance_m: Option<f64>,
    /// First frequency of the sweep, Hz.
    #[arg(long)]
    pub start_hz: f64,
    /// Last frequency of the sweep, Hz.
    #[arg(long)]
    pub stop_hz: f64,
    /// Points per sweep.
    #[arg(long)]
    pub points: usize,
    /// Band window (the spellings of `process`; default kaiser-sidelobe:50).
    #[arg(long)]
    pub band_window: Option<String>,
}

/// Runs the command.
pub fn run(a: Args) -> anyhow::Result<()> {
    let text = plan_text(&RcsPlanOptions {
        zone: Zone {
            time_zero_s: a.time_zero_ns * 1e-9,
            distance_m: a.zone_distance_m,
            size_m: a.zone_size_m,
            separation_m: a.antenna_separation_m,
        },
        mount_distance_m: a.mount_distance_m,
        start_hz: a.start_hz,
        stop_hz: a.stop_hz,
        points: a.points,
        band_window: window_option(&a.band_window, "--band-window")?
            .unwrap_or_else(default_band_window),
    })?;
    print!("{text}");
    Ok(())
}
