//! `sweepgate process`: its arguments and the call (see [`crate::pipeline::process`]).

use std::path::PathBuf;

use crate::cli::gate::GateArgs;
use crate::output::export::Exports;
use crate::pipeline::process::{self, Options};

/// Options of `sweepgate process`.
#[derive(clap::Args, Debug, Clone, Default)]
pub struct Args {
    /// Manifest or recording (kind detected from the content).
    #[arg(conflicts_with_all = ["manifest", "recording"])]
    pub input: Option<PathBuf>,
    /// Manifest CSV (`angle_deg,file`, or `theta_deg,phi_deg,file` for several cuts) of
    /// per-angle Touchstone files.
    #[arg(long, conflicts_with = "recording")]
    pub manifest: Option<PathBuf>,
    /// Recording written by `simulate` or `acquire`.
    #[arg(long)]
    pub recording: Option<PathBuf>,
    /// Gate and pattern options.
    #[command(flatten)]
    pub gate: GateArgs,
    /// Touchstone parameter of the pattern signal (default: S21, or S11 for 1-port files).
    #[arg(long)]
    pub parameter: Option<String>,
    /// Resample Touchstone files whose frequencies are not uniformly spaced.
    #[arg(long)]
    pub resample: bool,
    /// Report folder (default: `<input stem>-report/` next to the input).
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// TOML settings file with the same settings (command-line options override it).
    #[arg(long)]
    pub settings: Option<PathBuf>,
    /// Gain by substitution: the reference antenna's gain table (CSV `frequency_hz,gain_dbi`).
    #[arg(long, requires = "reference")]
    pub gain_table: Option<PathBuf>,
    /// Gain by substitution: a Touchstone file of the reference antenna measured at
    /// boresight in the same set-up; it is gated like the scan.
    #[arg(long, requires = "gain_table")]
    pub reference: Option<PathBuf>,
    /// Also write the gated S21 of every bin over the whole band as Touchstone files, with
    /// a manifest (`DIR/manifest.csv`) that `process` reads back.
    #[arg(long, value_name = "DIR")]
    pub export_touchstone: Option<PathBuf>,
    /// Also write raw and gated S21 of every bin over the whole band as a NumPy `.npz`
    /// archive (arrays `s21` of angles × frequencies × traces, `angle_deg`, `frequency_hz`, …).
    #[arg(long, value_name = "FILE.npz")]
    pub export_arrays: Option<PathBuf>,
    /// Threads reading a manifest's files and gating its sweeps (default: every core); the
    /// results are the same for any number.
    #[arg(long, value_name = "N")]
    pub threads: Option<usize>,
    /// A scan of cuts: the co-polar trace's parameter in each file (e.g. S21; default the
    /// `--parameter`, else S21).
    #[arg(long, value_name = "SIJ")]
    pub co: Option<String>,
    /// A scan of cuts: the cross-polar trace's parameter in each file (e.g. S31 of a
    /// 3-port file from a dual-polarised probe).
    #[arg(long, value_name = "SIJ")]
    pub cross: Option<String>,
    /// A scan of cuts: a second manifest (the same rows) whose files hold the cross-polar
    /// trace (their `--cross` parameter, else the co-polar one).
    #[arg(long, value_name = "CSV")]
    pub cross_manifest: Option<PathBuf>,
    /// A scan of cuts from a manifest: read, gate and reduce the files a few at a time
    /// instead of holding every sweep (the same report; done anyway above 256 MiB of sweeps).
    #[arg(long)]
    pub bounded_memory: bool,
}

/// Runs the command.
pub fn run(a: Args) -> anyhow::Result<()> {
    process::run(&Options {
        input: a.input,
        manifest: a.manifest,
        recording: a.recording,
        gate: a.gate.into(),
        parameter: a.parameter,
        resample: a.resample,
        out: a.out,
        settings: a.settings,
        gain_table: a.gain_table,
        reference: a.reference,
        exports: Exports {
            touchstone_dir: a.export_touchstone,
            arrays: a.export_arrays,
        },
        threads: a.threads,
        co: a.co,
        cross: a.cross,
        cross_manifest: a.cross_manifest,
        bounded_memory: a.bounded_memory,
    })
}
