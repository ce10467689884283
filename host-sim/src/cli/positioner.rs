//! `sweepgate positioner`: runs the simulated turntable of [`crate::link::turntable`].

use crate::link::drive::DriveLimits;
use crate::link::turntable::{run_server, TableOptions};

/// Options of `sweepgate positioner`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// TCP port (0 picks a free one).
    #[arg(long, default_value_t = 0)]
    pub port: u16,
    /// Address to listen on.
    #[arg(long, default_value = "127.0.0.1")]
    pub bind: String,
    /// Serve a pseudo-terminal (a serial line) instead of TCP; prints its device path.
    #[arg(long)]
    pub serial: bool,
    /// Lowest angle; reaching it is a fault, degrees.
    #[arg(long, default_value_t = -370.0, allow_negative_numbers = true)]
    pub min_deg: f64,
    /// Highest angle; reaching it is a fault, degrees.
    #[arg(long, default_value_t = 370.0, allow_negative_numbers = true)]
    pub max_deg: f64,
    /// Highest speed, degrees per second.
    #[arg(long, default_value_t = 30.0)]
    pub max_speed_deg_s: f64,
    /// Highest acceleration, degrees per second squared.
    #[arg(long, default_value_t = 60.0)]
    pub max_accel_deg_s2: f64,
    /// Ringing amplitude after a move, degrees.
    #[arg(long, default_value_t = 0.1)]
    pub ringing_deg: f64,
    /// Time for the ringing to decay by e^-4, s.
    #[arg(long, default_value_t = 0.4)]
    pub settle_s: f64,
    /// Fault mode (tests): a drive fault this many seconds after start.
    #[arg(long)]
    pub fault_after_s: Option<f64>,
    /// Clock rate error, ppm (positive: the positioner's clock runs fast).
    #[arg(long, default_value_t = 0.0, allow_negative_numbers = true)]
    pub drift_ppm: f64,
    /// The positioner's clock reading at start, s.
    #[arg(long, default_value_t = 0.0)]
    pub clock_offset_s: f64,
}

/// Runs the command.
pub fn run(a: Args) -> anyhow::Result<()> {
    let o = TableOptions {
        limits: DriveLimits {
            min_deg: a.min_deg,
            max_deg: a.max_deg,
            max_speed_deg_s: a.max_speed_deg_s,
            max_accel_deg_s2: a.max_accel_deg_s2,
        },
        ringing_deg: a.ringing_deg,
        settle_s: a.settle_s,
        fault_after_s: a.fault_after_s,
        drift_ppm: a.drift_ppm,
        clock_offset_s: a.clock_offset_s,
    };
    if a.serial {
        #[cfg(unix)]
        return crate::link::turntable::run_pty(o);
        #[cfg(not(unix))]
        anyhow::bail!("--serial needs a Unix pseudo-terminal");
    }
    run_server(&a.bind, a.port, o)
}
