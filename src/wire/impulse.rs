//! The impulse-response preview record (kind 3): a closed bin's impulse response at the
//! delays around the gate, decimated to at most [`IMPULSE_POINTS`] levels of one byte, so
//! that a viewer can draw the angle × delay map with the gate on it. Its layout is in
//! [`crate::wire::preview`] with the other kinds; the engine fills one for every
//! [`crate::scan::ScanConfig::impulse_every`]-th closed bin when the FFT path runs.
//!
//! The window covers the gate centre ± [`IMPULSE_HALF_SPANS`] gate spans (wrapping around
//! the alias-free range like the response itself); each point holds the strongest sample of
//! its group of `step` samples, so a narrow echo is never lost between points.
//!
//! ```
//! use sweepgate::wire::impulse::ImpulseRecord;
//! let mut r = ImpulseRecord::empty();
//! r.peak_db = -20.0;
//! r.push_level(-20.0);
//! r.push_level(-26.3);
//! r.push_level(-500.0);
//! assert_eq!(r.levels.as_slice(), &[0, 13, 255]);
//! assert_eq!(r.level_db(1), Some(-26.5));
//! assert_eq!(r.level_db(2), None);
//! ```

use crate::error::{EmitError, FrameError};
use crate::Complex32;

/// Most levels an impulse record carries.
pub const IMPULSE_POINTS: usize = 64;
/// Fixed part of an impulse record body, bytes.
pub const IMPULSE_FIXED_LEN: usize = 19;
/// The window either side of the gate centre, in gate spans.
pub const IMPULSE_HALF_SPANS: f32 = 2.0;
/// Level steps per dB: a level byte is dB below the peak times this.
pub const LEVEL_STEPS_PER_DB: f32 = 2.0;
/// A level byte meaning "at or below the lowest step" (127.5 dB under the peak).
pub const LEVEL_FLOOR: u8 = 255;

/// A closed bin's impulse response near the gate, decimated.
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ImpulseRecord {
    /// Bin index in the layout.
    pub bin: u16,
    /// The bin's nominal angle, deg.
    pub nominal_deg: f32,
    /// Delay of the first point, ns (from the VNA's time zero, possibly negative).
    pub first_ns: f32,
    /// Delay between points, ns.
    pub step_ns: f32,
    /// Level of the strongest point, dB (20·log10 |h|).
    pub peak_db: f32,
    /// Each point's level below `peak_db`, in steps of 1/[`LEVEL_STEPS_PER_DB`] dB;
    /// [`LEVEL_FLOOR`] = that far below or lower.
    pub levels: heapless::Vec<u8, IMPULSE_POINTS>,
}

impl ImpulseRecord {
    /// A record with no points.
    pub const fn empty() -> Self {
        Self {
            bin: 0,
            nominal_deg: 0.0,
            first_ns: 0.0,
            step_ns: 0.0,
            peak_db: 0.0,
            levels: heapless::Vec::new(),
        }
    }

    /// Appends a point at `level_db` (dB, 20·log10 |h|) relative to [`Self::peak_db`];
    /// ignored when full.
    pub fn push_level(&mut self, level_db: f32) {
        let below = (self.peak_db - level_db) * LEVEL_STEPS_PER_DB;
        let q = if below.is_nan() || below >= f32::from(LEVEL_FLOOR) {
            LEVEL_FLOOR
        } else {
            // Round half up, without `round` (not in core).
            (below.max(0.0) + 0.5) as u8
        };
        let _ = self.levels.push(q);
    }

    /// Level of point `i`, dB; `None` beyond the points or at the floor.
    pub fn level_db(&self, i: usize) -> Option<f32> {
        let q = *self.levels.get(i)?;
        (q != LEVEL_FLOOR).then(|| self.peak_db - f32::from(q) / LEVEL_STEPS_PER_DB)
    }

    /// Body length on the wire.
    pub fn body_len(&self) -> usize {
        IMPULSE_FIXED_LEN + self.levels.len()
    }

    /// Writes the body into `buf`, returning its length.
    pub fn emit(&self, buf: &mut [u8]) -> Result<usize, EmitError> {
        let n = self.body_len();
        let out = buf.get_mut(..n).ok_or(EmitError::BufferFull)?;
        out[0..2].copy_from_slice(&self.bin.to_le_bytes());
        out[2..6].copy_from_slice(&self.nominal_deg.to_le_bytes());
        out[6..10].copy_from_slice(&self.first_ns.to_le_bytes());
        out[10..14].copy_from_slice(&self.step_ns.to_le_bytes());
        out[14..18].copy_from_slice(&self.peak_db.to_le_bytes());
        out[18] = self.levels.len() as u8;
        out[IMPULSE_FIXED_LEN..].copy_from_slice(&self.levels);
        Ok(n)
    }

    /// Reads a body written by [`emit`](Self::emit).
    pub fn parse(body: &[u8]) -> Result<Self, FrameError> {
        let n = usize::from(*body.get(18).ok_or(FrameError::BadLength)?);
        if body.len() != IMPULSE_FIXED_LEN + n {
            return Err(FrameError::BadLength);
        }
        if n > IMPULSE_POINTS {
            return Err(FrameError::BadField);
        }
        let f =
            |at: usize| f32::from_le_bytes([body[at], body[at + 1], body[at + 2], body[at + 3]]);
        let mut levels = heapless::Vec::new();
        levels
            .extend_from_slice(&body[IMPULSE_FIXED_LEN..])
            .map_err(|_| FrameError::BadField)?;
        Ok(Self {
            bin: u16::from_le_bytes([body[0], body[1]]),
            nominal_deg: f(2),
            first_ns: f(6),
            step_ns: f(10),
            peak_db: f(14),
            levels,
        })
    }

    /// Fills the record from an impulse response `h` of M samples `dt_s` apart, for a gate
    /// at `center_s` of `span_s`: the window of [`IMPULSE_HALF_SPANS`] spans either side of
    /// the centre, in at most [`IMPULSE_POINTS`] points, each the strongest of its samples.
    /// Bin and angle are left to the caller. Bounded work: one pass over the window.
    // Out of line: one copy in flash, called for one closed bin in several.
    #[inline(never)]
    pub fn sample(&mut self, h: &[Complex32], dt_s: f64, center_s: f64, span_s: f64) {
        self.levels.clear();
        let m = h.len();
        if m == 0 || dt_s.is_nan() || dt_s <= 0.0 {
            return;
        }
        let half = (f64::from(IMPULSE_HALF_SPANS) * span_s / dt_s).max(1.0);
        let first = libm::floor(center_s / dt_s - half);
        let width = (libm::round(2.0 * half) as usize).clamp(1, m);
        let step = width.div_ceil(IMPULSE_POINTS);
        let n = width.div_ceil(step);
        let start = (first as i64).rem_euclid(m as i64) as usize;
        self.first_ns = (first * dt_s * 1e9) as f32;
        self.step_ns = (step as f64 * dt_s * 1e9) as f32;
        // Powers first (the strongest of each group), then levels below the peak.
        let mut power = [0.0f32; IMPULSE_POINTS];
        for (i, p) in power.iter_mut().enumerate().take(n) {
            for j in 0..step {
                let e = h[(start + i * step + j) % m].norm_sqr();
                *p = p.max(e);
            }
        }
        let peak = power[..n].iter().copied().fold(0.0f32, f32::max);
        self.peak_db = db_of_power(peak);
        for &p in &power[..n] {
            self.push_level(db_of_power(p));
        }
    }
}

/// 10·log10 of a power; −400 dB for zero.
fn db_of_power(p: f32) -> f32 {
    if p > 0.0 {
        10.0 * libm::log10f(p)
    } else {
        -400.0
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn body_round_trips_and_bad_lengths_are_refused() {
        let mut r = ImpulseRecord::empty();
        r.bin = 7;
        r.nominal_deg = -3.5;
        r.first_ns = 10.0;
        r.step_ns = 0.25;
        r.peak_db = -12.0;
        for k in 0..IMPULSE_POINTS {
            r.push_level(-12.0 - k as f32);
        }
        let mut buf = [0u8; 128];
        let n = r.emit(&mut buf).unwrap();
        assert_eq!(n, IMPULSE_FIXED_LEN + IMPULSE_POINTS);
        assert_eq!(ImpulseRecord::parse(&buf[..n]).unwrap(), r);
        assert_eq!(
            ImpulseRecord::parse(&buf[..n - 1]),
            Err(FrameError::BadLength)
        );
        let mut big = buf;
        big[18] = 65;
        assert_eq!(
            ImpulseRecord::parse(&big[..IMPULSE_FIXED_LEN + 65]),
            Err(FrameError::BadField)
        );
        assert_eq!(r.emit(&mut [0u8; 20]), Err(EmitError::BufferFull));
    }

    #[test]
    fn sampling_keeps_a_narrow_peak_and_places_the_window_around_the_gate() {
        // 1024 samples 0.1 ns apart; a gate at 20 ns, 2 ns wide: the window is 16..24 ns,
        // 80 samples in 40 points of 2 samples each.
        let mut h = [Complex32::new(0.0, 0.0); 1024];
        h[200] = Complex32::new(1.0, 0.0); // 20.0 ns, the direct path
        h[221] = Complex32::new(0.1, 0.0); // 22.1 ns, an echo 20 dB down
        let mut r = ImpulseRecord::empty();
        r.sample(&h, 0.1e-9, 20e-9, 2e-9);
        assert_eq!(r.levels.len(), 40);
        assert!((r.first_ns - 16.0).abs() < 1e-4, "{}", r.first_ns);
        assert!((r.step_ns - 0.2).abs() < 1e-6);
        assert!(r.peak_db.abs() < 1e-6);
        // Sample 200 is point (200 − 160) / 2 = 20; sample 221 is point 30.
        assert_eq!(r.levels[20], 0);
        assert_eq!(r.level_db(30), Some(-20.0));
        assert_eq!(r.levels[0], LEVEL_FLOOR);
    }

    #[test]
    fn a_window_wider_than_the_points_is_decimated_and_wraps_around() {
        let mut h = [Complex32::new(0.0, 0.0); 256];
        h[255] = Complex32::new(0.5, 0.0);
        let mut r = ImpulseRecord::empty();
        // Gate at 0 ns, 10 ns wide, 1 ns samples: the window −20..20 ns is 40 samples.
        r.sample(&h, 1e-9, 0.0, 10e-9);
        assert_eq!(r.levels.len(), IMPULSE_POINTS.min(40));
        // Sample 255 is −1 ns: point 19 of a window starting at −20 ns.
        assert_eq!(r.levels[19], 0);
        // 400 samples of window in 64 points: 7 samples a point, 58 points (the last
        // holding 1 sample).
        let h = [Complex32::new(1.0, 0.0); 1024];
        r.sample(&h, 1e-9, 300e-9, 100e-9);
        assert_eq!(r.levels.len(), 58);
        assert!((r.step_ns - 7.0).abs() < 1e-6);
    }
}
