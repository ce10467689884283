//! Why a Touchstone file (or the sweep taken from it) was refused: the cause, and the file
//! and line to blame.

use std::fmt;

use sweepgate::error::GridError;

use super::{Parameter, ParameterKind, MAX_PORTS, UNIFORM_TOLERANCE_OF_STEP};

/// A parameter name that is not `S<i><j>` (or `S<i>,<j>`) with ports from 1.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ParseParameterError(pub String);

impl fmt::Display for ParseParameterError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "`{}` is not a parameter name (expected S11, S21, S12, S22, … or S<i>,<j>)",
            self.0
        )
    }
}

impl std::error::Error for ParseParameterError {}

/// Why a Touchstone file (or the sweep taken from it) was refused.
#[derive(Debug, Clone, PartialEq)]
pub enum TouchstoneErrorKind {
    /// The file could not be read.
    Io(String),
    /// A version 1.1 file whose name does not end in `.s<N>p`.
    UnknownExtension,
    /// A field that should be a number is not one.
    BadNumber(String),
    /// A number that is infinite or not a number.
    NonFiniteNumber(String),
    /// An option-line field that is none of the units, parameters, formats or `R`.
    UnknownOption(String),
    /// The same option field (unit, parameter or format) given twice on the option line.
    DuplicateOption(String),
    /// `R` without a following number.
    MissingReference,
    /// A reference impedance that is not positive.
    BadReference(f64),
    /// A version 1.1 option line after the first data record.
    OptionLineAfterData,
    /// A second option line in a version 2.0 file.
    DuplicateOptionLine,
    /// A data record with the wrong count of numbers.
    RecordLength {
        /// Numbers one record needs (frequency plus two per value).
        expected: usize,
        /// Numbers found before the record ended.
        found: usize,
        /// Last line the record took numbers from.
        last_line: usize,
    },
    /// A value whose real or imaginary part is beyond the single-precision range the gate
    /// works in (±3.4e38), or not finite after its format's conversion (dB of 1e308).
    BeyondSinglePrecision {
        /// Which value of the record, from 1.
        value: usize,
        /// Its real part.
        re: f64,
        /// Its imaginary part.
        im: f64,
    },
    /// A frequency that is negative.
    NegativeFrequency(f64),
    /// A frequency not above the one before it.
    NotIncreasing {
        /// Frequency of the previous record.
        previous_hz: f64,
        /// Frequency of this record.
        found_hz: f64,
    },
    /// A bracketed keyword that is not part of version 2.0 (or any keyword in a version 1.1
    /// file).
    UnknownKeyword(String),
    /// A version other than 2.0 (or 2.1, read as 2.0).
    UnsupportedVersion(String),
    /// `[Version]` after other content.
    VersionNotFirst,
    /// A keyword given twice.
    DuplicateKeyword(String),
    /// A keyword with a value it does not allow.
    BadKeywordValue {
        /// The keyword.
        keyword: String,
        /// The value found.
        value: String,
    },
    /// A keyword the file needs but does not have.
    MissingKeyword(&'static str),
    /// `[Mixed-Mode Order]`: mixed-mode data is not supported.
    MixedModeUnsupported,
    /// More ports than [`MAX_PORTS`].
    TooManyPorts(usize),
    /// Numbers in a version 2.0 file outside `[Network Data]`, `[Noise Data]` and
    /// `[Reference]`.
    NumbersOutsideData,
    /// `[Noise Data]` in a file that is not 2-port.
    NoiseDataNotTwoPort,
    /// The count of records differs from `[Number of Frequencies]`.
    FrequencyCountMismatch {
        /// Count declared.
        declared: usize,
        /// Count found.
        found: usize,
    },
    /// No network data at all.
    NoData,
    /// A parameter whose ports the file does not have.
    PortOutOfRange {
        /// The parameter asked for.
        parameter: Parameter,
        /// Ports of the file.
        ports: usize,
    },
    /// The gate takes scattering parameters; the file holds another kind.
    NotScattering(ParameterKind),
    /// Frequencies not uniformly spaced (and resampling not asked for).
    NotUniform {
        /// Index of the point farthest from the uniform grid.
        index: usize,
        /// Its distance from the uniform grid.
        deviation_hz: f64,
        /// Largest distance allowed.
        tolerance_hz: f64,
        /// Step of the uniform grid through the first and last point.
        step_hz: f64,
    },
    /// The frequencies do not make a valid grid (too few or too many points, …).
    Grid(GridError),
}

/// The message of [`TouchstoneErrorKind::BeyondSinglePrecision`].
///
/// A part past double precision (a dB level or a magnitude too large to convert) is said
/// as an overflow, not printed as `inf` or `NaN` (inf·0 at an angle of 0°).
fn beyond_single(f: &mut fmt::Formatter<'_>, value: usize, re: f64, im: f64) -> fmt::Result {
    if re.is_finite() && im.is_finite() {
        write!(f, "value {value} of the record is {re:e}{im:+e}j")?;
    } else {
        write!(
            f,
            "value {value} of the record overflows double precision when converted to real \
             and imaginary parts"
        )?;
    }
    write!(
        f,
        ", beyond the single-precision range (±3.4e38) the gate works in"
    )
}

impl fmt::Display for TouchstoneErrorKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::Io(e) => write!(f, "cannot read: {e}"),
            Self::UnknownExtension => write!(
                f,
                "cannot tell the port count: a version 1.1 file must be named .s<N>p (.s1p, .s2p, …)"
            ),
            Self::BadNumber(s) => write!(f, "`{s}` is not a number"),
            Self::NonFiniteNumber(s) => write!(f, "`{s}` is not a finite number"),
            Self::UnknownOption(s) => write!(
                f,
                "unknown option `{s}` (expected Hz/kHz/MHz/GHz, S/Y/Z/H/G, RI/MA/DB or R <ohms>)"
            ),
            Self::DuplicateOption(s) => write!(f, "option line gives the {s} twice"),
            Self::MissingReference => write!(f, "option `R` must be followed by the reference resistance in ohms"),
            Self::BadReference(r) => write!(f, "reference resistance {r} Ω is not positive"),
            Self::OptionLineAfterData => write!(f, "option line after the data"),
            Self::DuplicateOptionLine => write!(f, "second option line (version 2.0 allows one)"),
            Self::RecordLength {
                expected,
                found,
                last_line,
            } => write!(
                f,
                "expected {expected} numbers, found {found}{}",
                if *last_line > 0 {
                    format!(" (record ends at line {last_line})")
                } else {
                    String::new()
                }
            ),
            Self::BeyondSinglePrecision { value, re, im } => beyond_single(f, *value, *re, *im),
            Self::NegativeFrequency(x) => write!(f, "negative frequency {x} Hz"),
            Self::NotIncreasing {
                previous_hz,
                found_hz,
            } => write!(
                f,
                "frequency {found_hz} Hz is not above the previous one, {previous_hz} Hz \
                 (frequencies must increase; descending data is not read)"
            ),
            Self::UnknownKeyword(k) => write!(f, "unknown keyword [{k}]"),
            Self::UnsupportedVersion(v) => write!(f, "unsupported Touchstone version `{v}` (1.1 and 2.0 are read)"),
            Self::VersionNotFirst => write!(f, "[Version] must come before everything else"),
            Self::DuplicateKeyword(k) => write!(f, "keyword [{k}] given twice"),
            Self::BadKeywordValue { keyword, value } => {
                write!(f, "[{keyword}] does not take `{value}`")
            }
            Self::MissingKeyword(k) => write!(f, "missing keyword {k}"),
            Self::MixedModeUnsupported => write!(f, "mixed-mode data ([Mixed-Mode Order]) is not supported"),
            Self::TooManyPorts(n) => write!(f, "{n} ports is more than the {MAX_PORTS} supported"),
            Self::NumbersOutsideData => write!(f, "numbers outside [Network Data] and [Noise Data]"),
            Self::NoiseDataNotTwoPort => write!(f, "[Noise Data] is only allowed in 2-port files"),
            Self::FrequencyCountMismatch { declared, found } => write!(
                f,
                "[Number of Frequencies] is {declared} but the file has {found}"
            ),
            Self::NoData => write!(f, "no network data"),
            Self::PortOutOfRange { parameter, ports } => {
                write!(f, "{parameter} needs a port the {ports}-port file does not have")
            }
            Self::NotScattering(k) => write!(
                f,
                "the file holds {k} parameters; gating needs S parameters"
            ),
            Self::NotUniform {
                index,
                deviation_hz,
                tolerance_hz,
                step_hz,
            } => write!(
                f,
                "frequencies are not uniformly spaced: point {index} is {deviation_hz} Hz off the \
                 uniform grid of step {step_hz} Hz (tolerance {tolerance_hz} Hz, {} % of the step); \
                 ask for resampling to interpolate onto a uniform grid",
                UNIFORM_TOLERANCE_OF_STEP * 100.0
            ),
            Self::Grid(e) => write!(f, "frequencies do not make a grid: {e}"),
        }
    }
}

/// A refused Touchstone file: which file, which line (when one is to blame), and why.
/// Displays as `file.s2p:17: expected 9 numbers, found 7`.
#[derive(Debug, Clone, PartialEq)]
pub struct TouchstoneError {
    /// The file, as the caller named it.
    pub file: String,
    /// 1-based line, when the cause is on one line.
    pub line: Option<usize>,
    /// The cause.
    pub kind: TouchstoneErrorKind,
}

impl fmt::Display for TouchstoneError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self.line {
            Some(l) => write!(f, "{}:{}: {}", self.file, l, self.kind),
            None => write!(f, "{}: {}", self.file, self.kind),
        }
    }
}

impl std::error::Error for TouchstoneError {}
