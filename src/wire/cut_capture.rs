//! Link captures of scans of cuts: what a board receives when the positioner reports two
//! axes and the VNA answers several traces per sweep, with the settings to gate them; the
//! board loop [`crate::cut_pump::CutPump`] replays them.
//!
//! Layout, all little-endian. The header ([`CUT_HEADER_LEN`] = 111 bytes):
//!
//! | offset | bytes | field |
//! |-------:|------:|-------|
//! | 0 | 8 | magic `SGCUTS01` |
//! | 8 | 4 | the first cut's second-axis value, deg (f32) |
//! | 12 | 4 | step between cuts, deg (f32) |
//! | 16 | 2 | cut count (u16) |
//! | 18 | 4 | cut tolerance, deg (f32) |
//! | 22 | 4 | the second axis's fastest speed, deg/s (f32) |
//! | 26 | 1 | traces per sweep, T (u8) |
//! | 27 | 84 | a link capture header ([`super::capture`]): grid, gate, bins, block format, pattern frequencies, echo mode |
//!
//! Then entries, each a kind byte and a fixed head:
//!
//! | kind | head | meaning |
//! |-----:|------|---------|
//! | 1 | u64 t_us, f32 axis1_deg, f32 axis2_deg | a positioner sample of both axes |
//! | 2 | u64 start_us, u64 end_us, u32 n | a sweep: the next n bytes are the VNA's answer for its first trace |
//! | 3 | u32 n | the next trace of the latest sweep: the next n bytes are the VNA's answer |
//! | 0 | — | end of capture |
//!
//! A sweep's T answers come in trace order: its kind 2 entry, then T − 1 kind 3 entries.

use super::capture::{CaptureHeader, HEADER_LEN};
use crate::cuts::CutLayout;
use crate::error::CaptureError;

/// Magic at the start of a capture of cuts.
pub const CUT_MAGIC: [u8; 8] = *b"SGCUTS01";
/// Bytes in a capture-of-cuts header.
pub const CUT_HEADER_LEN: usize = 27 + HEADER_LEN;
/// Longest entry head, kind byte included.
pub const CUT_MAX_ENTRY_LEN: usize = 21;

/// What to gate a capture of cuts with.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CutCaptureHeader {
    /// The cuts.
    pub cuts: CutLayout,
    /// The second axis's fastest speed, deg/s (its tracker's jump limit).
    pub axis2_max_speed_deg_s: f32,
    /// Traces per sweep.
    pub traces: u8,
    /// Grid, gate, bins, block format, pattern frequencies, echo mode.
    pub link: CaptureHeader,
}

fn f32_at(b: &[u8], at: usize) -> f32 {
    let mut a = [0u8; 4];
    if let Some(s) = b.get(at..at + 4) {
        a.copy_from_slice(s);
    }
    f32::from_le_bytes(a)
}

impl CutCaptureHeader {
    /// Writes the header.
    pub fn emit(&self, out: &mut [u8; CUT_HEADER_LEN]) {
        out[..8].copy_from_slice(&CUT_MAGIC);
        out[8..12].copy_from_slice(&self.cuts.value_deg(0).to_le_bytes());
        out[12..16].copy_from_slice(&self.cuts.step_deg().to_le_bytes());
        out[16..18].copy_from_slice(&self.cuts.count().to_le_bytes());
        out[18..22].copy_from_slice(&self.cuts.tolerance_deg().to_le_bytes());
        out[22..26].copy_from_slice(&self.axis2_max_speed_deg_s.to_le_bytes());
        out[26] = self.traces;
        let mut link = [0u8; HEADER_LEN];
        self.link.emit(&mut link);
        out[27..].copy_from_slice(&link);
    }

    /// Reads and validates a header.
    pub fn parse(buf: &[u8; CUT_HEADER_LEN]) -> Result<Self, CaptureError> {
        if buf[..8] != CUT_MAGIC {
            return Err(CaptureError::BadMagic);
        }
        let count = u16::from_le_bytes([buf[16], buf[17]]);
        let cuts = CutLayout::new(f32_at(buf, 8), f32_at(buf, 12), count, f32_at(buf, 18))
            .map_err(CaptureError::Cuts)?;
        let mut link = [0u8; HEADER_LEN];
        link.copy_from_slice(&buf[27..]);
        Ok(Self {
            cuts,
            axis2_max_speed_deg_s: f32_at(buf, 22),
            traces: buf[26],
            link: CaptureHeader::parse(&link)?,
        })
    }
}

/// One entry's head of a capture of cuts.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum CutEntry {
    /// A positioner sample of both axes.
    Axes {
        /// Time, µs.
        t_us: u64,
        /// First axis, degrees.
        axis1_deg: f32,
        /// Second axis, degrees.
        axis2_deg: f32,
    },
    /// A sweep; its first trace's `len` bytes of VNA answer follow.
    Sweep {
        /// Start of the sweep, µs.
        start_us: u64,
        /// End of the sweep, µs.
        end_us: u64,
        /// Bytes of VNA answer that follow.
        len: u32,
    },
    /// The latest sweep's next trace; its `len` bytes of VNA answer follow.
    Trace {
        /// Bytes of VNA answer that follow.
        len: u32,
    },
    /// End of the capture.
    End,
}

impl CutEntry {
    /// Bytes of head after the kind byte, for an entry of `kind`.
    pub fn head_len(kind: u8) -> Result<usize, CaptureError> {
        match kind {
            0 => Ok(0),
            1 => Ok(16),
            2 => Ok(20),
            3 => Ok(4),
            other => Err(CaptureError::UnknownEntry(other)),
        }
    }

    /// Reads the head of an entry of `kind` from `head` (of [`CutEntry::head_len`] bytes).
    pub fn parse(kind: u8, head: &[u8]) -> Result<Self, CaptureError> {
        if head.len() < Self::head_len(kind)? {
            return Err(CaptureError::Truncated);
        }
        let u64_at = |at: usize| {
            let mut a = [0u8; 8];
            a.copy_from_slice(&head[at..at + 8]);
            u64::from_le_bytes(a)
        };
        let u32_at = |at: usize| f32_at(head, at).to_bits();
        Ok(match kind {
            1 => CutEntry::Axes {
                t_us: u64_at(0),
                axis1_deg: f32_at(head, 8),
                axis2_deg: f32_at(head, 12),
            },
            2 => CutEntry::Sweep {
                start_us: u64_at(0),
                end_us: u64_at(8),
                len: u32_at(16),
            },
            3 => CutEntry::Trace { len: u32_at(0) },
            _ => CutEntry::End,
        })
    }

    /// Writes the entry's kind byte and head; returns the bytes written.
    pub fn emit(&self, out: &mut [u8; CUT_MAX_ENTRY_LEN]) -> usize {
        let mut at = 0;
        let mut put = |b: &[u8]| {
            out[at..at + b.len()].copy_from_slice(b);
            at += b.len();
        };
        match *self {
            CutEntry::Axes {
                t_us,
                axis1_deg,
                axis2_deg,
            } => {
                put(&[1]);
                put(&t_us.to_le_bytes());
                put(&axis1_deg.to_le_bytes());
                put(&axis2_deg.to_le_bytes());
            }
            CutEntry::Sweep {
                start_us,
                end_us,
                len,
            } => {
                put(&[2]);
                put(&start_us.to_le_bytes());
                put(&end_us.to_le_bytes());
                put(&len.to_le_bytes());
            }
            CutEntry::Trace { len } => {
                put(&[3]);
                put(&len.to_le_bytes());
            }
            CutEntry::End => put(&[0]),
        }
        at
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn entries_go_out_and_back() {
        for e in [
            CutEntry::Axes {
                t_us: 7,
                axis1_deg: 1.5,
                axis2_deg: 90.0,
            },
            CutEntry::Sweep {
                start_us: 1,
                end_us: 2,
                len: 300,
            },
            CutEntry::Trace { len: 812 },
            CutEntry::End,
        ] {
            let mut b = [0u8; CUT_MAX_ENTRY_LEN];
            let n = e.emit(&mut b);
            assert_eq!(n, 1 + CutEntry::head_len(b[0]).unwrap());
            assert_eq!(CutEntry::parse(b[0], &b[1..n]).unwrap(), e);
        }
        assert_eq!(CutEntry::head_len(4), Err(CaptureError::UnknownEntry(4)));
        assert_eq!(CutEntry::parse(3, &[1, 2]), Err(CaptureError::Truncated));
    }
}
