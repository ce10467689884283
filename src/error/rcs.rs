//! Errors of the radar-cross-section boundary: the target zone's gate, the stored
//! background and the calibration.

use core::fmt;

use super::GateError;

/// Which echo the zone's gate would hold.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum EchoKind {
    /// The coupling between the transmit and receive antennas (or the antenna's mismatch).
    Coupling,
    /// The target's mount (pylon, foam column, turntable top).
    Mount,
    /// Any other echo the caller named (its position in the list given).
    Other(u8),
}

/// Why an RCS set-up or step was refused. Every cause has its own variant.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum RcsError {
    /// A distance, size or delay is NaN, infinite or negative (distance and size: not
    /// above zero).
    ZoneNotPositive,
    /// The zone's gate was refused by the gate's own checks.
    Gate(GateError),
    /// An echo lies inside the zone's gate (within half the band window's main lobe of it).
    EchoInGate(EchoKind),
    /// A sweep or list has more points than the storage holds.
    TooManyPoints {
        /// Points given.
        points: u32,
        /// Points the storage holds.
        capacity: u32,
    },
    /// Two sweeps that must match differ in length.
    LengthMismatch {
        /// Points expected.
        expected: u32,
        /// Points given.
        given: u32,
    },
    /// A value is NaN or infinite.
    NonFinite {
        /// Index of the first such value.
        index: u32,
    },
    /// The reference measurement is more than 80 dB below its strongest value (or zero) at
    /// a frequency: the calibration there would be noise.
    ReferenceTooWeak {
        /// Index of the first such frequency.
        index: u32,
    },
    /// No background sweep has been stored.
    NoBackground,
}

impl fmt::Display for RcsError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::ZoneNotPositive => f.write_str(
                "target zone: distance and size must be finite and above 0 m, time zero finite and not negative",
            ),
            Self::Gate(e) => write!(f, "target zone's gate: {e}"),
            Self::EchoInGate(EchoKind::Coupling) => {
                f.write_str("the antenna coupling lies inside the target zone's gate")
            }
            Self::EchoInGate(EchoKind::Mount) => {
                f.write_str("the mount's echo lies inside the target zone's gate")
            }
            Self::EchoInGate(EchoKind::Other(i)) => {
                write!(f, "echo {i} lies inside the target zone's gate")
            }
            Self::TooManyPoints { points, capacity } => {
                write!(f, "{points} points but room for only {capacity}")
            }
            Self::LengthMismatch { expected, given } => {
                write!(f, "expected {expected} points, given {given}")
            }
            Self::NonFinite { index } => write!(f, "value {index} is not a finite number"),
            Self::ReferenceTooWeak { index } => write!(
                f,
                "reference measurement is over 80 dB below its peak at frequency index {index}"
            ),
            Self::NoBackground => f.write_str("no background sweep stored"),
        }
    }
}

impl core::error::Error for RcsError {
    fn source(&self) -> Option<&(dyn core::error::Error + 'static)> {
        match self {
            Self::Gate(e) => Some(e),
            _ => None,
        }
    }
}
