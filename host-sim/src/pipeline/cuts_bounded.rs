//! A scan of cuts from a manifest of both axes in bounded memory: the same
//! [`CutsResult`] as [`crate::pipeline::cuts::process_cuts`] (the same numbers bit for bit,
//! tested in `tests/process_bounded.rs`), without holding every file's sweeps.
//!
//! # What the report needs, and what is held
//!
//! The report of a scan of cuts ([`crate::pipeline::cuts_report`]) uses, per bin and trace,
//! the raw and gated values at the pattern frequencies and the echo level; per bin its θ and
//! file count; the co-polar impulse view of one bin (the first cut's bin nearest θ = 0); and
//! the warnings. The whole path ([`crate::pipeline::cuts::process_cuts`]) reads every file's
//! traces first, because the bins and the gate from the data are made from them; here
//!
//! - the bins are planned from the manifest's angles alone
//!   ([`manifest_bins::plan_bins`], the same plan);
//! - the gate, when it is to be chosen from the data, is chosen from a first look at the
//!   co-polar sweeps of the bins the survey looks at ([`data_gate::looked`]: at most
//!   [`data_gate::MAX_LOOKS`] bins, evenly spread, which is all the survey ever looks at), so
//!   the gate is the same; given a gate (center and span), there is no first look;
//! - then every bin is read, averaged ([`manifest_bins::Mean`], the same mean bit for bit),
//!   gated and reduced on the thread pool ([`crate::threads::map_blocks`]), in blocks of
//!   [`BLOCK_BINS`] bins in manifest order (a bin combining files is read whole when its
//!   first file's row comes). A worker holds one file's traces and one bin's sums at a time;
//!   only the reduced bins are kept.
//!
//! What is kept grows with rows × pattern frequencies; the full sweeps held at once are
//! bounded by the threads and the points ([`HeldFigures`], counted as they are held and
//! let go). Errors name the manifest line and file as the whole path's do; when several
//! files are bad, the first one met is reported (the first look's bins come first, then
//! manifest order), where the whole path names the first in manifest order.

use std::path::Path;
use std::sync::atomic::{AtomicUsize, Ordering};

use anyhow::{bail, Context};
use sweepgate::fft::Fft;
use sweepgate::gate::Gate;
use sweepgate::grid::Grid;
use sweepgate::metrics::wrap_deg;
use sweepgate::Complex32;

use crate::formats::manifest::{
    same_grid, GridMismatch, Manifest, ManifestError, ManifestErrorKind, ManifestRow,
};
use crate::formats::touchstone::{Parameter, Spacing, Touchstone};
use crate::output::report::ImpulseView;
use crate::pipeline::cuts::{
    covers_full_circle, CutBin, CutJob, CutPattern, CutTraces, CutsResult, HeldFigures, TraceBin,
};
use crate::pipeline::data_gate;
use crate::pipeline::manifest_bins::{self, Mean};
use crate::pipeline::setup::{self, Automatic, Gating};
use crate::pipeline::transform::{self, impulse_view, FftJob, HostFft};

/// Bins a worker takes at a time (a block of [`crate::threads::map_blocks`]).
pub const BLOCK_BINS: usize = 8;

/// Bytes held now and the most held at once.
#[derive(Debug, Default)]
struct Held {
    now: AtomicUsize,
    peak: AtomicUsize,
}

impl Held {
    /// Counts `bytes` as held until the returned guard is dropped.
    fn hold(&self, bytes: usize) -> Hold<'_> {
        let now = self.now.fetch_add(bytes, Ordering::Relaxed) + bytes;
        self.peak.fetch_max(now, Ordering::Relaxed);
        Hold { held: self, bytes }
    }

    fn peak(&self) -> usize {
        self.peak.load(Ordering::Relaxed)
    }
}

struct Hold<'a> {
    held: &'a Held,
    bytes: usize,
}

impl Drop for Hold<'_> {
    fn drop(&mut self) {
        self.held.now.fetch_sub(self.bytes, Ordering::Relaxed);
    }
}

fn sweep_bytes(points: usize) -> usize {
    points * std::mem::size_of::<Complex32>()
}

/// One planned bin: its cut, θ and the manifest rows it averages (in the plan's order).
#[derive(Debug, Clone)]
struct PlannedBin {
    cut: usize,
    theta_deg: f64,
    rows: Vec<usize>,
}

/// One cut: φ, full circle, bin width.
#[derive(Debug, Clone, Copy)]
struct PlannedCut {
    phi_deg: f64,
    full_circle: bool,
    width_deg: f64,
}

/// The bins of every cut, planned from the manifest's angles, cuts in increasing φ (the
/// whole path's split and plan).
fn plan(
    rows: &[ManifestRow],
    width_deg: Option<f64>,
) -> anyhow::Result<(Vec<PlannedCut>, Vec<PlannedBin>)> {
    let mut by_phi: Vec<(f64, Vec<usize>)> = Vec::new();
    for (i, r) in rows.iter().enumerate() {
        let phi = r.phi_deg.unwrap_or(0.0);
        match by_phi.iter_mut().find(|(p, _)| *p == phi) {
            Some((_, v)) => v.push(i),
            None => by_phi.push((phi, vec![i])),
        }
    }
    by_phi.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut cuts = Vec::with_capacity(by_phi.len());
    let mut bins = Vec::new();
    for (ci, (phi_deg, members)) in by_phi.into_iter().enumerate() {
        let thetas: Vec<f64> = members.iter().map(|&i| rows[i].angle_deg).collect();
        let full_circle = covers_full_circle(&thetas);
        let p = manifest_bins::plan_bins(&thetas, width_deg, full_circle)
            .with_context(|| format!("binning the θ angles of the cut at φ {phi_deg}°"))?;
        for g in &p.groups {
            let angles: Vec<f64> = g.iter().map(|&k| thetas[k]).collect();
            bins.push(PlannedBin {
                cut: ci,
                theta_deg: manifest_bins::bin_angle_deg(&angles, full_circle),
                rows: g.iter().map(|&k| members[k]).collect(),
            });
        }
        cuts.push(PlannedCut {
            phi_deg,
            full_circle,
            width_deg: p.width_deg,
        });
    }
    Ok((cuts, bins))
}

/// How the files are read: the manifest, the parameters, the spacing, the common grid and
/// the file it came from.
struct Reader<'a> {
    m: &'a Manifest,
    parameters: &'a [Parameter],
    spacing: Spacing,
    grid: Grid,
    first_file: &'a Path,
    held: &'a Held,
}

/// A bin's traces averaged, with the files' warnings (row, text).
struct BinMeans {
    means: Vec<Vec<Complex32>>,
    warnings: Vec<(usize, String)>,
}

impl Reader<'_> {
    fn error(&self, line: usize, kind: ManifestErrorKind) -> ManifestError {
        ManifestError {
            file: self.m.name().to_string(),
            line: Some(line),
            kind,
        }
    }

    /// Reads the bin's files one at a time into a running mean of each of the first
    /// `traces` traces.
    fn means(&self, bin: &PlannedBin, traces: usize) -> Result<BinMeans, ManifestError> {
        let mut sums: Vec<Mean> = vec![Mean::default(); traces];
        let mut warnings = Vec::new();
        let mut sums_hold = self.held.hold(0);
        for &ri in &bin.rows {
            let row = &self.m.rows()[ri];
            let got = Touchstone::read_sweeps(&row.file, Some(self.parameters), self.spacing)
                .map_err(|e| self.error(row.line, ManifestErrorKind::Touchstone(Box::new(e))))?;
            let _file = self
                .held
                .hold(got.iter().map(|s| sweep_bytes(s.values.len())).sum());
            for s in &got {
                if !same_grid(&self.grid, &s.grid) {
                    let parts = |g: &Grid| (g.start_hz(), g.step_hz(), g.points());
                    let m = GridMismatch {
                        file: row.file.clone(),
                        grid: parts(&s.grid),
                        first_file: self.first_file.to_path_buf(),
                        first_grid: parts(&self.grid),
                    };
                    return Err(self.error(row.line, ManifestErrorKind::DifferentGrid(Box::new(m))));
                }
            }
            for (sum, s) in sums.iter_mut().zip(&got) {
                sum.add(&s.values);
            }
            warnings.extend(got.into_iter().filter_map(|s| s.warning).map(|w| (ri, w)));
            if sums_hold.bytes == 0 {
                sums_hold = self.held.hold(sums.iter().map(Mean::bytes).sum());
            }
        }
        Ok(BinMeans {
            means: sums.into_iter().map(Mean::finish).collect(),
            warnings,
        })
    }
}

/// One bin worked: its traces reduced, its files' warnings, the impulse view when asked.
struct BinDone {
    traces: Vec<TraceBin>,
    warnings: Vec<(usize, String)>,
    impulse: Option<ImpulseView>,
}

/// Gates every planned bin on the pool; results in the order of `order` (indices into
/// `bins`).
struct GateBins<'a> {
    reader: &'a Reader<'a>,
    g: &'a Gating,
    bins: &'a [PlannedBin],
    order: &'a [usize],
    traces: usize,
    impulse_of: Option<usize>,
    threads: usize,
}

impl FftJob for GateBins<'_> {
    type Output = anyhow::Result<Vec<Result<BinDone, ManifestError>>>;
    fn run<const M: usize>(self) -> Self::Output
    where
        [Complex32; M]: Fft,
    {
        let gate = Box::new(Gate::<M>::new(&self.g.gate).context("gate")?);
        let zero = Complex32::new(0.0, 0.0);
        let traces = self.traces;
        let held = self.reader.held;
        let init = || {
            let hold = held.hold(traces * M * std::mem::size_of::<Complex32>());
            (HostFft::<M>::new(), vec![[zero; M]; traces], hold)
        };
        // The first failed item (in `order`): later items are not worked.
        let failed = AtomicUsize::new(usize::MAX);
        let items: Vec<usize> = (0..self.order.len()).collect();
        let done = crate::threads::map_blocks(
            &items,
            self.threads,
            BLOCK_BINS,
            init,
            |(fft, bufs, _), block| {
                block
                    .iter()
                    .map(|&k| {
                        if k > failed.load(Ordering::Relaxed) {
                            return Err(None);
                        }
                        let bi = self.order[k];
                        let r = self.one(&gate, fft, bufs, bi).map_err(Some);
                        if r.is_err() {
                            failed.fetch_min(k, Ordering::Relaxed);
                        }
                        r
                    })
                    .collect()
            },
        );
        // The first error in order is a real one (items after it were skipped).
        Ok(done
            .into_iter()
            .map_while(|r| match r {
                Ok(d) => Some(Ok(d)),
                Err(Some(e)) => Some(Err(e)),
                Err(None) => None,
            })
            .collect())
    }
}

impl GateBins<'_> {
    fn one<const M: usize>(
        &self,
        gate: &Gate<M>,
        fft: &mut HostFft<M>,
        bufs: &mut [[Complex32; M]],
        bi: usize,
    ) -> Result<BinDone, ManifestError>
    where
        [Complex32; M]: Fft,
    {
        let bin = &self.bins[bi];
        let got = self.reader.means(bin, self.traces)?;
        let _means = self
            .reader
            .held
            .hold(got.means.iter().map(|m| sweep_bytes(m.capacity())).sum());
        let zero = Complex32::new(0.0, 0.0);
        for (b, s) in bufs.iter_mut().zip(&got.means) {
            b.fill(zero);
            for (d, v) in b.iter_mut().zip(s.iter()) {
                *d = *v;
            }
        }
        let mut echo_db = vec![0.0f32; bufs.len()];
        gate.apply_many_using(fft, bufs, &mut echo_db);
        let at = |v: &[Complex32], i: usize| v.get(i).copied().unwrap_or_default();
        let traces = got
            .means
            .iter()
            .zip(bufs.iter())
            .zip(&echo_db)
            .map(|((raw, gated), &echo_db)| TraceBin {
                raw: self.g.indices.iter().map(|&i| at(raw, i)).collect(),
                gated: self.g.indices.iter().map(|&i| at(&gated[..], i)).collect(),
                echo_db,
            })
            .collect();
        let impulse = (self.impulse_of == Some(bi))
            .then(|| impulse_view(gate, &got.means[0], bin.theta_deg, 1));
        Ok(BinDone {
            traces,
            warnings: got.warnings,
            impulse,
        })
    }
}

/// The first look: the co-polar means of the bins the survey looks at, read on the pool.
fn first_look(
    reader: &Reader,
    bins: &[PlannedBin],
    threads: usize,
) -> Result<Vec<(usize, Vec<Complex32>)>, ManifestError> {
    let looked: Vec<usize> = data_gate::looked(bins.len()).collect();
    let got = crate::threads::map_blocks(
        &looked,
        threads,
        BLOCK_BINS,
        || (),
        |_, block| {
            block
                .iter()
                .map(|&bi| {
                    let m = reader.means(&bins[bi], 1)?;
                    let mean = m.means.into_iter().next().unwrap_or_default();
                    // Held until the gate is chosen (let go with the first look).
                    std::mem::forget(reader.held.hold(sweep_bytes(mean.capacity())));
                    Ok((bi, mean))
                })
                .collect()
        },
    );
    got.into_iter().collect()
}

/// The gate: as chosen, else from the first look at the co-polar bins.
fn gating(job: &CutJob, reader: &Reader, bins: &[PlannedBin]) -> anyhow::Result<(Gating, usize)> {
    let bw = setup::band_window(job.choices, None)?;
    let need = job.choices.center_ns.is_none() || job.choices.span_ns.is_none();
    let looks = if need {
        first_look(reader, bins, job.threads)?
    } else {
        Vec::new()
    };
    let mut sweeps: Vec<&[Complex32]> = vec![&[]; bins.len()];
    for (bi, mean) in &looks {
        sweeps[*bi] = mean;
    }
    let angles: Vec<f64> = bins.iter().map(|b| b.theta_deg).collect();
    let auto = Automatic::Data {
        sweeps: &sweeps,
        angles_deg: Some(&angles),
        threads: job.threads,
    };
    let g = setup::gating(reader.grid, job.choices, bw, &[], auto)?;
    // The first look's means are let go here.
    let looked_bytes: usize = looks.iter().map(|(_, m)| sweep_bytes(m.capacity())).sum();
    reader.held.now.fetch_sub(looked_bytes, Ordering::Relaxed);
    Ok((g, looks.len()))
}

/// The first cut's bin nearest θ = 0 (the first of equals), as the whole path takes it.
fn impulse_bin(bins: &[PlannedBin]) -> Option<usize> {
    bins.iter()
        .enumerate()
        .take_while(|(_, b)| b.cut == 0)
        .min_by(|a, b| {
            wrap_deg(a.1.theta_deg)
                .abs()
                .total_cmp(&wrap_deg(b.1.theta_deg).abs())
        })
        .map(|(i, _)| i)
}

/// The common grid: the first row's file's first trace.
fn first_grid(m: &Manifest, parameters: &[Parameter], spacing: Spacing) -> anyhow::Result<Grid> {
    let Some(row) = m.rows().first() else {
        return Err(ManifestError {
            file: m.name().to_string(),
            line: None,
            kind: ManifestErrorKind::NoRows,
        }
        .into());
    };
    let got = Touchstone::read_sweeps(&row.file, Some(parameters), spacing).map_err(|e| {
        ManifestError {
            file: m.name().to_string(),
            line: Some(row.line),
            kind: ManifestErrorKind::Touchstone(Box::new(e)),
        }
    })?;
    Ok(got.first().context("no trace in the first file")?.grid)
}

/// Bytes the whole path would hold of raw traces for `m` (rows × traces × points × 8),
/// from the first row's file: what decides the bounded path ([`crate::limits`]).
pub fn whole_path_bytes(m: &Manifest, traces: &CutTraces, spacing: Spacing) -> anyhow::Result<u64> {
    let params = traces.parameters();
    let grid = first_grid(m, &params, spacing)?;
    Ok(m.rows().len() as u64 * params.len() as u64 * sweep_bytes(grid.points()) as u64)
}

/// Processes a manifest of cuts in bounded memory (module notes): the same result as
/// [`crate::pipeline::cuts::process_cuts`], and what was held.
pub fn process_cuts_bounded(
    job: &CutJob,
    path: &Path,
    traces: CutTraces,
) -> anyhow::Result<CutsResult> {
    if traces.cross_manifest.is_some() {
        bail!("--bounded-memory does not take --cross-manifest yet: give the cross-polar trace as a second parameter of the same files (--cross)");
    }
    let m = Manifest::read(path)?;
    let parameters = traces.parameters();
    let grid = first_grid(&m, &parameters, job.spacing)?;
    let first_file = m.rows().first().map(|r| r.file.clone()).unwrap_or_default();
    let (cuts, bins) = plan(m.rows(), job.choices.bin_width_deg)
        .with_context(|| format!("{}: binning", path.display()))?;
    let look_held = Held::default();
    let reader = Reader {
        m: &m,
        parameters: &parameters,
        spacing: job.spacing,
        grid,
        first_file: &first_file,
        held: &look_held,
    };
    let (gating, first_look_bins) = gating(job, &reader, &bins)?;
    let held = Held::default();
    let reader = Reader {
        held: &held,
        ..reader
    };
    // Manifest order: each bin at its first row.
    let mut order: Vec<usize> = (0..bins.len()).collect();
    order.sort_by_key(|&b| bins[b].rows.iter().min().copied().unwrap_or(0));
    let done = transform::run(
        transform::fft_size(grid.points())?,
        GateBins {
            reader: &reader,
            g: &gating,
            bins: &bins,
            order: &order,
            traces: parameters.len(),
            impulse_of: impulse_bin(&bins),
            threads: job.threads,
        },
    )?;
    let mut worked: Vec<Option<BinDone>> = (0..bins.len()).map(|_| None).collect();
    for (k, d) in done.into_iter().enumerate() {
        worked[order[k]] = Some(d?);
    }
    let figures = HeldFigures {
        first_look_bins,
        first_look_peak_bytes: look_held.peak(),
        gating_peak_bytes: held.peak(),
        kept_bytes: 0,
        threads: job.threads,
        block_bins: BLOCK_BINS,
    };
    assemble(&m, &reader, traces, gating, cuts, bins, worked, figures)
}

/// The result from the worked bins, in the whole path's order (warnings: the files' in
/// manifest order, then the bins combining files per cut, then the set-up's remarks).
#[allow(clippy::too_many_arguments)]
fn assemble(
    m: &Manifest,
    reader: &Reader,
    traces: CutTraces,
    gating: Gating,
    planned: Vec<PlannedCut>,
    bins: Vec<PlannedBin>,
    worked: Vec<Option<BinDone>>,
    mut figures: HeldFigures,
) -> anyhow::Result<CutsResult> {
    let mut file_warnings: Vec<(usize, String)> = Vec::new();
    let mut impulse = None;
    let mut cuts: Vec<CutPattern> = planned
        .iter()
        .map(|c| CutPattern {
            phi_deg: c.phi_deg,
            full_circle: c.full_circle,
            width_deg: c.width_deg,
            bins: Vec::new(),
        })
        .collect();
    let mut notes: Vec<Vec<String>> = vec![Vec::new(); planned.len()];
    for (b, d) in bins.iter().zip(worked) {
        let d = d.context("a bin was not worked")?;
        file_warnings.extend(d.warnings);
        impulse = impulse.or(d.impulse);
        let mut t = d.traces.into_iter();
        let co = t.next().context("no co-polar trace")?;
        let cross = t.next();
        figures.kept_bytes += [Some(&co), cross.as_ref()]
            .into_iter()
            .flatten()
            .map(|x| 2 * sweep_bytes(x.raw.len()) + 4)
            .sum::<usize>()
            + 16;
        if b.rows.len() > 1 {
            let files: Vec<(String, f64)> = b
                .rows
                .iter()
                .map(|&r| {
                    let row = &m.rows()[r];
                    (row.file.display().to_string(), row.angle_deg)
                })
                .collect();
            let c = &planned[b.cut];
            notes[b.cut].push(manifest_bins::combined_note(
                &files,
                b.theta_deg,
                c.width_deg,
            ));
        }
        cuts[b.cut].bins.push(CutBin {
            theta_deg: b.theta_deg,
            files: b.rows.len(),
            co,
            cross,
        });
    }
    file_warnings.sort_by_key(|(row, _)| *row);
    let mut warnings: Vec<String> = file_warnings.into_iter().map(|(_, w)| w).collect();
    for (c, n) in cuts.iter().zip(notes) {
        warnings.extend(n.into_iter().map(|w| format!("φ {}°: {w}", c.phi_deg)));
    }
    warnings.extend(gating.remarks.iter().cloned());
    Ok(CutsResult {
        name: format!("manifest {}", m.name()),
        traces,
        grid: reader.grid,
        gating,
        cuts,
        files: m.rows().len(),
        impulse,
        warnings,
        held: Some(figures),
    })
}
