//! The fast way in: a file read from its bytes (no text copy of the file), and only the
//! parameters wanted parsed ([`Touchstone::read_sweeps`]); see `parser/bytes.rs` and
//! `parser/pick.rs`. The results and the errors are those of [`Touchstone::parse_str`] on
//! the file read lossily as UTF-8, and of [`Touchstone::to_sweep`] after it, bit for bit
//! (`fast_tests.rs`).

use std::path::Path;

use super::parser::Parser;
use super::sweep::{file_error, uniform_sweep};
use super::{
    GateSweep, Parameter, ParameterKind, Spacing, Touchstone, TouchstoneError, TouchstoneErrorKind,
};
use crate::formats::files::read_capped;
use crate::limits::MAX_TOUCHSTONE_BYTES;

/// The file's bytes, or the error naming it (once): a folder, and a file over
/// [`MAX_TOUCHSTONE_BYTES`], are refused before a byte is read.
fn file_bytes(path: &Path, name: &str) -> Result<Vec<u8>, TouchstoneError> {
    read_capped(path, MAX_TOUCHSTONE_BYTES, "Touchstone file")
        .map_err(|e| file_error(name, TouchstoneErrorKind::Io(e.reason())))
}

impl Touchstone {
    /// Reads and parses a file. Errors name the path as given.
    ///
    /// Comments may hold non-UTF-8 bytes (degree or ohm signs in a legacy code page); the
    /// file is read as [`Touchstone::parse_str`] reads `String::from_utf8_lossy` of it
    /// (numbers and keywords are ASCII, so nothing that matters is lost).
    pub fn read(path: &Path) -> Result<Self, TouchstoneError> {
        let name = path.display().to_string();
        let bytes = file_bytes(path, &name)?;
        Self::parse_bytes(&bytes, &name)
    }

    /// Parses a file's bytes: the same as [`Touchstone::parse_str`] on
    /// `String::from_utf8_lossy(bytes)`, without the copy.
    pub fn parse_bytes(bytes: &[u8], name: &str) -> Result<Self, TouchstoneError> {
        Parser::new(name).run_bytes(bytes)?.finish()
    }

    /// Reads a file and takes `parameters` from it (`None`: S21 of a file of two or more
    /// ports, S11 of a 1-port file), each on a uniform grid: the same sweeps and errors as
    /// [`Touchstone::read`] followed by [`Touchstone::to_sweep`] of each, faster, as the
    /// numbers of the other parameters are checked but not converted.
    pub fn read_sweeps(
        path: &Path,
        parameters: Option<&[Parameter]>,
        spacing: Spacing,
    ) -> Result<Vec<GateSweep>, TouchstoneError> {
        let name = path.display().to_string();
        let bytes = file_bytes(path, &name)?;
        Self::parse_sweeps(&bytes, &name, parameters, spacing)
    }

    /// [`Touchstone::read_sweeps`] of one parameter (`None`: the usual one for the port
    /// count).
    pub fn read_sweep(
        path: &Path,
        parameter: Option<Parameter>,
        spacing: Spacing,
    ) -> Result<GateSweep, TouchstoneError> {
        let asked = parameter.as_ref().map(std::slice::from_ref);
        Self::read_sweeps(path, asked, spacing)?
            .into_iter()
            .next()
            .ok_or_else(|| file_error(&path.display().to_string(), TouchstoneErrorKind::NoData))
    }

    /// [`Touchstone::read_sweeps`] of a file's bytes; `name` as for
    /// [`Touchstone::parse_str`].
    pub fn parse_sweeps(
        bytes: &[u8],
        name: &str,
        parameters: Option<&[Parameter]>,
        spacing: Spacing,
    ) -> Result<Vec<GateSweep>, TouchstoneError> {
        let picked = Parser::picking(name, parameters)
            .run_bytes(bytes)?
            .finish_picked()?;
        picked
            .parameters
            .iter()
            .zip(picked.columns)
            .map(|(&parameter, values)| {
                if picked.kind != ParameterKind::S {
                    return Err(file_error(
                        name,
                        TouchstoneErrorKind::NotScattering(picked.kind),
                    ));
                }
                let (o, i) = (
                    usize::from(parameter.out_port),
                    usize::from(parameter.in_port),
                );
                if o == 0 || i == 0 || o > picked.ports || i > picked.ports {
                    return Err(file_error(
                        name,
                        TouchstoneErrorKind::PortOutOfRange {
                            parameter,
                            ports: picked.ports,
                        },
                    ));
                }
                uniform_sweep(name, &picked.frequencies_hz, values, parameter, spacing)
            })
            .collect()
    }
}
