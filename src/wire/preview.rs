//! Preview records a board sends for each closed bin and for scan status.
//!
//! # Framing
//!
//! Each record travels as one frame on a byte link that may flip, drop or insert bytes:
//!
//! ```text
//! COBS( kind u8 | version u8 | seq u16 | body … | crc32 u32 ) 0x00
//! ```
//!
//! All multi-byte fields are little-endian; `f32` is IEEE 754 binary32. The CRC is CRC-32
//! (IEEE 802.3 polynomial 0x04C11DB7, reflected, init and final XOR 0xFFFFFFFF, as zlib)
//! over kind, version, seq and body. COBS (consistent overhead byte stuffing, Cheshire &
//! Baker 1999) removes every 0x00 from the frame, so 0x00 marks frame ends only, and a
//! receiver that lost its place resynchronises at the next 0x00. `seq` counts frames sent
//! (wrapping), so a receiver can tell how many it missed.
//!
//! # PreviewRecord layouts (version 1)
//!
//! Kind 1, **bin** ([`BinRecord`]), body 25 + 22·n bytes (25 + 18·n from senders before the
//! angle offsets were added: the table up to the values, read with every offset 0):
//!
//! | offset | size | type | field |
//! |---:|---:|---|---|
//! | 0 | 2 | u16 | bin index |
//! | 2 | 2 | u16 | flags ([`crate::bins::BinFlags`] bits) |
//! | 4 | 4 | u32 | sweeps averaged |
//! | 8 | 4 | f32 | nominal angle, deg |
//! | 12 | 4 | f32 | mean measured angle, deg |
//! | 16 | 4 | f32 | largest smear, deg |
//! | 20 | 4 | f32 | echo level, dB (NaN = not computed) |
//! | 24 | 1 | u8 | n, pattern frequencies (≤ [`MAX_FREQUENCIES`]) |
//! | 25 + 18·i | 2 | u16 | grid index of frequency i |
//! | 27 + 18·i | 4 | f32 | raw value, real |
//! | 31 + 18·i | 4 | f32 | raw value, imaginary |
//! | 35 + 18·i | 4 | f32 | gated value, real |
//! | 39 + 18·i | 4 | f32 | gated value, imaginary |
//! | 25 + 18·n + 4·i | 4 | f32 | angle offset of frequency i, deg ([`FreqValue::angle_offset_deg`]) |
//!
//! Kind 2, **status** ([`StatusRecord`]), body 42 bytes:
//!
//! | offset | size | type | field |
//! |---:|---:|---|---|
//! | 0 | 8 | u64 | time of the newest positioner sample, µs |
//! | 8 | 4 | f32 | positioner angle, deg (NaN = none yet) |
//! | 12 | 4 | f32 | positioner speed, deg/s (NaN = unknown) |
//! | 16 | 1 | u8 | state ([`PositionerState`]: 0 no angle, 1 moving, 2 settled, 3 stalled, 4 finished) |
//! | 17 | 1 | u8 | reserved, 0 |
//! | 18 | 2 | u16 | open bin index (0xFFFF = none) |
//! | 20 | 2 | u16 | bins closed so far (saturating) |
//! | 22 | 4 | u32 | sweeps pushed |
//! | 26 | 4 | u32 | sweeps binned |
//! | 30 | 4 | u32 | sweeps rejected |
//! | 34 | 4 | u32 | angle samples pushed |
//! | 38 | 4 | u32 | angle samples rejected |
//!
//! Kind 3, **impulse response** ([`ImpulseRecord`], [`crate::wire::impulse`]), body 19 + n
//! bytes: a closed bin's impulse response around the gate (centre ± 2 spans), decimated to
//! n ≤ 64 points, each the strongest sample of its group; sent for one closed bin in
//! [`crate::scan::ScanConfig::impulse_every`] when the FFT path runs:
//!
//! | offset | size | type | field |
//! |---:|---:|---|---|
//! | 0 | 2 | u16 | bin index |
//! | 2 | 4 | f32 | nominal angle, deg |
//! | 6 | 4 | f32 | delay of the first point, ns |
//! | 10 | 4 | f32 | delay between points, ns |
//! | 14 | 4 | f32 | level of the strongest point, dB (20·log10 \|h\|) |
//! | 18 | 1 | u8 | n, points (≤ 64) |
//! | 19 + i | 1 | u8 | point i: dB below the strongest × 2 (255 = 127.5 dB or more below) |
//! Kind 4, **cut bin** ([`CutRecord`](super::cut_record::CutRecord), from
//! [`crate::cuts`]), body 28 + 2·n + 16·t·n + 4·t bytes for t traces (1…4) of n pattern
//! frequencies, at most the longest bin record body (729 bytes: e.g. two traces of up to 21
//! frequencies):
//!
//! | offset | size | type | field |
//! |---:|---:|---|---|
//! | 0 | 2 | u16 | cut index |
//! | 2 | 4 | f32 | the cut's nominal second-axis value, deg |
//! | 6 | 4 | f32 | mean second-axis angle of the bin's sweeps, deg |
//! | 10 | 2 | u16 | bin index (first axis) |
//! | 12 | 2 | u16 | flags ([`crate::bins::BinFlags`] bits) |
//! | 14 | 4 | u32 | sweeps averaged |
//! | 18 | 4 | f32 | nominal first-axis angle, deg |
//! | 22 | 4 | f32 | mean measured first-axis angle, deg |
//! | 26 | 1 | u8 | t, traces |
//! | 27 | 1 | u8 | n, pattern frequencies |
//! | 28 + 2·i | 2 | u16 | grid index of frequency i |
//! | 28 + 2·n + 16·(j·n + i) | 4 × 4 | f32 | trace j, frequency i: raw re, raw im, gated re, gated im |
//! | 28 + 2·n + 16·t·n + 4·j | 4 | f32 | trace j's echo level, dB (NaN = not computed) |
//!
//! ```
//! use sweepgate::wire::preview::{encode_frame, Decoder, PreviewRecord, StatusRecord, PositionerState, MAX_FRAME};
//! let rec: PreviewRecord<4> = PreviewRecord::Status(StatusRecord {
//!     time_us: 1_000, angle_deg: 12.5, speed_deg_s: 3.0, state: PositionerState::Moving,
//!     open_bin: Some(12), bins_closed: 12, sweeps_pushed: 40, sweeps_binned: 39,
//!     sweeps_rejected: 1, angles_pushed: 400, angles_rejected: 0,
//! });
//! let mut frame = [0u8; MAX_FRAME];
//! let n = encode_frame(&rec, 7, &mut frame).unwrap();
//! let mut dec: Decoder<4, 1024> = Decoder::new();
//! let mut got = None;
//! dec.feed(&frame[..n], |seq, r| got = Some((seq, r)));
//! assert_eq!(got, Some((7, rec)));
//! assert_eq!(dec.counters().good, 1);
//! ```

pub use super::cut_record::CutRecord;
use crate::error::{EmitError, FrameError};
use crate::Complex32;

/// PreviewRecord format version written and read here.
pub const VERSION: u8 = 1;
/// Kind byte of a [`BinRecord`].
pub const KIND_BIN: u8 = 1;
/// Kind byte of a [`StatusRecord`].
pub const KIND_STATUS: u8 = 2;
/// Kind byte of an [`ImpulseRecord`].
pub const KIND_IMPULSE: u8 = 3;

pub use crate::wire::impulse::ImpulseRecord;
/// Kind byte of a [`CutRecord`] (a closed bin of a scan of cuts).
pub const KIND_CUT: u8 = 4;
/// Most pattern frequencies a bin record carries.
pub const MAX_FREQUENCIES: usize = 32;
/// Bytes of kind, version and seq.
pub const HEADER_LEN: usize = 4;
/// Bytes of the CRC-32 trailer.
pub const CRC_LEN: usize = 4;
/// Fixed part of a bin record body.
pub const BIN_FIXED_LEN: usize = 25;
/// Bytes per frequency in a bin record body: the value block (18) and its angle offset (4).
pub const BIN_PER_FREQ_LEN: usize = BIN_VALUE_LEN + 4;
/// Bytes per frequency in the value block (grid index, raw and gated value); a body of
/// `BIN_FIXED_LEN + BIN_VALUE_LEN·n` bytes is a record without angle offsets.
pub const BIN_VALUE_LEN: usize = 18;
/// Length of a status record body.
pub const STATUS_LEN: usize = 42;
/// Longest payload (header, body, CRC) before COBS.
pub const MAX_PAYLOAD: usize =
    HEADER_LEN + BIN_FIXED_LEN + BIN_PER_FREQ_LEN * MAX_FREQUENCIES + CRC_LEN;
/// Longest frame on the wire: payload, COBS overhead (one byte per 254 and one more) and the
/// delimiter.
pub const MAX_FRAME: usize = MAX_PAYLOAD + MAX_PAYLOAD / 254 + 2;

// ---------------------------------------------------------------- CRC-32

const fn crc_table() -> [u32; 256] {
    let mut t = [0u32; 256];
    let mut i = 0;
    while i < 256 {
        let mut c = i as u32;
        let mut k = 0;
        while k < 8 {
            c = if c & 1 != 0 {
                0xEDB8_8320 ^ (c >> 1)
            } else {
                c >> 1
            };
            k += 1;
        }
        t[i] = c;
        i += 1;
    }
    t
}

static CRC_TABLE: [u32; 256] = crc_table();

/// CRC-32 (IEEE 802.3, reflected, as zlib's `crc32`) of `data`.
pub fn crc32(data: &[u8]) -> u32 {
    let mut c = u32::MAX;
    for &b in data {
        c = CRC_TABLE[((c ^ u32::from(b)) & 0xFF) as usize] ^ (c >> 8);
    }
    !c
}

// ---------------------------------------------------------------- COBS

/// COBS-encodes `src` into `dst` (no delimiter), returning the encoded length.
pub fn cobs_encode(src: &[u8], dst: &mut [u8]) -> Result<usize, EmitError> {
    let mut code_at = 0usize;
    let mut w = 1usize;
    let mut code: u8 = 1;
    // A block closed at 254 data bytes needs no further code byte if the input ends there.
    let mut after_full_block = false;
    if dst.is_empty() {
        return Err(EmitError::BufferFull);
    }
    for &b in src {
        after_full_block = false;
        if b == 0 {
            *dst.get_mut(code_at).ok_or(EmitError::BufferFull)? = code;
            code_at = w;
            w += 1;
            code = 1;
        } else {
            *dst.get_mut(w).ok_or(EmitError::BufferFull)? = b;
            w += 1;
            code += 1;
            if code == 0xFF {
                *dst.get_mut(code_at).ok_or(EmitError::BufferFull)? = code;
                code_at = w;
                w += 1;
                code = 1;
                after_full_block = true;
            }
        }
    }
    if after_full_block {
        return Ok(w - 1);
    }
    *dst.get_mut(code_at).ok_or(EmitError::BufferFull)? = code;
    Ok(w)
}

/// Decodes a COBS frame (without its delimiter) in place, returning the decoded length.
pub fn cobs_decode_in_place(buf: &mut [u8]) -> Result<usize, FrameError> {
    let len = buf.len();
    let (mut r, mut w) = (0usize, 0usize);
    while r < len {
        let code = buf[r];
        if code == 0 {
            return Err(FrameError::Cobs);
        }
        r += 1;
        let n = usize::from(code - 1);
        if r + n > len {
            return Err(FrameError::Cobs);
        }
        buf.copy_within(r..r + n, w);
        w += n;
        r += n;
        if code != 0xFF && r < len {
            buf[w] = 0;
            w += 1;
        }
    }
    Ok(w)
}

// ---------------------------------------------------------------- records

/// One pattern frequency of a bin record.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FreqValue {
    /// Grid index of the frequency.
    pub index: u16,
    /// Averaged raw S21 at this frequency.
    pub raw: Complex32,
    /// Gated S21 at this frequency.
    pub gated: Complex32,
    /// Mean angle at which this frequency was measured, relative to the sweeps' mid-time
    /// angles, deg ([`crate::scan::BinResult::angle_offset_deg`]).
    pub angle_offset_deg: f32,
}

// `Complex32` has no `defmt::Format`; print its parts.
#[cfg(feature = "defmt")]
impl defmt::Format for FreqValue {
    fn format(&self, f: defmt::Formatter) {
        defmt::write!(
            f,
            "FreqValue {{ index: {}, raw: ({}, {}), gated: ({}, {}), angle_offset_deg: {} }}",
            self.index,
            self.raw.re,
            self.raw.im,
            self.gated.re,
            self.gated.im,
            self.angle_offset_deg
        )
    }
}

/// A closed bin's result, up to `F` pattern frequencies.
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct BinRecord<const F: usize> {
    /// Bin index in the layout.
    pub bin: u16,
    /// [`crate::bins::BinFlags`] bits.
    pub flags: u16,
    /// Sweeps averaged into the bin.
    pub sweeps: u32,
    /// The bin's nominal angle.
    pub nominal_deg: f32,
    /// Mean measured angle of its sweeps.
    pub mean_deg: f32,
    /// Largest smear of its sweeps.
    pub max_smear_deg: f32,
    /// Echo level, dB; NaN when not computed.
    pub echo_db: f32,
    /// Values at the pattern frequencies.
    pub values: heapless::Vec<FreqValue, F>,
}

/// What the positioner is doing, as reported in a status record.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum PositionerState {
    /// No angle received yet.
    NoAngle = 0,
    /// Moving.
    Moving = 1,
    /// Settled (still for the settle time).
    Settled = 2,
    /// Stalled or parked (still for the stall time).
    Stalled = 3,
    /// The scan has finished.
    Finished = 4,
}

impl PositionerState {
    fn from_u8(v: u8) -> Option<Self> {
        Some(match v {
            0 => Self::NoAngle,
            1 => Self::Moving,
            2 => Self::Settled,
            3 => Self::Stalled,
            4 => Self::Finished,
            _ => return None,
        })
    }
}

/// Periodic scan status.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct StatusRecord {
    /// Time of the newest positioner sample, µs.
    pub time_us: u64,
    /// Positioner angle (NaN = none yet).
    pub angle_deg: f32,
    /// Positioner speed (NaN = unknown).
    pub speed_deg_s: f32,
    /// Positioner state.
    pub state: PositionerState,
    /// The open bin, if any (index below 0xFFFF).
    pub open_bin: Option<u16>,
    /// Bins closed so far.
    pub bins_closed: u16,
    /// Sweeps pushed.
    pub sweeps_pushed: u32,
    /// Sweeps binned.
    pub sweeps_binned: u32,
    /// Sweeps rejected.
    pub sweeps_rejected: u32,
    /// Angle samples pushed.
    pub angles_pushed: u32,
    /// Angle samples rejected.
    pub angles_rejected: u32,
}

/// A preview record.
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum PreviewRecord<const F: usize> {
    /// A closed bin.
    Bin(BinRecord<F>),
    /// Scan status.
    Status(StatusRecord),
    /// A closed bin's impulse response near the gate, decimated.
    Impulse(ImpulseRecord),
    /// A closed bin of a scan of cuts: its cut, both axes, every trace.
    Cut(CutRecord<F>),
}

fn put(buf: &mut [u8], at: usize, bytes: &[u8]) -> Result<(), EmitError> {
    buf.get_mut(at..at + bytes.len())
        .ok_or(EmitError::BufferFull)?
        .copy_from_slice(bytes);
    Ok(())
}

fn get<const N: usize>(buf: &[u8], at: usize) -> Result<[u8; N], FrameError> {
    let s = buf.get(at..at + N).ok_or(FrameError::BadLength)?;
    let mut a = [0u8; N];
    a.copy_from_slice(s);
    Ok(a)
}

fn get_u16(b: &[u8], at: usize) -> Result<u16, FrameError> {
    get::<2>(b, at).map(u16::from_le_bytes)
}
fn get_u32(b: &[u8], at: usize) -> Result<u32, FrameError> {
    get::<4>(b, at).map(u32::from_le_bytes)
}
fn get_f32(b: &[u8], at: usize) -> Result<f32, FrameError> {
    get::<4>(b, at).map(f32::from_le_bytes)
}

impl<const F: usize> BinRecord<F> {
    /// Body length on the wire.
    pub fn body_len(&self) -> usize {
        BIN_FIXED_LEN + BIN_PER_FREQ_LEN * self.values.len()
    }

    /// Writes the body (layout in the [module docs](self)) into `buf`, returning its length.
    pub fn emit(&self, buf: &mut [u8]) -> Result<usize, EmitError> {
        let n = self.values.len();
        if n > MAX_FREQUENCIES {
            return Err(EmitError::TooManyFrequencies);
        }
        if buf.len() < self.body_len() {
            return Err(EmitError::BufferFull);
        }
        put(buf, 0, &self.bin.to_le_bytes())?;
        put(buf, 2, &self.flags.to_le_bytes())?;
        put(buf, 4, &self.sweeps.to_le_bytes())?;
        put(buf, 8, &self.nominal_deg.to_le_bytes())?;
        put(buf, 12, &self.mean_deg.to_le_bytes())?;
        put(buf, 16, &self.max_smear_deg.to_le_bytes())?;
        put(buf, 20, &self.echo_db.to_le_bytes())?;
        put(buf, 24, &[n as u8])?;
        for (i, v) in self.values.iter().enumerate() {
            let at = BIN_FIXED_LEN + BIN_VALUE_LEN * i;
            put(buf, at, &v.index.to_le_bytes())?;
            put(buf, at + 2, &v.raw.re.to_le_bytes())?;
            put(buf, at + 6, &v.raw.im.to_le_bytes())?;
            put(buf, at + 10, &v.gated.re.to_le_bytes())?;
            put(buf, at + 14, &v.gated.im.to_le_bytes())?;
            let off = BIN_FIXED_LEN + BIN_VALUE_LEN * n + 4 * i;
            put(buf, off, &v.angle_offset_deg.to_le_bytes())?;
        }
        Ok(self.body_len())
    }

    /// Reads a body written by [`emit`](Self::emit). More than `F` frequencies is
    /// [`FrameError::BadField`].
    pub fn parse(body: &[u8]) -> Result<Self, FrameError> {
        let n = usize::from(*body.get(24).ok_or(FrameError::BadLength)?);
        let offsets = if body.len() == BIN_FIXED_LEN + BIN_PER_FREQ_LEN * n {
            true
        } else if body.len() == BIN_FIXED_LEN + BIN_VALUE_LEN * n {
            false
        } else {
            return Err(FrameError::BadLength);
        };
        if n > F || n > MAX_FREQUENCIES {
            return Err(FrameError::BadField);
        }
        let mut values = heapless::Vec::new();
        for i in 0..n {
            let at = BIN_FIXED_LEN + BIN_VALUE_LEN * i;
            let angle_offset_deg = if offsets {
                get_f32(body, BIN_FIXED_LEN + BIN_VALUE_LEN * n + 4 * i)?
            } else {
                0.0
            };
            let v = FreqValue {
                index: get_u16(body, at)?,
                raw: Complex32::new(get_f32(body, at + 2)?, get_f32(body, at + 6)?),
                gated: Complex32::new(get_f32(body, at + 10)?, get_f32(body, at + 14)?),
                angle_offset_deg,
            };
            values.push(v).map_err(|_| FrameError::BadField)?;
        }
        Ok(Self {
            bin: get_u16(body, 0)?,
            flags: get_u16(body, 2)?,
            sweeps: get_u32(body, 4)?,
            nominal_deg: get_f32(body, 8)?,
            mean_deg: get_f32(body, 12)?,
            max_smear_deg: get_f32(body, 16)?,
            echo_db: get_f32(body, 20)?,
            values,
        })
    }
}

impl StatusRecord {
    /// Writes the body (layout in the [module docs](self)) into `buf`, returning its length.
    pub fn emit(&self, buf: &mut [u8]) -> Result<usize, EmitError> {
        if buf.len() < STATUS_LEN {
            return Err(EmitError::BufferFull);
        }
        put(buf, 0, &self.time_us.to_le_bytes())?;
        put(buf, 8, &self.angle_deg.to_le_bytes())?;
        put(buf, 12, &self.speed_deg_s.to_le_bytes())?;
        put(buf, 16, &[self.state as u8, 0])?;
        put(buf, 18, &self.open_bin.unwrap_or(u16::MAX).to_le_bytes())?;
        put(buf, 20, &self.bins_closed.to_le_bytes())?;
        put(buf, 22, &self.sweeps_pushed.to_le_bytes())?;
        put(buf, 26, &self.sweeps_binned.to_le_bytes())?;
        put(buf, 30, &self.sweeps_rejected.to_le_bytes())?;
        put(buf, 34, &self.angles_pushed.to_le_bytes())?;
        put(buf, 38, &self.angles_rejected.to_le_bytes())?;
        Ok(STATUS_LEN)
    }

    /// Reads a body written by [`emit`](Self::emit).
    pub fn parse(body: &[u8]) -> Result<Self, FrameError> {
        if body.len() != STATUS_LEN {
            return Err(FrameError::BadLength);
        }
        let state = PositionerState::from_u8(body[16]).ok_or(FrameError::BadField)?;
        let open = get_u16(body, 18)?;
        Ok(Self {
            time_us: get::<8>(body, 0).map(u64::from_le_bytes)?,
            angle_deg: get_f32(body, 8)?,
            speed_deg_s: get_f32(body, 12)?,
            state,
            open_bin: if open == u16::MAX { None } else { Some(open) },
            bins_closed: get_u16(body, 20)?,
            sweeps_pushed: get_u32(body, 22)?,
            sweeps_binned: get_u32(body, 26)?,
            sweeps_rejected: get_u32(body, 30)?,
            angles_pushed: get_u32(body, 34)?,
            angles_rejected: get_u32(body, 38)?,
        })
    }
}

impl<const F: usize> PreviewRecord<F> {
    /// Kind byte.
    pub fn kind(&self) -> u8 {
        match self {
            Self::Bin(_) => KIND_BIN,
            Self::Status(_) => KIND_STATUS,
            Self::Impulse(_) => KIND_IMPULSE,
            Self::Cut(_) => KIND_CUT,
        }
    }

    /// Writes header, body and CRC (the payload before COBS) into `buf`, returning its length.
    pub fn emit_payload(&self, seq: u16, buf: &mut [u8]) -> Result<usize, EmitError> {
        let s = seq.to_le_bytes();
        put(buf, 0, &[self.kind(), VERSION, s[0], s[1]])?;
        let body = buf.get_mut(HEADER_LEN..).ok_or(EmitError::BufferFull)?;
        let n = match self {
            Self::Bin(b) => b.emit(body)?,
            Self::Status(s) => s.emit(body)?,
            Self::Impulse(r) => r.emit(body)?,
            Self::Cut(c) => c.emit(body)?,
        };
        let end = HEADER_LEN + n;
        let crc = crc32(buf.get(..end).ok_or(EmitError::BufferFull)?);
        put(buf, end, &crc.to_le_bytes())?;
        Ok(end + CRC_LEN)
    }

    /// Reads a payload (after COBS decoding): checks CRC, kind and version; returns the
    /// sequence number and the record.
    pub fn parse_payload(p: &[u8]) -> Result<(u16, Self), FrameError> {
        if p.len() < HEADER_LEN + CRC_LEN {
            return Err(FrameError::TooShort);
        }
        let (data, crc) = p.split_at(p.len() - CRC_LEN);
        if crc32(data) != get_u32(crc, 0)? {
            return Err(FrameError::Crc);
        }
        let (kind, version) = (data[0], data[1]);
        if version != VERSION {
            return Err(FrameError::UnknownVersion(version));
        }
        let seq = get_u16(data, 2)?;
        let body = &data[HEADER_LEN..];
        let rec = match kind {
            KIND_BIN => Self::Bin(BinRecord::parse(body)?),
            KIND_STATUS => Self::Status(StatusRecord::parse(body)?),
            KIND_IMPULSE => Self::Impulse(ImpulseRecord::parse(body)?),
            KIND_CUT => Self::Cut(CutRecord::parse(body)?),
            k => return Err(FrameError::UnknownKind(k)),
        };
        Ok((seq, rec))
    }
}

/// Encodes `rec` as a complete frame (COBS and the 0x00 delimiter) into `out`, returning the
/// frame length. [`MAX_FRAME`] bytes always suffice.
pub fn encode_frame<const F: usize>(
    rec: &PreviewRecord<F>,
    seq: u16,
    out: &mut [u8],
) -> Result<usize, EmitError> {
    let mut payload = [0u8; MAX_PAYLOAD];
    let n = rec.emit_payload(seq, &mut payload)?;
    let m = cobs_encode(&payload[..n], out)?;
    *out.get_mut(m).ok_or(EmitError::BufferFull)? = 0;
    Ok(m + 1)
}

/// Why [`write_frame`] failed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum WriteFrameError<E> {
    /// The record could not be encoded.
    Emit(EmitError),
    /// The writer failed.
    Io(E),
}

/// Encodes `rec` as a frame and writes it all to `w`.
pub fn write_frame<const F: usize, W: embedded_io::Write>(
    w: &mut W,
    rec: &PreviewRecord<F>,
    seq: u16,
) -> Result<usize, WriteFrameError<W::Error>> {
    let mut frame = [0u8; MAX_FRAME];
    let n = encode_frame(rec, seq, &mut frame).map_err(WriteFrameError::Emit)?;
    w.write_all(&frame[..n]).map_err(WriteFrameError::Io)?;
    Ok(n)
}

// ---------------------------------------------------------------- decoder

/// Decoder counters. Every delimited frame is counted exactly once: as `good`, as `empty`
/// (two delimiters in a row, harmless), or under one damage reason.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct DecoderCounters {
    /// Records decoded.
    pub good: u32,
    /// Empty frames (consecutive delimiters).
    pub empty: u32,
    /// Frames longer than the buffer (their bytes are skipped to the next delimiter).
    pub too_long: u32,
    /// Frames with a broken COBS encoding.
    pub cobs: u32,
    /// Frames too short for header and CRC.
    pub too_short: u32,
    /// Frames failing the CRC.
    pub crc: u32,
    /// Frames of an unknown kind.
    pub unknown_kind: u32,
    /// Frames of an unknown version.
    pub unknown_version: u32,
    /// Frames whose body has the wrong length or an impossible field.
    pub bad_body: u32,
    /// Bytes taken in.
    pub bytes: u32,
    /// Sequence numbers skipped between consecutive good frames (frames lost on the link);
    /// a sequence number equal to or up to 32768 behind the previous one (a duplicate, a
    /// restarted sender) adds nothing.
    pub seq_gaps: u32,
}

impl DecoderCounters {
    /// Frames dropped as damaged.
    pub fn damaged(&self) -> u32 {
        self.too_long
            .saturating_add(self.cobs)
            .saturating_add(self.too_short)
            .saturating_add(self.crc)
            .saturating_add(self.unknown_kind)
            .saturating_add(self.unknown_version)
            .saturating_add(self.bad_body)
    }
}

/// Streaming preview decoder with an `N`-byte frame buffer (≥ [`MAX_FRAME`] for any record),
/// for records with up to `F` frequencies. Bounded work per byte; feed it chunks of any
/// size. A stream joined mid-frame yields one damaged frame, then decodes normally.
#[derive(Debug, Clone)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Decoder<const F: usize, const N: usize> {
    buf: [u8; N],
    len: usize,
    overflow: bool,
    last_seq: Option<u16>,
    counters: DecoderCounters,
}

impl<const F: usize, const N: usize> Default for Decoder<F, N> {
    fn default() -> Self {
        Self::new()
    }
}

impl<const F: usize, const N: usize> Decoder<F, N> {
    /// An empty decoder.
    pub const fn new() -> Self {
        Self {
            buf: [0; N],
            len: 0,
            overflow: false,
            last_seq: None,
            counters: DecoderCounters {
                good: 0,
                empty: 0,
                too_long: 0,
                cobs: 0,
                too_short: 0,
                crc: 0,
                unknown_kind: 0,
                unknown_version: 0,
                bad_body: 0,
                bytes: 0,
                seq_gaps: 0,
            },
        }
    }

    /// Counters so far.
    pub fn counters(&self) -> &DecoderCounters {
        &self.counters
    }

    fn count_err(&mut self, e: FrameError) {
        let c = &mut self.counters;
        let slot = match e {
            FrameError::TooLong => &mut c.too_long,
            FrameError::Cobs => &mut c.cobs,
            FrameError::TooShort => &mut c.too_short,
            FrameError::Crc => &mut c.crc,
            FrameError::UnknownKind(_) => &mut c.unknown_kind,
            FrameError::UnknownVersion(_) => &mut c.unknown_version,
            FrameError::BadLength | FrameError::BadField => &mut c.bad_body,
        };
        *slot = slot.saturating_add(1);
    }

    /// Takes one byte. At a frame delimiter returns the frame's outcome: the sequence number
    /// and record, or why it was dropped (already counted). `None` otherwise and for empty
    /// frames.
    pub fn push_byte(&mut self, b: u8) -> Option<Result<(u16, PreviewRecord<F>), FrameError>> {
        self.counters.bytes = self.counters.bytes.wrapping_add(1);
        if b != 0 {
            if self.overflow {
                return None;
            }
            match self.buf.get_mut(self.len) {
                Some(slot) => {
                    *slot = b;
                    self.len += 1;
                }
                None => self.overflow = true,
            }
            return None;
        }
        let len = core::mem::replace(&mut self.len, 0);
        if core::mem::replace(&mut self.overflow, false) {
            self.count_err(FrameError::TooLong);
            return Some(Err(FrameError::TooLong));
        }
        if len == 0 {
            self.counters.empty = self.counters.empty.saturating_add(1);
            return None;
        }
        let r = match self.buf.get_mut(..len) {
            Some(frame) => cobs_decode_in_place(frame)
                .and_then(|m| PreviewRecord::parse_payload(frame.get(..m).unwrap_or(&[]))),
            None => Err(FrameError::TooLong),
        };
        match &r {
            Ok((seq, _)) => {
                let c = &mut self.counters;
                c.good = c.good.saturating_add(1);
                if let Some(prev) = self.last_seq {
                    // Forward distance minus one; a repeated or older sequence number (a
                    // duplicate frame, a restarted sender) loses nothing.
                    let gap = seq.wrapping_sub(prev).wrapping_sub(1);
                    if gap < 0x8000 {
                        c.seq_gaps = c.seq_gaps.saturating_add(u32::from(gap));
                    }
                }
                self.last_seq = Some(*seq);
            }
            Err(e) => self.count_err(*e),
        }
        Some(r)
    }

    /// Takes a chunk, calling `on_record(seq, record)` for each good record; returns how many.
    pub fn feed(
        &mut self,
        chunk: &[u8],
        mut on_record: impl FnMut(u16, PreviewRecord<F>),
    ) -> usize {
        let mut n = 0;
        for &b in chunk {
            if let Some(Ok((seq, rec))) = self.push_byte(b) {
                on_record(seq, rec);
                n += 1;
            }
        }
        n
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cobs_round_trips_edge_cases() {
        let mut cases: [[u8; 600]; 3] = [[0; 600], [0xAB; 600], [0; 600]];
        for (i, b) in cases[2].iter_mut().enumerate() {
            *b = (i % 7) as u8;
        }
        for src in cases.iter() {
            for len in [0usize, 1, 253, 254, 255, 509, 600] {
                let mut enc = [0u8; 700];
                let n = cobs_encode(&src[..len], &mut enc).unwrap();
                assert!(!enc[..n].contains(&0));
                assert!(n <= len + len / 254 + 1);
                let m = cobs_decode_in_place(&mut enc[..n]).unwrap();
                assert_eq!(&enc[..m], &src[..len]);
            }
        }
    }

    #[test]
    fn cobs_refuses_bad_codes() {
        let mut b = [3u8, 1];
        assert_eq!(cobs_decode_in_place(&mut b), Err(FrameError::Cobs));
        let mut b = [1u8, 0, 1];
        assert_eq!(cobs_decode_in_place(&mut b), Err(FrameError::Cobs));
    }

    #[test]
    fn small_buffers_are_refused() {
        let rec: PreviewRecord<1> = PreviewRecord::Status(StatusRecord {
            time_us: 0,
            angle_deg: 0.0,
            speed_deg_s: 0.0,
            state: PositionerState::NoAngle,
            open_bin: None,
            bins_closed: 0,
            sweeps_pushed: 0,
            sweeps_binned: 0,
            sweeps_rejected: 0,
            angles_pushed: 0,
            angles_rejected: 0,
        });
        let mut out = [0u8; MAX_FRAME];
        let n = encode_frame(&rec, 0, &mut out).unwrap();
        for short in 0..n {
            assert_eq!(
                encode_frame(&rec, 0, &mut out[..short]),
                Err(EmitError::BufferFull)
            );
        }
    }

    #[test]
    fn overlong_frame_is_counted_and_skipped() {
        let mut d: Decoder<1, 8> = Decoder::new();
        for _ in 0..20 {
            assert!(d.push_byte(5).is_none());
        }
        assert_eq!(d.push_byte(0), Some(Err(FrameError::TooLong)));
        assert_eq!(d.push_byte(0), None);
        assert_eq!(d.counters().too_long, 1);
        assert_eq!(d.counters().empty, 1);
    }
}
