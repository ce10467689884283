//! The report folder of a scan: a table, a summary and plots.
//!
//! Input is a plain [`ReportInput`] (bins with raw, gated and optionally true S21 at each
//! pattern frequency), so any producer can use it: `sweepgate replay` fills it from the scan
//! engine, `sweepgate process` from Touchstone files.
//!
//! # Files
//!
//! - `pattern.csv`: a header row, then one row per bin and pattern frequency, bins in angle
//!   order: `angle_deg,frequency_hz,raw_db,gated_db,gated_phase_deg,raw_phase_deg,echo_db,
//!   sweeps,flags`, `truth_db` when the truth is known, `gain_dbi` with gain by
//!   substitution and `near_band_edge` (`true`/`false`) when the settings carry the gate's
//!   band-edge marks (`settings.gate_self_error`). `raw_db` and `gated_db` are
//!   20·log10|S21| (not normalized) to 6 decimals, `gated_phase_deg` and `raw_phase_deg` the
//!   gated and raw values' arguments (−180…180) to 5 decimals (both together within 2e-7 of
//!   the value, relative), `echo_db` the bin's echo
//!   level (empty when not computed), `flags` the bin flags as words joined by `|`
//!   (`smeared`, `revisited`, `reversed`, `sparse`, `moving`, `extrapolated`, `combine`;
//!   empty when none). `angle_deg` is the bin centre.
//! - `summary.json`: title, source, settings, counters, warnings, and per pattern frequency
//!   the pattern figures ([`sweepgate::metrics::pattern_metrics`]) of the gated, raw and true
//!   cuts normalized to their peaks, plus the gated and raw errors against the truth.
//! - `pattern-rect-<MHz>MHz.svg`, `pattern-polar-<MHz>MHz.svg`: raw, gated and true pattern
//!   normalized to peak, against angle and in polar form.
//! - `impulse-boresight.svg`: the impulse response of the bin nearest 0° with the gate.
//!
//! The folder is written as one set (see [`write_report`]): a failed run leaves the last
//! good run's files, never a mix.
//!
//! Plots are SVG drawn by `plotters` with its SVG backend: text is written as SVG text
//! elements, so no fonts are needed on the machine.

mod plot;
pub mod sphere_plot;

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use anyhow::Context;
use num_complex::Complex64;
use serde_json::{json, Value};
use sweepgate::bins::BinFlags;
use sweepgate::metrics::{pattern_metrics, wrap_deg, Coverage, PatternMetrics};

use crate::formats::files::{check_output_dir, write_set, FileError};
use crate::units::{db, FLOOR_DB};

/// One pattern frequency's values in one bin.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ReportValue {
    /// Averaged raw S21.
    pub raw: Complex64,
    /// Gated S21.
    pub gated: Complex64,
    /// Free-space S21, when known.
    pub truth: Option<Complex64>,
    /// Where this frequency was measured relative to the bin's angle, degrees: the
    /// engine's [`sweepgate::scan::BinResult::angle_offset_deg`] (0 for sweeps taken still
    /// and for files at given angles).
    pub angle_offset_deg: f64,
}

/// One angle bin.
#[derive(Debug, Clone, PartialEq)]
pub struct ReportBin {
    /// Bin centre, degrees.
    pub angle_deg: f64,
    /// Mean measured angle of its sweeps, degrees.
    pub mean_deg: f64,
    /// Sweeps averaged.
    pub sweeps: u32,
    /// [`BinFlags`] bits.
    pub flags: u16,
    /// Echo level, dB, if computed.
    pub echo_db: Option<f64>,
    /// Values at each pattern frequency (same order as [`ReportInput::frequencies_hz`]).
    pub values: Vec<ReportValue>,
}

/// The impulse response of one bin with the gate, for the plot.
#[derive(Debug, Clone, PartialEq)]
pub struct ImpulseView {
    /// The bin's angle, degrees.
    pub angle_deg: f64,
    /// Sweeps averaged.
    pub sweeps: u32,
    /// Time of each sample, ns.
    pub time_ns: Vec<f64>,
    /// |h| of each sample (any scale).
    pub magnitude: Vec<f64>,
    /// Gate value (0…1) at each sample.
    pub gate: Vec<f64>,
    /// Where the gate opens, ns.
    pub gate_start_ns: f64,
    /// Where it closes, ns.
    pub gate_stop_ns: f64,
}

/// Everything a report is made from.
#[derive(Debug, Clone, PartialEq)]
pub struct ReportInput {
    /// Title (the scenario name), used in every plot.
    pub title: String,
    /// Where the data came from.
    pub source: String,
    /// Pattern frequencies, Hz.
    pub frequencies_hz: Vec<f64>,
    /// The bins cover a full turn.
    pub full_circle: bool,
    /// Bins (any order; the report sorts them by angle).
    pub bins: Vec<ReportBin>,
    /// Settings, as given (copied into the summary).
    pub settings: Value,
    /// Counters, as given (copied into the summary).
    pub counters: Value,
    /// Warnings.
    pub warnings: Vec<String>,
    /// Impulse response near boresight, if available.
    pub impulse: Option<ImpulseView>,
    /// Gain by substitution, when a reference antenna was measured in the same set-up.
    pub gain: Option<GainReference>,
}

/// Gain by substitution (gain transfer): G_AUT = G_ref + P_AUT − P_ref in dB, same range and
/// set-up (common practice, no source), with P the gated |S21|.
#[derive(Debug, Clone, PartialEq)]
pub struct GainReference {
    /// The reference antenna's gain table, as given.
    pub table: String,
    /// The reference antenna's measurement, as given.
    pub measurement: String,
    /// Per pattern frequency: the reference's gain (dBi) and its gated |S21| (dB).
    pub per_frequency: Vec<(f64, f64)>,
}

impl GainReference {
    /// Offset (dB) that turns gated dB into dBi at pattern frequency `fi`.
    pub fn offset_db(&self, fi: usize) -> Option<f64> {
        self.per_frequency.get(fi).map(|(g, p)| g - p)
    }
}

/// Flag bits as words joined by `|`.
pub fn flag_words(bits: u16) -> String {
    let names = [
        (BinFlags::SMEARED, "smeared"),
        (BinFlags::REVISITED, "revisited"),
        (BinFlags::REVERSED, "reversed"),
        (BinFlags::SPARSE, "sparse"),
        (BinFlags::MOVING, "moving"),
        (BinFlags::EXTRAPOLATED, "extrapolated"),
        (BinFlags::COMBINE, "combine"),
        (BinFlags::ECHO_IN_GATE, "echo_in_gate"),
        (BinFlags::DIRECT_OUTSIDE_GATE, "direct_outside_gate"),
    ];
    names
        .iter()
        .filter(|(b, _)| bits & b != 0)
        .map(|(_, n)| *n)
        .collect::<Vec<_>>()
        .join("|")
}

/// A cut at one pattern frequency: angles (increasing) and raw, gated and true values.
#[derive(Debug, Clone, Default)]
pub struct Cut {
    /// Angles, degrees, strictly increasing (wrapped to −180…180 for a full circle): the
    /// bins' angles, where the truth is known.
    pub angles_deg: Vec<f64>,
    /// Angles at which the raw and gated values were measured: each bin's mean measured
    /// angle (the mean of its sweeps' mid-time angles, [`ReportBin::mean_deg`]) plus its
    /// angle offset at this frequency ([`ReportValue::angle_offset_deg`]), in the order of
    /// `angles_deg` (added to the wrapped bin angle, not wrapped again). The pattern figures
    /// of the raw and gated cuts are taken on these.
    pub measured_deg: Vec<f64>,
    /// Raw level, dB.
    pub raw_db: Vec<f64>,
    /// Gated level, dB.
    pub gated_db: Vec<f64>,
    /// True level, dB (empty when any is unknown).
    pub truth_db: Vec<f64>,
}

fn normalized(v: &[f64]) -> Vec<f64> {
    let peak = v.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    v.iter().map(|x| (x - peak).max(FLOOR_DB)).collect()
}

impl Cut {
    /// Raw cut normalized to its peak.
    pub fn raw_norm(&self) -> Vec<f64> {
        normalized(&self.raw_db)
    }
    /// Gated cut normalized to its peak.
    pub fn gated_norm(&self) -> Vec<f64> {
        normalized(&self.gated_db)
    }
    /// True cut normalized to its peak.
    pub fn truth_norm(&self) -> Vec<f64> {
        normalized(&self.truth_db)
    }
}

impl ReportInput {
    /// Bins in angle order.
    pub fn sorted_bins(&self) -> Vec<&ReportBin> {
        let key = |b: &ReportBin| {
            if self.full_circle {
                wrap_deg(b.angle_deg)
            } else {
                b.angle_deg
            }
        };
        let mut v: Vec<&ReportBin> = self.bins.iter().collect();
        v.sort_by(|a, b| key(a).total_cmp(&key(b)));
        v.dedup_by(|a, b| (key(a) - key(b)).abs() < 1e-9);
        v
    }

    /// The cut at pattern frequency number `fi`.
    pub fn cut(&self, fi: usize) -> Cut {
        let mut c = Cut::default();
        let mut all_truth = true;
        let mut truth = Vec::new();
        for b in self.sorted_bins() {
            let Some(v) = b.values.get(fi) else { continue };
            let wrap = |a: f64| if self.full_circle { wrap_deg(a) } else { a };
            c.angles_deg.push(wrap(b.angle_deg));
            // Not wrapped again: an offset must not move the first or last bin across the
            // seam and out of order.
            let mean = wrap_deg(b.mean_deg - b.angle_deg);
            c.measured_deg
                .push(wrap(b.angle_deg) + mean + v.angle_offset_deg);
            c.raw_db.push(db(v.raw));
            c.gated_db.push(db(v.gated));
            match v.truth {
                Some(t) => truth.push(db(t)),
                None => all_truth = false,
            }
        }
        if all_truth {
            c.truth_db = truth;
        }
        c
    }

    /// Pattern figures of a normalized cut.
    pub fn metrics(&self, angles: &[f64], levels: &[f64]) -> Option<PatternMetrics> {
        let cov = if self.full_circle {
            Coverage::FullCircle
        } else {
            Coverage::Sector
        };
        pattern_metrics(angles, levels, cov).ok()
    }
}

/// Gated and raw errors against the truth at one pattern frequency, all cuts normalized to
/// their own peaks.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TruthErrors {
    /// The frequency, Hz.
    pub frequency_hz: f64,
    /// Largest |gated − truth| where truth ≥ −10 dB.
    pub gated_within_10_db: f64,
    /// Largest |gated − truth| where truth ≥ −25 dB.
    pub gated_within_25_db: f64,
    /// Largest |raw − truth| where truth ≥ −25 dB.
    pub raw_within_25_db: f64,
    /// Bins compared.
    pub bins: usize,
}

/// Errors against the truth at pattern frequency number `fi` (`None` without truth).
pub fn truth_errors(input: &ReportInput, fi: usize) -> Option<TruthErrors> {
    let c = input.cut(fi);
    if c.truth_db.is_empty() {
        return None;
    }
    let (t, g, r) = (c.truth_norm(), c.gated_norm(), c.raw_norm());
    let worst = |lim: f64, m: &[f64]| {
        t.iter()
            .zip(m)
            .filter(|(t, _)| **t >= lim)
            .map(|(t, m)| (m - t).abs())
            .fold(0.0f64, f64::max)
    };
    Some(TruthErrors {
        frequency_hz: *input.frequencies_hz.get(fi)?,
        gated_within_10_db: worst(-10.0, &g),
        gated_within_25_db: worst(-25.0, &g),
        raw_within_25_db: worst(-25.0, &r),
        bins: t.len(),
    })
}

fn metrics_json(m: Option<PatternMetrics>) -> Value {
    let Some(m) = m else { return Value::Null };
    let lobe = |l: Option<sweepgate::metrics::Lobe>| {
        l.map_or(
            Value::Null,
            |l| json!({"angle_deg": l.angle_deg, "level_db": l.level_db}),
        )
    };
    json!({
        "peak_db": m.peak_db,
        "peak_angle_deg": m.peak_angle_deg,
        "hpbw_deg": m.beam_3db.map(|b| b.width_deg()),
        "beam_3db_deg": m.beam_3db.map(|b| [b.lower_deg, b.upper_deg]),
        "beam_10db_width_deg": m.beam_10db.map(|b| b.width_deg()),
        "first_null_lower_deg": m.first_null_lower_deg,
        "first_null_upper_deg": m.first_null_upper_deg,
        "first_sidelobe_lower": lobe(m.first_sidelobe_lower),
        "first_sidelobe_upper": lobe(m.first_sidelobe_upper),
        "highest_sidelobe": lobe(m.highest_sidelobe),
        "front_to_back_db": m.front_to_back_db,
        "squint_deg": m.squint_deg,
    })
}

fn mhz_name(f_hz: f64) -> String {
    format!("{:.0}MHz", f_hz / 1e6)
}

/// The table as text.
pub fn pattern_csv(input: &ReportInput) -> String {
    let has_truth = input
        .bins
        .iter()
        .all(|b| b.values.iter().all(|v| v.truth.is_some()))
        && !input.bins.is_empty();
    let mut s = String::from(
        "angle_deg,frequency_hz,raw_db,gated_db,gated_phase_deg,raw_phase_deg,echo_db,sweeps,flags",
    );
    if has_truth {
        s.push_str(",truth_db");
    }
    if input.gain.is_some() {
        s.push_str(",gain_dbi");
    }
    // The band-edge mark of each pattern frequency, when the settings carry it.
    let edges: Option<Vec<bool>> = input
        .settings
        .get("gate_self_error")
        .and_then(Value::as_array)
        .map(|a| a.iter().map(|e| e["near_band_edge"] == true).collect());
    if edges.is_some() {
        s.push_str(",near_band_edge");
    }
    s.push('\n');
    for b in input.sorted_bins() {
        for (fi, (v, f)) in b.values.iter().zip(&input.frequencies_hz).enumerate() {
            let _ = write!(
                s,
                "{:.3},{:.0},{:.6},{:.6},{:.5},{:.5},{},{},{}",
                b.angle_deg,
                f,
                db(v.raw),
                db(v.gated),
                v.gated.arg().to_degrees(),
                v.raw.arg().to_degrees(),
                b.echo_db.map_or(String::new(), |e| format!("{e:.2}")),
                b.sweeps,
                flag_words(b.flags)
            );
            if has_truth {
                let _ = write!(s, ",{:.6}", v.truth.map_or(f64::NAN, db));
            }
            if let Some(g) = &input.gain {
                let fi = input
                    .frequencies_hz
                    .iter()
                    .position(|x| x == f)
                    .unwrap_or(0);
                let _ = write!(
                    s,
                    ",{:.6}",
                    db(v.gated) + g.offset_db(fi).unwrap_or(f64::NAN)
                );
            }
            if let Some(e) = &edges {
                let _ = write!(s, ",{}", e.get(fi).copied().unwrap_or(false));
            }
            s.push('\n');
        }
    }
    s
}

/// The summary as JSON.
pub fn summary_json(input: &ReportInput) -> Value {
    let mut per_freq = Vec::new();
    for (fi, f) in input.frequencies_hz.iter().enumerate() {
        let c = input.cut(fi);
        let truth = if c.truth_db.is_empty() {
            Value::Null
        } else {
            metrics_json(input.metrics(&c.angles_deg, &c.truth_norm()))
        };
        let err = truth_errors(input, fi).map_or(Value::Null, |e| {
            json!({
                "gated_worst_db_where_truth_above_-10_db": e.gated_within_10_db,
                "gated_worst_db_where_truth_above_-25_db": e.gated_within_25_db,
                "raw_worst_db_where_truth_above_-25_db": e.raw_within_25_db,
                "bins": e.bins,
            })
        });
        let gain = input.gain.as_ref().map_or(Value::Null, |g| {
            let (g_ref, p_ref) = g
                .per_frequency
                .get(fi)
                .copied()
                .unwrap_or((f64::NAN, f64::NAN));
            let peak = input
                .bins
                .iter()
                .filter_map(|b| b.values.get(fi))
                .map(|v| db(v.gated))
                .fold(f64::NEG_INFINITY, f64::max);
            json!({
                "reference_gain_dbi": g_ref,
                "reference_gated_db": p_ref,
                "peak_gain_dbi": peak + g_ref - p_ref,
            })
        });
        per_freq.push(json!({
            "frequency_hz": f,
            "absolute_gain": gain,
            "gated": metrics_json(input.metrics(&c.measured_deg, &c.gated_norm())),
            "raw": metrics_json(input.metrics(&c.measured_deg, &c.raw_norm())),
            "truth": truth,
            "error_vs_truth": err,
        }));
    }
    json!({
        "title": input.title,
        "source": input.source,
        "settings": input.settings,
        "counters": input.counters,
        "bins": input.bins.len(),
        "warnings": input.warnings,
        "gain_by_substitution": input.gain.as_ref().map(|g| json!({
            "reference_gain_table": g.table,
            "reference_measurement": g.measurement,
            "method": "G_AUT = G_ref + P_AUT - P_ref (dB), gated |S21|, same range and set-up",
        })),
        "metrics_normalized_to_peak": per_freq,
        "caution": "A transmitting antenna can exceed RF exposure limits near its aperture and a positioner is moving machinery: follow local regulations and the lab's licensed practice.",
    })
}

/// The report's files and their contents, made in memory (nothing is written).
pub fn report_files(input: &ReportInput) -> anyhow::Result<Vec<(String, Vec<u8>)>> {
    report_files_on(input, 1)
}

/// One file of the report.
#[derive(Debug, Clone, Copy)]
enum Part {
    Table,
    Summary,
    Rect(usize),
    Polar(usize),
    Impulse,
}

/// The report's files, in the order they are written.
fn parts(input: &ReportInput) -> Vec<Part> {
    let mut parts = vec![Part::Table, Part::Summary];
    if !input.bins.is_empty() {
        for fi in 0..input.frequencies_hz.len() {
            parts.extend([Part::Rect(fi), Part::Polar(fi)]);
        }
    }
    if input.impulse.is_some() {
        parts.push(Part::Impulse);
    }
    parts
}

/// One file's name and contents.
fn make(input: &ReportInput, part: Part) -> anyhow::Result<(String, Vec<u8>)> {
    let hz = |fi: usize| input.frequencies_hz.get(fi).map_or(0.0, |f| *f);
    let (name, text) = match part {
        Part::Table => ("pattern.csv".to_owned(), pattern_csv(input)),
        Part::Summary => {
            let text = serde_json::to_string_pretty(&summary_json(input))
                .context("making summary.json")?;
            ("summary.json".to_owned(), text + "\n")
        }
        Part::Rect(fi) => {
            let name = format!("pattern-rect-{}.svg", mhz_name(hz(fi)));
            let svg = plot::rect(&name, input, fi)?;
            (name, svg)
        }
        Part::Polar(fi) => {
            let name = format!("pattern-polar-{}.svg", mhz_name(hz(fi)));
            let svg = plot::polar(&name, input, fi)?;
            (name, svg)
        }
        Part::Impulse => {
            let iv = input
                .impulse
                .as_ref()
                .context("no impulse response to plot")?;
            let svg = plot::impulse(IMPULSE_PLOT, input, iv)?;
            (IMPULSE_PLOT.to_owned(), svg)
        }
    };
    Ok((name, text.into_bytes()))
}

/// [`report_files`], each file made on one of up to `threads` threads; the same files,
/// byte for byte and in the same order, for any number.
pub fn report_files_on(
    input: &ReportInput,
    threads: usize,
) -> anyhow::Result<Vec<(String, Vec<u8>)>> {
    let parts = parts(input);
    crate::threads::map_blocks(
        &parts,
        threads,
        1,
        || (),
        |_, block| block.iter().map(|&p| make(input, p)).collect(),
    )
    .into_iter()
    .collect()
}

/// The impulse plot's file name.
const IMPULSE_PLOT: &str = "impulse-boresight.svg";

/// Whether `name` is one of the names a report writes (table, summary, plots).
fn is_report_name(name: &str) -> bool {
    let plot = |prefix: &str| {
        name.strip_prefix(prefix)
            .and_then(|r| r.strip_suffix("MHz.svg"))
            .is_some_and(|mhz| !mhz.is_empty() && mhz.bytes().all(|b| b.is_ascii_digit()))
    };
    matches!(name, "pattern.csv" | "summary.json" | IMPULSE_PLOT)
        || plot("pattern-rect-")
        || plot("pattern-polar-")
}

/// Writes the report folder as one set; returns the files written.
///
/// Every file is made in memory first, then written by [`write_set`]: each to a temporary
/// name and synced, and only when all are on the disk renamed into place. So a run that
/// fails (a refused input, a full disk, an unwritable folder) leaves the folder as the last
/// good run left it, and the error names the file that could not be written. After the
/// renames, report files of an earlier run that this run does not write (plots at other
/// pattern frequencies, an impulse plot this run has none of) are removed, so the folder
/// always holds one run's consistent set. Files with other names are left alone.
pub fn write_report(input: &ReportInput, dir: &Path) -> anyhow::Result<Vec<PathBuf>> {
    let made = report_files(input)?;
    check_output_dir(dir)?;
    write_made(made, dir)
}

/// [`write_report`] into a folder the caller has checked with [`check_output_dir`], the
/// files made on up to `threads` threads (the same files for any number).
pub fn write_report_on(
    input: &ReportInput,
    dir: &Path,
    threads: usize,
) -> anyhow::Result<Vec<PathBuf>> {
    let made = report_files_on(input, threads)?;
    crate::phase_times::mark("report made");
    write_made(made, dir)
}

/// Writes the made files into `dir` as one set and removes an earlier run's report files
/// that this set does not hold.
fn write_made(made: Vec<(String, Vec<u8>)>, dir: &Path) -> anyhow::Result<Vec<PathBuf>> {
    let set: Vec<(PathBuf, Vec<u8>)> = made
        .into_iter()
        .map(|(name, bytes)| (dir.join(name), bytes))
        .collect();
    write_set(&set)?;
    let files: Vec<PathBuf> = set.into_iter().map(|(p, _)| p).collect();
    let entries = std::fs::read_dir(dir).map_err(|source| FileError::Io {
        action: "listing",
        path: dir.to_path_buf(),
        source,
    })?;
    for entry in entries.flatten() {
        let path = entry.path();
        let name = entry.file_name();
        let stale = name.to_str().is_some_and(is_report_name) && !files.contains(&path);
        if stale && entry.file_type().is_ok_and(|t| t.is_file()) {
            std::fs::remove_file(&path).map_err(|source| FileError::Io {
                action: "removing the earlier run's",
                path: path.clone(),
                source,
            })?;
        }
    }
    Ok(files)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn bin(angle_deg: f64) -> ReportBin {
        ReportBin {
            angle_deg,
            mean_deg: angle_deg,
            sweeps: 1,
            flags: 0,
            echo_db: None,
            values: vec![ReportValue {
                raw: Complex64::new(1.0, 0.0),
                gated: Complex64::new(0.5, 0.0),
                truth: None,
                angle_offset_deg: 0.0,
            }],
        }
    }

    #[test]
    fn a_full_circle_is_ordered_in_the_cores_angle_range() {
        // `sweepgate::metrics::wrap_deg` maps onto (−180°, 180°]: a bin at 540° is the
        // bin at 180°, the last of the cut; −180° is the same bin and is dropped.
        let input = ReportInput {
            title: "t".into(),
            source: "s".into(),
            frequencies_hz: vec![1e9],
            full_circle: true,
            bins: [540.0, -90.0, 0.1, 90.0, -180.0].map(bin).to_vec(),
            settings: Value::Null,
            counters: Value::Null,
            warnings: Vec::new(),
            impulse: None,
            gain: None,
        };
        let c = input.cut(0);
        assert_eq!(c.angles_deg, [-90.0, 0.1, 90.0, 180.0]);
        assert_eq!(c.gated_db[0], db(Complex64::new(0.5, 0.0)));
        let mut sector = input.clone();
        sector.full_circle = false;
        assert_eq!(sector.cut(0).angles_deg, [-180.0, -90.0, 0.1, 90.0, 540.0]);
    }

    #[test]
    fn the_files_are_the_same_made_on_any_number_of_threads() {
        // Two pattern frequencies, a pattern over a full turn: a table, a summary and four
        // plots, each made once on one thread and again spread over two and three.
        let bins: Vec<ReportBin> = (0..72)
            .map(|i| {
                let angle_deg = -180.0 + 5.0 * f64::from(i);
                let level = 0.1 + angle_deg.to_radians().cos().abs();
                let mut b = bin(angle_deg);
                b.echo_db = Some(-30.0 - f64::from(i % 7));
                b.values = [1.0, 0.5]
                    .map(|k| ReportValue {
                        raw: Complex64::from_polar(level * k, angle_deg.to_radians()),
                        gated: Complex64::from_polar(0.9 * level * k, 0.3),
                        truth: None,
                        angle_offset_deg: 0.0,
                    })
                    .to_vec();
                b
            })
            .collect();
        let input = ReportInput {
            title: "t".into(),
            source: "s".into(),
            frequencies_hz: vec![9e9, 10e9],
            full_circle: true,
            bins,
            settings: Value::Null,
            counters: Value::Null,
            warnings: vec!["a warning".into()],
            impulse: None,
            gain: None,
        };
        let one = report_files(&input).unwrap();
        let names: Vec<&str> = one.iter().map(|(n, _)| n.as_str()).collect();
        assert_eq!(
            names,
            [
                "pattern.csv",
                "summary.json",
                "pattern-rect-9000MHz.svg",
                "pattern-polar-9000MHz.svg",
                "pattern-rect-10000MHz.svg",
                "pattern-polar-10000MHz.svg"
            ]
        );
        assert_eq!(one[0].1, pattern_csv(&input).into_bytes());
        assert_eq!(
            String::from_utf8_lossy(&one[0].1).lines().count(),
            1 + 72 * 2
        );
        for threads in [2, 3] {
            assert!(
                report_files_on(&input, threads).unwrap() == one,
                "{threads} threads"
            );
        }
    }
}
