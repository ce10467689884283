//! `sweepgate simulate`: its arguments and the call (see [`crate::pipeline::simulate`]).

use std::path::PathBuf;

use crate::pipeline::simulate::{self, Options};

/// Options of `sweepgate simulate`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Scenario file (TOML).
    #[arg(long)]
    pub scenario: PathBuf,
    /// Recording to write.
    #[arg(long)]
    pub out: PathBuf,
    /// Seed of the noise and jitter (default: the scenario's `simulation.seed`).
    #[arg(long)]
    pub seed: Option<u64>,
    /// Print `written <offset> <records>` on standard output after each flushed record.
    #[arg(long)]
    pub progress_lines: bool,
}

/// Runs the command.
pub fn run(a: Args) -> anyhow::Result<()> {
    simulate::run(&Options {
        scenario: a.scenario,
        out: a.out,
        seed: a.seed,
        progress_lines: a.progress_lines,
    })
}
