//! `sweepgate acquire`: its arguments and the call (see [`crate::link::acquire`]).

use std::path::PathBuf;

use crate::cli::gate::GateArgs;
use crate::link::acquire::{self, Options};

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
}

/// Runs the command.
pub fn run(a: Args) -> anyhow::Result<()> {
    acquire::run(&Options {
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
    })
}
