//! `sweepgate simulate-rcs`: its arguments and the call (see
//! [`crate::pipeline::rcs_simulate`]).

use std::path::PathBuf;

/// Options of `sweepgate simulate-rcs`.
#[derive(clap::Args, Debug, Clone)]
pub struct Args {
    /// The RCS scene (TOML; see host-sim/scenarios/rcs/range.toml).
    #[arg(long)]
    pub scenario: PathBuf,
    /// Folder for the measurements (target.csv, background.csv, reference.s2p,
    /// reference_background.s2p, sweeps/).
    #[arg(long)]
    pub out: PathBuf,
    /// Write the measurements as recordings instead, one per measurement (target.rec,
    /// background.rec, reference.rec, reference_background.rec), the angles in their
    /// position records.
    #[arg(long)]
    pub recording: bool,
}

/// Runs the command.
pub fn run(a: Args) -> anyhow::Result<()> {
    let written = if a.recording {
        crate::pipeline::rcs_simulate::run_recordings(&a.scenario, &a.out)?
    } else {
        crate::pipeline::rcs_simulate::run(&a.scenario, &a.out)?
    };
    println!("wrote {} files to {}", written.len(), a.out.display());
    Ok(())
}
