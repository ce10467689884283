//! Offline processing of scans of several cuts and traces: a manifest of both axes
//! (`theta_deg,phi_deg,file`, [`crate::formats::manifest`]) or of one, with a co-polar and
//! optionally a cross-polar trace taken from each file (`--co S21 --cross S31` on 3-port
//! files).
//!
//! # Axes
//!
//! θ is the angle along a cut (the first positioner axis: the turntable), φ the cut (the
//! second axis: the roll or polarisation angle a cut is taken at), both as the manifest gives
//! them; converting other positioner axes to (θ, φ), and the co- and cross-polar definitions
//! the traces stand for, belong to the antenna coordinate model. Here the co-polar trace is
//! the one named by `--co` and the cross-polar trace the one named by `--cross`: a
//! dual-polarised probe's two ports, as measured.
//!
//! # What is done
//!
//! Each cut's files are binned along θ as a one-cut manifest is
//! ([`crate::pipeline::manifest_bins`]: the cut's own θ step unless a bin width is given;
//! files sharing a bin averaged and reported), the co- and cross-polar traces alike. One gate
//! serves every cut and both traces, as the engine gates every trace of a bin with the same
//! gate ([`sweepgate::cuts`]): the given one, else the gate chosen from the data of every
//! cut's co-polar sweeps ([`crate::pipeline::setup`]). Each bin of each trace is gated on
//! the FFT path.
//!
//! The results are the cuts ([`CutsResult::cuts`]) and the same values as one list of
//! points on the sphere ([`CutsResult::sphere_points`], [`SpherePoint`]): the list the
//! sphere analysis (directivity, cross-polar discrimination over the beam, 3D exports) takes.

use std::path::Path;

use anyhow::{bail, Context};
use num_complex::Complex64;
use sweepgate::grid::Grid;
use sweepgate::metrics::wrap_deg;
use sweepgate::Complex32;

use crate::formats::manifest::{AngleSweep, Manifest};
use crate::formats::manifest_traces::{TraceSweep, TracesScan};
use crate::formats::touchstone::{Parameter, Spacing};
use crate::output::report::ImpulseView;
use crate::pipeline::engine::gate_sweeps_on;
use crate::pipeline::manifest_bins::{self, ManifestBins};
use crate::pipeline::options::Choices;
use crate::pipeline::setup::{self, Automatic, Gating};

/// The traces a cut scan takes from each file.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct CutTraces {
    /// The co-polar parameter.
    pub co: Parameter,
    /// The cross-polar parameter, if any.
    pub cross: Option<Parameter>,
    /// A second manifest whose files hold the cross-polar trace (the same (θ, φ) rows as
    /// the first), instead of a second parameter of the same files.
    pub cross_manifest: Option<std::path::PathBuf>,
}

impl CutTraces {
    /// The parameters in trace order: co-polar first.
    pub fn parameters(&self) -> Vec<Parameter> {
        std::iter::once(self.co).chain(self.cross).collect()
    }
}

/// One trace of one bin: raw and gated values at the pattern frequencies, echo level.
#[derive(Debug, Clone, PartialEq)]
pub struct TraceBin {
    /// Averaged raw values at the pattern frequencies.
    pub raw: Vec<Complex32>,
    /// Gated values at the pattern frequencies.
    pub gated: Vec<Complex32>,
    /// Echo level (energy outside the gate), dB.
    pub echo_db: f32,
}

/// One bin of one cut.
#[derive(Debug, Clone, PartialEq)]
pub struct CutBin {
    /// θ of the bin (the mean of its files' θ), degrees.
    pub theta_deg: f64,
    /// Files averaged.
    pub files: usize,
    /// The co-polar trace.
    pub co: TraceBin,
    /// The cross-polar trace, when given.
    pub cross: Option<TraceBin>,
}

/// One cut: its φ and its bins in increasing θ.
#[derive(Debug, Clone, PartialEq)]
pub struct CutPattern {
    /// φ, degrees.
    pub phi_deg: f64,
    /// The cut's θ covers a full turn.
    pub full_circle: bool,
    /// The bin width used, degrees.
    pub width_deg: f64,
    /// The bins.
    pub bins: Vec<CutBin>,
}

/// What the bounded path (`pipeline/cuts_bounded.rs`) held, counted as it ran (for
/// `summary.json` and the test of the bound).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct HeldFigures {
    /// Bins of the first look (0 with a given gate).
    pub first_look_bins: usize,
    /// The most bytes of whole sweeps held at once during the first look (the looked bins'
    /// co-polar means, and what the workers held while reading them).
    pub first_look_peak_bytes: usize,
    /// The most bytes of whole sweeps held at once while the bins were gated: files' traces
    /// being read, bins' sums and means, the workers' gate buffers.
    pub gating_peak_bytes: usize,
    /// Bytes of the reduced bins kept for the report (values at the pattern frequencies).
    pub kept_bytes: usize,
    /// Threads of the pool.
    pub threads: usize,
    /// Bins per block (`cuts_bounded::BLOCK_BINS`).
    pub block_bins: usize,
}

/// A processed scan of cuts.
#[derive(Debug, Clone)]
pub struct CutsResult {
    /// What was processed, as a title: `manifest NAME` or `recording PATH`.
    pub name: String,
    /// The traces taken.
    pub traces: CutTraces,
    /// The common grid.
    pub grid: Grid,
    /// The gate and pattern frequencies.
    pub gating: Gating,
    /// The cuts in increasing φ.
    pub cuts: Vec<CutPattern>,
    /// Files read.
    pub files: usize,
    /// The co-polar impulse response of the first cut's bin nearest θ = 0.
    pub impulse: Option<ImpulseView>,
    /// Warnings: resampled files, bins combining files, set-up remarks.
    pub warnings: Vec<String>,
    /// What the bounded path held; `None` on the whole path.
    pub held: Option<HeldFigures>,
}

impl CutsResult {
    /// Every bin of every cut at every pattern frequency, as points on the sphere
    /// ([`cut_samples`]: a signed angle along the cut, poles on both halves of its plane).
    pub fn sphere_points(&self) -> Vec<SpherePoint> {
        let wide = |z: Complex32| Complex64::new(f64::from(z.re), f64::from(z.im));
        let zero = Complex32::new(0.0, 0.0);
        let mut out = Vec::new();
        for c in &self.cuts {
            for b in &c.bins {
                for (i, &frequency_hz) in self.gating.frequencies_hz.iter().enumerate() {
                    let co = b.co.gated.get(i).copied().unwrap_or(zero);
                    let cross = b
                        .cross
                        .as_ref()
                        .and_then(|x| x.gated.get(i).copied())
                        .unwrap_or(zero);
                    out.extend(cut_samples(
                        c.phi_deg,
                        b.theta_deg,
                        frequency_hz,
                        wide(co),
                        wide(cross),
                    ));
                }
            }
        }
        out
    }
}

/// How a scan of cuts is processed: the user's choices (gate, frequencies, bin width),
/// Touchstone spacing, threads.
#[derive(Debug, Clone, Copy)]
pub struct CutJob<'a> {
    /// Gate and pattern choices.
    pub choices: &'a Choices,
    /// Uniform spacing required or resampling allowed.
    pub spacing: Spacing,
    /// Threads reading files and gating (at least 1).
    pub threads: usize,
}

/// The manifest's files split into cuts by φ (increasing), each cut's files in manifest
/// order.
fn split_cuts(sweeps: &[TraceSweep]) -> Vec<(f64, Vec<&TraceSweep>)> {
    let mut cuts: Vec<(f64, Vec<&TraceSweep>)> = Vec::new();
    for s in sweeps {
        match cuts.iter_mut().find(|(phi, _)| *phi == s.phi_deg) {
            Some((_, v)) => v.push(s),
            None => cuts.push((s.phi_deg, vec![s])),
        }
    }
    cuts.sort_by(|a, b| a.0.total_cmp(&b.0));
    cuts
}

/// Whether θ values cover a full turn (their span plus the smallest step).
pub(crate) fn covers_full_circle(angles_deg: &[f64]) -> bool {
    let mut sorted = angles_deg.to_vec();
    sorted.sort_by(f64::total_cmp);
    sorted.dedup();
    let (Some(lo), Some(hi)) = (sorted.first(), sorted.last()) else {
        return false;
    };
    let step = sorted
        .windows(2)
        .map(|w| w[1] - w[0])
        .fold(f64::INFINITY, f64::min);
    sorted.len() > 1 && hi - lo + step >= 360.0 - 1e-6
}

/// One cut's trace `t` binned along θ.
fn bin_trace(
    files: &[&TraceSweep],
    t: usize,
    width_deg: Option<f64>,
    full_circle: bool,
) -> anyhow::Result<ManifestBins> {
    let sweeps: Vec<AngleSweep> = files
        .iter()
        .map(|s| AngleSweep {
            angle_deg: s.theta_deg,
            values: s.traces.get(t).cloned().unwrap_or_default(),
            file: s.file.clone(),
        })
        .collect();
    manifest_bins::bin_sweeps(sweeps, width_deg, full_circle)
}

/// A cut binned: φ, full circle, and per trace its bins.
struct BinnedCut {
    phi_deg: f64,
    full_circle: bool,
    traces: Vec<ManifestBins>,
}

fn bin_cuts(scan: &TracesScan, width_deg: Option<f64>) -> anyhow::Result<Vec<BinnedCut>> {
    let mut out = Vec::new();
    for (phi_deg, files) in split_cuts(&scan.sweeps) {
        let thetas: Vec<f64> = files.iter().map(|s| s.theta_deg).collect();
        let full_circle = covers_full_circle(&thetas);
        let traces = (0..scan.parameters.len())
            .map(|t| bin_trace(&files, t, width_deg, full_circle))
            .collect::<anyhow::Result<Vec<_>>>()
            .with_context(|| format!("binning the θ angles of the cut at φ {phi_deg}°"))?;
        out.push(BinnedCut {
            phi_deg,
            full_circle,
            traces,
        });
    }
    Ok(out)
}

/// The gate: as chosen, else from the data of every cut's co-polar bins.
fn gate_for(job: &CutJob, grid: Grid, cuts: &[BinnedCut]) -> anyhow::Result<Gating> {
    let co: Vec<&AngleSweep> = cuts.iter().flat_map(|c| &c.traces[0].sweeps).collect();
    let sweeps: Vec<&[Complex32]> = co.iter().map(|s| &s.values[..]).collect();
    let angles: Vec<f64> = co.iter().map(|s| s.angle_deg).collect();
    let auto = Automatic::Data {
        sweeps: &sweeps,
        angles_deg: Some(&angles),
        threads: job.threads,
    };
    let bw = setup::band_window(job.choices, None)?;
    setup::gating(grid, job.choices, bw, &[], auto)
}

/// Gates trace `t` of every cut's bins in one batch; per cut, its bins' traces.
fn gate_trace(
    job: &CutJob,
    g: &Gating,
    cuts: &[BinnedCut],
    t: usize,
    impulse: bool,
) -> anyhow::Result<(Vec<Vec<TraceBin>>, Option<ImpulseView>)> {
    let all: Vec<&AngleSweep> = cuts.iter().flat_map(|c| &c.traces[t].sweeps).collect();
    let values: Vec<&[Complex32]> = all.iter().map(|s| &s.values[..]).collect();
    // The first cut's bin nearest θ = 0 (the first cut's bins come first).
    let first_len = cuts.first().map_or(0, |c| c.traces[t].sweeps.len());
    let near = all[..first_len]
        .iter()
        .enumerate()
        .min_by(|a, b| {
            wrap_deg(a.1.angle_deg)
                .abs()
                .total_cmp(&wrap_deg(b.1.angle_deg).abs())
        })
        .map(|(i, s)| (i, s.angle_deg))
        .filter(|_| impulse);
    let gated = gate_sweeps_on(&g.gate, &values, near, job.threads)?;
    let at = |v: &[Complex32], i: usize| v.get(i).copied().unwrap_or_default();
    let mut bins = all
        .iter()
        .zip(gated.spectra.iter().zip(&gated.echo_db))
        .map(|(s, (spec, &echo_db))| TraceBin {
            raw: g.indices.iter().map(|&i| at(&s.values, i)).collect(),
            gated: g.indices.iter().map(|&i| at(spec, i)).collect(),
            echo_db,
        });
    let per_cut = cuts
        .iter()
        .map(|c| bins.by_ref().take(c.traces[t].sweeps.len()).collect())
        .collect();
    Ok((per_cut, gated.impulse))
}

/// The co-polar trace from `m`'s files and the cross-polar trace from the files of the
/// manifest `cross`, matched by (θ, φ): both manifests must name the same pairs.
fn with_cross_manifest(
    job: &CutJob,
    m: &Manifest,
    traces: &CutTraces,
    cross: &Path,
) -> anyhow::Result<TracesScan> {
    let mut scan = m.load_traces_on(&[traces.co], job.spacing, job.threads)?;
    let xm = Manifest::read(cross)?;
    let xp = traces.cross.unwrap_or(traces.co);
    let xs = xm.load_traces_on(&[xp], job.spacing, job.threads)?;
    if !crate::formats::manifest::same_grid(&scan.grid, &xs.grid) {
        bail!(
            "{}: its frequencies differ from {}'s",
            cross.display(),
            m.name()
        );
    }
    let key = |t: f64, p: f64| (t.to_bits(), p.to_bits());
    let mut by_pair: std::collections::HashMap<(u64, u64), Vec<Complex32>> = xs
        .sweeps
        .into_iter()
        .map(|s| {
            (
                key(s.theta_deg, s.phi_deg),
                s.traces.into_iter().next().unwrap_or_default(),
            )
        })
        .collect();
    if by_pair.len() != scan.sweeps.len() {
        bail!(
            "{} has {} (θ, φ) pairs, {} has {}: give the cross-polar file of every co-polar one",
            cross.display(),
            by_pair.len(),
            m.name(),
            scan.sweeps.len()
        );
    }
    for s in &mut scan.sweeps {
        let x = by_pair
            .remove(&key(s.theta_deg, s.phi_deg))
            .with_context(|| {
                format!(
                    "{} has no file at θ {}°, φ {}° ({} has)",
                    cross.display(),
                    s.theta_deg,
                    s.phi_deg,
                    m.name()
                )
            })?;
        s.traces.push(x);
    }
    scan.parameters.push(xp);
    scan.warnings.extend(xs.warnings);
    Ok(scan)
}

/// Processes a manifest of cuts: reads both traces of every file, bins each cut along θ,
/// gates every bin of both traces with one gate.
pub fn process_cuts(job: &CutJob, path: &Path, traces: CutTraces) -> anyhow::Result<CutsResult> {
    let m = Manifest::read(path)?;
    let scan = match &traces.cross_manifest {
        None => m.load_traces_on(&traces.parameters(), job.spacing, job.threads)?,
        Some(cross) => with_cross_manifest(job, &m, &traces, cross)?,
    };
    if scan.sweeps.is_empty() {
        bail!("{}: no sweeps", path.display());
    }
    let binned = bin_cuts(&scan, job.choices.bin_width_deg)
        .with_context(|| format!("{}: binning", path.display()))?;
    let gating = gate_for(job, scan.grid, &binned)?;
    let (co, impulse) = gate_trace(job, &gating, &binned, 0, true)?;
    let cross = match traces.cross {
        Some(_) => Some(gate_trace(job, &gating, &binned, 1, false)?.0),
        None => None,
    };
    let mut warnings = scan.warnings.clone();
    let mut cuts = Vec::with_capacity(binned.len());
    for (ci, (c, co_bins)) in binned.iter().zip(co).enumerate() {
        let first = &c.traces[0];
        warnings.extend(
            first
                .combined
                .iter()
                .map(|w| format!("φ {}°: {w}", c.phi_deg)),
        );
        let mut cross_bins = cross.as_ref().map(|x| x[ci].clone().into_iter());
        let bins = first
            .sweeps
            .iter()
            .zip(&first.counts)
            .zip(co_bins)
            .map(|((s, &files), co)| CutBin {
                theta_deg: s.angle_deg,
                files,
                co,
                cross: cross_bins.as_mut().and_then(|it| it.next()),
            })
            .collect();
        cuts.push(CutPattern {
            phi_deg: c.phi_deg,
            full_circle: c.full_circle,
            width_deg: first.width_deg,
            bins,
        });
    }
    warnings.extend(gating.remarks.iter().cloned());
    Ok(CutsResult {
        name: format!("manifest {}", m.name()),
        traces,
        grid: scan.grid,
        gating,
        cuts,
        files: scan.sweeps.len(),
        impulse,
        warnings,
        held: None,
    })
}

// The input of the sphere analysis ([`crate::pipeline::sphere`]) and the report's sphere
// pieces: one gated sample of both traces at one direction and frequency.

/// One gated sample: direction (θ, φ) of the antenna frame (see
/// [`crate::model::coords`]), frequency, and the co- and cross-polar traces (complex, the
/// same scale for both, e.g. gated S21 and S31 of a dual-polarised probe).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SpherePoint {
    /// Polar angle from boresight, degrees (0…180; negative values are read as the other
    /// half of the same great circle, θ → −θ, φ → φ + 180°).
    pub theta_deg: f64,
    /// Azimuth about boresight, degrees.
    pub phi_deg: f64,
    /// Frequency, Hz.
    pub frequency_hz: f64,
    /// Co-polar trace.
    pub co: Complex64,
    /// Cross-polar trace.
    pub cross: Complex64,
}

/// The sphere samples of one gated cut value: a cut in the plane `plane_deg` (0…180°) at
/// signed angle `angle_deg` (−180…180°: positive θ at φ = plane, negative θ at φ = plane +
/// 180°, as a roll-over-azimuth positioner or a turntable cut gives them). A pole (0° or
/// 180°) lies on both halves of the plane and is returned for both, so that a set of cut
/// planes fills a regular sphere grid.
///
/// ```
/// use num_complex::Complex64;
/// use sweepgate_host::pipeline::cuts::cut_samples;
/// let one = Complex64::new(1.0, 0.0);
/// let p = cut_samples(30.0, -45.0, 1e9, one, one);
/// assert_eq!((p.len(), p[0].theta_deg, p[0].phi_deg), (1, 45.0, 210.0));
/// assert_eq!(cut_samples(30.0, 0.0, 1e9, one, one).len(), 2);
/// ```
pub fn cut_samples(
    plane_deg: f64,
    angle_deg: f64,
    frequency_hz: f64,
    co: Complex64,
    cross: Complex64,
) -> Vec<SpherePoint> {
    const POLE_DEG: f64 = 1e-9;
    let at = |theta_deg, phi_deg| SpherePoint {
        theta_deg,
        phi_deg,
        frequency_hz,
        co,
        cross,
    };
    let mut v = Vec::with_capacity(2);
    if angle_deg >= 0.0 {
        v.push(at(angle_deg, plane_deg));
    }
    if angle_deg <= POLE_DEG || angle_deg >= 180.0 - POLE_DEG {
        v.push(at(angle_deg.abs(), plane_deg + 180.0));
    }
    v
}
