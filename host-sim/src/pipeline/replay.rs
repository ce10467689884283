//! `sweepgate replay REC`: streams a recording through the same scan engine the board runs,
//! shows the live preview, and writes the report.
//!
//! # What is built from the header
//!
//! - the frequency grid (start, step, points) and the FFT size M: the smallest of 1024, 2048
//!   and 4096 that holds the K points;
//! - the pattern frequencies, each taken to the nearest grid point (at most 8);
//! - the bin layout: the scenario's bin width, with bins centred where the simulator writes
//!   its truth — `start + (i + ½)·width` for a continuous scan, the step angles
//!   `start + i·step` for step-and-stop; a full turn gives a full-circle layout.
//!   Without a scenario: a full circle of the header's bin width starting at 0°;
//! - the gate, from the scenario geometry through the core planner
//!   ([`sweepgate::plan::plan`]): centre at the direct-path delay plus the cable delay, span
//!   2·(first echo's excess delay − half the band window's main lobe), so the gate closes half
//!   a main lobe before the first echo arrives. The band window is a Kaiser window for 50 dB
//!   sidelobes unless `--band-window` says otherwise; the gate shape is a Tukey window
//!   (α = 0.3) with renormalization. `--gate-center-ns` and `--gate-span-ns` override the
//!   planner (and are required when the recording has no scenario).
//!
//! # Streaming
//!
//! Position and sweep records are put in time order (a position at its timestamp, a sweep
//! at its end) and pushed into the [`Scan`]; the pace is the record time divided by
//! `--speed` (`--as-fast-as-possible`: no waiting). Every closed bin becomes a preview
//! record ([`BinResult::to_record`]), is framed by [`sweepgate::wire::preview::encode_frame`]
//! and travels as bytes to the preview, which decodes them (so the screen shows exactly
//! what a board would send); a status record follows every quarter second of scan time.
//! `--serve PORT` also sends the byte stream to TCP clients on 127.0.0.1:PORT (for
//! `sweepgate view`).

use std::collections::BTreeMap;
use std::io::Write;
use std::net::TcpListener;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::{self, Sender};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

use anyhow::{bail, Context};
use num_complex::Complex64;
use sweepgate::bins::{BinLayout, RevisitPolicy};
use sweepgate::fft::Fft;
use sweepgate::gate::GateConfig;
use sweepgate::grid::Grid;
use sweepgate::plan::{self, PlanInput};
use sweepgate::scan::{BinResult, Event, Scan, ScanConfig, ScanCounters, ScanMode, Warning};
use sweepgate::window::WindowKind;
use sweepgate::wire::preview::{encode_frame, Record as PreviewRecord, MAX_FRAME};
use sweepgate::Complex32;

use crate::formats::recording::{self as record, Header, Record, Recovered};
use crate::model::scenario::{Mode, Scenario};
use crate::output::report::{self, ImpulseView, ReportBin, ReportInput, ReportValue};
use crate::output::screen::{self as preview, Feed, Screen, PREVIEW_F};
use crate::pipeline::options::describe_window;

/// Bins the replay engine can hold.
pub const MAX_BINS: usize = 3600;

/// Options of `sweepgate replay`.
#[derive(clap::Args, Debug, Clone)]
pub struct Args {
    /// Recording to replay.
    pub rec: PathBuf,
    /// Pace: record time divided by this (2 = twice as fast as recorded).
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
    /// Gate centre, ns from the VNA's time zero (default: the planner's).
    #[arg(long, allow_negative_numbers = true)]
    pub gate_center_ns: Option<f64>,
    /// Gate span, ns (default: the planner's).
    #[arg(long, allow_negative_numbers = true)]
    pub gate_span_ns: Option<f64>,
    /// Band window: `kaiser:BETA`, `kaiser-sidelobe:DB`, `tukey:ALPHA`, `hann`, `hamming`,
    /// `blackman-harris` or `rectangular` (default: `kaiser-sidelobe:50`).
    #[arg(long)]
    pub band_window: Option<String>,
    /// Also serve the preview byte stream on 127.0.0.1:PORT.
    #[arg(long)]
    pub serve: Option<u16>,
    /// Also write the records as they are replayed to this recording (crash-safe, with the
    /// same flush and sync policy as `simulate`): a clean copy of what was recovered.
    #[arg(long)]
    pub record: Option<PathBuf>,
    /// With `--record`: print `written <offset> <records>` after each record reaches the file.
    #[arg(long, requires = "record")]
    pub progress_lines: bool,
}

impl Args {
    /// Options for a recording with every default and no waiting (for tests and tools).
    pub fn fast(rec: &Path) -> Self {
        Self {
            rec: rec.to_path_buf(),
            speed: 1.0,
            as_fast_as_possible: true,
            out: None,
            no_preview: true,
            gate_center_ns: None,
            gate_span_ns: None,
            band_window: None,
            serve: None,
            record: None,
            progress_lines: false,
        }
    }
}

/// The gate shape replay uses.
pub const GATE_SHAPE: WindowKind = WindowKind::Tukey { alpha: 0.3 };

/// Everything replay derives from the header and the options.
#[derive(Debug, Clone)]
pub struct Setup {
    /// Title for screens and plots.
    pub title: String,
    /// The sweep grid.
    pub grid: Grid,
    /// Pattern frequencies (on the grid), Hz.
    pub frequencies_hz: Vec<f64>,
    /// Their grid indices.
    pub indices: Vec<usize>,
    /// Bin layout.
    pub layout: BinLayout,
    /// The gate.
    pub gate: GateConfig,
    /// How the gate was chosen, in words.
    pub gate_rule: String,
    /// Planner findings and other set-up remarks.
    pub remarks: Vec<String>,
    /// Continuous or step-and-stop.
    pub mode: ScanMode,
    /// Settle time for step-and-stop, µs.
    pub settle_us: u32,
    /// Top positioner speed of the scenario, deg/s.
    pub speed_deg_s: Option<f64>,
    /// FFT size.
    pub fft_size: usize,
    /// Where to write the replayed records (`replay --record`), and whether to print a
    /// progress line per record.
    pub record_to: Option<(PathBuf, bool)>,
}

fn layout_for(h: &Header) -> anyhow::Result<BinLayout> {
    let w = h
        .scenario
        .as_ref()
        .map(|s| s.bin_width_deg())
        .or(h.bin_width_deg)
        .unwrap_or(1.0);
    let wf = w as f32;
    let Some(s) = &h.scenario else {
        return BinLayout::full_circle(0.0, wf).map_err(|e| anyhow::anyhow!("bin layout: {e}"));
    };
    let q = &s.positioner;
    let lo = q.start_deg.min(q.stop_deg);
    let span = (q.stop_deg - q.start_deg).abs();
    let n = ((span / w) + 1e-9).floor() as usize;
    let step = q.mode == Mode::Step;
    let r = if span >= 360.0 - 1e-6 {
        let first = if step { lo } else { lo + 0.5 * w };
        BinLayout::full_circle(first as f32, wf)
    } else if step {
        BinLayout::sector(lo as f32, (lo + n as f64 * w) as f32, wf)
    } else {
        BinLayout::sector(
            (lo + 0.5 * w) as f32,
            (lo + (n as f64 - 0.5) * w) as f32,
            wf,
        )
    };
    r.map_err(|e| anyhow::anyhow!("bin layout for the scan: {e}"))
}

/// The gate and frequency choices a set-up is built from (replay fills it from its
/// options; `sweepgate process` from its options and settings file).
#[derive(Debug, Clone)]
pub struct SetupOptions {
    /// Band window.
    pub band_window: WindowKind,
    /// Gate shape.
    pub gate_shape: WindowKind,
    /// Gate centre, s, overriding the automatic gate, with where it came from in words
    /// (e.g. `--gate-center-ns`).
    pub center_s: Option<(f64, String)>,
    /// Gate span, s, overriding the automatic gate, with where it came from.
    pub span_s: Option<(f64, String)>,
    /// The automatic gate when the header has no scenario to plan from: centre, span and
    /// the rule in words.
    pub fallback_gate: Option<(f64, f64, String)>,
    /// Pattern frequencies, Hz, instead of the header's.
    pub frequencies_hz: Option<Vec<f64>>,
}

/// Builds the set-up from a header and the options.
pub fn setup(h: &Header, args: &Args) -> anyhow::Result<Setup> {
    let band_window = match &args.band_window {
        Some(s) => crate::pipeline::options::parse_window(s)
            .map_err(|e| anyhow::anyhow!("--band-window: {e}"))?,
        None => crate::pipeline::options::default_band_window(),
    };
    let opts = SetupOptions {
        band_window,
        gate_shape: GATE_SHAPE,
        center_s: args
            .gate_center_ns
            .map(|c| (c * 1e-9, "--gate-center-ns".to_string())),
        span_s: args
            .gate_span_ns
            .map(|c| (c * 1e-9, "--gate-span-ns".to_string())),
        fallback_gate: None,
        frequencies_hz: None,
    };
    setup_with(h, &opts)
}

/// The FFT size for K points: the smallest of 1024, 2048 and 4096 that holds them.
pub fn fft_size_for(k: usize) -> anyhow::Result<usize> {
    [1024usize, 2048, 4096]
        .into_iter()
        .find(|&m| k <= m)
        .with_context(|| format!("{k} points per sweep: more than the largest FFT (4096)"))
}

/// Pattern frequencies at their nearest grid points, at most [`PREVIEW_F`] (the first
/// ones), with a remark for each one that moved or was dropped. Empty input: the centre
/// point.
pub fn snap_frequencies(
    grid: &Grid,
    requested_hz: &[f64],
    remarks: &mut Vec<String>,
    report_moves: bool,
) -> Vec<usize> {
    let mut indices = Vec::new();
    for f in requested_hz {
        match grid.nearest_index(*f) {
            Some(i) => {
                let g = grid.frequency_hz(i);
                if report_moves && g != *f {
                    remarks.push(format!(
                        "pattern frequency {f} Hz taken at the nearest grid point, {g} Hz"
                    ));
                }
                indices.push(i);
            }
            None if report_moves => remarks.push(format!(
                "pattern frequency {f} Hz is not on or near the grid; left out"
            )),
            None => {}
        }
    }
    if indices.is_empty() {
        indices.push(grid.points() / 2);
    }
    if indices.len() > PREVIEW_F {
        remarks.push(format!(
            "only the first {PREVIEW_F} of {} pattern frequencies are replayed",
            indices.len()
        ));
        indices.truncate(PREVIEW_F);
    }
    indices
}

/// Builds the set-up from a header and explicit choices.
pub fn setup_with(h: &Header, opts: &SetupOptions) -> anyhow::Result<Setup> {
    let grid = Grid::new(h.grid.start_hz, h.grid.step_hz, h.grid.points)
        .map_err(|e| anyhow::anyhow!("recording's grid: {e}"))?;
    if h.sweep_format != record::SWEEP_FORMAT {
        bail!("unknown sweep format {:?}", h.sweep_format);
    }
    let mut remarks = Vec::new();
    let indices = match &opts.frequencies_hz {
        Some(f) => snap_frequencies(&grid, f, &mut remarks, true),
        None => snap_frequencies(&grid, &h.pattern_frequencies_hz, &mut remarks, false),
    };
    let frequencies_hz = indices.iter().map(|&i| grid.frequency_hz(i)).collect();
    let layout = layout_for(h)?;
    let band_window = opts.band_window;
    let (mut center_s, mut span_s) = (None, None);
    let mut gate_rule = String::new();
    if let Some(s) = &h.scenario {
        let (c, sp, rule) = planned_gate(s, &grid, band_window, &mut remarks)?;
        center_s = c;
        span_s = sp;
        gate_rule = rule;
    } else if let Some((c, sp, rule)) = &opts.fallback_gate {
        center_s = Some(*c);
        span_s = Some(*sp);
        gate_rule = rule.clone();
    }
    if let Some((c, by)) = &opts.center_s {
        center_s = Some(*c);
        gate_rule.push_str(&format!("; centre set by {by}"));
    }
    if let Some((sp, by)) = &opts.span_s {
        span_s = Some(*sp);
        gate_rule.push_str(&format!("; span set by {by}"));
    }
    let (Some(center_s), Some(span_s)) = (center_s, span_s) else {
        bail!("no gate: the recording has no scenario to plan one from; give --gate-center-ns and --gate-span-ns");
    };
    let gate = GateConfig {
        grid,
        band_window,
        center_s,
        span_s,
        shape: opts.gate_shape,
        renormalize: true,
    };
    let fft_size = fft_size_for(grid.points())?;
    let (mode, settle_us, speed) = match &h.scenario {
        Some(s) if s.positioner.mode == Mode::Step => (
            ScanMode::StepAndStop {
                reject_moving: false,
            },
            ((s.positioner.settle_s * 0.5 * 1e6) as u32).clamp(10_000, 200_000),
            Some(s.positioner.speed_deg_s),
        ),
        Some(s) => (
            ScanMode::Continuous,
            200_000,
            Some(s.positioner.speed_deg_s),
        ),
        None => (ScanMode::Continuous, 200_000, None),
    };
    let title = h
        .scenario
        .as_ref()
        .map(|s| s.name.clone())
        .unwrap_or_else(|| {
            if h.source.is_empty() {
                "recording".into()
            } else {
                h.source.clone()
            }
        });
    Ok(Setup {
        title,
        grid,
        frequencies_hz,
        indices,
        layout,
        gate,
        gate_rule: gate_rule.trim_start_matches("; ").to_string(),
        remarks,
        mode,
        settle_us,
        speed_deg_s: speed,
        fft_size,
        record_to: None,
    })
}

/// A planned gate: centre and span, s, and the rule in words.
pub type PlannedGate = (Option<f64>, Option<f64>, String);

/// The gate the core planner ([`sweepgate::plan::plan`]) gives for a scenario, with the
/// same room and AUT-size rule as `sweepgate plan`; planner findings go to `remarks`.
pub fn planned_gate(
    s: &Scenario,
    grid: &Grid,
    band_window: WindowKind,
    remarks: &mut Vec<String>,
) -> anyhow::Result<PlannedGate> {
    // The same room and AUT-size rule as `sweepgate plan`.
    let room = crate::pipeline::plan::room_geometry(s);
    let planes = &room.planes[..room.planes.len().min(plan::MAX_PLANES)];
    let scatterers = &room.scatterers[..room.scatterers.len().min(plan::MAX_SCATTERERS)];
    let (aut_size_m, _) =
        crate::pipeline::plan::aut_size_m(s, &crate::pipeline::plan::Overrides::default());
    let input = PlanInput {
        grid: *grid,
        aut_size_m,
        aut: room.aut,
        probe: room.probe,
        planes,
        scatterers,
        band_window,
        bin_step_deg: s.bin_width_deg(),
        sweep_duration_s: s.sweep.sweep_duration_s,
        cable_delay_s: s.range.cable_delay_s,
        aut_fractional_bandwidth: None,
        longest_path_m: None,
        rotation_deg_s: Some(s.positioner.speed_deg_s),
    };
    let p = plan::plan(&input).map_err(|e| anyhow::anyhow!("planning the gate: {e}"))?;
    for f in &p.findings {
        remarks.push(format!("planner: {f}"));
    }
    match p.gate {
        Some(g) => Ok((
            Some(g.center_s),
            Some(g.span_s),
            format!(
                "planner: centre at the direct path ({:.3} ns incl. cable), closing half a band-window main lobe ({:.3} ns) before the first echo",
                g.center_s * 1e9,
                p.mainlobe_s * 1e9
            ),
        )),
        None => {
            // No echo to avoid (or none separable): hold the direct path's main lobe and a
            // margin, within the alias-free range.
            let span = (4.0 * p.mainlobe_s).min(0.5 * grid.alias_free_s());
            remarks.push(format!(
                "no separable echo: gate span set to four band-window main lobes ({:.3} ns)",
                span * 1e9
            ));
            Ok((
                Some(p.direct_delay_s),
                Some(span),
                "centre at the direct path; span four main lobes (no separable echo)".into(),
            ))
        }
    }
}

/// The replayed scan: the bins for the report plus everything the summary needs.
#[derive(Debug, Clone)]
pub struct Outcome {
    /// The set-up used.
    pub setup: Setup,
    /// The report input (bins, truth, impulse response, settings).
    pub report: ReportInput,
    /// Final engine counters.
    pub counters: ScanCounters,
    /// Engine warnings by kind.
    pub warnings: BTreeMap<String, u32>,
    /// Preview bytes sent.
    pub preview_bytes: u64,
    /// Stopped early by the user.
    pub interrupted: bool,
}

/// Where replay sends its preview bytes.
pub trait Sink {
    /// Takes a chunk of preview frame bytes.
    fn send(&mut self, bytes: &[u8]);
}

impl Sink for Vec<u8> {
    fn send(&mut self, bytes: &[u8]) {
        self.extend_from_slice(bytes);
    }
}

struct ChannelSink {
    tx: Sender<Feed>,
    clients: Option<Arc<Mutex<Vec<std::net::TcpStream>>>>,
}

impl Sink for ChannelSink {
    fn send(&mut self, bytes: &[u8]) {
        let _ = self.tx.send(Feed::Bytes(bytes.to_vec()));
        if let Some(c) = &self.clients {
            if let Ok(mut v) = c.lock() {
                v.retain_mut(|s| s.write_all(bytes).is_ok());
            }
        }
    }
}

/// Replays recovered records through the scan engine, sending preview frames to `sink`.
/// `pace`: seconds of wall time per second of record time (`None`: no waiting).
pub fn replay_records(
    rec: &Recovered,
    args: &Args,
    sink: &mut dyn Sink,
    pace: Option<f64>,
    quit: &AtomicBool,
) -> anyhow::Result<Outcome> {
    let h = rec
        .header()
        .context("the recording has no intact header record")?;
    let mut s = setup(h, args)?;
    s.record_to = args.record.clone().map(|p| (p, args.progress_lines));
    replay_with_setup(rec, s, sink, pace, quit)
}

/// Replays recovered records through the scan engine built from `setup` (see
/// [`replay_records`]).
pub fn replay_with_setup(
    rec: &Recovered,
    s: Setup,
    sink: &mut dyn Sink,
    pace: Option<f64>,
    quit: &AtomicBool,
) -> anyhow::Result<Outcome> {
    let h = rec
        .header()
        .context("the recording has no intact header record")?;
    match s.fft_size {
        1024 => run_scan::<1024>(rec, h, s, sink, pace, quit),
        2048 => run_scan::<2048>(rec, h, s, sink, pace, quit),
        _ => run_scan::<4096>(rec, h, s, sink, pace, quit),
    }
}

/// A closed bin as a report bin (truth not yet known).
pub fn report_bin<const F: usize>(r: &BinResult<F>, frequencies: usize) -> ReportBin {
    let values = (0..frequencies.min(F))
        .map(|j| ReportValue {
            raw: c64(r.raw[j]),
            gated: c64(r.gated[j]),
            truth: None,
        })
        .collect();
    ReportBin {
        angle_deg: f64::from(r.nominal_deg),
        mean_deg: f64::from(r.mean_deg),
        sweeps: r.sweeps,
        flags: r.flags.0,
        echo_db: r.echo_db.map(f64::from),
        values,
    }
}

fn warning_name(w: &Warning) -> String {
    match w {
        Warning::SweepRejected(r) => format!("sweep refused: {r}"),
        Warning::AngleRejected(r) => format!("angle sample refused: {r}"),
        Warning::TakenWhileMoving => "sweep taken while moving".into(),
        Warning::Extrapolated => "sweep angle extrapolated".into(),
        Warning::TrackerResynced => "tracker resynchronised".into(),
        Warning::Stalled => "positioner stalled".into(),
    }
}

fn run_scan<const M: usize>(
    rec: &Recovered,
    h: &Header,
    setup: Setup,
    sink: &mut dyn Sink,
    pace: Option<f64>,
    quit: &AtomicBool,
) -> anyhow::Result<Outcome>
where
    [Complex32; M]: Fft,
{
    let mut cfg = ScanConfig::new(setup.layout);
    cfg.mode = setup.mode;
    cfg.revisit = RevisitPolicy::Replace;
    cfg.track.settle_time_us = setup.settle_us;
    if let Some(v) = setup.speed_deg_s {
        cfg.track.max_speed_deg_s = cfg.track.max_speed_deg_s.max((3.0 * v) as f32);
    }
    let mut idx = [setup.indices[0]; PREVIEW_F];
    for (slot, &i) in idx.iter_mut().zip(&setup.indices) {
        *slot = i;
    }
    let mut scan: Box<Scan<M, PREVIEW_F, MAX_BINS>> = Box::new(
        Scan::new(&setup.gate, idx, cfg).map_err(|e| anyhow::anyhow!("scan set-up: {e}"))?,
    );
    let nf = setup.indices.len();
    let k = setup.grid.points();

    // `--record`: the header and truth first, then each record as it is streamed.
    let mut copy = match &setup.record_to {
        None => None,
        Some((path, lines)) => {
            let mut w = record::Writer::create(path, record::SyncPolicy::default())
                .with_context(|| format!("creating {}", path.display()))?;
            if *lines {
                w.set_on_written(|offset, n| println!("written {offset} {n}"));
            }
            for (_, r) in &rec.records {
                if matches!(r, Record::Header(_) | Record::Truth { .. }) {
                    w.write(r)
                        .with_context(|| format!("writing {}", path.display()))?;
                }
            }
            Some((w, path.clone()))
        }
    };

    // Records in time order: positions at their time, sweeps at their end.
    let mut order: Vec<(u64, usize)> = rec
        .records
        .iter()
        .enumerate()
        .filter_map(|(i, (_, r))| match r {
            Record::Position { t_us, .. } => Some((*t_us, i)),
            Record::Sweep { end_us, .. } => Some((*end_us, i)),
            _ => None,
        })
        .collect();
    order.sort_by_key(|&(t, _)| t);

    let boresight = setup.layout.index_of(0.0);
    let mut bore_sum = vec![Complex32::new(0.0, 0.0); k];
    let mut bore_n = 0u32;
    let mut bore_done = false;

    let mut results: BTreeMap<u16, ReportBin> = BTreeMap::new();
    let mut warnings: BTreeMap<String, u32> = BTreeMap::new();
    let mut seq: u16 = 0;
    let mut frame = [0u8; MAX_FRAME];
    let mut bytes_out = 0u64;
    let mut emit = |r: &PreviewRecord<PREVIEW_F>, sink: &mut dyn Sink, seq: &mut u16| {
        if let Ok(n) = encode_frame(r, *seq, &mut frame) {
            sink.send(&frame[..n]);
            bytes_out += n as u64;
        }
        *seq = seq.wrapping_add(1);
    };
    let mut take = |ev: sweepgate::scan::Events<PREVIEW_F>,
                    sink: &mut dyn Sink,
                    seq: &mut u16,
                    emit: &mut dyn FnMut(&PreviewRecord<PREVIEW_F>, &mut dyn Sink, &mut u16)|
     -> Vec<u16> {
        let mut closed = Vec::new();
        for e in ev {
            match e {
                Event::BinClosed(r) => {
                    emit(&PreviewRecord::Bin(r.to_record()), sink, seq);
                    closed.push(r.index);
                    results.insert(r.index, report_bin(&r, nf));
                }
                Event::Warning(w) => *warnings.entry(warning_name(&w)).or_insert(0) += 1,
                Event::Finished(_) => {}
            }
        }
        closed
    };

    let start = Instant::now();
    let mut next_status_us = 0u64;
    let mut interrupted = false;
    // A sweep waits until the positioner has reported at or past its end, so its angle is
    // interpolated rather than extrapolated (the last sweeps go in before the end).
    let mut pending: std::collections::VecDeque<usize> = std::collections::VecDeque::new();
    let push_sweep = |scan: &mut Scan<M, PREVIEW_F, MAX_BINS>,
                      i: usize,
                      bore_sum: &mut Vec<Complex32>,
                      bore_n: &mut u32,
                      bore_done: bool|
     -> sweepgate::scan::Events<PREVIEW_F> {
        let Some((
            _,
            Record::Sweep {
                start_us,
                end_us,
                s21,
                ..
            },
        )) = rec.records.get(i)
        else {
            return sweepgate::scan::Events::new();
        };
        let before = scan.counters().sweeps_binned;
        let ev = scan.push_sweep(*start_us, *end_us, s21);
        if !bore_done && scan.counters().sweeps_binned > before && s21.len() == k {
            let mid = start_us + (end_us - start_us) / 2;
            if let Ok(a) = scan.tracker().angle_at(mid) {
                if boresight.is_some() && setup.layout.index_of(a.angle_deg) == boresight {
                    for (s, v) in bore_sum.iter_mut().zip(s21) {
                        *s += *v;
                    }
                    *bore_n += 1;
                }
            }
        }
        ev
    };
    let sweep_end = |i: usize| match rec.records.get(i) {
        Some((_, Record::Sweep { end_us, .. })) => *end_us,
        _ => 0,
    };
    for &(t_us, i) in &order {
        if quit.load(Ordering::Relaxed) {
            interrupted = true;
            break;
        }
        if let (Some((w, path)), Some((_, r))) = (copy.as_mut(), rec.records.get(i)) {
            w.write(r)
                .with_context(|| format!("writing {}", path.display()))?;
        }
        if let Some(p) = pace {
            let due = Duration::from_secs_f64(t_us as f64 * 1e-6 * p);
            let now = start.elapsed();
            if due > now {
                std::thread::sleep(due - now);
            }
        }
        match rec.records.get(i) {
            Some((
                _,
                Record::Position {
                    t_us, angle_deg, ..
                },
            )) => {
                let ev = scan.push_angle(*t_us, *angle_deg as f32);
                let closed = take(ev, sink, &mut seq, &mut emit);
                if bore_n > 0 && boresight.is_some_and(|b| closed.contains(&b)) {
                    bore_done = true;
                }
                while let Some(&j) = pending.front() {
                    if sweep_end(j) > *t_us {
                        break;
                    }
                    pending.pop_front();
                    let ev = push_sweep(&mut scan, j, &mut bore_sum, &mut bore_n, bore_done);
                    let closed = take(ev, sink, &mut seq, &mut emit);
                    if bore_n > 0 && boresight.is_some_and(|b| closed.contains(&b)) {
                        bore_done = true;
                    }
                }
            }
            Some((_, Record::Sweep { .. })) => pending.push_back(i),
            _ => continue,
        }
        if t_us >= next_status_us {
            emit(&PreviewRecord::Status(scan.status()), sink, &mut seq);
            next_status_us = t_us + 250_000;
        }
    }
    while let Some(j) = pending.pop_front() {
        if interrupted {
            break;
        }
        let ev = push_sweep(&mut scan, j, &mut bore_sum, &mut bore_n, bore_done);
        take(ev, sink, &mut seq, &mut emit);
    }
    let ev = scan.finish();
    take(ev, sink, &mut seq, &mut emit);
    emit(&PreviewRecord::Status(scan.status()), sink, &mut seq);
    if let Some((w, path)) = copy {
        w.finish()
            .with_context(|| format!("finishing {}", path.display()))?;
    }
    let counters = scan.counters();

    // Truth at each bin.
    let truth_source = attach_truth(rec, h, &setup, &mut results);

    // Impulse response at the bin nearest boresight.
    let impulse = if bore_n > 0 {
        let mut buf = [Complex32::new(0.0, 0.0); M];
        let inv = 1.0 / bore_n as f32;
        for (b, s) in buf.iter_mut().zip(&bore_sum) {
            *b = *s * inv;
        }
        let mut ir = [Complex32::new(0.0, 0.0); M];
        scan.gate().impulse_response(&buf, &mut ir);
        let g = scan.gate().gate_window();
        let grid = &setup.grid;
        Some(ImpulseView {
            angle_deg: boresight.map_or(0.0, |b| f64::from(setup.layout.nominal_deg(b))),
            sweeps: bore_n,
            time_ns: (0..M).map(|m| grid.time_s(M, m) * 1e9).collect(),
            magnitude: ir.iter().map(|z| f64::from(z.norm())).collect(),
            gate: g.iter().map(|&x| f64::from(x)).collect(),
            gate_start_ns: (setup.gate.center_s - 0.5 * setup.gate.span_s) * 1e9,
            gate_stop_ns: (setup.gate.center_s + 0.5 * setup.gate.span_s) * 1e9,
        })
    } else {
        None
    };

    let mut warn_lines: Vec<String> = setup.remarks.clone();
    for d in &rec.damage {
        warn_lines.push(format!(
            "recording damaged at byte {}: {} bytes skipped ({})",
            d.offset, d.skipped, d.fault
        ));
    }
    if !matches!(rec.stop, record::Stop::Complete) {
        warn_lines.push(format!("recording: {}", rec.describe_stop()));
    }
    for (w, n) in &warnings {
        warn_lines.push(format!("{n} × {w}"));
    }
    if interrupted {
        warn_lines.push("replay stopped early by the user".into());
    }

    let settings = serde_json::json!({
        "grid": {
            "start_hz": setup.grid.start_hz(),
            "step_hz": setup.grid.step_hz(),
            "points": setup.grid.points(),
            "alias_free_ns": setup.grid.alias_free_s() * 1e9,
        },
        "fft_size": M,
        "pattern_frequencies_hz": setup.frequencies_hz,
        "pattern_grid_indices": setup.indices,
        "bins": {
            "width_deg": setup.layout.step_deg(),
            "count": setup.layout.count(),
            "first_centre_deg": setup.layout.nominal_deg(0),
            "full_circle": setup.layout.is_full_circle(),
        },
        "mode": match setup.mode { ScanMode::Continuous => "continuous", ScanMode::StepAndStop { .. } => "step-and-stop" },
        "gate": {
            "center_ns": setup.gate.center_s * 1e9,
            "span_ns": setup.gate.span_s * 1e9,
            "band_window": describe_window(&setup.gate.band_window),
            "shape": describe_window(&setup.gate.shape),
            "renormalized": setup.gate.renormalize,
            "rule": setup.gate_rule,
        },
        "truth": truth_source,
        "seed": h.seed,
        "source": h.source,
        "software": h.software,
    });
    let counters_json = serde_json::json!({
        "sweeps_pushed": counters.sweeps_pushed,
        "sweeps_binned": counters.sweeps_binned,
        "sweeps_rejected": counters.sweeps_rejected(),
        "sweeps_rejected_by": sweepgate::error::SweepReject::ALL.iter().zip(counters.sweeps_rejected_by.iter())
            .filter(|(_, n)| **n > 0)
            .map(|(r, n)| (format!("{r}"), serde_json::json!(n)))
            .collect::<serde_json::Map<_, _>>(),
        "sweeps_taken_while_moving": counters.sweeps_moving,
        "sweeps_extrapolated": counters.sweeps_extrapolated,
        "angles_pushed": counters.angles_pushed,
        "angles_accepted": counters.angles_accepted,
        "angles_rejected": counters.angles_rejected(),
        "bins_closed": counters.bins_closed,
        "preview_bytes": bytes_out,
        "recording_records": rec.records.len(),
        "recording_damage": rec.damage.len(),
    });
    let report = ReportInput {
        title: setup.title.clone(),
        source: h.source.clone(),
        frequencies_hz: setup.frequencies_hz.clone(),
        full_circle: setup.layout.is_full_circle(),
        bins: results.into_values().collect(),
        settings,
        counters: counters_json,
        warnings: warn_lines,
        impulse,
        gain: None,
    };
    Ok(Outcome {
        setup,
        report,
        counters,
        warnings,
        preview_bytes: bytes_out,
        interrupted,
    })
}

/// Widens a single-precision value.
pub fn c64(z: Complex32) -> Complex64 {
    Complex64::new(f64::from(z.re), f64::from(z.im))
}

fn wrap180(a: f64) -> f64 {
    (a + 180.0).rem_euclid(360.0) - 180.0
}

/// Fills in the truth of every bin: from truth records at the bin centres, else from the
/// scenario's free-space model at the bin centres. Returns where it came from.
fn attach_truth(
    rec: &Recovered,
    h: &Header,
    setup: &Setup,
    bins: &mut BTreeMap<u16, ReportBin>,
) -> String {
    let truths: Vec<(f64, &Vec<(f64, Complex32)>)> = rec
        .records
        .iter()
        .filter_map(|(_, r)| match r {
            Record::Truth { angle_deg, values } => Some((*angle_deg, values)),
            _ => None,
        })
        .collect();
    let tol = 1e-3 * f64::from(setup.layout.step_deg());
    let value_at = |vals: &Vec<(f64, Complex32)>, f: f64| {
        vals.iter()
            .find(|(fh, _)| (fh - f).abs() <= 0.5 * setup.grid.step_hz())
            .map(|(_, v)| c64(*v))
    };
    let mut all = !bins.is_empty();
    for b in bins.values() {
        if !truths
            .iter()
            .any(|(a, _)| wrap180(a - b.angle_deg).abs() <= tol)
        {
            all = false;
            break;
        }
    }
    if all && !truths.is_empty() {
        for b in bins.values_mut() {
            if let Some((_, vals)) = truths
                .iter()
                .find(|(a, _)| wrap180(a - b.angle_deg).abs() <= tol)
            {
                for (v, f) in b.values.iter_mut().zip(&setup.frequencies_hz) {
                    v.truth = value_at(vals, *f);
                }
            }
        }
        return "truth records at the bin centres".into();
    }
    if let Some(s) = &h.scenario {
        let angles: Vec<f64> = bins.values().map(|b| b.angle_deg).collect();
        let rows = crate::model::room::truth(s, &setup.frequencies_hz, &angles);
        for (b, row) in bins.values_mut().zip(rows) {
            for (v, t) in b.values.iter_mut().zip(row) {
                v.truth = Some(t);
            }
        }
        return "the scenario's free-space model at the bin centres (the truth records are at other angles)".into();
    }
    "none".into()
}

/// Reads a recording, replays it with the preview (or a progress line), and writes the
/// report. Returns the outcome and the report folder.
pub fn replay_file(args: &Args) -> anyhow::Result<(Outcome, PathBuf)> {
    let rec = record::recover_file(&args.rec)
        .with_context(|| format!("reading {}", args.rec.display()))?;
    let out_dir = args.out.clone().unwrap_or_else(|| default_out(&args.rec));
    let pace = if args.as_fast_as_possible {
        None
    } else {
        if !(args.speed.is_finite() && args.speed > 0.0) {
            bail!("--speed must be a positive number");
        }
        Some(1.0 / args.speed)
    };
    let h = rec
        .header()
        .context("the recording has no intact header record")?;
    let s = setup(h, args)?;
    let mut screen = Screen::new(s.title.clone());
    screen.grid = Some(s.grid);
    screen.frequencies = Some(s.indices.len());
    screen.total_bins = Some(s.layout.count());
    for d in &rec.damage {
        screen.notes.push(format!(
            "recording damaged at byte {}: {} bytes skipped",
            d.offset, d.skipped
        ));
    }
    if !matches!(rec.stop, record::Stop::Complete) {
        screen.notes.push(rec.describe_stop());
    }

    let clients = match args.serve {
        Some(port) => {
            let l = TcpListener::bind(("127.0.0.1", port))
                .with_context(|| format!("listening on 127.0.0.1:{port}"))?;
            eprintln!(
                "serving the preview stream on {}",
                l.local_addr()
                    .map_or(format!("port {port}"), |a| a.to_string())
            );
            let c: Arc<Mutex<Vec<std::net::TcpStream>>> = Arc::default();
            let c2 = Arc::clone(&c);
            std::thread::spawn(move || {
                for s in l.incoming().flatten() {
                    if let Ok(mut v) = c2.lock() {
                        v.push(s);
                    }
                }
            });
            Some(c)
        }
        None => None,
    };

    let (tx, rx) = mpsc::channel();
    let quit = Arc::new(AtomicBool::new(false));
    let live = !args.no_preview && preview::have_terminal();
    let worker = {
        let quit = Arc::clone(&quit);
        let args = args.clone();
        let rec = rec.clone();
        let clients = clients.clone();
        std::thread::Builder::new()
            .name("replay".into())
            .stack_size(16 << 20)
            .spawn(move || {
                let mut sink = ChannelSink {
                    tx: tx.clone(),
                    clients,
                };
                let r = replay_records(&rec, &args, &mut sink, pace, &quit);
                let _ = tx.send(Feed::End);
                r
            })
            .context("starting the replay thread")?
    };
    if live {
        preview::run_terminal(&rx, &mut screen, &quit, Duration::from_millis(1500))
            .context("terminal preview")?;
        quit.store(true, Ordering::Relaxed);
        // Drain what is left so the worker can finish.
        while let Ok(f) = rx.recv() {
            screen.take(f);
        }
    } else {
        preview::run_plain(&rx, &mut screen, true);
    }
    let outcome = worker
        .join()
        .map_err(|_| anyhow::anyhow!("the replay thread failed"))??;
    if let Some(c) = &clients {
        if let Ok(mut v) = c.lock() {
            for s in v.iter_mut() {
                let _ = s.flush();
                let _ = s.shutdown(std::net::Shutdown::Both);
            }
        }
    }
    for line in screen.summary_lines() {
        eprintln!("{line}");
    }
    report::write_report(&outcome.report, &out_dir)
        .with_context(|| format!("writing the report to {}", out_dir.display()))?;
    Ok((outcome, out_dir))
}

/// `<stem>-report/` next to the recording.
pub fn default_out(rec: &Path) -> PathBuf {
    let stem = rec
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "recording".into());
    rec.with_file_name(format!("{stem}-report"))
}

/// Runs the command.
pub fn run(args: Args) -> anyhow::Result<()> {
    let (o, dir) = replay_file(&args)?;
    eprintln!(
        "{} bins closed; report written to {}",
        o.counters.bins_closed,
        dir.display()
    );
    Ok(())
}
