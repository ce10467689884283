//! Streaming a recording through the scan engine, as `replay` and `process` both do.
//!
//! Position and sweep records are put in time order (a position at its timestamp, a sweep
//! at its end; records of equal time keep their order in the file) and fed to the
//! [`Engine`], which holds each sweep until the positioner has reported at or past its end.
//! The pace is the record time times `pace` (`None`: no waiting), counted from the first
//! record; a wait is never longer than [`MAX_PACED_WAIT_S`] and a paced replay that would
//! take longer than [`MAX_PACED_REPLAY_S`] is refused before it starts. Every closed bin becomes a
//! preview record ([`sweepgate::scan::BinResult::to_record`]), framed by
//! [`sweepgate::wire::preview::encode_frame`] and sent as bytes to a [`Sink`]; a status
//! record follows every quarter second of scan time. At the end the bins get their truth
//! (truth records at the bin centers, else the scenario's free-space model) and everything
//! becomes the report input.

use std::collections::BTreeMap;
use std::path::PathBuf;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant};

use anyhow::Context;
use sweepgate::error::SweepReject;
use sweepgate::metrics::wrap_deg;
use sweepgate::scan::{Event, ScanCounters};
use sweepgate::wire::preview::{encode_frame, PreviewRecord};
use sweepgate::Complex32;

use crate::formats::recording::{self as record, Header, Record, Recovered, Writer};
use crate::limits::{MAX_FRAME_BYTES, MAX_FREQUENCIES, MAX_PACED_REPLAY_S, MAX_PACED_WAIT_S};
use crate::output::export::Bands;
use crate::output::report::{ReportBin, ReportInput};
use crate::pipeline::engine::Engine;
use crate::pipeline::setup::Setup;
use crate::pipeline::summary::{Counters, Settings};
use crate::pipeline::transform::c64;

/// Scan time between status records, µs.
pub const STATUS_INTERVAL_US: u64 = 250_000;

/// The refusal of a file without an intact recording header, naming the file once.
pub fn no_header(path: &std::path::Path) -> String {
    format!(
        "{}: no intact recording header (not a recording, or its start is lost)",
        path.display()
    )
}

/// Refuses a scan that filled no bin (and was not stopped by the user): the report would
/// be empty. The reason is the engine's: no sweep at all, or each reason sweeps were
/// refused for, with its count.
pub fn refuse_empty(o: &Outcome) -> anyhow::Result<()> {
    if !o.report.bins.is_empty() || o.interrupted {
        return Ok(());
    }
    let c = &o.counters;
    if c.sweeps_pushed == 0 {
        anyhow::bail!("no bin was filled: the recording holds no sweep; no report was written");
    }
    let reasons: Vec<String> = SweepReject::ALL
        .iter()
        .zip(c.sweeps_rejected_by)
        .filter(|(_, n)| *n > 0)
        .map(|(r, n)| format!("{n} {r}"))
        .collect();
    anyhow::bail!(
        "no bin was filled: {} of {} sweeps were refused ({}); no report was written",
        c.sweeps_pushed.saturating_sub(c.sweeps_binned),
        c.sweeps_pushed,
        if reasons.is_empty() {
            "no reason counted".to_owned()
        } else {
            reasons.join("; ")
        }
    )
}

/// Where the preview bytes go.
pub trait Sink {
    /// Takes a chunk of preview frame bytes.
    fn send(&mut self, bytes: &[u8]);
}

impl Sink for Vec<u8> {
    fn send(&mut self, bytes: &[u8]) {
        self.extend_from_slice(bytes);
    }
}

/// A sink that drops the bytes (offline processing).
pub struct Discard;

impl Sink for Discard {
    fn send(&mut self, _bytes: &[u8]) {}
}

/// How to stream.
#[derive(Debug, Clone, Default)]
pub struct Pacing {
    /// Seconds of wall time per second of record time (`None`: no waiting).
    pub pace: Option<f64>,
    /// Also write the streamed records to this recording (crash-safe), printing
    /// `written <offset> <records>` after each when the flag is set.
    pub record_to: Option<(PathBuf, bool)>,
}

/// A streamed scan: the bins for the report plus everything the summary needs.
#[derive(Debug, Clone)]
pub struct Outcome {
    /// The set-up used.
    pub setup: Setup,
    /// The report input (bins, truth, impulse response, settings).
    pub report: ReportInput,
    /// Final engine counters.
    pub counters: ScanCounters,
    /// Engine warnings, counted by their wording.
    pub warnings: BTreeMap<String, u32>,
    /// Preview bytes sent.
    pub preview_bytes: u64,
    /// Stopped early by the user.
    pub interrupted: bool,
    /// Every bin's whole band, when asked for (see [`stream_keeping_bands`]).
    pub bands: Option<Bands>,
}

/// Preview frames on their way to the sink.
struct Frames<'a> {
    sink: &'a mut dyn Sink,
    seq: u16,
    buf: [u8; MAX_FRAME_BYTES],
    bytes: u64,
}

impl Frames<'_> {
    fn emit(&mut self, r: &PreviewRecord<MAX_FREQUENCIES>) {
        if let Ok(n) = encode_frame(r, self.seq, &mut self.buf) {
            self.sink.send(&self.buf[..n]);
            self.bytes += n as u64;
        }
        self.seq = self.seq.wrapping_add(1);
    }

    fn impulses(&mut self, engine: &mut Engine) {
        for r in engine.take_impulses() {
            self.emit(&PreviewRecord::Impulse(r));
        }
    }

    fn bins(&mut self, events: &[Event<MAX_FREQUENCIES>]) {
        for e in events {
            if let Event::BinClosed(r) = e {
                self.emit(&PreviewRecord::Bin(r.to_record()));
            }
        }
    }
}

/// Position and sweep records in time order: (time, record index).
fn time_order(rec: &Recovered) -> Vec<(u64, usize)> {
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
    order
}

/// The `--record` copy: header and truth first, then each record as it is streamed.
fn open_copy(
    rec: &Recovered,
    to: &Option<(PathBuf, bool)>,
) -> anyhow::Result<Option<(Writer<std::fs::File>, PathBuf)>> {
    let Some((path, lines)) = to else {
        return Ok(None);
    };
    let mut w = Writer::create(path, record::SyncPolicy::default())
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
    Ok(Some((w, path.clone())))
}

/// The sweeps of a recording, for the automatic gate.
pub fn sweeps_of(rec: &Recovered) -> Vec<&[Complex32]> {
    rec.records
        .iter()
        .filter_map(|(_, r)| match r {
            Record::Sweep { s21, .. } => Some(&s21[..]),
            _ => None,
        })
        .collect()
}

/// Streams recovered records through the engine built from `setup`, sending preview frames
/// to `sink` (see the module notes).
pub fn stream(
    rec: &Recovered,
    setup: Setup,
    sink: &mut dyn Sink,
    pacing: &Pacing,
    quit: &AtomicBool,
) -> anyhow::Result<Outcome> {
    stream_keeping_bands(rec, setup, sink, pacing, quit, false)
}

/// [`stream`], also keeping every bin's whole band in [`Outcome::bands`] when `keep_bands`
/// (for the exports; see [`Engine::keep_bands`]).
pub fn stream_keeping_bands(
    rec: &Recovered,
    setup: Setup,
    sink: &mut dyn Sink,
    pacing: &Pacing,
    quit: &AtomicBool,
    keep_bands: bool,
) -> anyhow::Result<Outcome> {
    let h = rec
        .header()
        .context("the recording has no intact header record")?;
    let mut engine = Engine::new(&setup)?;
    if keep_bands {
        engine.keep_bands();
    }
    let mut copy = open_copy(rec, &pacing.record_to)?;
    let mut frames = Frames {
        sink,
        seq: 0,
        buf: [0; MAX_FRAME_BYTES],
        bytes: 0,
    };
    let order = time_order(rec);
    let mut pacer = Pacer::new(&order, pacing.pace)?;
    let mut next_status_us = 0u64;
    let mut interrupted = false;
    for (t_us, i) in order {
        if quit.load(Ordering::Relaxed) {
            interrupted = true;
            break;
        }
        let Some((_, r)) = rec.records.get(i) else {
            continue;
        };
        if let Some((w, path)) = copy.as_mut() {
            w.write(r)
                .with_context(|| format!("writing {}", path.display()))?;
        }
        pacer.wait(t_us, quit);
        feed(&mut engine, r, &mut frames);
        if t_us >= next_status_us {
            frames.emit(&PreviewRecord::Status(engine.status()));
            next_status_us = t_us + STATUS_INTERVAL_US;
        }
    }
    let ev = engine.finish(interrupted);
    frames.bins(&ev);
    frames.impulses(&mut engine);
    frames.emit(&PreviewRecord::Status(engine.status()));
    if let Some((w, path)) = copy {
        w.finish()
            .with_context(|| format!("finishing {}", path.display()))?;
    }
    let preview_bytes = frames.bytes;
    let mut o = outcome(rec, h, setup, &engine, preview_bytes, interrupted);
    if pacer.cut > 0 {
        o.report.warnings.push(format!(
            "{} waits of the paced replay were cut to {MAX_PACED_WAIT_S} s (record time \
             jumped ahead)",
            pacer.cut
        ));
    }
    Ok(o)
}

/// The waits of a paced replay. Record time counts from the first record (a recording
/// that starts far from time 0 starts at once); a wait longer than [`MAX_PACED_WAIT_S`]
/// (record time jumping ahead, a far-future timestamp) is cut to it and the schedule moves
/// with it; the quit flag is looked at every 50 ms while waiting.
struct Pacer {
    /// Wall seconds per record second (`None`: no waiting).
    pace: Option<f64>,
    start: Instant,
    first_us: Option<u64>,
    /// Wall time taken out of the schedule by cut waits.
    skipped: Duration,
    /// Waits cut.
    cut: u64,
}

impl Pacer {
    /// Refuses a paced replay of `order` that would take longer than
    /// [`MAX_PACED_REPLAY_S`] with every wait cut as [`Pacer::wait`] cuts it.
    fn new(order: &[(u64, usize)], pace: Option<f64>) -> anyhow::Result<Self> {
        if let Some(p) = pace {
            let total_s: f64 = order
                .windows(2)
                .map(|w| (w[1].0.saturating_sub(w[0].0) as f64 * 1e-6 * p).min(MAX_PACED_WAIT_S))
                .sum();
            if total_s > MAX_PACED_REPLAY_S {
                anyhow::bail!(
                    "at this --speed the paced replay would take {total_s:.0} s (limit \
                     {MAX_PACED_REPLAY_S:.0} s): raise --speed or use --as-fast-as-possible"
                );
            }
        }
        Ok(Self {
            pace,
            start: Instant::now(),
            first_us: None,
            skipped: Duration::ZERO,
            cut: 0,
        })
    }

    /// Sleeps until record time `t_us` is due (or `quit` is set).
    fn wait(&mut self, t_us: u64, quit: &AtomicBool) {
        let Some(p) = self.pace else { return };
        let first = *self.first_us.get_or_insert(t_us);
        let due_s = t_us.saturating_sub(first) as f64 * 1e-6 * p;
        let due = Duration::from_secs_f64(due_s.min(1e15)).saturating_sub(self.skipped);
        let now = self.start.elapsed();
        let Some(mut wait) = due.checked_sub(now) else {
            return;
        };
        let longest = Duration::from_secs_f64(MAX_PACED_WAIT_S);
        if wait > longest {
            self.skipped += wait - longest;
            self.cut += 1;
            wait = longest;
        }
        let end = now + wait;
        while !quit.load(Ordering::Relaxed) {
            let left = end.saturating_sub(self.start.elapsed());
            if left.is_zero() {
                break;
            }
            std::thread::sleep(left.min(Duration::from_millis(50)));
        }
    }
}

/// One record into the engine; closed bins go out as frames.
fn feed(engine: &mut Engine, r: &Record, frames: &mut Frames) {
    match r {
        Record::Position {
            t_us, angle_deg, ..
        } => {
            let ev = engine.angle(*t_us, *angle_deg);
            frames.bins(&ev);
            frames.impulses(engine);
        }
        Record::Sweep {
            start_us,
            end_us,
            s21,
            ..
        } => engine.sweep(*start_us, *end_us, s21),
        _ => {}
    }
}

/// The report of a streamed scan.
fn outcome(
    rec: &Recovered,
    h: &Header,
    setup: Setup,
    engine: &Engine,
    preview_bytes: u64,
    interrupted: bool,
) -> Outcome {
    let counters = engine.counters();
    let warnings = engine.warnings().clone();
    let mut bins = engine.bins().clone();
    let truth = attach_truth(rec, h, &setup, &mut bins);
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
    let mut settings = Settings::for_scan(&setup, truth);
    settings.seed = h.seed;
    settings.source = Some(h.source.clone());
    settings.software = Some(h.software.clone());
    let report = ReportInput {
        title: setup.title.clone(),
        source: h.source.clone(),
        frequencies_hz: setup.frequencies_hz.clone(),
        full_circle: setup.layout.is_full_circle(),
        bins: bins.into_values().collect(),
        settings: settings.to_json(),
        counters: Counters::of(
            &counters,
            preview_bytes,
            rec.records.len(),
            rec.damage.len(),
        )
        .to_json(),
        warnings: warn_lines,
        impulse: engine.impulse(),
        gain: None,
    };
    Outcome {
        setup,
        report,
        counters,
        warnings,
        preview_bytes,
        interrupted,
        bands: engine.bands(),
    }
}

/// Fills in the truth of every bin: from truth records at the bin centers, else from the
/// scenario's free-space model at the bin centers. Returns where it came from.
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
    let at = |b: &ReportBin| {
        truths
            .iter()
            .find(|(a, _)| wrap_deg(a - b.angle_deg).abs() <= tol)
    };
    if !bins.is_empty() && !truths.is_empty() && bins.values().all(|b| at(b).is_some()) {
        let value_at = |vals: &Vec<(f64, Complex32)>, f: f64| {
            vals.iter()
                .find(|(fh, _)| (fh - f).abs() <= 0.5 * setup.grid.step_hz())
                .map(|(_, v)| c64(*v))
        };
        for b in bins.values_mut() {
            if let Some((_, vals)) = at(b) {
                for (v, f) in b.values.iter_mut().zip(&setup.frequencies_hz) {
                    v.truth = value_at(vals, *f);
                }
            }
        }
        return "truth records at the bin centers".into();
    }
    if let Some(s) = &h.scenario {
        let angles: Vec<f64> = bins.values().map(|b| b.angle_deg).collect();
        let rows = crate::model::room::truth(s, &setup.frequencies_hz, &angles);
        for (b, row) in bins.values_mut().zip(rows) {
            for (v, t) in b.values.iter_mut().zip(row) {
                v.truth = Some(t);
            }
        }
        return "the scenario's free-space model at the bin centers (the truth records are at other angles)".into();
    }
    "none".into()
}
