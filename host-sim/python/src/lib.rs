//! `sweepgate._native`: the compiled half of the Python package `sweepgate`.
//!
//! Thin bindings, no computation of their own: gating and impulse responses call the core
//! (`sweepgate::gate::Gate`), the planner, offline processing and recordings call the host
//! library (`sweepgate_host`). The Python half (`python/sweepgate/`) adds the friendly
//! functions, the array conversions and the scikit-rf bridge.
//!
//! Errors: every failure becomes `sweepgate.SweepgateError` (a `ValueError`) whose message is
//! the host's error chain on one line (`{:#}` of the `anyhow::Error`), as the command line
//! prints it.
#![forbid(unsafe_code)]

mod gate;
mod plan;
mod process;
mod recording;

use pyo3::exceptions::PyValueError;
use pyo3::prelude::*;

pyo3::create_exception!(
    sweepgate,
    SweepgateError,
    PyValueError,
    "An error from sweepgate: bad settings, bad input data or a file that cannot be read. \
     The message is the one the command line prints."
);

/// The Python exception for a host or core error, with its whole cause chain on one line.
pub(crate) fn to_py_err(e: anyhow::Error) -> PyErr {
    SweepgateError::new_err(format!("{e:#}"))
}

/// A Python value from a JSON value (through Python's own `json` module, so that numbers,
/// nulls and nesting come out exactly as `json.loads` of the file the command line writes).
pub(crate) fn json_to_py<'py>(
    py: Python<'py>,
    value: &serde_json::Value,
) -> PyResult<Bound<'py, PyAny>> {
    let text = serde_json::to_string(value)
        .map_err(|e| to_py_err(anyhow::Error::new(e).context("encoding a result as JSON")))?;
    py.import("json")?.call_method1("loads", (text,))
}

#[pymodule]
fn _native(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add("SweepgateError", m.py().get_type::<SweepgateError>())?;
    gate::register(m)?;
    plan::register(m)?;
    process::register(m)?;
    recording::register(m)?;
    Ok(())
}
