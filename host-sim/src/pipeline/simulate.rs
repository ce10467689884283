//! `sweepgate simulate --scenario FILE --out REC [--seed N] [--progress-lines]`: simulates
//! a scan of a room scenario and writes it as a recording (see [`crate::formats::recording`]).
//!
//! The file is written by [`Writer::create`]: every record flushed as it is written and
//! synced to the disk by the default [`crate::formats::recording::SyncPolicy`] (every 64 records or
//! 1 s, and at the end). With `--progress-lines`, a line `written <offset> <records>` goes
//! to standard output after each record is flushed: the file holds `records` whole
//! records ending at byte `offset`, which survive the process being killed.
//!
//! The recording holds, in order: the header (scenario, grid, sweep format), the
//! free-space truth at each pattern frequency and bin center that a recording of the
//! scenario is set up with ([`crate::pipeline::setup::truth_points`]: the bin centers of a
//! continuous scan, the step angles of a step-and-stop one), then the positioner samples
//! and sweeps interleaved by time (a sweep is written at its end time, after every sample
//! stamped up to then), and an end record.

use std::path::{Path, PathBuf};

use anyhow::Context;
use num_complex::Complex32;

use crate::formats::files::refuse_if_same_file;
use crate::formats::recording::{GridInfo, Header, Record, SyncPolicy, Writer, SWEEP_FORMAT};
use crate::model::room;
use crate::model::scenario::Scenario;
use crate::model::simulator::Simulator;
use crate::pipeline::setup;

/// Options of `sweepgate simulate`.
#[derive(Debug, Clone)]
pub struct Options {
    /// Scenario file (TOML).
    pub scenario: PathBuf,
    /// Recording to write.
    pub out: PathBuf,
    /// Seed of the noise and jitter (default: the scenario's `simulation.seed`).
    pub seed: Option<u64>,
    /// Print `written <offset> <records>` on standard output after each flushed record.
    pub progress_lines: bool,
}

/// What a simulation wrote.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Summary {
    /// Sweep records.
    pub sweeps: u64,
    /// Positioner sample records.
    pub positions: u64,
    /// Truth records.
    pub truths: u64,
    /// File size, bytes.
    pub bytes: u64,
}

/// Runs the command.
pub fn run(args: &Options) -> anyhow::Result<()> {
    refuse_if_same_file(&args.out, &[&args.scenario]).context("--out")?;
    let text = std::fs::read_to_string(&args.scenario)
        .with_context(|| format!("reading scenario {}", args.scenario.display()))?;
    let scenario = Scenario::from_toml(&text)
        .with_context(|| format!("in scenario {}", args.scenario.display()))?;
    for w in scenario.warnings() {
        eprintln!("warning: {w}");
    }
    let seed = args.seed.unwrap_or(scenario.simulation.seed);
    let sum = simulate_to_file_with(
        &scenario,
        Some(&text),
        seed,
        &args.out,
        !args.progress_lines,
        args.progress_lines,
    )?;
    eprintln!(
        "wrote {} sweeps, {} positioner samples and {} truth records ({} bytes) to {}",
        sum.sweeps,
        sum.positions,
        sum.truths,
        sum.bytes,
        args.out.display()
    );
    Ok(())
}

/// Simulates `scenario` into a new recording file at `out`.
pub fn simulate_to_file(
    scenario: &Scenario,
    toml_text: Option<&str>,
    seed: u64,
    out: &Path,
    progress: bool,
) -> anyhow::Result<Summary> {
    simulate_to_file_with(scenario, toml_text, seed, out, progress, false)
}

/// [`simulate_to_file`], and with `lines` a `written <offset> <records>` line on standard
/// output after each flushed record.
pub fn simulate_to_file_with(
    scenario: &Scenario,
    toml_text: Option<&str>,
    seed: u64,
    out: &Path,
    progress: bool,
    lines: bool,
) -> anyhow::Result<Summary> {
    let mut w = Writer::create(out, SyncPolicy::default())
        .with_context(|| format!("creating {}", out.display()))?;
    if lines {
        w.set_on_written(|offset, records| println!("written {offset} {records}"));
    }
    let (_, sum) = simulate_into(scenario, toml_text, seed, w, progress)
        .with_context(|| format!("writing {}", out.display()))?;
    Ok(sum)
}

/// Simulates `scenario` into any writer; returns the writer and what was written.
pub fn simulate_to<W: std::io::Write>(
    scenario: &Scenario,
    toml_text: Option<&str>,
    seed: u64,
    out: W,
    progress: bool,
) -> anyhow::Result<(W, Summary)> {
    simulate_into(scenario, toml_text, seed, Writer::new(out)?, progress)
}

fn simulate_into<W: std::io::Write>(
    scenario: &Scenario,
    toml_text: Option<&str>,
    seed: u64,
    mut w: Writer<W>,
    progress: bool,
) -> anyhow::Result<(W, Summary)> {
    scenario.validate()?;
    let grid = scenario.grid()?;
    let header = Header {
        software: format!("sweepgate {}", env!("CARGO_PKG_VERSION")),
        source: "simulate".into(),
        scenario: Some(scenario.clone()),
        scenario_toml: toml_text.map(str::to_owned),
        seed: Some(seed),
        grid: GridInfo {
            start_hz: grid.start_hz(),
            step_hz: grid.step_hz(),
            points: grid.points(),
        },
        sweep_format: SWEEP_FORMAT.into(),
        pattern_frequencies_hz: scenario.pattern_frequencies_hz(),
        bin_width_deg: Some(scenario.bin_width_deg()),
        counts_per_turn: Some(scenario.positioner.counts_per_turn),
    };
    w.write(&Record::Header(Box::new(header)))?;
    write_truth(scenario, &mut w)?;
    write_scan(scenario, seed, &mut w, progress)?;
    let (sweeps, positions, truths) = w.counts();
    let (out, bytes) = w.finish()?;
    Ok((
        out,
        Summary {
            sweeps,
            positions,
            truths,
            bytes,
        },
    ))
}

/// The free-space truth at the bins and pattern frequencies the set-up gives a recording of
/// this scenario ([`setup::truth_points`]).
fn write_truth<W: std::io::Write>(scenario: &Scenario, w: &mut Writer<W>) -> anyhow::Result<()> {
    let (freqs, angles) = setup::truth_points(scenario)?;
    for (a, row) in angles.iter().zip(room::truth(scenario, &freqs, &angles)) {
        let values = freqs
            .iter()
            .zip(row)
            .map(|(f, v)| (*f, Complex32::new(v.re as f32, v.im as f32)))
            .collect();
        w.write(&Record::Truth {
            angle_deg: *a,
            values,
        })?;
    }
    Ok(())
}

/// Positioner samples and sweeps interleaved by time (a sweep after every sample stamped up
/// to its end), with a progress bar when asked.
fn write_scan<W: std::io::Write>(
    scenario: &Scenario,
    seed: u64,
    w: &mut Writer<W>,
    progress: bool,
) -> anyhow::Result<()> {
    let mut sim = Simulator::new(scenario, seed);
    let samples = sim.samples();
    let n_sweeps = sim.timeline().sweep_starts_s().len();
    let bar = progress_bar(progress, n_sweeps as u64);
    let mut next_sample = 0;
    let position = |s: &crate::model::simulator::Sample| Record::Position {
        t_us: s.t_us,
        counts: s.counts,
        angle_deg: s.angle_deg,
    };
    for i in 0..n_sweeps {
        let Some(sw) = sim.sweep(i) else { break };
        while let Some(s) = samples.get(next_sample).filter(|s| s.t_us <= sw.end_us) {
            w.write(&position(s))?;
            next_sample += 1;
        }
        w.write(&Record::Sweep {
            index: sw.index,
            start_us: sw.start_us,
            end_us: sw.end_us,
            s21: sw.s21,
        })?;
        bar.inc(1);
    }
    for s in samples.get(next_sample..).unwrap_or(&[]) {
        w.write(&position(s))?;
    }
    bar.finish_and_clear();
    Ok(())
}

fn progress_bar(shown: bool, sweeps: u64) -> indicatif::ProgressBar {
    if !shown {
        return indicatif::ProgressBar::hidden();
    }
    let b = indicatif::ProgressBar::new(sweeps);
    b.set_style(
        indicatif::ProgressStyle::with_template(
            "simulating {bar:40} {pos}/{len} sweeps, {eta} left",
        )
        .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
    );
    b
}
