//! `sweepgate replay`: its arguments and the call (see [`crate::pipeline::replay`]).

use std::path::PathBuf;

use crate::cli::gate::GateArgs;
use crate::output::export::Exports;
use crate::pipeline::replay::{self, Options};

/// Options of `sweepgate replay`.
#[derive(clap::Args, Debug, Clone)]
pub struct Args {
    /// Recording to replay.
    pub rec: PathBuf,
    /// Pace: record time divided by this (2 = twice as fast as recorded), 0.001 to 1e6.
    #[arg(long, default_value_t = 1.0, conflicts_with = "as_fast_as_possible")]
    pub speed: f64,
    /// Do not wait between records.
    #[arg(long)]
    pub as_fast_as_possible: bool,
    /// Report folder (default: `<recording stem>-report/` next to the recording).
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// No full-screen preview: a progress line on stderr and a summary.
    #[arg(long)]
    pub no_preview: bool,
    /// Gate and pattern options.
    #[command(flatten)]
    pub gate: GateArgs,
    /// Also serve the preview byte stream on 127.0.0.1:PORT.
    #[arg(long)]
    pub serve: Option<u16>,
    /// Also serve the live view to a browser on [ADDR:]PORT (a bare port is on 127.0.0.1);
    /// the page stays up after the scan until the command is stopped (Ctrl-C).
    #[arg(long, value_name = "[ADDR:]PORT")]
    pub web: Option<String>,
    /// Also write the records as they are replayed to this recording (crash-safe, with the
    /// same flush and sync policy as `simulate`): a clean copy of what was recovered.
    #[arg(long)]
    pub record: Option<PathBuf>,
    /// With `--record`: print `written <offset> <records>` after each record reaches the file.
    #[arg(long, requires = "record")]
    pub progress_lines: bool,
    /// Also write the gated S21 of every bin over the whole band as Touchstone files, with
    /// a manifest (`DIR/manifest.csv`) that `process` reads back.
    #[arg(long, value_name = "DIR")]
    pub export_touchstone: Option<PathBuf>,
    /// Also write raw and gated S21 of every bin over the whole band as a NumPy `.npz`
    /// archive (arrays `s21` of angles × frequencies × traces, `angle_deg`, `frequency_hz`, …).
    #[arg(long, value_name = "FILE.npz")]
    pub export_arrays: Option<PathBuf>,
}

/// Runs the command.
pub fn run(a: Args) -> anyhow::Result<()> {
    let a_rec = a.rec.clone();
    let server = match &a.web {
        Some(spec) => Some(crate::web::start(spec, crate::web::Meta::default())?),
        None => None,
    };
    let (o, dir) = replay::replay_file(&Options {
        rec: a.rec,
        speed: a.speed,
        as_fast_as_possible: a.as_fast_as_possible,
        out: a.out,
        no_preview: a.no_preview,
        gate: a.gate.into(),
        serve: a.serve,
        record: a.record,
        progress_lines: a.progress_lines,
        exports: Exports {
            touchstone_dir: a.export_touchstone,
            arrays: a.export_arrays,
        },
        web: server.as_ref().map(|s| s.hub().clone()),
    })?;
    if let Some(d) = &o.setup.data {
        eprintln!("gate {}", d.rule);
        if let Some(w) = crate::pipeline::data_gate::unseparable_warning(&d.choice, &o.setup.grid) {
            eprintln!("warning: {w}");
        }
    }
    eprintln!(
        "{} bins closed; report written to {}",
        o.counters.bins_closed,
        dir.display()
    );
    if o.counters.bins_closed == 0 {
        anyhow::bail!(
            "no bin was closed: every sweep of {} was refused or none fell in a bin \
             (see summary.json in {} for the reasons)",
            a_rec.display(),
            dir.display()
        );
    }
    if let Some(s) = &server {
        crate::web::stay_up(s)?;
    }
    Ok(())
}
