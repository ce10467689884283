//! Errors of the `pump` boundary: the board loop and the replay of a link capture.

use core::fmt;

use super::{CaptureError, EmitError, ScanConfigError};

/// Why the board loop stopped. `W` is the preview output's error.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum PumpError<W> {
    /// The pump has not been configured (or its last configuration was refused).
    NotConfigured,
    /// A preview record could not be framed.
    Emit(EmitError),
    /// The preview output refused a frame.
    Write(W),
}

impl<W: fmt::Display> fmt::Display for PumpError<W> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::NotConfigured => f.write_str("the board loop is not configured"),
            Self::Emit(e) => write!(f, "preview frame: {e}"),
            Self::Write(e) => write!(f, "preview output: {e}"),
        }
    }
}

impl<W: fmt::Debug + fmt::Display> core::error::Error for PumpError<W> {}

/// Why the replay of a link capture stopped. `R` is the capture reader's error, `W` the
/// preview output's.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum ReplayError<R, W> {
    /// The capture could not be read.
    Read(R),
    /// The capture is damaged or cut short in the header or entry starting at `at_byte`.
    Capture {
        /// Offset of the header (0) or entry, bytes from the start of the capture.
        at_byte: u64,
        /// What is wrong there.
        error: CaptureError,
    },
    /// The capture's settings were refused by the scan engine.
    Config(ScanConfigError),
    /// The board loop stopped.
    Pump(PumpError<W>),
}

impl<R: fmt::Display, W: fmt::Display> fmt::Display for ReplayError<R, W> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::Read(e) => write!(f, "reading the capture: {e}"),
            Self::Capture { at_byte, error } => write!(f, "capture at byte {at_byte}: {error}"),
            Self::Config(e) => write!(f, "capture settings: {e}"),
            Self::Pump(e) => e.fmt(f),
        }
    }
}

impl<R, W> core::error::Error for ReplayError<R, W>
where
    R: fmt::Debug + fmt::Display,
    W: fmt::Debug + fmt::Display,
{
}

impl<R, W> From<PumpError<W>> for ReplayError<R, W> {
    fn from(e: PumpError<W>) -> Self {
        Self::Pump(e)
    }
}
