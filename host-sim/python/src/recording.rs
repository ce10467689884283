//! Recordings (`sweepgate_host::formats::recording`) read into arrays, with the same
//! recovery as every command: every intact record of a cut-off or damaged file is kept, and
//! what was skipped and why reading stopped are reported.

use std::path::PathBuf;

use numpy::ndarray::Array2;
use numpy::IntoPyArray;
use pyo3::prelude::*;
use pyo3::types::PyDict;
use sweepgate::Complex32;
use sweepgate_host::formats::recording::{recover_file, Record, Recovered, Stop};

use crate::{json_to_py, to_py_err};

/// Columns of the sweep records, K values per sweep.
#[derive(Default)]
struct Sweeps {
    index: Vec<u32>,
    start_us: Vec<u64>,
    end_us: Vec<u64>,
    offset: Vec<u64>,
    values: Vec<Complex32>,
    other_length: Vec<u32>,
}

#[derive(Default)]
struct Positions {
    t_us: Vec<u64>,
    counts: Vec<i64>,
    angle_deg: Vec<f64>,
}

/// Points per sweep: the header's grid, or the first sweep's length without a header.
fn points(rec: &Recovered) -> usize {
    rec.header().map(|h| h.grid.points).unwrap_or_else(|| {
        rec.records
            .iter()
            .find_map(|(_, r)| match r {
                Record::Sweep { s21, .. } => Some(s21.len()),
                _ => None,
            })
            .unwrap_or(0)
    })
}

fn columns(rec: &Recovered, k: usize) -> (Sweeps, Positions) {
    let mut s = Sweeps::default();
    let mut p = Positions::default();
    for (offset, r) in &rec.records {
        match r {
            Record::Sweep {
                index,
                start_us,
                end_us,
                s21,
            } if s21.len() == k => {
                s.index.push(*index);
                s.start_us.push(*start_us);
                s.end_us.push(*end_us);
                s.offset.push(*offset);
                s.values.extend_from_slice(s21);
            }
            Record::Sweep { index, .. } => s.other_length.push(*index),
            Record::Position {
                t_us,
                counts,
                angle_deg,
            } => {
                p.t_us.push(*t_us);
                p.counts.push(*counts);
                p.angle_deg.push(*angle_deg);
            }
            _ => {}
        }
    }
    (s, p)
}

fn truth_list<'py>(py: Python<'py>, rec: &Recovered) -> PyResult<Vec<Bound<'py, PyDict>>> {
    let mut out = Vec::new();
    for (_, r) in &rec.records {
        if let Record::Truth { angle_deg, values } = r {
            let d = PyDict::new(py);
            d.set_item("angle_deg", *angle_deg)?;
            let f: Vec<f64> = values.iter().map(|(f, _)| *f).collect();
            let s: Vec<Complex32> = values.iter().map(|(_, s)| *s).collect();
            d.set_item("frequencies_hz", f.into_pyarray(py))?;
            d.set_item("s21", s.into_pyarray(py))?;
            out.push(d);
        }
    }
    Ok(out)
}

fn end_dict<'py>(py: Python<'py>, rec: &Recovered) -> PyResult<Option<Bound<'py, PyDict>>> {
    for (_, r) in &rec.records {
        if let Record::End {
            sweeps,
            positions,
            truths,
        } = r
        {
            let d = PyDict::new(py);
            d.set_item("sweeps", *sweeps)?;
            d.set_item("positions", *positions)?;
            d.set_item("truths", *truths)?;
            return Ok(Some(d));
        }
    }
    Ok(None)
}

fn damage_list<'py>(py: Python<'py>, rec: &Recovered) -> PyResult<Vec<Bound<'py, PyDict>>> {
    rec.damage
        .iter()
        .map(|d| {
            let o = PyDict::new(py);
            o.set_item("offset", d.offset)?;
            o.set_item("skipped", d.skipped)?;
            o.set_item("fault", d.fault.to_string())?;
            Ok(o)
        })
        .collect()
}

/// Reads a recording: header, sweeps as an N × K array, positioner samples, truth, and
/// what recovery skipped.
#[pyfunction]
fn read_recording<'py>(py: Python<'py>, path: PathBuf) -> PyResult<Bound<'py, PyDict>> {
    let rec = py
        // The file error names the file ("reading PATH: ..."); no second name before it.
        .detach(|| recover_file(&path).map_err(anyhow::Error::from))
        .map_err(to_py_err)?;
    let k = points(&rec);
    let (s, p) = py.detach(|| columns(&rec, k));
    let d = PyDict::new(py);
    d.set_item("version", rec.version)?;
    match rec.header() {
        Some(h) => {
            let v = serde_json::to_value(h).map_err(|e| {
                to_py_err(anyhow::Error::new(e).context("encoding the recording's header"))
            })?;
            d.set_item("header", json_to_py(py, &v)?)?;
            let f: Vec<f64> = (0..h.grid.points)
                .map(|i| h.grid.start_hz + i as f64 * h.grid.step_hz)
                .collect();
            d.set_item("frequencies_hz", f.into_pyarray(py))?;
        }
        None => {
            d.set_item("header", py.None())?;
            d.set_item("frequencies_hz", py.None())?;
        }
    }
    let n = s.index.len();
    let values = Array2::from_shape_vec((n, k), s.values)
        .map_err(|e| to_py_err(anyhow::anyhow!("shaping the sweeps: {e}")))?;
    d.set_item("sweeps", values.into_pyarray(py))?;
    d.set_item("sweep_index", s.index.into_pyarray(py))?;
    d.set_item("start_us", s.start_us.into_pyarray(py))?;
    d.set_item("end_us", s.end_us.into_pyarray(py))?;
    d.set_item("sweep_offset", s.offset.into_pyarray(py))?;
    d.set_item("sweeps_of_other_length", s.other_length)?;
    d.set_item("position_t_us", p.t_us.into_pyarray(py))?;
    d.set_item("position_counts", p.counts.into_pyarray(py))?;
    d.set_item("position_angle_deg", p.angle_deg.into_pyarray(py))?;
    d.set_item("truth", truth_list(py, &rec)?)?;
    d.set_item("end", end_dict(py, &rec)?)?;
    d.set_item("damage", damage_list(py, &rec)?)?;
    d.set_item("stop", rec.describe_stop())?;
    d.set_item("complete", rec.stop == Stop::Complete)?;
    d.set_item("stop_offset", rec.stop_offset)?;
    let unknown = rec
        .records
        .iter()
        .filter(|(_, r)| matches!(r, Record::Unknown { .. }))
        .count();
    d.set_item("unknown_records", unknown)?;
    Ok(d)
}

pub fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_function(wrap_pyfunction!(read_recording, m)?)?;
    Ok(())
}
