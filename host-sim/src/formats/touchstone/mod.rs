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
//!
//! Files: `error.rs` (what can be wrong, with the line), `parser/` (the reader: the option
//! line, the version 2.0 keywords, the data lines, the byte-level reading of a file and of
//! only some of its parameters), `picked.rs` (reading a file from its bytes, and only the
//! parameters wanted: [`Touchstone::read_sweeps`]), `sweep.rs` (one parameter on a uniform
//! grid for the gate), and here the file's description and its accessors.

mod error;
#[cfg(test)]
mod fast_tests;
mod parser;
mod picked;
mod sweep;
#[cfg(test)]
mod tests;
mod write;

use std::fmt;
use std::str::FromStr;

use num_complex::Complex64;

pub use error::{ParseParameterError, TouchstoneError, TouchstoneErrorKind};
pub use sweep::{GateSweep, Spacing};
pub use write::s21_two_port_text;

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
    /// Parses file text. `name` is used in errors and, for version 1.1, its extension
    /// `.s<N>p` gives the port count.
    pub fn parse_str(text: &str, name: &str) -> Result<Self, TouchstoneError> {
        parser::Parser::new(name).run(text)
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
}
