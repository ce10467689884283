//! RCS captures for the emulated board: everything an RCS scan gives the board, in one
//! little-endian file (`rcs.bin`), and the board's answer (`rcs-out.bin`).
//!
//! Capture:
//!
//! ```text
//! "SGRCS001"                         8 bytes
//! start_hz f64, step_hz f64, points u32
//! band window Kaiser β f32, gate shape Tukey α f32, gate centre s f64, gate span s f64
//! F u32, F × grid index u32, F × known amplitude (re f32, im f32), m
//! reference sweep K × (re f32, im f32), its background K × (re, im)
//! N u32, then N × (angle_deg f32, background K × (re, im), target K × (re, im))
//! ```
//!
//! Answer: F × calibration factor (re f32, im f32), then N × (angle_deg f32, F × dBsm f32).

use anyhow::{bail, Context};
use sweepgate::Complex32;

/// The capture's first bytes.
pub const MAGIC: &[u8; 8] = b"SGRCS001";

/// Largest point count a capture may hold (the board's M).
pub const MAX_CAPTURE_POINTS: usize = 1024;

/// One RCS capture.
#[derive(Debug, Clone, PartialEq)]
pub struct RcsCapture {
    /// First frequency, Hz.
    pub start_hz: f64,
    /// Frequency step, Hz.
    pub step_hz: f64,
    /// Band window's Kaiser β.
    pub band_beta: f32,
    /// Gate shape's Tukey α.
    pub shape_alpha: f32,
    /// Gate centre, s.
    pub center_s: f64,
    /// Gate span, s.
    pub span_s: f64,
    /// Pattern frequencies as grid indices.
    pub indices: Vec<u32>,
    /// The reference target's amplitude at each pattern frequency, m.
    pub known: Vec<Complex32>,
    /// The reference measurement.
    pub reference: Vec<Complex32>,
    /// Its background.
    pub reference_background: Vec<Complex32>,
    /// Per angle: (angle, background, target).
    pub angles: Vec<(f32, Vec<Complex32>, Vec<Complex32>)>,
}

/// The board's answer.
#[derive(Debug, Clone, PartialEq)]
pub struct RcsAnswer {
    /// Calibration factor at each pattern frequency.
    pub factors: Vec<Complex32>,
    /// Per angle: (angle, dBsm at each pattern frequency).
    pub rows: Vec<(f32, Vec<f32>)>,
}

fn put_sweep(out: &mut Vec<u8>, s: &[Complex32]) {
    for v in s {
        out.extend_from_slice(&v.re.to_le_bytes());
        out.extend_from_slice(&v.im.to_le_bytes());
    }
}

impl RcsCapture {
    /// Points per sweep.
    pub fn points(&self) -> usize {
        self.reference.len()
    }

    /// The capture's bytes; refuses sweeps of different lengths or over
    /// [`MAX_CAPTURE_POINTS`].
    pub fn to_bytes(&self) -> anyhow::Result<Vec<u8>> {
        let k = self.points();
        if !(2..=MAX_CAPTURE_POINTS).contains(&k) {
            bail!("{k} points per sweep: the board takes 2 to {MAX_CAPTURE_POINTS}");
        }
        let same = self.reference_background.len() == k
            && self
                .angles
                .iter()
                .all(|(_, b, t)| b.len() == k && t.len() == k);
        if !same || self.indices.len() != self.known.len() {
            bail!("the sweeps of an RCS capture must all have {k} points");
        }
        let mut out = MAGIC.to_vec();
        out.extend_from_slice(&self.start_hz.to_le_bytes());
        out.extend_from_slice(&self.step_hz.to_le_bytes());
        out.extend_from_slice(&(k as u32).to_le_bytes());
        out.extend_from_slice(&self.band_beta.to_le_bytes());
        out.extend_from_slice(&self.shape_alpha.to_le_bytes());
        out.extend_from_slice(&self.center_s.to_le_bytes());
        out.extend_from_slice(&self.span_s.to_le_bytes());
        out.extend_from_slice(&(self.indices.len() as u32).to_le_bytes());
        for i in &self.indices {
            out.extend_from_slice(&i.to_le_bytes());
        }
        put_sweep(&mut out, &self.known);
        put_sweep(&mut out, &self.reference);
        put_sweep(&mut out, &self.reference_background);
        out.extend_from_slice(&(self.angles.len() as u32).to_le_bytes());
        for (a, b, t) in &self.angles {
            out.extend_from_slice(&a.to_le_bytes());
            put_sweep(&mut out, b);
            put_sweep(&mut out, t);
        }
        Ok(out)
    }

    /// Reads a capture back.
    pub fn from_bytes(bytes: &[u8]) -> anyhow::Result<Self> {
        let mut r = Reader { bytes, at: 0 };
        if r.take(8)? != MAGIC {
            bail!("not an RCS capture (no SGRCS001 at the start)");
        }
        let (start_hz, step_hz) = (r.f64()?, r.f64()?);
        let k = r.u32()? as usize;
        if !(2..=MAX_CAPTURE_POINTS).contains(&k) {
            bail!("{k} points per sweep: out of range");
        }
        let (band_beta, shape_alpha) = (r.f32()?, r.f32()?);
        let (center_s, span_s) = (r.f64()?, r.f64()?);
        let f = r.u32()? as usize;
        if f > 64 {
            bail!("{f} pattern frequencies: out of range");
        }
        let indices = (0..f)
            .map(|_| r.u32())
            .collect::<anyhow::Result<Vec<_>>>()?;
        let known = r.sweep(f)?;
        let (reference, reference_background) = (r.sweep(k)?, r.sweep(k)?);
        let n = r.u32()? as usize;
        let mut angles = Vec::with_capacity(n.min(4096));
        for _ in 0..n {
            angles.push((r.f32()?, r.sweep(k)?, r.sweep(k)?));
        }
        Ok(Self {
            start_hz,
            step_hz,
            band_beta,
            shape_alpha,
            center_s,
            span_s,
            indices,
            known,
            reference,
            reference_background,
            angles,
        })
    }
}

impl RcsAnswer {
    /// Reads the board's answer for a capture of `frequencies` pattern frequencies.
    pub fn from_bytes(bytes: &[u8], frequencies: usize) -> anyhow::Result<Self> {
        let mut r = Reader { bytes, at: 0 };
        let factors = r.sweep(frequencies)?;
        let mut rows = Vec::new();
        while r.at < bytes.len() {
            let a = r.f32()?;
            let v = (0..frequencies)
                .map(|_| r.f32())
                .collect::<anyhow::Result<Vec<_>>>()?;
            rows.push((a, v));
        }
        Ok(Self { factors, rows })
    }
}

struct Reader<'a> {
    bytes: &'a [u8],
    at: usize,
}

impl Reader<'_> {
    fn take(&mut self, n: usize) -> anyhow::Result<&[u8]> {
        let end = self.at.checked_add(n).filter(|&e| e <= self.bytes.len());
        let end =
            end.with_context(|| format!("ends at byte {} inside a field", self.bytes.len()))?;
        let s = &self.bytes[self.at..end];
        self.at = end;
        Ok(s)
    }
    fn arr<const N: usize>(&mut self) -> anyhow::Result<[u8; N]> {
        let mut a = [0u8; N];
        a.copy_from_slice(self.take(N)?);
        Ok(a)
    }
    fn f64(&mut self) -> anyhow::Result<f64> {
        Ok(f64::from_le_bytes(self.arr()?))
    }
    fn f32(&mut self) -> anyhow::Result<f32> {
        Ok(f32::from_le_bytes(self.arr()?))
    }
    fn u32(&mut self) -> anyhow::Result<u32> {
        Ok(u32::from_le_bytes(self.arr()?))
    }
    fn sweep(&mut self, n: usize) -> anyhow::Result<Vec<Complex32>> {
        (0..n)
            .map(|_| Ok(Complex32::new(self.f32()?, self.f32()?)))
            .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn round_trip_and_truncation() {
        let s = |v: f32| vec![Complex32::new(v, -v); 4];
        let c = RcsCapture {
            start_hz: 8e9,
            step_hz: 1e7,
            band_beta: 6.0,
            shape_alpha: 0.3,
            center_s: 2e-8,
            span_s: 4e-9,
            indices: vec![1, 2],
            known: vec![Complex32::new(0.5, 0.0); 2],
            reference: s(1.0),
            reference_background: s(2.0),
            angles: vec![(-1.0, s(3.0), s(4.0)), (1.0, s(5.0), s(6.0))],
        };
        let bytes = c.to_bytes().unwrap();
        assert_eq!(RcsCapture::from_bytes(&bytes).unwrap(), c);
        assert!(RcsCapture::from_bytes(&bytes[..bytes.len() - 1]).is_err());
        let mut bad = c.clone();
        bad.reference_background.pop();
        assert!(bad.to_bytes().is_err());
    }
}
