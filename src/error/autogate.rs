//! Errors of the gate chosen from the data.

use core::fmt;

/// Why no gate could be chosen from the data.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum AutogateError {
    /// A threshold is not a finite negative number (or the extra lobes are negative).
    Threshold,
    /// The number of angle regions is 0 or above 360.
    Regions,
    /// No impulse response with a direct path was looked at.
    NothingSeen,
}

impl fmt::Display for AutogateError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            Self::Threshold => "a survey threshold is not a finite negative number of dB",
            Self::Regions => "the survey needs 1 to 360 angle regions",
            Self::NothingSeen => "no impulse response with a direct path was surveyed",
        })
    }
}

impl core::error::Error for AutogateError {}
