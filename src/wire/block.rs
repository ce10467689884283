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

const SCPI_INFINITY_BITS: u32 = SCPI_INFINITY.to_bits();
const SCPI_NAN_BITS: u32 = SCPI_NAN.to_bits();
/// Everything but the sign bit.
const MAGNITUDE_BITS: u32 = 0x7FFF_FFFF;

/// [`usable_f32`] on the bits of the value. With the sign cleared, IEEE 754 bit patterns are
/// ordered as the magnitudes they stand for, so every unusable value (the SCPI codes,
/// infinities, NaNs) has its magnitude bits at or above those of 9.9e37.
#[inline(always)]
fn usable_bits32(bits: u32) -> bool {
    let a = bits & MAGNITUDE_BITS;
    a < f32::INFINITY.to_bits() && a != SCPI_INFINITY_BITS && a != SCPI_NAN_BITS
}

/// [`usable_f64`] on the bits of the value (same ordering argument; NaNs lie above the
/// largest f32 too).
#[inline(always)]
fn usable_bits64(bits: u64) -> bool {
    let a = bits & 0x7FFF_FFFF_FFFF_FFFF;
    a <= (f32::MAX as f64).to_bits() && a != 9.9e37f64.to_bits() && a != 9.91e37f64.to_bits()
}

/// One REAL,32 sample from its 8 bytes, if both values are usable.
#[inline(always)]
fn real32_sample<const BIG_ENDIAN: bool>(bytes: &[u8; 8]) -> Option<Complex32> {
    let (re, im) = real32_words::<BIG_ENDIAN>(bytes);
    (usable_bits32(re) && usable_bits32(im))
        .then(|| Complex32::new(f32::from_bits(re), f32::from_bits(im)))
}

/// The bits of a REAL,32 sample's two values.
#[inline(always)]
fn real32_words<const BIG_ENDIAN: bool>(b: &[u8; 8]) -> (u32, u32) {
    // One 8-byte little-endian read, split (the compiler then loads words, not bytes).
    let v = u64::from_le_bytes(*b);
    let (lo, hi) = (v as u32, (v >> 32) as u32);
    if BIG_ENDIAN {
        (lo.swap_bytes(), hi.swap_bytes())
    } else {
        (lo, hi)
    }
}

/// Fills `dst` with whole REAL,32 samples from `src` and returns all their words ORed
/// together (see [`all_usable`]); `None`, with nothing written, if `src` is too short.
#[inline(never)]
fn real32_copy<const BIG_ENDIAN: bool>(src: &[u8], dst: &mut [Complex32]) -> Option<u32> {
    real32_copy_here::<BIG_ENDIAN>(src, dst, 0)
}

/// [`real32_copy`] inlined where it is called (the fast path of a chunk saves the call),
/// the words ORed into `any`.
#[inline(always)]
fn real32_copy_here<const BIG_ENDIAN: bool>(
    src: &[u8],
    dst: &mut [Complex32],
    mut any: u32,
) -> Option<u32> {
    if let Some(any) = crate::loops::real32_copy(src, dst, BIG_ENDIAN, any) {
        return Some(any);
    }
    let src = src.get(..8 * dst.len())?;
    for (o, b) in dst.iter_mut().zip(src.chunks_exact(8)) {
        let (re, im) = real32_words::<BIG_ENDIAN>(&eight(b));
        any |= re | im;
        *o = Complex32::new(f32::from_bits(re), f32::from_bits(im));
    }
    Some(any)
}

/// Whether every value a [`real32_copy`] wrote to `dst` is usable, given the OR of their
/// words. Every unusable value has its magnitude bits at or above those of the smallest
/// SCPI code, and an OR is at least as large as each of its terms, so a small OR clears
/// them all at once. A large one is not proof of anything (values on both sides of a
/// power of two OR into a larger exponent: 0.5 | 2.0 has the bits of 2^127), so then each
/// value is checked.
///
/// The quick test compares with 2^126 (bits 0x7E80_0000), just below the smallest code,
/// 9.9e37 (bits 0x7E94_F56A): shifted left past the sign, its bits are a constant a
/// Cortex-M4 compare holds in the instruction itself. An OR between the two falls to the
/// value-by-value check.
#[inline(always)]
fn all_usable(any: u32, dst: &[Complex32]) -> bool {
    const QUICK_BOUND: u32 = 0x7E80_0000;
    const _: () = assert!(QUICK_BOUND <= SCPI_INFINITY_BITS && QUICK_BOUND <= SCPI_NAN_BITS);
    any << 1 < QUICK_BOUND << 1
        || dst
            .iter()
            .all(|z| usable_bits32(z.re.to_bits()) && usable_bits32(z.im.to_bits()))
}

/// The 8 bytes of a sample from a slice of exactly 8 (as `chunks_exact(8)` gives).
#[inline(always)]
fn eight(b: &[u8]) -> [u8; 8] {
    b.first_chunk::<8>().copied().unwrap_or_default()
}

/// Decodes whole REAL,32 samples (8 bytes each) from `bytes` into `out`, in order; returns
/// how many lead up to the first sample holding an unusable value (all of them if none
/// does). Samples after an unusable one may be written too.
#[inline(always)]
fn real32_samples<const BIG_ENDIAN: bool>(bytes: &[u8], out: &mut [Complex32]) -> usize {
    let n = out.len().min(bytes.len() / 8);
    let Some(dst) = out.get_mut(..n) else {
        return 0;
    };
    let Some(any) = real32_copy::<BIG_ENDIAN>(bytes, dst) else {
        return 0;
    };
    if all_usable(any, dst) {
        return n;
    }
    // An unusable value somewhere: the first sample holding one.
    bytes
        .chunks_exact(8)
        .take(n)
        .position(|b| real32_sample::<BIG_ENDIAN>(&eight(b)).is_none())
        .unwrap_or(n)
}

/// As [`real32_samples`] for REAL,64 (16 bytes a sample), narrowed to f32.
#[inline(always)]
fn real64_samples<const BIG_ENDIAN: bool>(bytes: &[u8], out: &mut [Complex32]) -> usize {
    let mut done = 0;
    for (o, b) in out.iter_mut().zip(bytes.chunks_exact(16)) {
        let (lo, hi) = b.split_at(8);
        let (lo, hi) = (eight(lo), eight(hi));
        let (re, im) = if BIG_ENDIAN {
            (u64::from_be_bytes(lo), u64::from_be_bytes(hi))
        } else {
            (u64::from_le_bytes(lo), u64::from_le_bytes(hi))
        };
        if !(usable_bits64(re) && usable_bits64(im)) {
            break;
        }
        *o = Complex32::new(f64::from_bits(re) as f32, f64::from_bits(im) as f32);
        done += 1;
    }
    done
}

/// Whole samples of `config`'s format and byte order from `bytes` into `out` (see
/// [`real32_samples`]). One loop per format and order, each free of per-value decisions.
#[inline(never)]
fn decode_samples(config: &BlockConfig, bytes: &[u8], out: &mut [Complex32]) -> usize {
    match (config.format, config.order) {
        (Format::Real32, ByteOrder::Normal) => real32_samples::<true>(bytes, out),
        (Format::Real32, ByteOrder::Swapped) => real32_samples::<false>(bytes, out),
        (Format::Real64, ByteOrder::Normal) => real64_samples::<true>(bytes, out),
        (Format::Real64, ByteOrder::Swapped) => real64_samples::<false>(bytes, out),
    }
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
pub enum DecodeEvent<E> {
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
    pub event: Option<DecodeEvent<E>>,
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
    NextEvent(DecodeEvent<BlockError>),
    /// Byte not consumed (the new state handles it), event.
    DecodeEvent(DecodeEvent<BlockError>),
    /// Byte not consumed, new state handles it, no event.
    Again,
}

/// Room before the sample being assembled in [`BlockDecoder`]'s buffer: the REAL,32 fast
/// path moves a chunk's last 8 bytes in as one word so that the few that start a sample
/// land at its start, the others before it.
const CARRY: usize = 8;

/// Streaming, sans-IO decoder of IEEE 488.2 arbitrary blocks into a sweep buffer.
///
/// The buffer passed to [`BlockDecoder::feed`] must be the same across the calls that
/// make up one block; its length is the capacity. It holds a sweep only once
/// [`DecodeEvent::Sweep`] is reported (a rejected block may have overwritten part of it).
///
/// ```
/// use sweepgate::Complex32;
/// use sweepgate::wire::block::{emit, BlockConfig, BlockDecoder, ByteOrder, DecodeEvent, Format};
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
/// assert_eq!(fed.event, Some(DecodeEvent::Sweep { points: 2 }));
/// assert_eq!(&buf[..2], &sweep);
/// assert_eq!(dec.counters().accepted, 1);
/// ```
#[derive(Debug, Clone)]
pub struct BlockDecoder {
    config: BlockConfig,
    state: State,
    /// The sample being assembled: its first `fill` bytes at `sample[CARRY..]`.
    sample: [u8; CARRY + 16],
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
            sample: [0; CARRY + 16],
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
        // The REAL,32 fast path first; the general path is a function of its own, so that
        // the common chunk (all payload) pays for none of its registers and set-up.
        let pos = match self.real32_run(chunk, out) {
            Some((consumed, event)) if event.is_some() || consumed == chunk.len() => {
                return Feed { consumed, event }
            }
            Some((consumed, _)) => consumed,
            None => 0,
        };
        self.feed_from(chunk, out, pos, true)
    }

    /// [`BlockDecoder::feed`], with or without the fast path for the payload of a definite
    /// block (`fast`); the byte-by-byte path alone is the reference the tests hold the fast
    /// path to.
    #[cfg(test)]
    fn feed_with(&mut self, chunk: &[u8], out: &mut [Complex32], fast: bool) -> Feed<BlockError> {
        if fast {
            self.feed(chunk, out)
        } else {
            self.feed_from(chunk, out, 0, false)
        }
    }

    /// The rest of [`BlockDecoder::feed`] from `chunk[pos..]`, with or without the fast
    /// path for the payload of a definite block (`fast`).
    #[inline(never)]
    fn feed_from(
        &mut self,
        chunk: &[u8],
        out: &mut [Complex32],
        mut pos: usize,
        fast: bool,
    ) -> Feed<BlockError> {
        while let Some(rest) = chunk.get(pos..).filter(|r| !r.is_empty()) {
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
            if fast {
                // A whole header, or a run of a definite payload, at once.
                let run = match self.header_run(rest, out.len()) {
                    Some(taken) => Some(taken),
                    None => self.definite_run(rest, out),
                };
                if let Some((n, event)) = run {
                    pos += n;
                    if event.is_some() {
                        return Feed {
                            consumed: pos,
                            event,
                        };
                    }
                    continue;
                }
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
                Step::DecodeEvent(e) => {
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

    /// Fast path for a whole definite header at the start of `rest` while waiting for a
    /// block (`#`, a digit 1-9, that many digits): taken at once, with the byte path's effect
    /// on state, counters and events. `None` when the byte path must go on: another state,
    /// another byte, a header split across chunks or a non-digit in the count.
    fn header_run(
        &mut self,
        rest: &[u8],
        capacity: usize,
    ) -> Option<(usize, Option<DecodeEvent<BlockError>>)> {
        if !matches!(self.state, State::Idle) {
            return None;
        }
        let [b'#', d @ b'1'..=b'9', tail @ ..] = rest else {
            return None;
        };
        let n = usize::from(d - b'0');
        let mut len = 0u32;
        for &b in tail.get(..n)? {
            if !b.is_ascii_digit() {
                return None;
            }
            // At most 9 digits: below 10^9, fits u32 (as the byte path).
            len = len.saturating_mul(10).saturating_add(u32::from(b - b'0'));
        }
        self.pending += 2 + n as u64;
        Some((2 + n, self.header_done(len, capacity)))
    }

    /// Fast path inside a definite block: takes as much of `rest` as it can without the
    /// byte-by-byte state machine, with the byte path's effect on events, counters and the
    /// samples of an accepted block. It completes a sample split across chunks, decodes
    /// whole samples straight from the chunk (byte-order swap and copy), keeps the start of
    /// a sample the chunk ends in, and accepts the block when its last sample arrives.
    /// Returns the bytes taken and the accepting event, or `None` when the byte path must
    /// go on: outside a definite payload, at a sample with an unusable value or with the
    /// buffer full (the byte path then decodes that sample again and reports it; the buffer
    /// of a rejected block may hold more of it than the byte path would have written).
    fn definite_run(
        &mut self,
        rest: &[u8],
        out: &mut [Complex32],
    ) -> Option<(usize, Option<DecodeEvent<BlockError>>)> {
        let State::Definite { left, index } = self.state else {
            return None;
        };
        self.any_run(rest, out, left, index)
    }

    /// The REAL,32 fast path at the start of a chunk (see [`BlockDecoder::real32_run_as`]).
    #[inline(always)]
    fn real32_run(
        &mut self,
        chunk: &[u8],
        out: &mut [Complex32],
    ) -> Option<(usize, Option<DecodeEvent<BlockError>>)> {
        match (self.state, self.config.format, self.config.order) {
            (State::Definite { left, index }, Format::Real32, ByteOrder::Normal) => {
                self.real32_run_as::<true>(chunk, out, left, index)
            }
            (State::Definite { left, index }, Format::Real32, ByteOrder::Swapped) => {
                self.real32_run_as::<false>(chunk, out, left, index)
            }
            _ => None,
        }
    }

    /// [`BlockDecoder::definite_run`] for REAL,32 in the common case, a chunk at a time: at
    /// least a sample's worth of the block in the chunk, room in the buffer and no unusable
    /// value. Otherwise it returns `None` having changed nothing the decoder reads later
    /// (the general path then takes the chunk). A sample split across chunks is put
    /// together from whole words, not byte by byte.
    #[inline(always)]
    fn real32_run_as<const BIG_ENDIAN: bool>(
        &mut self,
        chunk: &[u8],
        out: &mut [Complex32],
        left: u32,
        index: u32,
    ) -> Option<(usize, Option<DecodeEvent<BlockError>>)> {
        // This block's bytes in the chunk, at least a sample's worth.
        let len = chunk.len().min(left as usize);
        let chunk = chunk.get(..len)?;
        let (head, last) = (chunk.first_chunk::<8>()?, chunk.last_chunk::<8>()?);
        // A REAL,32 sample is 8 bytes, so fewer than 8 are ever carried (every path that
        // sets `fill` keeps it below the sample size); the mask only tells the compiler so.
        debug_assert!(self.fill < 8);
        let fill = usize::from(self.fill) & 7;
        // The first sample is the carried bytes (none when `fill` is 0) and the chunk's first
        // bytes behind them; whole samples follow in `body`. (What lands in the carry beyond
        // the sample is never read: later bytes are assembled over it.)
        let body = chunk.get(8 - fill..)?;
        let samples = 1 + body.len() / 8;
        let dst = out.get_mut(index as usize..)?.get_mut(..samples)?;
        let carry = &mut self.sample[CARRY..CARRY + 16];
        carry[fill..fill + 8].copy_from_slice(head);
        let (re, im) = real32_words::<BIG_ENDIAN>(carry.first_chunk::<8>()?);
        let (first, rest) = dst.split_first_mut()?;
        *first = Complex32::new(f32::from_bits(re), f32::from_bits(im));
        let any = real32_copy_here::<BIG_ENDIAN>(body, rest, re | im)?;
        if !all_usable(any, dst) {
            // An unusable value: the general path decodes the chunk again and reports it.
            return None;
        }
        // The chunk ends inside a sample: carry its first bytes. The chunk's last word goes
        // in so that they land at the carry's start (the bytes before it are not read).
        let t = body.len() % 8;
        self.sample[CARRY + t - 8..CARRY + t].copy_from_slice(last);
        self.fill = t as u8;
        self.run_end(len, left - len as u32, index + samples as u32)
    }

    /// [`BlockDecoder::definite_run`] for any format, the carried bytes copied one by one.
    fn any_run(
        &mut self,
        rest: &[u8],
        out: &mut [Complex32],
        mut left: u32,
        mut index: u32,
    ) -> Option<(usize, Option<DecodeEvent<BlockError>>)> {
        let config = self.config;
        let decode = |bytes: &[u8], out: &mut [Complex32]| decode_samples(&config, bytes, out);
        let sb = config.format.sample_bytes();
        let mut taken = 0usize;
        let fill = usize::from(self.fill);
        if fill != 0 {
            // The chunk before ended inside a sample (never past the block: `left` counts
            // the sample's missing bytes too).
            let need = sb.checked_sub(fill)?;
            if rest.len() < need {
                let n = rest.len();
                self.sample
                    .get_mut(CARRY + fill..CARRY + fill + n)?
                    .copy_from_slice(rest);
                self.fill += n as u8;
                self.pending += n as u64;
                self.state = State::Definite {
                    left: left - n as u32,
                    index,
                };
                return (n > 0).then_some((n, None));
            }
            let mut sample = self.sample;
            sample
                .get_mut(CARRY + fill..CARRY + sb)?
                .copy_from_slice(rest.get(..need)?);
            let slot = out.get_mut(index as usize..index as usize + 1)?;
            if decode(&sample[CARRY..CARRY + sb], slot) == 0 {
                return None;
            }
            self.fill = 0;
            index += 1;
            left -= need as u32;
            taken = need;
        }
        // Whole samples, the block's last one included.
        let room = out.len().saturating_sub(index as usize);
        let whole = ((rest.len() - taken) / sb)
            .min(left as usize / sb)
            .min(room);
        let at = index as usize;
        let done = match (
            rest.get(taken..taken + whole * sb),
            out.get_mut(at..at + whole),
        ) {
            (Some(bytes), Some(dst)) => decode(bytes, dst),
            _ => 0,
        };
        index += done as u32;
        left -= (done * sb) as u32;
        taken += done * sb;
        // A chunk ending inside a sample: keep its first bytes (they cannot complete it).
        let tail = rest.len() - taken;
        if done == whole && tail > 0 && tail < sb && (tail as u32) < left {
            if let (Some(dst), Some(src)) =
                (self.sample.get_mut(CARRY..CARRY + tail), rest.get(taken..))
            {
                dst.copy_from_slice(src);
                self.fill = tail as u8;
                left -= tail as u32;
                taken += tail;
            }
        }
        self.run_end(taken, left, index)
    }

    /// Records what a fast run took: the bytes are pending in the block, which is accepted
    /// when its last byte has arrived.
    #[inline(always)]
    fn run_end(
        &mut self,
        taken: usize,
        left: u32,
        index: u32,
    ) -> Option<(usize, Option<DecodeEvent<BlockError>>)> {
        if taken == 0 {
            return None;
        }
        self.pending += taken as u64;
        if left == 0 {
            self.state = State::AfterBlock { accepted: true };
            return Some((taken, Some(self.accept(index))));
        }
        self.state = State::Definite { left, index };
        Some((taken, None))
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

    fn reject(&mut self, e: BlockError) -> DecodeEvent<BlockError> {
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
        DecodeEvent::Rejected(e)
    }

    fn accept(&mut self, points: u32) -> DecodeEvent<BlockError> {
        self.counters.accepted = self.counters.accepted.saturating_add(1);
        self.counters.bytes_accepted = self.counters.bytes_accepted.saturating_add(self.pending);
        self.pending = 0;
        DecodeEvent::Sweep {
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
    fn header_done(&mut self, len: u32, capacity: usize) -> Option<DecodeEvent<BlockError>> {
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
        if let Some(slot) = self.sample.get_mut(CARRY + self.fill as usize) {
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
        let mut bytes = [0u8; 16];
        bytes.copy_from_slice(&self.sample[CARRY..]);
        let [a0, a1, a2, a3, a4, a5, a6, a7, a8, a9, a10, a11, a12, a13, a14, a15] = bytes;
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
                    Step::DecodeEvent(self.reject(BlockError::HeaderMalformed))
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
                    Step::DecodeEvent(self.reject(BlockError::HeaderMalformed))
                }
            },
            State::LenDigits { left, len } => {
                if !b.is_ascii_digit() {
                    self.state = State::Resync;
                    return Step::DecodeEvent(self.reject(BlockError::HeaderMalformed));
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
                return Step::DecodeEvent(self.reject(BlockError::Overflow {
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
/// use sweepgate::wire::block::{emit, BlockConfig, BlockDecoder, ByteOrder, DecodeEvent, Format, LinkReader};
/// let sweep = [Complex32::new(0.5, 0.5); 3];
/// let mut bytes = [0u8; 64];
/// let n = emit(Format::Real64, ByteOrder::Swapped, &sweep, &mut bytes).unwrap();
/// let cfg = BlockConfig::new(3, Format::Real64, ByteOrder::Swapped).unwrap();
/// let mut link: LinkReader<&[u8], _, 16> = LinkReader::new(&bytes[..n], BlockDecoder::new(cfg));
/// let mut buf = [Complex32::new(0.0, 0.0); 3];
/// assert_eq!(link.next_event(&mut buf), Ok(Some(DecodeEvent::Sweep { points: 3 })));
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
    ) -> Result<Option<DecodeEvent<D::Error>>, R::Error> {
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
                return Ok(self.decoder.finish().map(DecodeEvent::Rejected));
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
        run_with(config, cap, chunks, true)
    }

    /// As [`run`], through the byte-by-byte path alone (`fast` false).
    fn run_with(
        config: BlockConfig,
        cap: usize,
        chunks: &[&[u8]],
        fast: bool,
    ) -> (Vec<Seen>, BlockCounters) {
        let mut dec = BlockDecoder::new(config);
        let mut buf = std::vec![Z; cap];
        let mut seen = Vec::new();
        let mut total = 0u64;
        for chunk in chunks {
            let mut rest: &[u8] = chunk;
            loop {
                let fed = dec.feed_with(rest, &mut buf, fast);
                total += fed.consumed as u64;
                rest = &rest[fed.consumed..];
                match fed.event {
                    Some(DecodeEvent::Sweep { points }) => {
                        seen.push(Seen::Sweep(buf[..points].to_vec()))
                    }
                    Some(DecodeEvent::Rejected(e)) => seen.push(Seen::Rejected(e)),
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
            Ok(Some(DecodeEvent::Sweep { points: 4 }))
        );
        assert_eq!(buf[..], sweep[..]);
        assert_eq!(
            link.next_event(&mut buf),
            Ok(Some(DecodeEvent::Rejected(BlockError::HeaderMalformed)))
        );
        buf = [Z; 4];
        assert_eq!(
            link.next_event(&mut buf),
            Ok(Some(DecodeEvent::Sweep { points: 4 }))
        );
        assert_eq!(buf[..], sweep[..]);
        assert_eq!(
            link.next_event(&mut buf),
            Ok(Some(DecodeEvent::Rejected(BlockError::Truncated)))
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

    /// A stream that visits every branch of the payload path: good blocks, a split sample
    /// at every offset, unusable values (SCPI codes, NaN, infinity) in the first, a middle
    /// and the last sample, wrong point counts, an indefinite block, garbage, and a block cut
    /// short by the end of the stream.
    fn mixed_stream(format: Format, order: ByteOrder) -> Vec<u8> {
        let sweep = sample_sweep(5);
        let mut stream = b"\r\n".to_vec();
        stream.extend(block(format, order, &sweep));
        for (at, bad) in [
            (0usize, 9.9e37f32),
            (2, f32::NAN),
            (4, -9.91e37),
            (4, f32::INFINITY),
        ] {
            let mut s = sweep.clone();
            s[at].im = bad;
            stream.extend(block(format, order, &s));
        }
        stream.extend(block(format, order, &sample_sweep(4)));
        // Values on both sides of 2.0 (their words OR into the bits of a huge value).
        let wide = [
            c(0.5, 3.0),
            c(-1e-20, 7e20),
            c(1.5, -2.5),
            c(0.0, 1e30),
            c(2.0, 0.75),
        ];
        stream.extend(block(format, order, &wide));
        stream.extend(b"xx");
        stream.extend(block(format, order, &sweep));
        stream.extend(indefinite(format, order, &sweep));
        stream.extend(block(format, order, &sweep));
        let cut = block(format, order, &sweep);
        stream.extend(&cut[..cut.len() - 5]);
        stream
    }

    #[test]
    fn fast_path_equals_byte_path_at_every_split_and_chunk_size() {
        // The fast path must be invisible: the same events, samples and counters as the
        // byte-by-byte path (the reference here) for every way of cutting the stream.
        for (format, order) in ALL {
            let stream = mixed_stream(format, order);
            let config = cfg(5, format, order);
            let whole = run_with(config, 5, &[&stream], false);
            // The f32 SCPI codes widened to f64 are not the f64 codes: ordinary values there.
            let scpi_rejected = if format == Format::Real32 { 2 } else { 0 };
            assert_eq!(whole.1.accepted, 7 - scpi_rejected, "{format:?} {order:?}");
            assert_eq!(
                whole.1.non_finite,
                2 + scpi_rejected,
                "{format:?} {order:?}"
            );
            assert_eq!(whole.1.point_count, 1);
            assert_eq!(whole.1.truncated, 1);
            assert_eq!(run(config, 5, &[&stream]), whole);
            for i in 0..=stream.len() {
                let (a, b) = stream.split_at(i);
                assert_eq!(
                    run(config, 5, &[a, b]),
                    whole,
                    "{format:?} {order:?} split {i}"
                );
            }
            for size in (1..=40).chain([63, 64, 65, 4096]) {
                let chunks: Vec<&[u8]> = stream.chunks(size).collect();
                assert_eq!(
                    run(config, 5, &chunks),
                    whole,
                    "{format:?} {order:?} {size}"
                );
            }
        }
    }

    #[test]
    fn fast_path_with_a_short_buffer_reports_overflow_as_the_byte_path_does() {
        // The buffer given with the payload may be shorter than the one the header was
        // checked against; the sample that does not fit is the byte path's to report.
        for (format, order) in ALL {
            let bytes = block(format, order, &sample_sweep(5));
            let config = cfg(5, format, order);
            for i in 1..bytes.len() {
                let (a, b) = bytes.split_at(i);
                let mut slow = BlockDecoder::new(config);
                let mut fast = BlockDecoder::new(config);
                let (mut big, mut small) = ([Z; 5], [Z; 3]);
                let (mut big2, mut small2) = ([Z; 5], [Z; 3]);
                let s1 = slow.feed_with(a, &mut big, false);
                let f1 = fast.feed(a, &mut big2);
                assert_eq!(s1, f1, "split {i}");
                let s2 = slow.feed_with(b, &mut small, false);
                let f2 = fast.feed(b, &mut small2);
                assert_eq!(s2, f2, "split {i}");
                assert_eq!((big, small), (big2, small2), "split {i}");
                assert_eq!(slow.counters(), fast.counters(), "split {i}");
                assert_eq!(slow.bytes_pending(), fast.bytes_pending(), "split {i}");
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

            /// The fast path against the byte path on arbitrary bytes at arbitrary cuts.
            #[test]
            fn fast_path_equals_byte_path(data in proptest::collection::vec(any::<u8>(), 0..600),
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
                let config = cfg(k, format, order);
                prop_assert_eq!(run(config, cap, &chunks), run_with(config, cap, &chunks, false));
            }

            /// Well-formed blocks of arbitrary bit patterns (NaNs, infinities, SCPI codes,
            /// subnormals and all), both byte orders and formats, cut anywhere: the fast path
            /// gives the byte path's samples, rejections and counters.
            #[test]
            fn fast_path_equals_byte_path_on_arbitrary_values(
                    words in proptest::collection::vec(any::<u32>(), 2..40),
                    specials in proptest::collection::vec((0usize..40, 0usize..6), 0..3),
                    cuts in proptest::collection::vec(0usize..800, 0..5),
                    fmt64 in any::<bool>(), swapped in any::<bool>()) {
                let format = if fmt64 { Format::Real64 } else { Format::Real32 };
                let order = if swapped { ByteOrder::Swapped } else { ByteOrder::Normal };
                // Mostly ordinary values, from 2^-31 to 2^32 (their words OR into the bits of
                // huge values, so the fast path's second look is taken too), a few special
                // ones placed on purpose.
                let mut values: Vec<f32> = words
                    .iter()
                    .map(|&w| {
                        let exponent = 0x60 + ((w >> 24) & 0x3F);
                        f32::from_bits((w & 0x807F_FFFF) | (exponent << 23))
                    })
                    .collect();
                let special = [f32::NAN, f32::INFINITY, 9.9e37, -9.91e37, 1e-40, f32::MAX];
                for (at, which) in specials {
                    if let Some(v) = values.get_mut(at) {
                        *v = special[which];
                    }
                }
                let sweep: Vec<Complex32> =
                    values.chunks_exact(2).map(|p| c(p[0], p[1])).collect();
                let mut stream = block(format, order, &sweep);
                stream.extend(block(format, order, &sweep));
                let mut cuts: Vec<usize> = cuts.into_iter().map(|c| c.min(stream.len())).collect();
                cuts.sort_unstable();
                let mut chunks = Vec::new();
                let mut at = 0;
                for c in cuts { chunks.push(&stream[at..c]); at = c; }
                chunks.push(&stream[at..]);
                let config = cfg(sweep.len(), format, order);
                let slow = run_with(config, sweep.len(), &chunks, false);
                prop_assert_eq!(&run(config, sweep.len(), &chunks), &slow);
                prop_assert_eq!(slow.1.accepted + slow.1.non_finite, 2);
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
