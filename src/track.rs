//! Positioner samples: unwrap, interpolate, direction, speed, stall.
//!
//! A [`Tracker`] takes timestamped positioner readings, either angles in degrees (wrapped to
//! 0–360° or ±180°, or already continuous) or raw quadrature encoder counts, and keeps one
//! continuous, unwrapped angle in a fixed ring of the last `N` accepted samples. Between two
//! samples the angle is interpolated linearly; up to a configured limit beyond either end of
//! the history it is extrapolated along the end segment, and further out the answer is an
//! [`AngleError`], never a guess.
//!
//! Unwrapping takes the shorter way round between consecutive samples, so readings must
//! arrive at least twice per half turn (at 30 deg/s, within 6 s of each other).
//!
//! Every sample is counted: accepted, or rejected as non-finite, non-monotonic in time, a
//! jump faster than `max_speed_deg_s` (plus `jitter_deg`), an encoder count wider than the
//! counter, or the wrong kind of sample. After `resync_after` jump rejections in a row the
//! tracker believes the new position and starts its history afresh (counted as a resync):
//! a glitch that was accepted as the very first sample cannot lock the track out forever.
//!
//! The positioner is moving machinery: these estimates are for binning, not for interlocks;
//! keep the lab's own limit switches and emergency stop in charge of safety.
//!
//! ```
//! use sweepgate::track::{Tracker, TrackConfig, Direction};
//! let mut t: Tracker<16> = Tracker::new(TrackConfig::default()).unwrap();
//! // 10 deg/s, crossing 360° → 0°.
//! t.push_angle(0, 359.0).unwrap();
//! t.push_angle(100_000, 0.0).unwrap();
//! t.push_angle(200_000, 1.0).unwrap();
//! let a = t.angle_at(150_000).unwrap();
//! assert!((a.angle_deg - 360.5).abs() < 1e-3); // continuous: 360.5°, i.e. 0.5°
//! assert_eq!(t.direction(), Direction::Forward);
//! assert!((t.speed_deg_s().unwrap() - 10.0).abs() < 1e-3);
//! ```

use crate::error::{AngleError, SampleReject, TrackConfigError};

/// Tracker settings. Validated once by [`Tracker::new`].
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct TrackConfig {
    /// Fastest the positioner can physically turn; faster apparent moves are rejected.
    pub max_speed_deg_s: f32,
    /// Reading noise allowed on top of `max_speed_deg_s × Δt` before a move counts as a jump.
    pub jitter_deg: f32,
    /// How far beyond either end of the history an angle may be extrapolated, µs.
    pub extrapolate_us: u32,
    /// Span over which speed is estimated, ending at the newest sample, µs.
    pub speed_window_us: u32,
    /// Below this speed the positioner counts as still (direction [`Direction::Still`]).
    pub still_speed_deg_s: f32,
    /// Angle band the positioner must stay within to count as settled.
    pub settle_tolerance_deg: f32,
    /// How long the angle must stay within `settle_tolerance_deg` to count as settled, µs.
    pub settle_time_us: u32,
    /// How long it must stay within the tolerance to count as stalled (or parked), µs.
    pub stall_time_us: u32,
    /// Consecutive jump rejections after which the tracker restarts at the new position
    /// (0 = never).
    pub resync_after: u16,
}

impl Default for TrackConfig {
    /// A bench turntable: up to 90 deg/s, 0.05° reading noise, 50 ms extrapolation, speed
    /// over 100 ms, still below 0.05 deg/s, settled within 0.02° for 200 ms, stalled after
    /// 2 s, resync after 8 jumps in a row.
    fn default() -> Self {
        Self {
            max_speed_deg_s: 90.0,
            jitter_deg: 0.05,
            extrapolate_us: 50_000,
            speed_window_us: 100_000,
            still_speed_deg_s: 0.05,
            settle_tolerance_deg: 0.02,
            settle_time_us: 200_000,
            stall_time_us: 2_000_000,
            resync_after: 8,
        }
    }
}

impl TrackConfig {
    /// The settings of a tracker not yet configured (all zero; never validated or used).
    pub(crate) const UNSET: TrackConfig = TrackConfig {
        max_speed_deg_s: 0.0,
        jitter_deg: 0.0,
        extrapolate_us: 0,
        speed_window_us: 0,
        still_speed_deg_s: 0.0,
        settle_tolerance_deg: 0.0,
        settle_time_us: 0,
        stall_time_us: 0,
        resync_after: 0,
    };

    fn validate(&self) -> Result<(), TrackConfigError> {
        if !(self.max_speed_deg_s.is_finite() && self.max_speed_deg_s > 0.0) {
            return Err(TrackConfigError::MaxSpeed);
        }
        if !(self.jitter_deg.is_finite() && self.jitter_deg >= 0.0) {
            return Err(TrackConfigError::Jitter);
        }
        if !(self.settle_tolerance_deg.is_finite() && self.settle_tolerance_deg >= 0.0) {
            return Err(TrackConfigError::SettleTolerance);
        }
        if !(self.still_speed_deg_s.is_finite() && self.still_speed_deg_s >= 0.0) {
            return Err(TrackConfigError::MaxSpeed);
        }
        Ok(())
    }
}

/// Which way an increasing encoder count turns the angle.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Sense {
    /// Counts up = angle up.
    Positive,
    /// Counts up = angle down.
    Negative,
}

/// Width of the hardware counter, which wraps at 2^16 or 2^32.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum CounterWidth {
    /// 16-bit counter (wraps 65535 → 0).
    Bits16,
    /// 32-bit counter.
    Bits32,
}

/// A quadrature encoder: counts per revolution (after ×4 decoding), the count that reads 0°,
/// sense and counter width.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct EncoderConfig {
    /// Counts per full turn of the positioner axis.
    pub counts_per_rev: u32,
    /// The raw count at which the angle is 0°.
    pub zero_offset_counts: u32,
    /// Which way counting up turns the angle.
    pub sense: Sense,
    /// Counter width.
    pub width: CounterWidth,
}

/// Direction of motion.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Direction {
    /// Angle increasing.
    Forward,
    /// Angle decreasing.
    Reverse,
    /// Slower than the still threshold, or unknown.
    Still,
}

/// An angle answered for a time.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct AngleAt {
    /// Continuous (unwrapped) angle.
    pub angle_deg: f32,
    /// True when the time lay outside the history and the angle was extrapolated.
    pub extrapolated: bool,
}

/// Sample counters: `accepted + rejected() == pushed` always.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct TrackCounters {
    /// Samples offered.
    pub pushed: u32,
    /// Samples taken into the history.
    pub accepted: u32,
    /// Rejected: NaN or infinite angle.
    pub non_finite: u32,
    /// Rejected: time not after the previous sample.
    pub non_monotonic: u32,
    /// Rejected: faster than the maximum speed.
    pub jump: u32,
    /// Rejected: encoder count wider than the counter.
    pub count_out_of_range: u32,
    /// Rejected: wrong kind of sample for this tracker.
    pub wrong_source: u32,
    /// Times the history was restarted after repeated jumps (the sample that triggered it
    /// counts as accepted).
    pub resyncs: u32,
}

impl TrackCounters {
    /// All counters zero (`Default`, usable in a `const`).
    pub const ZERO: TrackCounters = TrackCounters {
        pushed: 0,
        accepted: 0,
        non_finite: 0,
        non_monotonic: 0,
        jump: 0,
        count_out_of_range: 0,
        wrong_source: 0,
        resyncs: 0,
    };

    /// Sum of all rejection counters.
    pub fn rejected(&self) -> u32 {
        self.non_finite
            .saturating_add(self.non_monotonic)
            .saturating_add(self.jump)
            .saturating_add(self.count_out_of_range)
            .saturating_add(self.wrong_source)
    }
}

/// What happened to an accepted sample.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Accepted {
    /// Appended to the history.
    Appended,
    /// The history restarted at this sample after repeated jumps.
    Resynced,
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
struct EncoderState {
    cfg: EncoderConfig,
    /// Last accepted raw count, and the unwrapped count it stands for.
    last_raw: Option<(u32, i64)>,
}

impl EncoderState {
    fn mask(&self) -> u32 {
        match self.cfg.width {
            CounterWidth::Bits16 => 0xFFFF,
            CounterWidth::Bits32 => u32::MAX,
        }
    }

    /// Unwrapped count for `raw`, without committing it.
    fn unwrap(&self, raw: u32) -> i64 {
        match self.last_raw {
            None => i64::from(raw),
            Some((last, total)) => {
                let d = match self.cfg.width {
                    CounterWidth::Bits16 => {
                        i64::from((raw as u16).wrapping_sub(last as u16) as i16)
                    }
                    CounterWidth::Bits32 => i64::from(raw.wrapping_sub(last) as i32),
                };
                total.saturating_add(d)
            }
        }
    }

    fn angle_deg(&self, total: i64) -> f32 {
        let cpr = i64::from(self.cfg.counts_per_rev);
        let c = total.saturating_sub(i64::from(self.cfg.zero_offset_counts));
        let c = match self.cfg.sense {
            Sense::Positive => c,
            Sense::Negative => c.saturating_neg(),
        };
        let revs = c.div_euclid(cpr);
        let rem = c.rem_euclid(cpr);
        revs as f32 * 360.0 + rem as f32 * (360.0 / self.cfg.counts_per_rev as f32)
    }
}

/// Continuous positioner angle from timestamped samples, with a history of `N` samples.
///
/// See the [module docs](self) for an example.
#[derive(Debug, Clone)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Tracker<const N: usize> {
    cfg: TrackConfig,
    encoder: Option<EncoderState>,
    times_us: [u64; N],
    angles_deg: [f32; N],
    head: usize,
    len: usize,
    /// Last raw (possibly wrapped) angle reading, for shortest-way unwrapping.
    last_reading_deg: f32,
    /// Whole turns added to the reading to make it continuous.
    turns: i32,
    still_anchor_deg: f32,
    still_since_us: u64,
    jumps_in_row: u16,
    counters: TrackCounters,
}

impl<const N: usize> Tracker<N> {
    /// A tracker fed with angles in degrees ([`push_angle`](Self::push_angle)).
    pub fn new(cfg: TrackConfig) -> Result<Self, TrackConfigError> {
        if N < 2 {
            return Err(TrackConfigError::HistoryTooSmall);
        }
        cfg.validate()?;
        Ok(Self {
            cfg,
            ..Self::unconfigured()
        })
    }

    /// An empty tracker with placeholder settings, for an engine not yet configured (the
    /// engine refuses samples before it reaches the tracker). `const`, so that the engine
    /// can be a `static`.
    pub(crate) const fn unconfigured() -> Self {
        Self {
            cfg: TrackConfig::UNSET,
            encoder: None,
            times_us: [0; N],
            angles_deg: [0.0; N],
            head: 0,
            len: 0,
            last_reading_deg: 0.0,
            turns: 0,
            still_anchor_deg: 0.0,
            still_since_us: 0,
            jumps_in_row: 0,
            counters: TrackCounters::ZERO,
        }
    }

    /// A tracker fed with raw encoder counts ([`push_counts`](Self::push_counts)).
    pub fn with_encoder(cfg: TrackConfig, enc: EncoderConfig) -> Result<Self, TrackConfigError> {
        let max_cpr = match enc.width {
            CounterWidth::Bits16 => 1 << 15,
            CounterWidth::Bits32 => 1 << 31,
        };
        if enc.counts_per_rev == 0 || enc.counts_per_rev > max_cpr {
            return Err(TrackConfigError::CountsPerRevolution);
        }
        let mut t = Self::new(cfg)?;
        t.encoder = Some(EncoderState {
            cfg: enc,
            last_raw: None,
        });
        Ok(t)
    }

    /// The validated configuration.
    pub fn config(&self) -> &TrackConfig {
        &self.cfg
    }

    /// Sample counters.
    pub fn counters(&self) -> &TrackCounters {
        &self.counters
    }

    /// Samples in the history.
    pub fn len(&self) -> usize {
        self.len
    }

    /// True before the first accepted sample.
    pub fn is_empty(&self) -> bool {
        self.len == 0
    }

    /// Forget the history (counters are kept).
    pub fn clear(&mut self) {
        self.len = 0;
        self.head = 0;
        self.jumps_in_row = 0;
        if let Some(e) = self.encoder.as_mut() {
            e.last_raw = None;
        }
    }

    fn at(&self, i: usize) -> (u64, f32) {
        let j = (self.head + i) % N;
        (self.times_us[j], self.angles_deg[j])
    }

    /// Newest sample (time, continuous angle).
    pub fn latest(&self) -> Option<(u64, f32)> {
        if self.len == 0 {
            None
        } else {
            Some(self.at(self.len - 1))
        }
    }

    /// Oldest sample kept (time, continuous angle).
    pub fn oldest(&self) -> Option<(u64, f32)> {
        if self.len == 0 {
            None
        } else {
            Some(self.at(0))
        }
    }

    fn append(&mut self, t_us: u64, angle_deg: f32) {
        let j = (self.head + self.len) % N;
        self.times_us[j] = t_us;
        self.angles_deg[j] = angle_deg;
        if self.len < N {
            self.len += 1;
        } else {
            self.head = (self.head + 1) % N;
        }
        if self.len == 1
            || libm::fabsf(angle_deg - self.still_anchor_deg) > self.cfg.settle_tolerance_deg
        {
            self.still_anchor_deg = angle_deg;
            self.still_since_us = t_us;
        }
    }

    fn restart(&mut self, t_us: u64, angle_deg: f32) {
        self.len = 0;
        self.head = 0;
        self.append(t_us, angle_deg);
    }

    /// Checks time and speed of a candidate continuous angle. `Ok(true)` = resync.
    fn check(&mut self, t_us: u64, angle_deg: f32) -> Result<bool, SampleReject> {
        let Some((t0, a0)) = self.latest() else {
            return Ok(false);
        };
        if t_us <= t0 {
            return Err(SampleReject::NonMonotonic);
        }
        let dt_s = (t_us - t0) as f32 * 1e-6;
        let allowed = self.cfg.max_speed_deg_s * dt_s + self.cfg.jitter_deg;
        if libm::fabsf(angle_deg - a0) > allowed {
            self.jumps_in_row = self.jumps_in_row.saturating_add(1);
            if self.cfg.resync_after != 0 && self.jumps_in_row >= self.cfg.resync_after {
                return Ok(true);
            }
            return Err(SampleReject::Jump);
        }
        Ok(false)
    }

    fn count(&mut self, r: Result<Accepted, SampleReject>) -> Result<Accepted, SampleReject> {
        let c = &mut self.counters;
        c.pushed = c.pushed.saturating_add(1);
        match r {
            Ok(a) => {
                c.accepted = c.accepted.saturating_add(1);
                if a == Accepted::Resynced {
                    c.resyncs = c.resyncs.saturating_add(1);
                }
            }
            Err(e) => {
                let slot = match e {
                    SampleReject::NonFinite => &mut c.non_finite,
                    SampleReject::NonMonotonic => &mut c.non_monotonic,
                    SampleReject::Jump => &mut c.jump,
                    SampleReject::CountOutOfRange => &mut c.count_out_of_range,
                    // `Finished` and `NotConfigured` are the engine's; a tracker never
                    // returns them.
                    SampleReject::WrongSource
                    | SampleReject::Finished
                    | SampleReject::NotConfigured => &mut c.wrong_source,
                };
                *slot = slot.saturating_add(1);
            }
        }
        r
    }

    /// Push an angle reading at `t_us`. The reading may be wrapped (0–360°, ±180°) or
    /// continuous; it is unwrapped the shorter way from the previous reading.
    pub fn push_angle(&mut self, t_us: u64, angle_deg: f32) -> Result<Accepted, SampleReject> {
        let r = self.push_angle_inner(t_us, angle_deg);
        self.count(r)
    }

    fn push_angle_inner(&mut self, t_us: u64, reading: f32) -> Result<Accepted, SampleReject> {
        if self.encoder.is_some() {
            return Err(SampleReject::WrongSource);
        }
        if !reading.is_finite() {
            return Err(SampleReject::NonFinite);
        }
        let Some((t0, _)) = self.latest() else {
            self.last_reading_deg = reading;
            self.turns = 0;
            self.restart(t_us, reading);
            return Ok(Accepted::Appended);
        };
        if t_us <= t0 {
            return Err(SampleReject::NonMonotonic);
        }
        // Whole turns are counted as an integer and added once, so the continuous angle
        // carries no accumulated rounding however long the scan runs.
        let d = reading - self.last_reading_deg;
        let turns = if d > 180.0 {
            self.turns.saturating_sub(1)
        } else if d < -180.0 {
            self.turns.saturating_add(1)
        } else {
            self.turns
        };
        let cont = reading + 360.0 * turns as f32;
        if self.check(t_us, cont)? {
            self.last_reading_deg = reading;
            self.turns = 0;
            self.jumps_in_row = 0;
            self.restart(t_us, reading);
            return Ok(Accepted::Resynced);
        }
        self.jumps_in_row = 0;
        self.last_reading_deg = reading;
        self.turns = turns;
        self.append(t_us, cont);
        Ok(Accepted::Appended)
    }

    /// Push a raw encoder count at `t_us` (trackers made by [`with_encoder`](Self::with_encoder)).
    pub fn push_counts(&mut self, t_us: u64, raw: u32) -> Result<Accepted, SampleReject> {
        let r = self.push_counts_inner(t_us, raw);
        self.count(r)
    }

    fn push_counts_inner(&mut self, t_us: u64, raw: u32) -> Result<Accepted, SampleReject> {
        let Some(enc) = self.encoder else {
            return Err(SampleReject::WrongSource);
        };
        if raw & !enc.mask() != 0 {
            return Err(SampleReject::CountOutOfRange);
        }
        let total = enc.unwrap(raw);
        let angle = enc.angle_deg(total);
        let resync = self.check(t_us, angle)?;
        self.jumps_in_row = 0;
        if resync {
            let total = i64::from(raw);
            if let Some(e) = self.encoder.as_mut() {
                e.last_raw = Some((raw, total));
            }
            let angle = enc.angle_deg(total);
            self.restart(t_us, angle);
            return Ok(Accepted::Resynced);
        }
        if let Some(e) = self.encoder.as_mut() {
            e.last_raw = Some((raw, total));
        }
        self.append(t_us, angle);
        Ok(Accepted::Appended)
    }

    /// Index of the last sample with time ≤ `t_us` (history non-empty, t within it).
    fn floor_index(&self, t_us: u64) -> usize {
        let (mut lo, mut hi) = (0usize, self.len - 1);
        while lo < hi {
            let mid = (lo + hi).div_ceil(2);
            if self.at(mid).0 <= t_us {
                lo = mid;
            } else {
                hi = mid - 1;
            }
        }
        lo
    }

    fn lerp(p: (u64, f32), q: (u64, f32), t_us: u64) -> f32 {
        // Times as signed offsets from p, in f32 seconds-scale units of µs.
        let span = q.0.saturating_sub(p.0) as f32;
        if span <= 0.0 {
            return q.1;
        }
        let off = if t_us >= p.0 {
            (t_us - p.0) as f32
        } else {
            -((p.0 - t_us) as f32)
        };
        p.1 + (q.1 - p.1) * (off / span)
    }

    /// The continuous angle at `t_us`: interpolated inside the history, extrapolated along
    /// the end segment up to `extrapolate_us` beyond it, an error further out.
    pub fn angle_at(&self, t_us: u64) -> Result<AngleAt, AngleError> {
        if self.len == 0 {
            return Err(AngleError::NoSamples);
        }
        let first = self.at(0);
        let last = self.at(self.len - 1);
        let lim = u64::from(self.cfg.extrapolate_us);
        if t_us < first.0 {
            let by_us = first.0 - t_us;
            if by_us > lim {
                return Err(AngleError::BeforeHistory { by_us });
            }
            let angle_deg = if self.len >= 2 {
                Self::lerp(first, self.at(1), t_us)
            } else {
                first.1
            };
            return Ok(AngleAt {
                angle_deg,
                extrapolated: true,
            });
        }
        if t_us > last.0 {
            let by_us = t_us - last.0;
            if by_us > lim {
                return Err(AngleError::AfterHistory { by_us });
            }
            let angle_deg = if self.len >= 2 {
                Self::lerp(self.at(self.len - 2), last, t_us)
            } else {
                last.1
            };
            return Ok(AngleAt {
                angle_deg,
                extrapolated: true,
            });
        }
        let i = self.floor_index(t_us);
        let p = self.at(i);
        let angle_deg = if i + 1 < self.len {
            Self::lerp(p, self.at(i + 1), t_us)
        } else {
            p.1
        };
        Ok(AngleAt {
            angle_deg,
            extrapolated: false,
        })
    }

    /// Speed over the last `speed_window_us` of history (or all of it if shorter), deg/s,
    /// signed. `None` with fewer than two samples.
    pub fn speed_deg_s(&self) -> Option<f32> {
        if self.len < 2 {
            return None;
        }
        let last = self.at(self.len - 1);
        let first = self.at(0);
        let t0 = last
            .0
            .saturating_sub(u64::from(self.cfg.speed_window_us))
            .max(first.0);
        let t0 = if t0 == last.0 {
            self.at(self.len - 2).0
        } else {
            t0
        };
        let a0 = self.angle_at(t0).ok()?.angle_deg;
        let dt_s = (last.0 - t0) as f32 * 1e-6;
        if dt_s <= 0.0 {
            return None;
        }
        Some((last.1 - a0) / dt_s)
    }

    /// Direction of motion from [`speed_deg_s`](Self::speed_deg_s).
    pub fn direction(&self) -> Direction {
        match self.speed_deg_s() {
            Some(v) if v > self.cfg.still_speed_deg_s => Direction::Forward,
            Some(v) if v < -self.cfg.still_speed_deg_s => Direction::Reverse,
            _ => Direction::Still,
        }
    }

    /// How long, up to the newest sample, the angle has stayed within `settle_tolerance_deg`
    /// of where it came to rest, µs. 0 with no samples.
    pub fn still_for_us(&self) -> u64 {
        match self.latest() {
            Some((t, _)) => t.saturating_sub(self.still_since_us),
            None => 0,
        }
    }

    /// Settled: still for at least `settle_time_us`. In a step-and-stop scan, the moment to
    /// trigger a sweep.
    pub fn is_settled(&self) -> bool {
        self.len > 0 && self.still_for_us() >= u64::from(self.cfg.settle_time_us)
    }

    /// Stalled or parked: still for at least `stall_time_us`.
    pub fn is_stalled(&self) -> bool {
        self.len > 0 && self.still_for_us() >= u64::from(self.cfg.stall_time_us)
    }

    /// Whether the positioner was settled over `[t0_us, t1_us]`: every kept sample in the
    /// span and the interpolated end points lie within `settle_tolerance_deg` of the angle
    /// at `t1_us`. `None` when the span is not covered by the history (within the
    /// extrapolation limit). Work is bounded by `N`.
    pub fn still_between(&self, t0_us: u64, t1_us: u64) -> Option<bool> {
        let a1 = self.angle_at(t1_us).ok()?.angle_deg;
        let a0 = self.angle_at(t0_us).ok()?.angle_deg;
        let tol = self.cfg.settle_tolerance_deg;
        if libm::fabsf(a0 - a1) > tol {
            return Some(false);
        }
        for i in 0..self.len {
            let (t, a) = self.at(i);
            if t >= t0_us && t <= t1_us && libm::fabsf(a - a1) > tol {
                return Some(false);
            }
        }
        Some(true)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cfg() -> TrackConfig {
        TrackConfig::default()
    }

    #[test]
    fn interpolates_and_bounds_extrapolation() {
        let mut t: Tracker<8> = Tracker::new(cfg()).unwrap();
        assert_eq!(t.angle_at(0), Err(AngleError::NoSamples));
        t.push_angle(1_000_000, 10.0).unwrap();
        t.push_angle(1_100_000, 11.0).unwrap();
        let a = t.angle_at(1_025_000).unwrap();
        assert!((a.angle_deg - 10.25).abs() < 1e-4 && !a.extrapolated);
        let a = t.angle_at(1_150_000).unwrap();
        assert!((a.angle_deg - 11.5).abs() < 1e-4 && a.extrapolated);
        assert_eq!(
            t.angle_at(1_150_001),
            Err(AngleError::AfterHistory { by_us: 50_001 })
        );
        assert_eq!(
            t.angle_at(949_999),
            Err(AngleError::BeforeHistory { by_us: 50_001 })
        );
    }

    #[test]
    fn long_multi_turn_scan_does_not_drift() {
        // 20 turns at 36 deg/s read as wrapped 0–360° every 10 ms: 20 000 samples. The
        // continuous angle must stay exact to f32 resolution at 7200° (about 5e-4°).
        let mut t: Tracker<4> = Tracker::new(cfg()).unwrap();
        for i in 0..=20_000u64 {
            let a = (i as f64 * 0.36) % 360.0;
            t.push_angle(i * 10_000, a as f32).unwrap();
        }
        let (_, a) = t.latest().unwrap();
        assert!((a - 7200.0).abs() < 1e-3, "{a}");
        assert_eq!(t.counters().accepted, 20_001);
    }

    #[test]
    fn rejects_and_counts() {
        let mut t: Tracker<4> = Tracker::new(cfg()).unwrap();
        t.push_angle(0, 0.0).unwrap();
        assert_eq!(t.push_angle(0, 0.1), Err(SampleReject::NonMonotonic));
        assert_eq!(t.push_angle(10, f32::NAN), Err(SampleReject::NonFinite));
        // 90 deg/s over 10 ms = 0.9° (+0.05 jitter): 5° is a jump.
        assert_eq!(t.push_angle(10_000, 5.0), Err(SampleReject::Jump));
        assert_eq!(t.push_counts(20_000, 5), Err(SampleReject::WrongSource));
        t.push_angle(10_000, 0.9).unwrap();
        let c = t.counters();
        assert_eq!(c.pushed, 6);
        assert_eq!(c.accepted, 2);
        assert_eq!(c.accepted + c.rejected(), c.pushed);
    }

    #[test]
    fn resyncs_after_repeated_jumps() {
        let mut c = cfg();
        c.resync_after = 3;
        let mut t: Tracker<4> = Tracker::new(c).unwrap();
        t.push_angle(0, 100.0).unwrap();
        assert_eq!(t.push_angle(1_000, 0.0), Err(SampleReject::Jump));
        assert_eq!(t.push_angle(2_000, 0.0), Err(SampleReject::Jump));
        assert_eq!(t.push_angle(3_000, 0.0), Ok(Accepted::Resynced));
        assert_eq!(t.len(), 1);
        assert_eq!(t.counters().resyncs, 1);
    }

    #[test]
    fn ring_keeps_last_n() {
        let mut t: Tracker<4> = Tracker::new(cfg()).unwrap();
        for i in 0..10u64 {
            t.push_angle(i * 10_000, i as f32 * 0.1).unwrap();
        }
        assert_eq!(t.len(), 4);
        assert_eq!(t.oldest().unwrap().0, 60_000);
        let a = t.angle_at(75_000).unwrap().angle_deg;
        assert!((a - 0.75).abs() < 1e-4);
    }

    #[test]
    fn encoder_u16_wrap_and_sense() {
        let enc = EncoderConfig {
            counts_per_rev: 3600,
            zero_offset_counts: 65_000,
            sense: Sense::Positive,
            width: CounterWidth::Bits16,
        };
        let mut t: Tracker<8> = Tracker::with_encoder(cfg(), enc).unwrap();
        t.push_counts(0, 65_530).unwrap(); // 53 deg
        t.push_counts(100_000, 4).unwrap(); // +10 counts across the wrap
        let a = t.latest().unwrap().1;
        assert!((a - 54.0).abs() < 1e-3, "{a}");
        assert_eq!(
            t.push_counts(200_000, 70_000),
            Err(SampleReject::CountOutOfRange)
        );
        let mut neg = enc;
        neg.sense = Sense::Negative;
        let mut t: Tracker<8> = Tracker::with_encoder(cfg(), neg).unwrap();
        t.push_counts(0, 65_010).unwrap(); // −10 counts from zero → −1°
        assert!((t.latest().unwrap().1 + 1.0).abs() < 1e-4);
    }

    #[test]
    fn settle_and_stall() {
        let mut t: Tracker<32> = Tracker::new(cfg()).unwrap();
        t.push_angle(0, 0.0).unwrap();
        t.push_angle(100_000, 5.0).unwrap();
        assert!(!t.is_settled());
        t.push_angle(200_000, 5.01).unwrap();
        t.push_angle(250_000, 5.0).unwrap();
        assert!(!t.is_settled()); // came to rest at 100 ms: still for 150 ms only
        t.push_angle(300_000, 5.0).unwrap();
        assert!(t.is_settled());
        assert!(!t.is_stalled());
        assert_eq!(t.still_between(150_000, 300_000), Some(true));
        assert_eq!(t.still_between(50_000, 300_000), Some(false));
        t.push_angle(400_000, 5.0).unwrap(); // last 100 ms: no motion
        assert_eq!(t.direction(), Direction::Still);
    }
}
