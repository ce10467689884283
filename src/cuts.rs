//! Scans of several traces and several cuts: a second axis and further traces per sweep.
//!
//! A real pattern measurement is seldom one cut of one S-parameter: a dual-polarised probe
//! gives a co-polar and a cross-polar trace in every sweep (e.g. S21 and S31), and a
//! second positioner axis (elevation, roll or the polarisation angle) steps between turns
//! of the first, or moves slowly during them. [`CutScan<M, F, B, H, X>`](CutScan) bins such
//! a scan: it is the one-trace engine [`Scan<M, F, B, H>`] for the first trace and the first
//! axis, unchanged, plus
//!
//! - `X` further traces per sweep (a scan of `T = 1 + X` traces), each summed into its own
//!   open-bin sum alongside the first and gated, when the bin closes, with the same gate,
//!   the same kernels and the same echo mode ([`crate::scan::EchoMode`]);
//! - a second axis, tracked by its own [`Tracker<H>`] exactly as the first one is (unwrap,
//!   interpolation at a time, limits); a sweep's second-axis angle is the tracked value at
//!   its mid-time;
//! - a [`CutLayout`]: cut `i` is the second-axis value `start + i·step`, and a sweep belongs
//!   to the cut whose value is within the tolerance of its second-axis angle. When the cut
//!   changes, the open bin closes and the first axis's bins start afresh (a new turn: no
//!   bin counts as revisited, the first direction is learnt again).
//!
//! Each closed bin comes out as a [`CutBinResult`]: its cut, the mean second-axis angle of
//! its sweeps, the one-trace [`BinResult`] of the first trace (bit for bit what
//! [`Scan`] alone gives for that trace) and the raw and gated values of every further
//! trace at the same pattern frequencies.
//!
//! Every input is counted: for sweeps, `binned + rejected() == pushed`, where the reasons
//! are this engine's own ([`CutReject`]: further traces' point counts and values, the
//! second axis, the cut) checked first, then the first axis engine's ([`SweepReject`]).
//!
//! # Memory
//!
//! The one-trace engine, one more `M`-point sum per further trace (8·M bytes each: 8 KiB
//! for M = 1024), the second axis's history (12·H bytes) and small state.
//! `size_of::<CutScan<1024, 8, 361, 64, 1>>()` (two traces) is printed and bounded by
//! `tests/scan_memory.rs`: **43 800 bytes** on x86-64 (the second axis's tracker is 920),
//! against 34 480 for the one-trace `Scan<1024, 8, 361>`.
//!
//! ```
//! use sweepgate::{Complex32, grid::Grid, window::WindowKind, gate::GateConfig};
//! use sweepgate::bins::BinLayout;
//! use sweepgate::scan::ScanConfig;
//! use sweepgate::cuts::{CutConfig, CutEvent, CutLayout, CutScan};
//! let grid = Grid::from_start_stop(2e9, 18e9, 201).unwrap();
//! let gate = GateConfig { grid, band_window: WindowKind::Kaiser { beta: 6.0 }, center_s: 10e-9,
//!     span_s: 4e-9, shape: WindowKind::Tukey { alpha: 0.5 }, renormalize: true };
//! // Cuts at 0° and 90° of the second axis, ±1°.
//! let cfg = CutConfig::new(
//!     ScanConfig::new(BinLayout::sector(0.0, 10.0, 1.0).unwrap()),
//!     CutLayout::new(0.0, 90.0, 2, 1.0).unwrap(),
//! );
//! let mut scan: CutScan<256, 2, 16, 64, 1> = CutScan::new(&gate, [0, 100], cfg).unwrap();
//! let co = [Complex32::new(1.0, 0.0); 201];
//! let cross = [Complex32::new(0.1, 0.0); 201];
//! let mut closed = 0;
//! for i in 0..20u64 {
//!     let t = i * 50_000;
//!     scan.push_axes(t, i as f32 * 0.5, 0.0);
//!     if i > 0 {
//!         for e in scan.push_traces(t - 30_000, t - 10_000, &co, [&cross]) {
//!             if let CutEvent::BinClosed(r) = e {
//!                 assert_eq!(r.cut, 0);
//!                 assert!((r.more[0].raw[0].re - 0.1).abs() < 1e-6);
//!                 closed += 1;
//!             }
//!         }
//!     }
//! }
//! assert!(closed >= 8);
//! let c = scan.counters();
//! assert_eq!(c.sweeps_binned() + c.sweeps_rejected(), c.sweeps_pushed);
//! ```

use crate::bins::{BinFlags, ClosedBin};
use crate::error::{CutConfigError, CutReject, SampleReject};
use crate::fft::Fft;
use crate::gate::GateConfig;
use crate::scan::{
    gate_bin, BinGate, BinResult, Event, Events, Scan, ScanConfig, ScanCounters, Warning,
};
use crate::track::{TrackConfig, TrackCounters, Tracker};
use crate::wire::cut_record::{CutRecord, TraceRecord};
use crate::Complex32;

const ZERO: Complex32 = Complex32::new(0.0, 0.0);

/// The cuts of a scan: cut `i` at the second-axis value `start + i·step`; a second-axis
/// angle belongs to cut `i` when it is within `tolerance` of that value (compared modulo
/// 360°).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct CutLayout {
    start_deg: f32,
    step_deg: f32,
    count: u16,
    tolerance_deg: f32,
}

fn wrap180(d: f32) -> f32 {
    let mut x = libm::fmodf(d + 180.0, 360.0);
    if x < 0.0 {
        x += 360.0;
    }
    x - 180.0
}

impl CutLayout {
    /// `count` cuts from `start_deg` every `step_deg`, each taking second-axis angles within
    /// `tolerance_deg` (less than half the step, so no angle belongs to two cuts).
    pub fn new(
        start_deg: f32,
        step_deg: f32,
        count: u16,
        tolerance_deg: f32,
    ) -> Result<Self, CutConfigError> {
        if !(start_deg.is_finite() && step_deg.is_finite() && tolerance_deg.is_finite()) {
            return Err(CutConfigError::NonFinite);
        }
        if count == 0 {
            return Err(CutConfigError::Count);
        }
        if count > 1 && step_deg <= 0.0 {
            return Err(CutConfigError::StepNotPositive);
        }
        if tolerance_deg < 0.0 || (count > 1 && tolerance_deg >= 0.5 * step_deg) {
            return Err(CutConfigError::Tolerance);
        }
        Ok(Self {
            start_deg,
            step_deg,
            count,
            tolerance_deg,
        })
    }

    /// One cut at `value_deg` (a one-cut scan whose second axis stays put).
    pub fn single(value_deg: f32, tolerance_deg: f32) -> Result<Self, CutConfigError> {
        Self::new(value_deg, 1.0, 1, tolerance_deg)
    }

    /// Number of cuts.
    pub fn count(&self) -> u16 {
        self.count
    }

    /// Step between cuts, degrees.
    pub fn step_deg(&self) -> f32 {
        self.step_deg
    }

    /// How far from a cut's value a second-axis angle may be, degrees.
    pub fn tolerance_deg(&self) -> f32 {
        self.tolerance_deg
    }

    /// The second-axis value of cut `index`.
    pub fn value_deg(&self, index: u16) -> f32 {
        self.start_deg + f32::from(index) * self.step_deg
    }

    /// The cut a second-axis angle belongs to, if any.
    pub fn index_of(&self, axis2_deg: f32) -> Option<u16> {
        if !axis2_deg.is_finite() {
            return None;
        }
        let near =
            |i: u16| libm::fabsf(wrap180(axis2_deg - self.value_deg(i))) <= self.tolerance_deg;
        if self.count == 1 {
            return near(0).then_some(0);
        }
        // The nearest cut by the unwrapped offset, then its neighbours (wrap-around).
        let rel = wrap180(axis2_deg - self.start_deg);
        let guess = libm::roundf(rel / self.step_deg);
        let last = f32::from(self.count - 1);
        let candidates = [guess, guess + 360.0 / self.step_deg, 0.0, last];
        candidates
            .iter()
            .filter(|g| g.is_finite() && **g >= 0.0 && **g <= last)
            .map(|&g| g as u16)
            .find(|&i| near(i))
            .or_else(|| (0..self.count).find(|&i| near(i)))
    }
}

/// Settings of a scan of cuts: the first axis's scan settings, the second axis's tracker
/// settings and the cuts.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct CutConfig {
    /// The first axis's scan (bins, tracking, revisits, echo mode).
    pub scan: ScanConfig,
    /// The second axis's tracker. Its `max_speed_deg_s` must allow the fastest move
    /// between cuts, or the step is refused as a jump until the tracker resyncs.
    pub axis2_track: TrackConfig,
    /// The cuts.
    pub cuts: CutLayout,
}

impl CutConfig {
    /// `scan` over `cuts`, the second axis tracked with the first axis's settings.
    pub fn new(scan: ScanConfig, cuts: CutLayout) -> Self {
        Self {
            scan,
            axis2_track: scan.track,
            cuts,
        }
    }
}

/// One further trace's values in a closed bin.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TraceValues<const F: usize> {
    /// Averaged raw values at the pattern frequencies.
    pub raw: [Complex32; F],
    /// Gated values at the pattern frequencies.
    pub gated: [Complex32; F],
    /// This trace's echo level in dB, if computed.
    pub echo_db: Option<f32>,
    /// This trace's gate checks ([`BinFlags::ECHO_IN_GATE`],
    /// [`BinFlags::DIRECT_OUTSIDE_GATE`]) on top of the bin's flags.
    pub flags: BinFlags,
}

/// A closed bin of a scan of cuts.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CutBinResult<const F: usize, const X: usize> {
    /// Cut index.
    pub cut: u16,
    /// The cut's nominal second-axis value.
    pub cut_nominal_deg: f32,
    /// Mean second-axis angle of the bin's sweeps.
    pub axis2_deg: f32,
    /// The first trace's result, with the first axis's bin, angles and flags.
    pub first: BinResult<F>,
    /// The further traces, in the order they were pushed.
    pub more: [TraceValues<F>; X],
}

// `Complex32` has no `defmt::Format`: print the cut, the axes and the first trace's result.
#[cfg(feature = "defmt")]
impl<const F: usize, const X: usize> defmt::Format for CutBinResult<F, X> {
    fn format(&self, f: defmt::Formatter) {
        defmt::write!(
            f,
            "CutBinResult {{ cut: {}, axis2_deg: {}, first: {}, further traces: {} }}",
            self.cut,
            self.axis2_deg,
            self.first,
            X
        );
    }
}

impl<const F: usize, const X: usize> CutBinResult<F, X> {
    /// As a preview record (kind 4): every trace, the first first. At most
    /// [`MAX_TRACES`](crate::wire::cut_record::MAX_TRACES) traces are carried (`1 + X` above it are cut short).
    pub fn to_record(&self) -> CutRecord<F> {
        let one =
            |raw: &[Complex32; F], gated: &[Complex32; F], echo_db: Option<f32>| TraceRecord {
                raw: raw.iter().copied().collect(),
                gated: gated.iter().copied().collect(),
                echo_db: echo_db.unwrap_or(f32::NAN),
            };
        let mut traces = heapless::Vec::new();
        let first = &self.first;
        let _ = traces.push(one(&first.raw, &first.gated, first.echo_db));
        for t in &self.more {
            // Beyond MAX_TRACES the record is full: the rest is left out (documented).
            let _ = traces.push(one(&t.raw, &t.gated, t.echo_db));
        }
        CutRecord {
            cut: self.cut,
            cut_nominal_deg: self.cut_nominal_deg,
            axis2_deg: self.axis2_deg,
            bin: first.index,
            flags: first.flags.0,
            sweeps: first.sweeps,
            nominal_deg: first.nominal_deg,
            mean_deg: first.mean_deg,
            indices: first.indices.iter().copied().collect(),
            traces,
        }
    }
}

/// Something the caller should know about that is not a bin result.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum CutWarning {
    /// From the first axis's engine.
    Scan(Warning),
    /// A sweep was refused by this engine's own checks (and counted).
    SweepRejected(CutReject),
    /// A second-axis sample was refused (and counted).
    Axis2Rejected(SampleReject),
}

/// An event from a scan of cuts.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum CutEvent<const F: usize, const X: usize> {
    /// A bin closed.
    BinClosed(CutBinResult<F, X>),
    /// A warning.
    Warning(CutWarning),
    /// The scan finished; final counters.
    Finished(CutCounters),
}

/// Events caused by one push (at most 4: a closed bin, a cut change's closed bin and
/// warnings).
pub type CutEvents<const F: usize, const X: usize> = heapless::Vec<CutEvent<F, X>, 4>;

/// Input counters of a scan of cuts.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct CutCounters {
    /// Sweeps offered.
    pub sweeps_pushed: u32,
    /// Sweeps refused by this engine's checks, by reason in [`CutReject::ALL`] order.
    pub sweeps_rejected_by: [u32; CutReject::ALL.len()],
    /// Cuts started (the first cut counts).
    pub cuts_started: u32,
    /// The first axis's engine (the sweeps passed on, its angle samples, its bins).
    pub scan: ScanCounters,
    /// Second-axis samples offered.
    pub axis2_pushed: u32,
    /// Second-axis samples refused because the scan had finished or was not configured.
    pub axis2_refused: u32,
    /// The second axis's tracker counters.
    pub axis2: TrackCounters,
}

impl CutCounters {
    /// Sweeps added to a bin.
    pub fn sweeps_binned(&self) -> u32 {
        self.scan.sweeps_binned
    }

    /// Sweeps refused, all reasons (this engine's and the first axis engine's).
    pub fn sweeps_rejected(&self) -> u32 {
        self.sweeps_rejected_by
            .iter()
            .fold(self.scan.sweeps_rejected(), |a, &b| a.saturating_add(b))
    }

    /// Sweeps refused by this engine for `reason`.
    pub fn rejected_for(&self, reason: CutReject) -> u32 {
        CutReject::ALL
            .iter()
            .position(|&r| r == reason)
            .and_then(|i| self.sweeps_rejected_by.get(i).copied())
            .unwrap_or(0)
    }

    /// Second-axis samples refused, all reasons.
    pub fn axis2_rejected(&self) -> u32 {
        self.axis2.rejected().saturating_add(self.axis2_refused)
    }
}

/// The engine of a scan of cuts with `1 + X` traces. See the [module docs](self).
pub struct CutScan<const M: usize, const F: usize, const B: usize, const H: usize, const X: usize>
where
    [Complex32; M]: Fft,
{
    scan: Scan<M, F, B, H>,
    axis2: Tracker<H>,
    cuts: CutLayout,
    /// The open bin's sum per further trace.
    sums: [[Complex32; M]; X],
    /// The open bin's sum of second-axis angles, and its cut.
    axis2_sum_deg: f32,
    open_cut: u16,
    /// The cut of the latest accepted sweep.
    current_cut: Option<u16>,
    counters: CutCounters,
}

fn push<const F: usize, const X: usize>(ev: &mut CutEvents<F, X>, e: CutEvent<F, X>) {
    // Capacity 4 covers the most any push produces.
    let _ = ev.push(e);
}

impl<const M: usize, const F: usize, const B: usize, const H: usize, const X: usize>
    CutScan<M, F, B, H, X>
where
    [Complex32; M]: Fft,
{
    /// An engine with no configuration yet (refuses and counts all input); `const`, so a
    /// board can keep it in a `static` and [`configure`](Self::configure) it in place.
    pub const fn unconfigured() -> Self {
        Self {
            scan: Scan::unconfigured(),
            axis2: Tracker::unconfigured(),
            cuts: CutLayout {
                start_deg: 0.0,
                step_deg: 0.0,
                count: 0,
                tolerance_deg: 0.0,
            },
            sums: [[ZERO; M]; X],
            axis2_sum_deg: 0.0,
            open_cut: 0,
            current_cut: None,
            counters: CutCounters {
                sweeps_pushed: 0,
                sweeps_rejected_by: [0; CutReject::ALL.len()],
                cuts_started: 0,
                scan: ScanCounters::ZERO,
                axis2_pushed: 0,
                axis2_refused: 0,
                axis2: TrackCounters::ZERO,
            },
        }
    }

    /// [`unconfigured`](Self::unconfigured) then [`configure`](Self::configure).
    pub fn new(
        gate_cfg: &GateConfig,
        pattern_indices: [usize; F],
        cfg: CutConfig,
    ) -> Result<Self, CutConfigError> {
        let mut s = Self::unconfigured();
        s.configure(gate_cfg, pattern_indices, cfg)?;
        Ok(s)
    }

    /// Validates the settings and builds the engine in place; a new scan starts.
    pub fn configure(
        &mut self,
        gate_cfg: &GateConfig,
        pattern_indices: [usize; F],
        cfg: CutConfig,
    ) -> Result<(), CutConfigError> {
        self.axis2 = Tracker::new(cfg.axis2_track).map_err(CutConfigError::Axis2Track)?;
        // Checked again so that an unvalidated layout cannot slip in.
        self.cuts = CutLayout::new(
            cfg.cuts.start_deg,
            cfg.cuts.step_deg,
            cfg.cuts.count,
            cfg.cuts.tolerance_deg,
        )?;
        self.scan
            .configure(gate_cfg, pattern_indices, cfg.scan)
            .map_err(CutConfigError::Scan)?;
        for s in &mut self.sums {
            s.fill(ZERO);
        }
        self.axis2_sum_deg = 0.0;
        self.open_cut = 0;
        self.current_cut = None;
        self.counters = CutCounters::default();
        Ok(())
    }

    /// The first axis's engine.
    pub fn scan(&self) -> &Scan<M, F, B, H> {
        &self.scan
    }

    /// The second axis's tracker.
    pub fn axis2(&self) -> &Tracker<H> {
        &self.axis2
    }

    /// The cuts.
    pub fn cuts(&self) -> &CutLayout {
        &self.cuts
    }

    /// The cut of the latest accepted sweep.
    pub fn current_cut(&self) -> Option<u16> {
        self.current_cut
    }

    /// Counters.
    pub fn counters(&self) -> CutCounters {
        let mut c = self.counters;
        c.scan = self.scan.counters();
        c.axis2 = *self.axis2.counters();
        c
    }

    /// Pushes positioner readings of both axes taken at `t_us`.
    pub fn push_axes(&mut self, t_us: u64, axis1_deg: f32, axis2_deg: f32) -> CutEvents<F, X> {
        let mut ev = self.push_axis2(t_us, axis2_deg);
        let inner = self.scan.push_angle(t_us, axis1_deg);
        self.take(inner, &mut ev);
        ev
    }

    /// Pushes a first-axis reading alone (the second axis reported separately).
    pub fn push_angle(&mut self, t_us: u64, axis1_deg: f32) -> CutEvents<F, X> {
        let mut ev = CutEvents::new();
        let inner = self.scan.push_angle(t_us, axis1_deg);
        self.take(inner, &mut ev);
        ev
    }

    /// Pushes a second-axis reading alone.
    pub fn push_axis2(&mut self, t_us: u64, axis2_deg: f32) -> CutEvents<F, X> {
        let mut ev = CutEvents::new();
        self.counters.axis2_pushed = self.counters.axis2_pushed.saturating_add(1);
        let refused = if !self.scan.is_configured() {
            Some(SampleReject::NotConfigured)
        } else if self.scan.is_finished() {
            Some(SampleReject::Finished)
        } else {
            None
        };
        if let Some(r) = refused {
            self.counters.axis2_refused = self.counters.axis2_refused.saturating_add(1);
            push(&mut ev, CutEvent::Warning(CutWarning::Axis2Rejected(r)));
        } else if let Err(r) = self.axis2.push_angle(t_us, axis2_deg) {
            push(&mut ev, CutEvent::Warning(CutWarning::Axis2Rejected(r)));
        }
        ev
    }

    /// Pushes a sweep: the first trace's K points and the `X` further traces' K points each,
    /// measured together from `start_us` to `end_us`.
    pub fn push_traces(
        &mut self,
        start_us: u64,
        end_us: u64,
        first: &[Complex32],
        more: [&[Complex32]; X],
    ) -> CutEvents<F, X> {
        let mut ev = CutEvents::new();
        self.counters.sweeps_pushed = self.counters.sweeps_pushed.saturating_add(1);
        // An engine not configured or finished: the first axis's engine refuses and counts.
        let cut = if self.scan.is_configured() && !self.scan.is_finished() {
            match self.check(start_us, end_us, &more) {
                Ok(c) => Some(c),
                Err(reason) => {
                    self.reject(&mut ev, reason);
                    return ev;
                }
            }
        } else {
            None
        };
        if let Some((cut, _)) = cut {
            if self.current_cut != Some(cut) {
                self.counters.cuts_started = self.counters.cuts_started.saturating_add(1);
                let inner = self.scan.start_cut();
                self.take(inner, &mut ev);
                self.current_cut = Some(cut);
            }
        }
        let before = self.scan.counters().sweeps_binned;
        let inner = self.scan.push_sweep(start_us, end_us, first);
        self.take(inner, &mut ev);
        if let Some((cut, axis2_deg)) = cut {
            if self.scan.counters().sweeps_binned > before {
                self.add(cut, axis2_deg, &more);
            }
        }
        ev
    }

    /// Ends the scan: closes the open bin, reports the final counters.
    pub fn finish(&mut self) -> CutEvents<F, X> {
        let mut ev = CutEvents::new();
        let inner = self.scan.finish();
        self.take(inner, &mut ev);
        ev
    }

    /// This engine's checks: the further traces, then the second axis and its cut.
    fn check(
        &self,
        start_us: u64,
        end_us: u64,
        more: &[&[Complex32]; X],
    ) -> Result<(u16, f32), CutReject> {
        let k = self.scan.gate().points();
        if more.iter().any(|t| t.len() != k) {
            return Err(CutReject::TracePointCount);
        }
        let finite = |p: &Complex32| p.re.is_finite() && p.im.is_finite();
        if more.iter().any(|t| !t.iter().all(finite)) {
            return Err(CutReject::TraceNonFinite);
        }
        if self.axis2.is_empty() {
            return Err(CutReject::NoAxis2);
        }
        // Bad times are the first axis's to count: take its mid-time anyway.
        let mid_us = start_us.min(end_us) + end_us.abs_diff(start_us) / 2;
        let a = self
            .axis2
            .angle_at(mid_us)
            .map_err(|_| CutReject::Axis2History)?;
        match self.cuts.index_of(a.angle_deg) {
            Some(c) => Ok((c, a.angle_deg)),
            None => Err(CutReject::OutsideCuts),
        }
    }

    fn reject(&mut self, ev: &mut CutEvents<F, X>, reason: CutReject) {
        if let Some(i) = CutReject::ALL.iter().position(|&r| r == reason) {
            if let Some(c) = self.counters.sweeps_rejected_by.get_mut(i) {
                *c = c.saturating_add(1);
            }
        }
        push(ev, CutEvent::Warning(CutWarning::SweepRejected(reason)));
    }

    /// A sweep the first axis's engine took: its further traces and second-axis angle go
    /// into the open bin's sums (a fresh bin when the engine just opened one).
    fn add(&mut self, cut: u16, axis2_deg: f32, more: &[&[Complex32]; X]) {
        if self.scan.bins().open_sweeps() <= 1 {
            for s in &mut self.sums {
                s.fill(ZERO);
            }
            self.axis2_sum_deg = 0.0;
        }
        self.open_cut = cut;
        // The unwrapped angle, relative to the cut's value, so that the mean does not
        // straddle 0°/360°.
        self.axis2_sum_deg += wrap180(axis2_deg - self.cuts.value_deg(cut));
        for (s, t) in self.sums.iter_mut().zip(more.iter()) {
            for (a, p) in s.iter_mut().zip(t.iter()) {
                *a += *p;
            }
        }
    }

    /// Turns the first axis's events into this engine's, gating the further traces of
    /// every closed bin.
    fn take(&mut self, inner: Events<F>, ev: &mut CutEvents<F, X>) {
        for e in inner {
            let out = match e {
                Event::BinClosed(r) => CutEvent::BinClosed(self.close(r)),
                Event::Warning(w) => CutEvent::Warning(CutWarning::Scan(w)),
                Event::Finished(_) => CutEvent::Finished(self.counters()),
            };
            push(ev, out);
        }
    }

    /// Gates the further traces of the bin that just closed, as the first was gated.
    fn close(&mut self, first: BinResult<F>) -> CutBinResult<F, X> {
        let n = first.sweeps.max(1);
        let inv = 1.0 / n as f32;
        let cb = ClosedBin {
            index: first.index,
            nominal_deg: first.nominal_deg,
            mean_deg: first.mean_deg,
            sweeps: first.sweeps,
            max_smear_deg: first.max_smear_deg,
            flags: BinFlags(0),
        };
        let (gate, kernels, echo) = (
            self.scan.gate(),
            self.scan.kernels(),
            self.scan.config().echo,
        );
        let zero_offsets = [0.0f32; F];
        let mut more = [TraceValues {
            raw: [ZERO; F],
            gated: [ZERO; F],
            echo_db: None,
            flags: BinFlags(0),
        }; X];
        for (sum, out) in self.sums.iter_mut().zip(more.iter_mut()) {
            let g = BinGate {
                gate,
                kernels,
                echo,
                offset_sum_deg: &zero_offsets,
                impulse: None,
            };
            let r = gate_bin(g, &cb, sum, inv);
            *out = TraceValues {
                raw: r.raw,
                gated: r.gated,
                echo_db: r.echo_db,
                flags: r.flags,
            };
            sum.fill(ZERO);
        }
        let cut = self.open_cut;
        let nominal = self.cuts.value_deg(cut);
        let axis2_deg = nominal + self.axis2_sum_deg * inv;
        self.axis2_sum_deg = 0.0;
        CutBinResult {
            cut,
            cut_nominal_deg: nominal,
            axis2_deg,
            first,
            more,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cut_layouts_refuse_bad_settings_and_find_cuts() {
        assert_eq!(
            CutLayout::new(0.0, 0.0, 2, 0.0),
            Err(CutConfigError::StepNotPositive)
        );
        assert_eq!(CutLayout::new(0.0, 1.0, 0, 0.1), Err(CutConfigError::Count));
        assert_eq!(
            CutLayout::new(0.0, 10.0, 3, 5.0),
            Err(CutConfigError::Tolerance)
        );
        assert_eq!(
            CutLayout::new(f32::NAN, 10.0, 3, 1.0),
            Err(CutConfigError::NonFinite)
        );
        let l = CutLayout::new(0.0, 45.0, 4, 2.0).unwrap();
        assert_eq!(l.index_of(0.0), Some(0));
        assert_eq!(l.index_of(359.0), Some(0));
        assert_eq!(l.index_of(-1.5), Some(0));
        assert_eq!(l.index_of(46.0), Some(1));
        assert_eq!(l.index_of(135.5), Some(3));
        assert_eq!(l.index_of(180.0), None);
        assert_eq!(l.index_of(20.0), None);
        assert_eq!(l.index_of(f32::NAN), None);
        let one = CutLayout::single(90.0, 0.5).unwrap();
        assert_eq!(one.index_of(90.4), Some(0));
        assert_eq!(one.index_of(91.0), None);
    }

    #[test]
    fn reasons_are_counted_and_the_identity_holds() {
        use crate::bins::BinLayout;
        use crate::error::SweepReject;
        use crate::grid::Grid;
        use crate::window::WindowKind;
        let gate = GateConfig {
            grid: Grid::from_start_stop(2e9, 18e9, 101).unwrap(),
            band_window: WindowKind::Kaiser { beta: 6.0 },
            center_s: 5e-9,
            span_s: 2e-9,
            shape: WindowKind::Tukey { alpha: 0.5 },
            renormalize: true,
        };
        let mut cfg = CutConfig::new(
            ScanConfig::new(BinLayout::sector(0.0, 10.0, 1.0).unwrap()),
            CutLayout::new(0.0, 90.0, 2, 1.0).unwrap(),
        );
        // The second axis steps 45° in 50 ms between cuts.
        cfg.axis2_track.max_speed_deg_s = 1000.0;
        let mut s: CutScan<128, 1, 11, 16, 1> = CutScan::new(&gate, [50], cfg).unwrap();
        let good = [Complex32::new(1.0, 0.0); 101];
        let mut bad = good;
        bad[1].im = f32::INFINITY;
        let reason = |e: &CutEvents<1, 1>| {
            e.iter().find_map(|e| match e {
                CutEvent::Warning(CutWarning::SweepRejected(r)) => Some(*r),
                _ => None,
            })
        };
        s.push_angle(0, 5.0);
        assert_eq!(
            reason(&s.push_traces(0, 10, &good, [&good])),
            Some(CutReject::NoAxis2)
        );
        s.push_axis2(0, 45.0);
        assert_eq!(
            reason(&s.push_traces(0, 10, &good, [&good[..5]])),
            Some(CutReject::TracePointCount)
        );
        assert_eq!(
            reason(&s.push_traces(0, 10, &good, [&bad])),
            Some(CutReject::TraceNonFinite)
        );
        assert_eq!(
            reason(&s.push_traces(0, 10, &good, [&good])),
            Some(CutReject::OutsideCuts)
        );
        assert_eq!(
            reason(&s.push_traces(5_000_000, 5_000_010, &good, [&good])),
            Some(CutReject::Axis2History)
        );
        s.push_axes(100_000, 5.2, 45.4);
        s.push_axes(150_000, 5.3, 89.9);
        s.push_axes(200_000, 5.4, 90.1);
        let ev = s.push_traces(190_000, 200_000, &good, [&good]);
        assert_eq!(reason(&ev), None);
        assert_eq!(s.current_cut(), Some(1));
        let fin = s.finish();
        let r = fin
            .iter()
            .find_map(|e| match e {
                CutEvent::BinClosed(r) => Some(*r),
                _ => None,
            })
            .unwrap();
        assert_eq!((r.cut, r.first.index, r.first.sweeps), (1, 5, 1));
        assert!((r.axis2_deg - 90.08).abs() < 1e-3, "{}", r.axis2_deg);
        let c = s.counters();
        assert_eq!(c.sweeps_pushed, 6);
        assert_eq!(c.sweeps_binned(), 1);
        assert_eq!(c.sweeps_binned() + c.sweeps_rejected(), c.sweeps_pushed);
        for reason in CutReject::ALL {
            assert_eq!(c.rejected_for(reason), 1, "{reason:?}");
        }
        assert_eq!(c.cuts_started, 1);
        assert_eq!(c.scan.sweeps_rejected_for(SweepReject::NoAngle), 0);
    }
}
