//! `sweepgate acquire`: the host playing the board's part over TCP. It drives a VNA with
//! the query strings of a profile, reads turntable angles, and writes a recording.
//!
//! ```text
//! sweepgate acquire [--profile FILE] --instrument HOST:PORT
//!                   [--positioner HOST:PORT | --positioner-sim --scenario FILE]
//!                   [--sweeps N] [--linger-s S] --out REC
//!                   [--gate-center-ns T] [--gate-span-ns S] [--band-window W] [--gate-shape W]
//!                   [--frequencies-hz F1,F2] [--bin-width-deg W]
//! ```
//!
//! When a gate can be set up — the scenario of `--positioner-sim` to plan one from, or
//! `--gate-center-ns` and `--gate-span-ns` — angle samples and sweeps also go through the
//! core scan engine as on the board, set up exactly as `replay` and `process` set up a
//! recording ([`crate::pipeline::setup`]: the same gate, band window and gate shape, FFT
//! size, pattern frequencies and bins) and fed in the same order ([`Engine`]), so the live
//! bins equal the bins `replay` and `process` give for the recording with the same
//! options. The recording's header holds the pattern frequencies and bin width the live
//! engine used. Each bin is printed on standard output as it closes:
//! `bin <index> <deg> deg: <n> sweeps, at <GHz> GHz raw <dB> dB, gated <dB> dB[; at …], echo <dB>`.
//! Without a gate sweeps are only recorded.
//!
//! Caution: `acquire` can run a scan with a transmitting antenna and a moving turntable.
//! Keep clear of the aperture of a transmitting antenna (RF exposure) and of the moving
//! machinery, and follow local regulations and the lab's licensed practice.
//!
//! # Profile (TOML)
//!
//! The profile holds every string sent to the instrument, so any SCPI instrument can be
//! driven without a command set built into the program. `host-sim/profiles/simulated.toml`
//! (the default, compiled in) speaks to `sweepgate instrument`.
//!
//! ```toml
//! name = "sweepgate simulated VNA"  # shown in the recording's source
//! timeout_s = 5.0                   # per answer
//! identify = "*IDN?"                # optional: its answer goes into the recording
//! setup = ["*RST", "*CLS", "FORMat:DATA REAL,32", "FORMat:BORDer SWAPped"]
//! trigger = ["INITiate:IMMediate"]  # sent before each sweep
//! wait = "*OPC?"                    # optional: a query whose answer means "sweep done"
//! data = "TRACe:DATA?"              # the data query
//! format = "real32"                 # real32 | real64 | ascii: what `setup` selected
//! byte_order = "swapped"            # normal | swapped (binary formats)
//! error_query = "SYSTem:ERRor?"     # optional: drained after setup and on any failure
//! counts_per_turn = 36000           # encoder resolution written with line-protocol angles
//!
//! [grid]                            # each value fixed, or a query asked after setup
//! start_query = "SENSe:FREQuency:STARt?"   # or start_hz = 8e9
//! stop_query = "SENSe:FREQuency:STOP?"     # or stop_hz = 12e9
//! points_query = "SENSe:SWEep:POINts?"     # or points = 201
//! ```
//!
//! A string whose header (first word) ends with `?` is a query: one answer line is read
//! (and, in `setup`, printed). An error queue answer starting with `0,` or `+0,` means
//! "no error"; any other entry after setup stops the acquisition with the entries.
//!
//! Data answers go through the core decoders exactly as on the board: REAL formats through
//! [`BlockDecoder`], ASCII through [`AsciiDecoder`]. A block with a wrong point count,
//! length or header stops the acquisition (the profile does not match the instrument); a
//! block holding a non-finite value is counted, the link is drained, and the next sweep
//! is taken.
//!
//! # Link faults
//!
//! The instrument closing the connection, not answering within `timeout_s` (a stall), an
//! I/O error, or an answer the decoder cannot read after at least one sweep was taken
//! (garbage mid-scan) is a link fault. It is reported on standard error
//! (`sweep N: link fault: …; retry i of R in W s: reconnecting`), and the sweep is taken
//! again on a new connection: up to `retries` reconnections per sweep (default 3; the
//! count starts again after each good sweep), waiting `retry_backoff_s` (default 0.5 s)
//! before the first and doubling the wait before each further one (0.5, 1, 2 s: 3.5 s in
//! all), sending `reconnect_setup` (default: `setup`) on each new connection, then the
//! trigger, wait and data queries again. The decoder forgets any partial answer. When the
//! retries are used up the recording is finished cleanly (end record) with every sweep
//! taken before the fault, and `acquire` exits non-zero naming the fault. An unreadable
//! answer to the very first sweep is not retried: the profile does not match the
//! instrument. Note that a setup that resets the instrument (`*RST` for the simulated
//! one) restarts its sweep state; give a `reconnect_setup` without it to resume.
//!
//! ```toml
//! retries = 3                       # reconnections per sweep after a link fault
//! retry_backoff_s = 0.5             # first wait, doubling
//! reconnect_setup = ["FORMat:DATA REAL,32", "FORMat:BORDer SWAPped"]  # default: setup
//! ```
//!
//! # Positioner line protocol
//!
//! `--positioner HOST:PORT` connects to a TCP server sending one sample per line, in ASCII:
//!
//! ```text
//! <t_us> <angle_deg>\n
//! ```
//!
//! `t_us`: an unsigned integer, microseconds on the positioner's own clock (any origin,
//! increasing); `angle_deg`: a decimal number, degrees. The fields are separated by
//! spaces or tabs; a `\r` before the newline is ignored; empty lines and lines starting
//! with `#` are skipped; other lines are counted as malformed and reported. The first
//! sample fixes the offset between the positioner's clock and ours (its arrival time);
//! later samples are placed by their own timestamps with that offset, so the link's
//! latency does not jitter them. Encoder counts are derived with `counts_per_turn`.
//! Without `--sweeps`, the server closing the connection ends the scan: `acquire` stops
//! before the next sweep.
//!
//! `--positioner-sim` takes the angles from the simulator's positioner model of
//! `--scenario` instead, and stamps the n-th sweep with the n-th sweep time of that
//! scenario's schedule (right when the instrument simulates the same scenario from `*RST`).
//!
//! # Stopping
//!
//! After `--sweeps N` or at the end of the simulated schedule, whichever comes first;
//! without `--sweeps`, also when the line server closes (with no positioner, `--sweeps`
//! is required). Samples
//! still arriving are read for up to `--linger-s` (default 1 s) until the line server
//! closes, then the recording is finished.

use std::collections::BTreeSet;
use std::io::{Read, Write};
use std::net::{TcpStream, ToSocketAddrs};
use std::path::{Path, PathBuf};
use std::sync::mpsc;
use std::time::{Duration, Instant};

use anyhow::{bail, Context};
use num_complex::Complex32;
use serde::Deserialize;
use sweepgate::grid::Grid;
use sweepgate::scan::Event as ScanEvent;
use sweepgate::wire::ascii::{AsciiConfig, AsciiDecoder};
use sweepgate::wire::block::{BlockConfig, BlockDecoder, DecodeEvent, StreamDecoder};

use crate::formats::block::{parse_format, parse_order};
use crate::formats::recording::{GridInfo, Header, Record, SyncPolicy, Writer, SWEEP_FORMAT};
use crate::limits::MAX_FREQUENCIES;
use crate::model::scenario::Scenario;
use crate::model::simulator::{Sample, Simulator};
use crate::output::report::ReportBin;
use crate::pipeline::engine::{warning_text, Engine};
use crate::pipeline::options::{describe_window, Choices, GateOptions};
use crate::pipeline::setup::{self, Setup};
use crate::pipeline::transform::c64;
use crate::units::db;

/// The default profile, for `sweepgate instrument`.
pub const SIMULATED_PROFILE: &str = include_str!("../../profiles/simulated.toml");

/// Longest answer line accepted, bytes.
pub const MAX_ANSWER_LINE: usize = 1 << 20;

/// Options of `sweepgate acquire`, as given (`cli/acquire.rs` spells them).
#[derive(Debug, Clone)]
pub struct Options {
    /// Profile file (TOML) with the strings to send (default: the built-in simulated one).
    pub profile: Option<PathBuf>,
    /// Instrument address, HOST:PORT.
    pub instrument: String,
    /// Positioner line server, HOST:PORT.
    pub positioner: Option<String>,
    /// Take angles from the simulator's positioner model of `scenario`.
    pub positioner_sim: bool,
    /// Scenario for `positioner_sim`.
    pub scenario: Option<PathBuf>,
    /// Seed for `positioner_sim` (default: the scenario's).
    pub seed: Option<u64>,
    /// Stop after this many sweeps.
    pub sweeps: Option<u64>,
    /// Seconds to keep reading angle samples after the last sweep.
    pub linger_s: f64,
    /// Recording to write.
    pub out: PathBuf,
    /// Gate and pattern options for the live engine.
    pub gate: GateOptions,
    /// Angle bin width for the live engine, degrees (default: the scenario's, else 1).
    pub bin_width_deg: Option<f64>,
}

/// `[grid]` of a profile.
#[derive(Debug, Clone, Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub struct GridSpec {
    /// First frequency, Hz (or `start_query`).
    pub start_hz: Option<f64>,
    /// Query answering the first frequency.
    pub start_query: Option<String>,
    /// Last frequency, Hz (or `stop_query`).
    pub stop_hz: Option<f64>,
    /// Query answering the last frequency.
    pub stop_query: Option<String>,
    /// Point count (or `points_query`).
    pub points: Option<usize>,
    /// Query answering the point count.
    pub points_query: Option<String>,
}

/// An instrument profile: the strings to send (see the module doc).
///
/// ```
/// use sweepgate_host::link::acquire::{Profile, SIMULATED_PROFILE};
/// let p = Profile::from_toml(SIMULATED_PROFILE).unwrap();
/// assert_eq!(p.data, "TRACe:DATA?");
/// assert!(Profile::from_toml("name = 'x'\ndata = 'D?'\nformat = 'real16'").is_err());
/// ```
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Profile {
    /// Name, shown in the recording.
    pub name: String,
    /// Seconds to wait for each answer.
    #[serde(default = "default_timeout")]
    pub timeout_s: f64,
    /// Identification query.
    pub identify: Option<String>,
    /// Sent once after connecting.
    #[serde(default)]
    pub setup: Vec<String>,
    /// Sent before each sweep.
    #[serde(default)]
    pub trigger: Vec<String>,
    /// Query awaited after the trigger.
    pub wait: Option<String>,
    /// Data query.
    pub data: String,
    /// `real32`, `real64` or `ascii`.
    pub format: String,
    /// `normal` or `swapped`.
    #[serde(default = "default_order")]
    pub byte_order: String,
    /// Error queue query.
    pub error_query: Option<String>,
    /// Encoder counts per turn for line-protocol angles.
    #[serde(default = "default_cpt")]
    pub counts_per_turn: u32,
    /// The frequency grid.
    #[serde(default)]
    pub grid: GridSpec,
    /// Reconnections tried per sweep after a link fault (see the module docs).
    #[serde(default = "default_retries")]
    pub retries: u32,
    /// Wait before the first reconnection, s; it doubles with each further one.
    #[serde(default = "default_backoff")]
    pub retry_backoff_s: f64,
    /// Sent after reconnecting (default: `setup`).
    pub reconnect_setup: Option<Vec<String>>,
}

fn default_timeout() -> f64 {
    5.0
}
fn default_order() -> String {
    "normal".into()
}
fn default_cpt() -> u32 {
    36000
}
fn default_retries() -> u32 {
    3
}
fn default_backoff() -> f64 {
    0.5
}

impl Profile {
    /// Parses and checks a profile.
    pub fn from_toml(text: &str) -> anyhow::Result<Self> {
        let p: Profile = toml::from_str(text)
            .map_err(|e| anyhow::anyhow!("{}", crate::model::scenario::toml_one_line(text, &e)))?;
        if !(p.timeout_s.is_finite() && p.timeout_s > 0.0) {
            bail!("timeout_s must be above 0 (got {})", p.timeout_s);
        }
        if !p.format.eq_ignore_ascii_case("ascii") {
            parse_format(&p.format)?;
            parse_order(&p.byte_order)?;
        }
        if p.counts_per_turn == 0 {
            bail!("counts_per_turn must be above 0");
        }
        if !(p.retry_backoff_s.is_finite() && (0.0..=60.0).contains(&p.retry_backoff_s)) {
            bail!(
                "retry_backoff_s must be 0 to 60 (got {})",
                p.retry_backoff_s
            );
        }
        if p.retries > 16 {
            bail!("retries must be at most 16 (got {})", p.retries);
        }
        let g = &p.grid;
        for (name, v, q) in [
            ("start", g.start_hz.is_some(), g.start_query.is_some()),
            ("stop", g.stop_hz.is_some(), g.stop_query.is_some()),
            ("points", g.points.is_some(), g.points_query.is_some()),
        ] {
            if v == q {
                bail!("[grid] needs exactly one of {name} value and {name}_query");
            }
        }
        Ok(p)
    }
}

/// One angle sample from the positioner.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AngleSample {
    /// On our clock, µs from the start of the acquisition.
    pub t_us: u64,
    /// Angle, degrees.
    pub angle_deg: f64,
}

/// Parses one line of the positioner protocol: `Ok(None)` for blank and comment lines.
pub fn parse_angle_line(line: &str) -> Result<Option<(u64, f64)>, String> {
    let line = line.trim_end_matches('\r').trim();
    if line.is_empty() || line.starts_with('#') {
        return Ok(None);
    }
    let mut it = line.split_whitespace();
    let (Some(t), Some(a), None) = (it.next(), it.next(), it.next()) else {
        return Err(format!("expected `<t_us> <angle_deg>`, got {line:?}"));
    };
    let t: u64 = t.parse().map_err(|_| format!("bad t_us in {line:?}"))?;
    let a: f64 = a
        .parse()
        .map_err(|_| format!("bad angle_deg in {line:?}"))?;
    if !a.is_finite() {
        return Err(format!("angle not finite in {line:?}"));
    }
    Ok(Some((t, a)))
}

enum PosMsg {
    Sample(AngleSample),
    Malformed(String),
}

fn spawn_positioner(
    addr: &str,
    epoch: Instant,
    timeout: Duration,
) -> anyhow::Result<mpsc::Receiver<PosMsg>> {
    let stream = connect(addr, timeout)
        .with_context(|| format!("connecting to the positioner at {addr}"))?;
    let (tx, rx) = mpsc::channel();
    std::thread::spawn(move || {
        let reader = std::io::BufReader::new(stream);
        let mut offset: Option<i128> = None;
        use std::io::BufRead;
        for line in reader.lines() {
            let Ok(line) = line else { break };
            let msg = match parse_angle_line(&line) {
                Ok(None) => continue,
                Ok(Some((t, a))) => {
                    let off = *offset
                        .get_or_insert_with(|| epoch.elapsed().as_micros() as i128 - t as i128);
                    let t_us = (t as i128 + off).max(0) as u64;
                    PosMsg::Sample(AngleSample { t_us, angle_deg: a })
                }
                Err(e) => PosMsg::Malformed(e),
            };
            if tx.send(msg).is_err() {
                break;
            }
        }
    });
    Ok(rx)
}

fn connect(addr: &str, timeout: Duration) -> anyhow::Result<TcpStream> {
    let addrs: Vec<_> = addr
        .to_socket_addrs()
        .with_context(|| format!("{addr:?} is not HOST:PORT"))?
        .collect();
    let mut last = None;
    for a in addrs {
        match TcpStream::connect_timeout(&a, timeout) {
            Ok(s) => return Ok(s),
            Err(e) => last = Some(e),
        }
    }
    match last {
        Some(e) => Err(e.into()),
        None => bail!("{addr} resolves to no address"),
    }
}

/// A line-oriented SCPI connection with its read buffer.
pub struct Link {
    stream: TcpStream,
    buf: Vec<u8>,
    start: usize,
    end: usize,
    timeout_s: f64,
}

fn is_timeout(e: &std::io::Error) -> bool {
    matches!(
        e.kind(),
        std::io::ErrorKind::WouldBlock | std::io::ErrorKind::TimedOut
    )
}

fn is_query(cmd: &str) -> bool {
    cmd.split_whitespace()
        .next()
        .is_some_and(|h| h.ends_with('?'))
}

impl Link {
    /// Connects to `addr` with `timeout_s` for the connection and each answer.
    pub fn connect(addr: &str, timeout_s: f64) -> anyhow::Result<Self> {
        let t = Duration::from_secs_f64(timeout_s);
        let stream =
            connect(addr, t).with_context(|| format!("connecting to the instrument at {addr}"))?;
        stream.set_read_timeout(Some(t))?;
        stream.set_nodelay(true).ok();
        Ok(Self {
            stream,
            buf: vec![0; 64 * 1024],
            start: 0,
            end: 0,
            timeout_s,
        })
    }

    /// Sends one program message (a newline is added).
    pub fn send(&mut self, cmd: &str) -> anyhow::Result<()> {
        let mut m = cmd.as_bytes().to_vec();
        m.push(b'\n');
        self.stream
            .write_all(&m)
            .with_context(|| format!("sending {cmd:?}"))
    }

    fn fill(&mut self, query: &str) -> anyhow::Result<()> {
        if self.start == self.end {
            self.start = 0;
            self.end = 0;
        }
        match self.stream.read(&mut self.buf[self.end..]) {
            Ok(0) => bail!("the instrument closed the connection while answering {query:?}"),
            Ok(n) => {
                self.end += n;
                Ok(())
            }
            Err(e) if is_timeout(&e) => bail!(
                "timeout: no answer within {} s to {query:?}",
                self.timeout_s
            ),
            Err(e) => Err(e).with_context(|| format!("reading the answer to {query:?}")),
        }
    }

    /// Reads one non-empty answer line (without its line end).
    pub fn read_line(&mut self, query: &str) -> anyhow::Result<String> {
        let mut line = Vec::new();
        loop {
            let chunk = &self.buf[self.start..self.end];
            if let Some(i) = chunk.iter().position(|&b| b == b'\n') {
                line.extend_from_slice(&chunk[..i]);
                self.start += i + 1;
                if line.last() == Some(&b'\r') {
                    line.pop();
                }
                if line.is_empty() {
                    continue; // a line end left after a block
                }
                return Ok(String::from_utf8_lossy(&line).into_owned());
            }
            line.extend_from_slice(chunk);
            self.start = self.end;
            if line.len() > MAX_ANSWER_LINE {
                bail!("answer to {query:?} longer than {MAX_ANSWER_LINE} bytes");
            }
            self.fill(query)?;
        }
    }

    /// Sends a query and reads its answer line.
    pub fn query(&mut self, q: &str) -> anyhow::Result<String> {
        self.send(q)?;
        self.read_line(q)
    }

    /// Feeds answer bytes to `dec` until it reports an event.
    pub fn read_data<D: StreamDecoder>(
        &mut self,
        dec: &mut D,
        out: &mut [Complex32],
        query: &str,
    ) -> anyhow::Result<DecodeEvent<D::Error>> {
        loop {
            if self.start < self.end {
                let fed = dec.feed(&self.buf[self.start..self.end], out);
                self.start += fed.consumed;
                if let Some(e) = fed.event {
                    return Ok(e);
                }
            }
            self.fill(query)?;
        }
    }

    /// Discards whatever arrives until the link has been quiet for `quiet`.
    pub fn drain(&mut self, quiet: Duration) {
        self.start = 0;
        self.end = 0;
        let t = Duration::from_secs_f64(self.timeout_s);
        self.stream.set_read_timeout(Some(quiet)).ok();
        while matches!(self.stream.read(&mut self.buf), Ok(n) if n > 0) {}
        self.stream.set_read_timeout(Some(t)).ok();
    }

    /// Reads the error queue until it says "no error" (at most 32 entries).
    pub fn errors(&mut self, q: &str) -> anyhow::Result<Vec<String>> {
        let mut out = Vec::new();
        for _ in 0..32 {
            let a = self.query(q)?;
            let t = a.trim();
            if t.starts_with("0,") || t.starts_with("+0,") || t == "0" {
                break;
            }
            out.push(t.to_owned());
        }
        Ok(out)
    }
}

enum Decoder {
    Block(BlockDecoder),
    Ascii(AsciiDecoder),
}

impl Decoder {
    /// Forgets any partial answer (after a dropped sweep or a new connection).
    fn reset(&mut self) {
        match self {
            Decoder::Block(d) => d.reset(),
            Decoder::Ascii(d) => d.reset(),
        }
    }
}

/// What an acquisition wrote.
#[derive(Debug, Clone, Default)]
pub struct Summary {
    /// Sweep records.
    pub sweeps: u64,
    /// Position records.
    pub positions: u64,
    /// Sweeps dropped (non-finite values).
    pub rejected: u64,
    /// Malformed positioner lines.
    pub malformed_lines: u64,
    /// Bins the live engine closed (0 without one).
    pub bins_closed: u64,
    /// Link faults met (closed connection, timeout, garbage mid-scan).
    pub link_faults: u64,
    /// Successful reconnections after a link fault.
    pub reconnects: u64,
    /// The live engine's set-up, when it ran.
    pub setup: Option<Setup>,
    /// The live engine's closed bins in index order (a revisited bin holds its latest
    /// result).
    pub bins: Vec<ReportBin>,
}

/// Where angles come from.
pub enum AngleSource {
    /// None: only sweeps are recorded.
    None,
    /// A line server at this address.
    Lines(String),
    /// The simulator's positioner model.
    Sim(Box<Scenario>, u64),
}

/// What to acquire.
pub struct Request {
    /// Instrument address, HOST:PORT.
    pub instrument: String,
    /// Where angles come from.
    pub positioner: AngleSource,
    /// Stop after this many sweeps.
    pub max_sweeps: Option<u64>,
    /// Seconds to keep reading angle samples after the last sweep.
    pub linger_s: f64,
    /// Gate and pattern choices for the live engine.
    pub choices: Choices,
    /// Recording to write.
    pub out: PathBuf,
}

/// Angle samples on their way in.
enum Angles {
    /// No positioner.
    None,
    /// A line server; `done` once it closed.
    Lines {
        rx: mpsc::Receiver<PosMsg>,
        done: bool,
    },
    /// The simulator's samples and sweep schedule; `next` is the first sample not yet sent.
    Sim {
        samples: Vec<Sample>,
        starts_s: Vec<f64>,
        duration_s: f64,
        next: usize,
    },
}

/// The live engine and what it prints.
struct LiveEngine {
    engine: Engine,
    setup: Setup,
    frequencies_hz: Vec<f64>,
    shown: BTreeSet<String>,
    closed: u64,
}

impl LiveEngine {
    /// Prints each closed bin, the first warning of each kind, and the closing count.
    fn print(&mut self, events: &[ScanEvent<MAX_FREQUENCIES>]) {
        for e in events {
            match e {
                ScanEvent::BinClosed(r) => {
                    self.closed += 1;
                    let values: Vec<String> = self
                        .frequencies_hz
                        .iter()
                        .enumerate()
                        .map(|(j, f)| {
                            format!(
                                "at {:.4} GHz raw {:>7.2} dB, gated {:>7.2} dB",
                                f / 1e9,
                                db(c64(r.raw[j])),
                                db(c64(r.gated[j]))
                            )
                        })
                        .collect();
                    let echo = r.echo_db.map_or("-".into(), |e| format!("{e:.1} dB"));
                    println!(
                        "bin {:>4} {:>8.2} deg: {:>3} sweeps, {}, echo {echo}",
                        r.index,
                        r.nominal_deg,
                        r.sweeps,
                        values.join("; ")
                    );
                }
                ScanEvent::Warning(w) => {
                    // The first of each kind is shown; all are counted.
                    let text = warning_text(w);
                    if self.shown.insert(text.clone()) {
                        eprintln!("scan: {text} (further ones counted)");
                    }
                }
                ScanEvent::Finished(c) => {
                    eprintln!(
                        "scan: {} sweeps binned, {} refused; {} bins closed",
                        c.sweeps_binned,
                        c.sweeps_rejected(),
                        c.bins_closed
                    );
                    for (k, n) in self.engine.warnings() {
                        eprintln!("scan: {n} × {k}");
                    }
                }
            }
        }
    }
}

/// The recording and the live engine: every record goes to both.
struct Recorder {
    w: Writer<std::fs::File>,
    engine: Option<LiveEngine>,
    sum: Summary,
}

impl Recorder {
    fn position(&mut self, t_us: u64, counts: i64, angle_deg: f64) -> anyhow::Result<()> {
        self.w.write(&Record::Position {
            t_us,
            counts,
            angle_deg,
        })?;
        self.sum.positions += 1;
        if let Some(e) = &mut self.engine {
            let ev = e.engine.angle(t_us, angle_deg);
            e.print(&ev);
        }
        Ok(())
    }

    fn sweep(&mut self, start_us: u64, end_us: u64, s21: &[Complex32]) -> anyhow::Result<()> {
        self.w.write(&Record::Sweep {
            index: self.sum.sweeps as u32,
            start_us,
            end_us,
            s21: s21.to_vec(),
        })?;
        if let Some(e) = &mut self.engine {
            e.engine.sweep(start_us, end_us, s21);
        }
        self.sum.sweeps += 1;
        if self.sum.sweeps % 50 == 0 {
            eprintln!(
                "{} sweeps, {} angle samples",
                self.sum.sweeps, self.sum.positions
            );
        }
        Ok(())
    }

    /// Forwards line-protocol samples: those waiting (`wait` = `None`) or those arriving
    /// within `wait`. Returns true once the line server has closed.
    fn lines(
        &mut self,
        rx: &mpsc::Receiver<PosMsg>,
        wait: Option<Duration>,
        counts_per_turn: f64,
    ) -> anyhow::Result<bool> {
        let deadline = wait.map(|d| Instant::now() + d);
        loop {
            let msg = match deadline {
                None => match rx.try_recv() {
                    Ok(m) => m,
                    Err(mpsc::TryRecvError::Empty) => return Ok(false),
                    Err(mpsc::TryRecvError::Disconnected) => return Ok(true),
                },
                Some(d) => match rx.recv_timeout(d.saturating_duration_since(Instant::now())) {
                    Ok(m) => m,
                    Err(mpsc::RecvTimeoutError::Timeout) => return Ok(false),
                    Err(mpsc::RecvTimeoutError::Disconnected) => return Ok(true),
                },
            };
            match msg {
                PosMsg::Sample(s) => {
                    let counts = (s.angle_deg / 360.0 * counts_per_turn).round() as i64;
                    self.position(s.t_us, counts, s.angle_deg)?;
                }
                PosMsg::Malformed(e) => {
                    self.sum.malformed_lines += 1;
                    eprintln!("positioner: malformed line: {e}");
                }
            }
        }
    }
}

/// One acquisition: the instrument link, the angle source and the recorder.
struct Session<'a> {
    profile: &'a Profile,
    instrument: &'a str,
    link: Link,
    dec: Decoder,
    epoch: Instant,
    points: usize,
    angles: Angles,
    rec: Recorder,
    /// Sweeps triggered, including dropped ones.
    taken: u64,
}

/// How one sweep went.
enum Took {
    /// Taken; it started at this time, µs.
    Sweep(u64),
    /// Dropped (non-finite values); go on.
    Dropped,
    /// Stop the acquisition.
    Fatal(anyhow::Error),
}

/// Runs an acquisition.
pub fn acquire(profile: &Profile, req: Request) -> anyhow::Result<Summary> {
    if req.max_sweeps.is_none() && matches!(req.positioner, AngleSource::None) {
        bail!("with no positioner, give --sweeps");
    }
    let epoch = Instant::now();
    let (link, idn, grid) = connect_and_set_up(profile, &req.instrument)?;
    let dec = decoder(profile, grid.points())?;
    let timeout = Duration::from_secs_f64(profile.timeout_s);
    let (angles, scenario) = start_angles(req.positioner, epoch, timeout)?;
    let mut header = header_for(profile, &req.instrument, idn, &grid, scenario);
    let engine = live_engine(&mut header, &req.choices)?;
    let mut w = Writer::create(&req.out, SyncPolicy::default())
        .with_context(|| format!("creating {}", req.out.display()))?;
    w.write(&Record::Header(Box::new(header)))?;
    let mut s = Session {
        profile,
        instrument: &req.instrument,
        link,
        dec,
        epoch,
        points: grid.points(),
        angles,
        rec: Recorder {
            w,
            engine,
            sum: Summary::default(),
        },
        taken: 0,
    };
    let fatal = s.sweeps(req.max_sweeps);
    s.finish(fatal, req.linger_s, &req.out)
}

/// Connects, identifies, sends the profile's setup, checks the error queue and reads the
/// grid.
fn connect_and_set_up(
    profile: &Profile,
    instrument: &str,
) -> anyhow::Result<(Link, Option<String>, Grid)> {
    let mut link = Link::connect(instrument, profile.timeout_s)?;
    let idn = match &profile.identify {
        Some(q) => Some(link.query(q)?),
        None => None,
    };
    if let Some(i) = &idn {
        eprintln!("instrument: {i}");
    }
    if let Some(q) = &profile.error_query {
        // Old entries are not ours: drain them (a *CLS in setup would also do).
        link.errors(q)?;
    }
    for cmd in &profile.setup {
        if is_query(cmd) {
            let a = link.query(cmd)?;
            eprintln!("{cmd} -> {a}");
        } else {
            link.send(cmd)?;
        }
    }
    if let Some(q) = &profile.error_query {
        let e = link.errors(q)?;
        if !e.is_empty() {
            bail!("instrument error queue after setup: {}", e.join("; "));
        }
    }
    let grid = query_grid(&mut link, &profile.grid)?;
    eprintln!(
        "grid: {} Hz to {} Hz, {} points; format {}",
        grid.start_hz(),
        grid.stop_hz(),
        grid.points(),
        profile.format
    );
    Ok((link, idn, grid))
}

/// The grid from the profile's fixed values or queries.
fn query_grid(link: &mut Link, g: &GridSpec) -> anyhow::Result<Grid> {
    let mut num = |v: Option<f64>, q: &Option<String>| -> anyhow::Result<f64> {
        match (v, q) {
            (Some(v), _) => Ok(v),
            (None, Some(q)) => {
                let a = link.query(q)?;
                a.trim()
                    .parse::<f64>()
                    .with_context(|| format!("answer {a:?} to {q:?} is not a number"))
            }
            (None, None) => bail!("no grid value"),
        }
    };
    let start_hz = num(g.start_hz, &g.start_query)?;
    let stop_hz = num(g.stop_hz, &g.stop_query)?;
    let points = num(g.points.map(|p| p as f64), &g.points_query)?;
    if points.fract() != 0.0 || points < 1.0 {
        bail!("point count {points} is not a positive whole number");
    }
    let points = points as usize;
    Grid::from_start_stop(start_hz, stop_hz, points)
        .with_context(|| format!("grid {start_hz} Hz to {stop_hz} Hz, {points} points"))
}

/// The data decoder the profile's format selects.
fn decoder(profile: &Profile, points: usize) -> anyhow::Result<Decoder> {
    Ok(if profile.format.eq_ignore_ascii_case("ascii") {
        Decoder::Ascii(AsciiDecoder::new(AsciiConfig::new(points)?))
    } else {
        Decoder::Block(BlockDecoder::new(BlockConfig::new(
            points,
            parse_format(&profile.format)?,
            parse_order(&profile.byte_order)?,
        )?))
    })
}

/// Starts the angle source; the simulated positioner also gives its scenario.
fn start_angles(
    positioner: AngleSource,
    epoch: Instant,
    timeout: Duration,
) -> anyhow::Result<(Angles, Option<Scenario>)> {
    Ok(match positioner {
        AngleSource::None => (Angles::None, None),
        AngleSource::Lines(addr) => (
            Angles::Lines {
                rx: spawn_positioner(&addr, epoch, timeout)?,
                done: false,
            },
            None,
        ),
        AngleSource::Sim(s, seed) => {
            s.validate()?;
            let mut sim = Simulator::new(&s, seed);
            let angles = Angles::Sim {
                samples: sim.samples(),
                starts_s: sim.timeline().sweep_starts_s().to_vec(),
                duration_s: sim.timeline().sweep_duration_s(),
                next: 0,
            };
            (angles, Some(*s))
        }
    })
}

/// The recording's header.
fn header_for(
    profile: &Profile,
    instrument: &str,
    idn: Option<String>,
    grid: &Grid,
    scenario: Option<Scenario>,
) -> Header {
    Header {
        software: format!("sweepgate {}", env!("CARGO_PKG_VERSION")),
        source: format!(
            "acquire: {} at {instrument}, profile {:?}",
            idn.as_deref().unwrap_or("instrument"),
            profile.name
        ),
        pattern_frequencies_hz: scenario
            .as_ref()
            .map(|s| s.pattern_frequencies_hz())
            .unwrap_or_default(),
        bin_width_deg: scenario.as_ref().map(|s| s.bin_width_deg()),
        counts_per_turn: Some(
            scenario
                .as_ref()
                .map_or(profile.counts_per_turn, |s| s.positioner.counts_per_turn),
        ),
        scenario,
        scenario_toml: None,
        seed: None,
        grid: GridInfo {
            start_hz: grid.start_hz(),
            step_hz: grid.step_hz(),
            points: grid.points(),
        },
        sweep_format: SWEEP_FORMAT.into(),
    }
}

/// The live engine, when a gate can be set up: from the header (as `replay` and `process`
/// set up the recording) and the choices. The header then records the pattern frequencies
/// and bin width the engine uses.
fn live_engine(header: &mut Header, choices: &Choices) -> anyhow::Result<Option<LiveEngine>> {
    if header.scenario.is_none() && *choices == Choices::default() {
        return Ok(None);
    }
    if choices.bin_width_deg.is_some() {
        header.bin_width_deg = choices.bin_width_deg;
    }
    let setup = setup::for_recording(header, choices, &[]).context("the live scan engine")?;
    header.pattern_frequencies_hz = setup.frequencies_hz.clone();
    let g = &setup.gate;
    eprintln!(
        "scan engine: gate center {:.3} ns, span {:.3} ns ({}; {}); band window {}, gate shape {}; {} bins",
        g.center_s * 1e9,
        g.span_s * 1e9,
        setup.gate_source,
        setup.gate_rule,
        describe_window(&g.band_window),
        describe_window(&g.shape),
        setup.layout.count()
    );
    for r in &setup.remarks {
        eprintln!("scan engine: {r}");
    }
    Ok(Some(LiveEngine {
        engine: Engine::new(&setup)?,
        frequencies_hz: setup.frequencies_hz.clone(),
        setup,
        shown: BTreeSet::new(),
        closed: 0,
    }))
}

impl Session<'_> {
    /// Takes sweeps until a stop condition; returns the fault that stopped it, if any.
    fn sweeps(&mut self, max_sweeps: Option<u64>) -> Option<anyhow::Error> {
        let mut sweep = vec![Complex32::new(0.0, 0.0); self.points];
        while !self.should_stop(max_sweeps) {
            let t_start = match self.take_with_retries(&mut sweep) {
                Took::Sweep(t) => t,
                Took::Dropped => continue,
                Took::Fatal(e) => return Some(e),
            };
            self.taken += 1;
            if let Err(e) = self.record(t_start, &sweep) {
                return Some(e);
            }
        }
        None
    }

    /// After `--sweeps`, at the end of the simulated schedule, or when the line server has
    /// closed (without `--sweeps`).
    fn should_stop(&self, max_sweeps: Option<u64>) -> bool {
        if max_sweeps.is_some_and(|m| self.rec.sum.sweeps >= m) {
            return true;
        }
        match &self.angles {
            Angles::Lines { done: true, .. } if max_sweeps.is_none() => {
                eprintln!("positioner closed its connection: end of the scan");
                true
            }
            Angles::Sim { starts_s, .. } => self.taken as usize >= starts_s.len(),
            _ => false,
        }
    }

    /// Takes one sweep, reconnecting after link faults (see the module notes).
    fn take_with_retries(&mut self, sweep: &mut [Complex32]) -> Took {
        let mut attempt = 0u32;
        loop {
            let t_start = self.epoch.elapsed().as_micros() as u64;
            let fault = match take_sweep(&mut self.link, &mut self.dec, sweep, self.profile) {
                Ok(Ok(())) => return Took::Sweep(t_start),
                Ok(Err((why, true))) => {
                    self.taken += 1;
                    self.rec.sum.rejected += 1;
                    eprintln!("sweep {}: dropped: {why}", self.taken - 1);
                    self.link.drain(Duration::from_millis(200));
                    self.dec.reset();
                    return Took::Dropped;
                }
                Ok(Err((why, false))) => {
                    let p = self.profile;
                    let e = anyhow::anyhow!(
                        "answer to {:?} rejected: {why} (the profile expects {} points, format {}, byte order {})",
                        p.data,
                        self.points,
                        p.format,
                        p.byte_order
                    );
                    if self.rec.sum.sweeps == 0 && self.rec.sum.rejected == 0 {
                        // Nothing decoded yet: the profile does not match the instrument.
                        let q = p.error_query.as_deref();
                        return Took::Fatal(with_queue(&mut self.link, q, e));
                    }
                    e
                }
                Err(e) => e,
            };
            self.rec.sum.link_faults += 1;
            if let Err(e) = self.reconnect(fault, &mut attempt) {
                return Took::Fatal(e);
            }
        }
    }

    /// Reconnects with bounded attempts and doubling waits; the error when they run out.
    fn reconnect(&mut self, fault: anyhow::Error, attempt: &mut u32) -> Result<(), anyhow::Error> {
        let p = self.profile;
        let n = self.taken;
        loop {
            if *attempt >= p.retries {
                let e = with_queue(&mut self.link, p.error_query.as_deref(), fault);
                return Err(e.context(format!(
                    "link fault at sweep {n}, {} retries failed",
                    p.retries
                )));
            }
            *attempt += 1;
            let wait_s = p.retry_backoff_s * f64::from(1u32 << (*attempt - 1).min(16));
            eprintln!(
                "sweep {n}: link fault: {fault:#}; retry {} of {} in {wait_s:.2} s: reconnecting",
                *attempt, p.retries
            );
            std::thread::sleep(Duration::from_secs_f64(wait_s));
            match reconnect(self.instrument, p) {
                Ok(l) => {
                    self.link = l;
                    self.rec.sum.reconnects += 1;
                    self.dec.reset();
                    return Ok(());
                }
                Err(e) => eprintln!("sweep {n}: reconnecting failed: {e:#}"),
            }
        }
    }

    /// Forwards the angle samples up to the sweep, then records the sweep: stamped by the
    /// simulated schedule, else by our clock.
    fn record(&mut self, t_start: u64, sweep: &[Complex32]) -> anyhow::Result<()> {
        let t_end = self.epoch.elapsed().as_micros() as u64;
        let cpt = f64::from(self.profile.counts_per_turn);
        let (start_us, end_us) = match &mut self.angles {
            Angles::Sim {
                samples,
                starts_s,
                duration_s,
                next,
            } => {
                let t0 = starts_s
                    .get(self.taken as usize - 1)
                    .copied()
                    .unwrap_or(0.0);
                let s_us = (t0 * 1e6).round() as u64;
                let e_us = ((t0 + *duration_s) * 1e6).round() as u64;
                while let Some(s) = samples.get(*next).filter(|s| s.t_us <= e_us) {
                    self.rec.position(s.t_us, s.counts, s.angle_deg)?;
                    *next += 1;
                }
                (s_us, e_us)
            }
            Angles::Lines { rx, done } => {
                if !*done {
                    *done = self.rec.lines(rx, None, cpt)?;
                }
                (t_start, t_end)
            }
            Angles::None => (t_start, t_end),
        };
        self.rec.sweep(start_us, end_us, sweep)
    }

    /// Ends the recording: on a fault it keeps the partial scan and returns the fault;
    /// otherwise the remaining angle samples, the error queue, and the live engine's end.
    fn finish(
        mut self,
        fatal: Option<anyhow::Error>,
        linger_s: f64,
        out: &Path,
    ) -> anyhow::Result<Summary> {
        if let Some(e) = fatal {
            // Keep the partial scan: every record written so far is whole; end it cleanly.
            let swept = self.rec.sum.sweeps;
            self.rec.w.finish()?;
            return Err(e.context(format!(
                "acquisition stopped; the recording {} keeps the {swept} sweeps taken before the fault",
                out.display()
            )));
        }
        let cpt = f64::from(self.profile.counts_per_turn);
        match &self.angles {
            Angles::Sim { samples, next, .. } => {
                for s in samples.get(*next..).unwrap_or(&[]) {
                    self.rec.position(s.t_us, s.counts, s.angle_deg)?;
                }
            }
            Angles::Lines { rx, done: false } => {
                let linger = Duration::from_secs_f64(linger_s.max(0.0));
                self.rec.lines(rx, Some(linger), cpt)?;
            }
            _ => {}
        }
        if let Some(q) = &self.profile.error_query {
            for x in self.link.errors(q)? {
                eprintln!("instrument error queue at the end: {x}");
            }
        }
        let Recorder { w, engine, mut sum } = self.rec;
        w.finish()?;
        if let Some(mut e) = engine {
            let ev = e.engine.finish(false);
            e.print(&ev);
            sum.bins_closed = e.closed;
            sum.bins = e.engine.bins().values().cloned().collect();
            sum.setup = Some(e.setup);
        }
        Ok(sum)
    }
}

/// Triggers one sweep, waits for it and reads its data: `Ok(Err((why, non_finite)))` when
/// the decoder rejected the answer, `Err` for a link failure (closed, timeout, I/O).
fn take_sweep(
    link: &mut Link,
    dec: &mut Decoder,
    sweep: &mut [Complex32],
    profile: &Profile,
) -> anyhow::Result<Result<(), (String, bool)>> {
    for cmd in &profile.trigger {
        link.send(cmd)?;
    }
    if let Some(q) = &profile.wait {
        link.query(q)?;
    }
    link.send(&profile.data)?;
    Ok(match dec {
        Decoder::Block(d) => match link.read_data(d, sweep, &profile.data)? {
            DecodeEvent::Sweep { .. } => Ok(()),
            DecodeEvent::Rejected(e) => Err((
                e.to_string(),
                matches!(e, sweepgate::error::BlockError::NonFinite { .. }),
            )),
        },
        Decoder::Ascii(d) => match link.read_data(d, sweep, &profile.data)? {
            DecodeEvent::Sweep { .. } => Ok(()),
            DecodeEvent::Rejected(e) => Err((
                e.to_string(),
                matches!(e, sweepgate::error::AsciiError::NonFinite { .. }),
            )),
        },
    })
}

/// A new connection after a link fault, with the profile's `reconnect_setup` (default: its
/// `setup`) sent again.
fn reconnect(instrument: &str, profile: &Profile) -> anyhow::Result<Link> {
    let mut link = Link::connect(instrument, profile.timeout_s)?;
    for cmd in profile.reconnect_setup.as_ref().unwrap_or(&profile.setup) {
        if is_query(cmd) {
            link.query(cmd)?;
        } else {
            link.send(cmd)?;
        }
    }
    Ok(link)
}

/// Adds the instrument's error queue entries to an error, when there is an error query.
fn with_queue(link: &mut Link, q: Option<&str>, e: anyhow::Error) -> anyhow::Error {
    let Some(q) = q else { return e };
    link.drain(Duration::from_millis(200));
    match link.errors(q) {
        Ok(v) if !v.is_empty() => e.context(format!("instrument error queue: {}", v.join("; "))),
        _ => e,
    }
}

/// Runs the command: reads the profile, starts the angle source, acquires and says what
/// was written.
pub fn run(opts: &Options) -> anyhow::Result<()> {
    let text = match &opts.profile {
        Some(p) => std::fs::read_to_string(p)
            .with_context(|| format!("reading profile {}", p.display()))?,
        None => SIMULATED_PROFILE.to_owned(),
    };
    let profile = Profile::from_toml(&text).context("in the profile")?;
    let positioner = if let Some(a) = &opts.positioner {
        AngleSource::Lines(a.clone())
    } else if opts.positioner_sim {
        let Some(path) = &opts.scenario else {
            bail!("--positioner-sim needs --scenario");
        };
        let s = Scenario::load(path)?;
        let seed = opts.seed.unwrap_or(s.simulation.seed);
        AngleSource::Sim(Box::new(s), seed)
    } else {
        AngleSource::None
    };
    let mut choices = opts.gate.choices()?;
    choices.bin_width_deg = opts.bin_width_deg;
    let req = Request {
        instrument: opts.instrument.clone(),
        positioner,
        max_sweeps: opts.sweeps,
        linger_s: opts.linger_s,
        choices,
        out: opts.out.clone(),
    };
    let sum = acquire(&profile, req)?;
    eprintln!(
        "wrote {} sweeps and {} angle samples to {} ({} sweeps dropped, {} malformed positioner lines, {} link faults, {} reconnections)",
        sum.sweeps,
        sum.positions,
        opts.out.display(),
        sum.rejected,
        sum.malformed_lines,
        sum.link_faults,
        sum.reconnects
    );
    if sum.setup.is_some() {
        eprintln!("scan engine closed {} bins", sum.bins_closed);
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn angle_lines() {
        assert_eq!(parse_angle_line("12 -3.5"), Ok(Some((12, -3.5))));
        assert_eq!(parse_angle_line("12\t4\r"), Ok(Some((12, 4.0))));
        assert_eq!(parse_angle_line("  "), Ok(None));
        assert_eq!(parse_angle_line("# comment"), Ok(None));
        assert!(parse_angle_line("12").is_err());
        assert!(parse_angle_line("12 3 4").is_err());
        assert!(parse_angle_line("-1 3").is_err());
        assert!(parse_angle_line("1 NaN").is_err());
        assert!(parse_angle_line("1 x").is_err());
    }

    #[test]
    fn profile_grid_needs_one_of_value_and_query() {
        let base = "name = 'x'\ndata = 'D?'\nformat = 'ascii'\n";
        let both = format!(
            "{base}[grid]\nstart_hz = 1e9\nstart_query = 'A?'\nstop_hz = 2e9\npoints = 3\n"
        );
        assert!(Profile::from_toml(&both).is_err());
        let fixed = format!("{base}[grid]\nstart_hz = 1e9\nstop_hz = 2e9\npoints = 3\n");
        assert_eq!(Profile::from_toml(&fixed).unwrap().grid.points, Some(3));
        assert!(Profile::from_toml(&format!("{base}timeout_s = 0\n")).is_err());
    }

    #[test]
    fn queries_are_told_by_their_header() {
        assert!(is_query("*IDN?"));
        assert!(is_query("TRACe:DATA? TRACE1"));
        assert!(!is_query("FORM:DATA REAL,32"));
        assert!(!is_query(""));
    }
}
