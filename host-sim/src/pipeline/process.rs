//! `sweepgate process`: gates saved sweeps offline and writes the same report folder as
//! `sweepgate replay` (`pattern.csv`, `summary.json`, SVG plots; see [`crate::output::report`]).
//!
//! # Inputs
//!
//! - `--manifest FILE`: a step-and-stop scan saved as one Touchstone file per angle (see
//!   [`crate::formats::manifest`]). Each file is one sweep; each manifest angle is one bin, gated with
//!   the core [`Gate`] on its FFT path (echo level and gated values), which is what the scan
//!   engine computes for a bin holding one sweep.
//! - `--recording REC`: a recording (see [`crate::formats::recording`]), streamed through the same scan
//!   engine as `replay` ([`replay::setup_with`], [`replay::replay_with_setup`]) with no
//!   preview and no waiting. With the settings it was replayed with, the bins are the
//!   replay's bit for bit.
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
//! Given centre and span (command line or settings file) are used as they are. Otherwise
//! (`gate_source` in `summary.json` says which):
//!
//! - `planner`: a recording with a scenario gets the planner's gate
//!   ([`replay::planned_gate`]), as `replay` does;
//! - `strongest impulse-response peak`: any other input. The strongest sweep (largest
//!   Σ|S|² over the grid; for a pattern scan, the one nearest the main beam) is windowed
//!   with the band window and transformed ([`Gate::impulse_response`]); the gate is centred
//!   on the sample of largest |h| and spans four band-window main lobes
//!   (4·`mainlobe_width()`/(K·Δf), the planner's rule when no echo is separable), at most
//!   half the alias-free range.
//!
//! Pattern frequencies are each taken at their nearest grid point; `frequency_hz` in
//! `pattern.csv` is the grid point's, and a warning in `summary.json` says when one moved.
//! The band window defaults to a Kaiser window for 50 dB sidelobes and the gate shape to
//! Tukey α = 0.3, as in `replay`.

use std::path::{Path, PathBuf};
use std::sync::atomic::AtomicBool;

use anyhow::{bail, Context};
use serde_json::{json, Value};
use sweepgate::fft::Fft;
use sweepgate::gate::{Gate, GateConfig};
use sweepgate::grid::Grid;
use sweepgate::window::WindowKind;
use sweepgate::Complex32;

use crate::formats::manifest::Manifest;
use crate::formats::recording::{self as record, Record};
use crate::formats::touchstone::{Parameter, Spacing};
use crate::output::report::{self, ImpulseView, ReportBin, ReportInput, ReportValue};
use crate::pipeline::options::describe_window;
use crate::pipeline::options::parse_window;
use crate::pipeline::replay::{self, c64, SetupOptions, Sink};

/// Options of `sweepgate process`.
#[derive(clap::Args, Debug, Clone, Default)]
pub struct Args {
    /// Manifest or recording (kind detected from the content).
    #[arg(conflicts_with_all = ["manifest", "recording"])]
    pub input: Option<PathBuf>,
    /// Manifest CSV (`angle_deg,file`) of per-angle Touchstone files.
    #[arg(long, conflicts_with = "recording")]
    pub manifest: Option<PathBuf>,
    /// Recording written by `simulate` or `acquire`.
    #[arg(long)]
    pub recording: Option<PathBuf>,
    /// Gate centre, ns from the VNA's time zero.
    #[arg(long, allow_negative_numbers = true)]
    pub gate_center_ns: Option<f64>,
    /// Gate span, ns.
    #[arg(long, allow_negative_numbers = true)]
    pub gate_span_ns: Option<f64>,
    /// Pattern frequencies, Hz, comma-separated (each taken at its nearest grid point).
    #[arg(long)]
    pub frequencies_hz: Option<String>,
    /// Band window: kaiser:BETA, tukey:ALPHA, hann, hamming, blackman-harris, rectangular
    /// (default: Kaiser for 50 dB sidelobes).
    #[arg(long)]
    pub band_window: Option<String>,
    /// Gate shape, same spellings (default: tukey:0.3).
    #[arg(long)]
    pub gate_shape: Option<String>,
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
    /// Gate centre, ns.
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
        let table: toml::Table = text
            .parse()
            .map_err(|e| anyhow::anyhow!("settings file {name}: {e}"))?;
        for key in table.keys() {
            if !SETTINGS_KEYS.contains(&key.as_str()) {
                bail!(
                    "settings file {name}: unknown key `{key}` (known keys: {})",
                    SETTINGS_KEYS.join(", ")
                );
            }
        }
        toml::from_str(text).map_err(|e| anyhow::anyhow!("settings file {name}: {e}"))
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

/// Where a setting came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Origin {
    /// A command-line option.
    CommandLine,
    /// The settings file.
    SettingsFile,
}

impl Origin {
    /// In words, as `summary.json` writes it.
    pub fn text(self) -> &'static str {
        match self {
            Origin::CommandLine => "command line",
            Origin::SettingsFile => "settings file",
        }
    }
    fn by(self, option: &str, key: &str) -> String {
        match self {
            Origin::CommandLine => format!("--{option}"),
            Origin::SettingsFile => format!("`{key}` in the settings file"),
        }
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
    /// Gate centre, ns, and where it came from.
    pub center_ns: Option<(f64, Origin)>,
    /// Gate span, ns, and where it came from.
    pub span_ns: Option<(f64, Origin)>,
    /// Requested pattern frequencies, Hz.
    pub frequencies_hz: Option<Vec<f64>>,
    /// Band window.
    pub band_window: WindowKind,
    /// Gate shape.
    pub gate_shape: WindowKind,
    /// Touchstone parameter (`None`: the file's usual one).
    pub parameter: Option<Parameter>,
    /// Uniform spacing required or resampling allowed.
    pub spacing: Spacing,
    /// Report folder.
    pub out: PathBuf,
    /// Gain by substitution: the reference's gain table and its measurement.
    pub gain: Option<(PathBuf, PathBuf)>,
}

/// Parses a comma-separated list of frequencies in Hz (each finite and positive).
pub fn parse_frequencies(text: &str) -> Result<Vec<f64>, String> {
    let mut v = Vec::new();
    for part in text.split(',') {
        let p = part.trim();
        let f: f64 = p
            .parse()
            .map_err(|_| format!("frequency `{p}` in `{text}` is not a number"))?;
        if !(f.is_finite() && f > 0.0) {
            return Err(format!(
                "frequency `{p}` in `{text}` is not a positive frequency"
            ));
        }
        v.push(f);
    }
    Ok(v)
}

/// A manifest when the file's first line starts with `angle_deg`, else a recording.
pub fn detect(path: &Path) -> anyhow::Result<Input> {
    use std::io::Read;
    let mut head = [0u8; 64];
    let mut f = std::fs::File::open(path).with_context(|| format!("opening {}", path.display()))?;
    let n = f.read(&mut head).unwrap_or(0);
    let text = String::from_utf8_lossy(head.get(..n).unwrap_or(&[]));
    let text = text.trim_start_matches('\u{feff}').trim_start();
    Ok(if text.starts_with("angle_deg") {
        Input::Manifest(path.to_path_buf())
    } else {
        Input::Recording(path.to_path_buf())
    })
}

/// Merges the settings file (if any) and the command line.
pub fn resolve(args: &Args) -> anyhow::Result<Resolved> {
    let file = match &args.settings {
        Some(p) => SettingsFile::read(p)?,
        None => SettingsFile::default(),
    };
    let input = match (&args.manifest, &args.recording, &args.input) {
        (Some(m), None, None) => Input::Manifest(m.clone()),
        (None, Some(r), None) => Input::Recording(r.clone()),
        (None, None, Some(i)) => detect(i)?,
        (None, None, None) => {
            bail!("nothing to process: give --manifest FILE, --recording REC or an input file")
        }
        _ => bail!("give one input: --manifest, --recording or a positional file"),
    };
    let pick = |cli: Option<f64>, file: Option<f64>| {
        cli.map(|v| (v, Origin::CommandLine))
            .or(file.map(|v| (v, Origin::SettingsFile)))
    };
    let frequencies_hz = match &args.frequencies_hz {
        Some(t) => {
            Some(parse_frequencies(t).map_err(|e| anyhow::anyhow!("--frequencies-hz: {e}"))?)
        }
        None => match file.frequencies_hz {
            Some(v) => {
                if let Some(bad) = v.iter().find(|f| !(f.is_finite() && **f > 0.0)) {
                    bail!("settings file: `frequencies_hz` holds {bad}, not a positive frequency");
                }
                Some(v)
            }
            None => None,
        },
    };
    let window =
        |cli: &Option<String>, file: &Option<String>, option: &str, default| match (cli, file) {
            (Some(t), _) => parse_window(t).map_err(|e| anyhow::anyhow!("--{option}: {e}")),
            (None, Some(t)) => parse_window(t)
                .map_err(|e| anyhow::anyhow!("settings file `{}`: {e}", option.replace('-', "_"))),
            (None, None) => Ok(default),
        };
    let band_window = window(
        &args.band_window,
        &file.band_window,
        "band-window",
        crate::pipeline::options::default_band_window(),
    )?;
    let gate_shape = window(
        &args.gate_shape,
        &file.gate_shape,
        "gate-shape",
        replay::GATE_SHAPE,
    )?;
    let parameter = match args.parameter.as_ref().or(file.parameter.as_ref()) {
        Some(t) => Some(
            t.parse::<Parameter>()
                .map_err(|e| anyhow::anyhow!("parameter `{t}`: {e}"))?,
        ),
        None => None,
    };
    let spacing = if args.resample || file.resample == Some(true) {
        Spacing::Resample
    } else {
        Spacing::RequireUniform
    };
    let out = args
        .out
        .clone()
        .or(file.out)
        .unwrap_or_else(|| replay::default_out(input.path()));
    Ok(Resolved {
        input,
        center_ns: pick(args.gate_center_ns, file.gate_center_ns),
        span_ns: pick(args.gate_span_ns, file.gate_span_ns),
        frequencies_hz,
        band_window,
        gate_shape,
        parameter,
        spacing,
        out,
        gain: args.gain_table.clone().zip(args.reference.clone()),
    })
}

/// Index of the sweep with the largest Σ|S|² (the first, on ties; 0 when empty).
pub fn strongest(sweeps: &[&[Complex32]]) -> usize {
    let energy = |s: &[Complex32]| s.iter().map(|z| f64::from(z.norm_sqr())).sum::<f64>();
    let mut best = (0usize, f64::NEG_INFINITY);
    for (i, s) in sweeps.iter().enumerate() {
        let e = energy(s);
        if e > best.1 {
            best = (i, e);
        }
    }
    best.0
}

/// The gate from the strongest impulse-response peak of `sweep` (see the module notes):
/// centre, span (s) and the rule in words.
pub fn gate_from_peak(
    grid: &Grid,
    band_window: WindowKind,
    sweep: &[Complex32],
) -> anyhow::Result<(f64, f64, String)> {
    match replay::fft_size_for(grid.points())? {
        1024 => peak_gate::<1024>(grid, band_window, sweep),
        2048 => peak_gate::<2048>(grid, band_window, sweep),
        _ => peak_gate::<4096>(grid, band_window, sweep),
    }
}

fn peak_gate<const M: usize>(
    grid: &Grid,
    band_window: WindowKind,
    sweep: &[Complex32],
) -> anyhow::Result<(f64, f64, String)>
where
    [Complex32; M]: Fft,
{
    let alias_free = grid.alias_free_s();
    // Only the band window matters for the impulse response; the gate is a placeholder.
    let provisional = GateConfig {
        grid: *grid,
        band_window,
        center_s: 0.0,
        span_s: 0.25 * alias_free,
        shape: WindowKind::Rectangular,
        renormalize: false,
    };
    let gate = Box::new(
        Gate::<M>::new(&provisional).map_err(|e| anyhow::anyhow!("provisional gate: {e}"))?,
    );
    let mut buf = vec![Complex32::new(0.0, 0.0); M];
    for (b, v) in buf.iter_mut().zip(sweep) {
        *b = *v;
    }
    let raw: Box<[Complex32; M]> = buf
        .into_boxed_slice()
        .try_into()
        .map_err(|_| anyhow::anyhow!("buffer size"))?;
    let mut ir: Box<[Complex32; M]> = Box::new([Complex32::new(0.0, 0.0); M]);
    gate.impulse_response(&raw, &mut ir);
    let mut peak = (0usize, -1.0f32);
    for (m, h) in ir.iter().enumerate() {
        if h.norm() > peak.1 {
            peak = (m, h.norm());
        }
    }
    if peak.1 <= 0.0 {
        bail!("no impulse-response peak to gate on (the sweep is all zero); give --gate-center-ns and --gate-span-ns");
    }
    let center_s = grid.time_s(M, peak.0);
    let mainlobe_s = band_window.mainlobe_width() / (grid.points() as f64 * grid.step_hz());
    let span_s = (4.0 * mainlobe_s)
        .min(0.5 * alias_free)
        .max(4.0 * grid.time_step_s(M));
    Ok((
        center_s,
        span_s,
        format!(
            "strongest impulse-response peak: centre on the peak at {:.3} ns, span four band-window main lobes ({:.3} ns)",
            center_s * 1e9,
            span_s * 1e9
        ),
    ))
}

fn gate_source(r: &Resolved, automatic: &str) -> String {
    let c = r.center_ns.map_or(automatic, |(_, o)| o.text());
    let s = r.span_ns.map_or(automatic, |(_, o)| o.text());
    if c == s {
        c.to_string()
    } else {
        format!("{c} (centre) + {s} (span)")
    }
}

/// A processed input, ready for the report.
#[derive(Debug, Clone)]
pub struct Processed {
    /// The report input.
    pub report: ReportInput,
    /// The gate used.
    pub gate: GateConfig,
    /// `"command line"`, `"settings file"`, `"planner"` or `"strongest impulse-response peak"`
    /// (two joined when centre and span came from different places).
    pub gate_source: String,
}

struct Discard;
impl Sink for Discard {
    fn send(&mut self, _bytes: &[u8]) {}
}

fn insert(settings: &mut Value, key: &str, v: Value) {
    if let Some(o) = settings.as_object_mut() {
        o.insert(key.into(), v);
    }
}

/// Processes a recording through the replay engine.
pub fn process_recording(r: &Resolved, path: &Path) -> anyhow::Result<Processed> {
    let rec = record::recover_file(path).with_context(|| format!("reading {}", path.display()))?;
    let h = rec
        .header()
        .context("the recording has no intact header record")?;
    let need_auto = r.center_ns.is_none() || r.span_ns.is_none();
    let (automatic, fallback_gate) = if h.scenario.is_some() {
        ("planner", None)
    } else if need_auto {
        let grid = Grid::new(h.grid.start_hz, h.grid.step_hz, h.grid.points)
            .map_err(|e| anyhow::anyhow!("recording's grid: {e}"))?;
        let sweeps: Vec<&[Complex32]> = rec
            .records
            .iter()
            .filter_map(|(_, x)| match x {
                Record::Sweep { s21, .. } if s21.len() == grid.points() => Some(&s21[..]),
                _ => None,
            })
            .collect();
        let Some(sw) = sweeps.get(strongest(&sweeps)) else {
            bail!("the recording has no sweeps to find a gate in");
        };
        (
            "strongest impulse-response peak",
            Some(gate_from_peak(&grid, r.band_window, sw)?),
        )
    } else {
        ("strongest impulse-response peak", None)
    };
    let opts = SetupOptions {
        band_window: r.band_window,
        gate_shape: r.gate_shape,
        center_s: r
            .center_ns
            .map(|(c, o)| (c * 1e-9, o.by("gate-center-ns", "gate_center_ns"))),
        span_s: r
            .span_ns
            .map(|(c, o)| (c * 1e-9, o.by("gate-span-ns", "gate_span_ns"))),
        fallback_gate,
        frequencies_hz: r.frequencies_hz.clone(),
    };
    let setup = replay::setup_with(h, &opts)?;
    let quit = AtomicBool::new(false);
    let o = replay::replay_with_setup(&rec, setup, &mut Discard, None, &quit)?;
    let mut report = o.report;
    let src = gate_source(r, automatic);
    insert(&mut report.settings, "input", json!("recording"));
    insert(&mut report.settings, "gate_source", json!(src));
    if let Some(f) = &r.frequencies_hz {
        insert(
            &mut report.settings,
            "pattern_frequencies_requested_hz",
            json!(f),
        );
    }
    Ok(Processed {
        report,
        gate: o.setup.gate,
        gate_source: src,
    })
}

fn wrap180(a: f64) -> f64 {
    (a + 180.0).rem_euclid(360.0) - 180.0
}

/// Processes a manifest: one bin per angle, each file's sweep gated on the FFT path.
pub fn process_manifest(r: &Resolved, path: &Path) -> anyhow::Result<Processed> {
    let m = Manifest::read(path)?;
    let scan = m.load(r.parameter, r.spacing)?;
    if scan.sweeps.is_empty() {
        bail!("{}: no sweeps", path.display());
    }
    let grid = scan.grid;
    let mut warnings = scan.warnings.clone();
    let requested = r.frequencies_hz.clone().unwrap_or_default();
    let indices = replay::snap_frequencies(&grid, &requested, &mut warnings, true);
    let need_auto = r.center_ns.is_none() || r.span_ns.is_none();
    let (auto_c, auto_s, mut rule) = if need_auto {
        let sweeps: Vec<&[Complex32]> = scan.sweeps.iter().map(|s| &s.values[..]).collect();
        let i = strongest(&sweeps);
        let (c, s, rule) = gate_from_peak(&grid, r.band_window, sweeps[i])?;
        let at = scan.sweeps.get(i).map_or(0.0, |s| s.angle_deg);
        (c, s, format!("{rule} (sweep at {at}°)"))
    } else {
        (0.0, 0.0, String::new())
    };
    let center_s = r.center_ns.map_or(auto_c, |(c, o)| {
        rule.push_str(&format!(
            "; centre set by {}",
            o.by("gate-center-ns", "gate_center_ns")
        ));
        c * 1e-9
    });
    let span_s = r.span_ns.map_or(auto_s, |(c, o)| {
        rule.push_str(&format!(
            "; span set by {}",
            o.by("gate-span-ns", "gate_span_ns")
        ));
        c * 1e-9
    });
    let gate = GateConfig {
        grid,
        band_window: r.band_window,
        center_s,
        span_s,
        shape: r.gate_shape,
        renormalize: true,
    };
    let fft_size = replay::fft_size_for(grid.points())?;
    let (bins, impulse) = match fft_size {
        1024 => gate_sweeps::<1024>(&gate, &scan.sweeps, &indices)?,
        2048 => gate_sweeps::<2048>(&gate, &scan.sweeps, &indices)?,
        _ => gate_sweeps::<4096>(&gate, &scan.sweeps, &indices)?,
    };
    let lo = scan
        .sweeps
        .iter()
        .map(|s| s.angle_deg)
        .fold(f64::INFINITY, f64::min);
    let hi = scan
        .sweeps
        .iter()
        .map(|s| s.angle_deg)
        .fold(f64::NEG_INFINITY, f64::max);
    let mut sorted: Vec<f64> = scan.sweeps.iter().map(|s| s.angle_deg).collect();
    sorted.sort_by(f64::total_cmp);
    let step = sorted
        .windows(2)
        .map(|w| w[1] - w[0])
        .fold(f64::INFINITY, f64::min);
    let full_circle = sorted.len() > 1 && hi - lo + step >= 360.0 - 1e-6;
    let src = gate_source(r, "strongest impulse-response peak");
    let frequencies_hz: Vec<f64> = indices.iter().map(|&i| grid.frequency_hz(i)).collect();
    let mut settings = json!({
        "input": "manifest",
        "grid": {
            "start_hz": grid.start_hz(),
            "step_hz": grid.step_hz(),
            "points": grid.points(),
            "alias_free_ns": grid.alias_free_s() * 1e9,
        },
        "fft_size": fft_size,
        "pattern_frequencies_hz": frequencies_hz,
        "pattern_grid_indices": indices,
        "bins": { "count": bins.len(), "one_per_manifest_angle": true, "full_circle": full_circle },
        "mode": "step-and-stop",
        "gate": {
            "center_ns": center_s * 1e9,
            "span_ns": span_s * 1e9,
            "band_window": describe_window(&gate.band_window),
            "shape": describe_window(&gate.shape),
            "renormalized": true,
            "rule": rule.trim_start_matches("; "),
        },
        "gate_source": src,
        "parameter": r.parameter.map_or("default (S21, or S11 for 1-port files)".to_string(), |p| p.to_string()),
        "truth": "none",
    });
    if let Some(f) = &r.frequencies_hz {
        insert(&mut settings, "pattern_frequencies_requested_hz", json!(f));
    }
    let report = ReportInput {
        title: format!("manifest {}", m.name()),
        source: path.display().to_string(),
        frequencies_hz,
        full_circle,
        bins,
        settings,
        counters: json!({ "files": scan.sweeps.len(), "sweeps_binned": scan.sweeps.len() }),
        warnings,
        impulse,
        gain: None,
    };
    Ok(Processed {
        report,
        gate,
        gate_source: src,
    })
}

type Gated = (Vec<ReportBin>, Option<ImpulseView>);

fn gate_sweeps<const M: usize>(
    cfg: &GateConfig,
    sweeps: &[crate::formats::manifest::AngleSweep],
    indices: &[usize],
) -> anyhow::Result<Gated>
where
    [Complex32; M]: Fft,
{
    let gate = Box::new(Gate::<M>::new(cfg).map_err(|e| anyhow::anyhow!("gate: {e}"))?);
    let zero = Complex32::new(0.0, 0.0);
    let mut raw: Box<[Complex32; M]> = Box::new([zero; M]);
    let mut out: Box<[Complex32; M]> = Box::new([zero; M]);
    let mut bins = Vec::with_capacity(sweeps.len());
    for s in sweeps {
        raw.fill(zero);
        for (b, v) in raw.iter_mut().zip(&s.values) {
            *b = *v;
        }
        let echo_db = gate.apply(&raw, &mut out);
        let values = indices
            .iter()
            .map(|&i| ReportValue {
                raw: c64(raw.get(i).copied().unwrap_or_default()),
                gated: c64(out.get(i).copied().unwrap_or_default()),
                truth: None,
            })
            .collect();
        bins.push(ReportBin {
            angle_deg: s.angle_deg,
            mean_deg: s.angle_deg,
            sweeps: 1,
            flags: 0,
            echo_db: Some(f64::from(echo_db)),
            values,
        });
    }
    // Impulse response of the sweep nearest 0°.
    let near = sweeps.iter().min_by(|a, b| {
        wrap180(a.angle_deg)
            .abs()
            .total_cmp(&wrap180(b.angle_deg).abs())
    });
    let impulse = near.map(|s| {
        raw.fill(zero);
        for (b, v) in raw.iter_mut().zip(&s.values) {
            *b = *v;
        }
        gate.impulse_response(&raw, &mut out);
        let grid = &cfg.grid;
        ImpulseView {
            angle_deg: s.angle_deg,
            sweeps: 1,
            time_ns: (0..M).map(|m| grid.time_s(M, m) * 1e9).collect(),
            magnitude: out.iter().map(|z| f64::from(z.norm())).collect(),
            gate: gate.gate_window().iter().map(|&x| f64::from(x)).collect(),
            gate_start_ns: (cfg.center_s - 0.5 * cfg.span_s) * 1e9,
            gate_stop_ns: (cfg.center_s + 0.5 * cfg.span_s) * 1e9,
        }
    });
    Ok((bins, impulse))
}

/// Processes the resolved input and writes the report folder.
pub fn process(r: &Resolved) -> anyhow::Result<Processed> {
    let mut p = match &r.input {
        Input::Manifest(m) => process_manifest(r, m)?,
        Input::Recording(rec) => process_recording(r, rec)?,
    };
    if let Some((table, reference)) = &r.gain {
        p.report.gain = Some(gain_reference(r, &p, table, reference)?);
    }
    report::write_report(&p.report, &r.out)
        .with_context(|| format!("writing the report to {}", r.out.display()))?;
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
    let gains =
        crate::formats::gain_table::GainTable::load(table).map_err(|e| anyhow::anyhow!("{e}"))?;
    let ts = crate::formats::touchstone::Touchstone::read(reference)
        .map_err(|e| anyhow::anyhow!("{e}"))?;
    let parameter = r
        .parameter
        .unwrap_or_else(|| crate::formats::touchstone::Parameter::default_for(ts.ports()));
    let sweep = ts
        .to_sweep(parameter, r.spacing)
        .map_err(|e| anyhow::anyhow!("{e}"))?;
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
    let one = [crate::formats::manifest::AngleSweep {
        angle_deg: 0.0,
        values: sweep.values,
        file: reference.to_path_buf(),
    }];
    let (bins, _) = match replay::fft_size_for(g.points())? {
        1024 => gate_sweeps::<1024>(&p.gate, &one, &indices)?,
        2048 => gate_sweeps::<2048>(&p.gate, &one, &indices)?,
        _ => gate_sweeps::<4096>(&p.gate, &one, &indices)?,
    };
    let values = &bins.first().context("gating the reference")?.values;
    let mut per_frequency = Vec::new();
    for (f, v) in p.report.frequencies_hz.iter().zip(values) {
        let g_ref = gains
            .gain_dbi(*f)
            .map_err(|e| anyhow::anyhow!("{}: at {f} Hz: {e}", table.display()))?;
        per_frequency.push((g_ref, crate::units::db(v.gated)));
    }
    Ok(report::GainReference {
        table: table.display().to_string(),
        measurement: reference.display().to_string(),
        per_frequency,
    })
}

/// Runs the command.
pub fn run(args: Args) -> anyhow::Result<()> {
    let r = resolve(&args)?;
    // The scan engine is large: run on a thread with room for it, as replay does.
    let r2 = r.clone();
    let p = std::thread::Builder::new()
        .name("process".into())
        .stack_size(16 << 20)
        .spawn(move || process(&r2))
        .context("starting the processing thread")?
        .join()
        .map_err(|_| anyhow::anyhow!("the processing thread failed"))??;
    for w in &p.report.warnings {
        eprintln!("warning: {w}");
    }
    eprintln!(
        "{} bins; gate centre {:.3} ns, span {:.3} ns ({}); report written to {}",
        p.report.bins.len(),
        p.gate.center_s * 1e9,
        p.gate.span_s * 1e9,
        p.gate_source,
        r.out.display()
    );
    Ok(())
}
