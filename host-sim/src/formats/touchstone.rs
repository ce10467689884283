//! Touchstone files (versions 1.1 and 2.0): one saved sweep of an N-port network.
//!
//! The reader follows the Touchstone File Format Specification (version 1.1 as published
//! with IBIS, version 2.0 by the IBIS Open Forum, 2009):
//!
//! - the option line `# <unit> <parameter> <format> R <n>`, fields in any order, case
//!   insensitive, each optional (defaults GHz, S, MA, 50 Ω);
//! - frequency units Hz, kHz, MHz, GHz; data formats RI (real, imaginary), MA (magnitude,
//!   angle in degrees) and DB (20·log10 of the magnitude, angle in degrees);
//! - `!` starts a comment anywhere on a line;
//! - a data record (one frequency) starts on a new line and may continue over as many lines
//!   as it needs; numbers are collected until the record is complete;
//! - version 1.1 takes the port count from the file extension (`.s1p`, `.s2p`, …); 2-port
//!   columns are f, S11, S21, S12, S22; noise data after the network data (recognised by the
//!   frequency going down) is skipped;
//! - version 2.0 starts with `[Version] 2.0` and supports `[Number of Ports]`,
//!   `[Two-Port Data Order]` (`12_21` or `21_12`), `[Number of Frequencies]`,
//!   `[Number of Noise Frequencies]`, `[Reference]`, `[Matrix Format]` (`Full`, `Lower`,
//!   `Upper`), `[Begin Information]`/`[End Information]` (skipped), `[Network Data]`,
//!   `[Noise Data]` (skipped) and `[End]`.
//!
//! Files with any number of ports are read (matrix rows in order); the gate needs one
//! parameter on a uniform grid, see [`Touchstone::to_sweep`].
//!
//! ```
//! use sweepgate_host::formats::touchstone::{Parameter, Spacing, Touchstone};
//! let text = "! a made-up through line\n# MHz S RI R 50\n\
//!             100 0.1 0 0.9 0 0.9 0 0.1 0\n\
//!             101 0.1 0 0 0.9 0 0.9 0.1 0\n\
//!             102 0.1 0 -0.9 0 -0.9 0 0.1 0\n";
//! let ts = Touchstone::parse_str(text, "thru.s2p").unwrap();
//! assert_eq!(ts.ports(), 2);
//! assert_eq!(ts.frequencies_hz(), &[100e6, 101e6, 102e6]);
//! let sweep = ts.to_sweep(Parameter::S21, Spacing::RequireUniform).unwrap();
//! assert_eq!(sweep.grid.points(), 3);
//! assert!((sweep.grid.step_hz() - 1e6).abs() < 1e-6);
//! assert!((sweep.values[1].im - 0.9).abs() < 1e-7);
//! assert!(sweep.warning.is_none());
//! ```

use std::fmt;
use std::path::Path;
use std::str::FromStr;

use num_complex::Complex64;
use sweepgate::error::GridError;
use sweepgate::grid::Grid;
use sweepgate::Complex32;

/// Most ports a file may declare (bounds the size of one record).
pub const MAX_PORTS: usize = 64;

/// A frequency list counts as uniform when every point lies within this fraction of the
/// step from the straight line through the first and last point (0.1 % of Δf: a phase error
/// of at most 0.36° at the end of the alias-free range 1/Δf; common practice, no source).
pub const UNIFORM_TOLERANCE_OF_STEP: f64 = 1e-3;

/// Touchstone version of a file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Version {
    /// Version 1.1 (no `[Version]` line; port count from the extension).
    V1_1,
    /// Version 2.0 (first line `[Version] 2.0`).
    V2_0,
}

/// Frequency unit of the option line.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FrequencyUnit {
    /// Hertz.
    Hz,
    /// Kilohertz.
    KHz,
    /// Megahertz.
    MHz,
    /// Gigahertz (the default).
    GHz,
}

impl FrequencyUnit {
    /// Hertz per unit.
    pub fn hz(self) -> f64 {
        match self {
            Self::Hz => 1.0,
            Self::KHz => 1e3,
            Self::MHz => 1e6,
            Self::GHz => 1e9,
        }
    }
}

/// Kind of network parameter held in the file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ParameterKind {
    /// Scattering parameters (the default).
    S,
    /// Admittance parameters.
    Y,
    /// Impedance parameters.
    Z,
    /// Hybrid-h parameters.
    H,
    /// Hybrid-g parameters.
    G,
}

impl fmt::Display for ParameterKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let s = match self {
            Self::S => "S",
            Self::Y => "Y",
            Self::Z => "Z",
            Self::H => "H",
            Self::G => "G",
        };
        f.write_str(s)
    }
}

/// How each complex value is written.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum DataFormat {
    /// Real and imaginary part.
    Ri,
    /// Magnitude and angle in degrees (the default).
    Ma,
    /// 20·log10 of the magnitude, and angle in degrees.
    Db,
}

impl DataFormat {
    /// The complex value of one written pair.
    pub fn to_complex(self, a: f64, b: f64) -> Complex64 {
        match self {
            Self::Ri => Complex64::new(a, b),
            Self::Ma => Complex64::from_polar(a, b.to_radians()),
            Self::Db => Complex64::from_polar(10f64.powf(a / 20.0), b.to_radians()),
        }
    }
}

/// Column order of 2-port data (`[Two-Port Data Order]`).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TwoPortOrder {
    /// S11, S21, S12, S22 (`21_12`, the only order of version 1.1).
    Order21_12,
    /// S11, S12, S21, S22 (`12_21`).
    Order12_21,
}

/// Which part of each matrix a version 2.0 file writes (`[Matrix Format]`).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum MatrixFormat {
    /// Every element, row by row.
    Full,
    /// The lower triangle and diagonal, row by row (the matrix is symmetric).
    Lower,
    /// The diagonal and upper triangle, row by row (the matrix is symmetric).
    Upper,
}

/// One network parameter of an N-port: the wave out of `out_port` for a wave into
/// `in_port` (S21: out of port 2, into port 1). Ports count from 1.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Parameter {
    /// Port the response is taken at (1-based).
    pub out_port: u8,
    /// Port that is driven (1-based).
    pub in_port: u8,
}

impl Parameter {
    /// S11, reflection at port 1.
    pub const S11: Self = Self::new(1, 1);
    /// S21, transmission from port 1 to port 2.
    pub const S21: Self = Self::new(2, 1);
    /// S12, transmission from port 2 to port 1.
    pub const S12: Self = Self::new(1, 2);
    /// S22, reflection at port 2.
    pub const S22: Self = Self::new(2, 2);

    /// The parameter out of `out_port` for a wave into `in_port` (both 1-based).
    pub const fn new(out_port: u8, in_port: u8) -> Self {
        Self { out_port, in_port }
    }

    /// The usual pattern signal of a file with `ports` ports: S21 for two or more, S11 for
    /// one.
    pub fn default_for(ports: usize) -> Self {
        if ports >= 2 {
            Self::S21
        } else {
            Self::S11
        }
    }
}

impl fmt::Display for Parameter {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.out_port < 10 && self.in_port < 10 {
            write!(f, "S{}{}", self.out_port, self.in_port)
        } else {
            write!(f, "S{},{}", self.out_port, self.in_port)
        }
    }
}

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

impl FromStr for Parameter {
    type Err = ParseParameterError;

    /// Parses `S21`, `s11`, `S3,1` or `S3_1`.
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        let bad = || ParseParameterError(s.to_string());
        let t = s.trim();
        let rest = t
            .strip_prefix('S')
            .or_else(|| t.strip_prefix('s'))
            .ok_or_else(bad)?;
        let (a, b) = if let Some((a, b)) = rest.split_once([',', '_']) {
            (a, b)
        } else if rest.len() == 2 && rest.is_char_boundary(1) {
            rest.split_at(1)
        } else {
            return Err(bad());
        };
        let port = |x: &str| -> Result<u8, ParseParameterError> {
            match x.parse::<u8>() {
                Ok(p) if p >= 1 && x.bytes().all(|c| c.is_ascii_digit()) => Ok(p),
                _ => Err(bad()),
            }
        };
        Ok(Self::new(port(a)?, port(b)?))
    }
}

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
            Self::NegativeFrequency(x) => write!(f, "negative frequency {x} Hz"),
            Self::NotIncreasing {
                previous_hz,
                found_hz,
            } => write!(
                f,
                "frequency {found_hz} Hz is not above the previous one, {previous_hz} Hz"
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

/// How [`Touchstone::to_sweep`] treats a non-uniform frequency list.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Spacing {
    /// Refuse it ([`TouchstoneErrorKind::NotUniform`]).
    RequireUniform,
    /// Interpolate linearly (real and imaginary part) onto the uniform grid with the same
    /// first and last frequency and point count, and say so in a warning.
    Resample,
}

/// One parameter of a file on a uniform grid, ready for the gate.
#[derive(Debug, Clone, PartialEq)]
pub struct GateSweep {
    /// The uniform grid.
    pub grid: Grid,
    /// The parameter at each grid point.
    pub values: Vec<Complex32>,
    /// Set when the file was resampled: what was done, for the user.
    pub warning: Option<String>,
}

/// A parsed Touchstone file.
#[derive(Debug, Clone, PartialEq)]
pub struct Touchstone {
    name: String,
    version: Version,
    ports: usize,
    unit: FrequencyUnit,
    kind: ParameterKind,
    format: DataFormat,
    reference_ohm: Vec<f64>,
    frequencies_hz: Vec<f64>,
    data: Vec<Complex64>,
    noise_records: usize,
}

impl Touchstone {
    /// Reads and parses a file. Errors name the path as given.
    pub fn read(path: &Path) -> Result<Self, TouchstoneError> {
        let name = path.display().to_string();
        let bytes = std::fs::read(path).map_err(|e| TouchstoneError {
            file: name.clone(),
            line: None,
            kind: TouchstoneErrorKind::Io(e.to_string()),
        })?;
        // Comments may hold non-UTF-8 bytes (degree or ohm signs in a legacy code page);
        // numbers and keywords are ASCII, so a lossy conversion loses nothing that matters.
        let text = String::from_utf8_lossy(&bytes);
        Self::parse_str(&text, &name)
    }

    /// Parses file text. `name` is used in errors and, for version 1.1, its extension
    /// `.s<N>p` gives the port count.
    pub fn parse_str(text: &str, name: &str) -> Result<Self, TouchstoneError> {
        Parser::new(name).run(text)
    }

    /// The name given when parsing (the path for [`Touchstone::read`]).
    pub fn name(&self) -> &str {
        &self.name
    }

    /// Touchstone version.
    pub fn version(&self) -> Version {
        self.version
    }

    /// Number of ports N.
    pub fn ports(&self) -> usize {
        self.ports
    }

    /// Frequency unit the file was written in (frequencies here are always in Hz).
    pub fn unit(&self) -> FrequencyUnit {
        self.unit
    }

    /// Kind of parameter.
    pub fn kind(&self) -> ParameterKind {
        self.kind
    }

    /// Format the values were written in (values here are always complex).
    pub fn format(&self) -> DataFormat {
        self.format
    }

    /// Reference impedance of each port in ohms.
    pub fn reference_ohm(&self) -> &[f64] {
        &self.reference_ohm
    }

    /// Frequencies in Hz, strictly increasing.
    pub fn frequencies_hz(&self) -> &[f64] {
        &self.frequencies_hz
    }

    /// Noise records skipped (version 1.1 noise block or version 2.0 `[Noise Data]`).
    pub fn noise_records(&self) -> usize {
        self.noise_records
    }

    /// The N×N matrix at frequency `index`, row by row (element `(i, j)`, 0-based, is
    /// parameter S<i+1><j+1>); `None` past the end.
    pub fn matrix(&self, index: usize) -> Option<&[Complex64]> {
        let n2 = self.ports * self.ports;
        self.data.get(index * n2..(index + 1) * n2)
    }

    /// One parameter at every frequency.
    pub fn parameter(&self, parameter: Parameter) -> Result<Vec<Complex64>, TouchstoneError> {
        let (o, i) = (parameter.out_port as usize, parameter.in_port as usize);
        if o == 0 || i == 0 || o > self.ports || i > self.ports {
            return Err(self.error(TouchstoneErrorKind::PortOutOfRange {
                parameter,
                ports: self.ports,
            }));
        }
        let at = (o - 1) * self.ports + (i - 1);
        Ok(self
            .data
            .chunks_exact(self.ports * self.ports)
            .map(|m| m[at])
            .collect())
    }

    /// The parameter the gate works on, on a uniform [`Grid`] in single precision.
    ///
    /// Needs S parameters. A frequency list farther than [`UNIFORM_TOLERANCE_OF_STEP`] of a
    /// step from uniform is refused, unless `spacing` is [`Spacing::Resample`]: then it is
    /// interpolated onto the uniform grid of the same span and point count and the result
    /// carries a warning.
    pub fn to_sweep(
        &self,
        parameter: Parameter,
        spacing: Spacing,
    ) -> Result<GateSweep, TouchstoneError> {
        if self.kind != ParameterKind::S {
            return Err(self.error(TouchstoneErrorKind::NotScattering(self.kind)));
        }
        let values = self.parameter(parameter)?;
        let f = &self.frequencies_hz;
        let (first, last) = match (f.first(), f.last()) {
            (Some(a), Some(b)) => (*a, *b),
            _ => return Err(self.error(TouchstoneErrorKind::NoData)),
        };
        let grid = Grid::from_start_stop(first, last, f.len())
            .map_err(|e| self.error(TouchstoneErrorKind::Grid(e)))?;
        let step_hz = grid.step_hz();
        let tolerance_hz = UNIFORM_TOLERANCE_OF_STEP * step_hz;
        let (mut worst, mut worst_dev) = (0usize, 0.0f64);
        for (k, &fk) in f.iter().enumerate() {
            let dev = (fk - grid.frequency_hz(k)).abs();
            if dev > worst_dev {
                worst = k;
                worst_dev = dev;
            }
        }
        let narrow = |c: Complex64| Complex32::new(c.re as f32, c.im as f32);
        if worst_dev <= tolerance_hz {
            return Ok(GateSweep {
                grid,
                values: values.into_iter().map(narrow).collect(),
                warning: None,
            });
        }
        if spacing == Spacing::RequireUniform {
            return Err(self.error(TouchstoneErrorKind::NotUniform {
                index: worst,
                deviation_hz: worst_dev,
                tolerance_hz,
                step_hz,
            }));
        }
        let resampled = resample_linear(f, &values, &grid);
        Ok(GateSweep {
            grid,
            values: resampled.into_iter().map(narrow).collect(),
            warning: Some(format!(
                "{}: frequencies are not uniformly spaced (point {worst} is {worst_dev} Hz off, \
                 tolerance {tolerance_hz} Hz); {parameter} was resampled by linear interpolation \
                 of real and imaginary parts onto {} uniform points from {first} Hz to {last} Hz \
                 (step {step_hz} Hz)",
                self.name,
                grid.points()
            )),
        })
    }

    fn error(&self, kind: TouchstoneErrorKind) -> TouchstoneError {
        TouchstoneError {
            file: self.name.clone(),
            line: None,
            kind,
        }
    }
}

/// Linear interpolation of `(f, v)` (f strictly increasing, same length as `v`) at each
/// point of `grid`, clamped to the ends.
fn resample_linear(f: &[f64], v: &[Complex64], grid: &Grid) -> Vec<Complex64> {
    let mut out = Vec::with_capacity(grid.points());
    let mut j = 0usize;
    for k in 0..grid.points() {
        let t = grid.frequency_hz(k);
        while j + 2 < f.len() && f[j + 1] <= t {
            j += 1;
        }
        let (f0, f1) = (f[j], f[(j + 1).min(f.len() - 1)]);
        let (v0, v1) = (v[j], v[(j + 1).min(v.len() - 1)]);
        let x = if f1 > f0 {
            ((t - f0) / (f1 - f0)).clamp(0.0, 1.0)
        } else {
            0.0
        };
        out.push(v0 + (v1 - v0) * x);
    }
    out
}

/// Port count from a `.s<N>p` extension.
fn ports_from_name(name: &str) -> Option<usize> {
    let ext = Path::new(name).extension()?.to_str()?.to_ascii_lowercase();
    let digits = ext.strip_prefix('s')?.strip_suffix('p')?;
    if digits.is_empty() || !digits.bytes().all(|c| c.is_ascii_digit()) {
        return None;
    }
    digits.parse().ok()
}

fn parse_number(tok: &str) -> Result<f64, TouchstoneErrorKind> {
    match tok.parse::<f64>() {
        Ok(x) if x.is_finite() => Ok(x),
        // Rust also accepts `inf`, `nan`, `infinity`: refuse them as not finite.
        Ok(_) => Err(TouchstoneErrorKind::NonFiniteNumber(tok.to_string())),
        Err(_) => Err(TouchstoneErrorKind::BadNumber(tok.to_string())),
    }
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Section {
    /// Before `[Network Data]` (version 2.0) or the data (version 1.1).
    Header,
    /// Inside `[Begin Information]` … `[End Information]`.
    Information,
    /// Network data.
    Network,
    /// Noise data (skipped).
    Noise,
    /// After `[End]`: ignored.
    Ended,
}

struct Options {
    unit: Option<FrequencyUnit>,
    kind: Option<ParameterKind>,
    format: Option<DataFormat>,
    reference_ohm: Option<f64>,
}

struct Parser<'a> {
    name: &'a str,
    line: usize,
    version: Option<Version>,
    seen_content: bool,
    options: Option<Options>,
    ports: Option<usize>,
    two_port_order: Option<TwoPortOrder>,
    frequencies_declared: Option<usize>,
    noise_declared: Option<usize>,
    matrix_format: Option<MatrixFormat>,
    reference: Option<Vec<f64>>,
    reference_pending: bool,
    section: Section,
    seen_network_keyword: bool,
    record: Vec<f64>,
    record_start: usize,
    frequencies_hz: Vec<f64>,
    data: Vec<Complex64>,
    noise_numbers: usize,
}

impl<'a> Parser<'a> {
    fn new(name: &'a str) -> Self {
        Self {
            name,
            line: 0,
            version: None,
            seen_content: false,
            options: None,
            ports: None,
            two_port_order: None,
            frequencies_declared: None,
            noise_declared: None,
            matrix_format: None,
            reference: None,
            reference_pending: false,
            section: Section::Header,
            seen_network_keyword: false,
            record: Vec::new(),
            record_start: 0,
            frequencies_hz: Vec::new(),
            data: Vec::new(),
            noise_numbers: 0,
        }
    }

    fn err(&self, kind: TouchstoneErrorKind) -> TouchstoneError {
        self.err_at(Some(self.line), kind)
    }

    fn err_at(&self, line: Option<usize>, kind: TouchstoneErrorKind) -> TouchstoneError {
        TouchstoneError {
            file: self.name.to_string(),
            line,
            kind,
        }
    }

    fn run(mut self, text: &str) -> Result<Touchstone, TouchstoneError> {
        let text = text.strip_prefix('\u{feff}').unwrap_or(text);
        for (i, raw) in text.lines().enumerate() {
            self.line = i + 1;
            let content = raw.split('!').next().unwrap_or("").trim();
            if content.is_empty() || self.section == Section::Ended {
                continue;
            }
            if self.section == Section::Information {
                if content.starts_with('[') && keyword_name(content).0 == "end information" {
                    self.section = Section::Header;
                }
                continue;
            }
            if content.starts_with('[') {
                self.keyword(content)?;
            } else if let Some(rest) = content.strip_prefix('#') {
                self.option_line(rest)?;
            } else {
                self.numbers(content)?;
            }
            self.seen_content = true;
        }
        self.line += 1;
        self.finish()
    }

    fn is_v2(&self) -> bool {
        self.version == Some(Version::V2_0)
    }

    fn keyword(&mut self, content: &str) -> Result<(), TouchstoneError> {
        let (name, value) = keyword_name(content);
        if name == "version" {
            if self.seen_content {
                return Err(self.err(TouchstoneErrorKind::VersionNotFirst));
            }
            return match value.as_str() {
                "2.0" | "2.1" => {
                    self.version = Some(Version::V2_0);
                    Ok(())
                }
                v => Err(self.err(TouchstoneErrorKind::UnsupportedVersion(v.to_string()))),
            };
        }
        if !self.is_v2() {
            return Err(self.err(TouchstoneErrorKind::UnknownKeyword(format!(
                "{} (keywords need [Version] 2.0 on the first line)",
                keyword_display(content)
            ))));
        }
        self.end_record()?;
        if self.reference_pending {
            return Err(self.err(TouchstoneErrorKind::RecordLength {
                expected: self.ports.unwrap_or(0),
                found: self.reference.as_ref().map_or(0, Vec::len),
                last_line: 0,
            }));
        }
        let display = keyword_display(content);
        let bad_value = |s: &Self| {
            s.err(TouchstoneErrorKind::BadKeywordValue {
                keyword: display.clone(),
                value: value.clone(),
            })
        };
        let dup = |s: &Self| s.err(TouchstoneErrorKind::DuplicateKeyword(display.clone()));
        match name.as_str() {
            "number of ports" => {
                if self.ports.is_some() {
                    return Err(dup(self));
                }
                let n: usize = value.parse().map_err(|_| bad_value(self))?;
                if n == 0 {
                    return Err(bad_value(self));
                }
                if n > MAX_PORTS {
                    return Err(self.err(TouchstoneErrorKind::TooManyPorts(n)));
                }
                self.ports = Some(n);
            }
            "two-port data order" => {
                if self.two_port_order.is_some() {
                    return Err(dup(self));
                }
                self.two_port_order = Some(match value.as_str() {
                    "12_21" => TwoPortOrder::Order12_21,
                    "21_12" => TwoPortOrder::Order21_12,
                    _ => return Err(bad_value(self)),
                });
            }
            "number of frequencies" => {
                if self.frequencies_declared.is_some() {
                    return Err(dup(self));
                }
                let n: usize = value.parse().map_err(|_| bad_value(self))?;
                if n == 0 {
                    return Err(bad_value(self));
                }
                self.frequencies_declared = Some(n);
            }
            "number of noise frequencies" => {
                if self.noise_declared.is_some() {
                    return Err(dup(self));
                }
                self.noise_declared = Some(value.parse().map_err(|_| bad_value(self))?);
            }
            "reference" => {
                if self.reference.is_some() {
                    return Err(dup(self));
                }
                let Some(n) = self.ports else {
                    return Err(self.err(TouchstoneErrorKind::MissingKeyword("[Number of Ports]")));
                };
                self.reference = Some(Vec::with_capacity(n));
                self.reference_pending = true;
                if !value.is_empty() {
                    self.reference_numbers(&value)?;
                }
            }
            "matrix format" => {
                if self.matrix_format.is_some() {
                    return Err(dup(self));
                }
                self.matrix_format = Some(match value.as_str() {
                    "full" => MatrixFormat::Full,
                    "lower" => MatrixFormat::Lower,
                    "upper" => MatrixFormat::Upper,
                    _ => return Err(bad_value(self)),
                });
            }
            "mixed-mode order" => return Err(self.err(TouchstoneErrorKind::MixedModeUnsupported)),
            "begin information" => self.section = Section::Information,
            "network data" => {
                if self.seen_network_keyword {
                    return Err(dup(self));
                }
                if self.ports.is_none() {
                    return Err(self.err(TouchstoneErrorKind::MissingKeyword("[Number of Ports]")));
                }
                if self.ports == Some(2) && self.two_port_order.is_none() {
                    return Err(
                        self.err(TouchstoneErrorKind::MissingKeyword("[Two-Port Data Order]"))
                    );
                }
                if self.frequencies_declared.is_none() {
                    return Err(self.err(TouchstoneErrorKind::MissingKeyword(
                        "[Number of Frequencies]",
                    )));
                }
                if self.options.is_none() {
                    return Err(self.err(TouchstoneErrorKind::MissingKeyword("option line (#)")));
                }
                self.seen_network_keyword = true;
                self.section = Section::Network;
            }
            "noise data" => {
                if self.ports != Some(2) {
                    return Err(self.err(TouchstoneErrorKind::NoiseDataNotTwoPort));
                }
                if self.noise_declared.is_none() {
                    return Err(self.err(TouchstoneErrorKind::MissingKeyword(
                        "[Number of Noise Frequencies]",
                    )));
                }
                self.section = Section::Noise;
            }
            "end" => self.section = Section::Ended,
            _ => return Err(self.err(TouchstoneErrorKind::UnknownKeyword(display))),
        }
        Ok(())
    }

    fn option_line(&mut self, rest: &str) -> Result<(), TouchstoneError> {
        if self.options.is_some() {
            if self.is_v2() {
                return Err(self.err(TouchstoneErrorKind::DuplicateOptionLine));
            }
            // Version 1.1: only the first option line counts; later ones are ignored.
            if self.frequencies_hz.is_empty() && self.record.is_empty() {
                return Ok(());
            }
        }
        if !self.is_v2() && (!self.frequencies_hz.is_empty() || !self.record.is_empty()) {
            return Err(self.err(TouchstoneErrorKind::OptionLineAfterData));
        }
        let mut o = Options {
            unit: None,
            kind: None,
            format: None,
            reference_ohm: None,
        };
        let mut toks = rest.split_whitespace();
        while let Some(tok) = toks.next() {
            let lower = tok.to_ascii_lowercase();
            let dup = |what: &str| self.err(TouchstoneErrorKind::DuplicateOption(what.to_string()));
            let unit = match lower.as_str() {
                "hz" => Some(FrequencyUnit::Hz),
                "khz" => Some(FrequencyUnit::KHz),
                "mhz" => Some(FrequencyUnit::MHz),
                "ghz" => Some(FrequencyUnit::GHz),
                _ => None,
            };
            let kind = match lower.as_str() {
                "s" => Some(ParameterKind::S),
                "y" => Some(ParameterKind::Y),
                "z" => Some(ParameterKind::Z),
                "h" => Some(ParameterKind::H),
                "g" => Some(ParameterKind::G),
                _ => None,
            };
            let format = match lower.as_str() {
                "ri" => Some(DataFormat::Ri),
                "ma" => Some(DataFormat::Ma),
                "db" => Some(DataFormat::Db),
                _ => None,
            };
            if let Some(u) = unit {
                if o.unit.replace(u).is_some() {
                    return Err(dup("frequency unit"));
                }
            } else if let Some(k) = kind {
                if o.kind.replace(k).is_some() {
                    return Err(dup("parameter kind"));
                }
            } else if let Some(f) = format {
                if o.format.replace(f).is_some() {
                    return Err(dup("data format"));
                }
            } else if lower == "r" {
                let Some(v) = toks.next() else {
                    return Err(self.err(TouchstoneErrorKind::MissingReference));
                };
                let r = parse_number(v).map_err(|k| self.err(k))?;
                if r <= 0.0 {
                    return Err(self.err(TouchstoneErrorKind::BadReference(r)));
                }
                if o.reference_ohm.replace(r).is_some() {
                    return Err(dup("reference resistance"));
                }
            } else {
                return Err(self.err(TouchstoneErrorKind::UnknownOption(tok.to_string())));
            }
        }
        self.options = Some(o);
        Ok(())
    }

    fn reference_numbers(&mut self, content: &str) -> Result<(), TouchstoneError> {
        let n = self.ports.unwrap_or(0);
        let line = self.line;
        for tok in content.split_whitespace() {
            let r = parse_number(tok).map_err(|k| self.err(k))?;
            if r <= 0.0 {
                return Err(self.err(TouchstoneErrorKind::BadReference(r)));
            }
            let have = self.reference.as_ref().map_or(0, Vec::len);
            if have >= n {
                return Err(self.err_at(
                    Some(line),
                    TouchstoneErrorKind::RecordLength {
                        expected: n,
                        found: have + 1,
                        last_line: 0,
                    },
                ));
            }
            self.reference.get_or_insert_with(Vec::new).push(r);
        }
        if self.reference.as_ref().map_or(0, Vec::len) == n {
            self.reference_pending = false;
        }
        Ok(())
    }

    fn ports_now(&mut self) -> Result<usize, TouchstoneError> {
        if let Some(n) = self.ports {
            return Ok(n);
        }
        let n = ports_from_name(self.name)
            .ok_or_else(|| self.err_at(None, TouchstoneErrorKind::UnknownExtension))?;
        if n == 0 {
            return Err(self.err_at(None, TouchstoneErrorKind::UnknownExtension));
        }
        if n > MAX_PORTS {
            return Err(self.err_at(None, TouchstoneErrorKind::TooManyPorts(n)));
        }
        self.ports = Some(n);
        Ok(n)
    }

    fn record_len(&self, n: usize) -> usize {
        let pairs = match self.matrix_format.unwrap_or(MatrixFormat::Full) {
            MatrixFormat::Full => n * n,
            MatrixFormat::Lower | MatrixFormat::Upper => n * (n + 1) / 2,
        };
        1 + 2 * pairs
    }

    fn numbers(&mut self, content: &str) -> Result<(), TouchstoneError> {
        if self.is_v2() {
            if self.reference_pending {
                return self.reference_numbers(content);
            }
            match self.section {
                Section::Network => {}
                Section::Noise => {
                    self.noise_numbers += content.split_whitespace().count();
                    return Ok(());
                }
                _ => return Err(self.err(TouchstoneErrorKind::NumbersOutsideData)),
            }
        } else {
            if self.section == Section::Noise {
                self.noise_numbers += content.split_whitespace().count();
                return Ok(());
            }
            self.section = Section::Network;
        }
        let n = self.ports_now()?;
        let need = self.record_len(n);
        if self.record.is_empty() {
            self.record_start = self.line;
            // Version 1.1 2-port noise data follows the network data and starts at a
            // frequency not above the last network frequency.
            if !self.is_v2() && n == 2 {
                if let (Some(first), Some(&last_hz)) = (
                    content.split_whitespace().next(),
                    self.frequencies_hz.last(),
                ) {
                    let f = parse_number(first).map_err(|k| self.err(k))?;
                    if f * self.unit().hz() <= last_hz {
                        self.section = Section::Noise;
                        self.noise_numbers += content.split_whitespace().count();
                        return Ok(());
                    }
                }
            }
        }
        for tok in content.split_whitespace() {
            let x = parse_number(tok).map_err(|k| self.err(k))?;
            self.record.push(x);
        }
        if self.record.len() > need {
            return Err(self.err_at(
                Some(self.record_start),
                TouchstoneErrorKind::RecordLength {
                    expected: need,
                    found: self.record.len(),
                    last_line: if self.line != self.record_start {
                        self.line
                    } else {
                        0
                    },
                },
            ));
        }
        if self.record.len() == need {
            self.complete_record(n)?;
        }
        Ok(())
    }

    fn unit(&self) -> FrequencyUnit {
        self.options
            .as_ref()
            .and_then(|o| o.unit)
            .unwrap_or(FrequencyUnit::GHz)
    }

    fn format(&self) -> DataFormat {
        self.options
            .as_ref()
            .and_then(|o| o.format)
            .unwrap_or(DataFormat::Ma)
    }

    fn complete_record(&mut self, n: usize) -> Result<(), TouchstoneError> {
        let at = Some(self.record_start);
        let f_hz = self.record[0] * self.unit().hz();
        if f_hz < 0.0 {
            return Err(self.err_at(at, TouchstoneErrorKind::NegativeFrequency(f_hz)));
        }
        if let Some(&prev) = self.frequencies_hz.last() {
            if f_hz <= prev {
                return Err(self.err_at(
                    at,
                    TouchstoneErrorKind::NotIncreasing {
                        previous_hz: prev,
                        found_hz: f_hz,
                    },
                ));
            }
        }
        if let Some(declared) = self.frequencies_declared {
            if self.frequencies_hz.len() >= declared {
                return Err(self.err_at(
                    at,
                    TouchstoneErrorKind::FrequencyCountMismatch {
                        declared,
                        found: declared + 1,
                    },
                ));
            }
        }
        let fmt = self.format();
        let vals: Vec<Complex64> = self.record[1..]
            .chunks_exact(2)
            .map(|p| fmt.to_complex(p[0], p[1]))
            .collect();
        let base = self.data.len();
        self.data.resize(base + n * n, Complex64::new(0.0, 0.0));
        let m = &mut self.data[base..];
        match self.matrix_format.unwrap_or(MatrixFormat::Full) {
            MatrixFormat::Full if n == 2 => {
                let order = self.two_port_order.unwrap_or(TwoPortOrder::Order21_12);
                let (s12, s21) = match order {
                    TwoPortOrder::Order21_12 => (vals[2], vals[1]),
                    TwoPortOrder::Order12_21 => (vals[1], vals[2]),
                };
                m.copy_from_slice(&[vals[0], s12, s21, vals[3]]);
            }
            MatrixFormat::Full => m.copy_from_slice(&vals),
            MatrixFormat::Lower => {
                let mut it = vals.iter();
                for i in 0..n {
                    for j in 0..=i {
                        let v = *it.next().unwrap_or(&Complex64::new(0.0, 0.0));
                        m[i * n + j] = v;
                        m[j * n + i] = v;
                    }
                }
            }
            MatrixFormat::Upper => {
                let mut it = vals.iter();
                for i in 0..n {
                    for j in i..n {
                        let v = *it.next().unwrap_or(&Complex64::new(0.0, 0.0));
                        m[i * n + j] = v;
                        m[j * n + i] = v;
                    }
                }
            }
        }
        self.frequencies_hz.push(f_hz);
        self.record.clear();
        Ok(())
    }

    fn end_record(&self) -> Result<(), TouchstoneError> {
        if self.record.is_empty() {
            return Ok(());
        }
        let n = self.ports.unwrap_or(1);
        Err(self.err_at(
            Some(self.record_start),
            TouchstoneErrorKind::RecordLength {
                expected: self.record_len(n),
                found: self.record.len(),
                last_line: 0,
            },
        ))
    }

    fn finish(self) -> Result<Touchstone, TouchstoneError> {
        self.end_record()?;
        if self.reference_pending {
            return Err(self.err_at(
                None,
                TouchstoneErrorKind::RecordLength {
                    expected: self.ports.unwrap_or(0),
                    found: self.reference.as_ref().map_or(0, Vec::len),
                    last_line: 0,
                },
            ));
        }
        if self.is_v2() && self.options.is_none() {
            return Err(self.err_at(None, TouchstoneErrorKind::MissingKeyword("option line (#)")));
        }
        if self.is_v2() && !self.seen_network_keyword {
            return Err(self.err_at(None, TouchstoneErrorKind::MissingKeyword("[Network Data]")));
        }
        if self.frequencies_hz.is_empty() {
            return Err(self.err_at(None, TouchstoneErrorKind::NoData));
        }
        if let Some(declared) = self.frequencies_declared {
            if declared != self.frequencies_hz.len() {
                return Err(self.err_at(
                    None,
                    TouchstoneErrorKind::FrequencyCountMismatch {
                        declared,
                        found: self.frequencies_hz.len(),
                    },
                ));
            }
        }
        let ports = self.ports.unwrap_or(1);
        let opt_r = self
            .options
            .as_ref()
            .and_then(|o| o.reference_ohm)
            .unwrap_or(50.0);
        let reference_ohm = self.reference.clone().unwrap_or_else(|| vec![opt_r; ports]);
        let noise_records = if self.noise_numbers > 0 {
            // A noise record is five numbers: f, NFmin, |Γopt|, ∠Γopt, Rn.
            self.noise_numbers.div_ceil(5)
        } else {
            0
        };
        Ok(Touchstone {
            name: self.name.to_string(),
            version: self.version.unwrap_or(Version::V1_1),
            ports,
            unit: self.unit(),
            kind: self
                .options
                .as_ref()
                .and_then(|o| o.kind)
                .unwrap_or(ParameterKind::S),
            format: self.format(),
            reference_ohm,
            frequencies_hz: self.frequencies_hz,
            data: self.data,
            noise_records,
        })
    }
}

/// Lower-cased keyword name with single spaces, and the lower-cased value after `]`.
fn keyword_name(content: &str) -> (String, String) {
    let inner = content.strip_prefix('[').unwrap_or(content);
    let (name, value) = inner.split_once(']').unwrap_or((inner, ""));
    let name = name
        .split_whitespace()
        .collect::<Vec<_>>()
        .join(" ")
        .to_ascii_lowercase();
    (name, value.trim().to_ascii_lowercase())
}

/// The keyword as written, for messages.
fn keyword_display(content: &str) -> String {
    let inner = content.strip_prefix('[').unwrap_or(content);
    inner
        .split_once(']')
        .map_or(inner, |(n, _)| n)
        .trim()
        .to_string()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn parse(text: &str, name: &str) -> Touchstone {
        Touchstone::parse_str(text, name).unwrap()
    }

    fn kind(text: &str, name: &str) -> (Option<usize>, TouchstoneErrorKind) {
        let e = Touchstone::parse_str(text, name).unwrap_err();
        (e.line, e.kind)
    }

    fn close(a: Complex64, b: Complex64) -> bool {
        (a - b).norm() <= 1e-12 * (1.0 + b.norm())
    }

    #[test]
    fn parameter_names_parse() {
        assert_eq!("S21".parse(), Ok(Parameter::S21));
        assert_eq!("s11".parse(), Ok(Parameter::S11));
        assert_eq!(" S12 ".parse(), Ok(Parameter::S12));
        assert_eq!("S22".parse(), Ok(Parameter::S22));
        assert_eq!("S3,1".parse(), Ok(Parameter::new(3, 1)));
        assert_eq!("S10_12".parse(), Ok(Parameter::new(10, 12)));
        for bad in ["S", "S0", "S01", "S2", "S123", "Z21", "21", "S+1,2", "Sé1"] {
            assert!(bad.parse::<Parameter>().is_err(), "{bad}");
        }
        assert_eq!(Parameter::S21.to_string(), "S21");
        assert_eq!(Parameter::new(10, 1).to_string(), "S10,1");
        assert_eq!(Parameter::default_for(1), Parameter::S11);
        assert_eq!(Parameter::default_for(2), Parameter::S21);
    }

    #[test]
    fn ports_from_extension() {
        assert_eq!(ports_from_name("a.s1p"), Some(1));
        assert_eq!(ports_from_name("dir/b.S2P"), Some(2));
        assert_eq!(ports_from_name("c.s12p"), Some(12));
        assert_eq!(ports_from_name("c.ts"), None);
        assert_eq!(ports_from_name("c.sp"), None);
        assert_eq!(ports_from_name("s2p"), None);
    }

    #[test]
    fn defaults_without_option_line() {
        // Touchstone 1.1: no option line means GHz, S, MA, R 50.
        let t = parse("1 0.5 90\n2 0.5 180\n", "x.s1p");
        assert_eq!(t.unit(), FrequencyUnit::GHz);
        assert_eq!(t.kind(), ParameterKind::S);
        assert_eq!(t.format(), DataFormat::Ma);
        assert_eq!(t.reference_ohm(), &[50.0]);
        assert_eq!(t.frequencies_hz(), &[1e9, 2e9]);
        let s = t.parameter(Parameter::S11).unwrap();
        assert!(close(s[0], Complex64::new(0.0, 0.5)));
        assert!(close(s[1], Complex64::new(-0.5, 0.0)));
    }

    #[test]
    fn empty_option_line_means_defaults() {
        let t = parse("#\n1 1 0\n", "x.s1p");
        assert_eq!(t.format(), DataFormat::Ma);
        assert_eq!(t.unit(), FrequencyUnit::GHz);
    }

    #[test]
    fn option_fields_any_order_any_case() {
        for line in [
            "# MHz S RI R 75",
            "# R 75 RI S MHz",
            "#ri mhz r 75 s",
            "#  s  R  75.0  MhZ  Ri  ",
            "# RI MHz R 75",
        ] {
            let t = parse(&format!("{line}\n10 0.25 -0.5\n"), "x.s1p");
            assert_eq!(t.unit(), FrequencyUnit::MHz, "{line}");
            assert_eq!(t.format(), DataFormat::Ri, "{line}");
            assert_eq!(t.kind(), ParameterKind::S, "{line}");
            assert_eq!(t.reference_ohm(), &[75.0], "{line}");
            assert_eq!(t.frequencies_hz(), &[10e6]);
            let s = t.parameter(Parameter::S11).unwrap();
            assert_eq!(s[0], Complex64::new(0.25, -0.5));
        }
    }

    #[test]
    fn every_unit() {
        for (u, hz) in [("Hz", 1.0), ("kHz", 1e3), ("MHz", 1e6), ("GHz", 1e9)] {
            let t = parse(&format!("# {u} RI\n2.5 1 0\n"), "x.s1p");
            assert_eq!(t.frequencies_hz(), &[2.5 * hz], "{u}");
        }
    }

    #[test]
    fn every_kind() {
        for (k, want) in [
            ("S", ParameterKind::S),
            ("Y", ParameterKind::Y),
            ("Z", ParameterKind::Z),
            ("H", ParameterKind::H),
            ("G", ParameterKind::G),
        ] {
            let t = parse(&format!("# {k} RI\n1 1 0 0 0 0 0 1 0\n"), "x.s2p");
            assert_eq!(t.kind(), want);
        }
    }

    #[test]
    fn every_format() {
        // RI: the pair as is. MA: 2∠30°. DB: 20·log10(2) = 6.0206 dB at −45°.
        let r = parse("# RI\n1 0.3 -0.4\n", "x.s1p");
        assert_eq!(
            r.parameter(Parameter::S11).unwrap()[0],
            Complex64::new(0.3, -0.4)
        );
        let m = parse("# MA\n1 2 30\n", "x.s1p");
        let want = Complex64::new(
            2.0 * 30f64.to_radians().cos(),
            2.0 * 30f64.to_radians().sin(),
        );
        assert!(close(m.parameter(Parameter::S11).unwrap()[0], want));
        let db = 20.0 * 2f64.log10();
        let d = parse(&format!("# dB\n1 {db} -45\n"), "x.s1p");
        let v = d.parameter(Parameter::S11).unwrap()[0];
        assert!((v.norm() - 2.0).abs() < 1e-12);
        assert!((v.arg().to_degrees() + 45.0).abs() < 1e-12);
        // −20 dB is a magnitude of 0.1 (definition of the decibel for a field quantity).
        let d = parse("# DB\n1 -20 180\n", "x.s1p");
        assert!(close(
            d.parameter(Parameter::S11).unwrap()[0],
            Complex64::new(-0.1, 0.0)
        ));
    }

    #[test]
    fn two_port_columns_are_s11_s21_s12_s22() {
        let t = parse("# GHz S RI\n1 11 0 21 0 12 0 22 0\n", "x.s2p");
        let m = t.matrix(0).unwrap();
        assert_eq!(
            m.iter().map(|c| c.re).collect::<Vec<_>>(),
            vec![11.0, 12.0, 21.0, 22.0]
        );
        assert_eq!(t.parameter(Parameter::S21).unwrap()[0].re, 21.0);
        assert_eq!(t.parameter(Parameter::S12).unwrap()[0].re, 12.0);
        assert_eq!(t.parameter(Parameter::S22).unwrap()[0].re, 22.0);
        assert!(t.matrix(1).is_none());
    }

    #[test]
    fn comments_anywhere() {
        let text = "! header comment\n\
                    ! another\n\
                    # MHz S RI R 50 ! trailing on the option line\n\
                    !\n\
                    1 0.1 0.2 ! trailing on data\n   ! indented comment\n\
                    2 0.3 0.4!no space\n\
                    \n\
                    3 0.5 0.6\n\
                    ! closing comment";
        let t = parse(text, "x.s1p");
        assert_eq!(t.frequencies_hz(), &[1e6, 2e6, 3e6]);
        assert_eq!(
            t.parameter(Parameter::S11).unwrap()[1],
            Complex64::new(0.3, 0.4)
        );
    }

    #[test]
    fn records_continue_over_lines() {
        let text = "# Hz S RI\n\
                    1 11 0 21 0\n   12 0\n22 0\n\
                    2\n11 1 21 1 12 1 22 1\n\
                    3 11 2 ! comment in the middle\n\n21 2 12 2 22 2\n";
        let t = parse(text, "x.s2p");
        assert_eq!(t.frequencies_hz(), &[1.0, 2.0, 3.0]);
        assert_eq!(
            t.parameter(Parameter::S21).unwrap()[2],
            Complex64::new(21.0, 2.0)
        );
        assert_eq!(
            t.parameter(Parameter::S12).unwrap()[0],
            Complex64::new(12.0, 0.0)
        );
    }

    #[test]
    fn three_port_row_major_over_lines() {
        // Version 1.1 writes each matrix row on its own line(s).
        let text = "# Hz S RI\n\
                    1 11 0 12 0 13 0\n  21 0 22 0 23 0\n  31 0 32 0 33 0\n\
                    2 11 1 12 1 13 1\n  21 1 22 1 23 1\n  31 1 32 1 33 1\n";
        let t = parse(text, "x.s3p");
        assert_eq!(t.ports(), 3);
        assert_eq!(
            t.parameter(Parameter::new(3, 2)).unwrap()[1],
            Complex64::new(32.0, 1.0)
        );
        assert_eq!(
            t.parameter(Parameter::new(1, 3)).unwrap()[0],
            Complex64::new(13.0, 0.0)
        );
        let e = t.parameter(Parameter::new(4, 1)).unwrap_err();
        assert!(matches!(
            e.kind,
            TouchstoneErrorKind::PortOutOfRange { ports: 3, .. }
        ));
    }

    #[test]
    fn v1_noise_data_is_skipped() {
        let text = "# GHz S MA R 50\n\
                    1 0.1 0 0.9 0 0.01 0 0.2 0\n\
                    2 0.1 0 0.8 0 0.01 0 0.2 0\n\
                    3 0.1 0 0.7 0 0.01 0 0.2 0\n\
                    ! noise parameters\n\
                    1 0.8 0.3 45 0.2\n\
                    2 0.9 0.3 50 0.2\n";
        let t = parse(text, "amp.s2p");
        assert_eq!(t.frequencies_hz(), &[1e9, 2e9, 3e9]);
        assert_eq!(t.noise_records(), 2);
    }

    #[test]
    fn v1_noise_may_start_at_the_last_frequency() {
        let text = "1 0.1 0 0.9 0 0.01 0 0.2 0\n2 0.1 0 0.8 0 0.01 0 0.2 0\n2 0.8 0.3 45 0.2\n";
        let t = parse(text, "amp.s2p");
        assert_eq!(t.frequencies_hz().len(), 2);
        assert_eq!(t.noise_records(), 1);
    }

    #[test]
    fn one_port_going_down_is_an_error() {
        let (line, k) = kind("1 0.1 0\n2 0.1 0\n1.5 0.1 0\n", "x.s1p");
        assert_eq!(line, Some(3));
        assert!(matches!(k, TouchstoneErrorKind::NotIncreasing { .. }));
    }

    #[test]
    fn later_v1_option_lines_before_data_are_ignored() {
        let t = parse("# MHz RI\n# GHz MA\n1 1 0\n", "x.s1p");
        assert_eq!(t.unit(), FrequencyUnit::MHz);
    }

    const V2: &str = "! a version 2.0 file\n\
        [Version] 2.0\n\
        # MHz S RI R 50\n\
        [Number of Ports] 2 ! trailing comment on a keyword\n\
        [Two-Port Data Order] 12_21\n\
        [Number of Frequencies] 2\n\
        [Number of Noise Frequencies] 1\n\
        [Reference] 50 75\n\
        [Matrix Format] Full\n\
        [Begin Information]\n\
        anything here 1 2 3 [not a keyword]\n\
        [End Information]\n\
        [Network Data]\n\
        100 11 0 12 0 21 0 22 0\n\
        200 11 1\n 12 1 21 1 22 1\n\
        [Noise Data]\n\
        100 0.8 0.3 45 0.2\n\
        [End]\n\
        text after the end is ignored\n";

    #[test]
    fn v2_keywords() {
        let t = parse(V2, "x.ts");
        assert_eq!(t.version(), Version::V2_0);
        assert_eq!(t.ports(), 2);
        assert_eq!(t.reference_ohm(), &[50.0, 75.0]);
        assert_eq!(t.frequencies_hz(), &[100e6, 200e6]);
        // 12_21: the second pair is S12.
        assert_eq!(t.parameter(Parameter::S12).unwrap()[0].re, 12.0);
        assert_eq!(
            t.parameter(Parameter::S21).unwrap()[1],
            Complex64::new(21.0, 1.0)
        );
        assert_eq!(t.noise_records(), 1);
    }

    #[test]
    fn v2_order_21_12_and_case_insensitive_keywords() {
        let text = V2
            .replace(
                "[Two-Port Data Order] 12_21",
                "[two-port  data ORDER] 21_12",
            )
            .replace("[Network Data]", "[NETWORK DATA]");
        let t = parse(&text, "x.s2p");
        assert_eq!(t.parameter(Parameter::S21).unwrap()[0].re, 12.0);
        assert_eq!(t.parameter(Parameter::S12).unwrap()[0].re, 21.0);
    }

    #[test]
    fn v2_reference_over_lines_and_lower_upper_matrix() {
        let text = "[Version] 2.0\n# Hz S RI\n[Number of Ports] 3\n[Number of Frequencies] 1\n\
                    [Reference]\n50\n60 70\n[Matrix Format] Lower\n[Network Data]\n\
                    1 11 0\n21 0 22 0\n31 0 32 0 33 0\n[End]\n";
        let t = parse(text, "x.ts");
        assert_eq!(t.reference_ohm(), &[50.0, 60.0, 70.0]);
        assert_eq!(t.parameter(Parameter::new(1, 3)).unwrap()[0].re, 31.0);
        assert_eq!(t.parameter(Parameter::new(3, 1)).unwrap()[0].re, 31.0);
        let up = text.replace("Lower", "Upper").replace(
            "1 11 0\n21 0 22 0\n31 0 32 0 33 0",
            "1 11 0 12 0 13 0\n22 0 23 0\n33 0",
        );
        let t = parse(&up, "x.ts");
        assert_eq!(t.parameter(Parameter::new(3, 2)).unwrap()[0].re, 23.0);
        assert_eq!(t.parameter(Parameter::new(1, 3)).unwrap()[0].re, 13.0);
    }

    #[test]
    fn v2_one_port_without_reference_uses_option_r() {
        let text = "[Version] 2.0\n# GHz S DB R 25\n[Number of Ports] 1\n\
                    [Number of Frequencies] 2\n[Network Data]\n1 0 0\n2 -6 90\n[End]\n";
        let t = parse(text, "x.ts");
        assert_eq!(t.reference_ohm(), &[25.0]);
        assert_eq!(t.frequencies_hz(), &[1e9, 2e9]);
    }

    #[test]
    fn option_line_errors() {
        let e = |s: &str| kind(&format!("{s}\n1 1 0\n"), "x.s1p").1;
        assert_eq!(
            e("# GHz XX"),
            TouchstoneErrorKind::UnknownOption("XX".into())
        );
        assert_eq!(e("# GHz R"), TouchstoneErrorKind::MissingReference);
        assert_eq!(e("# R abc"), TouchstoneErrorKind::BadNumber("abc".into()));
        assert_eq!(e("# R -5"), TouchstoneErrorKind::BadReference(-5.0));
        assert_eq!(
            e("# GHz MHz"),
            TouchstoneErrorKind::DuplicateOption("frequency unit".into())
        );
        assert_eq!(
            e("# S Z"),
            TouchstoneErrorKind::DuplicateOption("parameter kind".into())
        );
        assert_eq!(
            e("# RI MA"),
            TouchstoneErrorKind::DuplicateOption("data format".into())
        );
        assert_eq!(
            e("# R 50 R 75"),
            TouchstoneErrorKind::DuplicateOption("reference resistance".into())
        );
        let (line, k) = kind("1 1 0\n# MHz\n", "x.s1p");
        assert_eq!(
            (line, k),
            (Some(2), TouchstoneErrorKind::OptionLineAfterData)
        );
    }

    #[test]
    fn record_length_errors_name_the_line() {
        let text = "! c\n# RI\n1 1 0 0 0 0 0 1 0\n2 1 0 0 0 0 0 1\n";
        let e = Touchstone::parse_str(text, "file.s2p").unwrap_err();
        assert_eq!(e.to_string(), "file.s2p:4: expected 9 numbers, found 8");
        let text = "# RI\n1 1 0 0 0 0 0 1\n2 1 0 0 0 0 0 1 0\n";
        let e = Touchstone::parse_str(text, "file.s2p").unwrap_err();
        assert_eq!(
            e.to_string(),
            "file.s2p:2: expected 9 numbers, found 17 (record ends at line 3)"
        );
        let (line, k) = kind("# RI\n1 1 0 5\n", "x.s1p");
        assert_eq!(line, Some(2));
        assert_eq!(
            k,
            TouchstoneErrorKind::RecordLength {
                expected: 3,
                found: 4,
                last_line: 0
            }
        );
    }

    #[test]
    fn number_errors() {
        assert_eq!(
            kind("# RI\n1 0.5 x\n", "x.s1p"),
            (Some(2), TouchstoneErrorKind::BadNumber("x".into()))
        );
        assert_eq!(
            kind("# RI\n1 nan 0\n", "x.s1p"),
            (Some(2), TouchstoneErrorKind::NonFiniteNumber("nan".into()))
        );
        assert_eq!(
            kind("# RI\n1 inf 0\n", "x.s1p").1,
            TouchstoneErrorKind::NonFiniteNumber("inf".into())
        );
        assert_eq!(
            kind("# RI\n1,0 5 0\n", "x.s1p").1,
            TouchstoneErrorKind::BadNumber("1,0".into())
        );
        assert!(matches!(
            kind("# RI\n-1 1 0\n", "x.s1p"),
            (Some(2), TouchstoneErrorKind::NegativeFrequency(_))
        ));
        assert!(matches!(
            kind("# RI\n1 1 0\n1 1 0\n", "x.s1p"),
            (Some(3), TouchstoneErrorKind::NotIncreasing { .. })
        ));
    }

    #[test]
    fn file_level_errors() {
        assert_eq!(
            kind("1 1 0\n", "x.txt"),
            (None, TouchstoneErrorKind::UnknownExtension)
        );
        assert_eq!(
            kind("1 1 0\n", "x.s0p"),
            (None, TouchstoneErrorKind::UnknownExtension)
        );
        assert_eq!(
            kind("! only\n# RI\n", "x.s1p"),
            (None, TouchstoneErrorKind::NoData)
        );
        assert_eq!(
            kind("1 1 0\n", "x.s65p"),
            (None, TouchstoneErrorKind::TooManyPorts(65))
        );
        let e = Touchstone::parse_str("", "empty.s1p").unwrap_err();
        assert_eq!(e.to_string(), "empty.s1p: no network data");
    }

    #[test]
    fn keyword_errors() {
        let v2 = |s: &str| kind(s, "x.ts");
        assert!(matches!(
            kind("[Number of Ports] 1\n", "x.s1p"),
            (Some(1), TouchstoneErrorKind::UnknownKeyword(_))
        ));
        assert_eq!(
            v2("[Version] 3.0\n"),
            (
                Some(1),
                TouchstoneErrorKind::UnsupportedVersion("3.0".into())
            )
        );
        assert_eq!(
            v2("# GHz\n[Version] 2.0\n"),
            (Some(2), TouchstoneErrorKind::VersionNotFirst)
        );
        let head = "[Version] 2.0\n# GHz S RI\n";
        assert_eq!(
            v2(&format!("{head}[Bogus] 1\n")),
            (Some(3), TouchstoneErrorKind::UnknownKeyword("Bogus".into()))
        );
        assert_eq!(
            v2(&format!("{head}# MHz\n")),
            (Some(3), TouchstoneErrorKind::DuplicateOptionLine)
        );
        assert_eq!(
            v2(&format!("{head}[Number of Ports] 1\n[Number of Ports] 1\n")),
            (
                Some(4),
                TouchstoneErrorKind::DuplicateKeyword("Number of Ports".into())
            )
        );
        assert!(matches!(
            v2(&format!("{head}[Number of Ports] two\n")),
            (Some(3), TouchstoneErrorKind::BadKeywordValue { .. })
        ));
        assert!(matches!(
            v2(&format!(
                "{head}[Number of Ports] 2\n[Two-Port Data Order] 11_22\n"
            )),
            (Some(4), TouchstoneErrorKind::BadKeywordValue { .. })
        ));
        assert!(matches!(
            v2(&format!("{head}[Matrix Format] Diagonal\n")),
            (Some(3), TouchstoneErrorKind::BadKeywordValue { .. })
        ));
        assert_eq!(
            v2(&format!("{head}[Number of Ports] 99\n")),
            (Some(3), TouchstoneErrorKind::TooManyPorts(99))
        );
        assert_eq!(
            v2(&format!("{head}[Mixed-Mode Order] D2,1 C2,1\n")),
            (Some(3), TouchstoneErrorKind::MixedModeUnsupported)
        );
        assert_eq!(
            v2(&format!("{head}[Reference] 50\n")),
            (
                Some(3),
                TouchstoneErrorKind::MissingKeyword("[Number of Ports]")
            )
        );
        assert_eq!(
            v2(&format!(
                "{head}[Number of Ports] 2\n[Number of Frequencies] 1\n[Network Data]\n"
            )),
            (
                Some(5),
                TouchstoneErrorKind::MissingKeyword("[Two-Port Data Order]")
            )
        );
        assert_eq!(
            v2(&format!("{head}[Number of Ports] 1\n[Network Data]\n")),
            (
                Some(4),
                TouchstoneErrorKind::MissingKeyword("[Number of Frequencies]")
            )
        );
        assert_eq!(
            v2(&format!("{head}[Number of Ports] 1\n1 1 0\n")),
            (Some(4), TouchstoneErrorKind::NumbersOutsideData)
        );
        assert_eq!(
            v2(&format!(
                "{head}[Number of Ports] 1\n[Number of Frequencies] 1\n"
            )),
            (None, TouchstoneErrorKind::MissingKeyword("[Network Data]"))
        );
        assert_eq!(
            v2("[Version] 2.0\n[Number of Ports] 1\n[Number of Frequencies] 1\n[Network Data]\n"),
            (
                Some(4),
                TouchstoneErrorKind::MissingKeyword("option line (#)")
            )
        );
        let one = format!("{head}[Number of Ports] 1\n[Number of Frequencies] 2\n[Network Data]\n");
        assert_eq!(
            v2(&format!("{one}1 1 0\n[End]\n")),
            (
                None,
                TouchstoneErrorKind::FrequencyCountMismatch {
                    declared: 2,
                    found: 1
                }
            )
        );
        assert_eq!(
            v2(&format!("{one}1 1 0\n2 1 0\n3 1 0\n")),
            (
                Some(8),
                TouchstoneErrorKind::FrequencyCountMismatch {
                    declared: 2,
                    found: 3
                }
            )
        );
        assert_eq!(
            v2(&format!("{one}1 1 0\n2 1 0\n[Noise Data]\n")),
            (Some(8), TouchstoneErrorKind::NoiseDataNotTwoPort)
        );
        assert!(matches!(
            v2(&format!("{one}1 1\n[End]\n")),
            (
                Some(6),
                TouchstoneErrorKind::RecordLength {
                    expected: 3,
                    found: 2,
                    ..
                }
            )
        ));
        assert!(matches!(
            v2(&format!(
                "{head}[Number of Ports] 2\n[Reference] 50 60 70\n"
            )),
            (
                Some(4),
                TouchstoneErrorKind::RecordLength {
                    expected: 2,
                    found: 3,
                    ..
                }
            )
        ));
    }

    fn uniform_1port(freqs: &[f64]) -> String {
        let mut s = String::from("# Hz S RI\n");
        for (k, f) in freqs.iter().enumerate() {
            s.push_str(&format!("{f} {} {}\n", k as f64, -(k as f64)));
        }
        s
    }

    #[test]
    fn uniform_file_becomes_a_grid() {
        let t = parse(&uniform_1port(&[1e6, 2e6, 3e6, 4e6]), "x.s1p");
        let g = t.to_sweep(Parameter::S11, Spacing::RequireUniform).unwrap();
        assert_eq!(g.grid.points(), 4);
        assert_eq!(g.grid.start_hz(), 1e6);
        assert_eq!(g.grid.step_hz(), 1e6);
        assert_eq!(g.values[3], Complex32::new(3.0, -3.0));
        assert!(g.warning.is_none());
        // Within tolerance: 0.05 % of a step off.
        let t = parse(&uniform_1port(&[1e6, 2.0005e6, 3e6, 4e6]), "x.s1p");
        assert!(t.to_sweep(Parameter::S11, Spacing::RequireUniform).is_ok());
    }

    #[test]
    fn non_uniform_file_is_refused_or_resampled() {
        let t = parse(&uniform_1port(&[0.0, 1.0, 3.0, 4.0]), "x.s1p");
        let e = t
            .to_sweep(Parameter::S11, Spacing::RequireUniform)
            .unwrap_err();
        assert_eq!(e.line, None);
        match e.kind {
            TouchstoneErrorKind::NotUniform {
                index,
                deviation_hz,
                tolerance_hz,
                step_hz,
            } => {
                // Uniform grid 0, 4/3, 8/3, 4: point 1 is 1/3 Hz off.
                assert!(index == 1 || index == 2);
                assert!((deviation_hz - 1.0 / 3.0).abs() < 1e-12);
                assert!((step_hz - 4.0 / 3.0).abs() < 1e-12);
                assert!((tolerance_hz - 4.0 / 3.0 * 1e-3).abs() < 1e-15);
            }
            k => panic!("{k:?}"),
        }
        assert!(e.to_string().contains("not uniformly spaced"));
        assert!(e.to_string().contains("tolerance"));
        let r = t.to_sweep(Parameter::S11, Spacing::Resample).unwrap();
        assert!(r.warning.as_deref().unwrap().contains("resampled"));
        assert_eq!(r.grid.points(), 4);
        // S11 = k − jk at f = 0, 1, 3, 4 (k = 0..3): at 4/3 Hz linear interpolation between
        // (1, 1−1j) and (3, 2−2j) gives 1 + 1/6; at 8/3 it gives 1 + 5/6.
        let want = [0.0, 1.0 + 1.0 / 6.0, 1.0 + 5.0 / 6.0, 3.0];
        for (v, w) in r.values.iter().zip(want) {
            assert!((v.re - w as f32).abs() < 1e-6 && (v.im + w as f32).abs() < 1e-6);
        }
    }

    #[test]
    fn sweep_needs_s_parameters_and_two_points() {
        let t = parse("# Z RI\n1 1 0\n2 1 0\n", "x.s1p");
        assert_eq!(
            t.to_sweep(Parameter::S11, Spacing::RequireUniform)
                .unwrap_err()
                .kind,
            TouchstoneErrorKind::NotScattering(ParameterKind::Z)
        );
        let t = parse("# RI\n1 1 0\n", "x.s1p");
        assert_eq!(
            t.to_sweep(Parameter::S11, Spacing::RequireUniform)
                .unwrap_err()
                .kind,
            TouchstoneErrorKind::Grid(GridError::TooFewPoints)
        );
        let t = parse("# RI\n1 1 0\n2 1 0\n", "x.s1p");
        assert!(matches!(
            t.to_sweep(Parameter::S21, Spacing::RequireUniform)
                .unwrap_err()
                .kind,
            TouchstoneErrorKind::PortOutOfRange { ports: 1, .. }
        ));
    }
}
