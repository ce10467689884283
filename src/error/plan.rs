//! Errors of the `plan` boundary: the measurement planner, pattern metrics and gain by
//! substitution.

use crate::error::WindowError;
use core::fmt;

/// Why a planner input was refused. Every cause has its own variant.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum PlanError {
    /// A coordinate of the AUT or the probe is NaN or infinite.
    NonFinitePoint,
    /// The AUT and the probe are at the same place: there is no range.
    AntennasCoincide,
    /// The AUT's largest dimension is NaN, infinite, zero or negative.
    AutSize,
    /// The bin step is NaN, infinite, zero or negative.
    BinStep,
    /// The sweep duration is NaN, infinite, zero or negative.
    SweepDuration,
    /// The cable delay offset is NaN, infinite or negative.
    CableDelay,
    /// The AUT's fractional bandwidth is NaN, infinite, or not in (0, 2].
    FractionalBandwidth,
    /// The configured longest path is NaN, infinite, zero or negative.
    LongestPath,
    /// The planned rotation speed is NaN, infinite, zero or negative.
    RotationSpeed,
    /// The band window's parameter is out of range.
    BandWindow(WindowError),
    /// More reflecting planes than [`crate::plan::MAX_PLANES`].
    TooManyPlanes {
        /// Planes given.
        given: u32,
    },
    /// More point scatterers than [`crate::plan::MAX_SCATTERERS`].
    TooManyScatterers {
        /// Scatterers given.
        given: u32,
    },
    /// A plane's position or reflection coefficient is NaN or infinite.
    NonFinitePlane {
        /// Index of the plane in the input.
        index: u32,
    },
    /// A plane has the AUT and the probe on opposite sides (or one of them on it): no
    /// single-bounce path exists and the plane would block the direct path.
    PlaneBetweenAntennas {
        /// Index of the plane in the input.
        index: u32,
    },
    /// A scatterer's position or reflection coefficient is NaN or infinite.
    NonFiniteScatterer {
        /// Index of the scatterer in the input.
        index: u32,
    },
    /// The list of findings is full (cannot happen with the built-in capacities; kept so a
    /// full buffer is an error, never a panic).
    FindingsFull,
}

impl fmt::Display for PlanError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::NonFinitePoint => {
                f.write_str("an AUT or probe coordinate is not a finite number")
            }
            Self::AntennasCoincide => f.write_str("the AUT and the probe are at the same place"),
            Self::AutSize => f.write_str("the AUT's largest dimension must be above 0 m"),
            Self::BinStep => f.write_str("the bin step must be above 0 degrees"),
            Self::SweepDuration => f.write_str("the sweep duration must be above 0 s"),
            Self::CableDelay => {
                f.write_str("the cable delay must be a finite number of 0 s or more")
            }
            Self::FractionalBandwidth => {
                f.write_str("the AUT's fractional bandwidth must be above 0 and at most 2")
            }
            Self::LongestPath => f.write_str("the longest path must be above 0 m"),
            Self::RotationSpeed => f.write_str("the rotation speed must be above 0 degrees/s"),
            Self::BandWindow(e) => write!(f, "band window: {e}"),
            Self::TooManyPlanes { given } => write!(
                f,
                "{given} reflecting planes given; at most {} are supported",
                crate::plan::MAX_PLANES
            ),
            Self::TooManyScatterers { given } => write!(
                f,
                "{given} scatterers given; at most {} are supported",
                crate::plan::MAX_SCATTERERS
            ),
            Self::NonFinitePlane { index } => write!(
                f,
                "plane {index} has a position or reflection that is not a finite number"
            ),
            Self::PlaneBetweenAntennas { index } => write!(
                f,
                "plane {index} lies between the AUT and the probe (or touches one of them)"
            ),
            Self::NonFiniteScatterer { index } => write!(
                f,
                "scatterer {index} has a position or reflection that is not a finite number"
            ),
            Self::FindingsFull => f.write_str("the planner's list of findings is full"),
        }
    }
}

impl core::error::Error for PlanError {}

/// Why a pattern cut was refused by the metrics.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum MetricsError {
    /// No samples.
    Empty,
    /// The angle and level slices have different lengths.
    LengthMismatch {
        /// Number of angles.
        angles: u32,
        /// Number of levels.
        levels: u32,
    },
    /// Fewer than three samples: no lobe can be told from its neighbours.
    TooFewPoints,
    /// An angle is NaN or infinite.
    NonFiniteAngle {
        /// Index of the sample.
        index: u32,
    },
    /// A level is NaN or infinite (clip zero magnitudes to a finite floor first).
    NonFiniteLevel {
        /// Index of the sample.
        index: u32,
    },
    /// Angles are not strictly increasing at this sample.
    NotIncreasing {
        /// Index of the first sample that is not above its predecessor.
        index: u32,
    },
    /// A full-circle cut spans 360° or more from first to last sample.
    SpanExceedsCircle,
}

impl fmt::Display for MetricsError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::Empty => f.write_str("the pattern cut has no samples"),
            Self::LengthMismatch { angles, levels } => {
                write!(f, "the pattern cut has {angles} angles but {levels} levels")
            }
            Self::TooFewPoints => f.write_str("a pattern cut needs at least 3 samples"),
            Self::NonFiniteAngle { index } => {
                write!(f, "angle {index} of the pattern cut is not a finite number")
            }
            Self::NonFiniteLevel { index } => {
                write!(f, "level {index} of the pattern cut is not a finite number")
            }
            Self::NotIncreasing { index } => write!(
                f,
                "angles of the pattern cut must increase; sample {index} does not"
            ),
            Self::SpanExceedsCircle => {
                f.write_str("a full-circle cut must span less than 360 degrees")
            }
        }
    }
}

impl core::error::Error for MetricsError {}

/// Why a gain-by-substitution computation was refused.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum GainError {
    /// The reference gain table has no rows.
    EmptyTable,
    /// The frequency and gain columns have different lengths.
    LengthMismatch {
        /// Number of frequencies.
        frequencies: u32,
        /// Number of gains.
        gains: u32,
    },
    /// A table frequency or gain is NaN or infinite.
    NonFiniteTable {
        /// Row of the table.
        index: u32,
    },
    /// Table frequencies are not strictly increasing at this row.
    NotIncreasing {
        /// Row of the first frequency that is not above its predecessor.
        index: u32,
    },
    /// The frequency asked for, or a measured level, is NaN or infinite.
    NonFiniteInput,
    /// The frequency asked for lies outside the table (no extrapolation is done).
    OutsideTable,
}

impl fmt::Display for GainError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::EmptyTable => f.write_str("the reference gain table is empty"),
            Self::LengthMismatch { frequencies, gains } => write!(
                f,
                "the reference gain table has {frequencies} frequencies but {gains} gains"
            ),
            Self::NonFiniteTable { index } => write!(
                f,
                "row {index} of the reference gain table is not a finite number"
            ),
            Self::NotIncreasing { index } => write!(
                f,
                "reference gain table frequencies must increase; row {index} does not"
            ),
            Self::NonFiniteInput => {
                f.write_str("the frequency or a measured level is not a finite number")
            }
            Self::OutsideTable => f.write_str(
                "the frequency lies outside the reference gain table (no extrapolation)",
            ),
        }
    }
}

impl core::error::Error for GainError {}
