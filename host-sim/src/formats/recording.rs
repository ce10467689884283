//! Scan recordings: an append-only file of checked records, and a reader that recovers
//! every intact record of a truncated or damaged file.
//!
//! # Format (version 1)
//!
//! All integers and floats are little-endian.
//!
//! ```text
//! file header   8 bytes  "SWEEPREC"
//!               2 bytes  u16 version (1)
//!               2 bytes  u16 reserved (0)
//! record        4 bytes  sync: A5 53 47 52
//!   (repeated)  4 bytes  u32 payload length L (at most 16 MiB)
//!               1 byte   kind
//!               L bytes  payload
//!               4 bytes  u32 CRC-32 (IEEE 802.3 / zlib polynomial) of length, kind and payload
//! ```
//!
//! | kind | name | payload |
//! |---|---|---|
//! | 1 | header | UTF-8 JSON: software, source, scenario (and its TOML text), seed, grid (`start_hz`, `step_hz`, `points`), `sweep_format` (`"complex-f32-le"`), pattern frequencies, bin width, encoder counts per turn |
//! | 2 | sweep | u32 index, u64 start_us, u64 end_us, u32 points K, then K × (f32 re, f32 im) |
//! | 3 | position | u64 t_us, i64 encoder counts (unwrapped), f64 angle_deg |
//! | 4 | truth | f64 angle_deg, u32 n, then n × (f64 frequency_hz, f32 re, f32 im): free-space S21 |
//! | 5 | end | u64 sweeps, u64 positions, u64 truths written: the writer finished cleanly |
//!
//! Times are microseconds from the start of the scan.
//!
//! # Flush and sync policy
//!
//! Each record is built in memory and handed to the file in one `write_all`, then
//! flushed: once [`Writer::write`] returns, the whole record is in the operating system's
//! hands, so killing the process (even with SIGKILL) at any moment loses at most the record
//! being written, and the reader recovers everything before it. That does not survive a
//! power cut, a kernel crash or a laptop that never wakes up: for that the data must reach
//! the disk. A writer made by [`Writer::create`] therefore also calls `sync_data` (fsync of
//! the data) by a [`SyncPolicy`]: by default after every 64 records or when 1 s has passed
//! since the last sync, whichever comes first, and always after the file header and at
//! [`Writer::finish`]; the directory holding a new file is synced once at creation so that
//! the file itself survives. At most the last 64 records or 1 s of data (a few hundred
//! kilobytes at most) can be lost to a power cut; nothing flushed is lost to a killed
//! process. A writer on any other `Write` ([`Writer::new`]) only flushes.
//!
//! [`Writer::set_on_written`] gives a callback the file offset and record count after
//! each flushed record (`sweepgate simulate --progress-lines` and
//! `sweepgate replay --record FILE --progress-lines` print them). `simulate`, `acquire` and
//! `replay --record` all write through [`Writer::create`].
//!
//! A reader meeting a bad record (wrong sync, impossible length, CRC mismatch, malformed
//! payload) searches forward for the next sync whose record checks
//! out, reports the skipped byte range, and goes on; at the end it says at which byte
//! offset and why it stopped. Kinds it does not know are passed through as
//! [`Record::Unknown`].

use std::fmt;
use std::io::Write;
use std::path::Path;

use num_complex::Complex32;
use serde::{Deserialize, Serialize};

use crate::model::scenario::Scenario;

/// First eight bytes of every recording.
pub const MAGIC: &[u8; 8] = b"SWEEPREC";
/// Format version written by this code.
pub const VERSION: u16 = 1;
/// Length of the file header.
pub const FILE_HEADER_LEN: usize = 12;
/// Marker at the start of every record.
pub const SYNC: [u8; 4] = [0xA5, 0x53, 0x47, 0x52];
/// Bytes of framing around a payload: sync, length, kind, CRC.
pub const FRAME_OVERHEAD: usize = 13;
/// Largest payload a record may have.
pub const MAX_PAYLOAD: usize = 16 << 20;

/// Record kind numbers.
pub mod kind {
    /// Configuration (JSON).
    pub const HEADER: u8 = 1;
    /// One sweep.
    pub const SWEEP: u8 = 2;
    /// One positioner sample.
    pub const POSITION: u8 = 3;
    /// Free-space truth at one angle.
    pub const TRUTH: u8 = 4;
    /// Clean end of the recording.
    pub const END: u8 = 5;
}

/// The frequency grid as stored in the header.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct GridInfo {
    /// First frequency, Hz.
    pub start_hz: f64,
    /// Step, Hz.
    pub step_hz: f64,
    /// Number of points.
    pub points: usize,
}

/// The configuration a recording was made with.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Header {
    /// Program and version that wrote the file.
    #[serde(default)]
    pub software: String,
    /// What produced the data: `"simulate"` or an instrument description.
    #[serde(default)]
    pub source: String,
    /// The scenario simulated, if any.
    #[serde(default)]
    pub scenario: Option<Scenario>,
    /// The scenario's TOML text as read, if any.
    #[serde(default)]
    pub scenario_toml: Option<String>,
    /// Seed of the noise and jitter.
    #[serde(default)]
    pub seed: Option<u64>,
    /// The sweep grid.
    pub grid: GridInfo,
    /// How sweep values are stored: `"complex-f32-le"`.
    pub sweep_format: String,
    /// Pattern frequencies, Hz.
    #[serde(default)]
    pub pattern_frequencies_hz: Vec<f64>,
    /// Angle bin width, degrees.
    #[serde(default)]
    pub bin_width_deg: Option<f64>,
    /// Encoder counts per turn.
    #[serde(default)]
    pub counts_per_turn: Option<u32>,
}

/// The sweep format this code writes.
pub const SWEEP_FORMAT: &str = "complex-f32-le";

/// One record.
#[derive(Debug, Clone, PartialEq)]
pub enum Record {
    /// The configuration.
    Header(Box<Header>),
    /// One sweep.
    Sweep {
        /// Sweep number from 0.
        index: u32,
        /// First point's instant, µs.
        start_us: u64,
        /// End of the sweep, µs.
        end_us: u64,
        /// S21 at each grid point.
        s21: Vec<Complex32>,
    },
    /// One positioner sample.
    Position {
        /// Timestamp, µs.
        t_us: u64,
        /// Encoder counts, unwrapped.
        counts: i64,
        /// Angle, degrees.
        angle_deg: f64,
    },
    /// Free-space S21 at one angle.
    Truth {
        /// Angle, degrees.
        angle_deg: f64,
        /// (frequency, S21) pairs.
        values: Vec<(f64, Complex32)>,
    },
    /// The writer finished; counts of what it wrote.
    End {
        /// Sweep records.
        sweeps: u64,
        /// Position records.
        positions: u64,
        /// Truth records.
        truths: u64,
    },
    /// A kind this reader does not know (kept for tools that do).
    Unknown {
        /// Kind number.
        kind: u8,
        /// Raw payload.
        payload: Vec<u8>,
    },
}

impl Record {
    /// Kind number.
    pub fn kind(&self) -> u8 {
        match self {
            Record::Header(_) => kind::HEADER,
            Record::Sweep { .. } => kind::SWEEP,
            Record::Position { .. } => kind::POSITION,
            Record::Truth { .. } => kind::TRUTH,
            Record::End { .. } => kind::END,
            Record::Unknown { kind, .. } => *kind,
        }
    }

    /// Payload bytes.
    pub fn payload(&self) -> Vec<u8> {
        let mut p = Vec::new();
        match self {
            Record::Header(h) => {
                p = serde_json::to_vec(h).unwrap_or_default();
            }
            Record::Sweep {
                index,
                start_us,
                end_us,
                s21,
            } => {
                p.reserve(24 + 8 * s21.len());
                p.extend_from_slice(&index.to_le_bytes());
                p.extend_from_slice(&start_us.to_le_bytes());
                p.extend_from_slice(&end_us.to_le_bytes());
                p.extend_from_slice(&(s21.len() as u32).to_le_bytes());
                for v in s21 {
                    p.extend_from_slice(&v.re.to_le_bytes());
                    p.extend_from_slice(&v.im.to_le_bytes());
                }
            }
            Record::Position {
                t_us,
                counts,
                angle_deg,
            } => {
                p.extend_from_slice(&t_us.to_le_bytes());
                p.extend_from_slice(&counts.to_le_bytes());
                p.extend_from_slice(&angle_deg.to_le_bytes());
            }
            Record::Truth { angle_deg, values } => {
                p.extend_from_slice(&angle_deg.to_le_bytes());
                p.extend_from_slice(&(values.len() as u32).to_le_bytes());
                for (f, v) in values {
                    p.extend_from_slice(&f.to_le_bytes());
                    p.extend_from_slice(&v.re.to_le_bytes());
                    p.extend_from_slice(&v.im.to_le_bytes());
                }
            }
            Record::End {
                sweeps,
                positions,
                truths,
            } => {
                p.extend_from_slice(&sweeps.to_le_bytes());
                p.extend_from_slice(&positions.to_le_bytes());
                p.extend_from_slice(&truths.to_le_bytes());
            }
            Record::Unknown { payload, .. } => p.extend_from_slice(payload),
        }
        p
    }

    /// The whole framed record: sync, length, kind, payload, CRC.
    pub fn frame(&self) -> Vec<u8> {
        let payload = self.payload();
        let mut out = Vec::with_capacity(FRAME_OVERHEAD + payload.len());
        out.extend_from_slice(&SYNC);
        out.extend_from_slice(&(payload.len() as u32).to_le_bytes());
        out.push(self.kind());
        out.extend_from_slice(&payload);
        let crc = crc32fast::hash(&out[4..]);
        out.extend_from_slice(&crc.to_le_bytes());
        out
    }

    /// Decodes a payload of kind `kind` (the frame already checked).
    pub fn decode(kind: u8, p: &[u8]) -> Result<Record, Fault> {
        let mut c = Cursor { p, at: 0 };
        let r = match kind {
            kind::HEADER => {
                let h: Header = serde_json::from_slice(p)
                    .map_err(|e| Fault::BadPayload(format!("header JSON: {e}")))?;
                return Ok(Record::Header(Box::new(h)));
            }
            kind::SWEEP => {
                let index = c.u32()?;
                let start_us = c.u64()?;
                let end_us = c.u64()?;
                let n = c.u32()? as usize;
                if c.left() != n.saturating_mul(8) {
                    return Err(Fault::BadPayload(format!(
                        "sweep says {n} points but holds {} bytes of values",
                        c.left()
                    )));
                }
                let mut s21 = Vec::with_capacity(n);
                for _ in 0..n {
                    s21.push(Complex32::new(c.f32()?, c.f32()?));
                }
                Record::Sweep {
                    index,
                    start_us,
                    end_us,
                    s21,
                }
            }
            kind::POSITION => Record::Position {
                t_us: c.u64()?,
                counts: c.u64()? as i64,
                angle_deg: c.f64()?,
            },
            kind::TRUTH => {
                let angle_deg = c.f64()?;
                let n = c.u32()? as usize;
                if c.left() != n.saturating_mul(16) {
                    return Err(Fault::BadPayload(format!(
                        "truth says {n} values but holds {} bytes",
                        c.left()
                    )));
                }
                let mut values = Vec::with_capacity(n);
                for _ in 0..n {
                    values.push((c.f64()?, Complex32::new(c.f32()?, c.f32()?)));
                }
                Record::Truth { angle_deg, values }
            }
            kind::END => Record::End {
                sweeps: c.u64()?,
                positions: c.u64()?,
                truths: c.u64()?,
            },
            k => {
                return Ok(Record::Unknown {
                    kind: k,
                    payload: p.to_vec(),
                })
            }
        };
        if c.left() != 0 {
            return Err(Fault::BadPayload(format!(
                "{} bytes left over after a kind {kind} record",
                c.left()
            )));
        }
        Ok(r)
    }
}

struct Cursor<'a> {
    p: &'a [u8],
    at: usize,
}

impl Cursor<'_> {
    fn left(&self) -> usize {
        self.p.len() - self.at
    }
    fn take<const N: usize>(&mut self) -> Result<[u8; N], Fault> {
        let b = self
            .p
            .get(self.at..self.at + N)
            .ok_or_else(|| Fault::BadPayload("payload too short for its kind".into()))?;
        self.at += N;
        let mut a = [0u8; N];
        a.copy_from_slice(b);
        Ok(a)
    }
    fn u32(&mut self) -> Result<u32, Fault> {
        self.take().map(u32::from_le_bytes)
    }
    fn u64(&mut self) -> Result<u64, Fault> {
        self.take().map(u64::from_le_bytes)
    }
    fn f32(&mut self) -> Result<f32, Fault> {
        self.take().map(f32::from_le_bytes)
    }
    fn f64(&mut self) -> Result<f64, Fault> {
        self.take().map(f64::from_le_bytes)
    }
}

/// Why a record could not be read.
#[derive(Debug, Clone, PartialEq)]
pub enum Fault {
    /// The file ends inside this record: it needs `needed` bytes, `have` remain.
    Truncated {
        /// Bytes the record needs (at least).
        needed: usize,
        /// Bytes left in the file.
        have: usize,
    },
    /// The record does not start with the sync marker.
    BadSync,
    /// The length field is beyond [`MAX_PAYLOAD`].
    TooLong(u32),
    /// The CRC does not match the bytes.
    BadCrc {
        /// CRC stored in the file.
        stored: u32,
        /// CRC of the bytes read.
        computed: u32,
    },
    /// The frame checks out but the payload does not fit its kind.
    BadPayload(String),
}

impl fmt::Display for Fault {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Fault::Truncated { needed, have } => write!(
                f,
                "the file ends inside a record ({have} of at least {needed} bytes present)"
            ),
            Fault::BadSync => write!(f, "no record marker where a record should start"),
            Fault::TooLong(n) => write!(f, "record length {n} is beyond the limit"),
            Fault::BadCrc { stored, computed } => write!(
                f,
                "CRC mismatch (stored {stored:08x}, computed {computed:08x}): damaged bytes"
            ),
            Fault::BadPayload(s) => write!(f, "malformed record: {s}"),
        }
    }
}

impl std::error::Error for Fault {}

/// A stretch of bytes the reader skipped over.
#[derive(Debug, Clone, PartialEq)]
pub struct Damage {
    /// Byte offset where the bad record started.
    pub offset: u64,
    /// Bytes skipped until the next good record.
    pub skipped: u64,
    /// What was wrong.
    pub fault: Fault,
}

/// Why the reader stopped.
#[derive(Debug, Clone, PartialEq)]
pub enum Stop {
    /// The last record was an end record and the file ends right after it.
    Complete,
    /// The file ends at a record boundary without an end record (the writer was stopped).
    EndOfData,
    /// From this offset on nothing could be read (a cut-off or damaged last record).
    Fault(Fault),
    /// The file header is missing or wrong.
    BadFileHeader(String),
}

/// Everything recovered from a recording.
#[derive(Debug, Clone, PartialEq)]
pub struct Recovered {
    /// Format version from the file header (0 when it could not be read).
    pub version: u16,
    /// Each intact record with its byte offset.
    pub records: Vec<(u64, Record)>,
    /// Damaged stretches skipped over in the middle.
    pub damage: Vec<Damage>,
    /// Byte offset where reading stopped (the end of the last intact record, or where the
    /// unreadable tail starts).
    pub stop_offset: u64,
    /// Why it stopped.
    pub stop: Stop,
}

impl Recovered {
    /// A one-line description of where and why reading stopped.
    pub fn describe_stop(&self) -> String {
        match &self.stop {
            Stop::Complete => format!("complete, {} bytes", self.stop_offset),
            Stop::EndOfData => format!(
                "ends at byte {} on a record boundary without an end record (recording was cut short)",
                self.stop_offset
            ),
            Stop::Fault(f) => format!("stopped at byte {}: {f}", self.stop_offset),
            Stop::BadFileHeader(s) => format!("not a recording: {s}"),
        }
    }

    /// The header record, if one was recovered.
    pub fn header(&self) -> Option<&Header> {
        self.records.iter().find_map(|(_, r)| match r {
            Record::Header(h) => Some(h.as_ref()),
            _ => None,
        })
    }
}

/// Tries to read one record at `at`; on success returns it and the offset after it.
pub fn read_record(bytes: &[u8], at: usize) -> Result<(Record, usize), Fault> {
    let have = bytes.len().saturating_sub(at);
    let rest = bytes.get(at..).unwrap_or(&[]);
    let head = rest.get(..9).ok_or(Fault::Truncated { needed: 9, have })?;
    if head[..4] != SYNC {
        return Err(Fault::BadSync);
    }
    let len = u32::from_le_bytes([head[4], head[5], head[6], head[7]]);
    if len as usize > MAX_PAYLOAD {
        return Err(Fault::TooLong(len));
    }
    let total = FRAME_OVERHEAD + len as usize;
    let frame = rest.get(..total).ok_or(Fault::Truncated {
        needed: total,
        have,
    })?;
    let body = &frame[4..total - 4];
    let t = &frame[total - 4..];
    let stored = u32::from_le_bytes([t[0], t[1], t[2], t[3]]);
    let computed = crc32fast::hash(body);
    if stored != computed {
        return Err(Fault::BadCrc { stored, computed });
    }
    let rec = Record::decode(body[4], &body[5..])?;
    Ok((rec, at + total))
}

/// Reads every intact record of a recording held in memory.
pub fn recover(bytes: &[u8]) -> Recovered {
    let mut out = Recovered {
        version: 0,
        records: Vec::new(),
        damage: Vec::new(),
        stop_offset: 0,
        stop: Stop::EndOfData,
    };
    if bytes.len() < FILE_HEADER_LEN || &bytes[..8] != MAGIC {
        out.stop = Stop::BadFileHeader(if bytes.len() < FILE_HEADER_LEN {
            format!("only {} bytes, shorter than the file header", bytes.len())
        } else {
            "the file does not start with SWEEPREC".into()
        });
        return out;
    }
    out.version = u16::from_le_bytes([bytes[8], bytes[9]]);
    if out.version != VERSION {
        out.stop = Stop::BadFileHeader(format!(
            "format version {} (this reader knows {VERSION})",
            out.version
        ));
        return out;
    }
    let mut at = FILE_HEADER_LEN;
    loop {
        if at == bytes.len() {
            out.stop_offset = at as u64;
            out.stop = match out.records.last() {
                Some((_, Record::End { .. })) => Stop::Complete,
                _ => Stop::EndOfData,
            };
            return out;
        }
        match read_record(bytes, at) {
            Ok((rec, next)) => {
                out.records.push((at as u64, rec));
                at = next;
            }
            Err(fault) => match resync(bytes, at + 1) {
                Some(next) => {
                    out.damage.push(Damage {
                        offset: at as u64,
                        skipped: (next - at) as u64,
                        fault,
                    });
                    at = next;
                }
                None => {
                    out.stop_offset = at as u64;
                    out.stop = Stop::Fault(fault);
                    return out;
                }
            },
        }
    }
}

/// The first offset at or after `from` where a whole, checked record starts.
fn resync(bytes: &[u8], from: usize) -> Option<usize> {
    let mut at = from;
    while at + FRAME_OVERHEAD <= bytes.len() {
        let rest = &bytes[at..];
        match rest.windows(4).position(|w| w == SYNC) {
            None => return None,
            Some(i) => {
                let cand = at + i;
                if read_record(bytes, cand).is_ok() {
                    return Some(cand);
                }
                at = cand + 1;
            }
        }
    }
    None
}

/// Reads a recording file and recovers what it can.
pub fn recover_file(path: &Path) -> std::io::Result<Recovered> {
    Ok(recover(&std::fs::read(path)?))
}

/// When a [`Writer`] made by [`Writer::create`] syncs its data to the disk.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SyncPolicy {
    /// Sync after this many records since the last sync (0: never by count).
    pub every_records: u32,
    /// Sync when this many seconds have passed since the last sync, checked after each
    /// record (0 or less: never by time).
    pub every_s: f64,
}

impl Default for SyncPolicy {
    /// Every 64 records or 1 s, whichever comes first.
    fn default() -> Self {
        Self {
            every_records: 64,
            every_s: 1.0,
        }
    }
}

type SyncFn<W> = fn(&mut W) -> std::io::Result<()>;

/// Writes a recording: the file header at creation, then one record per call, each in a
/// single write followed by a flush (and, for [`Writer::create`], a sync by its
/// [`SyncPolicy`]; see the module docs).
///
/// ```
/// use sweepgate_host::formats::recording::{recover, Record, Stop, Writer};
/// let mut w = Writer::new(Vec::new()).unwrap();
/// w.write(&Record::Position { t_us: 1_000, counts: 250, angle_deg: 2.5 }).unwrap();
/// let (bytes, len) = w.finish().unwrap();
/// assert_eq!(bytes.len() as u64, len);
/// // Cut the end record in half: the position record is still recovered.
/// let r = recover(&bytes[..bytes.len() - 10]);
/// assert_eq!(r.records.len(), 1);
/// assert!(matches!(r.stop, Stop::Fault(_)));
/// println!("{}", r.describe_stop());
/// ```
pub struct Writer<W: Write> {
    out: W,
    offset: u64,
    records: u64,
    sweeps: u64,
    positions: u64,
    truths: u64,
    sync: Option<(SyncPolicy, SyncFn<W>)>,
    since_sync: u32,
    last_sync: std::time::Instant,
    syncs: u64,
    on_written: Option<Box<dyn FnMut(u64, u64)>>,
}

impl<W: Write> fmt::Debug for Writer<W> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("Writer")
            .field("offset", &self.offset)
            .field("records", &self.records)
            .field("sync", &self.sync.as_ref().map(|s| s.0))
            .field("syncs", &self.syncs)
            .finish_non_exhaustive()
    }
}

impl Writer<std::fs::File> {
    /// Creates (or truncates) the file at `path` and starts a recording on it that syncs
    /// its data by `policy` (and syncs the directory holding it once).
    pub fn create(path: &Path, policy: SyncPolicy) -> std::io::Result<Self> {
        let file = std::fs::File::create(path)?;
        let mut w = Self::new(file)?;
        w.sync = Some((policy, |f| f.sync_data()));
        w.sync_now()?;
        // The new directory entry must reach the disk too (POSIX: fsync the directory).
        #[cfg(unix)]
        {
            let dir = match path.parent() {
                Some(p) if !p.as_os_str().is_empty() => p,
                _ => Path::new("."),
            };
            if let Ok(d) = std::fs::File::open(dir) {
                d.sync_all().ok();
            }
        }
        Ok(w)
    }
}

impl<W: Write> Writer<W> {
    /// Starts a recording on `out` (writes the file header); flushes, never syncs.
    pub fn new(mut out: W) -> std::io::Result<Self> {
        let mut h = Vec::with_capacity(FILE_HEADER_LEN);
        h.extend_from_slice(MAGIC);
        h.extend_from_slice(&VERSION.to_le_bytes());
        h.extend_from_slice(&0u16.to_le_bytes());
        out.write_all(&h)?;
        out.flush()?;
        Ok(Self {
            out,
            offset: FILE_HEADER_LEN as u64,
            records: 0,
            sweeps: 0,
            positions: 0,
            truths: 0,
            sync: None,
            since_sync: 0,
            last_sync: std::time::Instant::now(),
            syncs: 0,
            on_written: None,
        })
    }

    /// Calls `f(offset, records)` after each record is flushed (and synced when due):
    /// `offset` is the end of the record in the file, `records` how many were written.
    pub fn set_on_written(&mut self, f: impl FnMut(u64, u64) + 'static) {
        self.on_written = Some(Box::new(f));
    }

    fn sync_now(&mut self) -> std::io::Result<()> {
        if let Some((_, f)) = &self.sync {
            f(&mut self.out)?;
            self.syncs += 1;
        }
        self.since_sync = 0;
        self.last_sync = std::time::Instant::now();
        Ok(())
    }

    /// Appends one record; returns the offset it starts at.
    pub fn write(&mut self, rec: &Record) -> std::io::Result<u64> {
        let frame = rec.frame();
        if frame.len() - FRAME_OVERHEAD > MAX_PAYLOAD {
            return Err(std::io::Error::new(
                std::io::ErrorKind::InvalidInput,
                "record payload beyond the 16 MiB limit",
            ));
        }
        self.out.write_all(&frame)?;
        self.out.flush()?;
        let at = self.offset;
        self.offset += frame.len() as u64;
        self.records += 1;
        match rec {
            Record::Sweep { .. } => self.sweeps += 1,
            Record::Position { .. } => self.positions += 1,
            Record::Truth { .. } => self.truths += 1,
            _ => {}
        }
        self.since_sync = self.since_sync.saturating_add(1);
        if let Some((p, _)) = self.sync {
            let by_count = p.every_records > 0 && self.since_sync >= p.every_records;
            let by_time = p.every_s > 0.0 && self.last_sync.elapsed().as_secs_f64() >= p.every_s;
            if by_count || by_time || matches!(rec, Record::End { .. }) {
                self.sync_now()?;
            }
        }
        if let Some(f) = &mut self.on_written {
            f(self.offset, self.records);
        }
        Ok(at)
    }

    /// Writes the end record (and syncs, for [`Writer::create`]); returns the output and
    /// the total bytes written.
    pub fn finish(mut self) -> std::io::Result<(W, u64)> {
        let end = Record::End {
            sweeps: self.sweeps,
            positions: self.positions,
            truths: self.truths,
        };
        self.write(&end)?;
        Ok((self.out, self.offset))
    }

    /// Bytes written so far.
    pub fn offset(&self) -> u64 {
        self.offset
    }

    /// Records written so far (all kinds).
    pub fn records(&self) -> u64 {
        self.records
    }

    /// Times the data was synced to the disk so far (0 for [`Writer::new`]).
    pub fn syncs(&self) -> u64 {
        self.syncs
    }

    /// (sweeps, positions, truths) written so far.
    pub fn counts(&self) -> (u64, u64, u64) {
        (self.sweeps, self.positions, self.truths)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn crc_is_the_ieee_crc32() {
        // CRC-32 check value of "123456789" is cbf43926 (Catalogue of parametrised CRC
        // algorithms, CRC-32/ISO-HDLC).
        assert_eq!(crc32fast::hash(b"123456789"), 0xCBF4_3926);
    }

    #[test]
    fn records_round_trip() {
        let recs = vec![
            Record::Sweep {
                index: 3,
                start_us: 10,
                end_us: 20,
                s21: vec![Complex32::new(1.5, -2.0), Complex32::new(0.0, 3.25)],
            },
            Record::Position {
                t_us: 7,
                counts: -12,
                angle_deg: -0.12,
            },
            Record::Truth {
                angle_deg: 1.5,
                values: vec![(1e9, Complex32::new(0.5, 0.25))],
            },
            Record::Unknown {
                kind: 99,
                payload: vec![1, 2, 3],
            },
        ];
        let mut w = Writer::new(Vec::new()).unwrap();
        for r in &recs {
            w.write(r).unwrap();
        }
        let (bytes, _) = w.finish().unwrap();
        let got = recover(&bytes);
        assert_eq!(got.stop, Stop::Complete);
        assert_eq!(got.records.len(), 5);
        for (r, (_, g)) in recs.iter().zip(&got.records) {
            assert_eq!(r, g);
        }
        assert_eq!(
            got.records[4].1,
            Record::End {
                sweeps: 1,
                positions: 1,
                truths: 1
            }
        );
    }

    #[test]
    fn wrong_magic_or_version_is_named() {
        let r = recover(b"NOTARECORDING");
        assert!(matches!(r.stop, Stop::BadFileHeader(_)));
        let (mut b, _) = Writer::new(Vec::new()).unwrap().finish().unwrap();
        b[8] = 9;
        let r = recover(&b);
        assert!(matches!(r.stop, Stop::BadFileHeader(ref s) if s.contains("version 9")));
    }

    #[test]
    fn create_syncs_by_count_and_at_the_end() {
        let dir = std::env::temp_dir().join(format!("sweepgate-sync-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let path = dir.join("sync.rec");
        let policy = SyncPolicy {
            every_records: 3,
            every_s: 0.0,
        };
        let mut w = Writer::create(&path, policy).unwrap();
        assert_eq!(w.syncs(), 1); // after the file header
        let seen = std::rc::Rc::new(std::cell::RefCell::new(Vec::new()));
        let s2 = seen.clone();
        w.set_on_written(move |off, n| s2.borrow_mut().push((off, n)));
        for i in 0..7 {
            w.write(&Record::Position {
                t_us: i,
                counts: 0,
                angle_deg: 0.0,
            })
            .unwrap();
        }
        assert_eq!(w.syncs(), 1 + 2); // after records 3 and 6
        let (_, len) = w.finish().unwrap();
        let seen = seen.borrow();
        assert_eq!(seen.len(), 8);
        assert_eq!(seen.last(), Some(&(len, 8)));
        assert_eq!(std::fs::metadata(&path).unwrap().len(), len);
        assert_eq!(recover_file(&path).unwrap().stop, Stop::Complete);
        std::fs::remove_dir_all(&dir).ok();
    }
}
