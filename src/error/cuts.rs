//! Errors of the `cuts` boundary: the second axis and the further traces of a scan.

use core::fmt;

use super::{ScanConfigError, TrackConfigError};

/// Why a cut layout or a scan of cuts was refused.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum CutConfigError {
    /// A cut value, the step or the tolerance is NaN or infinite.
    NonFinite,
    /// No cuts (count 0) or more than 65 535.
    Count,
    /// More than one cut and a step of 0 or below.
    StepNotPositive,
    /// The tolerance is negative, or half a step or more (a value would belong to two cuts).
    Tolerance,
    /// The first axis's engine refused its settings.
    Scan(ScanConfigError),
    /// The second axis's tracker refused its settings.
    Axis2Track(TrackConfigError),
}

impl fmt::Display for CutConfigError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::NonFinite => f.write_str("cut start, step and tolerance must be finite numbers"),
            Self::Count => f.write_str("the number of cuts must be 1 to 65535"),
            Self::StepNotPositive => f.write_str("the step between cuts must be above 0 deg"),
            Self::Tolerance => f.write_str(
                "the cut tolerance must be at least 0 deg and less than half the step between cuts",
            ),
            Self::Scan(_) => f.write_str("the first axis's scan settings were refused"),
            Self::Axis2Track(_) => f.write_str("the second axis's tracker settings were refused"),
        }
    }
}

impl core::error::Error for CutConfigError {
    fn source(&self) -> Option<&(dyn core::error::Error + 'static)> {
        match self {
            Self::Scan(e) => Some(e),
            Self::Axis2Track(e) => Some(e),
            _ => None,
        }
    }
}

/// Why a sweep of several traces was refused before it reached the first axis's engine
/// (which counts its own reasons, [`super::SweepReject`]). Each is counted.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum CutReject {
    /// A further trace does not have the grid's point count.
    TracePointCount,
    /// A further trace holds a NaN or infinite value.
    TraceNonFinite,
    /// No second-axis sample has been accepted yet.
    NoAxis2,
    /// The sweep's mid-time is outside the second axis's history.
    Axis2History,
    /// The second-axis angle is farther than the tolerance from every cut.
    OutsideCuts,
}

impl CutReject {
    /// Every reason, in counter order.
    pub const ALL: [CutReject; 5] = [
        Self::TracePointCount,
        Self::TraceNonFinite,
        Self::NoAxis2,
        Self::Axis2History,
        Self::OutsideCuts,
    ];
}

impl fmt::Display for CutReject {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            Self::TracePointCount => "a further trace's point count differs from the grid",
            Self::TraceNonFinite => "a further trace holds a value that is not a finite number",
            Self::NoAxis2 => "no second-axis angle has been received yet",
            Self::Axis2History => "the sweep is outside the second axis's angle history",
            Self::OutsideCuts => "the second-axis angle is not within the tolerance of any cut",
        })
    }
}

impl core::error::Error for CutReject {}
