//! `sweepgate instrument [--port 5025] [--bind 127.0.0.1] [--scenario FILE] [--seed N]
//! [--dump DIR] [--once]`: runs the simulated VNA of [`crate::link::instrument`].

use std::path::PathBuf;

use crate::link::instrument::{run_server, ServerOptions};

/// Options of `sweepgate instrument`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// TCP port (5025 is the registered SCPI raw-socket port; 0 picks a free one).
    #[arg(long, default_value_t = 5025)]
    pub port: u16,
    /// Address to listen on.
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
    })
}
