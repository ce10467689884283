//! Reading the measurements of an RCS scan from files: the target as a manifest of
//! per-angle Touchstone files (1-port: S11, 2-port: S21), the background as one Touchstone
//! file or a manifest, the reference and its background as Touchstone files (or manifests,
//! whose sweep nearest 0° is taken). Every sweep must lie on the target's grid.
//!
//! Each of them may instead be a recording (`simulate-rcs --recording`, `acquire`): its
//! sweeps at the angles of its position records ([`crate::pipeline::rcs_recording`]), read
//! as a manifest of the same angles would be, and processed by the same chain.

use std::path::Path;

use anyhow::{bail, Context};
use sweepgate::grid::Grid;
use sweepgate::Complex32;

use crate::formats::manifest::{Manifest, ManifestScan};
use crate::formats::touchstone::Parameter;
use crate::formats::touchstone::{Spacing, Touchstone};
use crate::model::rcs_targets::ReferenceTarget;
use crate::pipeline::rcs::{BackgroundInput, RcsInput};
use crate::pipeline::rcs_recording;

/// Whether `path` names a manifest (a `.csv` file) rather than a Touchstone file.
fn is_manifest(path: &Path) -> bool {
    path.extension()
        .and_then(|e| e.to_str())
        .is_some_and(|e| e.eq_ignore_ascii_case("csv"))
}

fn read_manifest(path: &Path) -> anyhow::Result<ManifestScan> {
    let m = Manifest::read(path).with_context(|| format!("manifest {}", path.display()))?;
    m.load(None, Spacing::RequireUniform)
        .with_context(|| format!("manifest {}", path.display()))
}

/// Two grids are the same when they have the same points and their start and step agree
/// within a millionth of a step.
fn same_grid(a: &Grid, b: &Grid) -> bool {
    let tol = 1e-6 * a.step_hz();
    a.points() == b.points()
        && (a.start_hz() - b.start_hz()).abs() <= tol
        && (a.step_hz() - b.step_hz()).abs() * a.points() as f64 <= tol
}

fn on_grid(grid: &Grid, got: &Grid, path: &Path) -> anyhow::Result<()> {
    if same_grid(grid, got) {
        Ok(())
    } else {
        bail!(
            "{}: its sweep ({} points from {} Hz, step {} Hz) is not on the target's grid ({} points from {} Hz, step {} Hz)",
            path.display(),
            got.points(),
            got.start_hz(),
            got.step_hz(),
            grid.points(),
            grid.start_hz(),
            grid.step_hz()
        )
    }
}

/// Sweeps with their angles, degrees.
pub type AngleSweeps = Vec<(f64, Vec<Complex32>)>;

/// Every sweep of a manifest or a recording with its angle, and their grid.
pub fn read_many(path: &Path) -> anyhow::Result<(Grid, AngleSweeps)> {
    if rcs_recording::is_recording(path) {
        let scan = rcs_recording::read_scan(path)?;
        return Ok((scan.grid, scan.sweeps));
    }
    let scan = read_manifest(path)?;
    let sweeps = scan
        .sweeps
        .into_iter()
        .map(|s| (s.angle_deg, s.values))
        .collect();
    Ok((scan.grid, sweeps))
}

/// One sweep from a Touchstone file, or a manifest's or recording's sweep nearest 0°.
pub fn read_one(path: &Path, grid: &Grid) -> anyhow::Result<Vec<Complex32>> {
    if is_manifest(path) || rcs_recording::is_recording(path) {
        let (got, sweeps) = read_many(path)?;
        on_grid(grid, &got, path)?;
        let nearest = sweeps
            .into_iter()
            .min_by(|a, b| a.0.abs().total_cmp(&b.0.abs()))
            .with_context(|| format!("{}: no sweeps", path.display()))?;
        return Ok(nearest.1);
    }
    let ts = Touchstone::read(path).with_context(|| format!("{}", path.display()))?;
    let p = Parameter::default_for(ts.ports());
    let sweep = ts
        .to_sweep(p, Spacing::RequireUniform)
        .with_context(|| format!("{}", path.display()))?;
    on_grid(grid, &sweep.grid, path)?;
    Ok(sweep.values)
}

/// Where the measurements of an RCS scan are.
#[derive(Debug, Clone)]
pub struct RcsFiles<'a> {
    /// The target: a manifest of per-angle Touchstone files, or a recording.
    pub target: &'a Path,
    /// The background: one Touchstone file, a manifest or a recording (`None`: no
    /// subtraction).
    pub background: Option<&'a Path>,
    /// The reference target's measurement.
    pub reference: &'a Path,
    /// The reference's background (`None`: the background's sweep nearest 0°).
    pub reference_background: Option<&'a Path>,
}

/// Reads every file of an RCS scan.
pub fn read(files: &RcsFiles, reference_target: ReferenceTarget) -> anyhow::Result<RcsInput> {
    let (grid, target) = read_many(files.target)?;
    let background = match files.background {
        None => BackgroundInput::Off,
        Some(p) if is_manifest(p) || rcs_recording::is_recording(p) => {
            let (got, sweeps) = read_many(p)?;
            on_grid(&grid, &got, p)?;
            BackgroundInput::PerAngle(sweeps)
        }
        Some(p) => BackgroundInput::One(read_one(p, &grid)?),
    };
    let reference = read_one(files.reference, &grid).context("the reference measurement")?;
    let reference_background = match (files.reference_background, files.background) {
        (Some(p), _) | (None, Some(p)) => {
            read_one(p, &grid).context("the reference's background")?
        }
        (None, None) => vec![Complex32::new(0.0, 0.0); grid.points()],
    };
    Ok(RcsInput {
        grid,
        target,
        background,
        reference,
        reference_background,
        reference_target,
    })
}
