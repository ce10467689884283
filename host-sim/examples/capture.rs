//! Link captures for the emulated board (see `sweepgate_host::pipeline::capture`).
//!
//! ```text
//! cargo run --release -p sweepgate-host --example capture -- make REC CAPTURE [--echo never|every] [--gate-span-ns NS]
//! cargo run --release -p sweepgate-host --example capture -- compare CAPTURE PREVIEW [--expect-echo-in-gate | --exact]
//! cargo run --release -p sweepgate-host --example capture -- make-cuts CAPTURE [--echo never|every]
//! cargo run --release -p sweepgate-host --example capture -- compare-cuts CAPTURE PREVIEW
//! ```
//!
//! `make-cuts` writes a capture of cuts (two traces per sweep, two cuts of a second axis; see
//! `sweepgate_host::pipeline::cut_capture`) and `compare-cuts` replays it through the core's
//! board loop of cuts (`sweepgate::cut_pump`, as the firmware does) and compares the cut-bin
//! records with PREVIEW: the same cuts, bins, sweeps and flags, values within 1e-5 of their
//! trace's largest.
//!
//! `make` turns a recording into the byte stream a board receives, with the set-up `replay` and
//! `process` use for the recording (gate, pattern frequencies, bins); `--gate-span-ns` sets the
//! gate span as `process --gate-span-ns` does (a span wide enough to hold an echo makes a
//! capture whose bins carry the echo-in-gate flag). `compare` replays the capture through the
//! core's board loop (`sweepgate::pump`, as the firmware does) and compares the preview records
//! with PREVIEW (written by the firmware): the same bins and flags, values within 1e-5
//! relative (with `--exact`, equal bit for bit). With `--expect-echo-in-gate` it also fails
//! unless some of the host's records carry the echo-in-gate flag.

use anyhow::{bail, Context};
use sweepgate::scan::EchoMode;
use sweepgate_host::formats::recording::recover_file;
use sweepgate_host::pipeline::options::{Choices, Origin};
use sweepgate_host::pipeline::setup;
use sweepgate_host::pipeline::{capture, cut_capture};

fn main() {
    if let Err(e) = run() {
        eprintln!("error: {e:#}");
        std::process::exit(1);
    }
}

fn run() -> anyhow::Result<()> {
    let args: Vec<String> = std::env::args().skip(1).collect();
    match args.iter().map(String::as_str).collect::<Vec<_>>().as_slice() {
        ["make", rec, out, rest @ ..] => {
            let (echo, choices) = make_options(rest)?;
            let recovered = recover_file(rec.as_ref()).with_context(|| format!("reading {rec}"))?;
            let header = recovered
                .header()
                .with_context(|| format!("{rec}: no header record"))?;
            // The one set-up with every default, as `replay` and `process` build it.
            let setup = setup::for_recording(header, &choices, &[])
                .with_context(|| format!("{rec}: set-up"))?;
            let gate = setup.gate;
            let h = capture::header_for(&setup, echo)?;
            let records: Vec<_> = recovered.records.into_iter().map(|(_, r)| r).collect();
            let bytes = capture::write(&records, &h)?;
            std::fs::write(out, &bytes).with_context(|| format!("writing {out}"))?;
            println!(
                "capture: {} bytes to {out} (gate center {:.3} ns, span {:.3} ns)",
                bytes.len(),
                gate.center_s * 1e9,
                gate.span_s * 1e9
            );
            Ok(())
        }
        ["compare", cap, preview, rest @ ..] => compare(cap, preview, rest),
        ["make-cuts", out, rest @ ..] => {
            let echo = match rest {
                [] | ["--echo", "every"] => EchoMode::EveryBin,
                ["--echo", "never"] => EchoMode::Never,
                other => bail!("unknown options {other:?}"),
            };
            let bytes = cut_capture::model_capture(echo)?;
            std::fs::write(out, &bytes).with_context(|| format!("writing {out}"))?;
            println!("capture of cuts: {} bytes to {out}", bytes.len());
            Ok(())
        }
        ["compare-cuts", cap, preview] => compare_cuts(cap, preview),
        _ => bail!("usage: capture make REC CAPTURE [--echo never|every] [--gate-span-ns NS] | capture compare CAPTURE PREVIEW [--expect-echo-in-gate | --exact] | capture make-cuts CAPTURE [--echo never|every] | capture compare-cuts CAPTURE PREVIEW"),
    }
}

/// `compare CAPTURE PREVIEW [--expect-echo-in-gate | --exact]`: the host replays the
/// capture and its preview records are compared with the board's.
fn compare(cap: &str, preview: &str, rest: &[&str]) -> anyhow::Result<()> {
    // `--exact`: the gated and raw values equal bit for bit (tolerance 0), for a
    // board whose loops must compute what the host's compute.
    let (expect_echo, tolerance) = match rest {
        [] => (false, 1e-5),
        ["--expect-echo-in-gate"] => (true, 1e-5),
        ["--exact"] => (false, 0.0),
        other => bail!("unknown options {other:?}"),
    };
    let bytes = std::fs::read(cap).with_context(|| format!("reading {cap}"))?;
    let host = capture::replay(&bytes).with_context(|| cap.to_string())?;
    let board = std::fs::read(preview).with_context(|| format!("reading {preview}"))?;
    let c = capture::compare(&board, &host.preview, tolerance);
    println!(
        "host: {} sweeps decoded, {} binned, {} bins closed",
        host.decoded, host.counters.sweeps_binned, host.counters.bins_closed
    );
    println!(
        "board: {} bin records, host: {} bin records; worst relative difference {:.2e}",
        c.bins.0, c.bins.1, c.worst_relative
    );
    println!(
        "records with the echo-in-gate flag: board {}, host {}; largest angle offset of a pattern frequency {:.4} deg",
        c.echo_in_gate.0, c.echo_in_gate.1, c.largest_offset_deg
    );
    println!(
        "impulse-response records: board {}, host {}, {} alike",
        c.impulses.0, c.impulses.1, c.impulses_matched
    );
    for p in &c.problems {
        println!("  mismatch: {p}");
    }
    let passed = c.matched + c.impulses_matched;
    let failed = c.bins.0.max(c.bins.1) + c.impulses.0.max(c.impulses.1) - passed;
    println!("firmware compare: {passed} passed, {failed} failed");
    if failed > 0 || c.matched == 0 {
        bail!("the board's preview records differ from the host's");
    }
    if expect_echo && c.echo_in_gate.1 == 0 {
        bail!("no record of the host's replay carries the echo-in-gate flag");
    }
    Ok(())
}

/// The options of `make`: the echo mode (every bin unless `--echo never`) and the set-up
/// choices (every default, as `replay` and `process` build them, but for `--gate-span-ns`).
fn make_options(mut rest: &[&str]) -> anyhow::Result<(EchoMode, Choices)> {
    let mut echo = EchoMode::EveryBin;
    let mut choices = Choices::default();
    while let [name, value, tail @ ..] = rest {
        match (*name, *value) {
            ("--echo", "every") => echo = EchoMode::EveryBin,
            ("--echo", "never") => echo = EchoMode::Never,
            ("--gate-span-ns", v) => {
                let span: f64 = v
                    .parse()
                    .with_context(|| format!("--gate-span-ns {v}: not a number"))?;
                choices.span_ns = Some((span, Origin::CommandLine));
            }
            _ => bail!("unknown option {name} {value}"),
        }
        rest = tail;
    }
    if !rest.is_empty() {
        bail!("unknown options {rest:?}");
    }
    Ok((echo, choices))
}

/// `compare-cuts`: the host's replay of a capture of cuts against the board's preview.
fn compare_cuts(cap: &str, preview: &str) -> anyhow::Result<()> {
    let bytes = std::fs::read(cap).with_context(|| format!("reading {cap}"))?;
    let host = cut_capture::replay(&bytes).with_context(|| cap.to_string())?;
    let board = std::fs::read(preview).with_context(|| format!("reading {preview}"))?;
    let c = cut_capture::compare(&board, &host.preview, 1e-5);
    println!(
        "host: {} traces decoded, {} sweeps binned, {} cuts started, {} bins closed",
        host.pump.traces_decoded,
        host.counters.sweeps_binned(),
        host.counters.cuts_started,
        host.counters.scan.bins_closed
    );
    println!(
        "board: {} cut-bin records, host: {}; cuts {:?}; worst relative difference {:.2e}",
        c.records.0, c.records.1, c.cuts, c.worst_relative
    );
    for p in &c.problems {
        println!("  mismatch: {p}");
    }
    let failed = c.records.0.max(c.records.1) - c.matched;
    println!(
        "firmware compare (cuts): {} passed, {} failed",
        c.matched, failed
    );
    if failed > 0 || c.matched == 0 || c.cuts.len() < 2 {
        bail!("the board's cut-bin records differ from the host's");
    }
    Ok(())
}
