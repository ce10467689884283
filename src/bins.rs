//! Angle bins: the open bin accumulator, closing a bin, per-bin results and flags.
//!
//! A [`BinLayout`] is either a full circle of `360 / step` bins centred on
//! `start + i·step` (angles wrap, so 359.7° falls in the bin at 0° when the step is 1°), or a
//! sector of bins centred on `start, start + step, …, stop` (the sector may straddle 0°/360°
//! or ±180°; angles are compared modulo 360°). Bin `i` covers
//! `[centre − step/2, centre + step/2)`.
//!
//! [`Bins`] keeps exactly one open bin: the coherent complex sum of the raw sweeps that fell
//! in it, their count, the sum of their angle offsets from the bin centre and the largest
//! smear. The open bin closes when a sweep lands in another bin (or outside the layout), when
//! the positioner reverses inside it, or when the caller closes it (scan end, or the
//! positioner seen outside it for a while). On closing, the sum is divided by the count in
//! place and handed to the caller once, to be gated: gating is linear, so gating the average
//! equals averaging the gated sweeps. Results are not stored; per bin only one byte (how
//! many passes closed there, saturating) is kept, so `B` bins cost `B` bytes.
//!
//! # Revisits
//!
//! A bin reached again after it was closed (a second pass, a reversal, a late sweep) is
//! handled by the [`RevisitPolicy`]:
//! - [`KeepFirst`](RevisitPolicy::KeepFirst): its sweeps are refused
//!   ([`SweepReject::AlreadyBinned`]) and counted.
//! - [`Replace`](RevisitPolicy::Replace): it is accumulated afresh and closed with
//!   [`BinFlags::REVISITED`]; a receiver replaces the earlier result.
//! - [`Combine`](RevisitPolicy::Combine): as `Replace`, with [`BinFlags::COMBINE`] set as
//!   well; a receiver averages it with the earlier results weighted by their sweep counts
//!   (the core keeps no per-bin sums, so the combination happens where results are kept).
//!
//! ```
//! use sweepgate::bins::BinLayout;
//! let full = BinLayout::full_circle(0.0, 1.0).unwrap();
//! assert_eq!(full.count(), 360);
//! assert_eq!(full.index_of(359.7), Some(0));
//! assert_eq!(full.index_of(-1.2), Some(359));
//! let sector = BinLayout::sector(-90.0, 90.0, 2.0).unwrap();
//! assert_eq!(sector.count(), 91);
//! assert_eq!(sector.index_of(270.0), Some(0)); // −90° seen as 270°
//! assert_eq!(sector.index_of(120.0), None);
//! ```

use crate::error::{LayoutError, SweepReject};
use crate::track::Direction;
use crate::Complex32;

fn wrap180(d: f32) -> f32 {
    let mut x = libm::fmodf(d + 180.0, 360.0);
    if x < 0.0 {
        x += 360.0;
    }
    x - 180.0
}

fn wrap360(d: f32) -> f32 {
    let mut x = libm::fmodf(d, 360.0);
    if x < 0.0 {
        x += 360.0;
    }
    if x >= 360.0 {
        x -= 360.0;
    }
    x
}

/// A validated bin layout.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct BinLayout {
    start_deg: f32,
    step_deg: f32,
    count: u16,
    full_circle: bool,
}

impl BinLayout {
    /// The layout of an engine not yet configured: no bins (never returned by the
    /// constructors; every angle is outside it).
    pub(crate) const UNSET: BinLayout = BinLayout {
        start_deg: 0.0,
        step_deg: 0.0,
        count: 0,
        full_circle: false,
    };

    /// A full circle of `360 / step_deg` bins, the first centred on `start_deg`.
    pub fn full_circle(start_deg: f32, step_deg: f32) -> Result<Self, LayoutError> {
        if !start_deg.is_finite() || !step_deg.is_finite() {
            return Err(LayoutError::NonFinite);
        }
        if step_deg <= 0.0 {
            return Err(LayoutError::StepNotPositive);
        }
        let n = libm::round(360.0 / f64::from(step_deg));
        if !(1.0..=65535.0).contains(&n) || libm::fabs(n * f64::from(step_deg) - 360.0) > 1e-3 {
            return Err(LayoutError::StepNotDividingCircle);
        }
        Ok(Self {
            start_deg,
            step_deg,
            count: n as u16,
            full_circle: true,
        })
    }

    /// A sector of bins centred on `start_deg, start_deg + step_deg, …, stop_deg`.
    pub fn sector(start_deg: f32, stop_deg: f32, step_deg: f32) -> Result<Self, LayoutError> {
        if !start_deg.is_finite() || !stop_deg.is_finite() || !step_deg.is_finite() {
            return Err(LayoutError::NonFinite);
        }
        if step_deg <= 0.0 {
            return Err(LayoutError::StepNotPositive);
        }
        if stop_deg <= start_deg {
            return Err(LayoutError::StopNotAboveStart);
        }
        let span = f64::from(stop_deg) - f64::from(start_deg);
        let step = f64::from(step_deg);
        if span + step >= 360.0 - 1e-3 {
            return Err(LayoutError::SectorTooWide);
        }
        let n = libm::round(span / step);
        if libm::fabs(n * step - span) > 1e-3 * step.max(1.0) {
            return Err(LayoutError::SpanNotWholeSteps);
        }
        // A bin index is a u16: at most 65535 bins (a tiny step would overflow the count).
        if n + 1.0 > 65535.0 {
            return Err(LayoutError::TooManyBins {
                needed: libm::fmin(n + 1.0, f64::from(u32::MAX)) as u32,
                capacity: 65535,
            });
        }
        Ok(Self {
            start_deg,
            step_deg,
            count: n as u16 + 1,
            full_circle: false,
        })
    }

    /// Number of bins.
    pub fn count(&self) -> u16 {
        self.count
    }

    /// Bin width.
    pub fn step_deg(&self) -> f32 {
        self.step_deg
    }

    /// True for a full-circle layout.
    pub fn is_full_circle(&self) -> bool {
        self.full_circle
    }

    /// Centre of bin `index` (not reduced modulo 360°).
    pub fn nominal_deg(&self, index: u16) -> f32 {
        self.start_deg + f32::from(index) * self.step_deg
    }

    /// The bin holding `angle_deg` (any turn), or `None` outside a sector.
    pub fn index_of(&self, angle_deg: f32) -> Option<u16> {
        if !angle_deg.is_finite() || self.count == 0 {
            return None;
        }
        let half = 0.5 * self.step_deg;
        let x = if self.full_circle {
            wrap360(angle_deg - self.start_deg + half)
        } else {
            let span = f32::from(self.count - 1) * self.step_deg;
            wrap180(angle_deg - self.start_deg - 0.5 * span) + 0.5 * span + half
        };
        if x < 0.0 {
            return None;
        }
        let i = libm::floorf(x / self.step_deg);
        if self.full_circle {
            // Rounding at the top edge can give `count`; that is bin 0 again.
            Some(if i >= f32::from(self.count) {
                0
            } else {
                i as u16
            })
        } else if i < f32::from(self.count) {
            Some(i as u16)
        } else {
            None
        }
    }

    /// Signed offset of `angle_deg` from the centre of bin `index`, in −180…180°.
    pub fn offset_deg(&self, index: u16, angle_deg: f32) -> f32 {
        wrap180(angle_deg - self.nominal_deg(index))
    }
}

/// Per-bin result flags, as bits of a `u16` (the same bits travel in preview records).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct BinFlags(pub u16);

impl BinFlags {
    /// Some sweep's smear exceeded half a bin.
    pub const SMEARED: u16 = 1 << 0;
    /// The bin had been closed before: this is a later pass.
    pub const REVISITED: u16 = 1 << 1;
    /// Taken on a pass opposite to the scan's first direction of motion.
    pub const REVERSED: u16 = 1 << 2;
    /// Fewer sweeps than the sparse threshold.
    pub const SPARSE: u16 = 1 << 3;
    /// Step-and-stop: some sweep was taken while the positioner moved.
    pub const MOVING: u16 = 1 << 4;
    /// Some sweep's angle was extrapolated beyond the positioner history.
    pub const EXTRAPOLATED: u16 = 1 << 5;
    /// Revisit under [`RevisitPolicy::Combine`]: average with the earlier results.
    pub const COMBINE: u16 = 1 << 6;
    /// The gate check ([`crate::gate::GateCheck`]) found a second peak inside the gate.
    pub const ECHO_IN_GATE: u16 = 1 << 7;
    /// The gate check found the strongest response outside the gate: the gate misses the
    /// direct path, or an echo is stronger than it.
    pub const DIRECT_OUTSIDE_GATE: u16 = 1 << 8;

    /// True if all bits of `bit` are set.
    pub fn has(&self, bit: u16) -> bool {
        self.0 & bit == bit
    }
}

/// What to do with a bin reached again after it was closed. See the [module docs](self).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum RevisitPolicy {
    /// Refuse later sweeps into a closed bin.
    KeepFirst,
    /// Emit a new result flagged `REVISITED`; the receiver replaces the old one.
    Replace,
    /// Emit a new result flagged `REVISITED | COMBINE`; the receiver averages.
    Combine,
}

/// A sweep's place in angle, as the engine measured it.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SweepAngle {
    /// Tracked angle at the sweep's mid-time.
    pub mid_deg: f32,
    /// Angle travelled between its first and last point (absolute).
    pub smear_deg: f32,
    /// Direction of motion during the sweep ([`Direction::Still`] if below tolerance).
    pub direction: Direction,
    /// Taken while the positioner moved (step-and-stop scans).
    pub moving: bool,
    /// Its angle was extrapolated beyond the history.
    pub extrapolated: bool,
    /// Its end time, µs.
    pub end_us: u64,
}

/// A closed bin, before gating.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ClosedBin {
    /// Bin index.
    pub index: u16,
    /// Bin centre.
    pub nominal_deg: f32,
    /// Mean measured angle of its sweeps (centre + mean offset, so near 0° it may read
    /// −0.1° or 359.9° as the centre is written).
    pub mean_deg: f32,
    /// Sweeps averaged.
    pub sweeps: u32,
    /// Largest smear.
    pub max_smear_deg: f32,
    /// Flags.
    pub flags: BinFlags,
}

#[derive(Debug, Clone, Copy, PartialEq)]
struct OpenBin {
    index: u16,
    count: u32,
    offset_sum_deg: f32,
    max_smear_deg: f32,
    direction: Direction,
    moving: bool,
    extrapolated: bool,
    last_inside_us: u64,
}

/// The open-bin accumulator for FFT size `M` and up to `B` bins.
#[derive(Debug, Clone)]
pub struct Bins<const M: usize, const B: usize> {
    layout: BinLayout,
    policy: RevisitPolicy,
    min_sweeps: u32,
    visits: [u8; B],
    open: Option<OpenBin>,
    first_direction: Direction,
    sum: [Complex32; M],
}

const ZERO: Complex32 = Complex32::new(0.0, 0.0);

impl<const M: usize, const B: usize> Bins<M, B> {
    /// An accumulator for `layout` (at most `B` bins); bins with fewer than `min_sweeps`
    /// sweeps are flagged sparse.
    pub fn new(
        layout: BinLayout,
        policy: RevisitPolicy,
        min_sweeps: u32,
    ) -> Result<Self, LayoutError> {
        let mut bins = Self::unconfigured();
        bins.configure(layout, policy, min_sweeps)?;
        Ok(bins)
    }

    /// An accumulator with no layout yet (no bins), for an engine not yet configured.
    /// `const`, so that the engine can be a `static`.
    pub(crate) const fn unconfigured() -> Self {
        Self {
            layout: BinLayout::UNSET,
            policy: RevisitPolicy::Replace,
            min_sweeps: 0,
            visits: [0; B],
            open: None,
            first_direction: Direction::Still,
            sum: [ZERO; M],
        }
    }

    /// Starts over with `layout` in this accumulator's own storage (no second `M`-point
    /// sum on the stack): no bin open, none visited. On an error nothing changes.
    pub(crate) fn configure(
        &mut self,
        layout: BinLayout,
        policy: RevisitPolicy,
        min_sweeps: u32,
    ) -> Result<(), LayoutError> {
        if usize::from(layout.count()) > B {
            return Err(LayoutError::TooManyBins {
                needed: u32::from(layout.count()),
                capacity: B.min(u32::MAX as usize) as u32,
            });
        }
        self.layout = layout;
        self.policy = policy;
        self.min_sweeps = min_sweeps;
        self.visits.fill(0);
        self.open = None;
        self.first_direction = Direction::Still;
        self.sum.fill(ZERO);
        Ok(())
    }

    /// Starts a new cut: closes nothing (the caller closes the open bin first), forgets
    /// the visits and the first direction.
    pub(crate) fn start_cut(&mut self) {
        self.visits.fill(0);
        self.first_direction = Direction::Still;
    }

    /// The layout.
    pub fn layout(&self) -> &BinLayout {
        &self.layout
    }

    /// The open bin's index.
    pub fn open_index(&self) -> Option<u16> {
        self.open.map(|o| o.index)
    }

    /// Sweeps in the open bin so far (0 when no bin is open).
    pub fn open_sweeps(&self) -> u32 {
        self.open.map_or(0, |o| o.count)
    }

    /// Passes closed in bin `index` (saturating at 255; 0 outside the layout).
    pub fn visits(&self, index: u16) -> u8 {
        self.visits.get(usize::from(index)).copied().unwrap_or(0)
    }

    /// Last time the positioner was known inside the open bin, µs.
    pub fn last_inside_us(&self) -> Option<u64> {
        self.open.map(|o| o.last_inside_us)
    }

    /// Notes the positioner inside the open bin at `t_us`.
    pub fn touch(&mut self, t_us: u64) {
        if let Some(o) = self.open.as_mut() {
            o.last_inside_us = o.last_inside_us.max(t_us);
        }
    }

    /// The scan's first direction of motion (Still until known).
    pub fn first_direction(&self) -> Direction {
        self.first_direction
    }

    /// Closes the open bin, if any, and calls `on_close` with the result, the bin's sum of
    /// sweeps (`[..K]` meaningful, the rest zero) and 1/count, the factor that turns the sum
    /// into the average. The sum is passed unscaled so that the caller can fold the factor
    /// into its first pass over the data (gating is linear), and mutably so that it can gate
    /// in place: the sum is not used again (the next bin starts from zero).
    pub fn close<R>(
        &mut self,
        on_close: impl FnOnce(&ClosedBin, &mut [Complex32; M], f32) -> R,
    ) -> Option<R> {
        let o = self.open.take()?;
        let n = o.count.max(1);
        let inv = 1.0 / n as f32;
        let step = self.layout.step_deg();
        let prior = self.visits(o.index);
        let mut f = 0u16;
        if o.max_smear_deg > 0.5 * step {
            f |= BinFlags::SMEARED;
        }
        if prior > 0 {
            f |= BinFlags::REVISITED;
            if self.policy == RevisitPolicy::Combine {
                f |= BinFlags::COMBINE;
            }
        }
        if o.direction != Direction::Still
            && self.first_direction != Direction::Still
            && o.direction != self.first_direction
        {
            f |= BinFlags::REVERSED;
        }
        if o.count < self.min_sweeps {
            f |= BinFlags::SPARSE;
        }
        if o.moving {
            f |= BinFlags::MOVING;
        }
        if o.extrapolated {
            f |= BinFlags::EXTRAPOLATED;
        }
        if let Some(v) = self.visits.get_mut(usize::from(o.index)) {
            *v = v.saturating_add(1);
        }
        let nominal = self.layout.nominal_deg(o.index);
        let closed = ClosedBin {
            index: o.index,
            nominal_deg: nominal,
            mean_deg: nominal + o.offset_sum_deg * inv,
            sweeps: o.count,
            max_smear_deg: o.max_smear_deg,
            flags: BinFlags(f),
        };
        Some(on_close(&closed, &mut self.sum, inv))
    }

    /// Whether adding a sweep of bin `index` moving `direction` would first close the
    /// open bin (it is another bin, or the positioner reversed inside it).
    pub fn would_close(&self, index: u16, direction: Direction) -> bool {
        match self.open {
            None => false,
            Some(o) => {
                o.index != index
                    || (direction != Direction::Still
                        && o.direction != Direction::Still
                        && direction != o.direction)
            }
        }
    }

    /// Adds a sweep (`points`, the K raw values) that fell in bin `index`. Closes the open
    /// bin first if needed (calling `on_close` as [`close`](Self::close) does). Refuses the
    /// sweep under [`RevisitPolicy::KeepFirst`] if the bin was closed before, or if `index`
    /// is outside the layout.
    pub fn add<R>(
        &mut self,
        index: u16,
        sweep: &SweepAngle,
        points: &[Complex32],
        on_close: impl FnOnce(&ClosedBin, &mut [Complex32; M], f32) -> R,
    ) -> (Result<(), SweepReject>, Option<R>) {
        if index >= self.layout.count() {
            return (Err(SweepReject::OutsideLayout), None);
        }
        let closed = if self.would_close(index, sweep.direction) {
            self.close(on_close)
        } else {
            None
        };
        if self.open.is_none() {
            if self.policy == RevisitPolicy::KeepFirst && self.visits(index) > 0 {
                return (Err(SweepReject::AlreadyBinned), closed);
            }
            self.sum = [ZERO; M];
            self.open = Some(OpenBin {
                index,
                count: 0,
                offset_sum_deg: 0.0,
                max_smear_deg: 0.0,
                direction: Direction::Still,
                moving: false,
                extrapolated: false,
                last_inside_us: sweep.end_us,
            });
        }
        if self.first_direction == Direction::Still {
            self.first_direction = sweep.direction;
        }
        crate::loops::add(&mut self.sum, points);
        let offset = self.layout.offset_deg(index, sweep.mid_deg);
        if let Some(o) = self.open.as_mut() {
            o.count = o.count.saturating_add(1);
            o.offset_sum_deg += offset;
            o.max_smear_deg = o.max_smear_deg.max(sweep.smear_deg);
            if o.direction == Direction::Still {
                o.direction = sweep.direction;
            }
            o.moving |= sweep.moving;
            o.extrapolated |= sweep.extrapolated;
            o.last_inside_us = o.last_inside_us.max(sweep.end_us);
        }
        (Ok(()), closed)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sw(mid: f32, dir: Direction) -> SweepAngle {
        SweepAngle {
            mid_deg: mid,
            smear_deg: 0.1,
            direction: dir,
            moving: false,
            extrapolated: false,
            end_us: 0,
        }
    }

    #[test]
    fn layouts_refuse_bad_settings() {
        assert_eq!(
            BinLayout::full_circle(0.0, 0.0),
            Err(LayoutError::StepNotPositive)
        );
        assert_eq!(
            BinLayout::full_circle(0.0, 0.7),
            Err(LayoutError::StepNotDividingCircle)
        );
        assert_eq!(
            BinLayout::full_circle(f32::NAN, 1.0),
            Err(LayoutError::NonFinite)
        );
        assert_eq!(
            BinLayout::sector(10.0, 10.0, 1.0),
            Err(LayoutError::StopNotAboveStart)
        );
        assert_eq!(
            BinLayout::sector(0.0, 359.0, 1.0),
            Err(LayoutError::SectorTooWide)
        );
        assert_eq!(
            BinLayout::sector(0.0, 10.5, 1.0),
            Err(LayoutError::SpanNotWholeSteps)
        );
        let l = BinLayout::full_circle(0.0, 1.0).unwrap();
        assert!(matches!(
            Bins::<8, 10>::new(l, RevisitPolicy::Replace, 1),
            Err(LayoutError::TooManyBins {
                needed: 360,
                capacity: 10
            })
        ));
    }

    #[test]
    fn bin_edges() {
        let l = BinLayout::full_circle(0.0, 1.0).unwrap();
        assert_eq!(l.index_of(0.49), Some(0));
        assert_eq!(l.index_of(0.5), Some(1));
        assert_eq!(l.index_of(-0.5), Some(0));
        assert_eq!(l.index_of(720.2), Some(0));
        assert_eq!(l.index_of(f32::NAN), None);
        let s = BinLayout::sector(350.0, 370.0, 5.0).unwrap();
        assert_eq!(s.count(), 5);
        assert_eq!(s.index_of(0.0), Some(2));
        assert_eq!(s.index_of(347.6), Some(0));
        assert_eq!(s.index_of(347.4), None);
        assert_eq!(s.index_of(12.4), Some(4));
        assert_eq!(s.index_of(12.6), None);
    }

    #[test]
    fn accumulates_averages_and_closes_on_leave_and_reverse() {
        let l = BinLayout::full_circle(0.0, 10.0).unwrap();
        let mut b: Bins<4, 36> = Bins::new(l, RevisitPolicy::Replace, 3).unwrap();
        let p1 = [Complex32::new(1.0, 0.0); 4];
        let p2 = [Complex32::new(3.0, 2.0); 4];
        let (r, c) = b.add(0, &sw(1.0, Direction::Forward), &p1, |_, _, _| ());
        assert!(r.is_ok() && c.is_none());
        let (r, c) = b.add(0, &sw(3.0, Direction::Forward), &p2, |_, _, _| ());
        assert!(r.is_ok() && c.is_none());
        // Reversal inside the bin closes it.
        let (_, c) = b.add(0, &sw(2.0, Direction::Reverse), &p1, |cb, sum, inv| {
            (*cb, sum[0] * inv)
        });
        let (cb, avg0) = c.unwrap();
        assert_eq!(cb.sweeps, 2);
        assert!((cb.mean_deg - 2.0).abs() < 1e-5);
        assert_eq!(avg0, Complex32::new(2.0, 1.0));
        assert!(cb.flags.has(BinFlags::SPARSE));
        assert!(!cb.flags.has(BinFlags::REVISITED));
        // The reversed pass is a revisit of bin 0, flagged reversed, closed on leaving.
        let (_, c) = b.add(35, &sw(-9.0, Direction::Reverse), &p1, |cb, _, _| *cb);
        let cb = c.unwrap();
        assert_eq!(cb.index, 0);
        assert!(cb.flags.has(BinFlags::REVISITED | BinFlags::REVERSED));
        assert_eq!(b.visits(0), 2);
        assert_eq!(b.open_index(), Some(35));
    }

    #[test]
    fn keep_first_refuses_revisits() {
        let l = BinLayout::full_circle(0.0, 10.0).unwrap();
        let mut b: Bins<4, 36> = Bins::new(l, RevisitPolicy::KeepFirst, 1).unwrap();
        let p = [Complex32::new(1.0, 0.0); 4];
        let _ = b.add(0, &sw(0.0, Direction::Forward), &p, |_, _, _| ());
        let _ = b.add(1, &sw(10.0, Direction::Forward), &p, |_, _, _| ());
        let (r, c) = b.add(0, &sw(0.0, Direction::Reverse), &p, |cb, _, _| cb.index);
        assert_eq!(r, Err(SweepReject::AlreadyBinned));
        assert_eq!(c, Some(1));
        assert_eq!(b.open_index(), None);
        assert_eq!(
            b.add(99, &sw(0.0, Direction::Forward), &p, |_, _, _| ()).0,
            Err(SweepReject::OutsideLayout)
        );
    }
}
