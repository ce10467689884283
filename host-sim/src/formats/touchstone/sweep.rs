//! Conversion to a sweep: one parameter of a file at every frequency, and on a uniform
//! [`Grid`] in single precision for the gate (checked for uniform spacing, or resampled).

use num_complex::Complex64;
use sweepgate::grid::Grid;
use sweepgate::Complex32;

use super::{
    Parameter, ParameterKind, Touchstone, TouchstoneError, TouchstoneErrorKind,
    UNIFORM_TOLERANCE_OF_STEP,
};

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

impl Touchstone {
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
        uniform_sweep(&self.name, &self.frequencies_hz, values, parameter, spacing)
    }

    fn error(&self, kind: TouchstoneErrorKind) -> TouchstoneError {
        file_error(&self.name, kind)
    }
}

/// An error of the file `name` as a whole (no line).
pub(super) fn file_error(name: &str, kind: TouchstoneErrorKind) -> TouchstoneError {
    TouchstoneError {
        file: name.to_string(),
        line: None,
        kind,
    }
}

/// One parameter's `values` at the frequencies `f` of the file `name`, on a uniform grid in
/// single precision: [`Touchstone::to_sweep`] after its checks of the parameter.
pub(super) fn uniform_sweep(
    name: &str,
    f: &[f64],
    values: Vec<Complex64>,
    parameter: Parameter,
    spacing: Spacing,
) -> Result<GateSweep, TouchstoneError> {
    let error = |kind| file_error(name, kind);
    let (first, last) = match (f.first(), f.last()) {
        (Some(a), Some(b)) => (*a, *b),
        _ => return Err(error(TouchstoneErrorKind::NoData)),
    };
    let grid = Grid::from_start_stop(first, last, f.len())
        .map_err(|e| error(TouchstoneErrorKind::Grid(e)))?;
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
        return Err(error(TouchstoneErrorKind::NotUniform {
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
            name,
            grid.points()
        )),
    })
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
