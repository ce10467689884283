//! `sweepgate view`: its arguments and the call (see [`crate::link::view`]).

use crate::link::view::{self, Options};

/// Options of `sweepgate view`.
#[derive(clap::Args, Debug, Clone)]
pub struct Args {
    /// `HOST:PORT` of a TCP preview stream, or a path to a serial device or a file.
    #[arg(long)]
    pub from: String,
    /// No full-screen preview: a progress line on stderr and a summary at the end.
    #[arg(long)]
    pub no_preview: bool,
    /// Number of bins of the scan, for the "filled" count (unknown otherwise).
    #[arg(long)]
    pub bins: Option<u16>,
}

/// Runs the command.
pub fn run(a: Args) -> anyhow::Result<()> {
    view::run(&Options {
        from: a.from,
        no_preview: a.no_preview,
        bins: a.bins,
    })
}
