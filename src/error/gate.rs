//! Errors of the set-up boundary: frequency grid, windows and gate configuration.

use core::fmt;

/// Why a frequency grid was refused.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum GridError {
    /// Start or step is NaN or infinite.
    NonFinite,
    /// The start frequency is below 0 Hz.
    NegativeStart,
    /// The step is zero or negative (stop at or below start).
    StepNotPositive,
    /// Fewer than two points: no time axis can be formed.
    TooFewPoints,
    /// More points than [`crate::grid::MAX_POINTS`].
    TooManyPoints,
}

impl fmt::Display for GridError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            Self::NonFinite => "frequency start or step is not a finite number",
            Self::NegativeStart => "start frequency is below 0 Hz",
            Self::StepNotPositive => "frequency step must be above 0 Hz (stop above start)",
            Self::TooFewPoints => "a sweep needs at least 2 points",
            Self::TooManyPoints => "a sweep has more points than the core supports (65535)",
        })
    }
}

impl core::error::Error for GridError {}

/// Why a window parameter was refused.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum WindowError {
    /// Kaiser β is NaN, infinite, negative or above [`crate::window::MAX_KAISER_BETA`].
    KaiserBeta,
    /// Tukey α is NaN or outside 0…1.
    TukeyAlpha,
}

impl fmt::Display for WindowError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            Self::KaiserBeta => "Kaiser beta must be a finite number from 0 to 50",
            Self::TukeyAlpha => "Tukey alpha must be a finite number from 0 to 1",
        })
    }
}

impl core::error::Error for WindowError {}

/// Why a gate configuration was refused. Every impossible setting has its own variant.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum GateError {
    /// The sweep has more points (K) than the FFT size (M).
    PointsExceedFftSize {
        /// Points in the sweep grid.
        points: u32,
        /// The FFT size M.
        fft_size: u32,
    },
    /// Gate centre or span is NaN or infinite.
    NonFinite,
    /// Gate span is zero or negative.
    SpanNotPositive,
    /// Gate span is not shorter than the alias-free range 1/Δf.
    SpanBeyondAliasFree,
    /// Gate centre is below 0 s or at or beyond the alias-free range 1/Δf.
    CenterOutsideAliasFree,
    /// The gate covers fewer than two time samples of spacing 1/(M·Δf).
    SpanBelowTimeStep,
    /// The band window's parameter is out of range.
    BandWindow(WindowError),
    /// The gate shape's parameter is out of range.
    GateShape(WindowError),
    /// Edge renormalization would divide by less than [`crate::gate::RENORM_FLOOR`] (−80 dB)
    /// at some frequency, which happens when the band window vanishes at the band ends
    /// (Hann, Blackman-Harris) and the gate is wide: the result there would be noise
    /// amplified by more than 80 dB.
    RenormalizationIllConditioned {
        /// First frequency index where the reference fell below the floor.
        index: u32,
    },
    /// A pattern frequency index is not below the sweep's point count.
    FrequencyIndexOutOfRange {
        /// The index asked for.
        index: u32,
        /// Points in the sweep grid.
        points: u32,
    },
}

impl fmt::Display for GateError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::PointsExceedFftSize { points, fft_size } => write!(
                f,
                "sweep has {points} points but the FFT size is only {fft_size}"
            ),
            Self::NonFinite => f.write_str("gate centre or span is not a finite number"),
            Self::SpanNotPositive => f.write_str("gate span must be above 0 s"),
            Self::SpanBeyondAliasFree => {
                f.write_str("gate span must be shorter than the alias-free range 1/step")
            }
            Self::CenterOutsideAliasFree => {
                f.write_str("gate centre must lie in 0 s up to the alias-free range 1/step")
            }
            Self::SpanBelowTimeStep => f.write_str(
                "gate span covers fewer than 2 time samples; widen it or raise the FFT size",
            ),
            Self::BandWindow(e) => write!(f, "band window: {e}"),
            Self::GateShape(e) => write!(f, "gate shape: {e}"),
            Self::RenormalizationIllConditioned { index } => write!(
                f,
                "edge renormalization would amplify by over 80 dB at frequency index {index}; \
                 use a band window with non-zero ends (Kaiser, Tukey, Hamming) or turn it off"
            ),
            Self::FrequencyIndexOutOfRange { index, points } => write!(
                f,
                "pattern frequency index {index} is not below the sweep's {points} points"
            ),
        }
    }
}

impl core::error::Error for GateError {}
