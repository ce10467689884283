//! `sweepgate demo`: its arguments and the call (see [`crate::pipeline::demo`]).

use std::path::PathBuf;

use crate::pipeline::demo::{self, Options};

/// Options of `sweepgate demo`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Floor reflection coefficient (field, −1…1).
    #[arg(long, default_value_t = -0.6, allow_negative_numbers = true)]
    pub floor_reflection: f64,
    /// Gate span in nanoseconds (default: close halfway to the floor echo).
    #[arg(long, allow_negative_numbers = true)]
    pub gate_span_ns: Option<f64>,
    /// Folder for the demo recording and report.
    #[arg(long, default_value = "sweepgate-demo")]
    pub out: PathBuf,
    /// Replay pace (times the recorded speed).
    #[arg(long, default_value_t = 8.0, conflicts_with = "as_fast_as_possible")]
    pub speed: f64,
    /// Replay without waiting.
    #[arg(long)]
    pub as_fast_as_possible: bool,
    /// No full-screen preview (a progress line instead).
    #[arg(long)]
    pub no_preview: bool,
}

/// Runs the command.
pub fn run(a: Args) -> anyhow::Result<()> {
    demo::run(&Options {
        floor_reflection: a.floor_reflection,
        gate_span_ns: a.gate_span_ns,
        out: a.out,
        speed: a.speed,
        as_fast_as_possible: a.as_fast_as_possible,
        no_preview: a.no_preview,
    })
}
