//! Errors of the `wire` boundary: the VNA link decoders, the block encoder, preview frames and
//! link captures.

use core::fmt;

/// Why a decoder configuration was refused.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum WireConfigError {
    /// The expected point count K is zero.
    NoPoints,
    /// The expected point count K is above [`crate::grid::MAX_POINTS`].
    TooManyPoints,
}

impl fmt::Display for WireConfigError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            Self::NoPoints => "a sweep must have at least 1 point",
            Self::TooManyPoints => "a sweep has more points than the core supports (65535)",
        })
    }
}

impl core::error::Error for WireConfigError {}

/// Why an IEEE 488.2 arbitrary block was rejected. Each cause has its own variant.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum BlockError {
    /// The header is not `#0` or `#<n><n digits>` (n a non-zero digit), or a byte other
    /// than `#` or a line end stood where a block should start.
    HeaderMalformed,
    /// The announced byte count is not a whole number of complex samples.
    LengthNotWholeSamples {
        /// Byte count from the header.
        bytes: u32,
        /// Bytes per complex sample (8 for REAL,32, 16 for REAL,64).
        sample_bytes: u8,
    },
    /// The block holds a different number of points than the configured grid.
    PointCount {
        /// Points the configuration expects (K).
        expected: u32,
        /// Points the block holds.
        found: u32,
    },
    /// The block holds more points than the caller's sweep buffer.
    Overflow {
        /// Length of the sweep buffer, in points.
        capacity: u32,
    },
    /// The stream ended in the middle of a block.
    Truncated,
    /// A value is NaN, infinite, a SCPI INFinity/NAN code (±9.9E37, 9.91E37), or a REAL,64
    /// value too large for f32.
    NonFinite {
        /// Index of the point holding the value.
        index: u32,
    },
}

impl fmt::Display for BlockError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::HeaderMalformed => f.write_str("malformed IEEE 488.2 block header"),
            Self::LengthNotWholeSamples {
                bytes,
                sample_bytes,
            } => write!(
                f,
                "block of {bytes} bytes is not a whole number of {sample_bytes}-byte complex samples"
            ),
            Self::PointCount { expected, found } => {
                write!(f, "block holds {found} points, the grid has {expected}")
            }
            Self::Overflow { capacity } => {
                write!(f, "block holds more points than the {capacity}-point buffer")
            }
            Self::Truncated => f.write_str("stream ended in the middle of a block"),
            Self::NonFinite { index } => {
                write!(f, "point {index} is not a finite value")
            }
        }
    }
}

impl core::error::Error for BlockError {}

/// Why a line of ASCII numbers was rejected. Each cause has its own variant.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum AsciiError {
    /// A field is empty or is not a decimal number.
    MalformedNumber {
        /// Index of the value in the line (re and im counted separately).
        index: u32,
    },
    /// A number token is longer than [`crate::wire::ascii::MAX_TOKEN_BYTES`].
    TokenTooLong {
        /// Index of the value in the line.
        index: u32,
    },
    /// The line holds an odd count of values, so re and im do not pair up.
    OddCount {
        /// Values in the line.
        values: u32,
    },
    /// The line holds a different number of points than the configured grid.
    PointCount {
        /// Points the configuration expects (K).
        expected: u32,
        /// Points the line holds.
        found: u32,
    },
    /// The line holds more points than the caller's sweep buffer.
    Overflow {
        /// Length of the sweep buffer, in points.
        capacity: u32,
    },
    /// The stream ended in the middle of a line.
    Truncated,
    /// A value is NaN, infinite, too large for f32, or a SCPI INFinity/NAN code
    /// (±9.9E37, 9.91E37).
    NonFinite {
        /// Index of the value in the line.
        index: u32,
    },
}

impl fmt::Display for AsciiError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::MalformedNumber { index } => write!(f, "value {index} is not a number"),
            Self::TokenTooLong { index } => write!(f, "value {index} is too long"),
            Self::OddCount { values } => {
                write!(f, "line holds {values} values, not re/im pairs")
            }
            Self::PointCount { expected, found } => {
                write!(f, "line holds {found} points, the grid has {expected}")
            }
            Self::Overflow { capacity } => {
                write!(f, "line holds more points than the {capacity}-point buffer")
            }
            Self::Truncated => f.write_str("stream ended in the middle of a line"),
            Self::NonFinite { index } => write!(f, "value {index} is not a finite number"),
        }
    }
}

impl core::error::Error for AsciiError {}

/// Why a block could not be encoded.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum EncodeError {
    /// The output buffer is shorter than the block.
    BufferTooSmall {
        /// Bytes the block needs.
        needed: usize,
    },
    /// The data needs a byte count of more than nine digits.
    TooLong,
}

impl fmt::Display for EncodeError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::BufferTooSmall { needed } => {
                write!(f, "output buffer too small: the block needs {needed} bytes")
            }
            Self::TooLong => f.write_str("block data longer than 999999999 bytes"),
        }
    }
}

impl core::error::Error for EncodeError {}

/// Why a link capture could not be read.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum CaptureError {
    /// The stream does not start with the capture magic.
    BadMagic,
    /// The capture ends inside a header or entry.
    Truncated,
    /// The frequency grid is invalid.
    Grid(crate::error::GridError),
    /// A window kind code is not known.
    UnknownWindow(u8),
    /// A window parameter is out of range.
    Window(crate::error::WindowError),
    /// The bin layout is invalid.
    Layout(crate::error::LayoutError),
    /// The bin count does not match the layout's start and step.
    BinCount,
    /// The block format code is not known.
    UnknownFormat(u8),
    /// The byte order code is not known.
    UnknownOrder(u8),
    /// The pattern frequency count is not 1…8.
    PatternCount,
    /// A pattern frequency index is not below the point count.
    PatternIndex,
    /// An entry kind is not known.
    UnknownEntry(u8),
    /// The echo mode code is not known.
    UnknownEchoMode(u8),
    /// A capture of cuts names an invalid cut layout.
    Cuts(crate::error::CutConfigError),
    /// A capture of cuts carries another number of traces per sweep than the board loop.
    TraceCount {
        /// Traces per sweep in the capture.
        capture: u8,
        /// Traces per sweep of the board loop.
        board: u8,
    },
}

impl fmt::Display for CaptureError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::BadMagic => f.write_str("not a link capture (bad magic)"),
            Self::Truncated => f.write_str("capture ends inside a header or entry"),
            Self::Grid(e) => write!(f, "capture grid: {e}"),
            Self::UnknownWindow(c) => write!(f, "unknown window kind {c}"),
            Self::Window(e) => write!(f, "capture window: {e}"),
            Self::Layout(e) => write!(f, "capture bin layout: {e}"),
            Self::BinCount => f.write_str("bin count does not match the layout"),
            Self::UnknownFormat(c) => write!(f, "unknown block format {c}"),
            Self::UnknownOrder(c) => write!(f, "unknown byte order {c}"),
            Self::PatternCount => f.write_str("pattern frequency count must be 1 to 8"),
            Self::PatternIndex => f.write_str("pattern frequency index beyond the grid"),
            Self::UnknownEntry(c) => write!(f, "unknown capture entry kind {c}"),
            Self::UnknownEchoMode(c) => write!(f, "unknown echo mode {c}"),
            Self::Cuts(e) => write!(f, "capture cuts: {e}"),
            Self::TraceCount { capture, board } => write!(
                f,
                "capture has {capture} traces per sweep, the board loop takes {board}"
            ),
        }
    }
}

impl core::error::Error for CaptureError {}

/// Why a preview record could not be written.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum EmitError {
    /// The output buffer is too small for the record or its frame.
    BufferFull,
    /// A bin record carries more frequencies than [`crate::wire::preview::MAX_FREQUENCIES`].
    TooManyFrequencies,
}

impl fmt::Display for EmitError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            Self::BufferFull => "output buffer too small for the preview record",
            Self::TooManyFrequencies => "bin record carries too many frequencies",
        })
    }
}

impl core::error::Error for EmitError {}

/// Why a preview frame was dropped by the decoder. Each is counted.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum FrameError {
    /// The frame was longer than the decoder's buffer.
    TooLong,
    /// The COBS encoding is broken (a code byte points past the frame end).
    Cobs,
    /// The frame is shorter than a header and CRC.
    TooShort,
    /// The CRC-32 does not match.
    Crc,
    /// The record kind byte is unknown.
    UnknownKind(u8),
    /// The record version is not one this decoder reads.
    UnknownVersion(u8),
    /// The record body has the wrong length for its kind.
    BadLength,
    /// A field holds an impossible value (e.g. more frequencies than the receiver holds).
    BadField,
}

impl fmt::Display for FrameError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::TooLong => f.write_str("preview frame longer than the decoder buffer"),
            Self::Cobs => f.write_str("preview frame has a broken COBS encoding"),
            Self::TooShort => f.write_str("preview frame too short for header and CRC"),
            Self::Crc => f.write_str("preview frame CRC-32 mismatch"),
            Self::UnknownKind(k) => write!(f, "unknown preview record kind {k}"),
            Self::UnknownVersion(v) => write!(f, "unknown preview record version {v}"),
            Self::BadLength => f.write_str("preview record body has the wrong length"),
            Self::BadField => f.write_str("preview record field holds an impossible value"),
        }
    }
}

impl core::error::Error for FrameError {}
