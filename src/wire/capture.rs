//! Link captures: what a board receives on its two links — positioner samples and the VNA's
//! answer bytes, each with its time — together with the settings to gate them, as one byte
//! stream that a board, an emulated board or the host can replay through the same decoder
//! and scan engine.
//!
//! Layout, all little-endian. The header ([`HEADER_LEN`] = 83 bytes):
//!
//! | offset | bytes | field |
//! |-------:|------:|-------|
//! | 0 | 8 | magic `SGLINK01` |
//! | 8 | 8 | grid start, Hz (f64) |
//! | 16 | 8 | grid step, Hz (f64) |
//! | 24 | 2 | points K (u16) |
//! | 26 | 8 | gate centre, s (f64) |
//! | 34 | 8 | gate span, s (f64) |
//! | 42 | 1+4 | band window: kind (u8), parameter (f32) |
//! | 47 | 1+4 | gate shape: kind (u8), parameter (f32) |
//! | 52 | 1 | renormalize (0/1) |
//! | 53 | 4 | first bin centre, deg (f32) |
//! | 57 | 4 | bin step, deg (f32) |
//! | 61 | 2 | bin count (u16) |
//! | 63 | 1 | full circle (0/1) |
//! | 64 | 1 | block format: 0 REAL,32, 1 REAL,64 |
//! | 65 | 1 | block byte order: 0 NORMal, 1 SWAPped |
//! | 66 | 1 | pattern frequency count, 1…8 |
//! | 67 | 16 | pattern frequency grid indices (8 × u16; unused ones 0) |
//!
//! Window kinds: 0 rectangular, 1 Kaiser (β), 2 Tukey (α), 3 Hann, 4 Hamming,
//! 5 Blackman-Harris; the parameter is 0 where there is none.
//!
//! Then entries, each a kind byte and a fixed head:
//!
//! | kind | head | meaning |
//! |-----:|------|---------|
//! | 1 | u64 t_us, f32 angle_deg | a positioner sample |
//! | 2 | u64 start_us, u64 end_us, u32 n | a sweep: the next n bytes are the VNA's answer as received |
//! | 0 | — | end of capture |

use crate::bins::BinLayout;
use crate::error::CaptureError;
use crate::gate::GateConfig;
use crate::grid::Grid;
use crate::window::WindowKind;
use crate::wire::block::{ByteOrder, Format};

/// Magic at the start of a capture.
pub const MAGIC: [u8; 8] = *b"SGLINK01";
/// Bytes in a capture header.
pub const HEADER_LEN: usize = 83;
/// Most pattern frequencies a capture names.
pub const MAX_PATTERN: usize = 8;
/// Longest entry head, kind byte included.
pub const MAX_ENTRY_LEN: usize = 21;

/// What to gate a capture with.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CaptureHeader {
    /// Grid and gate.
    pub gate: GateConfig,
    /// Angle bins.
    pub layout: BinLayout,
    /// Pattern frequency grid indices (first `pattern_count` used).
    pub pattern: [u16; MAX_PATTERN],
    /// How many of `pattern` are used, 1…8.
    pub pattern_count: u8,
    /// Block format of the sweeps.
    pub format: Format,
    /// Block byte order of the sweeps.
    pub order: ByteOrder,
}

fn window_code(w: WindowKind) -> (u8, f32) {
    match w {
        WindowKind::Rectangular => (0, 0.0),
        WindowKind::Kaiser { beta } => (1, beta),
        WindowKind::Tukey { alpha } => (2, alpha),
        WindowKind::Hann => (3, 0.0),
        WindowKind::Hamming => (4, 0.0),
        WindowKind::BlackmanHarris => (5, 0.0),
    }
}

fn window_from(code: u8, p: f32) -> Result<WindowKind, CaptureError> {
    let w = match code {
        0 => WindowKind::Rectangular,
        1 => WindowKind::Kaiser { beta: p },
        2 => WindowKind::Tukey { alpha: p },
        3 => WindowKind::Hann,
        4 => WindowKind::Hamming,
        5 => WindowKind::BlackmanHarris,
        other => return Err(CaptureError::UnknownWindow(other)),
    };
    w.validate().map_err(CaptureError::Window)?;
    Ok(w)
}

struct Cursor<'a> {
    buf: &'a [u8],
    at: usize,
}

impl Cursor<'_> {
    fn take<const N: usize>(&mut self) -> [u8; N] {
        let mut out = [0u8; N];
        if let Some(s) = self.buf.get(self.at..self.at + N) {
            out.copy_from_slice(s);
        }
        self.at += N;
        out
    }
    fn u8(&mut self) -> u8 {
        self.take::<1>()[0]
    }
    fn u16(&mut self) -> u16 {
        u16::from_le_bytes(self.take())
    }
    fn u32(&mut self) -> u32 {
        u32::from_le_bytes(self.take())
    }
    fn u64(&mut self) -> u64 {
        u64::from_le_bytes(self.take())
    }
    fn f32(&mut self) -> f32 {
        f32::from_le_bytes(self.take())
    }
    fn f64(&mut self) -> f64 {
        f64::from_le_bytes(self.take())
    }
}

struct Writer<'a> {
    buf: &'a mut [u8],
    at: usize,
}

impl Writer<'_> {
    fn put(&mut self, b: &[u8]) {
        if let Some(s) = self.buf.get_mut(self.at..self.at + b.len()) {
            s.copy_from_slice(b);
        }
        self.at += b.len();
    }
}

impl CaptureHeader {
    /// Writes the header.
    pub fn emit(&self, out: &mut [u8; HEADER_LEN]) {
        let mut w = Writer { buf: out, at: 0 };
        let g = &self.gate;
        w.put(&MAGIC);
        w.put(&g.grid.start_hz().to_le_bytes());
        w.put(&g.grid.step_hz().to_le_bytes());
        w.put(&(g.grid.points() as u16).to_le_bytes());
        w.put(&g.center_s.to_le_bytes());
        w.put(&g.span_s.to_le_bytes());
        for win in [g.band_window, g.shape] {
            let (c, p) = window_code(win);
            w.put(&[c]);
            w.put(&p.to_le_bytes());
        }
        w.put(&[g.renormalize as u8]);
        w.put(&self.layout.nominal_deg(0).to_le_bytes());
        w.put(&self.layout.step_deg().to_le_bytes());
        w.put(&self.layout.count().to_le_bytes());
        w.put(&[self.layout.is_full_circle() as u8]);
        w.put(&[match self.format {
            Format::Real32 => 0,
            Format::Real64 => 1,
        }]);
        w.put(&[match self.order {
            ByteOrder::Normal => 0,
            ByteOrder::Swapped => 1,
        }]);
        w.put(&[self.pattern_count]);
        for p in self.pattern {
            w.put(&p.to_le_bytes());
        }
    }

    /// Reads and validates a header.
    pub fn parse(buf: &[u8; HEADER_LEN]) -> Result<Self, CaptureError> {
        let mut c = Cursor { buf, at: 0 };
        if c.take::<8>() != MAGIC {
            return Err(CaptureError::BadMagic);
        }
        let (start, step, points) = (c.f64(), c.f64(), c.u16());
        let grid = Grid::new(start, step, points.into()).map_err(CaptureError::Grid)?;
        let (center_s, span_s) = (c.f64(), c.f64());
        let (bc, bp) = (c.u8(), c.f32());
        let band_window = window_from(bc, bp)?;
        let (sc, sp) = (c.u8(), c.f32());
        let shape = window_from(sc, sp)?;
        let renormalize = c.u8() != 0;
        let (b0, bstep, bcount, full) = (c.f32(), c.f32(), c.u16(), c.u8() != 0);
        let layout = if full {
            BinLayout::full_circle(b0, bstep)
        } else {
            let stop = b0 + bstep * f32::from(bcount.saturating_sub(1));
            BinLayout::sector(b0, stop, bstep)
        }
        .map_err(CaptureError::Layout)?;
        if layout.count() != bcount {
            return Err(CaptureError::BinCount);
        }
        let format = match c.u8() {
            0 => Format::Real32,
            1 => Format::Real64,
            other => return Err(CaptureError::UnknownFormat(other)),
        };
        let order = match c.u8() {
            0 => ByteOrder::Normal,
            1 => ByteOrder::Swapped,
            other => return Err(CaptureError::UnknownOrder(other)),
        };
        let pattern_count = c.u8();
        if !(1..=MAX_PATTERN as u8).contains(&pattern_count) {
            return Err(CaptureError::PatternCount);
        }
        let mut pattern = [0u16; MAX_PATTERN];
        for (i, p) in pattern.iter_mut().enumerate() {
            *p = c.u16();
            if i < usize::from(pattern_count) && *p >= points {
                return Err(CaptureError::PatternIndex);
            }
        }
        Ok(Self {
            gate: GateConfig {
                grid,
                band_window,
                center_s,
                span_s,
                shape,
                renormalize,
            },
            layout,
            pattern,
            pattern_count,
            format,
            order,
        })
    }

    /// The pattern indices as `F` grid indices: the used ones, then the last used one
    /// repeated (so a board built for F = 8 can replay a capture naming fewer).
    pub fn pattern_indices<const F: usize>(&self) -> [usize; F] {
        let n = usize::from(self.pattern_count).clamp(1, MAX_PATTERN);
        core::array::from_fn(|i| usize::from(self.pattern[i.min(n - 1)]))
    }
}

/// One capture entry's head.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Entry {
    /// A positioner sample.
    Angle {
        /// Time, µs.
        t_us: u64,
        /// Angle, degrees.
        angle_deg: f32,
    },
    /// A sweep; its `len` bytes of VNA answer follow.
    Sweep {
        /// Start of the sweep, µs.
        start_us: u64,
        /// End of the sweep, µs.
        end_us: u64,
        /// Bytes of VNA answer that follow.
        len: u32,
    },
    /// End of the capture.
    End,
}

impl Entry {
    /// Bytes of head after the kind byte, for an entry of `kind`.
    pub fn head_len(kind: u8) -> Result<usize, CaptureError> {
        match kind {
            0 => Ok(0),
            1 => Ok(12),
            2 => Ok(20),
            other => Err(CaptureError::UnknownEntry(other)),
        }
    }

    /// Reads the head of an entry of `kind` from `head` (of [`Entry::head_len`] bytes).
    pub fn parse(kind: u8, head: &[u8]) -> Result<Self, CaptureError> {
        let need = Self::head_len(kind)?;
        if head.len() < need {
            return Err(CaptureError::Truncated);
        }
        let mut c = Cursor { buf: head, at: 0 };
        Ok(match kind {
            1 => Entry::Angle {
                t_us: c.u64(),
                angle_deg: c.f32(),
            },
            2 => Entry::Sweep {
                start_us: c.u64(),
                end_us: c.u64(),
                len: c.u32(),
            },
            _ => Entry::End,
        })
    }

    /// Writes the entry's kind byte and head; returns the bytes written.
    pub fn emit(&self, out: &mut [u8; MAX_ENTRY_LEN]) -> usize {
        let mut w = Writer { buf: out, at: 0 };
        match *self {
            Entry::Angle { t_us, angle_deg } => {
                w.put(&[1]);
                w.put(&t_us.to_le_bytes());
                w.put(&angle_deg.to_le_bytes());
            }
            Entry::Sweep {
                start_us,
                end_us,
                len,
            } => {
                w.put(&[2]);
                w.put(&start_us.to_le_bytes());
                w.put(&end_us.to_le_bytes());
                w.put(&len.to_le_bytes());
            }
            Entry::End => w.put(&[0]),
        }
        w.at
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn header() -> CaptureHeader {
        CaptureHeader {
            gate: GateConfig {
                grid: Grid::from_start_stop(8e9, 12e9, 201).unwrap(),
                band_window: WindowKind::Kaiser { beta: 6.0 },
                center_s: 13.3e-9,
                span_s: 4e-9,
                shape: WindowKind::Tukey { alpha: 0.5 },
                renormalize: true,
            },
            layout: BinLayout::sector(-90.0, 90.0, 1.0).unwrap(),
            pattern: [10, 100, 190, 0, 0, 0, 0, 0],
            pattern_count: 3,
            format: Format::Real32,
            order: ByteOrder::Normal,
        }
    }

    #[test]
    fn header_round_trips() {
        let h = header();
        let mut b = [0u8; HEADER_LEN];
        h.emit(&mut b);
        assert_eq!(CaptureHeader::parse(&b), Ok(h));
        assert_eq!(h.pattern_indices::<5>(), [10, 100, 190, 190, 190]);
        let full = CaptureHeader {
            layout: BinLayout::full_circle(0.0, 2.0).unwrap(),
            ..h
        };
        full.emit(&mut b);
        assert_eq!(CaptureHeader::parse(&b), Ok(full));
    }

    #[test]
    fn header_errors() {
        let mut b = [0u8; HEADER_LEN];
        header().emit(&mut b);
        let bad = |at: usize, v: u8| {
            let mut c = b;
            c[at] = v;
            CaptureHeader::parse(&c).err()
        };
        assert_eq!(bad(0, b'X'), Some(CaptureError::BadMagic));
        assert_eq!(bad(42, 9), Some(CaptureError::UnknownWindow(9)));
        assert_eq!(bad(64, 7), Some(CaptureError::UnknownFormat(7)));
        assert_eq!(bad(65, 7), Some(CaptureError::UnknownOrder(7)));
        assert_eq!(bad(66, 0), Some(CaptureError::PatternCount));
        assert_eq!(bad(66, 9), Some(CaptureError::PatternCount));
        assert_eq!(bad(68, 0xFF), Some(CaptureError::PatternIndex));
        let mut c = b;
        c[24..26].copy_from_slice(&1u16.to_le_bytes());
        assert!(matches!(
            CaptureHeader::parse(&c),
            Err(CaptureError::Grid(_))
        ));
        let mut c = b;
        c[43..47].copy_from_slice(&(-1.0f32).to_le_bytes());
        assert!(matches!(
            CaptureHeader::parse(&c),
            Err(CaptureError::Window(_))
        ));
        let mut c = b;
        c[57..61].copy_from_slice(&0.0f32.to_le_bytes());
        assert!(matches!(
            CaptureHeader::parse(&c),
            Err(CaptureError::Layout(_))
        ));
    }

    #[test]
    fn entries_round_trip() {
        for e in [
            Entry::Angle {
                t_us: 123_456_789,
                angle_deg: -12.5,
            },
            Entry::Sweep {
                start_us: 1,
                end_us: 20_001,
                len: 1_615,
            },
            Entry::End,
        ] {
            let mut b = [0u8; MAX_ENTRY_LEN];
            let n = e.emit(&mut b);
            assert_eq!(n, 1 + Entry::head_len(b[0]).unwrap());
            assert_eq!(Entry::parse(b[0], &b[1..n]), Ok(e));
        }
        assert_eq!(Entry::head_len(7), Err(CaptureError::UnknownEntry(7)));
        assert_eq!(Entry::parse(2, &[0; 5]), Err(CaptureError::Truncated));
    }
}
