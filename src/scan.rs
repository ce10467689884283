//! The scan engine: sweeps and angle samples in, events out.
//!
//! [`Scan<M, F, B, H>`](Scan) owns a [`Gate<M>`], its [`Kernels`] for `F` pattern
//! frequencies, a [`Tracker<H>`] of positioner samples and the [`Bins<M, B>`] accumulator.
//! The caller pushes angle samples (or encoder counts) and sweeps with their start and end
//! times as they arrive; each push returns the [`Events`] it caused: a bin closed (with its
//! [`BinResult`]), a warning, or the scan finished. Nothing is stored per bin beyond one
//! byte, so results must be taken from the events (and sent on, e.g. as preview records).
//!
//! For each sweep the engine takes the tracked angle at its mid-time (the start/end midpoint)
//! as the sweep's angle, and `|angle(end) − angle(start)|` as its smear (the net travel: a
//! reversal within one sweep reads smaller). Its direction is the sign of that travel when
//! it exceeds the settle tolerance, otherwise [`Direction::Still`].
//!
//! # Angle per pattern frequency
//!
//! A sweep's points are measured one after another: point k of K at
//! `start + k·(end − start)/K` (evenly over the sweep, as the simulator and a stepped VNA
//! sweep take them). While the positioner turns, each pattern frequency is therefore seen at
//! its own angle, not at the sweep's mid-angle. The whole sweep still goes into one bin
//! (gating needs all K points together, and the open bin holds one sum), but for each
//! pattern frequency the engine takes the tracked angle at that frequency's instant and
//! keeps, per open bin, the sum of its difference to the sweep's mid-angle. A closed bin
//! reports the mean as [`BinResult::angle_offset_deg`]: the bin's values at pattern
//! frequency i were measured, on average, at `mean_deg + angle_offset_deg[i]` (and belong at
//! `nominal_deg + angle_offset_deg[i]` on the nominal axis). The gated value at a
//! frequency mixes its neighbours (the gate smooths the spectrum), which were measured at
//! nearly the same instant, so the frequency's own instant stands for it. A sweep whose net
//! travel is within the settle tolerance (step-and-stop, or a stop) counts as still: its
//! offsets are exactly zero. This is F angle look-ups and F additions per sweep; no buffer.
//!
//! Every input is counted. For sweeps, `binned + rejected() == pushed` always; the reasons
//! are the [`SweepReject`] variants, checked in this order: engine not configured, scan
//! finished, wrong point count, non-finite value, end before start, no angle yet, outside
//! the angle history, outside the layout, taken while moving (step-and-stop with
//! `reject_moving`), bin already closed (keep-first). For angle samples,
//! `accepted + rejected() == pushed` likewise.
//!
//! The engine can be built in place: [`Scan::unconfigured`] is `const` (a board keeps the
//! engine in a `static`) and [`Scan::configure`] validates the settings and builds the gate
//! and bins in the engine's own storage; [`Scan::new`] does both for the host.
//!
//! # Gating cost
//!
//! A closed bin is gated once. The echo level (impulse-response energy outside the gate)
//! needs the FFT path ([`Gate::apply`]: one inverse and one forward M-point FFT, about
//! 243 k instructions for M = 1024 on a Cortex-M4F), so it is a choice:
//! [`EchoMode::EveryBin`] takes the gated values from that FFT path too;
//! [`EchoMode::Never`] uses the kernel path ([`Gate::apply_kernels`]: F dot products of K
//! points, the band window applied on the fly; about 19 k instructions for M = 1024,
//! K = 801, F = 4 on a Cortex-M4F with the core's `fpu-loops` feature, README "Board").
//!
//! # Memory
//!
//! `size_of::<Scan<1024, 8, 361>>()` (history H = 64) is **34 480 bytes** (33.7 KiB) on
//! x86-64 (printed and asserted ≤ 64 KiB by `tests/scan_memory.rs`; 34 472 on the
//! Cortex-M4F): the gate 24 KiB, the open-bin sum 8 KiB (gated in place when the bin
//! closes, so no second buffer), the history 768 bytes, one byte per bin, the open bin's
//! angle offset sums (4·F bytes) and small state.
//! No heap. A board keeps it in static RAM, built in place ([`Scan::unconfigured`],
//! [`Scan::configure`]), usually inside the board loop [`crate::pump::Pump`].
//!
//! # Safety
//!
//! A positioner is moving machinery and a transmitting antenna under test can exceed RF
//! exposure limits near its aperture; this engine only bins data and is no interlock. Follow
//! local regulations and the lab's licensed practice.
//!
//! ```
//! use sweepgate::{Complex32, grid::Grid, window::WindowKind, gate::GateConfig};
//! use sweepgate::bins::{BinLayout, RevisitPolicy};
//! use sweepgate::scan::{Scan, ScanConfig, Event};
//! let grid = Grid::from_start_stop(2e9, 18e9, 201).unwrap();
//! let gate = GateConfig { grid, band_window: WindowKind::Kaiser { beta: 6.0 }, center_s: 10e-9,
//!     span_s: 4e-9, shape: WindowKind::Tukey { alpha: 0.5 }, renormalize: true };
//! let cfg = ScanConfig::new(BinLayout::full_circle(0.0, 1.0).unwrap());
//! let mut scan: Scan<256, 2, 360> = Scan::new(&gate, [0, 100], cfg).unwrap();
//! let sweep = [Complex32::new(1.0, 0.0); 201];
//! // 10 deg/s; one 20 ms sweep every 50 ms.
//! let mut closed = 0;
//! for i in 0..40u64 {
//!     let t = i * 50_000;
//!     scan.push_angle(t, i as f32 * 0.5);
//!     if i > 0 {
//!         for e in scan.push_sweep(t - 30_000, t - 10_000, &sweep) {
//!             if let Event::BinClosed(r) = e {
//!                 closed += 1;
//!                 // Sweep mid-angles 0.3°, 0.8°, 1.3°, …: bin 0 gets one, the others two.
//!                 assert_eq!(r.sweeps, if r.index == 0 { 1 } else { 2 });
//!             }
//!         }
//!     }
//! }
//! assert!(closed >= 18);
//! let c = scan.counters();
//! assert_eq!(c.sweeps_binned + c.sweeps_rejected(), c.sweeps_pushed);
//! ```

use crate::bins::{BinFlags, BinLayout, Bins, ClosedBin, RevisitPolicy, SweepAngle};
use crate::error::{SampleReject, ScanConfigError, SweepReject};
use crate::fft::Fft;
use crate::gate::{Gate, GateConfig, Kernels};
use crate::track::{Accepted, Direction, EncoderConfig, TrackConfig, TrackCounters, Tracker};
use crate::wire::impulse::ImpulseRecord;
use crate::wire::preview::{BinRecord, FreqValue, PositionerState, StatusRecord};
use crate::Complex32;

/// Continuous sweeping or step-and-stop.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum ScanMode {
    /// The positioner turns while the VNA sweeps.
    Continuous,
    /// The positioner steps, settles, and the caller triggers a sweep when
    /// [`Scan::is_settled`] says so. Sweeps taken while moving are flagged (and refused if
    /// `reject_moving`).
    StepAndStop {
        /// Refuse sweeps taken while moving instead of flagging them.
        reject_moving: bool,
    },
}

/// Whether closed bins get an echo level (FFT path, two M-point FFTs per bin).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum EchoMode {
    /// No echo level (`echo_db` is `None`): kernel path only.
    Never,
    /// Echo level of every closed bin via [`Gate::apply`].
    EveryBin,
}

/// Scan settings, validated by [`Scan::new`].
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ScanConfig {
    /// Tracker settings.
    pub track: TrackConfig,
    /// Encoder, if the positioner reports raw counts ([`Scan::push_counts`]).
    pub encoder: Option<EncoderConfig>,
    /// Bin layout.
    pub layout: BinLayout,
    /// Continuous or step-and-stop.
    pub mode: ScanMode,
    /// What a revisited bin does.
    pub revisit: RevisitPolicy,
    /// Echo level per closed bin or not.
    pub echo: EchoMode,
    /// Bins with fewer sweeps are flagged sparse.
    pub min_sweeps: u32,
    /// Close the open bin once the positioner has been seen outside it for this long, µs
    /// (`None`: close only when a sweep lands elsewhere, or at the end).
    pub leave_close_us: Option<u32>,
    /// Keep the impulse response near the gate ([`crate::wire::impulse`]) of every this-many-th
    /// closed bin, for [`Scan::take_impulse`] (0: never). Only the FFT path
    /// ([`EchoMode::EveryBin`]) has one; [`IMPULSE_EVERY_DEFAULT`] is a board's rate.
    pub impulse_every: u16,
}

/// The rate at which a board sends impulse-response records: one closed bin in 4.
pub const IMPULSE_EVERY_DEFAULT: u16 = 4;

impl ScanConfig {
    /// Continuous scan over `layout` with default tracking, replace-on-revisit, echo level
    /// every bin, sparse below 1 sweep, closing 100 ms after the positioner left a bin.
    pub fn new(layout: BinLayout) -> Self {
        Self {
            track: TrackConfig::default(),
            encoder: None,
            layout,
            mode: ScanMode::Continuous,
            revisit: RevisitPolicy::Replace,
            echo: EchoMode::EveryBin,
            min_sweeps: 1,
            leave_close_us: Some(100_000),
            impulse_every: 0,
        }
    }
}

/// A gated bin result.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BinResult<const F: usize> {
    /// Bin index.
    pub index: u16,
    /// Bin centre.
    pub nominal_deg: f32,
    /// Mean measured angle of its sweeps.
    pub mean_deg: f32,
    /// Sweeps averaged.
    pub sweeps: u32,
    /// Largest smear.
    pub max_smear_deg: f32,
    /// Flags.
    pub flags: BinFlags,
    /// Grid indices of the pattern frequencies.
    pub indices: [u16; F],
    /// Averaged raw S21 at the pattern frequencies.
    pub raw: [Complex32; F],
    /// Gated S21 at the pattern frequencies.
    pub gated: [Complex32; F],
    /// Echo level in dB, if computed.
    pub echo_db: Option<f32>,
    /// Per pattern frequency, the mean over the bin's sweeps of the angle at the instant
    /// that frequency was measured minus the sweep's mid-time angle, degrees (see the
    /// [module docs](self#angle-per-pattern-frequency)); 0 for sweeps taken still.
    pub angle_offset_deg: [f32; F],
}

// `Complex32` has no `defmt::Format`: print the scalar fields and the values' parts.
#[cfg(feature = "defmt")]
impl<const F: usize> defmt::Format for BinResult<F> {
    fn format(&self, f: defmt::Formatter) {
        defmt::write!(
            f,
            "BinResult {{ index: {}, nominal_deg: {}, mean_deg: {}, sweeps: {}, max_smear_deg: {}, flags: {}, echo_db: {}, gated:",
            self.index,
            self.nominal_deg,
            self.mean_deg,
            self.sweeps,
            self.max_smear_deg,
            self.flags,
            self.echo_db
        );
        for g in &self.gated {
            defmt::write!(f, " ({}, {})", g.re, g.im);
        }
        defmt::write!(f, " }}");
    }
}

impl<const F: usize> BinResult<F> {
    /// As a preview record.
    pub fn to_record(&self) -> BinRecord<F> {
        let mut values = heapless::Vec::new();
        for (((&index, &raw), &gated), &angle_offset_deg) in self
            .indices
            .iter()
            .zip(&self.raw)
            .zip(&self.gated)
            .zip(&self.angle_offset_deg)
        {
            // Cannot fail: F values into a Vec of capacity F.
            let _ = values.push(FreqValue {
                index,
                raw,
                gated,
                angle_offset_deg,
            });
        }
        BinRecord {
            bin: self.index,
            flags: self.flags.0,
            sweeps: self.sweeps,
            nominal_deg: self.nominal_deg,
            mean_deg: self.mean_deg,
            max_smear_deg: self.max_smear_deg,
            echo_db: self.echo_db.unwrap_or(f32::NAN),
            values,
        }
    }
}

/// Something the caller should know about that is not a bin result.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Warning {
    /// A sweep was refused (and counted).
    SweepRejected(SweepReject),
    /// An angle sample was refused (and counted).
    AngleRejected(SampleReject),
    /// Step-and-stop: a sweep was binned although taken while moving.
    TakenWhileMoving,
    /// A sweep's angle was extrapolated beyond the positioner history.
    Extrapolated,
    /// The tracker restarted after repeated jumps.
    TrackerResynced,
    /// The positioner has not moved for the stall time.
    Stalled,
}

/// An event from the engine.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Event<const F: usize> {
    /// A bin closed.
    BinClosed(BinResult<F>),
    /// A warning.
    Warning(Warning),
    /// The scan finished; final counters.
    Finished(ScanCounters),
}

/// Events caused by one push (at most 3: a closed bin and up to two warnings).
pub type Events<const F: usize> = heapless::Vec<Event<F>, 3>;

/// Input counters.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct ScanCounters {
    /// Sweeps offered.
    pub sweeps_pushed: u32,
    /// Sweeps added to a bin.
    pub sweeps_binned: u32,
    /// Sweeps refused, by reason in [`SweepReject::ALL`] order.
    pub sweeps_rejected_by: [u32; SweepReject::ALL.len()],
    /// Binned sweeps taken while moving (step-and-stop).
    pub sweeps_moving: u32,
    /// Binned sweeps whose angle was extrapolated.
    pub sweeps_extrapolated: u32,
    /// Angle samples (or counts) offered.
    pub angles_pushed: u32,
    /// Angle samples accepted.
    pub angles_accepted: u32,
    /// Angle samples refused because the scan had finished.
    pub angles_after_finish: u32,
    /// Angle samples refused because the engine was not configured yet.
    pub angles_unconfigured: u32,
    /// The tracker's own counters (its rejections by reason).
    pub track: TrackCounters,
    /// Bins closed.
    pub bins_closed: u32,
}

impl ScanCounters {
    /// All counters zero (`Default`, usable in a `const`).
    pub const ZERO: ScanCounters = ScanCounters {
        sweeps_pushed: 0,
        sweeps_binned: 0,
        sweeps_rejected_by: [0; SweepReject::ALL.len()],
        sweeps_moving: 0,
        sweeps_extrapolated: 0,
        angles_pushed: 0,
        angles_accepted: 0,
        angles_after_finish: 0,
        angles_unconfigured: 0,
        track: TrackCounters::ZERO,
        bins_closed: 0,
    };

    /// Sweeps refused, all reasons.
    pub fn sweeps_rejected(&self) -> u32 {
        self.sweeps_rejected_by
            .iter()
            .fold(0u32, |a, &b| a.saturating_add(b))
    }

    /// Sweeps refused for `reason`.
    pub fn sweeps_rejected_for(&self, reason: SweepReject) -> u32 {
        let i = SweepReject::ALL
            .iter()
            .position(|&r| r == reason)
            .unwrap_or(0);
        self.sweeps_rejected_by.get(i).copied().unwrap_or(0)
    }

    /// Angle samples refused, all reasons.
    pub fn angles_rejected(&self) -> u32 {
        self.track
            .rejected()
            .saturating_add(self.angles_after_finish)
            .saturating_add(self.angles_unconfigured)
    }
}

/// The scan engine. See the [module docs](self).
pub struct Scan<const M: usize, const F: usize, const B: usize, const H: usize = 64>
where
    [Complex32; M]: Fft,
{
    cfg: ScanConfig,
    gate: Gate<M>,
    kernels: Kernels<M, F>,
    tracker: Tracker<H>,
    bins: Bins<M, B>,
    /// Per pattern frequency, the open bin's sum of angle offsets (see the module docs).
    offset_sum_deg: [f32; F],
    counters: ScanCounters,
    finished: bool,
    stall_warned: bool,
    configured: bool,
    /// The latest sampled impulse response, and whether it is yet to be taken.
    impulse: ImpulseRecord,
    impulse_fresh: bool,
}

fn push_event<const F: usize>(ev: &mut Events<F>, e: Event<F>) {
    // Capacity 3 covers the most any push produces (closed bin + two warnings).
    let _ = ev.push(e);
}

impl<const M: usize, const F: usize, const B: usize, const H: usize> Scan<M, F, B, H>
where
    [Complex32; M]: Fft,
{
    /// Builds the gate for `gate_cfg`, its kernels for the grid indices `pattern_indices`,
    /// the tracker and the bins: [`Scan::unconfigured`] then [`Scan::configure`].
    pub fn new(
        gate_cfg: &GateConfig,
        pattern_indices: [usize; F],
        cfg: ScanConfig,
    ) -> Result<Self, ScanConfigError> {
        let mut scan = Self::unconfigured();
        scan.configure(gate_cfg, pattern_indices, cfg)?;
        Ok(scan)
    }

    /// An engine with no configuration yet: it refuses every sweep and angle sample (and
    /// counts them, reason `NotConfigured`) until [`Scan::configure`] succeeds. Being
    /// `const`, it can initialise a `static`, so that a small board holds its engine once,
    /// outside the stack, and builds it in place:
    ///
    /// ```
    /// use sweepgate::{gate::GateConfig, grid::Grid, window::WindowKind, Complex32};
    /// use sweepgate::bins::BinLayout;
    /// use sweepgate::error::SweepReject;
    /// use sweepgate::scan::{Event, Scan, ScanConfig, Warning};
    ///
    /// // `const`: it can initialise a static (on a board, e.g.
    /// // `cortex_m::singleton!(: Scan<1024, 8, 361> = Scan::unconfigured())`).
    /// const _: Scan<256, 2, 360> = Scan::unconfigured();
    /// let mut scan: Scan<256, 2, 360> = Scan::unconfigured();
    /// let sweep = [Complex32::new(1.0, 0.0); 201];
    /// let ev = scan.push_sweep(0, 10, &sweep);
    /// assert_eq!(ev[0], Event::Warning(Warning::SweepRejected(SweepReject::NotConfigured)));
    ///
    /// let grid = Grid::from_start_stop(2e9, 18e9, 201).unwrap();
    /// let gate = GateConfig { grid, band_window: WindowKind::Kaiser { beta: 6.0 },
    ///     center_s: 10e-9, span_s: 4e-9, shape: WindowKind::Tukey { alpha: 0.5 },
    ///     renormalize: true };
    /// let cfg = ScanConfig::new(BinLayout::full_circle(0.0, 1.0).unwrap());
    /// scan.configure(&gate, [0, 100], cfg).unwrap();
    /// assert!(scan.is_configured());
    /// assert_eq!(scan.counters().sweeps_pushed, 0); // a new scan starts from zero
    /// ```
    pub const fn unconfigured() -> Self {
        Self {
            cfg: ScanConfig {
                track: TrackConfig::UNSET,
                encoder: None,
                layout: BinLayout::UNSET,
                mode: ScanMode::Continuous,
                revisit: RevisitPolicy::Replace,
                echo: EchoMode::Never,
                min_sweeps: 0,
                leave_close_us: None,
                impulse_every: 0,
            },
            gate: Gate::unconfigured(),
            kernels: Kernels::unset(),
            tracker: Tracker::unconfigured(),
            bins: Bins::unconfigured(),
            offset_sum_deg: [0.0; F],
            counters: ScanCounters::ZERO,
            finished: false,
            stall_warned: false,
            configured: false,
            impulse: ImpulseRecord::empty(),
            impulse_fresh: false,
        }
    }

    /// Validates the settings and builds the gate, its kernels for the grid indices
    /// `pattern_indices`, the tracker and the bins in this engine's own storage, so that no
    /// second copy of the engine (34 KiB for `Scan<1024, 8, 361>`) is ever made. A new scan
    /// starts: counters zero, no bin open, none visited. On an error the engine is left
    /// unconfigured and refuses input until a configuration succeeds.
    pub fn configure(
        &mut self,
        gate_cfg: &GateConfig,
        pattern_indices: [usize; F],
        cfg: ScanConfig,
    ) -> Result<(), ScanConfigError> {
        self.configured = false;
        if B == 0 || B > usize::from(u16::MAX) {
            return Err(ScanConfigError::BinCapacity);
        }
        if cfg.min_sweeps == 0 {
            return Err(ScanConfigError::MinSweeps);
        }
        self.tracker = match cfg.encoder {
            Some(enc) => Tracker::with_encoder(cfg.track, enc)?,
            None => Tracker::new(cfg.track)?,
        };
        self.bins
            .configure(cfg.layout, cfg.revisit, cfg.min_sweeps)?;
        self.gate.configure(gate_cfg)?;
        self.kernels = self.gate.kernels(pattern_indices)?;
        self.cfg = cfg;
        self.offset_sum_deg = [0.0; F];
        self.counters = ScanCounters::ZERO;
        self.finished = false;
        self.stall_warned = false;
        self.configured = true;
        Ok(())
    }

    /// True once [`Scan::configure`] (or [`Scan::new`]) has succeeded.
    pub fn is_configured(&self) -> bool {
        self.configured
    }

    /// The configuration.
    pub fn config(&self) -> &ScanConfig {
        &self.cfg
    }

    /// The gate.
    pub fn gate(&self) -> &Gate<M> {
        &self.gate
    }

    /// The tracker.
    pub fn tracker(&self) -> &Tracker<H> {
        &self.tracker
    }

    /// The bin accumulator.
    pub fn bins(&self) -> &Bins<M, B> {
        &self.bins
    }

    /// The pattern-frequency kernels (for engines that gate further traces with the same
    /// gate, [`crate::cuts`]).
    pub(crate) fn kernels(&self) -> &Kernels<M, F> {
        &self.kernels
    }

    /// Starts a new cut (a new turn at another second-axis value, [`crate::cuts`]): closes
    /// the open bin (its result, if any, is in the events) and forgets which bins were
    /// visited and the first direction, so the new cut's bins are first visits.
    pub(crate) fn start_cut(&mut self) -> Events<F> {
        let mut ev = Events::new();
        if let Some(r) = self.close_open() {
            push_event(&mut ev, Event::BinClosed(r));
        }
        self.bins.start_cut();
        ev
    }

    /// Counters.
    pub fn counters(&self) -> ScanCounters {
        let mut c = self.counters;
        c.track = *self.tracker.counters();
        c
    }

    /// True after [`finish`](Self::finish).
    pub fn is_finished(&self) -> bool {
        self.finished
    }

    /// Step-and-stop: the positioner has settled; trigger a sweep now.
    pub fn is_settled(&self) -> bool {
        self.tracker.is_settled()
    }

    /// Current status, for a periodic preview record.
    pub fn status(&self) -> StatusRecord {
        let c = self.counters();
        let latest = self.tracker.latest();
        let state = if self.finished {
            PositionerState::Finished
        } else if latest.is_none() {
            PositionerState::NoAngle
        } else if self.tracker.is_stalled() {
            PositionerState::Stalled
        } else if self.tracker.is_settled() {
            PositionerState::Settled
        } else {
            PositionerState::Moving
        };
        StatusRecord {
            time_us: latest.map(|l| l.0).unwrap_or(0),
            angle_deg: latest.map(|l| l.1).unwrap_or(f32::NAN),
            speed_deg_s: self.tracker.speed_deg_s().unwrap_or(f32::NAN),
            state,
            open_bin: self.bins.open_index(),
            bins_closed: c.bins_closed.min(u32::from(u16::MAX)) as u16,
            sweeps_pushed: c.sweeps_pushed,
            sweeps_binned: c.sweeps_binned,
            sweeps_rejected: c.sweeps_rejected(),
            angles_pushed: c.angles_pushed,
            angles_rejected: c.angles_rejected(),
        }
    }

    /// Pushes an angle reading (degrees, wrapped or continuous) at `t_us`.
    pub fn push_angle(&mut self, t_us: u64, angle_deg: f32) -> Events<F> {
        self.angle_common(t_us, |tr| tr.push_angle(t_us, angle_deg))
    }

    /// Pushes a raw encoder count at `t_us` (scans configured with an encoder).
    pub fn push_counts(&mut self, t_us: u64, raw: u32) -> Events<F> {
        self.angle_common(t_us, |tr| tr.push_counts(t_us, raw))
    }

    fn angle_common(
        &mut self,
        t_us: u64,
        push: impl FnOnce(&mut Tracker<H>) -> Result<Accepted, SampleReject>,
    ) -> Events<F> {
        let mut ev = Events::new();
        self.counters.angles_pushed = self.counters.angles_pushed.saturating_add(1);
        if !self.configured {
            self.counters.angles_unconfigured = self.counters.angles_unconfigured.saturating_add(1);
            push_event(
                &mut ev,
                Event::Warning(Warning::AngleRejected(SampleReject::NotConfigured)),
            );
            return ev;
        }
        if self.finished {
            self.counters.angles_after_finish = self.counters.angles_after_finish.saturating_add(1);
            push_event(
                &mut ev,
                Event::Warning(Warning::AngleRejected(SampleReject::Finished)),
            );
            return ev;
        }
        match push(&mut self.tracker) {
            Err(e) => {
                push_event(&mut ev, Event::Warning(Warning::AngleRejected(e)));
                return ev;
            }
            Ok(a) => {
                self.counters.angles_accepted = self.counters.angles_accepted.saturating_add(1);
                if a == Accepted::Resynced {
                    push_event(&mut ev, Event::Warning(Warning::TrackerResynced));
                }
            }
        }
        // Positioner outside the open bin for long enough: close it.
        if let (Some(open), Some((_, angle))) = (self.bins.open_index(), self.tracker.latest()) {
            if self.cfg.layout.index_of(angle) == Some(open) {
                self.bins.touch(t_us);
            } else if let (Some(d), Some(inside)) =
                (self.cfg.leave_close_us, self.bins.last_inside_us())
            {
                if t_us.saturating_sub(inside) > u64::from(d) {
                    if let Some(r) = self.close_open() {
                        push_event(&mut ev, Event::BinClosed(r));
                    }
                }
            }
        }
        let stalled = self.tracker.is_stalled();
        if stalled && !self.stall_warned {
            push_event(&mut ev, Event::Warning(Warning::Stalled));
        }
        self.stall_warned = stalled;
        ev
    }

    fn close_open(&mut self) -> Option<BinResult<F>> {
        let due = self.impulse_due();
        let g = BinGate {
            gate: &self.gate,
            kernels: &self.kernels,
            echo: self.cfg.echo,
            offset_sum_deg: &self.offset_sum_deg,
            impulse: due.then_some(&mut self.impulse),
        };
        let r = self.bins.close(|cb, sum, inv| gate_bin(g, cb, sum, inv));
        if r.is_some() {
            self.counters.bins_closed = self.counters.bins_closed.saturating_add(1);
            self.impulse_fresh |= due;
        }
        r
    }

    /// True when the next bin to close is one whose impulse response is kept.
    fn impulse_due(&self) -> bool {
        let n = self.cfg.impulse_every;
        n > 0
            && self.cfg.echo == EchoMode::EveryBin
            && self.counters.bins_closed % u32::from(n) == 0
    }

    /// The impulse response near the gate of the latest closed bin, once, when that bin was
    /// one of every [`ScanConfig::impulse_every`]: call after each push that closed a bin.
    pub fn take_impulse(&mut self) -> Option<&ImpulseRecord> {
        let fresh = core::mem::take(&mut self.impulse_fresh);
        fresh.then_some(&self.impulse)
    }

    fn reject(&mut self, ev: &mut Events<F>, reason: SweepReject) {
        if let Some(i) = SweepReject::ALL.iter().position(|&r| r == reason) {
            if let Some(c) = self.counters.sweeps_rejected_by.get_mut(i) {
                *c = c.saturating_add(1);
            }
        }
        push_event(ev, Event::Warning(Warning::SweepRejected(reason)));
    }

    /// Pushes a sweep of K raw points (the grid's point count) measured from `start_us` to
    /// `end_us`.
    pub fn push_sweep(&mut self, start_us: u64, end_us: u64, points: &[Complex32]) -> Events<F> {
        let mut ev = Events::new();
        self.counters.sweeps_pushed = self.counters.sweeps_pushed.saturating_add(1);
        match self.place_sweep(start_us, end_us, points, &mut ev) {
            Ok(()) => {
                self.counters.sweeps_binned = self.counters.sweeps_binned.saturating_add(1);
            }
            Err(reason) => self.reject(&mut ev, reason),
        }
        ev
    }

    /// Pushes a sweep held in an M-point buffer whose first `k` entries are the points.
    pub fn push_sweep_buffer(
        &mut self,
        start_us: u64,
        end_us: u64,
        buf: &[Complex32; M],
        k: usize,
    ) -> Events<F> {
        // A `k` beyond M gives the whole buffer, which then fails the point-count check.
        let pts = buf.get(..k).unwrap_or(&buf[..]);
        self.push_sweep(start_us, end_us, pts)
    }

    /// Checks a sweep, finds its angle and bin, and adds it to the bins.
    fn place_sweep(
        &mut self,
        start_us: u64,
        end_us: u64,
        points: &[Complex32],
        ev: &mut Events<F>,
    ) -> Result<(), SweepReject> {
        self.check_sweep(start_us, end_us, points)?;
        let (index, sweep) = self.locate_sweep(start_us, end_us, ev)?;
        let offsets = self.pattern_offsets(start_us, end_us, &sweep);
        let due = self.impulse_due();
        let g = BinGate {
            gate: &self.gate,
            kernels: &self.kernels,
            echo: self.cfg.echo,
            offset_sum_deg: &self.offset_sum_deg,
            impulse: due.then_some(&mut self.impulse),
        };
        let (res, closed) = self.bins.add(index, &sweep, points, |cb, sum, inv| {
            gate_bin(g, cb, sum, inv)
        });
        if let Some(r) = closed {
            self.counters.bins_closed = self.counters.bins_closed.saturating_add(1);
            self.impulse_fresh |= due;
            push_event(ev, Event::BinClosed(r));
        }
        res?;
        // The sweep is in the open bin: its first sweep starts the sums afresh.
        if self.bins.open_sweeps() <= 1 {
            self.offset_sum_deg = offsets;
        } else {
            for (s, o) in self.offset_sum_deg.iter_mut().zip(offsets) {
                *s += o;
            }
        }
        if sweep.moving {
            self.counters.sweeps_moving = self.counters.sweeps_moving.saturating_add(1);
            push_event(ev, Event::Warning(Warning::TakenWhileMoving));
        }
        if sweep.extrapolated {
            self.counters.sweeps_extrapolated = self.counters.sweeps_extrapolated.saturating_add(1);
            push_event(ev, Event::Warning(Warning::Extrapolated));
        }
        Ok(())
    }

    /// Per pattern frequency, the tracked angle at the instant its point was measured
    /// (point k of K at `start + k·(end − start)/K`) minus the sweep's mid-time angle; all
    /// zero for a sweep taken still (see the module docs).
    fn pattern_offsets(&self, start_us: u64, end_us: u64, sweep: &SweepAngle) -> [f32; F] {
        if sweep.direction == Direction::Still {
            return [0.0; F];
        }
        let k_points = self.gate.points().max(1) as u64;
        let duration = end_us.saturating_sub(start_us);
        self.kernels.indices().map(|k| {
            // k < K ≤ 65 535: the product overflows only for sweeps of over 8.9 years; then
            // the coarser order of operations is used.
            let k = k as u64;
            let into_us = duration
                .checked_mul(k)
                .map_or((duration / k_points).saturating_mul(k), |p| p / k_points);
            let t_us = start_us.saturating_add(into_us);
            self.tracker
                .angle_at(t_us)
                .map_or(0.0, |a| a.angle_deg - sweep.mid_deg)
        })
    }

    /// The checks that need no angle, in the order of the module docs.
    fn check_sweep(
        &self,
        start_us: u64,
        end_us: u64,
        points: &[Complex32],
    ) -> Result<(), SweepReject> {
        if !self.configured {
            return Err(SweepReject::NotConfigured);
        }
        if self.finished {
            return Err(SweepReject::Finished);
        }
        if points.len() != self.gate.points() {
            return Err(SweepReject::WrongPointCount);
        }
        if !crate::loops::all_finite(points) {
            return Err(SweepReject::NonFinite);
        }
        if end_us < start_us {
            return Err(SweepReject::BadTimes);
        }
        if self.tracker.is_empty() {
            return Err(SweepReject::NoAngle);
        }
        Ok(())
    }

    /// The sweep's bin and its place in angle: mid-time angle, smear, direction, whether
    /// it was taken while moving. Leaving the layout closes the open bin (into `ev`).
    fn locate_sweep(
        &mut self,
        start_us: u64,
        end_us: u64,
        ev: &mut Events<F>,
    ) -> Result<(u16, SweepAngle), SweepReject> {
        let mid_us = start_us + (end_us - start_us) / 2;
        let a0 = self.tracker.angle_at(start_us);
        let a1 = self.tracker.angle_at(end_us);
        let am = self.tracker.angle_at(mid_us);
        let (Ok(a0), Ok(a1), Ok(am)) = (a0, a1, am) else {
            return Err(SweepReject::OutsideHistory);
        };
        let Some(index) = self.cfg.layout.index_of(am.angle_deg) else {
            // The positioner has left the open bin (and the layout).
            if let Some(r) = self.close_open() {
                push_event(ev, Event::BinClosed(r));
            }
            return Err(SweepReject::OutsideLayout);
        };
        let travel = a1.angle_deg - a0.angle_deg;
        let tol = self.cfg.track.settle_tolerance_deg;
        let direction = if travel > tol {
            Direction::Forward
        } else if travel < -tol {
            Direction::Reverse
        } else {
            Direction::Still
        };
        let moving = match self.cfg.mode {
            ScanMode::Continuous => false,
            ScanMode::StepAndStop { reject_moving } => {
                let from = start_us.saturating_sub(u64::from(self.cfg.track.settle_time_us));
                let moving = self.tracker.still_between(from, end_us) != Some(true);
                if moving && reject_moving {
                    return Err(SweepReject::WhileMoving);
                }
                moving
            }
        };
        let sweep = SweepAngle {
            mid_deg: am.angle_deg,
            smear_deg: libm::fabsf(travel),
            direction,
            moving,
            extrapolated: a0.extrapolated || a1.extrapolated || am.extrapolated,
            end_us,
        };
        Ok((index, sweep))
    }

    /// Ends the scan: closes the open bin and reports the final counters. Later inputs are
    /// refused as `Finished`. Calling it again only repeats the `Finished` event.
    pub fn finish(&mut self) -> Events<F> {
        let mut ev = Events::new();
        if let Some(r) = self.close_open() {
            push_event(&mut ev, Event::BinClosed(r));
        }
        self.finished = true;
        push_event(&mut ev, Event::Finished(self.counters()));
        ev
    }
}

/// What gating a closed bin needs besides the bin itself.
pub(crate) struct BinGate<'a, const M: usize, const F: usize>
where
    [Complex32; M]: Fft,
{
    pub(crate) gate: &'a Gate<M>,
    pub(crate) kernels: &'a Kernels<M, F>,
    pub(crate) echo: EchoMode,
    pub(crate) offset_sum_deg: &'a [f32; F],
    /// Where to keep the bin's impulse response near the gate, when it is due.
    pub(crate) impulse: Option<&'a mut ImpulseRecord>,
}

/// Gates a closed bin from its sum of sweeps and 1/count, in the sum's own storage (the
/// bin is closed; the next one starts from zero). With an echo level the FFT path runs
/// anyway, so the gated values are read from it; without, the kernel path takes one dot
/// product per frequency over the sum, the band window applied on the fly, and 1/count
/// scales the F results.
pub(crate) fn gate_bin<const M: usize, const F: usize>(
    g: BinGate<'_, M, F>,
    cb: &ClosedBin,
    sum: &mut [Complex32; M],
    inv_count: f32,
) -> BinResult<F>
where
    [Complex32; M]: Fft,
{
    let BinGate {
        gate,
        kernels,
        echo,
        offset_sum_deg,
        impulse,
    } = g;
    let idx = kernels.indices();
    let at = |buf: &[Complex32; M], i: usize| buf.get(i).copied().unwrap_or_default();
    // The raw values first: gating overwrites the sum.
    let raw = idx.map(|i| at(sum, i) * inv_count);
    let mut gated = [Complex32::new(0.0, 0.0); F];
    let mut flags = cb.flags;
    let echo_db = match echo {
        EchoMode::Never => {
            // The band window on the fly (no pass over the sum to window it first), and
            // 1/count on the F results.
            gate.apply_kernels(kernels, sum, &mut gated);
            for g in gated.iter_mut() {
                *g *= inv_count;
            }
            None
        }
        EchoMode::EveryBin => {
            // One gating path whether or not the impulse response is kept (one copy in flash).
            let check = gate.apply_in_place_checked_then(sum, inv_count, |h| {
                if let Some(rec) = impulse {
                    let c = gate.config();
                    rec.sample(h, c.grid.time_step_s(M), c.center_s, c.span_s);
                    rec.bin = cb.index;
                    rec.nominal_deg = cb.nominal_deg;
                }
            });
            gated = idx.map(|i| at(sum, i));
            if check.echo_in_gate {
                flags.0 |= BinFlags::ECHO_IN_GATE;
            }
            if !check.direct_in_gate {
                flags.0 |= BinFlags::DIRECT_OUTSIDE_GATE;
            }
            Some(check.energy_outside_db)
        }
    };
    BinResult {
        index: cb.index,
        nominal_deg: cb.nominal_deg,
        mean_deg: cb.mean_deg,
        sweeps: cb.sweeps,
        max_smear_deg: cb.max_smear_deg,
        flags,
        indices: idx.map(|i| i.min(usize::from(u16::MAX)) as u16),
        raw,
        gated,
        echo_db,
        angle_offset_deg: offset_sum_deg.map(|s| s * inv_count),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::grid::Grid;
    use crate::window::WindowKind;

    fn gate_cfg() -> GateConfig {
        GateConfig {
            grid: Grid::from_start_stop(2e9, 18e9, 101).unwrap(),
            band_window: WindowKind::Kaiser { beta: 6.0 },
            center_s: 5e-9,
            span_s: 2e-9,
            shape: WindowKind::Tukey { alpha: 0.5 },
            renormalize: true,
        }
    }

    #[test]
    fn counts_every_reason() {
        let cfg = ScanConfig::new(BinLayout::sector(0.0, 10.0, 1.0).unwrap());
        let mut s: Scan<128, 1, 11> = Scan::new(&gate_cfg(), [50], cfg).unwrap();
        let good = [Complex32::new(1.0, 0.0); 101];
        let mut bad = good;
        bad[3].re = f32::NAN;
        let r = |e: &Events<1>| {
            e.iter().find_map(|e| match e {
                Event::Warning(Warning::SweepRejected(r)) => Some(*r),
                _ => None,
            })
        };
        assert_eq!(r(&s.push_sweep(0, 10, &good)), Some(SweepReject::NoAngle));
        s.push_angle(0, 5.0);
        assert_eq!(
            r(&s.push_sweep(0, 10, &good[..100])),
            Some(SweepReject::WrongPointCount)
        );
        assert_eq!(r(&s.push_sweep(0, 10, &bad)), Some(SweepReject::NonFinite));
        assert_eq!(r(&s.push_sweep(10, 0, &good)), Some(SweepReject::BadTimes));
        assert_eq!(
            r(&s.push_sweep(1_000_000, 1_000_010, &good)),
            Some(SweepReject::OutsideHistory)
        );
        s.push_angle(100_000, 5.5);
        assert_eq!(r(&s.push_sweep(90_000, 100_000, &good)), None);
        s.push_angle(1_000_000, 20.0);
        assert_eq!(
            r(&s.push_sweep(990_000, 1_000_000, &good)),
            Some(SweepReject::OutsideLayout)
        );
        let ev = s.finish();
        assert!(matches!(ev.last(), Some(Event::Finished(_))));
        assert_eq!(r(&s.push_sweep(0, 10, &good)), Some(SweepReject::Finished));
        let c = s.counters();
        assert_eq!(c.sweeps_pushed, 8);
        assert_eq!(c.sweeps_binned, 1);
        assert_eq!(c.sweeps_binned + c.sweeps_rejected(), c.sweeps_pushed);
        for reason in [
            SweepReject::NoAngle,
            SweepReject::OutsideLayout,
            SweepReject::Finished,
        ] {
            assert_eq!(c.sweeps_rejected_for(reason), 1);
        }
        assert_eq!(c.bins_closed, 1);
        let st = s.status();
        assert_eq!(st.state, PositionerState::Finished);
        assert_eq!(
            (st.sweeps_pushed, st.sweeps_binned, st.sweeps_rejected),
            (8, 1, 7)
        );
        assert_eq!((st.angles_pushed, st.angles_rejected), (3, 0));
        assert_eq!(st.time_us, 1_000_000);
        assert_eq!(st.open_bin, None);
    }

    #[test]
    fn the_fft_path_flags_an_echo_inside_the_gate() {
        // Direct path at 5 ns, echo of half its amplitude at 5.5 ns: inside the 4…6 ns gate
        // and beyond the direct path's half main lobe (Kaiser β = 6 over 16 GHz: 4.31/B =
        // 0.27 ns null to null). A lone direct path is not flagged. (Fourier shift theorem:
        // each term is an impulse at its delay.)
        let grid = gate_cfg().grid;
        let run = |echo_a: f64| {
            let sweep: [Complex32; 101] = core::array::from_fn(|n| {
                let f = grid.frequency_hz(n);
                let z = |a: f64, t: f64| {
                    let ph = -2.0 * core::f64::consts::PI * f * t;
                    Complex32::new((a * libm::cos(ph)) as f32, (a * libm::sin(ph)) as f32)
                };
                z(1.0, 5e-9) + z(echo_a, 5.5e-9)
            });
            let mut cfg = ScanConfig::new(BinLayout::sector(0.0, 1.0, 1.0).unwrap());
            cfg.echo = EchoMode::EveryBin;
            cfg.leave_close_us = None;
            let mut s: Scan<128, 2, 4> = Scan::new(&gate_cfg(), [10, 60], cfg).unwrap();
            let mut flags = None;
            let mut take = |ev: Events<2>| {
                for e in ev {
                    if let Event::BinClosed(r) = e {
                        flags = Some(r.flags);
                    }
                }
            };
            take(s.push_angle(0, 0.0));
            take(s.push_angle(100_000, 0.0));
            take(s.push_sweep(40_000, 60_000, &sweep));
            take(s.finish());
            flags.unwrap()
        };
        let f = run(0.5);
        assert!(f.has(BinFlags::ECHO_IN_GATE), "{f:?}");
        assert!(!f.has(BinFlags::DIRECT_OUTSIDE_GATE), "{f:?}");
        let f = run(0.0);
        assert!(!f.has(BinFlags::ECHO_IN_GATE), "{f:?}");
        assert!(!f.has(BinFlags::DIRECT_OUTSIDE_GATE), "{f:?}");
    }

    #[test]
    fn both_gating_paths_give_the_same_bins() {
        // The kernel path (EchoMode::Never) and the FFT path (EveryBin) are one linear map:
        // their bin results must agree (no outside source: two evaluations of one chain).
        let grid = gate_cfg().grid;
        let sweep = |b: usize| -> [Complex32; 101] {
            core::array::from_fn(|n| {
                let f = grid.frequency_hz(n);
                let z = |a: f64, t: f64| {
                    let ph = -2.0 * core::f64::consts::PI * f * t;
                    Complex32::new((a * libm::cos(ph)) as f32, (a * libm::sin(ph)) as f32)
                };
                z(1.0 + b as f64 * 0.1, 5e-9) + z(0.5, 8e-9)
            })
        };
        let mut results = [[[Complex32::new(0.0, 0.0); 2]; 4]; 2];
        for (mode, out) in [EchoMode::Never, EchoMode::EveryBin]
            .iter()
            .zip(&mut results)
        {
            let mut cfg = ScanConfig::new(BinLayout::sector(0.0, 3.0, 1.0).unwrap());
            cfg.echo = *mode;
            cfg.leave_close_us = None;
            let mut s: Scan<128, 2, 4> = Scan::new(&gate_cfg(), [10, 60], cfg).unwrap();
            let mut closed = 0;
            let mut take = |ev: Events<2>| {
                for e in ev {
                    if let Event::BinClosed(r) = e {
                        out[usize::from(r.index)] = r.gated;
                        assert_eq!(r.echo_db.is_some(), *mode == EchoMode::EveryBin);
                        closed += 1;
                    }
                }
            };
            for i in 0..8u64 {
                let t = i * 100_000;
                take(s.push_angle(t, i as f32 * 0.5));
                if i > 0 {
                    let b = ((i - 1) / 2) as usize;
                    take(s.push_sweep(t - 60_000, t - 40_000, &sweep(b)));
                }
            }
            take(s.finish());
            assert_eq!(closed, 4);
        }
        for (a, b) in results[0].iter().flatten().zip(results[1].iter().flatten()) {
            assert!((a - b).norm() <= 1e-4 * b.norm(), "{a} vs {b}");
            assert!(b.norm() > 0.1);
        }
    }

    /// Closed form: at a constant speed ω, pattern frequency at grid index k of K in a sweep
    /// from t0 to t1 is measured at t0 + k·(t1 − t0)/K, so its offset from the mid-time angle
    /// is ω·(k/K − ½)·(t1 − t0); the bin reports the mean over its sweeps. A still positioner
    /// gives exactly zero.
    #[test]
    fn angle_offsets_follow_each_frequency_instant() {
        let mut cfg = ScanConfig::new(BinLayout::sector(0.0, 10.0, 1.0).unwrap());
        cfg.leave_close_us = None;
        let idx = [0, 50, 100];
        let mut s: Scan<128, 3, 11> = Scan::new(&gate_cfg(), idx, cfg).unwrap();
        let sweep = [Complex32::new(1.0, 0.0); 101];
        // 10°/s, a sample every 10 ms from 0.2° at t = 0; 40 ms sweeps every 50 ms.
        let (speed, dur_us) = (10.0f64, 40_000u64);
        let mut closed = None;
        for i in 0..60u64 {
            let t = i * 10_000;
            s.push_angle(t, (0.2 + speed * t as f64 * 1e-6) as f32);
            if i % 5 == 4 && i > 4 {
                for e in s.push_sweep(t - dur_us, t, &sweep) {
                    if let Event::BinClosed(r) = e {
                        closed.get_or_insert(r);
                    }
                }
            }
        }
        let r = closed.expect("a bin closed");
        for (&k, &got) in idx.iter().zip(&r.angle_offset_deg) {
            let want = speed * (k as f64 / 101.0 - 0.5) * dur_us as f64 * 1e-6;
            assert!(
                (f64::from(got) - want).abs() < 1e-4,
                "k {k}: {got} against {want}"
            );
        }
        assert!(r.angle_offset_deg[0] < -0.19 && r.angle_offset_deg[2] > 0.19);
        // The preview record carries them.
        let rec = r.to_record();
        assert!(rec
            .values
            .iter()
            .zip(&r.angle_offset_deg)
            .all(|(v, o)| v.angle_offset_deg == *o));

        // Still: the same sweeps with the positioner parked at 3.5°.
        let mut s: Scan<128, 3, 11> = Scan::new(&gate_cfg(), idx, cfg).unwrap();
        for i in 0..30u64 {
            s.push_angle(i * 10_000, 3.5);
            if i % 5 == 4 {
                s.push_sweep(i * 10_000 - dur_us, i * 10_000, &sweep);
            }
        }
        let fin = s.finish();
        let r = fin
            .iter()
            .find_map(|e| match e {
                Event::BinClosed(r) => Some(*r),
                _ => None,
            })
            .expect("the bin closes at the end");
        assert!(r.sweeps >= 5);
        assert_eq!(r.angle_offset_deg, [0.0; 3]);
    }
}
