//! `sweepgate acquire`: the host playing the board's part over TCP. It drives a VNA with
//! the query strings of a profile, reads turntable angles, and writes a recording.
//!
//! ```text
//! sweepgate acquire [--profile FILE] --instrument HOST:PORT
//!                   [--positioner HOST:PORT | --positioner-sim --scenario FILE]
//!                   [--sweeps N] [--linger-s S] --out REC
//!                   [--gate-center-ns T --gate-span-ns S [--frequency-hz F] [--bin-width-deg W]]
//! ```
//!
//! With `--gate-center-ns` and `--gate-span-ns`, angle samples and sweeps also go through
//! the core scan engine ([`sweepgate::scan::Scan`], Kaiser β = 6 band window, Tukey α = 0.5
//! gate, renormalised; one pattern frequency, `--frequency-hz` or the grid's centre point;
//! bins of `--bin-width-deg` from the scenario's start angle, else −180°) as on the board,
//! and each bin is printed on standard output as it closes:
//! `bin <index> <deg> deg: <n> sweeps, at <GHz> GHz raw <dB> dB, gated <dB> dB, echo <dB>`.
//! Without them sweeps are only recorded.
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

use std::io::{Read, Write};
use std::net::{TcpStream, ToSocketAddrs};
use std::path::PathBuf;
use std::sync::mpsc;
use std::time::{Duration, Instant};

use anyhow::{bail, Context};
use num_complex::Complex32;
use serde::Deserialize;
use sweepgate::wire::ascii::{AsciiConfig, AsciiDecoder};
use sweepgate::wire::block::{BlockConfig, BlockDecoder, Event, StreamDecoder};

use crate::formats::block::{parse_format, parse_order};
use crate::formats::recording::{GridInfo, Header, Record, SyncPolicy, Writer, SWEEP_FORMAT};
use crate::model::scenario::Scenario;
use crate::model::simulator::Simulator;

/// The default profile, for `sweepgate instrument`.
pub const SIMULATED_PROFILE: &str = include_str!("../../profiles/simulated.toml");

/// Longest answer line accepted, bytes.
pub const MAX_ANSWER_LINE: usize = 1 << 20;

/// Options of `sweepgate acquire`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Profile file (TOML) with the strings to send (default: the built-in simulated one).
    #[arg(long)]
    pub profile: Option<PathBuf>,
    /// Instrument address, HOST:PORT.
    #[arg(long)]
    pub instrument: String,
    /// Positioner line server, HOST:PORT.
    #[arg(long, conflicts_with = "positioner_sim")]
    pub positioner: Option<String>,
    /// Take angles from the simulator's positioner model of --scenario.
    #[arg(long, requires = "scenario")]
    pub positioner_sim: bool,
    /// Scenario for --positioner-sim.
    #[arg(long)]
    pub scenario: Option<PathBuf>,
    /// Seed for --positioner-sim (default: the scenario's).
    #[arg(long)]
    pub seed: Option<u64>,
    /// Stop after this many sweeps.
    #[arg(long)]
    pub sweeps: Option<u64>,
    /// Seconds to keep reading angle samples after the last sweep.
    #[arg(long, default_value_t = 1.0)]
    pub linger_s: f64,
    /// Recording to write.
    #[arg(long)]
    pub out: PathBuf,
    /// Gate centre, ns after the VNA's time zero (with --gate-span-ns: run the scan engine).
    #[arg(long, requires = "gate_span_ns")]
    pub gate_center_ns: Option<f64>,
    /// Gate span (full width), ns.
    #[arg(long, requires = "gate_center_ns")]
    pub gate_span_ns: Option<f64>,
    /// Pattern frequency for the scan engine, Hz (default: the grid's centre point).
    #[arg(long)]
    pub frequency_hz: Option<f64>,
    /// Angle bin width for the scan engine, degrees (default: the scenario's, else 1).
    #[arg(long)]
    pub bin_width_deg: Option<f64>,
}

/// Scan engine settings: when given, sweeps and angles also go through
/// [`sweepgate::scan::Scan`] and each closed bin is printed.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Gating {
    /// Gate centre, s.
    pub center_s: f64,
    /// Gate span, s.
    pub span_s: f64,
    /// Pattern frequency, Hz (`None`: the grid's centre point).
    pub frequency_hz: Option<f64>,
    /// Bin width, degrees (`None`: the scenario's, else 1).
    pub bin_width_deg: Option<f64>,
}

/// Largest number of angle bins (0.1° bins over a full turn).
pub const MAX_BINS: usize = 3600;

/// The scan engine behind a small interface, so that the FFT size can follow K.
trait Engine {
    fn angle(&mut self, t_us: u64, angle_deg: f64);
    fn sweep(&mut self, start_us: u64, end_us: u64, s21: &[Complex32]);
    fn finish(&mut self) -> u64;
}

struct ScanEngine<const M: usize>
where
    [Complex32; M]: sweepgate::fft::Fft,
{
    scan: Box<sweepgate::scan::Scan<M, 1, MAX_BINS>>,
    closed: u64,
    frequency_hz: f64,
    warnings: std::collections::BTreeMap<String, u64>,
}

fn db(c: Complex32) -> f32 {
    20.0 * c.norm().max(1e-30).log10()
}

impl<const M: usize> ScanEngine<M>
where
    [Complex32; M]: sweepgate::fft::Fft,
{
    fn report(&mut self, events: sweepgate::scan::Events<1>) {
        use sweepgate::scan::Event as E;
        for e in events {
            match e {
                E::BinClosed(r) => {
                    self.closed += 1;
                    let echo = r.echo_db.map_or("-".into(), |e| format!("{e:.1} dB"));
                    println!(
                        "bin {:>4} {:>8.2} deg: {:>3} sweeps, at {:.4} GHz raw {:>7.2} dB, gated {:>7.2} dB, echo {echo}",
                        r.index,
                        r.nominal_deg,
                        r.sweeps,
                        self.frequency_hz / 1e9,
                        db(r.raw[0]),
                        db(r.gated[0]),
                    );
                }
                E::Warning(w) => {
                    // The first of each kind is shown; all are counted.
                    let key = format!("{w:?}");
                    let n = self.warnings.entry(key.clone()).or_insert(0);
                    if *n == 0 {
                        eprintln!("scan: {key} (further ones counted)");
                    }
                    *n += 1;
                }
                E::Finished(c) => {
                    eprintln!(
                        "scan: {} sweeps binned, {} refused; {} bins closed",
                        c.sweeps_binned,
                        c.sweeps_rejected(),
                        c.bins_closed
                    );
                    for (k, n) in &self.warnings {
                        eprintln!("scan: {n} × {k}");
                    }
                }
            }
        }
    }
}

impl<const M: usize> Engine for ScanEngine<M>
where
    [Complex32; M]: sweepgate::fft::Fft,
{
    fn angle(&mut self, t_us: u64, angle_deg: f64) {
        let e = self.scan.push_angle(t_us, angle_deg as f32);
        self.report(e);
    }
    fn sweep(&mut self, start_us: u64, end_us: u64, s21: &[Complex32]) {
        let e = self.scan.push_sweep(start_us, end_us, s21);
        self.report(e);
    }
    fn finish(&mut self) -> u64 {
        let e = self.scan.finish();
        self.report(e);
        self.closed
    }
}

fn engine(
    g: &Gating,
    grid: &sweepgate::grid::Grid,
    bin_width_deg: f64,
    start_deg: f64,
) -> anyhow::Result<Box<dyn Engine>> {
    use sweepgate::window::WindowKind;
    let cfg = sweepgate::gate::GateConfig {
        grid: *grid,
        // Common practice, no source: a Kaiser band window and a Tukey gate.
        band_window: WindowKind::Kaiser { beta: 6.0 },
        center_s: g.center_s,
        span_s: g.span_s,
        shape: WindowKind::Tukey { alpha: 0.5 },
        renormalize: true,
    };
    let f = g
        .frequency_hz
        .unwrap_or(grid.frequency_hz(grid.points() / 2));
    let k = grid
        .nearest_index(f)
        .with_context(|| format!("pattern frequency {f} Hz is off the grid"))?;
    let layout = sweepgate::bins::BinLayout::full_circle(start_deg as f32, bin_width_deg as f32)
        .map_err(|e| anyhow::anyhow!("bin layout: {e}"))?;
    let sc = sweepgate::scan::ScanConfig::new(layout);
    let frequency_hz = grid.frequency_hz(k);
    Ok(if grid.points() <= 1024 {
        Box::new(ScanEngine::<1024> {
            scan: Box::new(
                sweepgate::scan::Scan::new(&cfg, [k], sc)
                    .map_err(|e| anyhow::anyhow!("scan engine: {e}"))?,
            ),
            closed: 0,
            frequency_hz,
            warnings: Default::default(),
        })
    } else {
        Box::new(ScanEngine::<4096> {
            scan: Box::new(
                sweepgate::scan::Scan::new(&cfg, [k], sc)
                    .map_err(|e| anyhow::anyhow!("scan engine: {e}"))?,
            ),
            closed: 0,
            frequency_hz,
            warnings: Default::default(),
        })
    })
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
    ) -> anyhow::Result<Event<D::Error>> {
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
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Summary {
    /// Sweep records.
    pub sweeps: u64,
    /// Position records.
    pub positions: u64,
    /// Sweeps dropped (non-finite values).
    pub rejected: u64,
    /// Malformed positioner lines.
    pub malformed_lines: u64,
    /// Bins the scan engine closed (0 without gating).
    pub bins_closed: u64,
    /// Link faults met (closed connection, timeout, garbage mid-scan).
    pub link_faults: u64,
    /// Successful reconnections after a link fault.
    pub reconnects: u64,
}

/// Where angles come from.
pub enum Positioner {
    /// None: only sweeps are recorded.
    None,
    /// A line server at this address.
    Lines(String),
    /// The simulator's positioner model.
    Sim(Box<Scenario>, u64),
}

/// Runs an acquisition.
pub fn acquire(
    profile: &Profile,
    instrument: &str,
    positioner: Positioner,
    max_sweeps: Option<u64>,
    linger_s: f64,
    gating: Option<Gating>,
    out: &std::path::Path,
) -> anyhow::Result<Summary> {
    if max_sweeps.is_none() && matches!(positioner, Positioner::None) {
        bail!("with no positioner, give --sweeps");
    }
    let epoch = Instant::now();
    let mut link = Link::connect(instrument, profile.timeout_s)?;
    let idn = match &profile.identify {
        Some(q) => Some(link.query(q)?),
        None => None,
    };
    if let Some(i) = &idn {
        eprintln!("instrument: {i}");
    }
    let err_q = profile.error_query.as_deref();
    let check_errors = |link: &mut Link, when: &str| -> anyhow::Result<()> {
        if let Some(q) = err_q {
            let e = link.errors(q)?;
            if !e.is_empty() {
                bail!("instrument error queue {when}: {}", e.join("; "));
            }
        }
        Ok(())
    };
    if let Some(q) = err_q {
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
    check_errors(&mut link, "after setup")?;
    let g = &profile.grid;
    let num = |link: &mut Link, v: Option<f64>, q: &Option<String>| -> anyhow::Result<f64> {
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
    let start_hz = num(&mut link, g.start_hz, &g.start_query)?;
    let stop_hz = num(&mut link, g.stop_hz, &g.stop_query)?;
    let points = num(&mut link, g.points.map(|p| p as f64), &g.points_query)?;
    if points.fract() != 0.0 || points < 1.0 {
        bail!("point count {points} is not a positive whole number");
    }
    let points = points as usize;
    let grid = sweepgate::grid::Grid::from_start_stop(start_hz, stop_hz, points)
        .with_context(|| format!("grid {start_hz} Hz to {stop_hz} Hz, {points} points"))?;
    eprintln!(
        "grid: {} Hz to {} Hz, {} points; format {}",
        grid.start_hz(),
        grid.stop_hz(),
        grid.points(),
        profile.format
    );

    let mut dec = if profile.format.eq_ignore_ascii_case("ascii") {
        Decoder::Ascii(AsciiDecoder::new(AsciiConfig::new(points)?))
    } else {
        Decoder::Block(BlockDecoder::new(BlockConfig::new(
            points,
            parse_format(&profile.format)?,
            parse_order(&profile.byte_order)?,
        )?))
    };

    // Positioner.
    let timeout = Duration::from_secs_f64(profile.timeout_s);
    let mut lines_rx = None;
    let mut sim_state = None;
    let mut scenario = None;
    match positioner {
        Positioner::None => {}
        Positioner::Lines(addr) => lines_rx = Some(spawn_positioner(&addr, epoch, timeout)?),
        Positioner::Sim(s, seed) => {
            s.validate()?;
            let mut sim = Simulator::new(&s, seed);
            let samples = sim.samples();
            let starts = sim.timeline().sweep_starts_s().to_vec();
            let dur = sim.timeline().sweep_duration_s();
            sim_state = Some((samples, starts, dur, 0usize));
            scenario = Some(*s);
        }
    }

    let mut engine = match &gating {
        None => None,
        Some(g) => {
            let width = g
                .bin_width_deg
                .or(scenario.as_ref().map(|s| s.bin_width_deg()))
                .unwrap_or(1.0);
            let start = scenario.as_ref().map_or(-180.0, |s| s.positioner.start_deg);
            Some(engine(g, &grid, width, start)?)
        }
    };

    let mut w = Writer::create(out, SyncPolicy::default())
        .with_context(|| format!("creating {}", out.display()))?;
    let header = Header {
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
    };
    w.write(&Record::Header(Box::new(header)))?;

    let cpt = f64::from(profile.counts_per_turn);
    let mut sum = Summary {
        sweeps: 0,
        positions: 0,
        rejected: 0,
        malformed_lines: 0,
        bins_closed: 0,
        link_faults: 0,
        reconnects: 0,
    };
    let mut positioner_done = false;
    let write_lines = |w: &mut Writer<std::fs::File>,
                       sum: &mut Summary,
                       rx: &mpsc::Receiver<PosMsg>,
                       wait: Option<Duration>,
                       eng: &mut Option<Box<dyn Engine>>|
     -> anyhow::Result<bool> {
        // Returns true once the line server has closed.
        let deadline = wait.map(|d| Instant::now() + d);
        loop {
            let msg = match deadline {
                None => match rx.try_recv() {
                    Ok(m) => m,
                    Err(mpsc::TryRecvError::Empty) => return Ok(false),
                    Err(mpsc::TryRecvError::Disconnected) => return Ok(true),
                },
                Some(d) => {
                    let left = d.saturating_duration_since(Instant::now());
                    match rx.recv_timeout(left) {
                        Ok(m) => m,
                        Err(mpsc::RecvTimeoutError::Timeout) => return Ok(false),
                        Err(mpsc::RecvTimeoutError::Disconnected) => return Ok(true),
                    }
                }
            };
            match msg {
                PosMsg::Sample(s) => {
                    w.write(&Record::Position {
                        t_us: s.t_us,
                        counts: (s.angle_deg / 360.0 * cpt).round() as i64,
                        angle_deg: s.angle_deg,
                    })?;
                    sum.positions += 1;
                    if let Some(e) = eng {
                        e.angle(s.t_us, s.angle_deg);
                    }
                }
                PosMsg::Malformed(e) => {
                    sum.malformed_lines += 1;
                    eprintln!("positioner: malformed line: {e}");
                }
            }
        }
    };

    let mut sweep = vec![Complex32::new(0.0, 0.0); points];
    let mut taken: u64 = 0;
    let mut fatal: Option<anyhow::Error> = None;
    loop {
        if max_sweeps.is_some_and(|m| sum.sweeps >= m) {
            break;
        }
        if positioner_done && max_sweeps.is_none() {
            eprintln!("positioner closed its connection: end of the scan");
            break;
        }
        if let Some((_, starts, _, _)) = &sim_state {
            if taken as usize >= starts.len() {
                break;
            }
        }
        let mut attempt = 0u32;
        let taken_ok = 'sweep: loop {
            let t_start = epoch.elapsed().as_micros() as u64;
            let fault = match take_sweep(&mut link, &mut dec, &mut sweep, profile) {
                Ok(Ok(())) => break 'sweep Some(t_start),
                Ok(Err((why, true))) => {
                    taken += 1;
                    sum.rejected += 1;
                    eprintln!("sweep {}: dropped: {why}", taken - 1);
                    link.drain(Duration::from_millis(200));
                    dec.reset();
                    break 'sweep None;
                }
                Ok(Err((why, false))) => {
                    let e = anyhow::anyhow!(
                        "answer to {:?} rejected: {why} (the profile expects {points} points, format {}, byte order {})",
                        profile.data,
                        profile.format,
                        profile.byte_order
                    );
                    if sum.sweeps == 0 && sum.rejected == 0 {
                        // Nothing decoded yet: the profile does not match the instrument.
                        fatal = Some(with_queue(&mut link, err_q, e));
                        break 'sweep None;
                    }
                    e
                }
                Err(e) => e,
            };
            sum.link_faults += 1;
            // Reconnect with bounded attempts and doubling waits, then take the sweep again.
            loop {
                if attempt >= profile.retries {
                    let e = with_queue(&mut link, err_q, fault);
                    fatal = Some(e.context(format!(
                        "link fault at sweep {taken}, {} retries failed",
                        profile.retries
                    )));
                    break 'sweep None;
                }
                attempt += 1;
                let wait_s = profile.retry_backoff_s * f64::from(1u32 << (attempt - 1).min(16));
                eprintln!(
                    "sweep {taken}: link fault: {fault:#}; retry {attempt} of {} in {wait_s:.2} s: reconnecting",
                    profile.retries
                );
                std::thread::sleep(Duration::from_secs_f64(wait_s));
                match reconnect(instrument, profile) {
                    Ok(l) => {
                        link = l;
                        sum.reconnects += 1;
                        dec.reset();
                        break;
                    }
                    Err(e) => eprintln!("sweep {taken}: reconnecting failed: {e:#}"),
                }
            }
        };
        if fatal.is_some() {
            break;
        }
        let Some(t_start) = taken_ok else { continue };
        taken += 1;
        let t_end = epoch.elapsed().as_micros() as u64;
        let (start_us, end_us) = match &mut sim_state {
            Some((samples, starts, dur, next)) => {
                let t0 = starts.get(taken as usize - 1).copied().unwrap_or(0.0);
                let s_us = (t0 * 1e6).round() as u64;
                let e_us = ((t0 + *dur) * 1e6).round() as u64;
                while let Some(s) = samples.get(*next).filter(|s| s.t_us <= e_us) {
                    w.write(&Record::Position {
                        t_us: s.t_us,
                        counts: s.counts,
                        angle_deg: s.angle_deg,
                    })?;
                    sum.positions += 1;
                    if let Some(e) = &mut engine {
                        e.angle(s.t_us, s.angle_deg);
                    }
                    *next += 1;
                }
                (s_us, e_us)
            }
            None => {
                if let (Some(rx), false) = (&lines_rx, positioner_done) {
                    positioner_done = write_lines(&mut w, &mut sum, rx, None, &mut engine)?;
                }
                (t_start, t_end)
            }
        };
        w.write(&Record::Sweep {
            index: sum.sweeps as u32,
            start_us,
            end_us,
            s21: sweep.clone(),
        })?;
        if let Some(e) = &mut engine {
            e.sweep(start_us, end_us, &sweep);
        }
        sum.sweeps += 1;
        if sum.sweeps % 50 == 0 {
            eprintln!("{} sweeps, {} angle samples", sum.sweeps, sum.positions);
        }
    }
    if let Some(e) = fatal {
        // Keep the partial scan: every record written so far is whole; end it cleanly.
        let swept = sum.sweeps;
        w.finish()?;
        return Err(e.context(format!(
            "acquisition stopped; the recording {} keeps the {swept} sweeps taken before the fault",
            out.display()
        )));
    }
    if let Some((samples, _, _, next)) = &sim_state {
        for s in samples.get(*next..).unwrap_or(&[]) {
            w.write(&Record::Position {
                t_us: s.t_us,
                counts: s.counts,
                angle_deg: s.angle_deg,
            })?;
            sum.positions += 1;
            if let Some(e) = &mut engine {
                e.angle(s.t_us, s.angle_deg);
            }
        }
    }
    if let (Some(rx), false) = (&lines_rx, positioner_done) {
        write_lines(
            &mut w,
            &mut sum,
            rx,
            Some(Duration::from_secs_f64(linger_s.max(0.0))),
            &mut engine,
        )?;
    }
    if let Some(q) = err_q {
        let e = link.errors(q)?;
        for x in e {
            eprintln!("instrument error queue at the end: {x}");
        }
    }
    w.finish()?;
    if let Some(e) = &mut engine {
        sum.bins_closed = e.finish();
    }
    Ok(sum)
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
            Event::Sweep { .. } => Ok(()),
            Event::Rejected(e) => Err((
                e.to_string(),
                matches!(e, sweepgate::error::BlockError::NonFinite { .. }),
            )),
        },
        Decoder::Ascii(d) => match link.read_data(d, sweep, &profile.data)? {
            Event::Sweep { .. } => Ok(()),
            Event::Rejected(e) => Err((
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

/// Runs the command.
pub fn run(args: Args) -> anyhow::Result<()> {
    let text = match &args.profile {
        Some(p) => std::fs::read_to_string(p)
            .with_context(|| format!("reading profile {}", p.display()))?,
        None => SIMULATED_PROFILE.to_owned(),
    };
    let profile = Profile::from_toml(&text).context("in the profile")?;
    let positioner = if let Some(a) = args.positioner {
        Positioner::Lines(a)
    } else if args.positioner_sim {
        let Some(path) = &args.scenario else {
            bail!("--positioner-sim needs --scenario");
        };
        let s = Scenario::load(path)?;
        let seed = args.seed.unwrap_or(s.simulation.seed);
        Positioner::Sim(Box::new(s), seed)
    } else {
        Positioner::None
    };
    let gating = match (args.gate_center_ns, args.gate_span_ns) {
        (Some(c), Some(sp)) => Some(Gating {
            center_s: c * 1e-9,
            span_s: sp * 1e-9,
            frequency_hz: args.frequency_hz,
            bin_width_deg: args.bin_width_deg,
        }),
        _ => None,
    };
    let sum = acquire(
        &profile,
        &args.instrument,
        positioner,
        args.sweeps,
        args.linger_s,
        gating,
        &args.out,
    )?;
    eprintln!(
        "wrote {} sweeps and {} angle samples to {} ({} sweeps dropped, {} malformed positioner lines, {} link faults, {} reconnections)",
        sum.sweeps,
        sum.positions,
        args.out.display(),
        sum.rejected,
        sum.malformed_lines,
        sum.link_faults,
        sum.reconnects
    );
    if gating.is_some() {
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
