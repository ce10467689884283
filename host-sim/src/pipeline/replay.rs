//! `sweepgate replay REC`: streams a recording through the same scan engine the board runs,
//! shows the live preview, and writes the report.
//!
//! The set-up (grid, FFT size, pattern frequencies, bins, gate) comes from the recording's
//! header and the options through [`crate::pipeline::setup`], the same as for `process`
//! and `acquire`'s live engine; the streaming is [`crate::pipeline::stream`]. Without a
//! scenario in the header the gate is chosen from the data
//! ([`crate::pipeline::data_gate`]), as `process` does, unless `--gate-center-ns` and
//! `--gate-span-ns` give it; the terminal says what the data showed.
//!
//! The pace is the record time divided by `--speed` (`--as-fast-as-possible`: no waiting).
//! Every closed bin travels as preview frame bytes to the screen, which decodes them (so it
//! shows exactly what a board would send). `--serve PORT` also sends the byte stream to TCP
//! clients on 127.0.0.1:PORT (for `sweepgate view`).

use std::io::Write;
use std::net::{TcpListener, TcpStream};
use std::path::PathBuf;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::{self, Receiver, Sender};
use std::sync::{Arc, Mutex};
use std::thread::JoinHandle;
use std::time::Duration;

use anyhow::{bail, Context};

use crate::formats::files::{check_output_dir, refuse_if_same_file};
use crate::formats::recording::{self as record, Recovered};
use crate::output::export::{self, Exports};
use crate::output::report;
use crate::output::screen::{self as preview, Screen, ScreenInput};
use crate::pipeline::options::{default_report_dir, GateOptions};
use crate::pipeline::replay_rcs;
use crate::pipeline::setup::{self, Setup};
use crate::pipeline::stream::{self, Outcome, Pacing, Sink};
use crate::pipeline::web_feed;
use crate::web::Hub;

/// Range of `--speed`: from a thousandth of the recorded pace (a 1 s scan takes 17 min)
/// to a million times it (beyond which the waits are below the timer's resolution).
pub const SPEED_RANGE: (f64, f64) = (1e-3, 1e6);

/// Options of `sweepgate replay`.
#[derive(Debug, Clone)]
pub struct Options {
    /// Recording to replay.
    pub rec: PathBuf,
    /// Pace: record time divided by this (2 = twice as fast as recorded).
    pub speed: f64,
    /// Do not wait between records.
    pub as_fast_as_possible: bool,
    /// Report folder (default: `<recording stem>-report/` next to the recording).
    pub out: Option<PathBuf>,
    /// No full-screen preview: a progress line on stderr and a summary.
    pub no_preview: bool,
    /// Gate and pattern options.
    pub gate: GateOptions,
    /// Also serve the preview byte stream on 127.0.0.1:PORT.
    pub serve: Option<u16>,
    /// Also write the records as they are replayed to this recording.
    pub record: Option<PathBuf>,
    /// With `record`: print `written <offset> <records>` after each record reaches the file.
    pub progress_lines: bool,
    /// Full-band exports beside the report (see [`crate::output::export`]).
    pub exports: Exports,
    /// The web view to feed (`--web`), already serving.
    pub web: Option<Hub>,
}

impl Options {
    /// Options for a recording with every default and no waiting (for tests and tools).
    pub fn fast(rec: &std::path::Path) -> Self {
        Self {
            rec: rec.to_path_buf(),
            speed: 1.0,
            as_fast_as_possible: true,
            out: None,
            no_preview: true,
            gate: GateOptions::default(),
            serve: None,
            record: None,
            progress_lines: false,
            exports: Exports::default(),
            web: None,
        }
    }

    /// Seconds of wall time per second of record time (`None`: no waiting).
    fn pace(&self) -> anyhow::Result<Option<f64>> {
        if self.as_fast_as_possible {
            return Ok(None);
        }
        if !(SPEED_RANGE.0..=SPEED_RANGE.1).contains(&self.speed) {
            bail!(
                "--speed {} is outside {} to {} (record time divided by it; use \
                 --as-fast-as-possible for no waiting)",
                self.speed,
                SPEED_RANGE.0,
                SPEED_RANGE.1
            );
        }
        Ok(Some(1.0 / self.speed))
    }
}

/// The set-up of a recovered recording with these options.
pub fn setup(rec: &Recovered, opts: &Options) -> anyhow::Result<Setup> {
    let h = rec
        .header()
        .context("the recording has no intact header record")?;
    let mut choices = opts.gate.choices()?;
    if let Some(cal) = replay_rcs::calibration_of(rec)? {
        replay_rcs::fill(&mut choices, &cal)?;
    }
    setup::for_recording(h, &choices, &stream::sweeps_of(rec))
}

/// Replays recovered records through the scan engine, sending preview frames to `sink`.
/// `pace`: seconds of wall time per second of record time (`None`: no waiting).
pub fn replay_records(
    rec: &Recovered,
    opts: &Options,
    sink: &mut dyn Sink,
    pace: Option<f64>,
    quit: &AtomicBool,
) -> anyhow::Result<Outcome> {
    let s = setup(rec, opts)?;
    let pacing = Pacing {
        pace,
        record_to: opts.record.clone().map(|p| (p, opts.progress_lines)),
    };
    stream::stream(rec, s, sink, &pacing, quit)
}

/// Preview bytes to the screen's channel and to any TCP clients.
struct ChannelSink {
    tx: Sender<ScreenInput>,
    clients: Option<Clients>,
    web: Option<Hub>,
    /// An RCS scan: the screen's and the browser's bins in dBsm (the TCP clients get the
    /// plain stream).
    rcs: Option<replay_rcs::Calibrator>,
}

type Clients = Arc<Mutex<Vec<TcpStream>>>;

impl Sink for ChannelSink {
    fn send(&mut self, bytes: &[u8]) {
        let shown = match &mut self.rcs {
            Some(c) => c.frames(bytes),
            None => bytes.to_vec(),
        };
        if let Some(h) = &self.web {
            // Never waits: a browser that cannot keep up is dropped by the hub.
            h.publish(&shown);
        }
        let _ = self.tx.send(ScreenInput::Bytes(shown));
        if let Some(c) = &self.clients {
            if let Ok(mut v) = c.lock() {
                // Non-blocking: a full socket buffer is an error and drops the viewer.
                v.retain_mut(|s| s.write_all(bytes).is_ok());
            }
        }
    }
}

/// Reads a recording, replays it with the preview (or a progress line), and writes the
/// report. Returns the outcome and the report folder.
pub fn replay_file(opts: &Options) -> anyhow::Result<(Outcome, PathBuf)> {
    let pace = opts.pace()?;
    if let Some(r) = &opts.record {
        refuse_if_same_file(r, &[&opts.rec]).context("--record")?;
    }
    let out_dir = opts
        .out
        .clone()
        .unwrap_or_else(|| default_report_dir(&opts.rec));
    check_output_dir(&out_dir)?;
    // The file error names the file.
    let rec = record::recover_file(&opts.rec)?;
    if rec.header().is_none() {
        bail!(stream::no_header(&opts.rec));
    }
    let s = setup(&rec, opts)?;
    let mut screen = screen_for(&s, &rec);
    let rcs = replay_rcs::calibration_of(&rec)?;
    if rcs.is_some() {
        screen.level_label = Some(replay_rcs::LEVEL_LABEL.into());
    }
    if let Some(h) = &opts.web {
        let mut meta = web_feed::meta_of(&s, &format!("replay of {}", opts.rec.display()));
        meta.notes.extend(screen.notes.iter().cloned());
        if rcs.is_some() {
            meta.absolute_levels = Some(replay_rcs::web_levels());
        }
        h.set_meta(meta);
    }
    let clients = match opts.serve {
        Some(port) => Some(serve(port)?),
        None => None,
    };
    let (tx, rx) = mpsc::channel();
    let quit = Arc::new(AtomicBool::new(false));
    let sink = ChannelSink {
        tx,
        clients: clients.clone(),
        web: opts.web.clone(),
        rcs: rcs.clone().map(replay_rcs::Calibrator::new),
    };
    let pacing = Pacing {
        pace,
        record_to: opts.record.clone().map(|p| (p, opts.progress_lines)),
    };
    let keep_bands = opts.exports.any();
    let worker = spawn_worker(rec, s, pacing, sink, Arc::clone(&quit), keep_bands)?;
    let live = !opts.no_preview && preview::have_terminal();
    show(&rx, &mut screen, live, &quit)?;
    let outcome = worker
        .join()
        .map_err(|_| anyhow::anyhow!("the replay thread failed"))??;
    if let Some(c) = &clients {
        close(c);
    }
    for line in screen.summary_lines() {
        eprintln!("{line}");
    }
    if let Some(cal) = &rcs {
        for line in replay_rcs::summary_lines(&outcome.report, cal) {
            eprintln!("{line}");
        }
    }
    stream::refuse_empty(&outcome)?;
    let files = report::write_report(&outcome.report, &out_dir)
        .with_context(|| format!("writing the report to {}", out_dir.display()))?;
    export::write_exports(&outcome.report, outcome.bands.as_ref(), &opts.exports)?;
    if let Some(h) = &opts.web {
        let summary = format!(
            "{} bins closed; report written to {}",
            outcome.counters.bins_closed,
            out_dir.display()
        );
        web_feed::report_written(h, &out_dir, &files, summary);
    }
    Ok((outcome, out_dir))
}

/// The preview screen for a set-up, with the recording's damage noted.
fn screen_for(s: &Setup, rec: &Recovered) -> Screen {
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
    screen
}

/// Viewers served at once by `--serve`; more are closed as they connect.
pub const MAX_VIEWERS: usize = 32;

/// Listens on 127.0.0.1:`port` and collects the clients that connect (at most
/// [`MAX_VIEWERS`]). Each is written without blocking: a viewer whose socket buffer is
/// full (it stopped reading) is dropped, so it never stalls the replay or other viewers.
fn serve(port: u16) -> anyhow::Result<Clients> {
    let l = TcpListener::bind(("127.0.0.1", port))
        .with_context(|| format!("listening on 127.0.0.1:{port}"))?;
    eprintln!(
        "serving the preview stream on {}",
        l.local_addr()
            .map_or(format!("port {port}"), |a| a.to_string())
    );
    let c: Clients = Arc::default();
    let c2 = Arc::clone(&c);
    std::thread::spawn(move || {
        for s in l.incoming() {
            let Ok(s) = s else {
                // No descriptor left or a reset connection: go on after a pause.
                std::thread::sleep(Duration::from_millis(50));
                continue;
            };
            if s.set_nonblocking(true).is_err() {
                continue;
            }
            if let Ok(mut v) = c2.lock() {
                if v.len() < MAX_VIEWERS {
                    v.push(s);
                }
            }
        }
    });
    Ok(c)
}

/// Flushes and closes every client.
fn close(clients: &Clients) {
    if let Ok(mut v) = clients.lock() {
        for s in v.iter_mut() {
            let _ = s.flush();
            let _ = s.shutdown(std::net::Shutdown::Both);
        }
    }
}

/// Replays on a thread with room for the engine; the feed ends with [`ScreenInput::End`].
fn spawn_worker(
    rec: Recovered,
    setup: Setup,
    pacing: Pacing,
    mut sink: ChannelSink,
    quit: Arc<AtomicBool>,
    keep_bands: bool,
) -> anyhow::Result<JoinHandle<anyhow::Result<Outcome>>> {
    std::thread::Builder::new()
        .name("replay".into())
        .stack_size(16 << 20)
        .spawn(move || {
            let r =
                stream::stream_keeping_bands(&rec, setup, &mut sink, &pacing, &quit, keep_bands);
            let _ = sink.tx.send(ScreenInput::End);
            r
        })
        .context("starting the replay thread")
}

/// Shows the feed on the full screen (`live`) or as a progress line until it ends.
fn show(
    rx: &Receiver<ScreenInput>,
    screen: &mut Screen,
    live: bool,
    quit: &AtomicBool,
) -> anyhow::Result<()> {
    if !live {
        preview::run_plain(rx, screen, true);
        return Ok(());
    }
    preview::run_terminal(rx, screen, quit, None).context("terminal preview")?;
    quit.store(true, Ordering::Relaxed);
    // Drain what is left so the worker can finish.
    while let Ok(f) = rx.recv() {
        screen.take(f);
    }
    Ok(())
}
