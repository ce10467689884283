//! The planner (`sweepgate plan`) from a scenario or plan file, or from the same content
//! given as a Python dict: the report `plan --json` prints, as a dict, or the table `plan`
//! prints, as text.

use std::path::PathBuf;

use anyhow::{anyhow, Context};
use pyo3::prelude::*;
use sweepgate_host::output::plan_text::render_text;
use sweepgate_host::pipeline::options::parse_window;
use sweepgate_host::pipeline::plan::{
    load_plan_source, parse_plan_source, plan_report, Overrides, PlanReport,
};

use crate::{json_to_py, to_py_err};

/// Where the planner's input comes from: a file, or TOML text made from a dict.
enum Source {
    File(PathBuf),
    Table(String),
}

/// Name used in error messages for a plan given as a dict.
const DICT_ORIGIN: &str = "plan dict";

/// TOML text of a plan given as JSON text (the Python side's `json.dumps` of the dict).
fn toml_from_json(json_text: &str) -> anyhow::Result<String> {
    let value: serde_json::Value =
        serde_json::from_str(json_text).context("plan dict: not representable as JSON")?;
    let table = toml::Value::try_from(value)
        .map_err(|e| anyhow!("plan dict: cannot be written as a scenario table: {e}"))?;
    toml::to_string(&table).map_err(|e| anyhow!("plan dict: cannot be written as TOML: {e}"))
}

fn report(source: &Source, overrides: &Overrides) -> anyhow::Result<PlanReport> {
    match source {
        Source::File(path) => {
            let origin = path.display().to_string();
            plan_report(&load_plan_source(path)?, &origin, overrides)
        }
        Source::Table(text) => plan_report(
            &parse_plan_source(text, DICT_ORIGIN)?,
            DICT_ORIGIN,
            overrides,
        ),
    }
}

fn source_and_overrides(
    path: Option<PathBuf>,
    table_json: Option<&str>,
    aut_size_m: Option<f64>,
    fractional_bandwidth: Option<f64>,
    band_window: Option<&str>,
    rotation_deg_s: Option<f64>,
) -> anyhow::Result<(Source, Overrides)> {
    let source = match (path, table_json) {
        (Some(p), None) => Source::File(p),
        (None, Some(j)) => Source::Table(toml_from_json(j)?),
        _ => anyhow::bail!("give one plan source: a file path or a dict"),
    };
    let band_window = band_window
        .map(|t| parse_window(t).map_err(|e| anyhow!("band_window: {e}")))
        .transpose()?;
    Ok((
        source,
        Overrides {
            aut_size_m,
            fractional_bandwidth,
            band_window,
            rotation_deg_s,
        },
    ))
}

/// The planner's report (what `sweepgate plan --json` prints), as a dict.
#[pyfunction]
#[pyo3(signature = (path=None, table_json=None, *, aut_size_m=None, fractional_bandwidth=None, band_window=None, rotation_deg_s=None, text=false))]
#[allow(clippy::too_many_arguments)]
fn plan<'py>(
    py: Python<'py>,
    path: Option<PathBuf>,
    table_json: Option<&str>,
    aut_size_m: Option<f64>,
    fractional_bandwidth: Option<f64>,
    band_window: Option<&str>,
    rotation_deg_s: Option<f64>,
    text: bool,
) -> PyResult<Bound<'py, PyAny>> {
    let (source, overrides) = source_and_overrides(
        path,
        table_json,
        aut_size_m,
        fractional_bandwidth,
        band_window,
        rotation_deg_s,
    )
    .map_err(to_py_err)?;
    let r = py
        .detach(|| report(&source, &overrides))
        .map_err(to_py_err)?;
    if text {
        return Ok(render_text(&r).into_pyobject(py)?.into_any());
    }
    let v = serde_json::to_value(&r)
        .map_err(|e| to_py_err(anyhow::Error::new(e).context("encoding the plan")))?;
    json_to_py(py, &v)
}

pub fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_function(wrap_pyfunction!(plan, m)?)?;
    Ok(())
}
