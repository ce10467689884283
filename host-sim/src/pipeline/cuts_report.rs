//! The report folder of a scan of cuts ([`crate::pipeline::cuts`]).
//!
//! # Files
//!
//! - `pattern.csv`: a header row, then one row per cut, bin and pattern frequency, cuts in
//!   increasing φ and bins in increasing θ. The first nine columns are those of a one-cut
//!   report ([`crate::output::report`]) for the co-polar trace (`angle_deg` is θ, `sweeps`
//!   the files averaged, `flags` empty), then `theta_deg`, `phi_deg`, `co_gated_db`,
//!   `co_raw_db`, `cross_gated_db`, `cross_raw_db`, `cross_gated_phase_deg`,
//!   `cross_raw_phase_deg`, `cross_echo_db` and `xpd_db` (co-polar minus cross-polar gated
//!   level, dB). Levels are 20·log10|value|, not normalized. Without a cross-polar trace
//!   its columns are empty.
//! - `summary.json`: title, source, settings, counters, warnings, the traces, and per cut
//!   and pattern frequency the co-polar peak (level and θ), the cross-polar peak and its
//!   level relative to the co-polar peak, and the cross-polar discrimination on axis (at
//!   the bin nearest θ = 0°, named with its θ) and at the co-polar peak; the folder of each
//!   cut's own report; the number of points on the sphere; `sphere`, per pattern
//!   frequency, the directivity by quadrature (`directivity_dbi`, with its sampling error;
//!   `null` with the reason when the cuts do not make a regular θ–φ grid) and the
//!   cross-polar discrimination on axis and over the main beam
//!   ([`crate::pipeline::sphere_report::sphere_summary`]).
//! - `sphere.csv` (θ, φ, frequency, co- and cross-polar levels and complex values) and, per
//!   pattern frequency, `sphere_map_<f>mhz.svg` (θ–φ colour map of the co-polar level) and
//!   `sphere_cuts_<f>mhz.svg` (the cuts overlaid)
//!   ([`crate::pipeline::sphere_report::sphere_files`]).
//! - `cut-phi<φ>/`: per cut, the one-cut report of its co-polar trace (pattern table,
//!   summary with the pattern figures, plots; the first cut's with the impulse response).
//!
//! The files are written as one set, made and staged a part at a time
//! ([`write_cuts_report`]).

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use anyhow::Context;
use serde_json::{json, Value};
use sweepgate::metrics::wrap_deg;
use sweepgate::Complex32;

use crate::formats::files::{check_output_dir, FileError, StagedSet};
use crate::output::report::{report_files, ReportBin, ReportInput, ReportValue};
use crate::pipeline::cuts::{CutPattern, CutsResult, TraceBin};
use crate::pipeline::sphere_report::{each_sphere_plot, sphere_summary, write_sphere_csv};
use crate::pipeline::summary::Settings;
use crate::pipeline::transform::c64;
use crate::units::db;

/// The folder name of cut `phi_deg`'s own report.
pub fn cut_folder(phi_deg: f64) -> String {
    format!("cut-phi{phi_deg}")
}

fn level(t: Option<&TraceBin>, fi: usize, gated: bool) -> Option<f64> {
    let t = t?;
    let v = if gated { &t.gated } else { &t.raw };
    v.get(fi).map(|z| db(c64(*z)))
}

fn phase(t: Option<&TraceBin>, fi: usize, gated: bool) -> Option<f64> {
    let t = t?;
    let v = if gated { &t.gated } else { &t.raw };
    v.get(fi).map(|z| f64::from(z.arg()).to_degrees())
}

fn opt(v: Option<f64>, decimals: usize) -> String {
    v.map_or(String::new(), |x| format!("{x:.decimals$}"))
}

/// The table's header line.
const PATTERN_HEADER: &str =
    "angle_deg,frequency_hz,raw_db,gated_db,gated_phase_deg,raw_phase_deg,echo_db,sweeps,flags,\
     theta_deg,phi_deg,co_gated_db,co_raw_db,cross_gated_db,cross_raw_db,\
     cross_gated_phase_deg,cross_raw_phase_deg,cross_echo_db,xpd_db\n";

/// The table as text (columns in the module docs).
pub fn pattern_csv(res: &CutsResult) -> String {
    let mut out = Vec::new();
    // Writing into memory does not fail.
    let _ = write_pattern_csv(res, &mut out);
    String::from_utf8_lossy(&out).into_owned()
}

/// The table written a bin at a time into `out`.
pub fn write_pattern_csv(res: &CutsResult, out: &mut dyn std::io::Write) -> std::io::Result<()> {
    out.write_all(PATTERN_HEADER.as_bytes())?;
    let mut s = String::new();
    for c in &res.cuts {
        for b in &c.bins {
            s.clear();
            for (fi, f) in res.gating.frequencies_hz.iter().enumerate() {
                let co = Some(&b.co);
                let x = b.cross.as_ref();
                let (co_g, x_g) = (level(co, fi, true), level(x, fi, true));
                let _ = writeln!(
                    s,
                    "{:.3},{:.0},{},{},{},{},{:.2},{},,{:.3},{:.3},{},{},{},{},{},{},{},{}",
                    b.theta_deg,
                    f,
                    opt(level(co, fi, false), 6),
                    opt(co_g, 6),
                    opt(phase(co, fi, true), 5),
                    opt(phase(co, fi, false), 5),
                    b.co.echo_db,
                    b.files,
                    b.theta_deg,
                    c.phi_deg,
                    opt(co_g, 6),
                    opt(level(co, fi, false), 6),
                    opt(x_g, 6),
                    opt(level(x, fi, false), 6),
                    opt(phase(x, fi, true), 5),
                    opt(phase(x, fi, false), 5),
                    opt(x.map(|t| f64::from(t.echo_db)), 2),
                    opt(co_g.zip(x_g).map(|(a, b)| a - b), 6),
                );
            }
            out.write_all(s.as_bytes())?;
        }
    }
    Ok(())
}

/// Per pattern frequency of one cut: peaks and cross-polar discrimination.
fn cut_figures(c: &CutPattern, fi: usize, frequency_hz: f64) -> Value {
    let co: Vec<f64> = c
        .bins
        .iter()
        .map(|b| level(Some(&b.co), fi, true).unwrap_or(f64::NAN))
        .collect();
    let cross: Vec<Option<f64>> = c
        .bins
        .iter()
        .map(|b| level(b.cross.as_ref(), fi, true))
        .collect();
    let argmax = |v: &[f64]| {
        v.iter()
            .enumerate()
            .max_by(|a, b| a.1.total_cmp(b.1))
            .map(|(i, _)| i)
    };
    let Some(peak) = argmax(&co) else {
        return Value::Null;
    };
    let on_axis = c
        .bins
        .iter()
        .enumerate()
        .min_by(|a, b| {
            wrap_deg(a.1.theta_deg)
                .abs()
                .total_cmp(&wrap_deg(b.1.theta_deg).abs())
        })
        .map_or(peak, |(i, _)| i);
    let xpd = |i: usize| cross[i].map(|x| co[i] - x);
    let cross_levels: Vec<f64> = cross.iter().map(|x| x.unwrap_or(f64::NAN)).collect();
    let cross_peak = cross
        .iter()
        .all(Option::is_some)
        .then(|| argmax(&cross_levels))
        .flatten();
    json!({
        "frequency_hz": frequency_hz,
        "co_peak_db": co[peak],
        "co_peak_theta_deg": c.bins[peak].theta_deg,
        "cross_peak_db": cross_peak.map(|i| cross_levels[i]),
        "cross_peak_theta_deg": cross_peak.map(|i| c.bins[i].theta_deg),
        "cross_peak_relative_to_co_peak_db": cross_peak.map(|i| cross_levels[i] - co[peak]),
        "on_axis_theta_deg": c.bins[on_axis].theta_deg,
        "xpd_on_axis_db": xpd(on_axis),
        "xpd_at_co_peak_db": xpd(peak),
    })
}

/// The summary as JSON.
pub fn summary_json(res: &CutsResult, source: &Path, settings: Value) -> Value {
    let cuts: Vec<Value> = res
        .cuts
        .iter()
        .map(|c| {
            let per_frequency: Vec<Value> = res
                .gating
                .frequencies_hz
                .iter()
                .enumerate()
                .map(|(fi, f)| cut_figures(c, fi, *f))
                .collect();
            json!({
                "phi_deg": c.phi_deg,
                "bins": c.bins.len(),
                "full_circle": c.full_circle,
                "bin_width_deg": c.width_deg,
                "report": cut_folder(c.phi_deg),
                "per_frequency": per_frequency,
            })
        })
        .collect();
    let bins: usize = res.cuts.iter().map(|c| c.bins.len()).sum();
    let points = res.sphere_points();
    json!({
        "title": res.name,
        "source": source.display().to_string(),
        "settings": settings,
        "counters": {"files": res.files, "cuts": res.cuts.len(), "bins": bins},
        "warnings": res.warnings,
        "traces": {
            "co": res.traces.co.to_string(),
            "cross": res.traces.cross.map(|p| p.to_string()),
        },
        "cuts": cuts,
        "sphere_points": points.len(),
        "sphere": sphere_summary(&points),
        "memory": memory_json(res),
        "caution": "A transmitting antenna can exceed RF exposure limits near its aperture and a positioner is moving machinery: follow local regulations and the lab's licensed practice.",
    })
}

/// `memory` of `summary.json`: the path taken (`"bounded"` or `"whole"`), what the bounded
/// path held, and the program's peak resident memory (`VmHWM`) when the summary is made
/// (after every other report file; `null` with `"not available"` where the system does not
/// say).
pub fn memory_json(res: &CutsResult) -> Value {
    let held = res.held.map(|h| {
        json!({
            "first_look_bins": h.first_look_bins,
            "first_look_peak_bytes": h.first_look_peak_bytes,
            "gating_peak_bytes": h.gating_peak_bytes,
            "kept_bytes": h.kept_bytes,
            "threads": h.threads,
            "block_bins": h.block_bins,
        })
    });
    let mut v =
        crate::resident::peak_json("when summary.json was made, after the other report files");
    v["path"] = json!(if res.held.is_some() {
        "bounded"
    } else {
        "whole"
    });
    v["held"] = json!(held);
    v
}

/// The settings: the one-cut report's, with the traces and the cuts.
pub fn settings_json(res: &CutsResult) -> Value {
    let bins: usize = res.cuts.iter().map(|c| c.bins.len()).sum();
    let full = res.cuts.iter().all(|c| c.full_circle);
    let mut s = Settings::for_sweeps(&res.gating, bins, full);
    s.bins.width_deg = res.cuts.first().map(|c| c.width_deg as f32);
    s.parameter = Some(match res.traces.cross {
        Some(x) => format!("co-polar {}, cross-polar {x}", res.traces.co),
        None => format!("co-polar {}", res.traces.co),
    });
    let mut v = s.to_json();
    if let Some(o) = v.as_object_mut() {
        let phi: Vec<f64> = res.cuts.iter().map(|c| c.phi_deg).collect();
        o.insert("cuts_phi_deg".into(), json!(phi));
    }
    v
}

/// Cut `c`'s co-polar trace as a one-cut report input.
pub fn cut_report_input(res: &CutsResult, c: &CutPattern, settings: &Value) -> ReportInput {
    let z = |v: &[Complex32], i: usize| c64(v.get(i).copied().unwrap_or_default());
    let bins = c
        .bins
        .iter()
        .map(|b| ReportBin {
            angle_deg: b.theta_deg,
            mean_deg: b.theta_deg,
            sweeps: b.files as u32,
            flags: 0,
            echo_db: Some(f64::from(b.co.echo_db)),
            values: (0..res.gating.frequencies_hz.len())
                .map(|i| ReportValue {
                    raw: z(&b.co.raw, i),
                    gated: z(&b.co.gated, i),
                    truth: None,
                    angle_offset_deg: 0.0,
                })
                .collect(),
        })
        .collect();
    let first = res.cuts.first().map(|f| f.phi_deg) == Some(c.phi_deg);
    ReportInput {
        title: format!("{}, φ {}°, co-polar {}", res.name, c.phi_deg, res.traces.co),
        source: res.name.clone(),
        frequencies_hz: res.gating.frequencies_hz.clone(),
        full_circle: c.full_circle,
        bins,
        settings: settings.clone(),
        counters: json!({"bins": c.bins.len()}),
        warnings: Vec::new(),
        impulse: if first { res.impulse.clone() } else { None },
        gain: None,
    }
}

/// Cut folders made and staged together (a part of the set; see [`write_cuts_report`]).
const CUTS_PER_PART: usize = 16;

/// Writes the report folder of a scan of cuts as one set ([`StagedSet`]: every file
/// written and synced under a temporary name, all renamed at the end), made and staged a
/// part at a time (the tables written a bin at a time, each sphere plot, [`CUTS_PER_PART`] cut folders, the
/// summary), so that one part's bytes are held at once, not the whole folder's; returns the
/// files written.
pub fn write_cuts_report(
    res: &CutsResult,
    source: &Path,
    dir: &Path,
) -> anyhow::Result<Vec<PathBuf>> {
    let settings = settings_json(res);
    check_output_dir(dir)?;
    let mut set = StagedSet::default();
    let mut written: Vec<PathBuf> = Vec::new();
    set.stage_written(&dir.join("pattern.csv"), |w| write_pattern_csv(res, w))?;
    written.push(dir.join("pattern.csv"));
    let points = res.sphere_points();
    set.stage_written(&dir.join("sphere.csv"), |w| write_sphere_csv(&points, w))?;
    written.push(dir.join("sphere.csv"));
    let mut stage = |files: Vec<(PathBuf, Vec<u8>)>| -> anyhow::Result<()> {
        set.stage(&files)?;
        written.extend(files.into_iter().map(|(p, _)| p));
        Ok(())
    };
    each_sphere_plot(&points, &res.name, |name, bytes| {
        stage(vec![(dir.join(name), bytes)])
    })?;
    drop(points);
    for part in res.cuts.chunks(CUTS_PER_PART) {
        let mut files = Vec::new();
        for c in part {
            let sub = dir.join(cut_folder(c.phi_deg));
            std::fs::create_dir_all(&sub).map_err(|source| FileError::Io {
                action: "making the folder",
                path: sub.clone(),
                source,
            })?;
            let made = report_files(&cut_report_input(res, c, &settings))?;
            files.extend(
                made.into_iter()
                    .map(|(name, bytes)| (sub.join(name), bytes)),
            );
        }
        stage(files)?;
    }
    // Made last, so that its peak resident memory counts the other files.
    let summary = serde_json::to_string_pretty(&summary_json(res, source, settings))
        .context("making summary.json")?;
    stage(vec![(
        dir.join("summary.json"),
        (summary + "\n").into_bytes(),
    )])?;
    set.commit()?;
    Ok(written)
}
