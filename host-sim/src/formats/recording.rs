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
//! | 6 | header copy | the header record's payload again (see below) |
//! | 7 | acquisition report | UTF-8 JSON written by `acquire` before its end record: the counts of what it met (dropped sweeps, answers out of step, link faults, positioner lines refused, the positioner clock fit) and `stopped_by`, the reason when a fault ended the scan; readers pass it through as an unknown kind |
//! | 8 | traces and axes | a scan of several traces or axes (`formats::traces`): a sub-kind byte, then 0 = names (UTF-8 JSON `{"traces": [...], "axes": [...]}`), 1 = the further traces of sweep `index` (u32 index, u8 t, then t × (u32 K, K × (f32 re, f32 im))), 2 = the further axes of the position sample at `t_us` (u64 t_us, u8 n, n × f64 angle_deg); kinds 2 and 3 keep the first trace and the first axis, so readers that predate kind 8 read those (every cut as one long scan of the first axis) and pass these through as an unknown kind |
//! | 9 | RCS measurement | UTF-8 JSON (`formats::rcs_record`): which measurement of an RCS scan the recording holds (`target`, `background`, `reference`, `reference_background`) and the scene it came from, and in a copy of a target recording written by `rcs --calibrated-recording` the calibration `replay` shows it in dBsm with (the gate, bin width, pattern frequencies, calibration factors and the background per angle); each sweep's angle comes from the position records; readers that predate kind 9 pass it through as an unknown kind |
//!
//! Times are microseconds from the start of the scan.
//!
//! # Header copies
//!
//! The header record holds the grid, without which no sweep can be read. So that a damaged
//! header record does not lose the whole scan, [`Writer`] repeats it as a header copy
//! (kind 6, same payload) once at least [`HEADER_COPY_EVERY_BYTES`] (1 MiB) were written
//! since the header or the last copy, and once more just before the end record: a few
//! kilobytes per megabyte at most. Readers use the first intact header record, else the first
//! intact copy ([`Recovered::header`], [`Recovered::header_origin`]). Files written before
//! copies existed simply have none and read as before; readers that predate kind 6 pass
//! copies through as an unknown kind and skip them. When neither survived,
//! [`recover_with_grid`] rebuilds a header from a grid the caller knows and checks it
//! against the point count of every sweep record.
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
//! # Reading damaged files
//!
//! A reader meeting a bad record (wrong sync, impossible length, CRC mismatch) searches
//! forward for the next sync whose frame checks out (length inside the file, CRC),
//! reports the skipped byte range, and goes on; at the end it says at which byte offset and
//! why it stopped. A frame whose CRC checks but whose payload does not fit its kind is
//! reported as damage covering exactly that frame and reading goes on right after it (a
//! chance CRC match is one in 2³²; records are never looked for inside a checked frame).
//! Kinds it does not know are passed through as [`Record::Unknown`].
//!
//! The search takes time linear in the file size, whatever the bytes: markers are searched
//! for once, front to back, and a candidate's claimed length is checked without rereading
//! its bytes. Short claims are hashed directly; once the long claims hashed directly add up
//! to the file's size (a file crafted with many markers claiming megabytes), the reader
//! makes one pass that keeps the CRC register at every 64th byte and then checks each
//! claim in constant time from the registers at its two ends (CRC-32 is linear over
//! GF(2); see `formats/crc_span.rs`).
//!
//! [`recover_file`] refuses files over [`MAX_FILE_BYTES`] (1 GiB) before reading them,
//! and folders, with a one-line error naming the file.

use std::fmt;
use std::io::Write;
use std::path::Path;

use num_complex::Complex32;
use serde::{Deserialize, Serialize};

use crate::formats::crc_span::{self, CrcSpans};
use crate::formats::files::{read_capped, FileError};
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
/// Largest recording [`recover_file`] reads (1 GiB); larger files are refused unread.
pub const MAX_FILE_BYTES: u64 = 1 << 30;
/// [`Writer`] writes a header copy after the record that makes this many bytes since the
/// header or the last copy (and once before the end record).
pub const HEADER_COPY_EVERY_BYTES: u64 = 1 << 20;

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
    /// The header record again, for readers whose header record is damaged.
    pub const HEADER_COPY: u8 = 6;
    /// `acquire`'s report (JSON, read as [`super::Record::Unknown`]): what it met, why it
    /// stopped.
    pub const ACQUIRE_REPORT: u8 = 7;
    /// Further traces and axes of a scan of cuts (`formats::traces`, read as
    /// [`super::Record::Unknown`] here).
    pub const TRACES_AXES: u8 = 8;
    /// What an RCS measurement is (`formats::rcs_record`, read as
    /// [`super::Record::Unknown`] here).
    pub const RCS: u8 = 9;
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
    /// A copy of the header record, written by [`Writer`] now and then and before the end.
    HeaderCopy(Box<Header>),
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
            Record::HeaderCopy(_) => kind::HEADER_COPY,
            Record::Unknown { kind, .. } => *kind,
        }
    }

    /// Payload bytes.
    pub fn payload(&self) -> Vec<u8> {
        let mut p = Vec::new();
        match self {
            Record::Header(h) | Record::HeaderCopy(h) => {
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
            kind::HEADER | kind::HEADER_COPY => {
                let h: Header = serde_json::from_slice(p)
                    .map_err(|e| Fault::BadPayload(format!("header JSON: {e}")))?;
                return Ok(if kind == kind::HEADER {
                    Record::Header(Box::new(h))
                } else {
                    Record::HeaderCopy(Box::new(h))
                });
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
    /// A header rebuilt by [`recover_with_grid`] when no header record or copy survived.
    pub supplied_header: Option<Box<Header>>,
}

/// Where [`Recovered::header`] comes from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum HeaderOrigin {
    /// The header record at this offset.
    Record(u64),
    /// A header copy at this offset (no header record was intact).
    Copy(u64),
    /// Rebuilt from a grid the caller gave and the sweep records ([`recover_with_grid`]).
    Supplied,
}

impl fmt::Display for HeaderOrigin {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            HeaderOrigin::Record(at) => write!(f, "the header record at byte {at}"),
            HeaderOrigin::Copy(at) => write!(
                f,
                "the header copy at byte {at} (the header record is damaged or missing)"
            ),
            HeaderOrigin::Supplied => write!(
                f,
                "rebuilt from the grid given and the sweep records (no header record or copy is intact)"
            ),
        }
    }
}

impl Recovered {
    fn empty() -> Self {
        Self {
            version: 0,
            records: Vec::new(),
            damage: Vec::new(),
            stop_offset: 0,
            stop: Stop::EndOfData,
            supplied_header: None,
        }
    }

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

    /// The header: the first intact header record, else the first intact header copy, else
    /// the one [`recover_with_grid`] rebuilt.
    pub fn header(&self) -> Option<&Header> {
        let record = self.records.iter().find_map(|(_, r)| match r {
            Record::Header(h) => Some(h.as_ref()),
            _ => None,
        });
        let copy = || {
            self.records.iter().find_map(|(_, r)| match r {
                Record::HeaderCopy(h) => Some(h.as_ref()),
                _ => None,
            })
        };
        record.or_else(copy).or(self.supplied_header.as_deref())
    }

    /// Where [`Recovered::header`] comes from (`None` when there is no header).
    pub fn header_origin(&self) -> Option<HeaderOrigin> {
        let find = |k: u8| {
            self.records
                .iter()
                .find(|(_, r)| r.kind() == k)
                .map(|(at, _)| *at)
        };
        find(kind::HEADER)
            .map(HeaderOrigin::Record)
            .or_else(|| find(kind::HEADER_COPY).map(HeaderOrigin::Copy))
            .or(self
                .supplied_header
                .as_ref()
                .map(|_| HeaderOrigin::Supplied))
    }
}

/// A frame whose marker, length and CRC check out.
struct Frame<'a> {
    kind: u8,
    payload: &'a [u8],
    /// Offset just after the frame.
    end: usize,
}

/// CRCs of claimed frames: hashed directly while the bytes hashed that way stay within
/// one pass over the file (and always for short frames), from a [`CrcSpans`] index after
/// that, so that no byte is hashed more than a bounded number of times.
struct Checker<'a> {
    bytes: &'a [u8],
    spans: Option<CrcSpans>,
    direct_left: usize,
    window: Window,
}

/// Record markers searched a window at a time once the index exists: every candidate
/// starting in `from..to` was checked, `found` holds those whose frame checks (ascending).
/// Candidates are checked in the order of their claimed ends (to 4 KiB, a counting sort),
/// so that the index and the stored CRCs are read front to back instead of at random places
/// up to 16 MiB apart.
#[derive(Default)]
struct Window {
    from: usize,
    to: usize,
    found: Vec<usize>,
    /// The window's candidates as found, [`Claim`]s.
    claims: Vec<Claim>,
    /// The same, grouped by end.
    by_end: Vec<Claim>,
    /// Claims per 4 KiB of end, then where each group starts in `by_end`.
    counts: Vec<usize>,
}

/// A candidate: its start, where its CRC'd bytes end (its CRC sits there), and the CRC
/// register after the bytes before them (taken while the window is scanned front to back).
#[derive(Debug, Clone, Copy, Default)]
struct Claim {
    start: usize,
    end: usize,
    register: u32,
}

/// Starts of candidates per window (small in unit tests, so that their soups of markers
/// cross many windows).
#[cfg(not(test))]
const WINDOW: usize = 1 << 20;
#[cfg(test)]
const WINDOW: usize = 4 << 10;

impl Window {
    /// Orders `claims` into `by_end` by their end's 4 KiB block.
    fn group_by_end(&mut self, from: usize) {
        let block = |c: &Claim| (c.end - from) >> 12;
        let blocks = self.claims.iter().map(|c| block(c) + 1).max().unwrap_or(0);
        self.counts.clear();
        self.counts.resize(blocks + 1, 0);
        for c in &self.claims {
            self.counts[block(c) + 1] += 1;
        }
        for i in 1..self.counts.len() {
            self.counts[i] += self.counts[i - 1];
        }
        self.by_end.clear();
        self.by_end.resize(self.claims.len(), Claim::default());
        for c in &self.claims {
            let slot = &mut self.counts[block(c)];
            self.by_end[*slot] = *c;
            *slot += 1;
        }
    }

    /// Finds and checks every candidate starting in `from..to`.
    fn fill(&mut self, bytes: &[u8], spans: &CrcSpans, from: usize, to: usize) {
        self.claims.clear();
        self.found.clear();
        let (mut at, mut pos, mut reg) = (from, from, spans.register(bytes, from));
        while let Some(c) = find_sync(bytes, at).filter(|&c| c < to) {
            if let Some(end) = claimed_end(bytes, c) {
                reg = crc_span::feed(reg, &bytes[pos..c + 4]);
                pos = c + 4;
                self.claims.push(Claim {
                    start: c,
                    end,
                    register: reg,
                });
            }
            at = c + 1;
        }
        self.group_by_end(from);
        for c in &self.by_end {
            let t = &bytes[c.end..c.end + 4];
            let sb = spans.register(bytes, c.end);
            let crc = crc_span::crc_between(c.register, sb, c.end - (c.start + 4));
            if crc == u32::from_le_bytes([t[0], t[1], t[2], t[3]]) {
                self.found.push(c.start);
            }
        }
        self.found.sort_unstable();
        (self.from, self.to) = (from, to);
    }
}

/// Where the CRC'd bytes of a frame claimed at `c` end, if its length is within
/// [`MAX_PAYLOAD`] and the frame inside the file (its CRC then sits at that offset).
fn claimed_end(bytes: &[u8], c: usize) -> Option<usize> {
    let l = bytes.get(c + 4..c + 8)?;
    let len = u32::from_le_bytes([l[0], l[1], l[2], l[3]]) as usize;
    (len <= MAX_PAYLOAD && c + FRAME_OVERHEAD + len <= bytes.len()).then_some(c + 9 + len)
}

impl<'a> Checker<'a> {
    fn new(bytes: &'a [u8]) -> Self {
        Self {
            bytes,
            spans: None,
            direct_left: bytes.len(),
            window: Window::default(),
        }
    }

    /// Hashed directly: never more than this many bytes per frame once the budget is
    /// spent (cheaper than the two register look-ups of the index).
    const SHORT: usize = 2 * crc_span::STEP;

    fn crc(&mut self, a: usize, b: usize) -> u32 {
        let n = b - a;
        if let Some(s) = &self.spans {
            if n > Self::SHORT {
                return s.crc(self.bytes, a, b);
            }
        } else if n <= Self::SHORT || n <= self.direct_left {
            if n > Self::SHORT {
                self.direct_left -= n;
            }
        } else {
            return self
                .spans
                .insert(CrcSpans::new(self.bytes))
                .crc(self.bytes, a, b);
        }
        crc32fast::hash(&self.bytes[a..b])
    }

    /// Checks the frame at `at`: marker, length within [`MAX_PAYLOAD`] and inside the
    /// file, CRC.
    fn frame(&mut self, at: usize) -> Result<Frame<'a>, Fault> {
        let bytes = self.bytes;
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
        if total > have {
            return Err(Fault::Truncated {
                needed: total,
                have,
            });
        }
        let t = &rest[total - 4..total];
        let stored = u32::from_le_bytes([t[0], t[1], t[2], t[3]]);
        let computed = self.crc(at + 4, at + total - 4);
        if stored != computed {
            return Err(Fault::BadCrc { stored, computed });
        }
        Ok(Frame {
            kind: head[8],
            payload: &rest[9..total - 4],
            end: at + total,
        })
    }

    /// The first offset at or after `from` where a frame checks out: candidate by
    /// candidate while frames are hashed directly, by windows once the index exists.
    fn next_frame(&mut self, from: usize) -> Option<usize> {
        let mut at = from;
        while self.spans.is_none() {
            let c = find_sync(self.bytes, at)?;
            if self.frame(c).is_ok() {
                return Some(c);
            }
            at = c + 1;
        }
        self.next_frame_by_windows(at)
    }

    fn next_frame_by_windows(&mut self, mut from: usize) -> Option<usize> {
        let Self {
            bytes,
            spans,
            window: w,
            ..
        } = self;
        let spans = spans.as_ref()?;
        loop {
            if (w.from..w.to).contains(&from) {
                let i = w.found.partition_point(|&c| c < from);
                if let Some(&c) = w.found.get(i) {
                    return Some(c);
                }
                from = w.to;
            }
            if from >= bytes.len() {
                return None;
            }
            w.fill(bytes, spans, from, (from + WINDOW).min(bytes.len()));
        }
    }
}

/// The first record marker at or after `from`.
fn find_sync(bytes: &[u8], from: usize) -> Option<usize> {
    let last = bytes.len().checked_sub(SYNC.len())?;
    let mut at = from;
    while at <= last {
        let c = at + bytes[at..=last].iter().position(|&b| b == SYNC[0])?;
        if bytes[c..c + SYNC.len()] == SYNC {
            return Some(c);
        }
        at = c + 1;
    }
    None
}

/// Tries to read one record at `at`; on success returns it and the offset after it.
pub fn read_record(bytes: &[u8], at: usize) -> Result<(Record, usize), Fault> {
    let f = Checker::new(bytes).frame(at)?;
    Ok((Record::decode(f.kind, f.payload)?, f.end))
}

/// Checks the file header; returns the version or why the bytes are not a recording.
fn file_header(bytes: &[u8]) -> Result<u16, Stop> {
    if bytes.len() < FILE_HEADER_LEN {
        return Err(Stop::BadFileHeader(format!(
            "only {} bytes, shorter than the file header",
            bytes.len()
        )));
    }
    if &bytes[..8] != MAGIC {
        return Err(Stop::BadFileHeader(
            "the file does not start with SWEEPREC".into(),
        ));
    }
    let version = u16::from_le_bytes([bytes[8], bytes[9]]);
    if version != VERSION {
        return Err(Stop::BadFileHeader(format!(
            "format version {version} (this reader knows {VERSION})"
        )));
    }
    Ok(version)
}

/// Reads every intact record of a recording held in memory, in time linear in its size
/// (see the module docs).
pub fn recover(bytes: &[u8]) -> Recovered {
    let mut out = Recovered::empty();
    match file_header(bytes) {
        Ok(v) => out.version = v,
        Err(stop) => {
            out.stop = stop;
            return out;
        }
    }
    let mut check = Checker::new(bytes);
    let mut at = FILE_HEADER_LEN;
    while at < bytes.len() {
        match check.frame(at) {
            Ok(frame) => {
                match Record::decode(frame.kind, frame.payload) {
                    Ok(rec) => out.records.push((at as u64, rec)),
                    Err(fault) => out.damage.push(Damage {
                        offset: at as u64,
                        skipped: (frame.end - at) as u64,
                        fault,
                    }),
                }
                at = frame.end;
            }
            Err(fault) => match check.next_frame(at + 1) {
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
    out.stop_offset = at as u64;
    out.stop = match out.records.last() {
        Some((_, Record::End { .. })) => Stop::Complete,
        _ => Stop::EndOfData,
    };
    out
}

/// Why a grid given by the caller cannot stand in for a recording's header.
#[derive(Debug, Clone, PartialEq)]
pub enum GridMismatch {
    /// The grid itself is not usable.
    Unusable(sweepgate::error::GridError),
    /// The recording's own header (or its copy) says otherwise.
    HeaderDiffers {
        /// The grid in the recording.
        header: GridInfo,
        /// The grid given.
        given: GridInfo,
    },
    /// A sweep record holds another number of points.
    SweepPoints {
        /// Offset of the first such sweep record.
        offset: u64,
        /// Its points.
        points: usize,
        /// Points of the grid given.
        given: usize,
    },
}

impl fmt::Display for GridMismatch {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let g = |g: &GridInfo| {
            format!(
                "start {} Hz, step {} Hz, {} points",
                g.start_hz, g.step_hz, g.points
            )
        };
        match self {
            GridMismatch::Unusable(e) => write!(f, "the grid given is not usable: {e}"),
            GridMismatch::HeaderDiffers { header, given } => write!(
                f,
                "the recording's header has a grid ({}) other than the one given ({})",
                g(header),
                g(given)
            ),
            GridMismatch::SweepPoints {
                offset,
                points,
                given,
            } => write!(
                f,
                "the sweep record at byte {offset} holds {points} points, the grid given {given}"
            ),
        }
    }
}

impl std::error::Error for GridMismatch {
    fn source(&self) -> Option<&(dyn std::error::Error + 'static)> {
        match self {
            GridMismatch::Unusable(e) => Some(e),
            _ => None,
        }
    }
}

/// Same grid within a millionth of a step (start) and a billionth (step).
fn same_grid(a: &GridInfo, b: &GridInfo) -> bool {
    a.points == b.points
        && (a.start_hz - b.start_hz).abs() <= 1e-6 * b.step_hz
        && (a.step_hz - b.step_hz).abs() <= 1e-9 * b.step_hz
}

/// Like [`recover`], for a recording whose header record and copies may all be lost: when
/// none is intact, a header is rebuilt from `grid` (the sweep format is the one this code
/// writes; no scenario, pattern frequencies or bins) and every sweep record must hold
/// `grid.points` values. When a header is intact, `grid` must agree with it.
///
/// ```
/// use sweepgate_host::formats::recording::*;
/// let grid = GridInfo { start_hz: 8e9, step_hz: 10e6, points: 3 };
/// let mut w = Writer::new(Vec::new()).unwrap();
/// let s21 = vec![num_complex::Complex32::new(1.0, 0.0); 3];
/// w.write(&Record::Sweep { index: 0, start_us: 0, end_us: 10, s21 }).unwrap();
/// let (bytes, _) = w.finish().unwrap();
/// assert!(recover(&bytes).header().is_none());
/// let r = recover_with_grid(&bytes, grid).unwrap();
/// assert_eq!(r.header().unwrap().grid, grid);
/// assert_eq!(r.header_origin(), Some(HeaderOrigin::Supplied));
/// ```
pub fn recover_with_grid(bytes: &[u8], grid: GridInfo) -> Result<Recovered, GridMismatch> {
    sweepgate::grid::Grid::new(grid.start_hz, grid.step_hz, grid.points)
        .map_err(GridMismatch::Unusable)?;
    let mut r = recover(bytes);
    if let Some(h) = r.header() {
        if !same_grid(&h.grid, &grid) {
            return Err(GridMismatch::HeaderDiffers {
                header: h.grid,
                given: grid,
            });
        }
        return Ok(r);
    }
    for (at, rec) in &r.records {
        if let Record::Sweep { s21, .. } = rec {
            if s21.len() != grid.points {
                return Err(GridMismatch::SweepPoints {
                    offset: *at,
                    points: s21.len(),
                    given: grid.points,
                });
            }
        }
    }
    r.supplied_header = Some(Box::new(Header {
        software: String::new(),
        source: "rebuilt from a grid given when reading (no header record or copy was intact)"
            .into(),
        scenario: None,
        scenario_toml: None,
        seed: None,
        grid,
        sweep_format: SWEEP_FORMAT.into(),
        pattern_frequencies_hz: Vec::new(),
        bin_width_deg: None,
        counts_per_turn: None,
    }));
    Ok(r)
}

/// Reads a recording file and recovers what it can. Files over [`MAX_FILE_BYTES`] and
/// folders are refused before anything is read; every error names the file.
pub fn recover_file(path: &Path) -> Result<Recovered, FileError> {
    Ok(recover(&read_capped(path, MAX_FILE_BYTES, "recording")?))
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
    /// The framed header copy, once a header record was written.
    header_copy: Option<Vec<u8>>,
    /// `records` and `offset` after the header or the last copy.
    copied_at: (u64, u64),
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
            header_copy: None,
            copied_at: (0, 0),
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

    /// Appends one record; returns the offset it starts at. After a header record, and
    /// then whenever [`HEADER_COPY_EVERY_BYTES`] were written since the last copy, a
    /// header copy follows.
    pub fn write(&mut self, rec: &Record) -> std::io::Result<u64> {
        let frame = rec.frame();
        if frame.len() - FRAME_OVERHEAD > MAX_PAYLOAD {
            return Err(std::io::Error::new(
                std::io::ErrorKind::InvalidInput,
                "record payload beyond the 16 MiB limit",
            ));
        }
        let at = self.put(&frame, rec.kind())?;
        if let Record::Header(h) = rec {
            self.header_copy = Some(Record::HeaderCopy(h.clone()).frame());
            self.copied_at = (self.records, self.offset);
        } else if self.header_copy.is_some()
            && !matches!(rec, Record::End { .. })
            && self.offset - self.copied_at.1 >= HEADER_COPY_EVERY_BYTES
        {
            self.write_copy()?;
        }
        Ok(at)
    }

    fn write_copy(&mut self) -> std::io::Result<()> {
        if let Some(frame) = self.header_copy.take() {
            let written = self.put(&frame, kind::HEADER_COPY);
            self.header_copy = Some(frame);
            written?;
            self.copied_at = (self.records, self.offset);
        }
        Ok(())
    }

    /// Writes one framed record, flushes, syncs when due, counts it.
    fn put(&mut self, frame: &[u8], kind: u8) -> std::io::Result<u64> {
        self.out.write_all(frame)?;
        self.out.flush()?;
        let at = self.offset;
        self.offset += frame.len() as u64;
        self.records += 1;
        match kind {
            kind::SWEEP => self.sweeps += 1,
            kind::POSITION => self.positions += 1,
            kind::TRUTH => self.truths += 1,
            _ => {}
        }
        self.since_sync = self.since_sync.saturating_add(1);
        if let Some((p, _)) = self.sync {
            let by_count = p.every_records > 0 && self.since_sync >= p.every_records;
            let by_time = p.every_s > 0.0 && self.last_sync.elapsed().as_secs_f64() >= p.every_s;
            if by_count || by_time || kind == kind::END {
                self.sync_now()?;
            }
        }
        if let Some(f) = &mut self.on_written {
            f(self.offset, self.records);
        }
        Ok(at)
    }

    /// Writes a last header copy (when a header was written and no copy follows the last
    /// record) and the end record (and syncs, for [`Writer::create`]); returns the output
    /// and the total bytes written.
    pub fn finish(mut self) -> std::io::Result<(W, u64)> {
        if self.header_copy.is_some() && self.records != self.copied_at.0 {
            self.write_copy()?;
        }
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

    fn test_header() -> Header {
        Header {
            software: "unit test".into(),
            source: "unit test".into(),
            scenario: None,
            scenario_toml: None,
            seed: None,
            grid: GridInfo {
                start_hz: 1e9,
                step_hz: 1e6,
                points: 2,
            },
            sweep_format: SWEEP_FORMAT.into(),
            pattern_frequencies_hz: vec![],
            bin_width_deg: None,
            counts_per_turn: None,
        }
    }

    fn position(i: u64) -> Record {
        Record::Position {
            t_us: i,
            counts: i as i64,
            angle_deg: i as f64,
        }
    }

    #[test]
    fn the_writer_repeats_the_header_every_so_often_and_before_the_end() {
        let mut w = Writer::new(Vec::new()).unwrap();
        w.write(&Record::Header(Box::new(test_header()))).unwrap();
        let header_end = w.offset();
        // Records of 100,013 bytes: the 11th after the header or a copy passes 1 MiB.
        let big = Record::Unknown {
            kind: 99,
            payload: vec![1; 100_000],
        };
        for _ in 0..25 {
            w.write(&big).unwrap();
        }
        let (bytes, _) = w.finish().unwrap();
        let r = recover(&bytes);
        assert_eq!(r.stop, Stop::Complete);
        let kinds: Vec<u8> = r.records.iter().map(|(_, x)| x.kind()).collect();
        let copies: Vec<usize> = (0..kinds.len())
            .filter(|&i| kinds[i] == kind::HEADER_COPY)
            .collect();
        let per_mib = (HEADER_COPY_EVERY_BYTES as usize).div_ceil(100_013);
        assert_eq!(per_mib, 11);
        // Header at 0, copies after records 11 and 22 past it (records 12 and 24), one
        // before the end record.
        assert_eq!(copies, [per_mib + 1, 2 * per_mib + 2, kinds.len() - 2]);
        assert_eq!(kinds[0], kind::HEADER);
        assert_eq!(*kinds.last().unwrap(), kind::END);
        for &i in &copies {
            assert_eq!(r.records[i].1, Record::HeaderCopy(Box::new(test_header())));
        }
        let first_copy_at = r.records[copies[0]].0;
        assert!(first_copy_at - header_end >= HEADER_COPY_EVERY_BYTES);
        assert!(first_copy_at - header_end < HEADER_COPY_EVERY_BYTES + 100_013);
        // The end record counts what the caller wrote.
        assert_eq!(
            r.records.last().unwrap().1,
            Record::End {
                sweeps: 0,
                positions: 0,
                truths: 0
            }
        );
        assert_eq!(r.header_origin(), Some(HeaderOrigin::Record(12)));
    }

    #[test]
    fn without_a_header_the_writer_writes_no_copy() {
        let mut w = Writer::new(Vec::new()).unwrap();
        w.write(&position(1)).unwrap();
        let (bytes, _) = w.finish().unwrap();
        let r = recover(&bytes);
        assert_eq!(r.records.len(), 2);
        assert!(r.header().is_none());
        assert_eq!(r.header_origin(), None);
    }

    #[test]
    fn an_unusable_grid_is_refused_by_name() {
        let (bytes, _) = Writer::new(Vec::new()).unwrap().finish().unwrap();
        let bad = GridInfo {
            start_hz: 1e9,
            step_hz: 0.0,
            points: 5,
        };
        let e = recover_with_grid(&bytes, bad).unwrap_err();
        assert!(matches!(e, GridMismatch::Unusable(_)));
        assert!(
            e.to_string().starts_with("the grid given is not usable: "),
            "{e}"
        );
        assert!(std::error::Error::source(&e).is_some());
    }

    /// The reader as specified, without the index: the first marker at or after a bad
    /// spot whose frame checks by a direct CRC (quadratic in the worst case).
    fn reference(bytes: &[u8]) -> Recovered {
        let mut out = Recovered::empty();
        match file_header(bytes) {
            Ok(v) => out.version = v,
            Err(stop) => {
                out.stop = stop;
                return out;
            }
        }
        let checks = |c: usize| Checker::new(bytes).frame(c).is_ok();
        let mut at = FILE_HEADER_LEN;
        while at < bytes.len() {
            match Checker::new(bytes).frame(at) {
                Ok(f) => {
                    match Record::decode(f.kind, f.payload) {
                        Ok(rec) => out.records.push((at as u64, rec)),
                        Err(fault) => out.damage.push(Damage {
                            offset: at as u64,
                            skipped: (f.end - at) as u64,
                            fault,
                        }),
                    }
                    at = f.end;
                }
                Err(fault) => match (at + 1..bytes.len()).find(|&c| checks(c)) {
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
        out.stop_offset = at as u64;
        out.stop = match out.records.last() {
            Some((_, Record::End { .. })) => Stop::Complete,
            _ => Stop::EndOfData,
        };
        out
    }

    #[test]
    fn the_indexed_search_finds_what_the_plain_one_finds() {
        // Soups of genuine records, markers with claimed lengths (short and long, most
        // inside the file) and noise; two long claims at the start spend the direct-hash
        // budget, so that the index and the windows do the rest.
        let mut seed = 0x9E37_79B9_7F4A_7C15u64;
        let mut next = move || {
            // xorshift64 (Marsaglia 2003).
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            seed
        };
        for round in 0..30 {
            let mut b = Writer::new(Vec::new()).unwrap().finish().unwrap().0;
            b.truncate(FILE_HEADER_LEN);
            let size = 20_000 + (next() % 100_000) as usize;
            for _ in 0..2 {
                b.extend_from_slice(&SYNC);
                b.extend_from_slice(&((size - 200) as u32).to_le_bytes());
            }
            while b.len() < size {
                match next() % 6 {
                    0 => b.extend_from_slice(&position(next() % 1000).frame()),
                    1 => b.extend_from_slice(
                        &Record::Unknown {
                            kind: 99,
                            payload: vec![7; (next() % 300) as usize],
                        }
                        .frame(),
                    ),
                    2 | 3 => {
                        let room = (size - b.len()) as u64;
                        b.extend_from_slice(&SYNC);
                        b.extend_from_slice(&((next() % room) as u32).to_le_bytes());
                    }
                    _ => b.extend((0..next() % 40).map(|_| next() as u8)),
                }
            }
            // The two long claims spend the budget: the rest goes by the index.
            let mut c = Checker::new(&b);
            assert!(c.frame(FILE_HEADER_LEN).is_err());
            c.next_frame(FILE_HEADER_LEN + 1);
            assert!(c.spans.is_some(), "round {round}");
            let got = recover(&b);
            let want = reference(&b);
            assert_eq!(got, want, "round {round}");
            assert!(got.records.len() > 10, "round {round}");
        }
    }
}
