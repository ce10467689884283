//! `sweepgate process`: gates saved sweeps offline and writes the same report folder as
//! `sweepgate replay` (`pattern.csv`, `summary.json`, SVG plots; see [`crate::output::report`]).
//!
//! # Inputs
//!
//! - `--manifest FILE`: a step-and-stop scan saved as one Touchstone file per angle (see
//!   [`crate::formats::manifest`]). Each file is one sweep; the bins are
//!   [`crate::pipeline::manifest_bins`]'s (the manifest's own angle step unless a bin width
//!   is given; files sharing a bin, such as 350° and −10°, are averaged and reported), each
//!   gated with the core [`Gate`] on its FFT path (echo level and gated values), which is
//!   what the scan engine computes for a bin holding one sweep.
//! - `--recording REC`: a recording (see [`crate::formats::recording`]), streamed through
//!   the same scan engine as `replay` ([`crate::pipeline::stream`]) with no preview and no
//!   waiting. With the same choices, the bins are the replay's bit for bit.
//! - a positional `INPUT`: a manifest when its first line starts with `angle_deg`,
//!   otherwise a recording.
//!
//! # Settings
//!
//! `--settings FILE` names a TOML file with any of these keys (command-line options win):
//!
//! ```toml
//! gate_center_ns = 10.2
//! gate_span_ns = 4.0
//! frequencies_hz = [6.0e9, 8.0e9]
//! band_window = "kaiser:6"      # options::parse_window spelling
//! gate_shape = "tukey:0.3"
//! parameter = "S21"             # Touchstone inputs
//! resample = false              # Touchstone inputs with uneven frequencies
//! out = "report"                # relative to the settings file's folder
//! ```
//!
//! Any other key is refused with a message naming it.
//!
//! # The gate
//!
//! The set-up is [`crate::pipeline::setup`]'s, as for every command: a given center and
//! span (command line or settings file) are used as they are; otherwise a recording with a
//! scenario gets the planner's gate (compared with the gate from the data), and any other
//! input the gate chosen from the data (`gate_source` in `summary.json` says which;
//! `settings.data_gate` holds what the data showed, an `unseparable` warning when no gate
//! can separate the direct path from an echo). The band window and
//! gate shape defaults are [`crate::pipeline::options`]'s.

use std::path::{Path, PathBuf};
use std::sync::atomic::AtomicBool;

use anyhow::{bail, Context};
use sweepgate::gate::GateConfig;
use sweepgate::grid::Grid;
use sweepgate::metrics::wrap_deg;
use sweepgate::Complex32;

use crate::formats::files::check_output_dir;
use crate::formats::gain_table::GainTable;
use crate::formats::manifest::{AngleSweep, Manifest};
use crate::formats::recording as record;
use crate::formats::touchstone::{Parameter, Spacing, Touchstone};
use crate::limits::{BOUNDED_ABOVE_BYTES, MIN_REFERENCE_DB};
use crate::model::scenario::toml_one_line;
use crate::output::export::{self, BandRow, Bands, Exports};
use crate::output::report::{self, ImpulseView, ReportBin, ReportInput, ReportValue};
use crate::phase_times::mark;
use crate::pipeline::cuts::{self, CutTraces};
use crate::pipeline::engine::gate_sweeps_on;
use crate::pipeline::manifest_bins::{self, ManifestBins};
use crate::pipeline::options::{default_report_dir, window_option, Choices, GateOptions, Origin};
use crate::pipeline::setup::{self, Automatic};
use crate::pipeline::stream::{self, Discard, Pacing};
use crate::pipeline::summary::Settings;
use crate::pipeline::transform::c64;
use crate::pipeline::{cuts_bounded, cuts_report, cuts_stream};
use crate::quote::{clip_quotes, clipped};
use crate::resident::peak_text;

/// Options of `sweepgate process`, as given (`cli/process.rs` spells them).
#[derive(Debug, Clone, Default)]
pub struct Options {
    /// Manifest or recording (kind detected from the content).
    pub input: Option<PathBuf>,
    /// Manifest CSV (`angle_deg,file`) of per-angle Touchstone files.
    pub manifest: Option<PathBuf>,
    /// Recording written by `simulate` or `acquire`.
    pub recording: Option<PathBuf>,
    /// Gate and pattern options.
    pub gate: GateOptions,
    /// Touchstone parameter of the pattern signal (default: S21, or S11 for 1-port files).
    pub parameter: Option<String>,
    /// Resample Touchstone files whose frequencies are not uniformly spaced.
    pub resample: bool,
    /// Report folder (default: `<input stem>-report/` next to the input).
    pub out: Option<PathBuf>,
    /// TOML settings file with the same settings (command-line options override it).
    pub settings: Option<PathBuf>,
    /// Gain by substitution: the reference antenna's gain table.
    pub gain_table: Option<PathBuf>,
    /// Gain by substitution: a Touchstone file of the reference antenna at boresight.
    pub reference: Option<PathBuf>,
    /// Full-band exports beside the report (see [`crate::output::export`]).
    pub exports: Exports,
    /// Threads reading a manifest's files and gating its sweeps (`None`: every core). The
    /// results do not depend on it.
    pub threads: Option<usize>,
    /// The co-polar trace's Touchstone parameter (a scan of cuts, [`crate::pipeline::cuts`]).
    pub co: Option<String>,
    /// The cross-polar trace's Touchstone parameter (a scan of cuts).
    pub cross: Option<String>,
    /// A second manifest whose files hold the cross-polar trace (a scan of cuts).
    pub cross_manifest: Option<PathBuf>,
    /// A scan of cuts from a manifest in bounded memory at any size
    /// ([`crate::pipeline::cuts_bounded`]; above [`BOUNDED_ABOVE_BYTES`] it is anyway).
    pub bounded_memory: bool,
}

/// The keys a settings file may hold.
pub const SETTINGS_KEYS: [&str; 8] = [
    "gate_center_ns",
    "gate_span_ns",
    "frequencies_hz",
    "band_window",
    "gate_shape",
    "parameter",
    "resample",
    "out",
];

/// A settings file's contents.
#[derive(Debug, Clone, Default, PartialEq, serde::Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SettingsFile {
    /// Gate center, ns.
    pub gate_center_ns: Option<f64>,
    /// Gate span, ns.
    pub gate_span_ns: Option<f64>,
    /// Pattern frequencies, Hz.
    pub frequencies_hz: Option<Vec<f64>>,
    /// Band window spelling.
    pub band_window: Option<String>,
    /// Gate shape spelling.
    pub gate_shape: Option<String>,
    /// Touchstone parameter.
    pub parameter: Option<String>,
    /// Resample uneven Touchstone frequencies.
    pub resample: Option<bool>,
    /// Report folder (relative to the settings file's folder).
    pub out: Option<PathBuf>,
}

impl SettingsFile {
    /// Parses settings text; `name` is used in errors. Unknown keys are refused by name.
    pub fn parse_str(text: &str, name: &str) -> anyhow::Result<Self> {
        // The toml crate's message spans several lines with a snippet of the file; the
        // one-line form keeps its message and position, with long quotes cut.
        let one_line = |e: toml::de::Error| {
            anyhow::anyhow!(
                "settings file {name}: {}",
                clip_quotes(&toml_one_line(text, &e))
            )
        };
        let table: toml::Table = text.parse().map_err(one_line)?;
        for key in table.keys() {
            if !SETTINGS_KEYS.contains(&key.as_str()) {
                bail!(
                    "settings file {name}: unknown key `{}` (known keys: {})",
                    clipped(key),
                    SETTINGS_KEYS.join(", ")
                );
            }
        }
        toml::from_str(text).map_err(one_line)
    }

    /// Reads a settings file; a relative `out` is taken against the file's folder.
    pub fn read(path: &Path) -> anyhow::Result<Self> {
        let text = std::fs::read_to_string(path)
            .with_context(|| format!("reading settings file {}", path.display()))?;
        let mut s = Self::parse_str(&text, &path.display().to_string())?;
        if let Some(o) = &s.out {
            if o.is_relative() {
                let base = path.parent().unwrap_or(Path::new("."));
                s.out = Some(base.join(o));
            }
        }
        Ok(s)
    }
}

/// What is processed.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Input {
    /// A manifest of Touchstone files.
    Manifest(PathBuf),
    /// A recording.
    Recording(PathBuf),
}

impl Input {
    /// The path.
    pub fn path(&self) -> &Path {
        match self {
            Input::Manifest(p) | Input::Recording(p) => p,
        }
    }
}

/// Settings after merging the settings file and the command line.
#[derive(Debug, Clone, PartialEq)]
pub struct Resolved {
    /// The input.
    pub input: Input,
    /// Gate and pattern choices.
    pub choices: Choices,
    /// Touchstone parameter (`None`: the file's usual one).
    pub parameter: Option<Parameter>,
    /// Uniform spacing required or resampling allowed.
    pub spacing: Spacing,
    /// Report folder.
    pub out: PathBuf,
    /// Gain by substitution: the reference's gain table and its measurement.
    pub gain: Option<(PathBuf, PathBuf)>,
    /// Full-band exports beside the report.
    pub exports: Exports,
    /// Threads for a manifest (at least 1).
    pub threads: usize,
    /// The co- and cross-polar traces, when asked for (`--co`, `--cross`): the manifest is
    /// processed as a scan of cuts ([`crate::pipeline::cuts`]).
    pub traces: Option<CutTraces>,
    /// A scan of cuts from a manifest in bounded memory at any size.
    pub bounded_memory: bool,
}

/// A manifest when the file's first line starts with `angle_deg` or `theta_deg`, else a
/// recording.
pub fn detect(path: &Path) -> anyhow::Result<Input> {
    use std::io::Read;
    let mut head = [0u8; 64];
    let mut f = std::fs::File::open(path).with_context(|| format!("opening {}", path.display()))?;
    let n = f.read(&mut head).unwrap_or(0);
    let text = String::from_utf8_lossy(head.get(..n).unwrap_or(&[]));
    let text = text.trim_start_matches('\u{feff}').trim_start();
    Ok(
        if text.starts_with("angle_deg") || text.starts_with("theta_deg") {
            Input::Manifest(path.to_path_buf())
        } else {
            Input::Recording(path.to_path_buf())
        },
    )
}

/// The one input the options name.
fn input_of(opts: &Options) -> anyhow::Result<Input> {
    Ok(match (&opts.manifest, &opts.recording, &opts.input) {
        (Some(m), None, None) => Input::Manifest(m.clone()),
        (None, Some(r), None) => Input::Recording(r.clone()),
        (None, None, Some(i)) => detect(i)?,
        (None, None, None) => {
            bail!("nothing to process: give --manifest FILE, --recording REC or an input file")
        }
        _ => bail!("give one input: --manifest, --recording or a positional file"),
    })
}

/// The command line's choices, completed from the settings file.
fn merge(cli: &GateOptions, file: &SettingsFile) -> anyhow::Result<Choices> {
    let mut c = cli.choices()?;
    let from_file = |v: Option<f64>| v.map(|v| (v, Origin::SettingsFile));
    c.center_ns = c.center_ns.or(from_file(file.gate_center_ns));
    c.span_ns = c.span_ns.or(from_file(file.gate_span_ns));
    if c.band_window.is_none() {
        c.band_window = window_option(&file.band_window, "settings file `band_window`")?;
    }
    if c.gate_shape.is_none() {
        c.gate_shape = window_option(&file.gate_shape, "settings file `gate_shape`")?;
    }
    if c.frequencies_hz.is_none() {
        if let Some(v) = &file.frequencies_hz {
            if let Some(bad) = v.iter().find(|f| !(f.is_finite() && **f > 0.0)) {
                bail!("settings file: `frequencies_hz` holds {bad}, not a positive frequency");
            }
            c.frequencies_hz = Some(v.clone());
        }
    }
    Ok(c)
}

/// Merges the settings file (if any) and the command line.
pub fn resolve(opts: &Options) -> anyhow::Result<Resolved> {
    let file = match &opts.settings {
        Some(p) => SettingsFile::read(p)?,
        None => SettingsFile::default(),
    };
    let input = input_of(opts)?;
    let choices = merge(&opts.gate, &file)?;
    let parameter = match opts.parameter.as_ref().or(file.parameter.as_ref()) {
        Some(t) => Some(
            t.parse::<Parameter>()
                .with_context(|| format!("parameter `{t}`"))?,
        ),
        None => None,
    };
    let traces = cut_traces(opts, parameter)?;
    let spacing = if opts.resample || file.resample == Some(true) {
        Spacing::Resample
    } else {
        Spacing::RequireUniform
    };
    let out = opts
        .out
        .clone()
        .or(file.out)
        .unwrap_or_else(|| default_report_dir(input.path()));
    Ok(Resolved {
        input,
        choices,
        parameter,
        spacing,
        out,
        gain: opts.gain_table.clone().zip(opts.reference.clone()),
        exports: opts.exports.clone(),
        threads: match opts.threads {
            Some(0) => bail!("--threads 0: give at least 1 (or leave it out for every core)"),
            Some(n) if n > crate::limits::MAX_THREADS => bail!(
                "--threads {n} is over {} (each thread holds a Touchstone parse and an FFT's buffers)",
                crate::limits::MAX_THREADS
            ),
            Some(n) => n,
            None => crate::threads::available(),
        },
        traces,
        bounded_memory: opts.bounded_memory,
    })
}

/// The traces of a scan of cuts: `--co` (else `--parameter`, else S21), `--cross` and
/// `--cross-manifest`, when any of them is given.
fn cut_traces(opts: &Options, parameter: Option<Parameter>) -> anyhow::Result<Option<CutTraces>> {
    if opts.co.is_none() && opts.cross.is_none() && opts.cross_manifest.is_none() {
        return Ok(None);
    }
    let parse = |flag: &str, t: &str| {
        t.parse::<Parameter>()
            .with_context(|| format!("{flag} `{}`", clipped(t)))
    };
    let co = match &opts.co {
        Some(t) => parse("--co", t)?,
        None => parameter.unwrap_or_else(|| Parameter::default_for(2)),
    };
    let cross = opts
        .cross
        .as_ref()
        .map(|t| parse("--cross", t))
        .transpose()?;
    if cross == Some(co) && opts.cross_manifest.is_none() {
        bail!("--co and --cross both name {co}: give the cross-polar port's parameter");
    }
    Ok(Some(CutTraces {
        co,
        // With a second manifest, its files' parameter: --cross, else the co-polar one.
        cross: cross.or(opts.cross_manifest.as_ref().map(|_| co)),
        cross_manifest: opts.cross_manifest.clone(),
    }))
}

/// A processed input, ready for the report.
#[derive(Debug, Clone)]
pub struct Processed {
    /// The report input.
    pub report: ReportInput,
    /// The gate used.
    pub gate: GateConfig,
    /// `"command line"`, `"settings file"`, `"planner"` or `"chosen from the data"` (two
    /// joined when center and span came from different places).
    pub gate_source: String,
    /// What the gate from the data found, in words, when the data were surveyed.
    pub data_gate: Option<String>,
    /// Every bin's whole band: always for a manifest, for a recording when exports are
    /// asked for.
    pub bands: Option<Bands>,
}

/// Processes a recording: streamed through the engine as `replay` does.
pub fn process_recording(r: &Resolved, path: &Path) -> anyhow::Result<Processed> {
    // The file error names the file.
    let rec = record::recover_file(path)?;
    let h = rec.header().with_context(|| stream::no_header(path))?;
    let setup = setup::for_recording(h, &r.choices, &stream::sweeps_of(&rec))?;
    let quit = AtomicBool::new(false);
    let o = stream::stream_keeping_bands(
        &rec,
        setup,
        &mut Discard,
        &Pacing::default(),
        &quit,
        r.exports.any(),
    )?;
    stream::refuse_empty(&o)?;
    Ok(Processed {
        report: o.report,
        data_gate: o.setup.data.as_ref().map(|d| d.rule.clone()),
        gate: o.setup.gate,
        gate_source: o.setup.gate_source,
        bands: o.bands,
    })
}

/// Whether manifest angles cover a full turn (their span plus the smallest step).
fn covers_full_circle(angles_deg: &[f64]) -> bool {
    let mut sorted = angles_deg.to_vec();
    sorted.sort_by(f64::total_cmp);
    let (Some(lo), Some(hi)) = (sorted.first(), sorted.last()) else {
        return false;
    };
    let step = sorted
        .windows(2)
        .map(|w| w[1] - w[0])
        .fold(f64::INFINITY, f64::min);
    sorted.len() > 1 && hi - lo + step >= 360.0 - 1e-6
}

/// Processes a manifest: its angles binned ([`manifest_bins`]: the manifest's own step
/// unless a bin width is given; files sharing a bin averaged and reported), each bin's sweep
/// gated on the FFT path. The bins' raw sweeps then move into the bands (no copy).
pub fn process_manifest(r: &Resolved, path: &Path) -> anyhow::Result<Processed> {
    let (m, mut scan) = Manifest::read_and_load_on(path, r.parameter, r.spacing, r.threads)?;
    mark("manifest and files read");
    if scan.sweeps.is_empty() {
        bail!("{}: no sweeps", path.display());
    }
    let file_angles: Vec<f64> = scan.sweeps.iter().map(|s| s.angle_deg).collect();
    let full_circle = covers_full_circle(&file_angles);
    // The files' sweeps move into the bins (a bin of one file takes its sweep, no copy).
    let files = scan.sweeps.len();
    let width = r.choices.bin_width_deg;
    let mut binned =
        manifest_bins::bin_sweeps(std::mem::take(&mut scan.sweeps), width, full_circle)
            .with_context(|| format!("{}: binning the manifest's angles", path.display()))?;
    mark("binned");
    let sweeps: Vec<&[Complex32]> = binned.sweeps.iter().map(|s| &s.values[..]).collect();
    let angles: Vec<f64> = binned.sweeps.iter().map(|s| s.angle_deg).collect();
    let auto = Automatic::Data {
        sweeps: &sweeps,
        angles_deg: Some(&angles),
        threads: r.threads,
    };
    let bw = setup::band_window(&r.choices, None)?;
    let g = setup::gating(scan.grid, &r.choices, bw, &[], auto)?;
    mark("gate set up");
    let (bins, impulse, gated) = gate_each(
        &g.gate,
        &binned.sweeps,
        &binned.counts,
        &g.indices,
        r.threads,
    )?;
    mark("gated");
    let bands = bands_of(scan.grid, &mut binned, gated);
    let mut settings = Settings::for_sweeps(&g, bins.len(), full_circle);
    settings.bins.width_deg = Some(binned.width_deg as f32);
    settings.bins.one_per_manifest_angle = binned.combined.is_empty();
    settings.parameter = Some(
        r.parameter
            .map_or("default (S21, or S11 for 1-port files)".to_string(), |p| {
                p.to_string()
            }),
    );
    let mut warnings = scan.warnings.clone();
    warnings.extend(binned.combined.iter().cloned());
    warnings.extend(g.remarks.iter().cloned());
    let report = ReportInput {
        title: format!("manifest {}", m.name()),
        source: path.display().to_string(),
        frequencies_hz: g.frequencies_hz.clone(),
        full_circle,
        bins,
        settings: settings.to_json(),
        counters: serde_json::json!({
            "files": files,
            "sweeps_binned": files,
            "bins": binned.sweeps.len(),
            "bins_combining_files": binned.combined.len(),
        }),
        warnings,
        impulse,
        gain: None,
    };
    Ok(Processed {
        report,
        data_gate: g.data.as_ref().map(|d| d.rule.clone()),
        gate: g.gate,
        gate_source: g.gate_source,
        bands: Some(bands),
    })
}

/// The bins' whole bands: the raw sweeps moved out of `binned` (no copy) beside the gated.
fn bands_of(grid: Grid, binned: &mut ManifestBins, gated: Vec<Vec<Complex32>>) -> Bands {
    let rows = binned
        .sweeps
        .iter_mut()
        .zip(gated)
        .map(|(s, gated)| BandRow {
            angle_deg: s.angle_deg,
            raw: std::mem::take(&mut s.values),
            gated,
        })
        .collect();
    Bands { grid, rows }
}

/// Bins, the impulse view and each bin's gated spectrum.
type Gated = (Vec<ReportBin>, Option<ImpulseView>, Vec<Vec<Complex32>>);

/// One bin per binned sweep (`counts` files each), gated on the FFT path, the impulse view
/// of the sweep nearest 0°, and each bin's gated spectrum; on up to `threads` threads.
fn gate_each(
    gate: &GateConfig,
    sweeps: &[AngleSweep],
    counts: &[usize],
    indices: &[usize],
    threads: usize,
) -> anyhow::Result<Gated> {
    let values: Vec<&[Complex32]> = sweeps.iter().map(|s| &s.values[..]).collect();
    let near = sweeps
        .iter()
        .enumerate()
        .min_by(|(_, a), (_, b)| {
            wrap_deg(a.angle_deg)
                .abs()
                .total_cmp(&wrap_deg(b.angle_deg).abs())
        })
        .map(|(i, s)| (i, s.angle_deg));
    let g = gate_sweeps_on(gate, &values, near, threads)?;
    let bins = sweeps
        .iter()
        .zip(counts)
        .zip(g.spectra.iter().zip(&g.echo_db))
        .map(|((s, &count), (gated, echo_db))| ReportBin {
            angle_deg: s.angle_deg,
            mean_deg: s.angle_deg,
            sweeps: count as u32,
            flags: 0,
            echo_db: Some(f64::from(*echo_db)),
            values: indices
                .iter()
                .map(|&i| ReportValue {
                    raw: c64(s.values.get(i).copied().unwrap_or_default()),
                    gated: c64(gated.get(i).copied().unwrap_or_default()),
                    truth: None,
                    // Files at given angles: no sweep timing, each taken still.
                    angle_offset_deg: 0.0,
                })
                .collect(),
        })
        .collect();
    Ok((bins, g.impulse, g.spectra))
}

/// Processes the resolved input and writes the report folder. A scan of cuts (a manifest
/// of both axes, or `--co`/`--cross`) has its own report: [`run_cuts`].
pub fn process(r: &Resolved) -> anyhow::Result<Processed> {
    if wants_cuts(r)? {
        bail!(
            "{}: a scan of cuts (`theta_deg,phi_deg,file`, or --co/--cross) is processed by \
             pipeline::process::run_cuts",
            r.input.path().display()
        );
    }
    process_one(r)
}

/// [`process`] of an input known not to be a scan of cuts. The report folder is checked
/// ([`check_output_dir`]) on a thread of its own while the input is processed (its test
/// file's sync waits on the disk); a folder that cannot take the report is said when the
/// processing is done, before anything is written. A folder the check made is removed
/// again, if still empty, when the processing fails (no empty report folder left behind).
fn process_one(r: &Resolved) -> anyhow::Result<Processed> {
    let existed = r.out.exists();
    let (p, checked) = std::thread::scope(|scope| {
        let check = std::thread::Builder::new()
            .name("output check".into())
            .spawn_scoped(scope, || check_output_dir(&r.out));
        let p = process_input(r);
        let checked = match check {
            Ok(handle) => handle.join().unwrap_or_else(|_| check_output_dir(&r.out)),
            // No thread to be had: checked here.
            Err(_) => check_output_dir(&r.out),
        };
        (p, checked)
    });
    if p.is_err() && !existed {
        // Only an empty folder goes (`remove_dir` refuses any other); parents it needed stay.
        std::fs::remove_dir(&r.out).ok();
    }
    let p = p?;
    checked.with_context(|| format!("writing the report to {}", r.out.display()))?;
    mark("processed");
    report::write_report_on(&p.report, &r.out, r.threads)
        .with_context(|| format!("writing the report to {}", r.out.display()))?;
    mark("report written");
    export::write_exports(&p.report, p.bands.as_ref(), &r.exports)?;
    Ok(p)
}

/// The input processed, with gain by substitution when asked for; nothing is written.
fn process_input(r: &Resolved) -> anyhow::Result<Processed> {
    let mut p = match &r.input {
        Input::Manifest(m) => process_manifest(r, m)?,
        Input::Recording(rec) => process_recording(r, rec)?,
    };
    if let Some((table, reference)) = &r.gain {
        p.report.gain = Some(gain_reference(r, &p, table, reference)?);
    }
    Ok(p)
}

/// Gates the reference antenna's measurement with the scan's gate and pairs its gated level
/// with its tabulated gain at each pattern frequency (gain by substitution).
fn gain_reference(
    r: &Resolved,
    p: &Processed,
    table: &Path,
    reference: &Path,
) -> anyhow::Result<report::GainReference> {
    let gains = GainTable::load(table)?;
    let ts = Touchstone::read(reference)?;
    let parameter = r
        .parameter
        .unwrap_or_else(|| Parameter::default_for(ts.ports()));
    let sweep = ts.to_sweep(parameter, r.spacing)?;
    let g = p.gate.grid;
    let same = sweep.grid.points() == g.points()
        && (sweep.grid.start_hz() - g.start_hz()).abs() <= 1e-6 * g.step_hz()
        && (sweep.grid.step_hz() - g.step_hz()).abs() <= 1e-6 * g.step_hz();
    if !same {
        bail!(
            "{}: the reference measurement's frequencies ({} points from {} Hz, step {} Hz) differ from the scan's ({} points from {} Hz, step {} Hz)",
            reference.display(),
            sweep.grid.points(),
            sweep.grid.start_hz(),
            sweep.grid.step_hz(),
            g.points(),
            g.start_hz(),
            g.step_hz()
        );
    }
    let indices: Vec<usize> = p
        .report
        .frequencies_hz
        .iter()
        .map(|f| g.nearest_index(*f).unwrap_or(0))
        .collect();
    let one = [AngleSweep {
        angle_deg: 0.0,
        values: sweep.values,
        file: reference.to_path_buf(),
    }];
    let (bins, _, _) = gate_each(&p.gate, &one, &[1], &indices, 1)?;
    let values = &bins.first().context("gating the reference")?.values;
    let mut per_frequency = Vec::new();
    for (f, v) in p.report.frequencies_hz.iter().zip(values) {
        let g_ref = gains
            .gain_dbi(*f)
            .with_context(|| format!("{}: at {f} Hz", table.display()))?;
        let level_db = crate::units::db(v.gated);
        if level_db < MIN_REFERENCE_DB {
            bail!(
                "{}: the gated reference is {level_db:.1} dB at {f} Hz, below \
                 {MIN_REFERENCE_DB} dB (an all-zero or disconnected measurement); it cannot \
                 set the gain",
                reference.display()
            );
        }
        per_frequency.push((g_ref, level_db));
    }
    Ok(report::GainReference {
        table: table.display().to_string(),
        measurement: reference.display().to_string(),
        per_frequency,
    })
}

/// Runs the command: resolves the options, processes (on a thread with room for the
/// engine) and says what was written.
pub fn run(opts: &Options) -> anyhow::Result<()> {
    mark("start");
    let r = resolve(opts)?;
    if wants_cuts(&r)? {
        return run_cuts(&r);
    }
    if r.bounded_memory {
        bail!("--bounded-memory is for a scan of cuts from a manifest (`theta_deg,phi_deg,file`, or --co/--cross); a one-cut manifest's sweeps are held, a recording is streamed");
    }
    mark("options and input kind");
    let r2 = r.clone();
    let p = std::thread::Builder::new()
        .name("process".into())
        .stack_size(16 << 20)
        .spawn(move || process_one(&r2))
        .context("starting the processing thread")?
        .join()
        .map_err(|_| anyhow::anyhow!("the processing thread failed"))??;
    for w in &p.report.warnings {
        eprintln!("warning: {w}");
    }
    if let Some(d) = &p.data_gate {
        eprintln!("gate {d}");
    }
    eprintln!(
        "{} bins; gate center {:.3} ns, span {:.3} ns ({}); report written to {}",
        p.report.bins.len(),
        p.gate.center_s * 1e9,
        p.gate.span_s * 1e9,
        p.gate_source,
        r.out.display()
    );
    mark("done");
    if let Some(d) = &r.exports.touchstone_dir {
        eprintln!(
            "Touchstone export written to {}",
            d.join("manifest.csv").display()
        );
    }
    if let Some(f) = &r.exports.arrays {
        eprintln!("array export written to {}", f.display());
    }
    eprintln!("peak resident memory: {}", peak_text());
    Ok(())
}

/// Whether `r` is a scan of cuts: a manifest of both axes, or co- and cross-polar traces
/// asked for.
pub fn wants_cuts(r: &Resolved) -> anyhow::Result<bool> {
    if r.traces.is_some() {
        return Ok(true);
    }
    let Input::Manifest(path) = &r.input else {
        // A recording of cuts is asked for with --co/--cross (it is read once).
        return Ok(false);
    };
    Ok(Manifest::peek_axes(path)?)
}

/// Processes a scan of cuts ([`crate::pipeline::cuts`]) and writes its report folder
/// ([`crate::pipeline::cuts_report`]); says what was written.
pub fn run_cuts(r: &Resolved) -> anyhow::Result<()> {
    if r.gain.is_some() || r.exports.any() {
        bail!("gain by substitution and the full-band exports are not made for a scan of cuts yet; leave out --gain-table/--reference and --export-*");
    }
    let traces = r.traces.clone().unwrap_or(CutTraces {
        co: r.parameter.unwrap_or_else(|| Parameter::default_for(2)),
        cross: None,
        cross_manifest: None,
    });
    let job = cuts::CutJob {
        choices: &r.choices,
        spacing: r.spacing,
        threads: r.threads,
    };
    let (res, path) = match &r.input {
        Input::Manifest(path) if bounded(r, path, &traces)? => (
            cuts_bounded::process_cuts_bounded(&job, path, traces.clone())?,
            path,
        ),
        Input::Manifest(path) => (cuts::process_cuts(&job, path, traces.clone())?, path),
        Input::Recording(_) if r.bounded_memory => {
            bail!("--bounded-memory is for a manifest: a recording of cuts is streamed through the engine anyway")
        }
        Input::Recording(path) => (cuts_stream::process_cut_recording(&r.choices, path)?, path),
    };
    mark("cuts processed");
    let traces = res.traces.clone();
    cuts_report::write_cuts_report(&res, path, &r.out)
        .with_context(|| format!("writing the report to {}", r.out.display()))?;
    mark("report written");
    for w in &res.warnings {
        eprintln!("warning: {w}");
    }
    let bins: usize = res.cuts.iter().map(|c| c.bins.len()).sum();
    eprintln!(
        "{} cuts, {bins} bins, traces {}; gate center {:.3} ns, span {:.3} ns ({}); report written to {}",
        res.cuts.len(),
        traces.parameters().iter().map(ToString::to_string).collect::<Vec<_>>().join(" and "),
        res.gating.gate.center_s * 1e9,
        res.gating.gate.span_s * 1e9,
        res.gating.gate_source,
        r.out.display()
    );
    if let Some(h) = &res.held {
        eprintln!(
            "bounded memory: at most {} of whole sweeps held while gating ({} threads, {} bins a block), {} in the first look ({} bins); {} of reduced bins kept",
            size_text(h.gating_peak_bytes),
            h.threads,
            h.block_bins,
            size_text(h.first_look_peak_bytes),
            h.first_look_bins,
            size_text(h.kept_bytes)
        );
    }
    eprintln!("peak resident memory: {}", peak_text());
    Ok(())
}

/// Bytes in words: MiB from 1 MiB up, else KiB.
fn size_text(bytes: usize) -> String {
    let kib = bytes as f64 / 1024.0;
    if kib >= 1024.0 {
        format!("{:.1} MiB", kib / 1024.0)
    } else {
        format!("{kib:.0} KiB")
    }
}

/// Whether a manifest of cuts goes the bounded path: asked for, or its raw traces over
/// [`BOUNDED_ABOVE_BYTES`] (the whole path when it has a cross-polar manifest, which the
/// bounded path does not take yet).
fn bounded(r: &Resolved, path: &Path, traces: &CutTraces) -> anyhow::Result<bool> {
    if r.bounded_memory {
        return Ok(true);
    }
    if traces.cross_manifest.is_some() {
        return Ok(false);
    }
    let m = Manifest::read(path)?;
    Ok(cuts_bounded::whole_path_bytes(&m, traces, r.spacing)? > BOUNDED_ABOVE_BYTES)
}
