//! The binding of `sweepgate process` (`sweepgate_host::pipeline::process`), kept in this
//! one file so that it follows that module when it changes.
//!
//! `process(...)` takes the command's options by the same names, resolves them with the
//! command's own `resolve`, runs the same processing on a thread with the same stack, and
//! returns the report's values as arrays (bins in the order of `pattern.csv`) with the
//! summary that `summary.json` holds. With `out` it also writes the report folder, exactly as
//! the command does.

use std::path::PathBuf;

use anyhow::{anyhow, Context};
use numpy::ndarray::Array2;
use numpy::{IntoPyArray, PyReadonlyArray1, PyReadonlyArray2};
use pyo3::prelude::*;
use pyo3::types::PyDict;
use sweepgate::Complex32;
use sweepgate_host::output::report::{self, ReportBin, ReportInput};
use sweepgate_host::pipeline::data_gate as host_data_gate;
use sweepgate_host::pipeline::options::{
    default_band_window, format_window, parse_window, GateOptions,
};
use sweepgate_host::pipeline::process::{self as host, Input, Options, Processed, Resolved};
use sweepgate_host::pipeline::setup::peak_gate as host_peak_gate;

use crate::{json_to_py, to_py_err};

/// Stack of the processing thread: the scan engine is large (`sweepgate process` uses the
/// same).
const STACK_BYTES: usize = 16 << 20;

/// Runs the command's processing on the resolved options. Without `out` and without gain by
/// substitution nothing is written; gain by substitution only exists on the report path, so
/// it writes the report into a temporary folder that is removed afterwards.
fn run(mut r: Resolved, write: bool) -> anyhow::Result<Processed> {
    if write {
        return host::process(&r);
    }
    if r.gain.is_some() {
        let tmp = TempFolder::new()?;
        r.out = tmp.0.clone();
        return host::process(&r);
    }
    match &r.input {
        Input::Manifest(m) => host::process_manifest(&r, m),
        Input::Recording(rec) => host::process_recording(&r, rec),
    }
}

/// A folder under the system's temporary folder, removed with everything in it on drop.
struct TempFolder(PathBuf);

impl TempFolder {
    fn new() -> anyhow::Result<Self> {
        let nanos = std::time::SystemTime::now()
            .duration_since(std::time::UNIX_EPOCH)
            .map_or(0, |d| d.subsec_nanos());
        let dir = std::env::temp_dir().join(format!(
            "sweepgate-python-report-{}-{nanos}",
            std::process::id()
        ));
        std::fs::create_dir(&dir)
            .with_context(|| format!("making a temporary report folder {}", dir.display()))?;
        Ok(Self(dir))
    }
}

impl Drop for TempFolder {
    fn drop(&mut self) {
        // Best effort: a folder left behind in the temporary folder harms nothing.
        let _ = std::fs::remove_dir_all(&self.0);
    }
}

fn on_big_stack(r: Resolved, write: bool) -> anyhow::Result<Processed> {
    std::thread::Builder::new()
        .name("process".into())
        .stack_size(STACK_BYTES)
        .spawn(move || run(r, write))
        .context("starting the processing thread")?
        .join()
        .map_err(|_| anyhow!("the processing thread failed"))?
}

/// Processes a manifest of Touchstone files or a recording as `sweepgate process` does.
#[pyfunction]
#[pyo3(signature = (input=None, *, manifest=None, recording=None, gate_center_ns=None, gate_span_ns=None, frequencies_hz=None, band_window=None, gate_shape=None, parameter=None, resample=false, settings=None, gain_table=None, reference=None, out=None))]
#[allow(clippy::too_many_arguments)]
fn process<'py>(
    py: Python<'py>,
    input: Option<PathBuf>,
    manifest: Option<PathBuf>,
    recording: Option<PathBuf>,
    gate_center_ns: Option<f64>,
    gate_span_ns: Option<f64>,
    frequencies_hz: Option<Vec<f64>>,
    band_window: Option<String>,
    gate_shape: Option<String>,
    parameter: Option<String>,
    resample: bool,
    settings: Option<PathBuf>,
    gain_table: Option<PathBuf>,
    reference: Option<PathBuf>,
    out: Option<PathBuf>,
) -> PyResult<Bound<'py, PyDict>> {
    if gain_table.is_some() != reference.is_some() {
        return Err(to_py_err(anyhow!(
            "gain by substitution needs both gain_table and reference"
        )));
    }
    let write = out.is_some();
    let args = Options {
        input,
        manifest,
        recording,
        gate: GateOptions {
            gate_center_ns,
            gate_span_ns,
            // The command line's text form; Rust prints each f64 so that it parses back equal.
            frequencies_hz: frequencies_hz.map(|v| {
                v.iter()
                    .map(|f| format!("{f:?}"))
                    .collect::<Vec<_>>()
                    .join(",")
            }),
            band_window,
            gate_shape,
        },
        parameter,
        resample,
        out,
        settings,
        gain_table,
        reference,
        exports: Default::default(),
        threads: None,
        co: None,
        cross: None,
        cross_manifest: None,
        bounded_memory: false,
    };
    let (p, r) = py
        .detach(|| -> anyhow::Result<(Processed, Resolved)> {
            let r = host::resolve(&args)?;
            Ok((on_big_stack(r.clone(), write)?, r))
        })
        .map_err(to_py_err)?;
    result_dict(py, &p, write.then_some(&r.out))
}

fn result_dict<'py>(
    py: Python<'py>,
    p: &Processed,
    written: Option<&PathBuf>,
) -> PyResult<Bound<'py, PyDict>> {
    let rep = &p.report;
    let bins = rep.sorted_bins();
    let d = PyDict::new(py);
    d.set_item(
        "frequencies_hz",
        rep.frequencies_hz.clone().into_pyarray(py),
    )?;
    let col = |f: &dyn Fn(&ReportBin) -> f64| bins.iter().map(|b| f(b)).collect::<Vec<f64>>();
    d.set_item("angle_deg", col(&|b| b.angle_deg).into_pyarray(py))?;
    d.set_item("mean_deg", col(&|b| b.mean_deg).into_pyarray(py))?;
    d.set_item(
        "echo_db",
        col(&|b| b.echo_db.unwrap_or(f64::NAN)).into_pyarray(py),
    )?;
    let sweeps: Vec<u32> = bins.iter().map(|b| b.sweeps).collect();
    d.set_item("sweeps", sweeps.into_pyarray(py))?;
    let flags: Vec<u16> = bins.iter().map(|b| b.flags).collect();
    d.set_item("flags", flags.into_pyarray(py))?;
    let words: Vec<String> = bins.iter().map(|b| report::flag_words(b.flags)).collect();
    d.set_item("flag_words", words)?;
    let f = rep.frequencies_hz.len();
    let grid = |v: &dyn Fn(&report::ReportValue) -> Option<num_complex::Complex64>| {
        let mut out = Vec::with_capacity(bins.len() * f);
        for b in &bins {
            for i in 0..f {
                out.push(b.values.get(i).and_then(v)?);
            }
        }
        Array2::from_shape_vec((bins.len(), f), out).ok()
    };
    d.set_item("raw", grid(&|v| Some(v.raw)).map(|a| a.into_pyarray(py)))?;
    d.set_item(
        "gated",
        grid(&|v| Some(v.gated)).map(|a| a.into_pyarray(py)),
    )?;
    let truth = if bins.is_empty() {
        None
    } else {
        grid(&|v| v.truth)
    };
    d.set_item("truth", truth.map(|a| a.into_pyarray(py)))?;
    d.set_item("gain_dbi", gain_dbi(rep, &bins).map(|a| a.into_pyarray(py)))?;
    d.set_item("summary", json_to_py(py, &report::summary_json(rep))?)?;
    d.set_item("warnings", rep.warnings.clone())?;
    d.set_item("impulse", impulse_dict(py, rep)?)?;
    let g = PyDict::new(py);
    g.set_item("center_s", p.gate.center_s)?;
    g.set_item("span_s", p.gate.span_s)?;
    g.set_item("band_window", format_window(&p.gate.band_window))?;
    g.set_item("shape", format_window(&p.gate.shape))?;
    g.set_item("renormalize", p.gate.renormalize)?;
    g.set_item("source", &p.gate_source)?;
    d.set_item("gate", g)?;
    d.set_item("out", written)?;
    Ok(d)
}

/// Absolute gain per bin and frequency, as `pattern.csv` writes it: gated dB plus the
/// substitution offset.
fn gain_dbi(rep: &ReportInput, bins: &[&ReportBin]) -> Option<Array2<f64>> {
    let g = rep.gain.as_ref()?;
    let f = rep.frequencies_hz.len();
    let mut out = Vec::with_capacity(bins.len() * f);
    for b in bins {
        for (fi, v) in b.values.iter().enumerate().take(f) {
            out.push(sweepgate_host::units::db(v.gated) + g.offset_db(fi).unwrap_or(f64::NAN));
        }
    }
    Array2::from_shape_vec((bins.len(), f), out).ok()
}

fn impulse_dict<'py>(py: Python<'py>, rep: &ReportInput) -> PyResult<Option<Bound<'py, PyDict>>> {
    let Some(v) = &rep.impulse else {
        return Ok(None);
    };
    let d = PyDict::new(py);
    d.set_item("angle_deg", v.angle_deg)?;
    d.set_item("sweeps", v.sweeps)?;
    d.set_item("time_ns", v.time_ns.clone().into_pyarray(py))?;
    d.set_item("magnitude", v.magnitude.clone().into_pyarray(py))?;
    d.set_item("gate", v.gate.clone().into_pyarray(py))?;
    d.set_item("gate_start_ns", v.gate_start_ns)?;
    d.set_item("gate_stop_ns", v.gate_stop_ns)?;
    Ok(Some(d))
}

/// The gate centred on the strongest impulse-response peak of the strongest sweep, four
/// band-window main lobes wide (`sweepgate process` chooses [`data_gate`]'s). Returns
/// (center_s, span_s, the rule in words, the row it came from).
#[pyfunction]
#[pyo3(signature = (sweeps, frequencies_hz, *, band_window=None))]
fn peak_gate(
    py: Python<'_>,
    sweeps: PyReadonlyArray2<'_, Complex32>,
    frequencies_hz: PyReadonlyArray1<'_, f64>,
    band_window: Option<String>,
) -> PyResult<(f64, f64, String, usize)> {
    let f: Vec<f64> = frequencies_hz.as_array().iter().copied().collect();
    let k = f.len();
    let rows = crate::gate::rows_of(&sweeps, k).map_err(to_py_err)?;
    py.detach(|| -> anyhow::Result<(f64, f64, String, usize)> {
        let grid = crate::gate::grid_from_frequencies(&f)?;
        let w = match &band_window {
            Some(t) => parse_window(t).map_err(|e| anyhow!("band_window: {e}"))?,
            None => default_band_window(),
        };
        let refs: Vec<&[Complex32]> = rows.chunks(k).collect();
        if refs.is_empty() {
            anyhow::bail!("sweeps: no sweeps to find a gate in");
        }
        let i = sweepgate_host::pipeline::setup::strongest(&refs);
        let g = host_peak_gate(&grid, w, &refs, None)?;
        Ok((g.center_s, g.span_s, g.rule, i))
    })
    .map_err(to_py_err)
}

/// The gate `sweepgate process` chooses when none is given: chosen from the data of all
/// sweeps (see `sweepgate_host::pipeline::data_gate`), in angle regions when `angles_deg`
/// is given. Returns (center_s, span_s, the rule in words, the unseparable warning or
/// None).
#[pyfunction]
#[pyo3(signature = (sweeps, frequencies_hz, *, angles_deg=None, band_window=None))]
fn data_gate(
    py: Python<'_>,
    sweeps: PyReadonlyArray2<'_, Complex32>,
    frequencies_hz: PyReadonlyArray1<'_, f64>,
    angles_deg: Option<PyReadonlyArray1<'_, f64>>,
    band_window: Option<String>,
) -> PyResult<(f64, f64, String, Option<String>)> {
    let f: Vec<f64> = frequencies_hz.as_array().iter().copied().collect();
    let k = f.len();
    let rows = crate::gate::rows_of(&sweeps, k).map_err(to_py_err)?;
    let angles: Option<Vec<f64>> = angles_deg.map(|a| a.as_array().iter().copied().collect());
    py.detach(|| -> anyhow::Result<(f64, f64, String, Option<String>)> {
        let grid = crate::gate::grid_from_frequencies(&f)?;
        let w = match &band_window {
            Some(t) => parse_window(t).map_err(|e| anyhow!("band_window: {e}"))?,
            None => default_band_window(),
        };
        let refs: Vec<&[Complex32]> = rows.chunks(k).collect();
        if refs.is_empty() {
            anyhow::bail!("sweeps: no sweeps to find a gate in");
        }
        if let Some(a) = &angles {
            if a.len() != refs.len() {
                anyhow::bail!("angles_deg: {} angles for {} sweeps", a.len(), refs.len());
            }
        }
        let d = host_data_gate::data_gate(&grid, w, &refs, angles.as_deref())?;
        let warning = host_data_gate::unseparable_warning(&d.choice, &grid);
        Ok((d.choice.center_s, d.choice.span_s, d.rule, warning))
    })
    .map_err(to_py_err)
}

pub fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_function(wrap_pyfunction!(process, m)?)?;
    m.add_function(wrap_pyfunction!(peak_gate, m)?)?;
    m.add_function(wrap_pyfunction!(data_gate, m)?)?;
    Ok(())
}
