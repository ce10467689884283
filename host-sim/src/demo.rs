//! `sweepgate demo` (being written).

/// Options of `sweepgate demo`.
#[derive(clap::Args)]
pub struct Args {}

/// Runs the demo.
pub fn run(_args: Args) -> anyhow::Result<()> {
    anyhow::bail!("the demo is being written")
}
