//! The web view's state and its clients: preview frame bytes in, JSON events out.
//!
//! The hub decodes the same preview frames the terminal screen decodes (so the page shows
//! exactly what the records carry), keeps the latest record of every bin and the latest
//! status as a snapshot for browsers that connect later, and hands each decoded record to
//! every connected browser as one event. Each browser has a bounded queue
//! ([`Limits::queue_events`]); [`Hub::publish`] never waits: a browser whose queue is full
//! (it stopped reading, or reads slower than bins close) is dropped and counted, so no
//! browser can slow the scan.

use std::collections::BTreeMap;
use std::sync::mpsc::{self, Receiver, SyncSender, TrySendError};
use std::sync::{Arc, Mutex, MutexGuard};
use std::time::Duration;

use serde_json::{json, Value};
use sweepgate::wire::preview::{
    BinRecord, ImpulseRecord, PositionerState, PreviewRecord, StatusRecord,
};

use crate::output::screen::{PreviewDecoder, PREVIEW_F};

/// The bounds that keep the web view from costing the scan anything.
#[derive(Debug, Clone, Copy)]
pub struct Limits {
    /// Browsers connected to the event stream at once; more are answered 503.
    pub clients: usize,
    /// Events waiting for one browser; when full, that browser is dropped.
    pub queue_events: usize,
    /// A write to a browser that takes longer than this drops it.
    pub write_timeout: Duration,
}

impl Default for Limits {
    fn default() -> Self {
        Self {
            clients: 8,
            queue_events: 512,
            write_timeout: Duration::from_secs(2),
        }
    }
}

/// What the page needs to know before the first record: names and sizes.
#[derive(Debug, Clone, Default, serde::Serialize)]
pub struct Meta {
    /// Title (the scenario or source name).
    pub title: String,
    /// Where the records come from, in words.
    pub source: String,
    /// The pattern frequencies, Hz, in the order of the records' values (empty: unknown,
    /// the page names them by grid point).
    pub frequencies_hz: Vec<f64>,
    /// Bins of the layout, if known.
    pub total_bins: Option<u16>,
    /// Gate center, ns, if known.
    pub gate_center_ns: Option<f64>,
    /// Gate span, ns, if known.
    pub gate_span_ns: Option<f64>,
    /// How the gate was chosen, in words, if known.
    pub gate_rule: Option<String>,
    /// Warnings from outside the stream (recording damage, set-up remarks).
    pub notes: Vec<String>,
    /// First frequency of the sweep grid, Hz, when only the grid is known (the page then
    /// names a record's grid point by its frequency).
    pub grid_start_hz: Option<f64>,
    /// Step of that grid, Hz.
    pub grid_step_hz: Option<f64>,
    /// `Some`: the bins carry absolute levels (an RCS scan: calibrated amplitudes in m, so
    /// that 20·log10 of them is dBsm), drawn and read out in that unit; `None`: |S21|, each
    /// trace drawn in dB below its own peak.
    pub absolute_levels: Option<AbsoluteLevels>,
}

/// How the page names absolute levels.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize)]
pub struct AbsoluteLevels {
    /// The level axis' title, e.g. `RCS (dBsm)`.
    pub label: String,
    /// The unit after each level, e.g. `dBsm`.
    pub unit: String,
}

/// Counts of the hub's own work.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, serde::Serialize)]
pub struct HubCounters {
    /// Preview records decoded.
    pub records: u64,
    /// Events handed to browser queues.
    pub events_queued: u64,
    /// Events written to browsers' sockets (snapshots not counted).
    pub events_written: u64,
    /// Browsers dropped because their queue was full.
    pub dropped_slow: u64,
    /// Browsers that went away by themselves.
    pub gone: u64,
    /// Browsers turned away because [`Limits::clients`] were connected.
    pub refused: u64,
    /// Preview frames that failed their check (CRC, COBS, length).
    pub frames_damaged: u64,
}

/// The end of the scan: the report folder's files the page may show.
#[derive(Debug, Clone, Default, serde::Serialize)]
pub struct Ended {
    /// File names in the report folder, served under `/report/NAME`.
    pub files: Vec<String>,
    /// One-line outcome.
    pub summary: String,
}

struct Inner {
    meta: Meta,
    decoder: PreviewDecoder,
    bins: BTreeMap<u16, Value>,
    impulses: BTreeMap<u16, Value>,
    status: Option<Value>,
    ended: Option<Ended>,
    clients: Vec<Client>,
    counters: HubCounters,
    report_dir: Option<std::path::PathBuf>,
}

/// A browser's queue as the hub holds it; `alive` has a second owner while the browser's
/// [`Subscription`] exists.
struct Client {
    tx: SyncSender<Arc<str>>,
    alive: Arc<()>,
}

/// A browser's side of the event stream: the snapshot to send first, then the queue.
pub struct Subscription {
    /// The first event: the whole state.
    pub first: Arc<str>,
    /// The events after it.
    pub rx: Receiver<Arc<str>>,
    _alive: Arc<()>,
}

/// The shared state of one web view; cheap to clone.
#[derive(Clone)]
pub struct Hub {
    inner: Arc<Mutex<Inner>>,
    limits: Limits,
}

impl std::fmt::Debug for Hub {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Hub").field("limits", &self.limits).finish()
    }
}

/// One event as the event stream sends it: `event: NAME`, `data: JSON`, a blank line.
fn event_text(name: &str, data: &Value) -> Arc<str> {
    Arc::from(format!("event: {name}\ndata: {data}\n\n"))
}

fn finite(x: f32) -> Value {
    if x.is_finite() {
        json!(x)
    } else {
        Value::Null
    }
}

/// A bin record as the page reads it.
pub fn bin_json(b: &BinRecord<PREVIEW_F>) -> Value {
    let values: Vec<Value> = b
        .values
        .iter()
        .map(|v| {
            json!({
                "index": v.index,
                "raw": [finite(v.raw.re), finite(v.raw.im)],
                "gated": [finite(v.gated.re), finite(v.gated.im)],
                "offset_deg": finite(v.angle_offset_deg),
            })
        })
        .collect();
    json!({
        "bin": b.bin,
        "flags": b.flags,
        "sweeps": b.sweeps,
        "nominal_deg": finite(b.nominal_deg),
        "mean_deg": finite(b.mean_deg),
        "smear_deg": finite(b.max_smear_deg),
        "echo_db": finite(b.echo_db),
        "values": values,
    })
}

/// An impulse-response record as the page reads it: levels in dB (null below the floor).
pub fn impulse_json(r: &ImpulseRecord) -> Value {
    let levels: Vec<Value> = (0..r.levels.len())
        .map(|i| r.level_db(i).map_or(Value::Null, |l| json!(l)))
        .collect();
    json!({
        "bin": r.bin,
        "angle_deg": finite(r.nominal_deg),
        "t0_ns": finite(r.first_ns),
        "dt_ns": finite(r.step_ns),
        "peak_db": finite(r.peak_db),
        "levels_db": levels,
    })
}

fn state_word(s: PositionerState) -> &'static str {
    match s {
        PositionerState::NoAngle => "no angle yet",
        PositionerState::Moving => "moving",
        PositionerState::Settled => "settled",
        PositionerState::Stalled => "stalled",
        PositionerState::Finished => "finished",
    }
}

/// A status record as the page reads it.
pub fn status_json(s: &StatusRecord) -> Value {
    json!({
        "time_us": s.time_us,
        "angle_deg": finite(s.angle_deg),
        "speed_deg_s": finite(s.speed_deg_s),
        "state": state_word(s.state),
        "open_bin": s.open_bin,
        "bins_closed": s.bins_closed,
        "sweeps_pushed": s.sweeps_pushed,
        "sweeps_binned": s.sweeps_binned,
        "sweeps_rejected": s.sweeps_rejected,
        "angles_pushed": s.angles_pushed,
        "angles_rejected": s.angles_rejected,
    })
}

impl Hub {
    /// A hub with these bounds and names.
    pub fn new(meta: Meta, limits: Limits) -> Self {
        Self {
            inner: Arc::new(Mutex::new(Inner {
                meta,
                decoder: PreviewDecoder::new(),
                bins: BTreeMap::new(),
                impulses: BTreeMap::new(),
                status: None,
                ended: None,
                clients: Vec::new(),
                counters: HubCounters::default(),
                report_dir: None,
            })),
            limits,
        }
    }

    /// The bounds.
    pub fn limits(&self) -> Limits {
        self.limits
    }

    fn lock(&self) -> MutexGuard<'_, Inner> {
        // A panic while holding the lock leaves plain data behind: keep serving it.
        self.inner.lock().unwrap_or_else(|p| p.into_inner())
    }

    /// Decodes preview frame bytes and hands every good record to the browsers. Never
    /// waits for a browser.
    pub fn publish(&self, bytes: &[u8]) {
        let mut g = self.lock();
        let mut got = Vec::new();
        g.decoder.feed(bytes, |_, r| got.push(r));
        g.counters.frames_damaged = u64::from(g.decoder.counters().damaged());
        for r in got {
            g.counters.records += 1;
            // One cut on the page: the first trace of each cut bin, as on the terminal.
            let r = match r {
                PreviewRecord::Cut(c) => PreviewRecord::Bin(c.first_trace_bin()),
                other => other,
            };
            let ev = match r {
                PreviewRecord::Bin(b) => {
                    let v = bin_json(&b);
                    let ev = event_text("bin", &v);
                    g.bins.insert(b.bin, v);
                    ev
                }
                PreviewRecord::Status(s) => {
                    let v = status_json(&s);
                    let ev = event_text("status", &v);
                    g.status = Some(v);
                    ev
                }
                PreviewRecord::Impulse(r) => {
                    let v = impulse_json(&r);
                    let ev = event_text("impulse", &v);
                    g.impulses.insert(r.bin, v);
                    ev
                }
                PreviewRecord::Cut(_) => continue,
            };
            broadcast(&mut g, &ev);
        }
    }

    /// Names the scan (once its set-up is known): browsers get a `meta` event.
    pub fn set_meta(&self, meta: Meta) {
        let mut g = self.lock();
        let ev = event_text("meta", &json!(meta));
        g.meta = meta;
        broadcast(&mut g, &ev);
    }

    /// A warning from outside the stream.
    pub fn note(&self, text: impl Into<String>) {
        let mut g = self.lock();
        let text = text.into();
        g.meta.notes.push(text.clone());
        let ev = event_text("note", &json!(text));
        broadcast(&mut g, &ev);
    }

    /// The scan has ended; the report's `files` in `report_dir` may be shown.
    pub fn end(&self, report_dir: Option<&std::path::Path>, ended: Ended) {
        let mut g = self.lock();
        g.report_dir = report_dir.map(|p| p.to_path_buf());
        let ev = event_text("end", &json!(ended));
        g.ended = Some(ended);
        broadcast(&mut g, &ev);
    }

    /// The whole state as one JSON value: what a browser that connects now is sent first.
    pub fn snapshot(&self) -> Value {
        let g = self.lock();
        snapshot_of(&g)
    }

    /// Counts an event written to a browser (the server calls it).
    pub fn wrote(&self) {
        self.lock().counters.events_written += 1;
    }

    /// The hub's counters.
    pub fn counters(&self) -> HubCounters {
        self.lock().counters
    }

    /// Browsers connected to the event stream now.
    pub fn clients(&self) -> usize {
        self.lock().clients.len()
    }

    /// Registers a browser: its first event (the snapshot) and its queue, or `None` when
    /// [`Limits::clients`] are connected (counted).
    pub fn subscribe(&self) -> Option<Subscription> {
        let mut g = self.lock();
        let before = g.clients.len();
        g.clients.retain(|c| Arc::strong_count(&c.alive) > 1);
        g.counters.gone += (before - g.clients.len()) as u64;
        if g.clients.len() >= self.limits.clients {
            g.counters.refused += 1;
            return None;
        }
        let (tx, rx) = mpsc::sync_channel(self.limits.queue_events);
        let alive = Arc::new(());
        g.clients.push(Client {
            tx,
            alive: Arc::clone(&alive),
        });
        Some(Subscription {
            first: event_text("snapshot", &snapshot_of(&g)),
            rx,
            _alive: alive,
        })
    }

    /// The report file `name` when the scan has ended and the report lists it.
    pub fn report_file(&self, name: &str) -> Option<std::path::PathBuf> {
        let g = self.lock();
        let ended = g.ended.as_ref()?;
        let dir = g.report_dir.as_ref()?;
        ended
            .files
            .iter()
            .any(|f| f == name)
            .then(|| dir.join(name))
    }
}

fn snapshot_of(g: &Inner) -> Value {
    json!({
        "meta": g.meta,
        "bins": g.bins.values().collect::<Vec<_>>(),
        "impulses": g.impulses.values().collect::<Vec<_>>(),
        "status": g.status,
        "ended": g.ended,
        "counters": g.counters,
    })
}

/// Hands `ev` to every browser; a full queue drops the browser, a closed one is forgotten.
fn broadcast(g: &mut Inner, ev: &Arc<str>) {
    let mut dropped = 0;
    let mut gone = 0;
    let mut queued = 0;
    g.clients.retain(|c| match c.tx.try_send(Arc::clone(ev)) {
        Ok(()) => {
            queued += 1;
            true
        }
        Err(TrySendError::Full(_)) => {
            dropped += 1;
            false
        }
        Err(TrySendError::Disconnected(_)) => {
            gone += 1;
            false
        }
    });
    g.counters.events_queued += queued;
    g.counters.dropped_slow += dropped;
    g.counters.gone += gone;
}

#[cfg(test)]
mod tests {
    use super::*;
    use sweepgate::wire::preview::{encode_frame, FreqValue, MAX_FRAME};
    use sweepgate::Complex32;

    fn bin_frame(bin: u16, seq: u16) -> Vec<u8> {
        let mut values = heapless::Vec::new();
        let _ = values.push(FreqValue {
            index: 400,
            raw: Complex32::new(0.5, 0.0),
            gated: Complex32::new(0.25, 0.0),
            angle_offset_deg: 0.0,
        });
        let r: PreviewRecord<PREVIEW_F> = PreviewRecord::Bin(BinRecord {
            bin,
            flags: 0,
            sweeps: 2,
            nominal_deg: f32::from(bin),
            mean_deg: f32::from(bin),
            max_smear_deg: 0.1,
            echo_db: -30.0,
            values,
        });
        let mut buf = [0u8; MAX_FRAME];
        let n = encode_frame(&r, seq, &mut buf).unwrap();
        buf[..n].to_vec()
    }

    #[test]
    fn a_browser_that_never_reads_is_dropped_and_publish_never_waits() {
        let hub = Hub::new(
            Meta::default(),
            Limits {
                clients: 2,
                queue_events: 4,
                write_timeout: Duration::from_secs(1),
            },
        );
        let stalled = hub.subscribe().unwrap();
        let reader = hub.subscribe().unwrap();
        for i in 0..10u16 {
            hub.publish(&bin_frame(i, i));
            // The reading browser keeps up; the stalled one never reads.
            while reader.rx.try_recv().is_ok() {}
        }
        let c = hub.counters();
        assert_eq!(c.records, 10);
        assert_eq!(c.dropped_slow, 1, "the stalled browser is dropped once");
        assert_eq!(hub.clients(), 1);
        // Four events fitted the stalled queue, then the fifth dropped it.
        assert_eq!(stalled.rx.try_iter().count(), 4);
        assert_eq!(c.events_queued, 10 + 4);
        assert_eq!(hub.snapshot()["bins"].as_array().unwrap().len(), 10);
    }

    #[test]
    fn clients_are_bounded_and_a_closed_one_frees_its_place() {
        let hub = Hub::new(
            Meta::default(),
            Limits {
                clients: 1,
                ..Limits::default()
            },
        );
        let first = hub.subscribe().unwrap();
        assert!(hub.subscribe().is_none());
        assert_eq!(hub.counters().refused, 1);
        drop(first);
        assert!(hub.subscribe().is_some());
    }

    #[test]
    fn bin_json_carries_the_values_and_nan_as_null() {
        let hub = Hub::new(Meta::default(), Limits::default());
        hub.publish(&bin_frame(7, 0));
        let s = hub.snapshot();
        let b = &s["bins"][0];
        assert_eq!(b["bin"], 7);
        assert_eq!(b["values"][0]["index"], 400);
        assert_eq!(b["values"][0]["raw"][0], 0.5);
        assert_eq!(b["values"][0]["gated"][0], 0.25);
        assert_eq!(finite(f32::NAN), Value::Null);
    }

    #[test]
    fn report_files_are_served_only_after_the_end_and_only_by_name() {
        let hub = Hub::new(Meta::default(), Limits::default());
        assert!(hub.report_file("pattern.csv").is_none());
        hub.end(
            Some(std::path::Path::new("/tmp/r")),
            Ended {
                files: vec!["pattern.csv".into()],
                summary: String::new(),
            },
        );
        assert_eq!(
            hub.report_file("pattern.csv"),
            Some(std::path::PathBuf::from("/tmp/r/pattern.csv"))
        );
        assert!(hub.report_file("../etc/passwd").is_none());
    }
}
