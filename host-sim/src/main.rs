//! `sweepgate`: the host program. Each subcommand lives in its own module.

use clap::{Parser, Subcommand};

use sweepgate_host::cli::{acquire, demo, instrument, process, read_block, replay, simulate, view};

/// Time-domain gating for antenna pattern scans in ordinary rooms.
#[derive(Parser)]
#[command(
    name = "sweepgate",
    version,
    about,
    after_help = "Caution: a transmitting antenna can exceed RF exposure limits near its aperture, and a \
                  positioner is moving machinery. Follow local regulations and your lab's licensed \
                  practice; sweepgate is no interlock."
)]
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
    /// Plan a gated measurement from a scenario or plan file: far field, echoes, gate, speed.
    Plan(sweepgate_host::cli::plan::Args),
    /// Run a simulated VNA on a TCP port, answering SCPI queries.
    Instrument(instrument::Args),
    /// Run a simulated turntable on a TCP port, driven by the turntable line protocol.
    Positioner(sweepgate_host::cli::positioner::Args),
    /// Decode one IEEE 488.2 block from a file and print its values as JSON.
    ReadBlock(read_block::ReadBlockArgs),
    /// Drive an instrument and a positioner over TCP and record the scan.
    Acquire(acquire::Args),
    /// Replay a recording through the scan engine with a live preview, and write the report.
    Replay(replay::Args),
    /// Gate saved sweeps (a manifest of Touchstone files or a recording) and write the report.
    Process(process::Args),
    /// Radar cross section of a target on the turntable: background subtraction, a gate
    /// around the target zone, calibration against a reference target; dBsm and images.
    Rcs(sweepgate_host::cli::rcs::Args),
    /// Plan an RCS measurement: far field of the target zone, down-range resolution, the
    /// zone's gate and its clearance from the coupling and the mount.
    PlanRcs(sweepgate_host::cli::plan_rcs::Args),
    /// Simulate an RCS range (targets, mount, coupling, clutter, noise) and write the target,
    /// background and reference measurements as Touchstone files with manifests.
    SimulateRcs(sweepgate_host::cli::simulate_rcs::Args),
    /// Show a board's preview stream (TCP HOST:PORT, or a serial device or file).
    View(view::Args),
}

fn main() {
    let cli = Cli::parse();
    let result = match cli.command {
        Command::Demo(a) => demo::run(a),
        Command::Simulate(a) => simulate::run(a),
        Command::Plan(a) => sweepgate_host::cli::plan::run(a),
        Command::Instrument(a) => instrument::run(a),
        Command::Positioner(a) => sweepgate_host::cli::positioner::run(a),
        Command::ReadBlock(a) => read_block::run(a),
        Command::Acquire(a) => acquire::run(a),
        Command::Replay(a) => replay::run(a),
        Command::View(a) => view::run(a),
        Command::Process(a) => process::run(a),
        Command::Rcs(a) => sweepgate_host::cli::rcs::run(a),
        Command::PlanRcs(a) => sweepgate_host::cli::plan_rcs::run(a),
        Command::SimulateRcs(a) => sweepgate_host::cli::simulate_rcs::run(a),
    };
    if let Err(e) = result {
        eprintln!("error: {e:#}");
        std::process::exit(1);
    }
}
