//! Exports of the gated data over the whole band, beside the report: Touchstone files with
//! a manifest, and a NumPy `.npz` archive.
//!
//! # `--export-touchstone DIR`
//!
//! One two-port Touchstone file per bin, `DIR/angle-0000.s2p`, `angle-0001.s2p`, … in the
//! report's angle order, holding the bin's gated S21 at every swept frequency (S11, S12 and
//! S22 written as 0; see [`crate::formats::touchstone::s21_two_port_text`]), and
//! `DIR/manifest.csv` (`angle_deg,file`, see [`crate::formats::manifest`]) naming them with
//! the bin centres. The manifest is written last, so it only names files that are whole;
//! `sweepgate process DIR/manifest.csv` reads them back.
//!
//! # `--export-arrays FILE.npz`
//!
//! A NumPy archive (see [`crate::formats::npy`]; `numpy.load(FILE)` opens it) of:
//!
//! | name | dtype | shape | what |
//! |---|---|---|---|
//! | `s21` | complex128 | (A, K, 2) | per bin, frequency and trace: raw (averaged) and gated S21 |
//! | `traces` | str | (2,) | the trace names along the last axis: `raw`, `gated` |
//! | `angle_deg` | float64 | (A,) | bin centres, in the report's order |
//! | `frequency_hz` | float64 | (K,) | the swept frequencies |
//! | `pattern_frequency_hz` | float64 | (F,) | the report's pattern frequencies |
//! | `pattern_index` | int64 | (F,) | where each lies on `frequency_hz` |
//! | `sweeps` | int64 | (A,) | sweeps averaged in each bin |
//! | `echo_db` | float64 | (A,) | each bin's echo level, NaN when not computed |
//!
//! A bins, K swept frequencies, F pattern frequencies. The values are the ones the report
//! was made from: at `pattern_index` they are the raw and gated values of `pattern.csv`.
//!
//! Every file goes through [`crate::formats::files::write_atomic`]: whole or absent.

use std::path::{Path, PathBuf};

use anyhow::{bail, Context};
use num_complex::Complex64;
use sweepgate::grid::Grid;
use sweepgate::Complex32;

use crate::formats::files::{check_output_dir, write_atomic};
use crate::formats::manifest::manifest_text;
use crate::formats::npy::{npz_bytes, Array};
use crate::formats::touchstone::s21_two_port_text;
use crate::output::report::{ReportBin, ReportInput};

/// The trace names along the last axis of `s21`.
pub const TRACES: [&str; 2] = ["raw", "gated"];

/// One bin's data over the whole band.
#[derive(Debug, Clone, PartialEq)]
pub struct BandRow {
    /// Bin centre, degrees (the report bin's `angle_deg`).
    pub angle_deg: f64,
    /// Raw S21 averaged over the bin's sweeps, at every grid point.
    pub raw: Vec<Complex32>,
    /// Gated S21 at every grid point.
    pub gated: Vec<Complex32>,
}

/// Every bin's data over the whole band, on one grid.
#[derive(Debug, Clone, PartialEq)]
pub struct Bands {
    /// The swept grid.
    pub grid: Grid,
    /// One row per bin, any order.
    pub rows: Vec<BandRow>,
}

/// Which exports to write.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Exports {
    /// Folder for the Touchstone files and their manifest.
    pub touchstone_dir: Option<PathBuf>,
    /// The `.npz` archive.
    pub arrays: Option<PathBuf>,
}

impl Exports {
    /// Whether any export is asked for.
    pub fn any(&self) -> bool {
        self.touchstone_dir.is_some() || self.arrays.is_some()
    }
}

fn c64(v: Complex32) -> Complex64 {
    Complex64::new(f64::from(v.re), f64::from(v.im))
}

/// The report's bins in its order, each with its band row.
fn paired<'a>(
    input: &'a ReportInput,
    bands: &'a Bands,
) -> anyhow::Result<Vec<(&'a ReportBin, &'a BandRow)>> {
    let k = bands.grid.points();
    input
        .sorted_bins()
        .into_iter()
        .map(|b| {
            let row = bands
                .rows
                .iter()
                .find(|r| r.angle_deg == b.angle_deg)
                .with_context(|| format!("no full-band data for the bin at {} deg", b.angle_deg))?;
            if row.raw.len() != k || row.gated.len() != k {
                bail!(
                    "the bin at {} deg has {} raw and {} gated points, not the grid's {k}",
                    b.angle_deg,
                    row.raw.len(),
                    row.gated.len()
                );
            }
            Ok((b, row))
        })
        .collect()
}

/// Writes the Touchstone files and their manifest to `dir`; returns the manifest's path.
pub fn write_touchstone(input: &ReportInput, bands: &Bands, dir: &Path) -> anyhow::Result<PathBuf> {
    check_output_dir(dir)?;
    let freqs: Vec<f64> = (0..bands.grid.points())
        .map(|i| bands.grid.frequency_hz(i))
        .collect();
    let mut rows = Vec::new();
    for (i, (b, row)) in paired(input, bands)?.into_iter().enumerate() {
        let name = format!("angle-{i:04}.s2p");
        let comments = [
            format!("sweepgate gated S21 of the bin at {} deg", b.angle_deg),
            format!("{} sweeps averaged; source {}", b.sweeps, input.source),
        ];
        let gated: Vec<Complex64> = row.gated.iter().map(|v| c64(*v)).collect();
        let path = dir.join(&name);
        write_atomic(
            &path,
            s21_two_port_text(&comments, &freqs, &gated).as_bytes(),
        )?;
        rows.push((b.angle_deg, name));
    }
    let manifest = dir.join("manifest.csv");
    write_atomic(&manifest, manifest_text(&rows).as_bytes())?;
    Ok(manifest)
}

/// The arrays of the `.npz` export (see the module notes).
pub fn arrays(input: &ReportInput, bands: &Bands) -> anyhow::Result<Vec<Array>> {
    let pairs = paired(input, bands)?;
    let (a, k) = (pairs.len(), bands.grid.points());
    let mut s21 = Vec::with_capacity(a * k * 2);
    for (_, row) in &pairs {
        for (r, g) in row.raw.iter().zip(&row.gated) {
            s21.push(c64(*r));
            s21.push(c64(*g));
        }
    }
    let freqs: Vec<f64> = (0..k).map(|i| bands.grid.frequency_hz(i)).collect();
    let index: Vec<i64> = input
        .frequencies_hz
        .iter()
        .map(|f| bands.grid.nearest_index(*f).map_or(-1, |i| i as i64))
        .collect();
    let angles: Vec<f64> = pairs.iter().map(|(b, _)| b.angle_deg).collect();
    let sweeps: Vec<i64> = pairs.iter().map(|(b, _)| i64::from(b.sweeps)).collect();
    let echo: Vec<f64> = pairs
        .iter()
        .map(|(b, _)| b.echo_db.unwrap_or(f64::NAN))
        .collect();
    let f = input.frequencies_hz.len();
    Ok(vec![
        Array::c128("s21", vec![a, k, 2], &s21)?,
        Array::text("traces", &TRACES),
        Array::f64("angle_deg", vec![a], &angles)?,
        Array::f64("frequency_hz", vec![k], &freqs)?,
        Array::f64("pattern_frequency_hz", vec![f], &input.frequencies_hz)?,
        Array::i64("pattern_index", vec![f], &index)?,
        Array::i64("sweeps", vec![a], &sweeps)?,
        Array::f64("echo_db", vec![a], &echo)?,
    ])
}

/// Writes the `.npz` archive to `path`.
pub fn write_arrays(input: &ReportInput, bands: &Bands, path: &Path) -> anyhow::Result<()> {
    let bytes =
        npz_bytes(&arrays(input, bands)?).with_context(|| format!("making {}", path.display()))?;
    Ok(write_atomic(path, &bytes)?)
}

/// Writes the exports asked for; returns the files named to the user (the manifest, the
/// archive).
pub fn write_exports(
    input: &ReportInput,
    bands: Option<&Bands>,
    ex: &Exports,
) -> anyhow::Result<Vec<PathBuf>> {
    if !ex.any() {
        return Ok(Vec::new());
    }
    let bands = bands.context("no full-band data was kept for the exports")?;
    let mut out = Vec::new();
    if let Some(dir) = &ex.touchstone_dir {
        let m = write_touchstone(input, bands, dir)
            .with_context(|| format!("exporting Touchstone files to {}", dir.display()))?;
        out.push(m);
    }
    if let Some(p) = &ex.arrays {
        write_arrays(input, bands, p)
            .with_context(|| format!("exporting arrays to {}", p.display()))?;
        out.push(p.clone());
    }
    Ok(out)
}
