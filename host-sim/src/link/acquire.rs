//! `sweepgate acquire`: the host playing the board's part over TCP. It drives a VNA with
//! the query strings of a profile, reads turntable angles, and writes a recording.
//!
//! ```text
//! sweepgate acquire [--profile FILE] --instrument HOST:PORT
//!                   [--positioner HOST:PORT | --positioner-sim --scenario FILE
//!                    | --drive HOST:PORT (--steps=FROM:TO:STEP | --turn=FROM:TO:SPEED)]
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
//! Without a gate sweeps are only recorded. An RCS scan with `--rcs-calibration FILE`
//! ([`crate::link::acquire_rcs`]) takes its gate, frequencies and bins from the calibration
//! and prints the levels in dBsm (`raw <dBsm> dBsm, gated <dBsm> dBsm`).
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
//! # Several traces per sweep
//!
//! A dual-polarised probe gives two traces per sweep (say S21 co-polar and S31
//! cross-polar). `first_trace` names the one `data` reads (default `S21`), and each
//! `[[further_traces]]` entry another, read by its own query right after `data`, in the same
//! format and grid; a sweep is taken only when every trace's answer is good. The first trace
//! is recorded as the sweep record, the others beside it as a kind 8 record, with the names
//! once after the header ([`crate::formats::traces`]); the live engine gates the first.
//!
//! ```toml
//! first_trace = "S21"
//! [[further_traces]]
//! name = "S31"
//! data = "CALCulate2:DATA? SDATA"
//! ```
//!
//! # Set-up, verified
//!
//! Each `[[settings]]` entry is set after `setup` (its `set`, when given) and then read
//! back with its `query` before the scan: the answer must be `expect`, as a number within
//! `tolerance` (relative, default 1e-9) or as text (case and quotes aside). Any mismatch
//! stops `acquire` before the recording is created, naming each setting, what the
//! instrument answered and what the profile says. Give one entry per thing the scan
//! depends on: sweep range and points, IF bandwidth, power, the trace, data format and
//! byte order (`host-sim/profiles/simulated-fixed.toml` sets and checks all of them).
//!
//! ```toml
//! [[settings]]
//! name = "IF bandwidth"
//! set = "SENSe:BANDwidth 1000"      # optional
//! query = "SENSe:BANDwidth?"
//! expect = "1000"
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
//! <t_us> <angle_deg> [<axis2_deg> …]\n
//! ```
//!
//! `t_us`: an unsigned integer, microseconds on the positioner's own clock (any origin,
//! increasing); `angle_deg`: a decimal number, degrees. A positioner of several axes (a
//! second axis that steps between cuts: elevation, roll, the polarisation angle) adds up to
//! three further angles; they are recorded beside the position record as a kind 8 record
//! ([`crate::formats::traces`]), the first axis as before. The fields are separated by
//! spaces or tabs; a `\r` before the newline is ignored; empty lines and lines starting
//! with `#` are skipped; other lines are counted as malformed and reported, as are lines
//! that are not UTF-8 and lines longer than
//! [`MAX_POSITIONER_LINE_BYTES`](crate::limits::MAX_POSITIONER_LINE_BYTES) (256 bytes; read
//! to their newline and thrown away): none of them ends the scan. Samples wait for the
//! acquisition loop in a queue of `positioner_queue` (default 4096); a sample arriving when
//! it is full is dropped and counted. Samples are placed on our clock by a running
//! least-squares fit of the positioner's clock against their arrival times, offset and
//! drift, updated with every sample ([`crate::link::clock`]; until it spans 1 s, by the
//! first sample's offset), so the link's latency does not jitter them; the fit and its
//! uncertainty are reported at the end. Encoder counts are derived with `counts_per_turn`.
//! Without `--sweeps`, the server closing the connection ends the scan: `acquire` stops
//! before the next sweep.
//!
//! `--positioner-sim` takes the angles from the simulator's positioner model of
//! `--scenario` instead, and stamps the n-th sweep with the n-th sweep time of that
//! scenario's schedule (right when the instrument simulates the same scenario from `*RST`).
//!
//! # Never a wrong sweep
//!
//! Every input is bounded and every wait has a deadline: an answer line at most
//! [`MAX_ANSWER_LINE`] (1 MiB), a data block exactly the profile's point count (the
//! decoder refuses any other length before reading it), each answer within `timeout_s`
//! (at most 3600 s) from the moment it is awaited however slowly its bytes trickle in,
//! and clearing the link within `timeout_s` (a peer that never goes quiet is a link
//! fault). Each sweep's exchange is checked to be in step: nothing unasked may be
//! waiting before the trigger, the `wait` answer must be `wait_answer` (default `1` for
//! `*OPC?`), and after the data the `sync` query (e.g. `*OPC?`) must answer
//! `sync_answer` (default `1`): an extra or stale answer shows up as a wrong answer
//! there. The sweep is then thrown away, the link cleared (read until 200 ms quiet), and
//! the sweep taken again, `max_resyncs_in_row` times at most (default 4). A sweep with
//! non-finite values is dropped and counted; `max_dropped_in_row` of them one after
//! another (default 8) stop the scan.
//!
//! ```toml
//! sync = "*OPC?"                    # optional: asked after each data answer
//! sync_answer = "1"
//! wait_answer = "1"                 # default "1" when wait is *OPC?
//! max_dropped_in_row = 8
//! max_resyncs_in_row = 4
//! positioner_queue = 4096
//! ```
//!
//! Before anything is sent to the instrument, the folder of `--out` is checked (created
//! when missing, proved writable) and `--out` must not be the profile or the scenario;
//! numeric options are checked (finite, in range). A scan that cannot go on keeps every
//! sweep taken, ends the recording with an acquisition report (kind 7, see
//! [`crate::formats::recording`]) and the end record, and exits non-zero with a one-line
//! reason; a write error names the file. The report holds every count (dropped sweeps,
//! answers out of step, bytes cleared, link faults, reconnections, positioner lines
//! refused, samples dropped, the clock fit) and the reason; the same counts are printed
//! on the terminal at the end.
//!
//! # Driving a positioner
//!
//! `--drive HOST:PORT` (or `--drive /dev/ttyUSB0` for a serial line at `--drive-baud`, default
//! 115200, 8N1) drives a positioner speaking the turntable line protocol
//! ([`crate::link::drive`]; `sweepgate positioner` simulates one). After the instrument is
//! set up, `acquire` asks the positioner its limits and keeps the tighter of those and of
//! `--angle-range`, `--max-speed-deg-s`, `--max-accel-deg-s2`; a plan outside them is refused
//! before anything moves. `--steps=FROM:TO:STEP` steps and stops: move at
//! `--move-speed-deg-s`, wait until the angle stays within `--settle-tolerance-deg` of the
//! step for `--settle-s` (at most `--settle-timeout-s`), sweep, next.
//! `--turn=FROM:TO:SPEED` moves to FROM, settles, turns toward TO at SPEED, sweeps while
//! it turns, and stops once past TO. The status is read every 20 ms while settling and
//! before and after each sweep; each reading is recorded as an angle sample, timed by the
//! clock fit of [`crate::link::clock`] (the positioner's time taken half-way through the
//! exchange; exchanges with a long round trip are left out of the fit). A fault reported
//! by the positioner, an angle outside the range, a link failure, SIGINT (Ctrl-C) or
//! SIGTERM ends the scan: the positioner is sent `STOP` and watched until it reports no
//! motion, the recording is ended cleanly, and `acquire` exits non-zero with the reason.
//!
//! Caution: keep clear of the positioner's whole swept volume while it is driven, and
//! follow local regulations and the lab's safety practice for moving machinery; these
//! software limits are no interlock.
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
use std::sync::atomic::AtomicBool;
use std::sync::{mpsc, Arc};
use std::time::{Duration, Instant};

use anyhow::{bail, Context};
use num_complex::Complex32;
use serde::Deserialize;
use sweepgate::grid::Grid;
use sweepgate::scan::Event as ScanEvent;
use sweepgate::wire::ascii::{AsciiConfig, AsciiDecoder};
use sweepgate::wire::block::{BlockConfig, BlockDecoder, DecodeEvent, StreamDecoder};

use crate::formats::block::{parse_format, parse_order};
use crate::formats::files::{check_output_dir, refuse_if_same_file};
use crate::formats::rcs_record::RcsCalibration;
use crate::formats::recording::{kind, GridInfo, Header, Record, SyncPolicy, Writer, SWEEP_FORMAT};
use crate::limits::{self, MAX_FREQUENCIES};
use crate::link::acquire_rcs;
use crate::link::acquire_web::{self, WebFeed};
use crate::link::clock::{ClockEstimate, ClockFit};
use crate::link::drive::{Drive, DriveOptions, DriveStatus, Kept, LineDrive, Motion, Plan};
use crate::link::lines::{self, PosMsg, Positioner};
use crate::model::scenario::Scenario;
use crate::model::simulator::{Sample, Simulator};
use crate::output::report::ReportBin;
use crate::pipeline::engine::{warning_text, Engine};
use crate::pipeline::options::{describe_window, Choices, GateOptions};
use crate::pipeline::replay_rcs;
use crate::pipeline::setup::{self, Setup};
use crate::pipeline::transform::c64;
use crate::units::db;
use crate::web::Hub;

/// The default profile, for `sweepgate instrument`.
pub const SIMULATED_PROFILE: &str = include_str!("../../profiles/simulated.toml");

/// Longest answer line accepted, bytes.
pub const MAX_ANSWER_LINE: usize = crate::limits::MAX_ANSWER_LINE_BYTES;

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
    /// Drive a positioner through a plan (instead of `positioner`).
    pub drive: Option<DriveOptions>,
    /// The web view to feed from the live engine (`--web`), already serving.
    pub web: Option<Hub>,
    /// An RCS scan's calibration (`--rcs-calibration`): the live bins in dBsm
    /// ([`crate::link::acquire_rcs`]).
    pub rcs_calibration: Option<PathBuf>,
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
    /// The answer `wait` must give (default: `1` when `wait` is `*OPC?`, else any).
    pub wait_answer: Option<String>,
    /// Query asked after each data answer to prove the link in step (e.g. `*OPC?`).
    pub sync: Option<String>,
    /// The answer `sync` must give (default `1`).
    #[serde(default = "default_sync_answer")]
    pub sync_answer: String,
    /// Sweeps dropped one after another (non-finite values) before the scan stops.
    #[serde(default = "default_max_dropped")]
    pub max_dropped_in_row: u32,
    /// Times one sweep is taken again after an answer out of step before the scan stops.
    #[serde(default = "default_max_resyncs")]
    pub max_resyncs_in_row: u32,
    /// Positioner samples that may wait for the acquisition loop; more are dropped and
    /// counted.
    #[serde(default = "default_positioner_queue")]
    pub positioner_queue: usize,
    /// Settings made after `setup` and read back before the scan.
    #[serde(default)]
    pub settings: Vec<SettingSpec>,
    /// The first trace's name (the one `data` reads), e.g. `S21`; recorded with the
    /// further traces' names when there are any.
    #[serde(default = "default_first_trace")]
    pub first_trace: String,
    /// Further traces of every sweep (`[[further_traces]]`: e.g. the cross-polar port of a
    /// dual-polarised probe), each read by its own data query right after `data`, in the
    /// same format and grid, and recorded beside the sweep as a kind 8 record
    /// ([`crate::formats::traces`]).
    #[serde(default)]
    pub further_traces: Vec<TraceQuery>,
}

/// One `[[further_traces]]` entry: a further trace of every sweep.
#[derive(Debug, Clone, PartialEq, serde::Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TraceQuery {
    /// Its name, e.g. `S31`.
    pub name: String,
    /// The query that reads it (answered like `data`).
    pub data: String,
}

fn default_first_trace() -> String {
    "S21".into()
}

/// Most further traces a profile may list.
pub const MAX_FURTHER_TRACES: usize = 7;

/// Checks the further traces: data queries that are queries, distinct names, not too many.
fn check_traces(p: &Profile) -> anyhow::Result<()> {
    if p.further_traces.len() > MAX_FURTHER_TRACES {
        bail!(
            "[[further_traces]]: at most {MAX_FURTHER_TRACES} (got {})",
            p.further_traces.len()
        );
    }
    let mut names = vec![p.first_trace.as_str()];
    for t in &p.further_traces {
        if !is_query(&t.data) {
            bail!("[[further_traces]] {:?}: `data` must be a query", t.name);
        }
        if names.contains(&t.name.as_str()) {
            bail!("[[further_traces]] {:?}: the name is given twice", t.name);
        }
        names.push(&t.name);
    }
    Ok(())
}

/// One `[[settings]]` entry: a setting the instrument must hold before the scan.
#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SettingSpec {
    /// What it is, for messages (e.g. "IF bandwidth").
    pub name: String,
    /// Command that sets it (optional: `setup` may have set it).
    pub set: Option<String>,
    /// Query that reads it back.
    pub query: String,
    /// The value the query must answer: compared as numbers when both read as numbers
    /// (within `tolerance`, relative), else as text (case and quotes aside).
    pub expect: String,
    /// Relative tolerance of a numeric comparison (default 1e-9).
    #[serde(default = "default_tolerance")]
    pub tolerance: f64,
}

fn default_tolerance() -> f64 {
    1e-9
}

impl SettingSpec {
    /// Whether `answer` holds the expected value.
    pub fn accepts(&self, answer: &str) -> bool {
        let unquote = |t: &str| t.trim().trim_matches('"').trim().to_owned();
        let (a, e) = (unquote(answer), unquote(&self.expect));
        match (a.parse::<f64>(), e.parse::<f64>()) {
            (Ok(x), Ok(y)) => (x - y).abs() <= self.tolerance * x.abs().max(y.abs()),
            _ => a.eq_ignore_ascii_case(&e),
        }
    }
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
fn default_sync_answer() -> String {
    "1".into()
}
fn default_max_dropped() -> u32 {
    limits::DEFAULT_MAX_DROPPED_IN_ROW
}
fn default_max_resyncs() -> u32 {
    limits::DEFAULT_MAX_RESYNCS_IN_ROW
}
fn default_positioner_queue() -> usize {
    limits::DEFAULT_POSITIONER_QUEUE
}

impl Profile {
    /// The answer the `wait` query must give, when one is fixed.
    pub fn expected_wait_answer(&self) -> Option<&str> {
        match (&self.wait_answer, &self.wait) {
            (Some(a), _) => Some(a),
            (None, Some(w)) if w.trim().eq_ignore_ascii_case("*OPC?") => Some("1"),
            _ => None,
        }
    }

    /// Parses and checks a profile.
    pub fn from_toml(text: &str) -> anyhow::Result<Self> {
        let p: Profile = toml::from_str(text)
            .map_err(|e| anyhow::anyhow!("{}", crate::model::scenario::toml_one_line(text, &e)))?;
        check_wait_s("timeout_s", p.timeout_s, true)?;
        if p.max_dropped_in_row == 0 || p.max_resyncs_in_row == 0 {
            bail!("max_dropped_in_row and max_resyncs_in_row must be above 0");
        }
        if !(1..=limits::MAX_POSITIONER_QUEUE).contains(&p.positioner_queue) {
            bail!(
                "positioner_queue must be 1 to {} (got {})",
                limits::MAX_POSITIONER_QUEUE,
                p.positioner_queue
            );
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
        for st in &p.settings {
            if !is_query(&st.query) || st.set.as_deref().is_some_and(is_query) {
                bail!(
                    "[[settings]] {:?}: `query` must be a query and `set` must not be one",
                    st.name
                );
            }
            if !(st.tolerance.is_finite() && (0.0..1.0).contains(&st.tolerance)) {
                bail!("[[settings]] {:?}: tolerance must be 0 to below 1", st.name);
            }
        }
        if p.retries > 16 {
            bail!("retries must be at most 16 (got {})", p.retries);
        }
        check_traces(&p)?;
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

pub use crate::link::lines::{parse_angle_line, AngleSample};

/// Connects to the positioner's line server and starts reading its lines.
fn spawn_positioner(
    addr: &str,
    epoch: Instant,
    timeout: Duration,
    depth: usize,
) -> anyhow::Result<Positioner> {
    let stream = connect(addr, timeout)
        .with_context(|| format!("connecting to the positioner at {addr}"))?;
    Ok(lines::spawn(stream, epoch, depth))
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

/// What carries the SCPI link: a byte stream whose reads can be given a timeout and made
/// non-blocking. A raw SCPI socket (`TcpStream`) is one; another transport (a serial line, a
/// USB-TMC device) is added by implementing this and calling [`Link::over`].
pub trait Transport: Read + Write + Send {
    /// Limits each following read to `timeout` (`None`: no limit).
    fn set_read_timeout(&mut self, timeout: Option<Duration>) -> std::io::Result<()>;
    /// Limits each following write to `timeout` (`None`: no limit).
    fn set_write_timeout(&mut self, timeout: Option<Duration>) -> std::io::Result<()>;
    /// Makes reads return at once (`WouldBlock`) when nothing is waiting.
    fn set_nonblocking(&mut self, on: bool) -> std::io::Result<()>;
}

impl Transport for TcpStream {
    fn set_read_timeout(&mut self, timeout: Option<Duration>) -> std::io::Result<()> {
        TcpStream::set_read_timeout(self, timeout)
    }
    fn set_write_timeout(&mut self, timeout: Option<Duration>) -> std::io::Result<()> {
        TcpStream::set_write_timeout(self, timeout)
    }
    fn set_nonblocking(&mut self, on: bool) -> std::io::Result<()> {
        TcpStream::set_nonblocking(self, on)
    }
}

#[cfg(unix)]
impl Transport for std::os::unix::net::UnixStream {
    fn set_read_timeout(&mut self, timeout: Option<Duration>) -> std::io::Result<()> {
        std::os::unix::net::UnixStream::set_read_timeout(self, timeout)
    }
    fn set_write_timeout(&mut self, timeout: Option<Duration>) -> std::io::Result<()> {
        std::os::unix::net::UnixStream::set_write_timeout(self, timeout)
    }
    fn set_nonblocking(&mut self, on: bool) -> std::io::Result<()> {
        std::os::unix::net::UnixStream::set_nonblocking(self, on)
    }
}

/// A line-oriented SCPI connection with its read buffer. Every answer has one deadline,
/// `timeout_s` from the moment it is awaited, however the bytes trickle in.
pub struct Link {
    stream: Box<dyn Transport>,
    buf: Vec<u8>,
    start: usize,
    end: usize,
    timeout_s: f64,
    deadline: Instant,
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

/// Checks a wait in seconds (`what` names the option): finite, 0 or more (above 0 when
/// `positive`), at most [`limits::MAX_WAIT_S`].
pub fn check_wait_s(what: &str, v: f64, positive: bool) -> anyhow::Result<Duration> {
    let low_ok = if positive { v > 0.0 } else { v >= 0.0 };
    if !(v.is_finite() && low_ok && v <= limits::MAX_WAIT_S) {
        bail!(
            "{what} must be {} {} s (got {v})",
            if positive {
                "above 0 and at most"
            } else {
                "0 to"
            },
            limits::MAX_WAIT_S
        );
    }
    Ok(Duration::from_secs_f64(v))
}

impl Link {
    /// Connects to `addr` with `timeout_s` for the connection and each answer.
    pub fn connect(addr: &str, timeout_s: f64) -> anyhow::Result<Self> {
        let t = check_wait_s("timeout_s", timeout_s, true)?;
        let stream =
            connect(addr, t).with_context(|| format!("connecting to the instrument at {addr}"))?;
        stream.set_nodelay(true).ok();
        Self::over(Box::new(stream), timeout_s)
    }

    /// A link over any [`Transport`], with `timeout_s` for each answer and each write.
    pub fn over(mut stream: Box<dyn Transport>, timeout_s: f64) -> anyhow::Result<Self> {
        let t = check_wait_s("timeout_s", timeout_s, true)?;
        stream.set_read_timeout(Some(t))?;
        stream.set_write_timeout(Some(t))?;
        Ok(Self {
            stream,
            buf: vec![0; 64 * 1024],
            start: 0,
            end: 0,
            timeout_s,
            deadline: Instant::now() + t,
        })
    }

    /// Starts the clock of the next answer.
    fn await_answer(&mut self) {
        self.deadline = Instant::now() + Duration::from_secs_f64(self.timeout_s);
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
        let left = self.deadline.saturating_duration_since(Instant::now());
        let timed_out = || {
            anyhow::anyhow!(
                "timeout: no answer within {} s to {query:?}",
                self.timeout_s
            )
        };
        if left.is_zero() {
            return Err(timed_out());
        }
        self.stream.set_read_timeout(Some(left))?;
        match self.stream.read(&mut self.buf[self.end..]) {
            Ok(0) => bail!("the instrument closed the connection while answering {query:?}"),
            Ok(n) => {
                self.end += n;
                Ok(())
            }
            Err(e) if is_timeout(&e) => Err(timed_out()),
            // A signal (Ctrl-C) interrupted the read: the caller reads again, within the
            // same deadline.
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => Ok(()),
            Err(e) => Err(e).with_context(|| format!("reading the answer to {query:?}")),
        }
    }

    /// Reads one non-empty answer line (without its line end), within one deadline.
    pub fn read_line(&mut self, query: &str) -> anyhow::Result<String> {
        self.await_answer();
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

    /// Feeds answer bytes to `dec` until it reports an event, within one deadline.
    pub fn read_data<D: StreamDecoder>(
        &mut self,
        dec: &mut D,
        out: &mut [Complex32],
        query: &str,
    ) -> anyhow::Result<DecodeEvent<D::Error>> {
        self.await_answer();
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

    /// Whether bytes other than line ends are waiting, unasked for (an answer out of
    /// step): the buffer's rest and whatever has already arrived on the socket.
    pub fn unsolicited(&mut self) -> anyhow::Result<bool> {
        let idle = |b: &[u8]| b.iter().all(|c| matches!(c, b'\n' | b'\r'));
        if !idle(&self.buf[self.start..self.end]) {
            return Ok(true);
        }
        self.start = 0;
        self.end = 0;
        self.stream.set_nonblocking(true)?;
        let got = self.stream.read(&mut self.buf);
        self.stream.set_nonblocking(false)?;
        match got {
            Ok(0) => bail!("the instrument closed the connection"),
            Ok(n) => {
                self.end = n;
                Ok(!idle(&self.buf[..n]))
            }
            Err(e) if is_timeout(&e) || e.kind() == std::io::ErrorKind::Interrupted => Ok(false),
            Err(e) => Err(e).context("checking for unasked answers"),
        }
    }

    /// Discards whatever arrives until the link has been quiet for `quiet`; an error when
    /// it is not quiet within `timeout_s` (a peer that never stops sending).
    pub fn drain(&mut self, quiet: Duration) -> anyhow::Result<u64> {
        self.start = 0;
        self.end = 0;
        let until = Instant::now() + Duration::from_secs_f64(self.timeout_s);
        let mut thrown = 0u64;
        loop {
            let left = until.saturating_duration_since(Instant::now());
            if left.is_zero() {
                bail!(
                    "the instrument kept sending for {} s ({thrown} bytes thrown away) while the link was being cleared",
                    self.timeout_s
                );
            }
            self.stream.set_read_timeout(Some(quiet.min(left)))?;
            match self.stream.read(&mut self.buf) {
                Ok(0) => bail!("the instrument closed the connection"),
                Ok(n) => thrown += n as u64,
                Err(e) if is_timeout(&e) => return Ok(thrown),
                Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
                Err(e) => return Err(e).context("clearing the link"),
            }
        }
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
    /// Answers out of step (unasked bytes, a wrong `wait` or `sync` answer): each time
    /// the link was cleared and the sweep taken again.
    pub out_of_step: u64,
    /// Bytes thrown away while clearing the link.
    pub bytes_cleared: u64,
    /// Positioner lines holding bytes that are not UTF-8.
    pub bad_byte_lines: u64,
    /// Positioner lines longer than [`limits::MAX_POSITIONER_LINE_BYTES`].
    pub long_lines: u64,
    /// Positioner samples dropped because the queue was full.
    pub samples_dropped: u64,
    /// The positioner clock fit at the end (line positioner only).
    pub clock: Option<ClockEstimate>,
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
    /// A positioner driven through a plan.
    Drive(Box<DriveOptions>),
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
    /// The web view to feed from the live engine (`--web`), already serving.
    pub web: Option<Hub>,
}

/// Angle samples on their way in.
enum Angles {
    /// No positioner.
    None,
    /// A line server; `done` once it closed.
    Lines { pos: Positioner, done: bool },
    /// A driven positioner.
    Drive(Box<Driven>),
    /// The simulator's samples and sweep schedule; `next` is the first sample not yet sent.
    Sim {
        samples: Vec<Sample>,
        starts_s: Vec<f64>,
        duration_s: f64,
        next: usize,
    },
}

/// A positioner being driven, its limits, its clock fit, and the stop flag (Ctrl-C).
pub struct Driven {
    drive: Box<dyn Drive + Send>,
    opts: DriveOptions,
    kept: Kept,
    clock: ClockFit,
    last_t_us: u64,
    /// Shortest round trip of a status exchange seen, µs.
    best_rtt_us: f64,
    stop: Arc<AtomicBool>,
}

/// A status exchange whose round trip is longer than the shortest seen times this (plus
/// [`RTT_SLACK_US`]) is left out of the clock fit: its arrival time says little.
const RTT_FACTOR: f64 = 2.0;
/// See [`RTT_FACTOR`], µs.
const RTT_SLACK_US: f64 = 200.0;

/// A status reading's time on our clock, µs: the clock fit's time `fitted` held within the
/// exchange (`sent` to `got`, the reading happened in between), never before the previous
/// sample's `last`.
fn sample_time_us(fitted: f64, sent: f64, got: f64, last: u64) -> u64 {
    let t = if fitted.is_finite() {
        fitted.clamp(sent, got)
    } else {
        (sent + got) / 2.0
    };
    (t.max(0.0) as u64).max(last)
}

impl Driven {
    /// Connects, identifies, checks the plan against the limits, sets the acceleration,
    /// and stops on SIGINT/SIGTERM from now on.
    fn start(opts: DriveOptions, timeout: Duration) -> anyhow::Result<Self> {
        let mut drive = LineDrive::open(&opts.addr, opts.baud, timeout)?;
        let id = drive.identify()?;
        let reported = drive.limits()?;
        let kept = opts.check(&reported).context("the positioner plan")?;
        drive.set_accel(kept.accel_deg_s2)?;
        let stop = Arc::new(AtomicBool::new(false));
        for sig in [signal_hook::consts::SIGINT, signal_hook::consts::SIGTERM] {
            signal_hook::flag::register(sig, Arc::clone(&stop))
                .context("setting up the stop on Ctrl-C")?;
        }
        eprintln!(
            "positioner: {id}; angle range {}° to {}°, speed at most {} °/s, acceleration {} °/s²",
            kept.range_deg.0, kept.range_deg.1, kept.max_speed_deg_s, kept.accel_deg_s2
        );
        Ok(Self {
            drive: Box::new(drive),
            opts,
            kept,
            clock: ClockFit::default(),
            last_t_us: 0,
            best_rtt_us: f64::INFINITY,
            stop,
        })
    }

    /// Reads the status; its time on our clock by the clock fit. The positioner's time
    /// is taken to be half-way through the exchange; only exchanges with a short round
    /// trip (within [`RTT_FACTOR`] of the shortest, plus [`RTT_SLACK_US`]) go into the
    /// fit, so a delayed reply does not pull it. The positioner answers `WHERE` with its
    /// state *now*, so the reading lies inside the exchange: the time the fit gives is held
    /// between the request and the reply (a fit still settling, or a clock jitter, must not
    /// put the sample taken after a sweep before that sweep's end).
    fn read(&mut self, epoch: Instant) -> anyhow::Result<(DriveStatus, u64)> {
        if self.stop.load(std::sync::atomic::Ordering::Relaxed) {
            bail!("stopped by a signal (Ctrl-C)");
        }
        let sent = epoch.elapsed().as_secs_f64() * 1e6;
        let st = self.drive.status()?;
        let got = epoch.elapsed().as_secs_f64() * 1e6;
        let rtt = got - sent;
        self.best_rtt_us = self.best_rtt_us.min(rtt);
        if rtt <= self.best_rtt_us * RTT_FACTOR + RTT_SLACK_US {
            self.clock.add(st.t_us as f64, (sent + got) / 2.0);
        }
        let t = sample_time_us(
            self.clock.to_host_us(st.t_us as f64),
            sent,
            got,
            self.last_t_us,
        );
        self.last_t_us = t;
        Ok((st, t))
    }

    /// A fault, or an angle outside the kept range, stops the scan.
    fn check(&self, st: &DriveStatus) -> anyhow::Result<()> {
        if st.motion == Motion::Fault {
            bail!("the positioner reported a fault at {:.3}°", st.angle_deg);
        }
        let (lo, hi) = self.kept.range_deg;
        let tol = self.opts.settle_tolerance_deg;
        if st.angle_deg < lo - tol || st.angle_deg > hi + tol {
            bail!(
                "the positioner at {:.3}° is outside the angle range {lo}° to {hi}°",
                st.angle_deg
            );
        }
        Ok(())
    }
}

/// The live engine and what it prints.
struct LiveEngine {
    engine: Engine,
    setup: Setup,
    frequencies_hz: Vec<f64>,
    shown: BTreeSet<String>,
    closed: u64,
    web: Option<WebFeed>,
    /// An RCS scan's calibration: bins printed (and sent to the web view) in dBsm.
    rcs: Option<RcsCalibration>,
}

impl LiveEngine {
    /// Prints each closed bin, the first warning of each kind, and the closing count.
    fn print(&mut self, events: &[ScanEvent<MAX_FREQUENCIES>]) {
        for e in events {
            match e {
                ScanEvent::BinClosed(r) => {
                    self.closed += 1;
                    let values: Vec<String> = match &self.rcs {
                        Some(c) => {
                            acquire_rcs::values_dbsm(c, &r.to_record(), &self.frequencies_hz)
                        }
                        None => self
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
                            .collect(),
                    };
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
    path: PathBuf,
    engine: Option<LiveEngine>,
    sum: Summary,
}

/// Positioner complaints printed before they are only counted.
const SHOWN_COMPLAINTS: u64 = 5;

impl Recorder {
    fn position(&mut self, t_us: u64, counts: i64, angle_deg: f64) -> anyhow::Result<()> {
        self.w
            .write(&Record::Position {
                t_us,
                counts,
                angle_deg,
            })
            .with_context(|| format!("writing {}", self.path.display()))?;
        self.sum.positions += 1;
        if let Some(e) = &mut self.engine {
            let ev = e.engine.angle(t_us, angle_deg);
            e.print(&ev);
            if let Some(w) = &mut e.web {
                w.events(&mut e.engine, &ev, Some(t_us));
            }
        }
        Ok(())
    }

    /// A sample's further axes (a positioner of several axes), as a kind 8 record beside its
    /// position record ([`crate::formats::traces`]); nothing for a one-axis sample.
    fn further_axes(&mut self, t_us: u64, angles_deg: &[f64]) -> anyhow::Result<()> {
        if angles_deg.is_empty() {
            return Ok(());
        }
        let rec = crate::formats::traces::TracesRecord::Axes {
            t_us,
            angles_deg: angles_deg.to_vec(),
        };
        self.w
            .write(&rec.to_record())
            .with_context(|| format!("writing {}", self.path.display()))?;
        Ok(())
    }

    /// The further traces of the sweep just recorded (a kind 8 record beside it).
    fn further_traces(&mut self, traces: &[Vec<Complex32>]) -> anyhow::Result<()> {
        if traces.is_empty() {
            return Ok(());
        }
        let rec = crate::formats::traces::TracesRecord::Traces {
            index: self.sum.sweeps.saturating_sub(1) as u32,
            traces: traces.to_vec(),
        };
        self.w
            .write(&rec.to_record())
            .with_context(|| format!("writing {}", self.path.display()))?;
        Ok(())
    }

    fn sweep(&mut self, start_us: u64, end_us: u64, s21: &[Complex32]) -> anyhow::Result<()> {
        self.w
            .write(&Record::Sweep {
                index: self.sum.sweeps as u32,
                start_us,
                end_us,
                s21: s21.to_vec(),
            })
            .with_context(|| format!("writing {}", self.path.display()))?;
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

    /// Writes the acquisition report record (see the module docs) before the end record.
    fn report(&mut self, stopped_by: Option<&str>) -> anyhow::Result<()> {
        let payload = report_json(&self.sum, stopped_by).to_string().into_bytes();
        self.w
            .write(&Record::Unknown {
                kind: kind::ACQUIRE_REPORT,
                payload,
            })
            .with_context(|| format!("writing {}", self.path.display()))?;
        Ok(())
    }

    /// Forwards line-protocol samples: those waiting (`wait` = `None`, at most one queue's
    /// worth, so a flooding positioner cannot hold the loop) or those arriving within
    /// `wait`. Returns true once the line server has closed; an error when its link failed.
    fn lines(
        &mut self,
        pos: &Positioner,
        wait: Option<Duration>,
        counts_per_turn: f64,
    ) -> anyhow::Result<bool> {
        let deadline = wait.map(|d| Instant::now() + d);
        let mut budget = pos_budget(pos);
        let ended = loop {
            let msg = match deadline {
                None if budget == 0 => break false,
                None => match pos.rx.try_recv() {
                    Ok(m) => m,
                    Err(mpsc::TryRecvError::Empty) => break false,
                    Err(mpsc::TryRecvError::Disconnected) => break true,
                },
                Some(d) => match pos
                    .rx
                    .recv_timeout(d.saturating_duration_since(Instant::now()))
                {
                    Ok(m) => m,
                    Err(mpsc::RecvTimeoutError::Timeout) => break false,
                    Err(mpsc::RecvTimeoutError::Disconnected) => break true,
                },
            };
            budget = budget.saturating_sub(1);
            if self.take(msg, counts_per_turn)? {
                break true;
            }
        };
        self.sum.samples_dropped = pos.dropped.load(std::sync::atomic::Ordering::Relaxed);
        self.sum.clock = pos.clock.lock().ok().and_then(|c| c.estimate());
        Ok(ended)
    }

    /// Handles one positioner message; true at the end of the stream.
    fn take(&mut self, msg: PosMsg, counts_per_turn: f64) -> anyhow::Result<bool> {
        let complaint = match msg {
            PosMsg::Sample(s) => {
                let counts = (s.angle_deg / 360.0 * counts_per_turn).round() as i64;
                self.position(s.t_us, counts, s.angle_deg)?;
                self.further_axes(s.t_us, s.further_axes())?;
                return Ok(false);
            }
            PosMsg::Ended(None) => return Ok(true),
            PosMsg::Ended(Some(e)) => bail!("the positioner link failed: {e}"),
            PosMsg::Malformed(e) => {
                self.sum.malformed_lines += 1;
                (self.sum.malformed_lines, format!("malformed line: {e}"))
            }
            PosMsg::BadBytes => {
                self.sum.bad_byte_lines += 1;
                (self.sum.bad_byte_lines, "a line that is not UTF-8".into())
            }
            PosMsg::TooLong => {
                self.sum.long_lines += 1;
                let max = limits::MAX_POSITIONER_LINE_BYTES;
                (
                    self.sum.long_lines,
                    format!("a line longer than {max} bytes"),
                )
            }
        };
        if complaint.0 <= SHOWN_COMPLAINTS {
            let more = if complaint.0 == SHOWN_COMPLAINTS {
                " (further ones counted)"
            } else {
                ""
            };
            eprintln!("positioner: {} skipped{more}", complaint.1);
        }
        Ok(false)
    }
}

/// The acquisition report: every count of what was met, and why the scan stopped.
pub fn report_json(sum: &Summary, stopped_by: Option<&str>) -> serde_json::Value {
    serde_json::json!({
        "sweeps": sum.sweeps,
        "positions": sum.positions,
        "sweeps_dropped_non_finite": sum.rejected,
        "answers_out_of_step": sum.out_of_step,
        "bytes_cleared": sum.bytes_cleared,
        "link_faults": sum.link_faults,
        "reconnections": sum.reconnects,
        "positioner_malformed_lines": sum.malformed_lines,
        "positioner_bad_byte_lines": sum.bad_byte_lines,
        "positioner_long_lines": sum.long_lines,
        "positioner_samples_dropped": sum.samples_dropped,
        "clock": sum.clock.map(|c| serde_json::json!({
            "offset_us": c.offset_us,
            "offset_sigma_us": c.offset_sigma_us,
            "drift_ppm": c.drift_ppm,
            "drift_sigma_ppm": c.drift_sigma_ppm,
            "samples": c.samples,
            "in_use": c.in_use,
            "residual_us": c.residual_us,
        })),
        "stopped_by": stopped_by,
    })
}

/// Every count of [`Summary`] on one line, for the terminal.
pub fn counters_line(sum: &Summary) -> String {
    let mut s = format!(
        "{} sweeps dropped, {} answers out of step ({} bytes cleared), {} link faults, {} reconnections; positioner: {} malformed lines, {} not UTF-8, {} too long, {} samples dropped (queue full)",
        sum.rejected,
        sum.out_of_step,
        sum.bytes_cleared,
        sum.link_faults,
        sum.reconnects,
        sum.malformed_lines,
        sum.bad_byte_lines,
        sum.long_lines,
        sum.samples_dropped
    );
    if let Some(c) = sum.clock {
        s.push_str(&format!(
            "; positioner clock: offset {:.0} ± {:.0} µs, drift {:.1} ± {:.1} ppm over {} samples{}",
            c.offset_us,
            c.offset_sigma_us,
            c.drift_ppm,
            c.drift_sigma_ppm,
            c.samples,
            if c.in_use { "" } else { " (not yet used: first-sample offset)" }
        ));
    }
    s
}

/// Messages taken from the positioner queue in one pass: one queue's worth.
fn pos_budget(pos: &Positioner) -> usize {
    pos.depth + 1
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
    /// Sweeps dropped one after another.
    dropped_in_row: u32,
    /// The further traces of the sweep being taken (one buffer each).
    further: Vec<Vec<Complex32>>,
}

/// How one sweep went.
enum Took {
    /// Taken; it started at this time, µs.
    Sweep(u64),
    /// Dropped (non-finite values); go on.
    Dropped,
    /// Stop the acquisition.
    Fatal(anyhow::Error),
    /// Stop the acquisition, with no reconnection tried (the peer answers, wrongly).
    Stop(anyhow::Error),
}

/// How the instrument answered one sweep's exchange.
enum Answered {
    /// A whole sweep, the link in step.
    Sweep,
    /// A block or list holding non-finite values.
    NonFinite(String),
    /// An answer that the decoder could not read.
    Unreadable(String),
    /// Bytes nobody asked for, or a `wait` / `sync` answer not as expected.
    OutOfStep(String),
}

/// Runs an acquisition.
pub fn acquire(profile: &Profile, req: Request) -> anyhow::Result<Summary> {
    acquire_with(profile, req, None)
}

/// Runs an acquisition; with `rcs`, an RCS scan whose live bins are shown in dBsm and whose
/// recording carries the calibration ([`crate::link::acquire_rcs`]; `req.choices` already
/// hold its gate, frequencies and bins).
pub fn acquire_with(
    profile: &Profile,
    req: Request,
    rcs: Option<RcsCalibration>,
) -> anyhow::Result<Summary> {
    if req.max_sweeps.is_none() && matches!(req.positioner, AngleSource::None) {
        bail!("with no positioner, give --sweeps");
    }
    check_wait_s("--linger-s", req.linger_s, false)?;
    // The output folder is checked before anything is sent to the instrument.
    let dir = match req.out.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    };
    check_output_dir(dir).context("the folder of --out")?;
    let epoch = Instant::now();
    let (link, idn, grid) = connect_and_set_up(profile, &req.instrument)?;
    let dec = decoder(profile, grid.points())?;
    let timeout = Duration::from_secs_f64(profile.timeout_s);
    let (angles, scenario) = start_angles(req.positioner, epoch, timeout, profile)?;
    let mut header = header_for(profile, &req.instrument, idn, &grid, scenario);
    let mut engine = live_engine(&mut header, &req.choices, rcs.clone())?;
    if let Some(h) = &req.web {
        match &mut engine {
            Some(e) => {
                let source = format!("acquisition from {}", req.instrument);
                e.web = Some(WebFeed::new(h.clone(), &e.setup, &source, e.rcs.clone()));
            }
            None => h.note(
                "no live scan engine: give --scenario, or --gate-center-ns and --gate-span-ns, \
                 for bins on this page",
            ),
        }
    }
    let mut w = Writer::create(&req.out, SyncPolicy::default())
        .with_context(|| format!("creating {}", req.out.display()))?;
    w.write(&Record::Header(Box::new(header)))
        .with_context(|| format!("writing {}", req.out.display()))?;
    if let Some(c) = &rcs {
        w.write(&acquire_rcs::note(c).to_record())
            .with_context(|| format!("writing {}", req.out.display()))?;
    }
    if !profile.further_traces.is_empty() {
        let names = crate::formats::traces::TracesRecord::Names(crate::formats::traces::Names {
            traces: std::iter::once(&profile.first_trace)
                .chain(profile.further_traces.iter().map(|t| &t.name))
                .cloned()
                .collect(),
            axes: vec!["axis 1".into()],
        });
        w.write(&names.to_record())
            .with_context(|| format!("writing {}", req.out.display()))?;
    }
    let further = vec![vec![Complex32::new(0.0, 0.0); grid.points()]; profile.further_traces.len()];
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
            path: req.out.clone(),
            engine,
            sum: Summary::default(),
        },
        taken: 0,
        dropped_in_row: 0,
        further,
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
    for st in &profile.settings {
        if let Some(cmd) = &st.set {
            link.send(cmd)?;
        }
    }
    if let Some(q) = &profile.error_query {
        let e = link.errors(q)?;
        if !e.is_empty() {
            bail!("instrument error queue after setup: {}", e.join("; "));
        }
    }
    verify_settings(&mut link, &profile.settings)?;
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

/// Reads back every `[[settings]]` entry; any mismatch stops before the scan, naming each.
fn verify_settings(link: &mut Link, settings: &[SettingSpec]) -> anyhow::Result<()> {
    let mut wrong = Vec::new();
    for st in settings {
        let a = link.query(&st.query)?;
        if !st.accepts(&a) {
            wrong.push(format!(
                "{}: {:?} answered {}, the profile says {:?}",
                st.name,
                st.query,
                shown(&a),
                st.expect
            ));
        }
    }
    if !wrong.is_empty() {
        bail!(
            "the instrument's set-up does not match the profile, nothing was recorded: {}",
            wrong.join("; ")
        );
    }
    if !settings.is_empty() {
        let names: Vec<&str> = settings.iter().map(|s| s.name.as_str()).collect();
        eprintln!("set-up read back as the profile says: {}", names.join(", "));
    }
    Ok(())
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
    profile: &Profile,
) -> anyhow::Result<(Angles, Option<Scenario>)> {
    Ok(match positioner {
        AngleSource::None => (Angles::None, None),
        AngleSource::Lines(addr) => (
            Angles::Lines {
                pos: spawn_positioner(&addr, epoch, timeout, profile.positioner_queue)?,
                done: false,
            },
            None,
        ),
        AngleSource::Drive(o) => (Angles::Drive(Box::new(Driven::start(*o, timeout)?)), None),
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
/// and bin width the engine uses. With `rcs` it shows its bins in dBsm.
fn live_engine(
    header: &mut Header,
    choices: &Choices,
    rcs: Option<RcsCalibration>,
) -> anyhow::Result<Option<LiveEngine>> {
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
        web: None,
        rcs,
    }))
}

impl Session<'_> {
    /// Takes sweeps until a stop condition; returns the fault that stopped it, if any.
    fn sweeps(&mut self, max_sweeps: Option<u64>) -> Option<anyhow::Error> {
        if matches!(self.angles, Angles::Drive(_)) {
            return self.driven(max_sweeps);
        }
        let mut sweep = vec![Complex32::new(0.0, 0.0); self.points];
        while !self.should_stop(max_sweeps) {
            let t_start = match self.take_with_retries(&mut sweep) {
                Took::Sweep(t) => t,
                Took::Dropped => continue,
                Took::Fatal(e) | Took::Stop(e) => return Some(e),
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

    /// Takes one sweep, reconnecting after link faults and clearing the link after an
    /// answer out of step (see the module notes).
    fn take_with_retries(&mut self, sweep: &mut [Complex32]) -> Took {
        let mut attempt = 0u32;
        let mut resyncs = 0u32;
        loop {
            let t_start = self.epoch.elapsed().as_micros() as u64;
            let (link, dec, further) = (&mut self.link, &mut self.dec, &mut self.further);
            let fault = match take_sweep(link, dec, sweep, further, self.profile) {
                Ok(Answered::Sweep) => {
                    self.dropped_in_row = 0;
                    return Took::Sweep(t_start);
                }
                Ok(Answered::NonFinite(why)) => match self.dropped(why) {
                    Ok(t) => return t,
                    Err(e) => e,
                },
                Ok(Answered::OutOfStep(why)) => match self.resync(&why, &mut resyncs) {
                    Ok(()) => continue,
                    Err(Took::Fatal(e)) => e,
                    Err(t) => return t,
                },
                Ok(Answered::Unreadable(why)) => {
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

    /// A sweep with non-finite values: counted and dropped; too many in a row stop the
    /// scan. `Err` when the link cannot be cleared after it (a link fault).
    fn dropped(&mut self, why: String) -> anyhow::Result<Took> {
        self.taken += 1;
        self.rec.sum.rejected += 1;
        self.dropped_in_row += 1;
        eprintln!("sweep {}: dropped: {why}", self.taken - 1);
        let max = self.profile.max_dropped_in_row;
        if self.dropped_in_row >= max {
            return Ok(Took::Stop(anyhow::anyhow!(
                "{max} sweeps in a row dropped (max_dropped_in_row), the last: {why}"
            )));
        }
        self.dec.reset();
        self.rec.sum.bytes_cleared += self.link.drain(Duration::from_millis(200))?;
        Ok(Took::Dropped)
    }

    /// An answer out of step: counted, the link cleared and the sweep taken again; too
    /// many in a row stop the scan. `Err(Took::Fatal)` with a link failure while
    /// clearing is handled as a link fault by the caller.
    fn resync(&mut self, why: &str, resyncs: &mut u32) -> Result<(), Took> {
        self.rec.sum.out_of_step += 1;
        *resyncs += 1;
        let n = self.taken;
        let max = self.profile.max_resyncs_in_row;
        eprintln!(
            "sweep {n}: answer out of step: {why}; clearing the link and taking the sweep again"
        );
        if *resyncs > max {
            return Err(Took::Stop(anyhow::anyhow!(
                "answers out of step {max} times in a row at sweep {n} (max_resyncs_in_row), the last: {why}"
            )));
        }
        self.dec.reset();
        match self.link.drain(Duration::from_millis(200)) {
            Ok(b) => {
                self.rec.sum.bytes_cleared += b;
                Ok(())
            }
            Err(e) => Err(Took::Fatal(e)),
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
            Angles::Lines { pos, done } => {
                if !*done {
                    *done = self.rec.lines(pos, None, cpt)?;
                    if *done {
                        eprintln!("positioner closed its connection: no more angle samples");
                    }
                }
                (t_start, t_end)
            }
            Angles::Drive(_) => {
                self.poll()?;
                (t_start, t_end)
            }
            Angles::None => (t_start, t_end),
        };
        self.rec.sweep(start_us, end_us, sweep)?;
        self.rec.further_traces(&self.further)
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
            // Keep the partial scan: every record written so far is whole; end it cleanly,
            // with the report of what was met and why it stopped.
            let swept = self.rec.sum.sweeps;
            let reason = format!("{e:#}");
            if let Angles::Lines { pos, .. } = &self.angles {
                self.rec.sum.samples_dropped =
                    pos.dropped.load(std::sync::atomic::Ordering::Relaxed);
                self.rec.sum.clock = pos.clock.lock().ok().and_then(|c| c.estimate());
            }
            eprintln!("{}", counters_line(&self.rec.sum));
            self.rec.report(Some(&reason))?;
            self.rec
                .w
                .finish()
                .with_context(|| format!("finishing {}", out.display()))?;
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
            Angles::Lines { pos, done: false } => {
                let linger = check_wait_s("--linger-s", linger_s, false)?;
                self.rec.lines(pos, Some(linger), cpt)?;
            }
            _ => {}
        }
        if let Some(q) = &self.profile.error_query {
            for x in self.link.errors(q)? {
                eprintln!("instrument error queue at the end: {x}");
            }
        }
        self.rec.report(None)?;
        let Recorder {
            w, engine, mut sum, ..
        } = self.rec;
        w.finish()
            .with_context(|| format!("finishing {}", out.display()))?;
        if let Some(mut e) = engine {
            let ev = e.engine.finish(false);
            e.print(&ev);
            if let Some(w) = &mut e.web {
                w.events(&mut e.engine, &ev, None);
            }
            sum.bins_closed = e.closed;
            sum.bins = e.engine.bins().values().cloned().collect();
            sum.setup = Some(e.setup);
        }
        Ok(sum)
    }
}

/// Polls between moves, ms.
const POLL_MS: u64 = 20;

impl Session<'_> {
    /// A driven scan: the plan, then the positioner stopped whatever happened.
    fn driven(&mut self, max_sweeps: Option<u64>) -> Option<anyhow::Error> {
        let ran = self.drive_plan(max_sweeps);
        let stopped = self.stop_drive();
        match (ran, stopped) {
            (Err(e), Ok(())) => Some(e),
            (Err(e), Err(s)) => Some(e.context(format!("and stopping failed: {s:#}"))),
            (Ok(()), Err(s)) => Some(s),
            (Ok(()), Ok(())) => None,
        }
    }

    fn driven_mut(&mut self) -> anyhow::Result<&mut Driven> {
        match &mut self.angles {
            Angles::Drive(d) => Ok(d),
            _ => bail!("no positioner to drive"),
        }
    }

    /// Reads the positioner's status, records it as an angle sample, checks it.
    fn poll(&mut self) -> anyhow::Result<DriveStatus> {
        let epoch = self.epoch;
        let cpt = f64::from(self.profile.counts_per_turn);
        let d = self.driven_mut()?;
        let (st, t_us) = d.read(epoch)?;
        let clock = d.clock.estimate();
        let counts = (st.angle_deg / 360.0 * cpt).round() as i64;
        self.rec.position(t_us, counts, st.angle_deg)?;
        self.rec.sum.clock = clock;
        self.driven_mut()?.check(&st)?;
        Ok(st)
    }

    /// Step and stop, or turn, as planned.
    fn drive_plan(&mut self, max_sweeps: Option<u64>) -> anyhow::Result<()> {
        let mut sweep = vec![Complex32::new(0.0, 0.0); self.points];
        let d = self.driven_mut()?;
        let plan = d.opts.plan;
        let done = |s: &Self| max_sweeps.is_some_and(|m| s.rec.sum.sweeps >= m);
        match plan {
            Plan::Steps { .. } => {
                for target in plan.targets() {
                    if done(self) {
                        break;
                    }
                    self.settle_at(target)?;
                    self.drive_sweep(&mut sweep)?;
                }
            }
            Plan::Turn {
                from_deg,
                to_deg,
                speed_deg_s,
            } => {
                self.settle_at(from_deg)?;
                let dir = if to_deg >= from_deg { 1.0 } else { -1.0 };
                self.driven_mut()?.drive.turn(dir * speed_deg_s)?;
                eprintln!("positioner: turning from {from_deg}° to {to_deg}° at {speed_deg_s} °/s");
                while !done(self) {
                    let st = self.poll()?;
                    if (st.angle_deg - to_deg) * dir >= 0.0 {
                        break;
                    }
                    self.drive_sweep(&mut sweep)?;
                }
            }
        }
        Ok(())
    }

    /// One sweep while driven, right after the caller's poll (the sample before it, which
    /// decided that the sweep is to be taken); the sample after it is taken in `record`.
    fn drive_sweep(&mut self, sweep: &mut [Complex32]) -> anyhow::Result<()> {
        let t = match self.take_with_retries(sweep) {
            Took::Sweep(t) => t,
            Took::Dropped => return Ok(()),
            Took::Fatal(e) | Took::Stop(e) => return Err(e),
        };
        self.taken += 1;
        self.record(t, sweep)
    }

    /// Moves to `target` and waits until the angle stays within the tolerance for the
    /// settling time, or the settling deadline passes.
    fn settle_at(&mut self, target: f64) -> anyhow::Result<()> {
        let d = self.driven_mut()?;
        let (speed, tol) = (d.opts.move_speed_deg_s, d.opts.settle_tolerance_deg);
        let hold = Duration::from_secs_f64(d.opts.settle_s);
        let give_up = Instant::now() + Duration::from_secs_f64(d.opts.settle_timeout_s);
        d.drive.move_to(target, speed)?;
        let mut within: Option<Instant> = None;
        loop {
            let st = self.poll()?;
            if (st.angle_deg - target).abs() <= tol && st.motion == Motion::Holding {
                let since = *within.get_or_insert_with(Instant::now);
                if since.elapsed() >= hold {
                    return Ok(());
                }
            } else {
                within = None;
            }
            if Instant::now() >= give_up {
                bail!(
                    "the positioner did not settle within {tol}° of {target}° in {} s (at {:.3}°)",
                    self.driven_mut()?.opts.settle_timeout_s,
                    st.angle_deg
                );
            }
            std::thread::sleep(Duration::from_millis(POLL_MS));
        }
    }

    /// Sends a stop and waits (bounded) until the positioner reports no motion; when that
    /// fails on the connection in use (it may be out of step after an error), once more on
    /// a fresh connection.
    fn stop_drive(&mut self) -> anyhow::Result<()> {
        let first = self.stop_once();
        let Err(e) = first else { return Ok(()) };
        eprintln!("positioner: stopping failed ({e:#}); again on a new connection");
        let timeout = Duration::from_secs_f64(self.profile.timeout_s);
        let d = self.driven_mut()?;
        d.drive = Box::new(LineDrive::open(&d.opts.addr, d.opts.baud, timeout)?);
        self.stop_once()
    }

    fn stop_once(&mut self) -> anyhow::Result<()> {
        let d = self.driven_mut()?;
        d.drive.stop().context("stopping the positioner")?;
        let brake_s = d.kept.max_speed_deg_s / d.kept.accel_deg_s2;
        let give_up = Instant::now() + Duration::from_secs_f64(brake_s + 5.0);
        loop {
            // Read without the stop flag: a Ctrl-C must not keep us from seeing it stop.
            let st = d
                .drive
                .status()
                .context("checking that the positioner stopped")?;
            if st.motion != Motion::Moving {
                eprintln!("positioner: stopped at {:.3}°", st.angle_deg);
                return Ok(());
            }
            if Instant::now() >= give_up {
                bail!(
                    "the positioner still reports motion {:.1} s after the stop",
                    brake_s + 5.0
                );
            }
            std::thread::sleep(Duration::from_millis(POLL_MS));
        }
    }
}

/// Triggers one sweep, waits for it and reads its data, checking the exchange is in step:
/// nothing unasked waiting before the trigger, the `wait` answer as expected, and the
/// `sync` answer after the data. `Err` for a link failure (closed, timeout, I/O).
fn take_sweep(
    link: &mut Link,
    dec: &mut Decoder,
    sweep: &mut [Complex32],
    further: &mut [Vec<Complex32>],
    profile: &Profile,
) -> anyhow::Result<Answered> {
    if link.unsolicited()? {
        return Ok(Answered::OutOfStep(
            "bytes nobody asked for were waiting before the trigger".into(),
        ));
    }
    for cmd in &profile.trigger {
        link.send(cmd)?;
    }
    if let Some(q) = &profile.wait {
        let a = link.query(q)?;
        if let Some(want) = profile.expected_wait_answer() {
            if !same_answer(&a, want) {
                return Ok(Answered::OutOfStep(format!(
                    "{q:?} answered {}, expected {want:?}",
                    shown(&a)
                )));
            }
        }
    }
    let mut answered = read_answer(link, dec, sweep, &profile.data)?;
    // The further traces, each by its own query, while the answers are good.
    for (t, buf) in profile.further_traces.iter().zip(further.iter_mut()) {
        if !matches!(answered, Answered::Sweep) {
            break;
        }
        answered = match read_answer(link, dec, buf, &t.data)? {
            Answered::NonFinite(why) => Answered::NonFinite(format!("trace {}: {why}", t.name)),
            Answered::Unreadable(why) => {
                Answered::Unreadable(format!("trace {} ({:?}): {why}", t.name, t.data))
            }
            other => other,
        };
    }
    if let (Answered::Sweep, Some(q)) = (&answered, &profile.sync) {
        let a = link.query(q)?;
        if !same_answer(&a, &profile.sync_answer) {
            return Ok(Answered::OutOfStep(format!(
                "after the data, {q:?} answered {}, expected {:?}: the data may be another request's",
                shown(&a),
                profile.sync_answer
            )));
        }
    }
    Ok(answered)
}

/// Sends one data query and reads its answer into `buf`.
fn read_answer(
    link: &mut Link,
    dec: &mut Decoder,
    buf: &mut [Complex32],
    query: &str,
) -> anyhow::Result<Answered> {
    link.send(query)?;
    Ok(match dec {
        Decoder::Block(d) => match link.read_data(d, buf, query)? {
            DecodeEvent::Sweep { .. } => Answered::Sweep,
            DecodeEvent::Rejected(e @ sweepgate::error::BlockError::NonFinite { .. }) => {
                Answered::NonFinite(e.to_string())
            }
            DecodeEvent::Rejected(e) => Answered::Unreadable(e.to_string()),
        },
        Decoder::Ascii(d) => match link.read_data(d, buf, query)? {
            DecodeEvent::Sweep { .. } => Answered::Sweep,
            DecodeEvent::Rejected(e @ sweepgate::error::AsciiError::NonFinite { .. }) => {
                Answered::NonFinite(e.to_string())
            }
            DecodeEvent::Rejected(e) => Answered::Unreadable(e.to_string()),
        },
    })
}

/// Whether an answer is the expected one: the same text (case aside) or the same number.
fn same_answer(got: &str, want: &str) -> bool {
    let (g, w) = (got.trim(), want.trim());
    if g.eq_ignore_ascii_case(w) {
        return true;
    }
    matches!((g.parse::<f64>(), w.parse::<f64>()), (Ok(a), Ok(b)) if a == b)
}

/// An answer as printed in a message: quoted, cut at 40 characters.
fn shown(a: &str) -> String {
    let cut: String = a.chars().take(40).collect();
    if cut.len() < a.len() {
        format!("{cut:?}… ({} bytes)", a.len())
    } else {
        format!("{cut:?}")
    }
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
    if link.drain(Duration::from_millis(200)).is_err() {
        return e;
    }
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
    let mut inputs: Vec<&Path> = opts.profile.iter().map(PathBuf::as_path).collect();
    inputs.extend(opts.scenario.as_deref());
    inputs.extend(opts.rcs_calibration.as_deref());
    refuse_if_same_file(&opts.out, &inputs)?;
    let positioner = if let Some(d) = &opts.drive {
        AngleSource::Drive(Box::new(d.clone()))
    } else if let Some(a) = &opts.positioner {
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
    let rcs = match &opts.rcs_calibration {
        Some(p) => Some(acquire_rcs::take(p, &mut choices)?),
        None => None,
    };
    let req = Request {
        instrument: opts.instrument.clone(),
        positioner,
        max_sweeps: opts.sweeps,
        linger_s: opts.linger_s,
        choices,
        out: opts.out.clone(),
        web: opts.web.clone(),
    };
    let sum = acquire_with(&profile, req, rcs.clone())?;
    let rcs_lines = match (&rcs, &sum.setup) {
        (Some(c), Some(s)) => replay_rcs::summary_of(&s.frequencies_hz, &sum.bins, c),
        _ => Vec::new(),
    };
    if let Some(h) = &opts.web {
        let mut done = format!("wrote {} sweeps to {}", sum.sweeps, opts.out.display());
        for l in &rcs_lines {
            done.push_str("; ");
            done.push_str(l);
        }
        acquire_web::ended(h, done);
    }
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
    eprintln!("{}", counters_line(&sum));
    if sum.setup.is_some() {
        eprintln!("scan engine closed {} bins", sum.bins_closed);
    }
    for l in rcs_lines {
        eprintln!("{l}");
    }
    Ok(())
}

#[cfg(test)]
mod tests {

    /// A reading's time stays inside its exchange whatever the clock fit says, and never
    /// goes back (causality: the reading happens between request and reply; common
    /// practice, no source).
    #[test]
    fn a_reading_is_timed_inside_its_exchange() {
        use super::sample_time_us;
        assert_eq!(sample_time_us(1_500.0, 1_000.0, 2_000.0, 0), 1_500);
        // A fit that puts the reading before the request (as a settling fit can).
        assert_eq!(sample_time_us(700.0, 1_000.0, 2_000.0, 0), 1_000);
        assert_eq!(sample_time_us(9_000.0, 1_000.0, 2_000.0, 0), 2_000);
        assert_eq!(sample_time_us(f64::NAN, 1_000.0, 2_000.0, 0), 1_500);
        assert_eq!(sample_time_us(1_500.0, 1_000.0, 2_000.0, 1_800), 1_800);
    }

    /// The link over a transport other than TCP (a Unix socket pair): a query is answered,
    /// unasked bytes are seen, and a silent peer times out within the answer's deadline.
    #[cfg(unix)]
    #[test]
    fn a_link_over_another_transport() {
        use std::io::{BufRead, BufReader};
        use std::os::unix::net::UnixStream;
        let (ours, theirs) = UnixStream::pair().unwrap();
        let peer = std::thread::spawn(move || {
            let mut w = theirs.try_clone().unwrap();
            let mut r = BufReader::new(theirs);
            let mut line = String::new();
            r.read_line(&mut line).unwrap();
            assert_eq!(line, "*IDN?\n");
            w.write_all(b"test,unix,0,1\n").unwrap();
            line.clear();
            r.read_line(&mut line).unwrap();
            assert_eq!(line, "*OPC?\n");
            // No answer: the link must time out on its own deadline.
            std::thread::sleep(Duration::from_millis(600));
            w.write_all(b"late\n").unwrap();
        });
        let mut link = Link::over(Box::new(ours), 0.2).unwrap();
        assert_eq!(link.query("*IDN?").unwrap(), "test,unix,0,1");
        let t = Instant::now();
        let e = link.query("*OPC?").unwrap_err();
        assert!(format!("{e:#}").contains("timeout"), "{e:#}");
        assert!(
            t.elapsed() < Duration::from_millis(500),
            "{:?}",
            t.elapsed()
        );
        peer.join().unwrap();
        assert!(
            link.unsolicited().unwrap(),
            "the late answer is seen as unasked"
        );
    }

    use super::*;

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
