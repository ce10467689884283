//! The simulated instrument of `sweepgate instrument` (the command is
//! `crate::cli::instrument`): a simulated VNA on a TCP port, speaking SCPI.
//!
//! ```text
//! sweepgate instrument [--port 5025] [--bind 127.0.0.1] [--scenario FILE] [--seed N]
//!                      [--dump DIR] [--once] [--max-clients N] [--idle-timeout-s S]
//!                      [--session-limit-s S]
//! ```
//!
//! It listens on `--bind`:`--port` (default 127.0.0.1:5025, 5025 being the registered
//! SCPI raw-socket port; `--port 0` picks a free port). Once listening it prints one line
//! on standard output, `listening on 127.0.0.1:<port>`, so scripts and tests can read the
//! port. Several clients may connect at once (one thread each); they share one
//! instrument state, as with a real instrument. `--once` stops after the first client
//! disconnects.
//!
//! One client cannot take it down: at most `--max-clients` are served at once (more are
//! closed as they connect); a client silent, or not reading its answers, for
//! `--idle-timeout-s` is dropped, as is one connected for `--session-limit-s`; lines and
//! answers are bounded ([`MAX_LINE_BYTES`], [`MAX_ANSWER_BYTES`]); the shared state is
//! locked for one command at a time, never across a socket read or write; an error accepting
//! a client is reported and the server goes on. A `--bind` address other than loopback is
//! announced with a warning, and `--dump` (which writes files) is refused there.
//!
//! Its sweeps come from a room scenario (`--scenario`, see [`crate::model::scenario`]) or, when
//! none is given, from the built-in default, the `demo-lab` scenario compiled in. Each
//! `INITiate` takes the next sweep of the simulated scan ([`Simulator::sweep`]); after the
//! last sweep of the scan the next one starts the scan again. `*RST` restarts the scan at
//! sweep 0. Changing the frequency range or point count re-simulates on the new grid.
//!
//! With `--rcs-scenario FILE --measurement target|background|reference|reference_background
//! [--turntable HOST:PORT]` it serves one measurement of an RCS range instead
//! ([`crate::link::rcs_source`]): the scene's grid, each `INITiate` the scene measured at
//! the turntable's angle (asked with `WHERE`; without `--turntable`, the scene's angles in
//! turn). A turntable that does not answer queues -240 and the reason goes to standard
//! error. The server asks the turntable before it locks the shared state for the
//! `INITiate` and takes the lock only to measure with the answer, so a turntable slow to
//! answer holds up only the client waiting for that sweep.
//!
//! A test-only option, `--misreport SETTING` (hidden from `--help`), makes one read-back
//! lie: the query of `start`, `stop`, `points`, `bandwidth`, `power`, `function`,
//! `format` or `order` answers a value other than the one set (numbers doubled, names
//! changed), so a client's set-up check can be tested.
//!
//! `--dump DIR` writes every sweep taken as `DIR/sweep-<n>.json` (n counts sweeps taken
//! since the program started, from 0): `{"index": sweep number in the scan, "start_hz",
//! "stop_hz", "points", "re": [...], "im": [...]}` with the exact f32 values the
//! instrument holds, so a client can check what it received.
//!
//! # Commands
//!
//! Only IEEE 488.2 common commands and SCPI-1999 standard commands. Headers are
//! case-insensitive, in short form (the capitals) or long form; `[...]` is optional.
//! One line may hold several commands separated by `;`; each is read from the root (as
//! if it began with `:`), and the answers of the queries in a line are joined by `;`
//! and ended by one newline.
//!
//! | Command | Effect / answer |
//! |---|---|
//! | `*IDN?` | `sweepgate,simulated-vna,0,<version>` |
//! | `*RST` | defaults: `ASCii,0`, `NORMal`, the scenario's grid; scan back to sweep 0 |
//! | `*CLS` | clears the error queue and the event status register |
//! | `*OPC` / `*OPC?` | sets the operation-complete bit / answers `1` (sweeps complete at once) |
//! | `*WAI` | nothing to wait for |
//! | `*ESR?` | event status register (then cleared): 1 OPC, 4 query, 8 device, 16 execution, 32 command error |
//! | `*ESE <n>` / `*ESE?`, `*SRE <n>` / `*SRE?` | enable registers |
//! | `*STB?` | status byte: 4 error queue not empty, 32 ESB summary |
//! | `*TST?` | `0` (self-test passed) |
//! | `FORMat[:DATA] REAL,32 \| REAL,64 \| ASCii[,<digits>]` / `?` | data format; `?` answers `REAL,32`, `REAL,64` or `ASC,<digits>` (0: shortest exact form) |
//! | `FORMat:BORDer NORMal \| SWAPped` / `?` | byte order of binary blocks (NORMal: big-endian) |
//! | `[SENSe]:FREQuency:STARt <Hz>` / `?` | first frequency, 10 MHz to 50 GHz; suffix HZ, KHZ, MHZ, GHZ allowed |
//! | `[SENSe]:FREQuency:STOP <Hz>` / `?` | last frequency |
//! | `[SENSe]:SWEep:POINts <n>` / `?` | points, 2 to 10001 |
//! | `[SENSe]:BANDwidth[:RESolution] <Hz>` / `?` | IF bandwidth, 1 Hz to 10 MHz (`*RST`: 10 kHz); recorded only |
//! | `SOURce:POWer[:LEVel][:IMMediate][:AMPLitude] <dBm>` / `?` | source power, −90 to +20 dBm (`*RST`: −10); recorded only |
//! | `[SENSe]:FUNCtion[:ON] "<S21\|S11\|S12\|S22>"` / `?` | the measured trace, quoted (`*RST`: `"S21"`); data are S21 whatever is chosen |
//! | `INITiate[:IMMediate]` | takes the next sweep |
//! | `TRACe[:DATA]? [<name>]`, `CALCulate[:DATA]?` | the last sweep, re, im interleaved: an IEEE 488.2 definite-length block (REAL formats) or comma-separated numbers (ASCii) |
//! | `SYSTem:ERRor[:NEXT]?` | oldest error queue entry, e.g. `-113,"Undefined header"`; `0,"No error"` when empty |
//! | `SYSTem:ERRor:COUNt?` | entries in the error queue |
//! | `SYSTem:VERSion?` | `1999.0` |
//!
//! Errors (SCPI-1999 Volume 2, chapter 21, from memory): -102 syntax error, -104 data
//! type error, -108 parameter not allowed, -109 missing parameter, -113 undefined header,
//! -131 invalid suffix, -221 settings conflict (start not below stop), -222 data out of
//! range, -224 illegal parameter value, -230 data corrupt or stale (data query before any
//! INITiate), -240 hardware error (the RCS range's turntable did not answer), -223 too much data (a line whose answers would pass
//! [`MAX_ANSWER_BYTES`]), -350 queue overflow, -363 input buffer overrun (a line longer
//! than [`MAX_LINE_BYTES`]). The queue holds 10 entries; when it is full the newest
//! is replaced by -350.

use std::collections::VecDeque;
use std::io::{BufReader, Write};
use std::net::{TcpListener, TcpStream};
use std::path::PathBuf;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

use anyhow::Context;
use num_complex::Complex32;
use sweepgate::grid::Grid;
use sweepgate::wire::block::{self, ByteOrder, Format};

use crate::link::lines::{read_bounded_line, LineRead};
use crate::link::rcs_source::RcsSource;
use crate::model::scenario::Scenario;
use crate::model::simulator::Simulator;

/// The `*IDN?` answer.
pub const IDN: &str = concat!("sweepgate,simulated-vna,0,", env!("CARGO_PKG_VERSION"));
/// Entries the error queue holds.
pub const ERROR_QUEUE_LEN: usize = 10;
/// Longest program message line read, bytes; a longer line is skipped (read and thrown
/// away, never stored) and queues -363 "Input buffer overrun".
pub const MAX_LINE_BYTES: usize = 64 * 1024;
/// Largest response message, bytes (the largest single answer, 10001 points in ASCii
/// with 17 digits, is under 0.5 MB); a query that would pass it queues -223.
pub const MAX_ANSWER_BYTES: usize = 4 << 20;
/// Frequency limits of the simulated instrument, Hz.
pub const FREQ_RANGE_HZ: (f64, f64) = (10e6, 50e9);
/// Point count limits.
pub const POINTS_RANGE: (usize, usize) = (2, 10001);

const DEMO_SCENARIO: &str = include_str!("../../scenarios/demo-lab.toml");

/// Data format set by `FORMat:DATA`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TransferFormat {
    /// A binary block of IEEE 754 values.
    Real(Format),
    /// ASCII numbers with this many significant digits (0: shortest exact form).
    Ascii(u8),
}

/// One SCPI error queue entry.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct ScpiError {
    /// Error number (negative: defined by SCPI).
    pub code: i32,
    /// Standard description.
    pub text: &'static str,
}

macro_rules! scpi_errors {
    ($($name:ident = $code:expr, $text:expr;)*) => {
        impl ScpiError { $(
            #[doc = concat!("`", stringify!($code), ",\"", $text, "\"`")]
            pub const $name: ScpiError = ScpiError { code: $code, text: $text };
        )* }
    };
}

scpi_errors! {
    SYNTAX = -102, "Syntax error";
    DATA_TYPE = -104, "Data type error";
    PARAMETER_NOT_ALLOWED = -108, "Parameter not allowed";
    MISSING_PARAMETER = -109, "Missing parameter";
    UNDEFINED_HEADER = -113, "Undefined header";
    INVALID_SUFFIX = -131, "Invalid suffix";
    SETTINGS_CONFLICT = -221, "Settings conflict";
    OUT_OF_RANGE = -222, "Data out of range";
    ILLEGAL_VALUE = -224, "Illegal parameter value";
    STALE = -230, "Data corrupt or stale";
    HARDWARE = -240, "Hardware error";
    TOO_MUCH_DATA = -223, "Too much data";
    QUEUE_OVERFLOW = -350, "Queue overflow";
    INPUT_OVERRUN = -363, "Input buffer overrun";
}

impl std::fmt::Display for ScpiError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{},\"{}\"", self.code, self.text)
    }
}

/// The state of the simulated instrument (shared by all clients).
///
/// ```
/// use sweepgate_host::link::instrument::{Instrument, IDN};
/// let mut inst = Instrument::builtin(None).unwrap();
/// assert_eq!(inst.handle_line(b"*IDN?"), Some(format!("{IDN}\n").into_bytes()));
/// assert_eq!(inst.handle_line(b"form real,32;INIT"), None);
/// let block = inst.handle_line(b"TRACe:DATA?").unwrap();
/// assert_eq!(&block[..6], b"#41608"); // 201 points × 8 bytes
/// assert_eq!(inst.handle_line(b"SYST:ERR?"), Some(b"0,\"No error\"\n".to_vec()));
/// ```
pub struct Instrument {
    scenario: Scenario,
    original: crate::model::scenario::Sweep,
    seed: u64,
    sim: Simulator,
    format: TransferFormat,
    order: ByteOrder,
    next_sweep: usize,
    taken: u64,
    sweep: Option<(u32, Vec<Complex32>)>,
    errors: VecDeque<ScpiError>,
    esr: u8,
    ese: u8,
    sre: u8,
    dump: Option<PathBuf>,
    bandwidth_hz: f64,
    power_dbm: f64,
    function: &'static str,
    misreport: Option<Setting>,
    rcs: Option<RcsSource>,
}

/// A setting whose read-back can be made to lie (`--misreport`, for tests).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Setting {
    /// First frequency.
    Start,
    /// Last frequency.
    Stop,
    /// Point count.
    Points,
    /// IF bandwidth.
    Bandwidth,
    /// Source power.
    Power,
    /// Measured trace.
    Function,
    /// Data format.
    Format,
    /// Byte order.
    Order,
}

impl std::str::FromStr for Setting {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        Ok(match s {
            "start" => Self::Start,
            "stop" => Self::Stop,
            "points" => Self::Points,
            "bandwidth" => Self::Bandwidth,
            "power" => Self::Power,
            "function" => Self::Function,
            "format" => Self::Format,
            "order" => Self::Order,
            _ => {
                return Err(format!(
                    "{s:?}: one of start, stop, points, bandwidth, power, function, format, order"
                ))
            }
        })
    }
}

/// IF bandwidth limits, Hz.
pub const BANDWIDTH_RANGE_HZ: (f64, f64) = (1.0, 10e6);
/// Source power limits, dBm.
pub const POWER_RANGE_DBM: (f64, f64) = (-90.0, 20.0);
/// Traces `FUNCtion` accepts.
pub const FUNCTIONS: [&str; 4] = ["S11", "S21", "S12", "S22"];

/// A header node: long form, short form, optional.
type Node = (&'static str, &'static str, bool);

const FORM_DATA: &[Node] = &[("FORMAT", "FORM", false), ("DATA", "DATA", true)];
const FORM_BORD: &[Node] = &[("FORMAT", "FORM", false), ("BORDER", "BORD", false)];
const FREQ_STAR: &[Node] = &[
    ("SENSE", "SENS", true),
    ("FREQUENCY", "FREQ", false),
    ("START", "STAR", false),
];
const FREQ_STOP: &[Node] = &[
    ("SENSE", "SENS", true),
    ("FREQUENCY", "FREQ", false),
    ("STOP", "STOP", false),
];
const SWE_POIN: &[Node] = &[
    ("SENSE", "SENS", true),
    ("SWEEP", "SWE", false),
    ("POINTS", "POIN", false),
];
const BAND: &[Node] = &[
    ("SENSE", "SENS", true),
    ("BANDWIDTH", "BAND", false),
    ("RESOLUTION", "RES", true),
];
const POWER: &[Node] = &[
    ("SOURCE", "SOUR", false),
    ("POWER", "POW", false),
    ("LEVEL", "LEV", true),
    ("IMMEDIATE", "IMM", true),
    ("AMPLITUDE", "AMPL", true),
];
const FUNC: &[Node] = &[
    ("SENSE", "SENS", true),
    ("FUNCTION", "FUNC", false),
    ("ON", "ON", true),
];
const INIT: &[Node] = &[("INITIATE", "INIT", false), ("IMMEDIATE", "IMM", true)];
const TRAC_DATA: &[Node] = &[("TRACE", "TRAC", false), ("DATA", "DATA", true)];
const CALC_DATA: &[Node] = &[("CALCULATE", "CALC", false), ("DATA", "DATA", true)];
const SYST_ERR: &[Node] = &[
    ("SYSTEM", "SYST", false),
    ("ERROR", "ERR", false),
    ("NEXT", "NEXT", true),
];
const SYST_ERR_COUN: &[Node] = &[
    ("SYSTEM", "SYST", false),
    ("ERROR", "ERR", false),
    ("COUNT", "COUN", false),
];
const SYST_VERS: &[Node] = &[("SYSTEM", "SYST", false), ("VERSION", "VERS", false)];

/// Whether the header's mnemonics match a pattern of nodes.
fn matches(tokens: &[String], pattern: &[Node]) -> bool {
    fn go(t: &[String], p: &[Node]) -> bool {
        match (t.first(), p.first()) {
            (None, None) => true,
            (None, Some(n)) => n.2 && go(t, &p[1..]),
            (Some(_), None) => false,
            (Some(tok), Some(&(long, short, opt))) => {
                let hit = tok == long || tok == short;
                (hit && go(&t[1..], &p[1..])) || (opt && go(t, &p[1..]))
            }
        }
    }
    go(tokens, pattern)
}

/// One answer unit of a query.
enum Answer {
    Text(String),
    Bytes(Vec<u8>),
}

impl Answer {
    fn len(&self) -> usize {
        match self {
            Answer::Text(t) => t.len(),
            Answer::Bytes(b) => b.len(),
        }
    }
}

/// The response message of one program message line, bounded by [`MAX_ANSWER_BYTES`].
#[derive(Default)]
pub struct Response {
    bytes: Vec<u8>,
    any: bool,
}

impl Response {
    fn push(&mut self, a: Answer) -> Result<(), ScpiError> {
        if self.bytes.len() + a.len() + 2 > MAX_ANSWER_BYTES {
            return Err(ScpiError::TOO_MUCH_DATA);
        }
        if self.any {
            self.bytes.push(b';');
        }
        match a {
            Answer::Text(t) => self.bytes.extend_from_slice(t.as_bytes()),
            Answer::Bytes(b) => self.bytes.extend_from_slice(&b),
        }
        self.any = true;
        Ok(())
    }

    /// The response message with its newline, or `None` when no query answered.
    pub fn finish(mut self) -> Option<Vec<u8>> {
        if !self.any {
            return None;
        }
        self.bytes.push(b'\n');
        Some(self.bytes)
    }
}

/// The non-empty program message units of a line (a trailing `\r` dropped); a syntax
/// error when the line is not UTF-8.
pub fn program_units(line: &[u8]) -> Result<Vec<&str>, ScpiError> {
    let text = std::str::from_utf8(line).map_err(|_| ScpiError::SYNTAX)?;
    Ok(split_units(text.trim_end_matches('\r'))
        .map(str::trim)
        .filter(|u| !u.is_empty())
        .collect())
}

impl Instrument {
    /// An instrument simulating `scenario` (validated) with `seed`.
    pub fn new(scenario: Scenario, seed: u64, dump: Option<PathBuf>) -> anyhow::Result<Self> {
        scenario.validate()?;
        scenario.grid()?;
        let sim = Simulator::new(&scenario, seed);
        let mut me = Self {
            original: scenario.sweep.clone(),
            scenario,
            seed,
            sim,
            format: TransferFormat::Ascii(0),
            order: ByteOrder::Normal,
            next_sweep: 0,
            taken: 0,
            sweep: None,
            errors: VecDeque::new(),
            esr: 0,
            ese: 0,
            sre: 0,
            dump,
            bandwidth_hz: 10e3,
            power_dbm: -10.0,
            function: "S21",
            misreport: None,
            rcs: None,
        };
        me.reset();
        Ok(me)
    }

    /// The built-in default: the demo-lab scenario.
    pub fn builtin(seed: Option<u64>) -> anyhow::Result<Self> {
        let s = Scenario::from_toml(DEMO_SCENARIO)?;
        let seed = seed.unwrap_or(s.simulation.seed);
        Self::new(s, seed, None)
    }

    /// Serves the sweeps of an RCS measurement instead of the scenario's scan, on its
    /// grid (which `*RST` then restores).
    pub fn serve_rcs(&mut self, src: RcsSource) -> anyhow::Result<()> {
        let (start_hz, stop_hz, points) = src.grid();
        let mut s = self.scenario.clone();
        s.sweep.start_hz = start_hz;
        s.sweep.stop_hz = stop_hz;
        s.sweep.points = points;
        s.validate().context("the RCS scene's grid")?;
        s.grid().context("the RCS scene's grid")?;
        self.sim = Simulator::new(&s, self.seed);
        self.original = s.sweep.clone();
        self.scenario = s;
        self.rcs = Some(src);
        self.reset();
        Ok(())
    }

    /// The scenario (with the grid as currently set).
    pub fn scenario(&self) -> &Scenario {
        &self.scenario
    }

    /// The last sweep taken: its index in the scan and its values.
    pub fn current_sweep(&self) -> Option<(u32, &[Complex32])> {
        self.sweep.as_ref().map(|(i, v)| (*i, v.as_slice()))
    }

    /// The error queue, oldest first.
    pub fn errors(&self) -> impl Iterator<Item = &ScpiError> {
        self.errors.iter()
    }

    fn reset(&mut self) {
        if self.scenario.sweep != self.original {
            self.scenario.sweep = self.original.clone();
            self.sim = Simulator::new(&self.scenario, self.seed);
        }
        self.format = TransferFormat::Ascii(0);
        self.order = ByteOrder::Normal;
        self.next_sweep = 0;
        self.sweep = None;
        if let Some(r) = &mut self.rcs {
            let g = &self.original;
            r.set_grid(g.start_hz, g.stop_hz, g.points);
            r.restart();
        }
        self.bandwidth_hz = 10e3;
        self.power_dbm = -10.0;
        self.function = "S21";
    }

    /// Makes the read-back of `setting` lie (for tests of a client's set-up check).
    pub fn misreport(&mut self, setting: Option<Setting>) {
        self.misreport = setting;
    }

    /// `v`, or a wrong value when `setting` is the one to misreport.
    fn report(&self, setting: Setting, v: f64) -> f64 {
        if self.misreport == Some(setting) {
            v * 2.0
        } else {
            v
        }
    }

    fn push_error(&mut self, e: ScpiError) {
        self.esr |= match e.code {
            -199..=-100 => 32,
            -299..=-200 => 16,
            -399..=-300 => 8,
            -499..=-400 => 4,
            _ => 8,
        };
        if self.errors.len() >= ERROR_QUEUE_LEN {
            if let Some(last) = self.errors.back_mut() {
                *last = ScpiError::QUEUE_OVERFLOW;
            }
        } else {
            self.errors.push_back(e);
        }
    }

    fn set_grid(&mut self, start_hz: f64, stop_hz: f64, points: usize) -> Result<(), ScpiError> {
        if start_hz >= stop_hz {
            return Err(ScpiError::SETTINGS_CONFLICT);
        }
        Grid::from_start_stop(start_hz, stop_hz, points).map_err(|_| ScpiError::OUT_OF_RANGE)?;
        let mut s = self.scenario.clone();
        s.sweep.start_hz = start_hz;
        s.sweep.stop_hz = stop_hz;
        s.sweep.points = points;
        s.validate().map_err(|_| ScpiError::OUT_OF_RANGE)?;
        self.sim = Simulator::new(&s, self.seed);
        self.scenario = s;
        if let Some(r) = &mut self.rcs {
            r.set_grid(start_hz, stop_hz, points);
        }
        Ok(())
    }

    fn initiate(&mut self) {
        if let Some(r) = &mut self.rcs {
            match r.next_sweep() {
                Ok((index, s21)) => self.took(index, s21),
                Err(e) => {
                    eprintln!("RCS measurement: {e:#}");
                    self.push_error(ScpiError::HARDWARE);
                }
            }
            return;
        }
        let n = self.sim.timeline().sweep_starts_s().len();
        if self.next_sweep >= n {
            self.next_sweep = 0;
        }
        if let Some(sw) = self.sim.sweep(self.next_sweep) {
            self.took(sw.index, sw.s21);
        }
        self.next_sweep += 1;
    }

    /// Keeps sweep `index` as the last one taken, and dumps it when asked to.
    fn took(&mut self, index: u32, s21: Vec<Complex32>) {
        if let Some(dir) = &self.dump {
            let g = &self.scenario.sweep;
            let json = serde_json::json!({
                "index": index,
                "start_hz": g.start_hz,
                "stop_hz": g.stop_hz,
                "points": s21.len(),
                "re": s21.iter().map(|c| c.re).collect::<Vec<_>>(),
                "im": s21.iter().map(|c| c.im).collect::<Vec<_>>(),
            });
            let path = dir.join(format!("sweep-{}.json", self.taken));
            if let Err(e) = std::fs::write(&path, json.to_string()) {
                eprintln!("warning: cannot write {}: {e}", path.display());
            }
        }
        self.sweep = Some((index, s21));
        self.taken += 1;
    }

    /// Handles one program message line (without its newline); returns the response
    /// message (with its newline) when it held queries. A response that would pass
    /// [`MAX_ANSWER_BYTES`] is not built: the query that would overflow it queues -223.
    pub fn handle_line(&mut self, line: &[u8]) -> Option<Vec<u8>> {
        let mut response = Response::default();
        match program_units(line) {
            Ok(units) => {
                for unit in units {
                    self.handle_into(unit, &mut response);
                }
            }
            Err(e) => self.push_error(e),
        }
        response.finish()
    }

    /// Handles one program message unit (one `;`-separated command), adding its answer
    /// to `response` or its error to the queue. The server takes the shared lock for one
    /// unit at a time, so one long line cannot hold the instrument for the others.
    pub fn handle_into(&mut self, unit: &str, response: &mut Response) {
        match self.handle_unit(unit) {
            Ok(Some(a)) => {
                if let Err(e) = response.push(a) {
                    self.push_error(e);
                }
            }
            Ok(None) => {}
            Err(e) => self.push_error(e),
        }
    }

    /// The turntable to ask before `unit` runs: `Some` when it is an `INITiate` and the
    /// instrument serves an RCS measurement at a turntable's angle.
    pub fn turntable_to_ask(&self, unit: &str) -> Option<String> {
        let addr = self.rcs.as_ref()?.turntable()?;
        let header = unit.split([' ', '\t']).next().unwrap_or("");
        let init = !header.ends_with('?') && mnemonics(header).is_ok_and(|t| matches(&t, INIT));
        init.then(|| addr.to_owned())
    }

    /// [`Self::handle_into`] with the turntable's answer for an `INITiate` already asked
    /// (`None`: nothing asked).
    pub fn handle_with_angle(
        &mut self,
        unit: &str,
        response: &mut Response,
        angle: Option<anyhow::Result<f64>>,
    ) {
        let given = angle.is_some();
        if let (Some(r), true) = (&mut self.rcs, given) {
            r.give_angle(angle);
        }
        self.handle_into(unit, response);
        if let (Some(r), true) = (&mut self.rcs, given) {
            // An answer the unit did not use (a malformed INITiate) is not kept.
            r.give_angle(None);
        }
    }

    /// Queues an error found outside any command (a line too long for the input buffer).
    pub fn queue_error(&mut self, e: ScpiError) {
        self.push_error(e);
    }

    fn handle_unit(&mut self, unit: &str) -> Result<Option<Answer>, ScpiError> {
        let (header, params) = match unit.find([' ', '\t']) {
            Some(i) => (&unit[..i], unit[i..].trim()),
            None => (unit, ""),
        };
        let (header, query) = match header.strip_suffix('?') {
            Some(h) => (h, true),
            None => (header, false),
        };
        let params: Vec<&str> = if params.is_empty() {
            Vec::new()
        } else {
            params.split(',').map(str::trim).collect()
        };
        if let Some(common) = header.strip_prefix('*') {
            return self.common(&common.to_ascii_uppercase(), query, &params);
        }
        let tokens = mnemonics(header)?;
        let t = tokens.as_slice();
        if matches(t, FORM_DATA) {
            return self.data_format(query, &params);
        }
        if matches(t, FORM_BORD) {
            return self.byte_order(query, &params);
        }
        for (pattern, is_start) in [(FREQ_STAR, true), (FREQ_STOP, false)] {
            if matches(t, pattern) {
                return self.frequency(is_start, query, &params);
            }
        }
        if matches(t, SWE_POIN) {
            return self.points(query, &params);
        }
        if matches(t, BAND) {
            return self.bandwidth(query, &params);
        }
        if matches(t, POWER) {
            return self.power(query, &params);
        }
        if matches(t, FUNC) {
            return self.function(query, &params);
        }
        if matches(t, INIT) {
            if query {
                return Err(ScpiError::UNDEFINED_HEADER);
            }
            no_params(&params)?;
            self.initiate();
            return Ok(None);
        }
        if matches(t, TRAC_DATA) || matches(t, CALC_DATA) {
            return self.trace(query, &params);
        }
        if query {
            return self.system_query(t, &params);
        }
        Err(ScpiError::UNDEFINED_HEADER)
    }

    /// `FORMat[:DATA]` and its query.
    fn data_format(&mut self, query: bool, params: &[&str]) -> Result<Option<Answer>, ScpiError> {
        if query {
            no_params(params)?;
            let lie = self.misreport == Some(Setting::Format);
            return Ok(Some(Answer::Text(match (self.format, lie) {
                (TransferFormat::Real(Format::Real32), false) => "REAL,32".into(),
                (TransferFormat::Real(Format::Real64), false)
                | (TransferFormat::Real(Format::Real32), true) => "REAL,64".into(),
                (TransferFormat::Ascii(n), false) => format!("ASC,{n}"),
                (_, true) => "REAL,32".into(),
            })));
        }
        let kind = params
            .first()
            .ok_or(ScpiError::MISSING_PARAMETER)?
            .to_ascii_uppercase();
        let len = params.get(1).map(|s| s.parse::<u32>());
        if params.len() > 2 {
            return Err(ScpiError::PARAMETER_NOT_ALLOWED);
        }
        self.format = match (kind.as_str(), len) {
            ("REAL", None | Some(Ok(32))) => TransferFormat::Real(Format::Real32),
            ("REAL", Some(Ok(64))) => TransferFormat::Real(Format::Real64),
            ("REAL", Some(Ok(_))) => return Err(ScpiError::ILLEGAL_VALUE),
            ("ASC" | "ASCII", None) => TransferFormat::Ascii(0),
            ("ASC" | "ASCII", Some(Ok(n))) if n <= 17 => TransferFormat::Ascii(n as u8),
            ("ASC" | "ASCII", Some(Ok(_))) => return Err(ScpiError::OUT_OF_RANGE),
            (_, Some(Err(_))) => return Err(ScpiError::DATA_TYPE),
            _ => return Err(ScpiError::ILLEGAL_VALUE),
        };
        Ok(None)
    }

    /// `FORMat:BORDer` and its query.
    fn byte_order(&mut self, query: bool, params: &[&str]) -> Result<Option<Answer>, ScpiError> {
        if query {
            no_params(params)?;
            let swapped = matches!(self.order, ByteOrder::Swapped);
            let s = if swapped != (self.misreport == Some(Setting::Order)) {
                "SWAP"
            } else {
                "NORM"
            };
            return Ok(Some(Answer::Text(s.into())));
        }
        self.order = match one(params)?.as_str() {
            "NORM" | "NORMAL" => ByteOrder::Normal,
            "SWAP" | "SWAPPED" => ByteOrder::Swapped,
            _ => return Err(ScpiError::ILLEGAL_VALUE),
        };
        Ok(None)
    }

    /// `[SENSe]:FREQuency:STARt` (`is_start`) or `:STOP`, and their queries.
    fn frequency(
        &mut self,
        is_start: bool,
        query: bool,
        params: &[&str],
    ) -> Result<Option<Answer>, ScpiError> {
        let g = self.scenario.sweep.clone();
        if query {
            no_params(params)?;
            let v = if is_start {
                self.report(Setting::Start, g.start_hz)
            } else {
                self.report(Setting::Stop, g.stop_hz)
            };
            return Ok(Some(Answer::Text(nr3(v))));
        }
        let v = parse_hz(&one(params)?)?;
        if !(FREQ_RANGE_HZ.0..=FREQ_RANGE_HZ.1).contains(&v) {
            return Err(ScpiError::OUT_OF_RANGE);
        }
        let (a, b) = if is_start {
            (v, g.stop_hz)
        } else {
            (g.start_hz, v)
        };
        self.set_grid(a, b, g.points)?;
        Ok(None)
    }

    /// `[SENSe]:SWEep:POINts` and its query.
    fn points(&mut self, query: bool, params: &[&str]) -> Result<Option<Answer>, ScpiError> {
        let g = self.scenario.sweep.clone();
        if query {
            no_params(params)?;
            let n = if self.misreport == Some(Setting::Points) {
                g.points + 1
            } else {
                g.points
            };
            return Ok(Some(Answer::Text(n.to_string())));
        }
        let p = one(params)?;
        let v: f64 = p.parse().map_err(|_| ScpiError::DATA_TYPE)?;
        if !v.is_finite() || v.fract() != 0.0 {
            return Err(ScpiError::DATA_TYPE);
        }
        if v < POINTS_RANGE.0 as f64 || v > POINTS_RANGE.1 as f64 {
            return Err(ScpiError::OUT_OF_RANGE);
        }
        self.set_grid(g.start_hz, g.stop_hz, v as usize)?;
        Ok(None)
    }

    /// `[SENSe]:BANDwidth[:RESolution]` and its query.
    fn bandwidth(&mut self, query: bool, params: &[&str]) -> Result<Option<Answer>, ScpiError> {
        if query {
            no_params(params)?;
            let v = self.report(Setting::Bandwidth, self.bandwidth_hz);
            return Ok(Some(Answer::Text(nr3(v))));
        }
        let v = parse_hz(&one(params)?)?;
        if !(BANDWIDTH_RANGE_HZ.0..=BANDWIDTH_RANGE_HZ.1).contains(&v) {
            return Err(ScpiError::OUT_OF_RANGE);
        }
        self.bandwidth_hz = v;
        Ok(None)
    }

    /// `SOURce:POWer[:LEVel][:IMMediate][:AMPLitude]` and its query, dBm.
    fn power(&mut self, query: bool, params: &[&str]) -> Result<Option<Answer>, ScpiError> {
        if query {
            no_params(params)?;
            let v = self.report(Setting::Power, self.power_dbm);
            let v = if v == self.power_dbm && self.misreport == Some(Setting::Power) {
                v + 1.0 // 0 dBm doubled is still 0
            } else {
                v
            };
            return Ok(Some(Answer::Text(nr3(v))));
        }
        let p = one(params)?;
        let p = p.strip_suffix("DBM").unwrap_or(&p).trim();
        let v: f64 = p.parse().map_err(|_| ScpiError::DATA_TYPE)?;
        if !v.is_finite() {
            return Err(ScpiError::DATA_TYPE);
        }
        if !(POWER_RANGE_DBM.0..=POWER_RANGE_DBM.1).contains(&v) {
            return Err(ScpiError::OUT_OF_RANGE);
        }
        self.power_dbm = v;
        Ok(None)
    }

    /// `[SENSe]:FUNCtion[:ON]` and its query: the measured trace, a quoted name.
    fn function(&mut self, query: bool, params: &[&str]) -> Result<Option<Answer>, ScpiError> {
        if query {
            no_params(params)?;
            let f = if self.misreport == Some(Setting::Function) {
                if self.function == "S11" {
                    "S22"
                } else {
                    "S11"
                }
            } else {
                self.function
            };
            return Ok(Some(Answer::Text(format!("\"{f}\""))));
        }
        let p = one(params)?;
        let name = p.trim_matches(|c| c == '"' || c == '\'');
        self.function = FUNCTIONS
            .into_iter()
            .find(|f| *f == name)
            .ok_or(ScpiError::ILLEGAL_VALUE)?;
        Ok(None)
    }

    /// `TRACe[:DATA]?` / `CALCulate[:DATA]?`: the last sweep in the current format.
    fn trace(&self, query: bool, params: &[&str]) -> Result<Option<Answer>, ScpiError> {
        if !query {
            return Err(ScpiError::UNDEFINED_HEADER);
        }
        if params.len() > 1 {
            return Err(ScpiError::PARAMETER_NOT_ALLOWED);
        }
        let Some((_, values)) = &self.sweep else {
            return Err(ScpiError::STALE);
        };
        Ok(Some(encode(self.format, self.order, values)))
    }

    /// The `SYSTem` queries: error queue and version.
    fn system_query(&mut self, t: &[String], params: &[&str]) -> Result<Option<Answer>, ScpiError> {
        let answer = if matches(t, SYST_ERR) {
            no_params(params)?;
            match self.errors.pop_front() {
                Some(e) => e.to_string(),
                None => "0,\"No error\"".into(),
            }
        } else if matches(t, SYST_ERR_COUN) {
            no_params(params)?;
            self.errors.len().to_string()
        } else if matches(t, SYST_VERS) {
            no_params(params)?;
            "1999.0".into()
        } else {
            return Err(ScpiError::UNDEFINED_HEADER);
        };
        Ok(Some(Answer::Text(answer)))
    }

    fn common(
        &mut self,
        name: &str,
        query: bool,
        params: &[&str],
    ) -> Result<Option<Answer>, ScpiError> {
        let text = |s: String| Ok(Some(Answer::Text(s)));
        let takes_value = matches!(name, "ESE" | "SRE") && !query;
        if !takes_value && !params.is_empty() {
            return Err(ScpiError::PARAMETER_NOT_ALLOWED);
        }
        match (name, query) {
            ("IDN", true) => text(IDN.into()),
            ("RST", false) => {
                self.reset();
                Ok(None)
            }
            ("CLS", false) => {
                self.errors.clear();
                self.esr = 0;
                Ok(None)
            }
            ("OPC", false) => {
                self.esr |= 1;
                Ok(None)
            }
            ("OPC", true) => text("1".into()),
            ("WAI", false) => Ok(None),
            ("TST", true) => text("0".into()),
            ("ESR", true) => {
                let v = self.esr;
                self.esr = 0;
                text(v.to_string())
            }
            ("ESE", true) => text(self.ese.to_string()),
            ("SRE", true) => text(self.sre.to_string()),
            ("ESE" | "SRE", false) => {
                let p = match params {
                    [] => return Err(ScpiError::MISSING_PARAMETER),
                    [p] => p,
                    _ => return Err(ScpiError::PARAMETER_NOT_ALLOWED),
                };
                let v: u32 = p.parse().map_err(|_| ScpiError::DATA_TYPE)?;
                let v = u8::try_from(v).map_err(|_| ScpiError::OUT_OF_RANGE)?;
                if name == "ESE" {
                    self.ese = v;
                } else {
                    self.sre = v;
                }
                Ok(None)
            }
            ("STB", true) => {
                let mut stb = 0u8;
                if !self.errors.is_empty() {
                    stb |= 4;
                }
                if self.esr & self.ese != 0 {
                    stb |= 32;
                }
                text(stb.to_string())
            }
            _ => Err(ScpiError::UNDEFINED_HEADER),
        }
    }
}

/// The header's mnemonics in upper case (a leading `:` dropped); a syntax error when one
/// is empty or holds anything but letters and digits.
fn mnemonics(header: &str) -> Result<Vec<String>, ScpiError> {
    let tokens: Vec<String> = header
        .strip_prefix(':')
        .unwrap_or(header)
        .split(':')
        .map(str::to_ascii_uppercase)
        .collect();
    if tokens
        .iter()
        .any(|t| t.is_empty() || !t.chars().all(|c| c.is_ascii_alphanumeric()))
    {
        return Err(ScpiError::SYNTAX);
    }
    Ok(tokens)
}

/// No parameters allowed.
fn no_params(p: &[&str]) -> Result<(), ScpiError> {
    if p.is_empty() {
        Ok(())
    } else {
        Err(ScpiError::PARAMETER_NOT_ALLOWED)
    }
}

/// Exactly one parameter, in upper case.
fn one(p: &[&str]) -> Result<String, ScpiError> {
    match p {
        [] => Err(ScpiError::MISSING_PARAMETER),
        [x] => Ok(x.to_ascii_uppercase()),
        _ => Err(ScpiError::PARAMETER_NOT_ALLOWED),
    }
}

/// Splits a program message at `;` (there are no quoted strings among our commands).
fn split_units(text: &str) -> impl Iterator<Item = &str> {
    text.split(';')
}

/// NR3 form of a number: `8E+09`-like, exact for the f64.
fn nr3(v: f64) -> String {
    format!("{v:E}")
}

/// Parses `<NRf>[suffix]` in hertz.
fn parse_hz(p: &str) -> Result<f64, ScpiError> {
    let p = p.trim();
    let split = p
        .char_indices()
        .find(|&(i, c)| {
            c.is_ascii_alphabetic()
                && !((c == 'E' || c == 'e')
                    && p[i + 1..].starts_with(|d: char| d.is_ascii_digit() || d == '-' || d == '+'))
        })
        .map_or(p.len(), |(i, _)| i);
    let (num, suffix) = p.split_at(split);
    let v: f64 = num.trim().parse().map_err(|_| ScpiError::DATA_TYPE)?;
    if !v.is_finite() {
        return Err(ScpiError::DATA_TYPE);
    }
    // SCPI: MHZ is megahertz (the M of MHZ is not milli).
    let scale = match suffix.trim().to_ascii_uppercase().as_str() {
        "" | "HZ" => 1.0,
        "KHZ" => 1e3,
        "MHZ" => 1e6,
        "GHZ" => 1e9,
        _ => return Err(ScpiError::INVALID_SUFFIX),
    };
    Ok(v * scale)
}

fn encode(format: TransferFormat, order: ByteOrder, values: &[Complex32]) -> Answer {
    match format {
        TransferFormat::Real(f) => {
            let mut buf = vec![0u8; 16 + values.len() * f.sample_bytes()];
            match block::emit(f, order, values, &mut buf) {
                Ok(n) => {
                    // Drop emit's newline: the response message adds its own.
                    buf.truncate(n.saturating_sub(1));
                    Answer::Bytes(buf)
                }
                Err(_) => Answer::Text(String::new()),
            }
        }
        TransferFormat::Ascii(digits) => {
            let mut s = String::with_capacity(values.len() * 30);
            for (i, c) in values.iter().enumerate() {
                for (j, v) in [c.re, c.im].into_iter().enumerate() {
                    if i > 0 || j > 0 {
                        s.push(',');
                    }
                    if digits == 0 {
                        s.push_str(&format!("{v:E}"));
                    } else {
                        s.push_str(&format!("{:.*E}", digits as usize - 1, v));
                    }
                }
            }
            Answer::Text(s)
        }
    }
}

/// Limits that keep one client from taking the server down.
#[derive(Debug, Clone, Copy)]
pub struct ServerLimits {
    /// Clients served at once; a client beyond it is closed at once.
    pub max_clients: usize,
    /// A client that sends nothing (or reads nothing) this long is dropped.
    pub idle: Duration,
    /// A client connected this long is dropped, however busy.
    pub total: Duration,
}

impl Default for ServerLimits {
    fn default() -> Self {
        Self {
            max_clients: 256,
            idle: Duration::from_secs(60),
            total: Duration::from_secs(3600),
        }
    }
}

/// Serves one client until it disconnects, goes idle past `limits.idle`, or has been
/// connected `limits.total`. The shared lock is taken for one command at a time and never
/// held across a socket read or write.
pub fn serve_client(
    stream: TcpStream,
    inst: &Mutex<Instrument>,
    limits: &ServerLimits,
) -> std::io::Result<()> {
    let deadline = Instant::now() + limits.total;
    stream.set_write_timeout(Some(limits.idle))?;
    let mut out = stream.try_clone()?;
    let mut reader = BufReader::new(stream);
    let mut line = Vec::new();
    loop {
        let left = deadline.saturating_duration_since(Instant::now());
        if left.is_zero() {
            return Err(std::io::Error::new(
                std::io::ErrorKind::TimedOut,
                "connected for the longest time a client is served",
            ));
        }
        let wait = left.min(limits.idle).max(Duration::from_millis(1));
        reader.get_ref().set_read_timeout(Some(wait))?;
        let response = match read_bounded_line(&mut reader, &mut line, MAX_LINE_BYTES)? {
            LineRead::Closed => return Ok(()),
            LineRead::TooLong => {
                if let Ok(mut i) = inst.lock() {
                    i.queue_error(ScpiError::INPUT_OVERRUN);
                }
                continue;
            }
            LineRead::Line => answer_line(&line, inst),
        };
        if let Some(a) = response {
            out.write_all(&a)?;
            out.flush()?;
        }
    }
}

/// Runs one line against the shared instrument, one unit per lock. An `INITiate` of an RCS
/// measurement with a turntable asks the turntable first, without the lock.
fn answer_line(line: &[u8], inst: &Mutex<Instrument>) -> Option<Vec<u8>> {
    let mut response = Response::default();
    match program_units(line) {
        Ok(units) => {
            for unit in units {
                let ask = inst.lock().ok()?.turntable_to_ask(unit);
                // The question goes out with no lock held.
                let angle = ask.map(|addr| crate::link::rcs_source::turntable_angle(&addr));
                let Ok(mut i) = inst.lock() else {
                    return None;
                };
                i.handle_with_angle(unit, &mut response, angle);
            }
        }
        Err(e) => {
            if let Ok(mut i) = inst.lock() {
                i.queue_error(e);
            }
        }
    }
    response.finish()
}

/// Counts a served client; the count drops when the guard does.
struct Slot(Arc<AtomicUsize>);

impl Drop for Slot {
    fn drop(&mut self) {
        self.0.fetch_sub(1, Ordering::SeqCst);
    }
}

/// Accepts clients on `listener` (one thread each, at most `limits.max_clients` at once);
/// with `once`, returns after the first client disconnects. An error accepting one client
/// (no descriptors left, a reset connection) is reported and the server goes on.
pub fn serve(
    listener: TcpListener,
    inst: Instrument,
    once: bool,
    limits: ServerLimits,
) -> anyhow::Result<()> {
    let inst = Arc::new(Mutex::new(inst));
    let active = Arc::new(AtomicUsize::new(0));
    for stream in listener.incoming() {
        let stream = match stream {
            Ok(s) => s,
            Err(e) => {
                eprintln!("warning: accepting a client: {e}");
                std::thread::sleep(Duration::from_millis(50));
                continue;
            }
        };
        let peer = stream
            .peer_addr()
            .map(|a| a.to_string())
            .unwrap_or_default();
        if active.fetch_add(1, Ordering::SeqCst) >= limits.max_clients {
            active.fetch_sub(1, Ordering::SeqCst);
            eprintln!(
                "client {peer} refused: {} clients already",
                limits.max_clients
            );
            drop(stream);
            continue;
        }
        let slot = Slot(Arc::clone(&active));
        eprintln!("client {peer} connected");
        if once {
            serve_client(stream, &inst, &limits).ok();
            eprintln!("client {peer} disconnected");
            return Ok(());
        }
        let inst = Arc::clone(&inst);
        let spawned = std::thread::Builder::new().spawn(move || {
            let _slot = slot;
            if let Err(e) = serve_client(stream, &inst, &limits) {
                eprintln!("client {peer}: {e}");
            }
            eprintln!("client {peer} disconnected");
        });
        if let Err(e) = spawned {
            eprintln!("warning: no thread for a client: {e}");
        }
    }
    Ok(())
}

/// What `sweepgate instrument` is asked to run: where to listen, which scan to simulate,
/// where to dump the sweeps, and whether to stop after one client.
#[derive(Debug, Clone)]
pub struct ServerOptions {
    /// Address to listen on.
    pub bind: String,
    /// TCP port (0 picks a free one).
    pub port: u16,
    /// Scenario whose scan the sweeps come from; `None`: the built-in demo lab.
    pub scenario: Option<PathBuf>,
    /// Seed of the noise; `None`: the scenario's `simulation.seed`.
    pub seed: Option<u64>,
    /// Folder for `sweep-<n>.json` files, created when missing.
    pub dump: Option<PathBuf>,
    /// Stop after the first client disconnects.
    pub once: bool,
    /// Client count and deadlines.
    pub limits: ServerLimits,
    /// For tests: the one setting whose read-back lies.
    pub misreport: Option<Setting>,
    /// Serve an RCS measurement instead of the scenario's scan.
    pub rcs: Option<RcsServe>,
}

/// What `--rcs-scenario`, `--measurement` and `--turntable` ask for.
#[derive(Debug, Clone)]
pub struct RcsServe {
    /// The RCS scene (see `host-sim/scenarios/rcs/range.toml`).
    pub scene: PathBuf,
    /// Which measurement of the scan to serve.
    pub measurement: crate::formats::rcs_record::Measurement,
    /// The turntable whose angle each sweep is measured at (`None`: the scene's angles
    /// in turn).
    pub turntable: Option<String>,
}

/// Whether `--bind` names only this machine (a loopback address or `localhost`).
fn is_loopback(bind: &str) -> bool {
    if bind.eq_ignore_ascii_case("localhost") {
        return true;
    }
    let host = bind.trim_start_matches('[').trim_end_matches(']');
    host.parse::<std::net::IpAddr>()
        .is_ok_and(|ip| ip.is_loopback())
}

/// Refuses file-writing features on an address others can reach, and warns about it.
fn check_bind(o: &ServerOptions) -> anyhow::Result<()> {
    if is_loopback(&o.bind) {
        return Ok(());
    }
    if let Some(d) = &o.dump {
        anyhow::bail!(
            "--dump {} writes files on request of any client; it is refused with --bind {} \
             (not a loopback address): bind 127.0.0.1 to use it",
            d.display(),
            o.bind
        );
    }
    eprintln!(
        "warning: --bind {} is not a loopback address: any machine that can reach it may \
         drive this simulated instrument (there is no authentication)",
        o.bind
    );
    Ok(())
}

/// Builds the instrument, listens, prints `listening on <address>` on standard output, and
/// serves clients (see the module documentation).
pub fn run_server(o: &ServerOptions) -> anyhow::Result<()> {
    check_bind(o)?;
    if o.limits.max_clients == 0 || o.limits.idle.is_zero() || o.limits.total.is_zero() {
        anyhow::bail!("--max-clients, --idle-timeout-s and --session-limit-s must be above 0");
    }
    let scenario = match &o.scenario {
        Some(path) => Scenario::load(path)?,
        None => Scenario::from_toml(DEMO_SCENARIO)?,
    };
    let seed = o.seed.unwrap_or(scenario.simulation.seed);
    if let Some(d) = &o.dump {
        std::fs::create_dir_all(d).with_context(|| format!("creating {}", d.display()))?;
    }
    let mut inst = Instrument::new(scenario, seed, o.dump.clone())?;
    inst.misreport(o.misreport);
    if let Some(r) = &o.rcs {
        let scene = crate::pipeline::rcs_simulate::read_scene(&r.scene)?;
        inst.serve_rcs(RcsSource::new(scene, r.measurement, r.turntable.clone()))?;
        eprintln!(
            "simulated VNA: the {} measurement of the RCS scene {}",
            r.measurement.word(),
            r.scene.display()
        );
    }
    if let Some(m) = o.misreport {
        eprintln!("warning: --misreport {m:?}: the read-back of this setting lies (for tests)");
    }
    let listener = TcpListener::bind((o.bind.as_str(), o.port))
        .with_context(|| format!("listening on {}:{}", o.bind, o.port))?;
    let addr = listener.local_addr()?;
    println!("listening on {addr}");
    std::io::stdout().flush()?;
    if o.rcs.is_none() {
        eprintln!(
            "simulated VNA: {} sweeps of {} points per scan of {:?}",
            inst.sim.timeline().sweep_starts_s().len(),
            inst.scenario.sweep.points,
            inst.scenario.name
        );
    }
    serve(listener, inst, o.once, o.limits)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn toks(h: &str) -> Vec<String> {
        h.split(':').map(str::to_ascii_uppercase).collect()
    }

    #[test]
    fn headers_match_short_long_and_optional_nodes() {
        assert!(matches(&toks("SENSe:FREQuency:STARt"), FREQ_STAR));
        assert!(matches(&toks("freq:star"), FREQ_STAR));
        assert!(matches(&toks("SENS:FREQ:STAR"), FREQ_STAR));
        assert!(!matches(&toks("FREQ:STA"), FREQ_STAR));
        assert!(!matches(&toks("SENS:FREQ"), FREQ_STAR));
        assert!(matches(&toks("FORM"), FORM_DATA));
        assert!(matches(&toks("SYST:ERR:NEXT"), SYST_ERR));
        assert!(!matches(&toks("SYST:ERR:COUN"), SYST_ERR));
        assert!(matches(&toks("INITIATE:IMMEDIATE"), INIT));
    }

    #[test]
    fn frequencies_with_and_without_suffixes() {
        assert_eq!(parse_hz("8e9"), Ok(8e9));
        assert_eq!(parse_hz("8E+9"), Ok(8e9));
        assert_eq!(parse_hz("9 GHZ"), Ok(9e9));
        assert_eq!(parse_hz("9500MHZ"), Ok(9.5e9));
        assert_eq!(parse_hz("10KHZ"), Ok(10e3));
        assert_eq!(parse_hz("12HZ"), Ok(12.0));
        assert_eq!(parse_hz("1THZ"), Err(ScpiError::INVALID_SUFFIX));
        assert_eq!(parse_hz("abc"), Err(ScpiError::DATA_TYPE));
        assert_eq!(parse_hz("inf"), Err(ScpiError::DATA_TYPE));
    }

    #[test]
    fn a_full_queue_ends_with_overflow() {
        let mut i = Instrument::builtin(None).unwrap();
        for _ in 0..ERROR_QUEUE_LEN + 3 {
            i.handle_line(b"NOPE");
        }
        let v: Vec<_> = i.errors().copied().collect();
        assert_eq!(v.len(), ERROR_QUEUE_LEN);
        assert_eq!(v[0], ScpiError::UNDEFINED_HEADER);
        assert_eq!(v[ERROR_QUEUE_LEN - 1], ScpiError::QUEUE_OVERFLOW);
    }

    #[test]
    fn bandwidth_power_and_trace_are_set_read_back_and_can_be_misreported() {
        let mut i = Instrument::builtin(None).unwrap();
        let ask = |i: &mut Instrument, q: &str| {
            String::from_utf8(i.handle_line(q.as_bytes()).unwrap()).unwrap()
        };
        assert_eq!(
            ask(&mut i, "SENS:BAND?;SOUR:POW?;FUNC?"),
            "1E4;-1E1;\"S21\"\n"
        );
        i.handle_line(b"SENSe:BANDwidth:RESolution 1 KHZ;SOURce:POWer:LEVel:IMMediate:AMPLitude -20 DBM;SENS:FUNC \"S11\"");
        assert_eq!(i.errors().count(), 0);
        assert_eq!(ask(&mut i, "BAND?;SOUR:POW?;FUNC?"), "1E3;-2E1;\"S11\"\n");
        i.handle_line(b"BAND 0.5;SOUR:POW 30;FUNC \"S33\"");
        let codes: Vec<i32> = i.errors().map(|e| e.code).collect();
        assert_eq!(codes, [-222, -222, -224]);
        i.misreport(Some(Setting::Bandwidth));
        assert_eq!(ask(&mut i, "BAND?;SOUR:POW?"), "2E3;-2E1\n");
        i.misreport(Some(Setting::Function));
        assert_eq!(ask(&mut i, "FUNC?"), "\"S22\"\n");
        i.handle_line(b"*RST");
        assert_eq!(ask(&mut i, "BAND?"), "1E4\n");
    }

    #[test]
    fn bad_utf8_is_a_syntax_error() {
        let mut i = Instrument::builtin(None).unwrap();
        assert_eq!(i.handle_line(&[0xff, 0xfe]), None);
        assert_eq!(i.errors().next(), Some(&ScpiError::SYNTAX));
    }

    #[test]
    fn only_an_initiate_of_an_rcs_scan_at_a_turntable_asks_the_turntable() {
        let path = concat!(env!("CARGO_MANIFEST_DIR"), "/scenarios/rcs/range.toml");
        let scene = crate::pipeline::rcs_simulate::read_scene(std::path::Path::new(path)).unwrap();
        let m = crate::formats::rcs_record::Measurement::Target;
        let mut i = Instrument::builtin(None).unwrap();
        assert_eq!(i.turntable_to_ask("INIT"), None);
        i.serve_rcs(RcsSource::new(scene.clone(), m, Some("127.0.0.1:9".into())))
            .unwrap();
        for unit in ["INIT", ":init:imm", "INITiate:IMMediate"] {
            assert_eq!(
                i.turntable_to_ask(unit),
                Some("127.0.0.1:9".into()),
                "{unit}"
            );
        }
        for unit in ["INIT?", "*IDN?", "TRAC:DATA?", "INIT:CONT"] {
            assert_eq!(i.turntable_to_ask(unit), None, "{unit}");
        }
        // The answer given is the sweep's angle: no question goes to the (absent) turntable.
        let mut response = Response::default();
        i.handle_with_angle("INIT", &mut response, Some(Ok(0.0)));
        assert_eq!(i.errors().count(), 0);
        assert_eq!(i.current_sweep().map(|s| s.0), Some(0));
        let mut plain = Instrument::builtin(None).unwrap();
        plain.serve_rcs(RcsSource::new(scene, m, None)).unwrap();
        assert_eq!(plain.turntable_to_ask("INIT"), None);
    }
}
