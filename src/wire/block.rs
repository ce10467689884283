//! IEEE 488.2 definite- and indefinite-length arbitrary blocks from the VNA link.
//!
//! A VNA answers a data query (`TRACe:DATA?` and the like, with `FORMat:DATA REAL,32` or
//! `REAL,64`) with an arbitrary block (IEEE 488.2 §8.7.9): `#`, one non-zero digit n,
//! n ASCII digits giving the byte count, then the bytes; or the indefinite form `#0`,
//! bytes, newline. The bytes are IEEE 754 values, complex data interleaved re, im, in the
//! byte order set by `FORMat:BORDer` (NORMal = big-endian, SWAPped = little-endian).
//!
//! [`BlockDecoder`] is sans-IO: feed it chunks of any size (a DMA half-buffer, one UART
//! byte, a TCP segment) and it writes points straight into the caller's sweep buffer.
//! [`LinkReader`] pulls from an [`embedded_io::Read`] instead.
//!
//! # Framing and resynchronisation
//!
//! * Line ends (`\r`, `\n`) between blocks are skipped; one newline right after a
//!   definite block (instruments send it as the response terminator) belongs to the block.
//! * Any other byte where a block should start is a [`BlockError::HeaderMalformed`]; the
//!   decoder then skips to the next `#` followed by a digit (a plausible header).
//! * A well-formed definite header that is rejected (length, point count, buffer size)
//!   has its announced payload skipped exactly, so a genuine block with the wrong setup
//!   does not leave binary data to be mistaken for headers; if it announces more than
//!   [`MAX_SKIP_BYTES`] (more than any sweep the core handles) it is taken for garbage
//!   and the decoder skips to the next plausible `#` instead. Either way skipping costs
//!   constant work per byte and no memory.
//! * A byte stream has no END signal, so an indefinite block is framed by the
//!   configured point count: the newline is looked for only once K points have arrived
//!   (before that a 0x0A byte is data). Extra points are stored while the buffer has room
//!   and then reported as [`BlockError::PointCount`], or [`BlockError::Overflow`] once
//!   the buffer is full. A short indefinite block cannot be told apart from data and
//!   swallows what follows; the next check that fails reports it.
//!
//! Every byte consumed is counted in [`BlockCounters`]: in an accepted block, skipped, or
//! pending in the block being decoded.

use crate::error::{BlockError, EncodeError, WireConfigError};
use crate::grid::{Grid, MAX_POINTS};
use crate::Complex32;

/// A rejected definite block announcing more bytes than this is taken for garbage: the
/// decoder resynchronises at the next plausible `#` instead of skipping its payload.
/// It is the size of the largest sweep the core handles (65535 REAL,64 points).
pub const MAX_SKIP_BYTES: u32 = 16 * MAX_POINTS as u32;

/// SCPI codes for INFinity and NAN in numeric responses: 9.9E37 and 9.91E37 (SCPI-99
/// Volume 1, numeric data conventions; from memory).
pub(crate) const SCPI_INFINITY: f32 = 9.9e37;
pub(crate) const SCPI_NAN: f32 = 9.91e37;

/// True for a value a sweep may hold: finite and not a SCPI INFinity/NAN code.
pub(crate) fn usable_f32(v: f32) -> bool {
    let a = v.abs();
    v.is_finite() && a != SCPI_INFINITY && a != SCPI_NAN
}

fn usable_f64(v: f64) -> bool {
    let a = v.abs();
    // The same SCPI codes in double precision, and values that do not fit f32.
    v.is_finite() && a != 9.9e37 && a != 9.91e37 && a <= f32::MAX as f64
}

/// The SCPI `FORMat:DATA` of a block.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Format {
    /// `REAL,32`: IEEE 754 single precision, 4 bytes per value.
    Real32,
    /// `REAL,64`: IEEE 754 double precision, 8 bytes per value (narrowed to f32).
    Real64,
}

impl Format {
    /// Bytes per value (4 or 8).
    pub const fn value_bytes(self) -> usize {
        match self {
            Self::Real32 => 4,
            Self::Real64 => 8,
        }
    }

    /// Bytes per complex sample, re and im (8 or 16).
    pub const fn sample_bytes(self) -> usize {
        2 * self.value_bytes()
    }
}

/// The SCPI `FORMat:BORDer` of a block.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum ByteOrder {
    /// `NORMal`: big-endian, most significant byte first.
    Normal,
    /// `SWAPped`: little-endian.
    Swapped,
}

/// What the decoder expects, validated once: point count K, format and byte order.
///
/// ```
/// use sweepgate::grid::Grid;
/// use sweepgate::wire::block::{BlockConfig, ByteOrder, Format};
/// let grid = Grid::from_start_stop(2e9, 18e9, 801).unwrap();
/// let cfg = BlockConfig::for_grid(&grid, Format::Real32, ByteOrder::Swapped);
/// assert_eq!(cfg.points(), 801);
/// assert!(BlockConfig::new(0, Format::Real32, ByteOrder::Normal).is_err());
/// ```
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct BlockConfig {
    points: u16,
    format: Format,
    order: ByteOrder,
}

impl BlockConfig {
    /// A configuration expecting `points` complex points per block.
    pub fn new(points: usize, format: Format, order: ByteOrder) -> Result<Self, WireConfigError> {
        if points == 0 {
            return Err(WireConfigError::NoPoints);
        }
        let points = u16::try_from(points).map_err(|_| WireConfigError::TooManyPoints)?;
        Ok(Self {
            points,
            format,
            order,
        })
    }

    /// A configuration expecting the grid's point count (a grid is already valid).
    pub fn for_grid(grid: &Grid, format: Format, order: ByteOrder) -> Self {
        Self {
            points: u16::try_from(grid.points()).unwrap_or(u16::MAX),
            format,
            order,
        }
    }

    /// Expected points per block, K.
    pub fn points(&self) -> usize {
        self.points as usize
    }

    /// Value format.
    pub fn format(&self) -> Format {
        self.format
    }

    /// Byte order.
    pub fn order(&self) -> ByteOrder {
        self.order
    }
}

/// What a decoder reports: a complete sweep, or a rejected block or line.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Event<E> {
    /// A sweep is complete: the first `points` entries of the buffer hold it.
    Sweep {
        /// Points decoded (always the configured K).
        points: usize,
    },
    /// A block or line was rejected and counted; the decoder is resynchronising.
    Rejected(E),
}

/// Result of one `feed` call.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Feed<E> {
    /// Bytes of the chunk consumed. Less than the chunk only when `event` is `Some`:
    /// feed the rest after handling the event.
    pub consumed: usize,
    /// The event that stopped decoding, if any.
    pub event: Option<Event<E>>,
}

/// A streaming decoder that fills a sweep buffer; implemented by [`BlockDecoder`] and
/// [`crate::wire::ascii::AsciiDecoder`] so [`LinkReader`] can drive either.
pub trait StreamDecoder {
    /// The rejection reason.
    type Error;
    /// Decode from `chunk` into `out` until the chunk is used up or an event occurs.
    fn feed(&mut self, chunk: &[u8], out: &mut [Complex32]) -> Feed<Self::Error>;
    /// The stream has ended: a block or line in progress is rejected as truncated.
    fn finish(&mut self) -> Option<Self::Error>;
}

/// Every byte and block the block decoder saw, by outcome.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct BlockCounters {
    /// Blocks decoded into the buffer.
    pub accepted: u32,
    /// Rejected: [`BlockError::HeaderMalformed`].
    pub header_malformed: u32,
    /// Rejected: [`BlockError::LengthNotWholeSamples`].
    pub length_not_whole: u32,
    /// Rejected: [`BlockError::PointCount`].
    pub point_count: u32,
    /// Rejected: [`BlockError::Overflow`].
    pub overflow: u32,
    /// Rejected: [`BlockError::Truncated`].
    pub truncated: u32,
    /// Rejected: [`BlockError::NonFinite`].
    pub non_finite: u32,
    /// Bytes of accepted blocks, header and trailing newline included.
    pub bytes_accepted: u64,
    /// Bytes outside accepted blocks: line ends between blocks, garbage, rejected blocks.
    pub bytes_skipped: u64,
}

impl BlockCounters {
    /// Blocks rejected, all reasons.
    pub fn rejected(&self) -> u32 {
        self.header_malformed
            .saturating_add(self.length_not_whole)
            .saturating_add(self.point_count)
            .saturating_add(self.overflow)
            .saturating_add(self.truncated)
            .saturating_add(self.non_finite)
    }
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum State {
    /// Synchronised, expecting `#` (line ends skipped).
    Idle,
    /// After an error: skipping to a `#`.
    Resync,
    /// Saw `#`. `resync`: an implausible header is skipped silently.
    Hash { resync: bool },
    /// Reading the byte-count digits of a definite header.
    LenDigits { left: u8, len: u32 },
    /// Definite payload: `left` bytes to go, `index` points written.
    Definite { left: u32, index: u32 },
    /// Indefinite payload; `discard` after a rejection until the framing ends.
    Indefinite { index: u32, discard: bool },
    /// Skipping the payload of a rejected definite block.
    Skip { left: u32 },
    /// After a definite payload: an optional newline belongs to the block.
    AfterBlock { accepted: bool },
}

enum Step {
    /// Byte consumed, no event.
    Next,
    /// Byte consumed, event.
    NextEvent(Event<BlockError>),
    /// Byte not consumed (the new state handles it), event.
    Event(Event<BlockError>),
    /// Byte not consumed, new state handles it, no event.
    Again,
}

/// Streaming, sans-IO decoder of IEEE 488.2 arbitrary blocks into a sweep buffer.
///
/// The buffer passed to [`BlockDecoder::feed`] must be the same across the calls that
/// make up one block; its length is the capacity. It holds a sweep only once
/// [`Event::Sweep`] is reported (a rejected block may have overwritten part of it).
///
/// ```
/// use sweepgate::Complex32;
/// use sweepgate::wire::block::{emit, BlockConfig, BlockDecoder, ByteOrder, Event, Format};
/// let sweep = [Complex32::new(1.0, -0.5), Complex32::new(0.25, 2.0)];
/// let mut bytes = [0u8; 32];
/// let n = emit(Format::Real32, ByteOrder::Normal, &sweep, &mut bytes).unwrap();
/// assert_eq!(&bytes[..4], b"#216");
///
/// let cfg = BlockConfig::new(2, Format::Real32, ByteOrder::Normal).unwrap();
/// let mut dec = BlockDecoder::new(cfg);
/// let mut buf = [Complex32::new(0.0, 0.0); 4];
/// // Fed in two pieces, as from a DMA half-buffer.
/// assert_eq!(dec.feed(&bytes[..7], &mut buf).event, None);
/// let fed = dec.feed(&bytes[7..n], &mut buf);
/// assert_eq!(fed.event, Some(Event::Sweep { points: 2 }));
/// assert_eq!(&buf[..2], &sweep);
/// assert_eq!(dec.counters().accepted, 1);
/// ```
#[derive(Debug, Clone)]
pub struct BlockDecoder {
    config: BlockConfig,
    state: State,
    sample: [u8; 16],
    fill: u8,
    pending: u64,
    counters: BlockCounters,
}

impl BlockDecoder {
    /// A decoder waiting for the first block.
    pub fn new(config: BlockConfig) -> Self {
        Self {
            config,
            state: State::Idle,
            sample: [0; 16],
            fill: 0,
            pending: 0,
            counters: BlockCounters::default(),
        }
    }

    /// The configuration.
    pub fn config(&self) -> &BlockConfig {
        &self.config
    }

    /// What the decoder has seen so far.
    pub fn counters(&self) -> &BlockCounters {
        &self.counters
    }

    /// Bytes of the block in progress, not yet accepted or rejected.
    pub fn bytes_pending(&self) -> u64 {
        self.pending
    }

    /// Drop any block in progress (counted as skipped) and wait for a new one.
    pub fn reset(&mut self) {
        self.skip_pending();
        self.state = State::Idle;
        self.fill = 0;
    }

    /// End of stream: a block in progress is rejected as [`BlockError::Truncated`].
    pub fn finish(&mut self) -> Option<BlockError> {
        let truncated = matches!(
            self.state,
            State::Hash { resync: false }
                | State::LenDigits { .. }
                | State::Definite { .. }
                | State::Indefinite { discard: false, .. }
        );
        let err = if truncated {
            self.reject(BlockError::Truncated);
            Some(BlockError::Truncated)
        } else {
            self.skip_pending();
            None
        };
        self.state = State::Idle;
        self.fill = 0;
        err
    }

    /// Decode from `chunk` into `out`; stops early at the first event.
    pub fn feed(&mut self, chunk: &[u8], out: &mut [Complex32]) -> Feed<BlockError> {
        let mut pos = 0usize;
        while let Some(rest) = chunk.get(pos..) {
            if let State::Skip { left } = self.state {
                // Bulk skip: constant work whatever the count.
                let n = (left as usize).min(rest.len());
                pos += n;
                self.counters.bytes_skipped = self.counters.bytes_skipped.saturating_add(n as u64);
                self.enter_skip(left - n as u32);
                if let State::Skip { .. } = self.state {
                    break;
                }
                continue;
            }
            if let Some(n) = self.whole_samples(rest, out) {
                pos += n;
                continue;
            }
            let Some(&b) = rest.first() else { break };
            match self.step(b, out) {
                Step::Next => pos += 1,
                Step::Again => {}
                Step::NextEvent(e) => {
                    return Feed {
                        consumed: pos + 1,
                        event: Some(e),
                    }
                }
                Step::Event(e) => {
                    return Feed {
                        consumed: pos,
                        event: Some(e),
                    }
                }
            }
        }
        Feed {
            consumed: pos,
            event: None,
        }
    }

    /// Fast path inside a definite block: decodes whole samples straight from `rest` while
    /// more than one sample of the block remains. Returns the bytes taken, or `None` when
    /// the byte-by-byte path must go on (mid-sample, the block's last sample, a bad value
    /// or a full buffer: that sample is then decoded again byte by byte, so errors and
    /// counters are exactly those of the byte path).
    fn whole_samples(&mut self, rest: &[u8], out: &mut [Complex32]) -> Option<usize> {
        let State::Definite {
            mut left,
            mut index,
        } = self.state
        else {
            return None;
        };
        let sb = self.config.format.sample_bytes();
        if self.fill != 0 {
            return None;
        }
        let mut taken = 0;
        for bytes in rest.chunks_exact(sb) {
            if left as usize <= sb {
                break;
            }
            self.sample[..sb].copy_from_slice(bytes);
            let Ok(v) = self.decode_sample() else { break };
            let Some(slot) = out.get_mut(index as usize) else {
                break;
            };
            *slot = v;
            index += 1;
            left -= sb as u32;
            taken += sb;
        }
        if taken == 0 {
            return None;
        }
        self.pending += taken as u64;
        self.state = State::Definite { left, index };
        Some(taken)
    }

    fn enter_skip(&mut self, left: u32) {
        self.state = if left == 0 {
            State::AfterBlock { accepted: false }
        } else {
            State::Skip { left }
        };
    }

    fn skip_pending(&mut self) {
        self.counters.bytes_skipped = self.counters.bytes_skipped.saturating_add(self.pending);
        self.pending = 0;
    }

    fn reject(&mut self, e: BlockError) -> Event<BlockError> {
        let c = &mut self.counters;
        let n = match e {
            BlockError::HeaderMalformed => &mut c.header_malformed,
            BlockError::LengthNotWholeSamples { .. } => &mut c.length_not_whole,
            BlockError::PointCount { .. } => &mut c.point_count,
            BlockError::Overflow { .. } => &mut c.overflow,
            BlockError::Truncated => &mut c.truncated,
            BlockError::NonFinite { .. } => &mut c.non_finite,
        };
        *n = n.saturating_add(1);
        self.skip_pending();
        Event::Rejected(e)
    }

    fn accept(&mut self, points: u32) -> Event<BlockError> {
        self.counters.accepted = self.counters.accepted.saturating_add(1);
        self.counters.bytes_accepted = self.counters.bytes_accepted.saturating_add(self.pending);
        self.pending = 0;
        Event::Sweep {
            points: points as usize,
        }
    }

    /// A rejected definite block: skip its payload, or resync if it is implausibly long.
    fn skip_block(&mut self, len: u32) {
        if len <= MAX_SKIP_BYTES {
            self.enter_skip(len);
        } else {
            self.state = State::Resync;
        }
    }

    /// A definite header is complete: start the payload (`None`) or reject it.
    fn header_done(&mut self, len: u32, capacity: usize) -> Option<Event<BlockError>> {
        let sb = self.config.format.sample_bytes() as u32;
        let expected = self.config.points as u32;
        let err = if len % sb != 0 {
            BlockError::LengthNotWholeSamples {
                bytes: len,
                sample_bytes: sb as u8,
            }
        } else if len / sb != expected {
            BlockError::PointCount {
                expected,
                found: len / sb,
            }
        } else if self.config.points() > capacity {
            BlockError::Overflow {
                capacity: cap_u32(capacity),
            }
        } else {
            self.state = State::Definite {
                left: len,
                index: 0,
            };
            self.fill = 0;
            return None;
        };
        let ev = self.reject(err);
        self.skip_block(len);
        Some(ev)
    }

    /// Add a byte to the sample being assembled; returns the sample when complete.
    fn push_sample_byte(&mut self, b: u8) -> Option<Result<Complex32, ()>> {
        if let Some(slot) = self.sample.get_mut(self.fill as usize) {
            *slot = b;
        }
        self.fill += 1;
        if self.fill as usize >= self.config.format.sample_bytes() {
            self.fill = 0;
            Some(self.decode_sample())
        } else {
            None
        }
    }

    fn decode_sample(&self) -> Result<Complex32, ()> {
        let [a0, a1, a2, a3, a4, a5, a6, a7, a8, a9, a10, a11, a12, a13, a14, a15] = self.sample;
        let normal = self.config.order == ByteOrder::Normal;
        match self.config.format {
            Format::Real32 => {
                let (re, im) = if normal {
                    (
                        f32::from_be_bytes([a0, a1, a2, a3]),
                        f32::from_be_bytes([a4, a5, a6, a7]),
                    )
                } else {
                    (
                        f32::from_le_bytes([a0, a1, a2, a3]),
                        f32::from_le_bytes([a4, a5, a6, a7]),
                    )
                };
                if usable_f32(re) && usable_f32(im) {
                    Ok(Complex32::new(re, im))
                } else {
                    Err(())
                }
            }
            Format::Real64 => {
                let lo = [a0, a1, a2, a3, a4, a5, a6, a7];
                let hi = [a8, a9, a10, a11, a12, a13, a14, a15];
                let (re, im) = if normal {
                    (f64::from_be_bytes(lo), f64::from_be_bytes(hi))
                } else {
                    (f64::from_le_bytes(lo), f64::from_le_bytes(hi))
                };
                if usable_f64(re) && usable_f64(im) {
                    Ok(Complex32::new(re as f32, im as f32))
                } else {
                    Err(())
                }
            }
        }
    }

    fn step(&mut self, b: u8, out: &mut [Complex32]) -> Step {
        match self.state {
            State::Idle => match b {
                b'#' => {
                    self.pending += 1;
                    self.state = State::Hash { resync: false };
                    Step::Next
                }
                b'\n' | b'\r' => {
                    self.counters.bytes_skipped = self.counters.bytes_skipped.saturating_add(1);
                    Step::Next
                }
                _ => {
                    self.state = State::Resync;
                    Step::Event(self.reject(BlockError::HeaderMalformed))
                }
            },
            State::Resync => {
                if b == b'#' {
                    self.pending += 1;
                    self.state = State::Hash { resync: true };
                } else {
                    self.counters.bytes_skipped = self.counters.bytes_skipped.saturating_add(1);
                }
                Step::Next
            }
            State::Hash { resync } => match b {
                b'0' => {
                    self.pending += 1;
                    self.fill = 0;
                    self.state = State::Indefinite {
                        index: 0,
                        discard: false,
                    };
                    Step::Next
                }
                b'1'..=b'9' => {
                    self.pending += 1;
                    self.state = State::LenDigits {
                        left: b - b'0',
                        len: 0,
                    };
                    Step::Next
                }
                _ if resync => {
                    self.skip_pending();
                    self.state = State::Resync;
                    Step::Again
                }
                _ => {
                    self.state = State::Resync;
                    Step::Event(self.reject(BlockError::HeaderMalformed))
                }
            },
            State::LenDigits { left, len } => {
                if !b.is_ascii_digit() {
                    self.state = State::Resync;
                    return Step::Event(self.reject(BlockError::HeaderMalformed));
                }
                self.pending += 1;
                // At most 9 digits: below 10^9, fits u32.
                let len = len.saturating_mul(10).saturating_add((b - b'0') as u32);
                if left > 1 {
                    self.state = State::LenDigits {
                        left: left - 1,
                        len,
                    };
                    return Step::Next;
                }
                match self.header_done(len, out.len()) {
                    None => Step::Next,
                    Some(ev) => Step::NextEvent(ev),
                }
            }
            State::Definite { left, index } => {
                self.pending += 1;
                let left = left.saturating_sub(1);
                let mut index = index;
                match self.push_sample_byte(b) {
                    None => {}
                    Some(Err(())) => {
                        let ev = self.reject(BlockError::NonFinite { index });
                        self.enter_skip(left);
                        return Step::NextEvent(ev);
                    }
                    Some(Ok(v)) => match out.get_mut(index as usize) {
                        Some(slot) => {
                            *slot = v;
                            index += 1;
                        }
                        None => {
                            let ev = self.reject(BlockError::Overflow {
                                capacity: cap_u32(out.len()),
                            });
                            self.enter_skip(left);
                            return Step::NextEvent(ev);
                        }
                    },
                }
                if left == 0 {
                    self.state = State::AfterBlock { accepted: true };
                    Step::NextEvent(self.accept(index))
                } else {
                    self.state = State::Definite { left, index };
                    Step::Next
                }
            }
            State::Indefinite { index, discard } => self.step_indefinite(b, index, discard, out),
            State::Skip { .. } => {
                // Handled in bulk by `feed`; kept for completeness.
                self.enter_skip(0);
                Step::Again
            }
            State::AfterBlock { accepted } => {
                if b == b'\n' {
                    if accepted {
                        self.counters.bytes_accepted =
                            self.counters.bytes_accepted.saturating_add(1);
                    } else {
                        self.counters.bytes_skipped = self.counters.bytes_skipped.saturating_add(1);
                    }
                    self.state = State::Idle;
                    Step::Next
                } else {
                    self.state = State::Idle;
                    Step::Again
                }
            }
        }
    }

    fn step_indefinite(&mut self, b: u8, index: u32, discard: bool, out: &mut [Complex32]) -> Step {
        let expected = self.config.points as u32;
        if self.fill == 0 {
            if index >= expected && b == b'\n' {
                self.state = State::Idle;
                if discard {
                    self.counters.bytes_skipped = self.counters.bytes_skipped.saturating_add(1);
                    return Step::Next;
                }
                self.pending += 1;
                let ev = if index == expected {
                    self.accept(index)
                } else {
                    self.reject(BlockError::PointCount {
                        expected,
                        found: index,
                    })
                };
                return Step::NextEvent(ev);
            }
            if index as usize >= out.len() {
                self.state = State::Resync;
                if discard {
                    return Step::Again;
                }
                return Step::Event(self.reject(BlockError::Overflow {
                    capacity: cap_u32(out.len()),
                }));
            }
        }
        if discard {
            self.counters.bytes_skipped = self.counters.bytes_skipped.saturating_add(1);
        } else {
            self.pending += 1;
        }
        let mut index = index;
        let mut discard = discard;
        let mut event = None;
        if let Some(sample) = self.push_sample_byte(b) {
            match (discard, sample) {
                (true, _) => {}
                (false, Ok(v)) => {
                    if let Some(slot) = out.get_mut(index as usize) {
                        *slot = v;
                    }
                }
                (false, Err(())) => {
                    event = Some(self.reject(BlockError::NonFinite { index }));
                    discard = true;
                }
            }
            index += 1;
        }
        self.state = State::Indefinite { index, discard };
        match event {
            Some(e) => Step::NextEvent(e),
            None => Step::Next,
        }
    }
}

impl StreamDecoder for BlockDecoder {
    type Error = BlockError;
    fn feed(&mut self, chunk: &[u8], out: &mut [Complex32]) -> Feed<BlockError> {
        BlockDecoder::feed(self, chunk, out)
    }
    fn finish(&mut self) -> Option<BlockError> {
        BlockDecoder::finish(self)
    }
}

fn cap_u32(n: usize) -> u32 {
    u32::try_from(n).unwrap_or(u32::MAX)
}

fn digits(mut n: usize) -> usize {
    let mut d = 1;
    while n >= 10 {
        n /= 10;
        d += 1;
    }
    d
}

fn put(out: &mut [u8], at: &mut usize, bytes: &[u8]) {
    if let Some(dst) = out.get_mut(*at..*at + bytes.len()) {
        dst.copy_from_slice(bytes);
    }
    *at += bytes.len();
}

fn put_data(
    format: Format,
    order: ByteOrder,
    points: &[Complex32],
    out: &mut [u8],
    at: &mut usize,
) {
    for p in points {
        for v in [p.re, p.im] {
            match (format, order) {
                (Format::Real32, ByteOrder::Normal) => put(out, at, &v.to_be_bytes()),
                (Format::Real32, ByteOrder::Swapped) => put(out, at, &v.to_le_bytes()),
                (Format::Real64, ByteOrder::Normal) => put(out, at, &(v as f64).to_be_bytes()),
                (Format::Real64, ByteOrder::Swapped) => put(out, at, &(v as f64).to_le_bytes()),
            }
        }
    }
}

/// Encode `points` as a definite-length block followed by a newline, as an instrument
/// answers a data query: `#<n><len><data>\n`. Returns the bytes written.
///
/// Non-finite values are encoded as they are (tests use this to build bad blocks).
pub fn emit(
    format: Format,
    order: ByteOrder,
    points: &[Complex32],
    out: &mut [u8],
) -> Result<usize, EncodeError> {
    let len = points
        .len()
        .checked_mul(format.sample_bytes())
        .filter(|&l| l <= 999_999_999)
        .ok_or(EncodeError::TooLong)?;
    let nd = digits(len);
    let needed = 2 + nd + len + 1;
    if out.len() < needed {
        return Err(EncodeError::BufferTooSmall { needed });
    }
    let mut at = 0;
    put(out, &mut at, &[b'#', b'0' + nd as u8]);
    let mut div = 10usize.pow(nd as u32 - 1);
    while div > 0 {
        put(out, &mut at, &[b'0' + ((len / div) % 10) as u8]);
        div /= 10;
    }
    put_data(format, order, points, out, &mut at);
    put(out, &mut at, b"\n");
    Ok(at)
}

/// Encode `points` as an indefinite-length block: `#0<data>\n`. Returns the bytes written.
pub fn emit_indefinite(
    format: Format,
    order: ByteOrder,
    points: &[Complex32],
    out: &mut [u8],
) -> Result<usize, EncodeError> {
    let needed = points
        .len()
        .checked_mul(format.sample_bytes())
        .and_then(|l| l.checked_add(3))
        .ok_or(EncodeError::TooLong)?;
    if out.len() < needed {
        return Err(EncodeError::BufferTooSmall { needed });
    }
    let mut at = 0;
    put(out, &mut at, b"#0");
    put_data(format, order, points, out, &mut at);
    put(out, &mut at, b"\n");
    Ok(at)
}

/// Pulls bytes from an [`embedded_io::Read`] through an `N`-byte scratch buffer into a
/// [`StreamDecoder`]; bytes read past an event are kept for the next call. `N` must be
/// at least 1.
///
/// ```
/// use sweepgate::Complex32;
/// use sweepgate::wire::block::{emit, BlockConfig, BlockDecoder, ByteOrder, Event, Format, LinkReader};
/// let sweep = [Complex32::new(0.5, 0.5); 3];
/// let mut bytes = [0u8; 64];
/// let n = emit(Format::Real64, ByteOrder::Swapped, &sweep, &mut bytes).unwrap();
/// let cfg = BlockConfig::new(3, Format::Real64, ByteOrder::Swapped).unwrap();
/// let mut link: LinkReader<&[u8], _, 16> = LinkReader::new(&bytes[..n], BlockDecoder::new(cfg));
/// let mut buf = [Complex32::new(0.0, 0.0); 3];
/// assert_eq!(link.next_event(&mut buf), Ok(Some(Event::Sweep { points: 3 })));
/// assert_eq!(buf, sweep);
/// assert_eq!(link.next_event(&mut buf), Ok(None)); // end of stream
/// ```
#[derive(Debug)]
pub struct LinkReader<R, D, const N: usize> {
    reader: R,
    decoder: D,
    buf: [u8; N],
    start: usize,
    end: usize,
}

impl<R: embedded_io::Read, D: StreamDecoder, const N: usize> LinkReader<R, D, N> {
    /// Wrap a reader and a decoder.
    pub fn new(reader: R, decoder: D) -> Self {
        Self {
            reader,
            decoder,
            buf: [0; N],
            start: 0,
            end: 0,
        }
    }

    /// Read until the next event. `Ok(None)` is the end of the stream (a block or line in
    /// progress is then reported once as truncated first). I/O errors are passed on.
    pub fn next_event(
        &mut self,
        out: &mut [Complex32],
    ) -> Result<Option<Event<D::Error>>, R::Error> {
        loop {
            if let Some(chunk) = self.buf.get(self.start..self.end) {
                if !chunk.is_empty() {
                    let fed = self.decoder.feed(chunk, out);
                    self.start += fed.consumed;
                    if let Some(e) = fed.event {
                        return Ok(Some(e));
                    }
                    continue;
                }
            }
            let n = self.reader.read(&mut self.buf)?;
            if n == 0 {
                self.start = 0;
                self.end = 0;
                return Ok(self.decoder.finish().map(Event::Rejected));
            }
            self.start = 0;
            self.end = n.min(N);
        }
    }

    /// The decoder (for its counters).
    pub fn decoder(&self) -> &D {
        &self.decoder
    }

    /// Give back the reader and decoder; unread buffered bytes are dropped.
    pub fn into_parts(self) -> (R, D) {
        (self.reader, self.decoder)
    }
}

#[cfg(test)]
mod tests {
    extern crate std;
    use super::*;
    use std::vec::Vec;

    const Z: Complex32 = Complex32::new(0.0, 0.0);

    fn c(re: f32, im: f32) -> Complex32 {
        Complex32::new(re, im)
    }

    fn cfg(points: usize, format: Format, order: ByteOrder) -> BlockConfig {
        BlockConfig::new(points, format, order).unwrap()
    }

    /// Everything a run produced: events with a copy of the sweep at each `Sweep`.
    #[derive(Debug, PartialEq)]
    enum Seen {
        Sweep(Vec<Complex32>),
        Rejected(BlockError),
    }

    /// Feed `chunks` in order, then finish; collect events and the final counters.
    fn run(config: BlockConfig, cap: usize, chunks: &[&[u8]]) -> (Vec<Seen>, BlockCounters) {
        let mut dec = BlockDecoder::new(config);
        let mut buf = std::vec![Z; cap];
        let mut seen = Vec::new();
        let mut total = 0u64;
        for chunk in chunks {
            let mut rest: &[u8] = chunk;
            loop {
                let fed = dec.feed(rest, &mut buf);
                total += fed.consumed as u64;
                rest = &rest[fed.consumed..];
                match fed.event {
                    Some(Event::Sweep { points }) => seen.push(Seen::Sweep(buf[..points].to_vec())),
                    Some(Event::Rejected(e)) => seen.push(Seen::Rejected(e)),
                    None => {
                        assert!(rest.is_empty(), "no event but bytes left");
                        break;
                    }
                }
                let k = dec.counters();
                assert_eq!(
                    total,
                    k.bytes_accepted + k.bytes_skipped + dec.bytes_pending()
                );
            }
        }
        if let Some(e) = dec.finish() {
            seen.push(Seen::Rejected(e));
        }
        let k = *dec.counters();
        assert_eq!(dec.bytes_pending(), 0);
        assert_eq!(total, k.bytes_accepted + k.bytes_skipped);
        let sweeps = seen.iter().filter(|s| matches!(s, Seen::Sweep(_))).count();
        assert_eq!(sweeps as u32, k.accepted);
        assert_eq!((seen.len() - sweeps) as u32, k.rejected());
        (seen, k)
    }

    fn block(format: Format, order: ByteOrder, points: &[Complex32]) -> Vec<u8> {
        let mut out = std::vec![0u8; points.len() * 16 + 16];
        let n = emit(format, order, points, &mut out).unwrap();
        out.truncate(n);
        out
    }

    fn indefinite(format: Format, order: ByteOrder, points: &[Complex32]) -> Vec<u8> {
        let mut out = std::vec![0u8; points.len() * 16 + 16];
        let n = emit_indefinite(format, order, points, &mut out).unwrap();
        out.truncate(n);
        out
    }

    const ALL: [(Format, ByteOrder); 4] = [
        (Format::Real32, ByteOrder::Normal),
        (Format::Real32, ByteOrder::Swapped),
        (Format::Real64, ByteOrder::Normal),
        (Format::Real64, ByteOrder::Swapped),
    ];

    #[test]
    fn config_validation() {
        assert_eq!(
            BlockConfig::new(0, Format::Real32, ByteOrder::Normal),
            Err(WireConfigError::NoPoints)
        );
        assert_eq!(
            BlockConfig::new(65_536, Format::Real32, ByteOrder::Normal),
            Err(WireConfigError::TooManyPoints)
        );
        assert!(BlockConfig::new(65_535, Format::Real64, ByteOrder::Swapped).is_ok());
    }

    #[test]
    fn hand_built_bytes_every_format_and_order() {
        // IEEE 754: 1.0f32 = 3F80_0000, -2.0f32 = C000_0000; 1.0f64 = 3FF0_0000_0000_0000,
        // -2.0f64 = C000_0000_0000_0000 (IEEE 754-2008 binary32/binary64, from memory).
        let cases: [(Format, ByteOrder, &[u8]); 4] = [
            (
                Format::Real32,
                ByteOrder::Normal,
                b"#18\x3f\x80\x00\x00\xc0\x00\x00\x00\n",
            ),
            (
                Format::Real32,
                ByteOrder::Swapped,
                b"#18\x00\x00\x80\x3f\x00\x00\x00\xc0\n",
            ),
            (
                Format::Real64,
                ByteOrder::Normal,
                b"#216\x3f\xf0\0\0\0\0\0\0\xc0\0\0\0\0\0\0\0\n",
            ),
            (
                Format::Real64,
                ByteOrder::Swapped,
                b"#216\0\0\0\0\0\0\xf0\x3f\0\0\0\0\0\0\0\xc0\n",
            ),
        ];
        for (format, order, bytes) in cases {
            let (seen, k) = run(cfg(1, format, order), 1, &[bytes]);
            assert_eq!(
                seen,
                [Seen::Sweep(std::vec![c(1.0, -2.0)])],
                "{format:?} {order:?}"
            );
            // The trailing newline belongs to the accepted block.
            assert_eq!(k.bytes_accepted, bytes.len() as u64);
            assert_eq!(k.bytes_skipped, 0);
            // The encoder builds the same bytes.
            assert_eq!(block(format, order, &[c(1.0, -2.0)]), bytes);
            // Decoding with the other byte order gives other values.
            let other = match order {
                ByteOrder::Normal => ByteOrder::Swapped,
                ByteOrder::Swapped => ByteOrder::Normal,
            };
            let (seen, _) = run(cfg(1, format, other), 1, &[bytes]);
            assert_ne!(seen, [Seen::Sweep(std::vec![c(1.0, -2.0)])]);
        }
    }

    fn sample_sweep(n: usize) -> Vec<Complex32> {
        (0..n)
            .map(|i| c(0.1 * i as f32 - 1.0, 1.0 / (1.0 + i as f32)))
            .collect()
    }

    #[test]
    fn definite_and_indefinite_round_trip() {
        let sweep = sample_sweep(5);
        for (format, order) in ALL {
            let mut bytes = block(format, order, &sweep);
            bytes.extend(indefinite(format, order, &sweep));
            let (seen, k) = run(cfg(5, format, order), 8, &[&bytes]);
            assert_eq!(
                seen,
                [Seen::Sweep(sweep.clone()), Seen::Sweep(sweep.clone())]
            );
            assert_eq!(k.accepted, 2);
            assert_eq!(k.bytes_skipped, 0);
        }
    }

    #[test]
    fn definite_without_trailing_newline_and_with_crlf() {
        let sweep = sample_sweep(2);
        let b = block(Format::Real32, ByteOrder::Normal, &sweep);
        let bare = &b[..b.len() - 1];
        let mut stream = bare.to_vec();
        stream.extend_from_slice(bare);
        stream.extend_from_slice(b"\r\n");
        stream.extend_from_slice(&b);
        let (seen, k) = run(cfg(2, Format::Real32, ByteOrder::Normal), 2, &[&stream]);
        assert_eq!(seen.len(), 3);
        assert!(seen.iter().all(|s| *s == Seen::Sweep(sweep.clone())));
        // A CRLF after a block without its own newline: line ends between blocks,
        // skipped, not an error.
        assert_eq!(k.bytes_skipped, 2);
    }

    #[test]
    fn newline_inside_indefinite_data_is_data() {
        // 0x0A bytes within the K points are values, not the terminator.
        let v = f32::from_be_bytes([0x0a, 0x0a, 0x0a, 0x0a]);
        let sweep = [c(v, v), c(1.0, v)];
        let bytes = indefinite(Format::Real32, ByteOrder::Normal, &sweep);
        let (seen, _) = run(cfg(2, Format::Real32, ByteOrder::Normal), 2, &[&bytes]);
        assert_eq!(seen, [Seen::Sweep(sweep.to_vec())]);
    }

    #[test]
    fn header_malformed() {
        let k1 = cfg(1, Format::Real32, ByteOrder::Normal);
        for bad in [&b"x"[..], b"#x", b"#4AB", b"##", b"#2\n"] {
            let (seen, k) = run(k1, 1, &[bad]);
            assert_eq!(
                seen[0],
                Seen::Rejected(BlockError::HeaderMalformed),
                "{bad:?}"
            );
            assert_eq!(k.header_malformed, 1, "{bad:?}");
        }
    }

    #[test]
    fn length_not_whole_samples() {
        let (seen, k) = run(cfg(1, Format::Real32, ByteOrder::Normal), 4, &[b"#13abc\n"]);
        assert_eq!(
            seen,
            [Seen::Rejected(BlockError::LengthNotWholeSamples {
                bytes: 3,
                sample_bytes: 8
            })]
        );
        // The announced payload and its newline are skipped exactly.
        assert_eq!(k.bytes_skipped, 7);
        let (seen, _) = run(
            cfg(1, Format::Real64, ByteOrder::Normal),
            4,
            &[b"#18abcdefgh"],
        );
        assert_eq!(
            seen,
            [Seen::Rejected(BlockError::LengthNotWholeSamples {
                bytes: 8,
                sample_bytes: 16
            })]
        );
    }

    #[test]
    fn point_count_definite_then_next_block_accepted() {
        let three = sample_sweep(3);
        let two = sample_sweep(2);
        for (format, order) in ALL {
            let mut stream = block(format, order, &three);
            stream.extend(block(format, order, &two));
            let (seen, k) = run(cfg(2, format, order), 4, &[&stream]);
            assert_eq!(
                seen,
                [
                    Seen::Rejected(BlockError::PointCount {
                        expected: 2,
                        found: 3
                    }),
                    Seen::Sweep(two.clone())
                ]
            );
            assert_eq!(k.point_count, 1);
        }
    }

    #[test]
    fn point_count_indefinite_longer() {
        let three = sample_sweep(3);
        let bytes = indefinite(Format::Real32, ByteOrder::Swapped, &three);
        let (seen, _) = run(cfg(2, Format::Real32, ByteOrder::Swapped), 4, &[&bytes]);
        assert_eq!(
            seen,
            [Seen::Rejected(BlockError::PointCount {
                expected: 2,
                found: 3
            })]
        );
    }

    #[test]
    fn overflow_definite_and_indefinite() {
        let sweep = sample_sweep(3);
        let f = (Format::Real32, ByteOrder::Normal);
        // K = 3 but the buffer holds 2.
        let (seen, k) = run(cfg(3, f.0, f.1), 2, &[&block(f.0, f.1, &sweep)]);
        assert_eq!(seen, [Seen::Rejected(BlockError::Overflow { capacity: 2 })]);
        assert_eq!(k.overflow, 1);
        let (seen, _) = run(cfg(3, f.0, f.1), 2, &[&indefinite(f.0, f.1, &sweep)]);
        assert_eq!(
            seen[0],
            Seen::Rejected(BlockError::Overflow { capacity: 2 })
        );
        // K = 2, buffer 3, indefinite block of 5 points: stored up to 3, then overflow.
        let five = sample_sweep(5);
        let (seen, _) = run(cfg(2, f.0, f.1), 3, &[&indefinite(f.0, f.1, &five)]);
        assert_eq!(
            seen[0],
            Seen::Rejected(BlockError::Overflow { capacity: 3 })
        );
    }

    #[test]
    fn truncated_at_every_point_of_a_block() {
        let sweep = sample_sweep(2);
        for (format, order) in ALL {
            for b in [
                block(format, order, &sweep),
                indefinite(format, order, &sweep),
            ] {
                // Every cut that leaves the block incomplete (the last byte is the newline).
                for cut in 1..b.len() - 1 {
                    let (seen, k) = run(cfg(2, format, order), 2, &[&b[..cut]]);
                    assert_eq!(seen, [Seen::Rejected(BlockError::Truncated)], "cut {cut}");
                    assert_eq!(k.truncated, 1);
                }
            }
        }
    }

    #[test]
    fn non_finite_values() {
        let f = (Format::Real32, ByteOrder::Normal);
        let good = sample_sweep(3);
        for bad in [f32::NAN, f32::INFINITY, f32::NEG_INFINITY, 9.91e37, -9.9e37] {
            let mut sweep = good.clone();
            sweep[1].im = bad;
            let mut stream = block(f.0, f.1, &sweep);
            stream.extend(indefinite(f.0, f.1, &sweep));
            stream.extend(block(f.0, f.1, &good));
            let (seen, k) = run(cfg(3, f.0, f.1), 3, &[&stream]);
            assert_eq!(
                seen,
                [
                    Seen::Rejected(BlockError::NonFinite { index: 1 }),
                    Seen::Rejected(BlockError::NonFinite { index: 1 }),
                    Seen::Sweep(good.clone())
                ],
                "{bad}"
            );
            assert_eq!(k.non_finite, 2);
        }
        // REAL,64 value beyond f32 range.
        let mut bytes = b"#216".to_vec();
        bytes.extend(1e300f64.to_be_bytes());
        bytes.extend(0f64.to_be_bytes());
        let (seen, _) = run(cfg(1, Format::Real64, ByteOrder::Normal), 1, &[&bytes]);
        assert_eq!(seen, [Seen::Rejected(BlockError::NonFinite { index: 0 })]);
    }

    #[test]
    fn resync_after_garbage() {
        let sweep = sample_sweep(2);
        let f = (Format::Real32, ByteOrder::Normal);
        let mut stream = b"garbage # #x ## hello\n".to_vec();
        stream.extend(block(f.0, f.1, &sweep));
        let (seen, k) = run(cfg(2, f.0, f.1), 2, &[&stream]);
        // One rejection for the garbage run, then the block.
        assert_eq!(
            seen,
            [
                Seen::Rejected(BlockError::HeaderMalformed),
                Seen::Sweep(sweep)
            ]
        );
        assert_eq!(k.bytes_skipped, 22);
    }

    #[test]
    fn huge_announced_length_is_bounded() {
        // 10^9 - 8 bytes would be 124_999_999 points: rejected at the header, far above
        // MAX_SKIP_BYTES, so the decoder resyncs at the next '#' rather than skipping it.
        let sweep = sample_sweep(2);
        let f = (Format::Real32, ByteOrder::Normal);
        let mut stream = b"#9999999992".to_vec();
        stream.extend(std::vec![0x55u8; 100_000]);
        stream.extend(block(f.0, f.1, &sweep));
        let (seen, k) = run(cfg(2, f.0, f.1), 2, &[&stream]);
        assert_eq!(
            seen,
            [
                Seen::Rejected(BlockError::PointCount {
                    expected: 2,
                    found: 124_999_999
                }),
                Seen::Sweep(sweep)
            ]
        );
        assert_eq!(k.bytes_skipped, 11 + 100_000);
    }

    #[test]
    fn every_split_matches_one_chunk() {
        let f = (Format::Real64, ByteOrder::Swapped);
        let sweep = sample_sweep(3);
        let mut bad = sweep.clone();
        bad[2].re = f32::NAN;
        let mut stream = b"\r\nzz#".to_vec();
        stream.extend(block(f.0, f.1, &sweep));
        stream.extend(indefinite(f.0, f.1, &bad));
        stream.extend(b"#15abcde");
        stream.extend(block(f.0, f.1, &sample_sweep(4)));
        stream.extend(indefinite(f.0, f.1, &sweep));
        stream.extend(b"#3");
        let config = cfg(3, f.0, f.1);
        let whole = run(config, 3, &[&stream]);
        assert_eq!(whole.1.accepted, 2);
        assert_eq!(whole.1.rejected(), 5);
        for i in 0..=stream.len() {
            let (a, b) = stream.split_at(i);
            assert_eq!(run(config, 3, &[a, b]), whole, "split at {i}");
        }
        let bytes: Vec<&[u8]> = stream.chunks(1).collect();
        assert_eq!(run(config, 3, &bytes), whole);
    }

    #[test]
    fn emit_errors_and_digits() {
        let sweep = sample_sweep(2);
        let mut out = [0u8; 20];
        // "#216" + 16 bytes + "\n" = 21 bytes.
        assert_eq!(
            emit(Format::Real32, ByteOrder::Normal, &sweep, &mut out),
            Err(EncodeError::BufferTooSmall { needed: 21 })
        );
        assert_eq!(
            emit_indefinite(Format::Real64, ByteOrder::Normal, &sweep, &mut out),
            Err(EncodeError::BufferTooSmall { needed: 35 })
        );
        let mut out = [0u8; 2000];
        let n = emit(
            Format::Real32,
            ByteOrder::Normal,
            &sample_sweep(125),
            &mut out,
        )
        .unwrap();
        assert_eq!(&out[..6], b"#41000");
        assert_eq!(n, 6 + 1000 + 1);
        let n = emit(Format::Real32, ByteOrder::Normal, &[], &mut out).unwrap();
        assert_eq!(&out[..n], b"#10\n");
    }

    #[test]
    fn link_reader_across_small_reads() {
        let f = (Format::Real32, ByteOrder::Swapped);
        let sweep = sample_sweep(4);
        let mut stream = block(f.0, f.1, &sweep);
        stream.extend(b"oops\n");
        stream.extend(block(f.0, f.1, &sweep));
        stream.extend(b"#0\x01");
        let mut link: LinkReader<&[u8], _, 5> =
            LinkReader::new(&stream[..], BlockDecoder::new(cfg(4, f.0, f.1)));
        let mut buf = [Z; 4];
        assert_eq!(
            link.next_event(&mut buf),
            Ok(Some(Event::Sweep { points: 4 }))
        );
        assert_eq!(buf[..], sweep[..]);
        assert_eq!(
            link.next_event(&mut buf),
            Ok(Some(Event::Rejected(BlockError::HeaderMalformed)))
        );
        buf = [Z; 4];
        assert_eq!(
            link.next_event(&mut buf),
            Ok(Some(Event::Sweep { points: 4 }))
        );
        assert_eq!(buf[..], sweep[..]);
        assert_eq!(
            link.next_event(&mut buf),
            Ok(Some(Event::Rejected(BlockError::Truncated)))
        );
        assert_eq!(link.next_event(&mut buf), Ok(None));
        assert_eq!(link.decoder().counters().accepted, 2);
    }

    #[test]
    fn display_texts_are_distinct() {
        let all = [
            BlockError::HeaderMalformed,
            BlockError::LengthNotWholeSamples {
                bytes: 3,
                sample_bytes: 8,
            },
            BlockError::PointCount {
                expected: 1,
                found: 2,
            },
            BlockError::Overflow { capacity: 1 },
            BlockError::Truncated,
            BlockError::NonFinite { index: 0 },
        ];
        let texts: Vec<std::string::String> = all.iter().map(|e| std::format!("{e}")).collect();
        for (i, a) in texts.iter().enumerate() {
            assert!(!a.is_empty());
            for b in &texts[i + 1..] {
                assert_ne!(a, b);
            }
        }
    }

    mod props {
        use super::*;
        use proptest::prelude::*;

        proptest! {
            #![proptest_config(ProptestConfig::with_cases(256))]

            /// Arbitrary bytes, cut at arbitrary places, never panic; every byte and every
            /// event is counted (checked inside `run`).
            #[test]
            fn arbitrary_bytes(data in proptest::collection::vec(any::<u8>(), 0..600),
                               cuts in proptest::collection::vec(0usize..600, 0..6),
                               fmt64 in any::<bool>(), swapped in any::<bool>(),
                               k in 1usize..6, cap in 0usize..8) {
                let format = if fmt64 { Format::Real64 } else { Format::Real32 };
                let order = if swapped { ByteOrder::Swapped } else { ByteOrder::Normal };
                let mut cuts: Vec<usize> = cuts.into_iter().map(|c| c.min(data.len())).collect();
                cuts.sort_unstable();
                let mut chunks = Vec::new();
                let mut at = 0;
                for c in cuts { chunks.push(&data[at..c]); at = c; }
                chunks.push(&data[at..]);
                let split = run(cfg(k, format, order), cap, &chunks);
                prop_assert_eq!(&split, &run(cfg(k, format, order), cap, &[&data]));
            }

            /// Valid blocks mixed with garbage: the valid blocks after a garbage run that
            /// holds no '#' all come through.
            #[test]
            fn blocks_survive_garbage(garbage in proptest::collection::vec(any::<u8>(), 0..40),
                                      n in 1usize..4) {
                let garbage: Vec<u8> = garbage.into_iter().filter(|&b| b != b'#').collect();
                let sweep = sample_sweep(3);
                let mut stream = garbage;
                for _ in 0..n {
                    stream.extend(block(Format::Real32, ByteOrder::Normal, &sweep));
                }
                let (seen, k) = run(cfg(3, Format::Real32, ByteOrder::Normal), 3, &[&stream]);
                prop_assert_eq!(k.accepted as usize, n);
                prop_assert!(k.rejected() <= 1);
                prop_assert_eq!(seen.len() - n, k.rejected() as usize);
            }
        }
    }
}
