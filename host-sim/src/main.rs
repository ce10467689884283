//! `sweepgate`: the host program. Each subcommand lives in its own module.

use clap::{Parser, Subcommand};

mod demo;

use sweepgate_host::simulate;
use sweepgate_host::{replay, view};

/// Time-domain gating for antenna pattern scans in ordinary rooms.
#[derive(Parser)]
#[command(name = "sweepgate", version, about)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Run the built-in example and print what gating does to it.
    Demo(demo::Args),
    /// Simulate a scan of a room scenario and write it as a recording.
    Simulate(simulate::Args),
    /// Replay a recording through the scan engine with a live preview, and write the report.
    Replay(replay::Args),
    /// Show a board's preview stream (TCP HOST:PORT, or a serial device or file).
    View(view::Args),
}

fn main() {
    let cli = Cli::parse();
    let result = match cli.command {
        Command::Demo(a) => demo::run(a),
        Command::Simulate(a) => simulate::run(a),
        Command::Replay(a) => replay::run(a),
        Command::View(a) => view::run(a),
    };
    if let Err(e) = result {
        eprintln!("error: {e:#}");
        std::process::exit(1);
    }
}
