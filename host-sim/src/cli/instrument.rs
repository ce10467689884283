//! `sweepgate instrument [--port 5025] [--bind 127.0.0.1] [--scenario FILE] [--seed N]
//! [--dump DIR] [--once] [--rcs-scenario FILE --measurement WHAT [--turntable ADDR]]`: runs
//! the simulated VNA of [`crate::link::instrument`].

use std::path::PathBuf;

use std::time::Duration;

use crate::formats::rcs_record::Measurement;
use crate::link::instrument::{run_server, RcsServe, ServerLimits, ServerOptions, Setting};

/// Options of `sweepgate instrument`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// TCP port (5025 is the registered SCPI raw-socket port; 0 picks a free one).
    #[arg(long, default_value_t = 5025)]
    pub port: u16,
    /// Address to listen on. Anything but a loopback address is announced with a warning
    /// and refuses `--dump`.
    #[arg(long, default_value = "127.0.0.1")]
    pub bind: String,
    /// Scenario whose scan the sweeps come from (default: the built-in demo lab).
    #[arg(long)]
    pub scenario: Option<PathBuf>,
    /// Seed of the noise (default: the scenario's `simulation.seed`).
    #[arg(long)]
    pub seed: Option<u64>,
    /// Write every sweep taken as DIR/sweep-<n>.json.
    #[arg(long)]
    pub dump: Option<PathBuf>,
    /// Stop after the first client disconnects.
    #[arg(long)]
    pub once: bool,
    /// Clients served at once (1 to 4096); more are closed as they connect.
    #[arg(long, default_value_t = 256, value_parser = clap::value_parser!(u16).range(1..=4096))]
    pub max_clients: u16,
    /// Seconds a client may stay silent (or not read its answers) before it is dropped
    /// (1 to 86400).
    #[arg(long, default_value_t = 60, value_parser = clap::value_parser!(u32).range(1..=86400))]
    pub idle_timeout_s: u32,
    /// Seconds a client may stay connected at most (1 to 604800).
    #[arg(long, default_value_t = 3600, value_parser = clap::value_parser!(u32).range(1..=604_800))]
    pub session_limit_s: u32,
    /// For tests only: the read-back of this setting lies (start, stop, points,
    /// bandwidth, power, function, format, order).
    #[arg(long, hide = true)]
    pub misreport: Option<Setting>,
    /// Serve an RCS range instead (an RCS scene, see host-sim/scenarios/rcs/range.toml):
    /// each sweep measures it as `simulate-rcs` does.
    #[arg(long, requires = "measurement", conflicts_with = "scenario")]
    pub rcs_scenario: Option<PathBuf>,
    /// Which measurement of the RCS scan to serve: target, background, reference or
    /// reference_background.
    #[arg(long, requires = "rcs_scenario")]
    pub measurement: Option<Measurement>,
    /// The turntable (turntable line protocol, HOST:PORT) whose angle each RCS sweep is
    /// measured at (default: the scene's angles in turn).
    #[arg(long, requires = "rcs_scenario")]
    pub turntable: Option<String>,
}

/// Runs the command.
pub fn run(args: Args) -> anyhow::Result<()> {
    run_server(&ServerOptions {
        bind: args.bind,
        port: args.port,
        scenario: args.scenario,
        seed: args.seed,
        dump: args.dump,
        once: args.once,
        limits: ServerLimits {
            max_clients: usize::from(args.max_clients),
            idle: Duration::from_secs(u64::from(args.idle_timeout_s)),
            total: Duration::from_secs(u64::from(args.session_limit_s)),
        },
        misreport: args.misreport,
        rcs: match (args.rcs_scenario, args.measurement) {
            (Some(scene), Some(measurement)) => Some(RcsServe {
                scene,
                measurement,
                turntable: args.turntable,
            }),
            _ => None,
        },
    })
}
