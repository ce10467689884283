//! Errors of the `scan` boundary: positioner tracking, bin layout and the scan engine.

use core::fmt;

use super::GateError;

/// Why a tracker or encoder configuration was refused.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum TrackConfigError {
    /// The history ring holds fewer than two samples: nothing can be interpolated.
    HistoryTooSmall,
    /// The maximum speed is NaN, infinite, zero or negative.
    MaxSpeed,
    /// The jitter allowance is NaN, infinite or negative.
    Jitter,
    /// The settle tolerance is NaN, infinite or negative.
    SettleTolerance,
    /// The encoder's counts per revolution is zero or does not fit the counter width.
    CountsPerRevolution,
}

impl fmt::Display for TrackConfigError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            Self::HistoryTooSmall => "the angle history must hold at least 2 samples",
            Self::MaxSpeed => "maximum positioner speed must be a finite number above 0 deg/s",
            Self::Jitter => "angle jitter allowance must be a finite number of at least 0 deg",
            Self::SettleTolerance => "settle tolerance must be a finite number of at least 0 deg",
            Self::CountsPerRevolution => {
                "encoder counts per revolution must be above 0 and fit the counter width"
            }
        })
    }
}

impl core::error::Error for TrackConfigError {}

/// Why a positioner sample was not taken into the track. Each is counted.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum SampleReject {
    /// The angle is NaN or infinite.
    NonFinite,
    /// The timestamp is not after the previous accepted sample's.
    NonMonotonic,
    /// The angle moved faster than the configured maximum speed allows.
    Jump,
    /// An encoder count does not fit the configured counter width.
    CountOutOfRange,
    /// An angle was pushed to an encoder tracker, or counts to an angle tracker.
    WrongSource,
    /// The scan has finished; no more input is taken (scan engine only).
    Finished,
    /// The engine has not been configured yet (scan engine only).
    NotConfigured,
}

impl fmt::Display for SampleReject {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            Self::NonFinite => "angle sample is not a finite number",
            Self::NonMonotonic => "angle sample time is not after the previous sample",
            Self::Jump => "angle sample jumps faster than the positioner can move",
            Self::CountOutOfRange => "encoder count does not fit the counter width",
            Self::WrongSource => "sample kind does not match the tracker's source",
            Self::Finished => "the scan has finished",
            Self::NotConfigured => "the scan engine is not configured yet",
        })
    }
}

impl core::error::Error for SampleReject {}

/// Why no angle could be given for a time.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum AngleError {
    /// No sample has been accepted yet.
    NoSamples,
    /// The time is before the oldest sample by more than the extrapolation limit.
    BeforeHistory {
        /// How far before the oldest sample, µs.
        by_us: u64,
    },
    /// The time is after the newest sample by more than the extrapolation limit.
    AfterHistory {
        /// How far after the newest sample, µs.
        by_us: u64,
    },
}

impl fmt::Display for AngleError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::NoSamples => f.write_str("no positioner angle has been received yet"),
            Self::BeforeHistory { by_us } => write!(
                f,
                "time is {by_us} us before the oldest positioner sample kept"
            ),
            Self::AfterHistory { by_us } => {
                write!(f, "time is {by_us} us after the newest positioner sample")
            }
        }
    }
}

impl core::error::Error for AngleError {}

/// Why a bin layout was refused.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum LayoutError {
    /// Start, stop or step is NaN or infinite.
    NonFinite,
    /// The step is zero or negative.
    StepNotPositive,
    /// A full circle's step does not divide 360° into a whole number of bins.
    StepNotDividingCircle,
    /// A sector's stop is not above its start.
    StopNotAboveStart,
    /// A sector (plus one step) spans a full circle or more; use a full-circle layout.
    SectorTooWide,
    /// The sector's span is not a whole number of steps.
    SpanNotWholeSteps,
    /// The layout needs more bins than the engine holds (its `B`).
    TooManyBins {
        /// Bins the layout needs.
        needed: u32,
        /// Bins available.
        capacity: u32,
    },
}

impl fmt::Display for LayoutError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::NonFinite => f.write_str("bin start, stop or step is not a finite number"),
            Self::StepNotPositive => f.write_str("bin step must be above 0 deg"),
            Self::StepNotDividingCircle => {
                f.write_str("bin step must divide 360 deg into a whole number of bins")
            }
            Self::StopNotAboveStart => f.write_str("sector stop must be above its start"),
            Self::SectorTooWide => f.write_str(
                "sector plus one step covers a full circle or more; use a full-circle layout",
            ),
            Self::SpanNotWholeSteps => {
                f.write_str("sector span must be a whole number of bin steps")
            }
            Self::TooManyBins { needed, capacity } => write!(
                f,
                "layout needs {needed} bins but the engine holds only {capacity}"
            ),
        }
    }
}

impl core::error::Error for LayoutError {}

/// Why a scan configuration was refused.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum ScanConfigError {
    /// The tracker configuration was refused.
    Track(TrackConfigError),
    /// The bin layout was refused.
    Layout(LayoutError),
    /// The gate configuration or a pattern frequency index was refused.
    Gate(GateError),
    /// The bin count `B` is zero or above 65535 (bin indices travel as `u16`).
    BinCapacity,
    /// The sparse-bin threshold is zero.
    MinSweeps,
}

impl fmt::Display for ScanConfigError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::Track(e) => write!(f, "tracker: {e}"),
            Self::Layout(e) => write!(f, "bin layout: {e}"),
            Self::Gate(e) => write!(f, "gate: {e}"),
            Self::BinCapacity => f.write_str("bin capacity must be 1 to 65535"),
            Self::MinSweeps => f.write_str("sparse-bin threshold must be at least 1 sweep"),
        }
    }
}

impl core::error::Error for ScanConfigError {}

impl From<TrackConfigError> for ScanConfigError {
    fn from(e: TrackConfigError) -> Self {
        Self::Track(e)
    }
}

impl From<LayoutError> for ScanConfigError {
    fn from(e: LayoutError) -> Self {
        Self::Layout(e)
    }
}

impl From<GateError> for ScanConfigError {
    fn from(e: GateError) -> Self {
        Self::Gate(e)
    }
}

/// Why a sweep was not binned. Each is counted; binned + all of these = pushed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum SweepReject {
    /// No positioner angle had been received.
    NoAngle,
    /// The sweep's times fall outside the angle history (beyond the extrapolation limit).
    OutsideHistory,
    /// The sweep's end time is before its start time.
    BadTimes,
    /// The sweep's angle falls outside the bin layout.
    OutsideLayout,
    /// The sweep does not have the grid's point count.
    WrongPointCount,
    /// A sample of the sweep is NaN or infinite.
    NonFinite,
    /// Step-and-stop mode refuses sweeps taken while the positioner moved.
    WhileMoving,
    /// The bin was already closed and the revisit policy keeps the first pass.
    AlreadyBinned,
    /// The scan has finished.
    Finished,
    /// The engine has not been configured yet.
    NotConfigured,
}

impl SweepReject {
    /// Every reason, in counter order.
    pub const ALL: [SweepReject; 10] = [
        Self::NoAngle,
        Self::OutsideHistory,
        Self::BadTimes,
        Self::OutsideLayout,
        Self::WrongPointCount,
        Self::NonFinite,
        Self::WhileMoving,
        Self::AlreadyBinned,
        Self::Finished,
        Self::NotConfigured,
    ];
}

impl fmt::Display for SweepReject {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            Self::NoAngle => "no positioner angle yet",
            Self::OutsideHistory => "sweep time is outside the positioner history",
            Self::BadTimes => "sweep end time is before its start time",
            Self::OutsideLayout => "sweep angle is outside the bin layout",
            Self::WrongPointCount => "sweep point count does not match the grid",
            Self::NonFinite => "sweep holds a value that is not a finite number",
            Self::WhileMoving => "sweep taken while the positioner moved",
            Self::AlreadyBinned => "bin already closed and the first pass is kept",
            Self::Finished => "the scan has finished",
            Self::NotConfigured => "the scan engine is not configured yet",
        })
    }
}

impl core::error::Error for SweepReject {}
