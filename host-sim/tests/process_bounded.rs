//! A scan of cuts in bounded memory (`process --bounded-memory`,
//! `pipeline::cuts_bounded`) against the whole path (`pipeline::cuts::process_cuts`, every
//! file's sweeps held): the same numbers bit for bit (the bounded path plans the same bins
//! from the angles, averages with the same sums in the same order, chooses the gate from the
//! same sweeps the survey looks at, and gates each bin alone, as the whole path does), what
//! it holds does not grow with the rows, and `summary.json` carries the program's peak
//! resident memory.
//!
//! The files come from a model written here for the test: a dual-polarised probe (S21
//! co-polar, S31 cross-polar) seeing closed-form patterns of (θ, φ) along a direct path, plus
//! a wall echo and a floor echo at fixed delays (Fourier shift theorem, e^(−j2πfτ)).

use std::path::{Path, PathBuf};
use std::process::Command;

use serde_json::Value;
use sweepgate_host::pipeline::cuts::{process_cuts, CutJob, CutsResult};
use sweepgate_host::pipeline::cuts_bounded::{process_cuts_bounded, BLOCK_BINS};
use sweepgate_host::pipeline::data_gate::MAX_LOOKS;
use sweepgate_host::pipeline::options::GateOptions;
use sweepgate_host::pipeline::process::{resolve, Options};

/// The FFT size the gate uses for 201 points.
const FFT_POINTS: usize = 1024;
const TRACES: usize = 2;

mod cut_model;
use cut_model::{s3p, POINTS};

fn scratch(tag: &str) -> PathBuf {
    cut_model::scratch("bounded", tag)
}

/// A sphere manifest at `step` degrees (θ 0…180, φ 0…360 − step), rows in a shuffled order,
/// each row naming one of `distinct` files (made at directions of their own).
fn sphere(dir: &Path, step: usize, distinct: usize) -> PathBuf {
    let mut rows = Vec::new();
    for phi in (0..360).step_by(step) {
        for theta in (0..=180).step_by(step) {
            rows.push((theta, phi));
        }
    }
    // Manifest order unlike the plan's: every 7th row first.
    let mut order: Vec<usize> = (0..rows.len()).collect();
    order.sort_by_key(|i| (i % 7, *i));
    let mut text = String::from("theta_deg,phi_deg,file\n");
    for &i in &order {
        let (theta, phi) = rows[i];
        let cell = i % distinct;
        let name = format!("f{cell}.s3p");
        if !dir.join(&name).exists() {
            let (t, p) = rows[cell * rows.len() / distinct];
            std::fs::write(dir.join(&name), s3p(t as f64 + 1.0, p as f64 + 2.0)).unwrap();
        }
        text.push_str(&format!("{theta},{phi},{name}\n"));
    }
    let m = dir.join("sphere.csv");
    std::fs::write(&m, text).unwrap();
    m
}

fn options(manifest: &Path, threads: usize, gate: Option<(f64, f64)>) -> Options {
    Options {
        manifest: Some(manifest.to_path_buf()),
        co: Some("S21".into()),
        cross: Some("S31".into()),
        threads: Some(threads),
        gate: GateOptions {
            frequencies_hz: Some("9e9,10e9,11e9".into()),
            gate_center_ns: gate.map(|g| g.0),
            gate_span_ns: gate.map(|g| g.1),
            ..GateOptions::default()
        },
        ..Options::default()
    }
}

/// Both paths; `width`: a bin width (files sharing a bin are averaged).
fn both(
    manifest: &Path,
    threads: usize,
    gate: Option<(f64, f64)>,
    width: Option<f64>,
) -> (CutsResult, CutsResult) {
    let mut r = resolve(&options(manifest, threads, gate)).unwrap();
    r.choices.bin_width_deg = width;
    let traces = r.traces.clone().unwrap();
    let job = CutJob {
        choices: &r.choices,
        spacing: r.spacing,
        threads: r.threads,
    };
    let whole = process_cuts(&job, manifest, traces.clone()).unwrap();
    let bounded = process_cuts_bounded(&job, manifest, traces).unwrap();
    (whole, bounded)
}

/// Every number the report is made from, the same bit for bit (`PartialEq` of f32 and f64
/// values: no tolerance).
fn assert_same(whole: &CutsResult, bounded: &CutsResult) {
    assert_eq!(whole.cuts, bounded.cuts);
    assert_eq!(whole.impulse, bounded.impulse);
    assert_eq!(whole.warnings, bounded.warnings);
    assert_eq!(whole.files, bounded.files);
    assert_eq!(whole.gating.gate, bounded.gating.gate);
    assert_eq!(whole.gating.indices, bounded.gating.indices);
    assert_eq!(whole.gating.gate_source, bounded.gating.gate_source);
    assert_eq!(
        whole
            .gating
            .data
            .as_ref()
            .map(|d| (d.rule.clone(), d.sweeps)),
        bounded
            .gating
            .data
            .as_ref()
            .map(|d| (d.rule.clone(), d.sweeps))
    );
    assert!(whole.held.is_none() && bounded.held.is_some());
}

#[test]
fn the_bounded_path_gives_the_whole_paths_numbers_bit_for_bit() {
    let dir = scratch("same");
    let m = sphere(&dir, 30, 9);
    for threads in [1, 2] {
        let (whole, bounded) = both(&m, threads, None, None);
        assert_eq!(whole.gating.gate_source, "chosen from the data");
        assert!(whole.warnings.is_empty(), "{:?}", whole.warnings);
        assert!(whole.impulse.is_some());
        assert_same(&whole, &bounded);
    }
    // 60° bins over 30° steps: bins of two and three files, averaged.
    let (whole, bounded) = both(&m, 2, None, Some(60.0));
    assert!(
        whole
            .warnings
            .iter()
            .any(|w| w.contains("2 files fall into one bin")),
        "{:?}",
        whole.warnings
    );
    assert_same(&whole, &bounded);
    // And the report files the command writes: the same bytes, summary.json the same but
    // for its `memory`.
    let run = |extra: &[&str], out: &Path| {
        let st = cut_model::process_cuts()
            .args(["--frequencies-hz", "10e9"])
            .args(extra)
            .arg("--out")
            .arg(out)
            .arg(&m)
            .output()
            .unwrap();
        let err = String::from_utf8_lossy(&st.stderr).to_string();
        assert!(st.status.success(), "{err}");
        err
    };
    let (a, b) = (dir.join("whole"), dir.join("bounded"));
    let err_a = run(&[], &a);
    let err_b = run(&["--bounded-memory"], &b);
    assert!(err_b.contains("bounded memory: at most"), "{err_b}");
    assert!(!err_a.contains("bounded memory"), "{err_a}");
    for e in [&err_a, &err_b] {
        assert!(e.contains("peak resident memory: "), "{e}");
    }
    for f in [
        "pattern.csv",
        "sphere.csv",
        "sphere_map_10000mhz.svg",
        "cut-phi0/pattern.csv",
    ] {
        let read = |d: &Path| std::fs::read(d.join(f)).unwrap();
        assert!(read(&a) == read(&b), "{f} differs");
    }
    let summary = |d: &Path| -> Value {
        serde_json::from_str(&std::fs::read_to_string(d.join("summary.json")).unwrap()).unwrap()
    };
    let (mut sa, mut sb) = (summary(&a), summary(&b));
    assert_eq!(sa["memory"]["path"], "whole");
    assert_eq!(sb["memory"]["path"], "bounded");
    assert!(
        sb["sphere"][0]["directivity_dbi"].is_f64(),
        "{}",
        sb["sphere"]
    );
    for s in [&mut sa, &mut sb] {
        s.as_object_mut().unwrap().remove("memory");
    }
    assert_eq!(sa, sb);
    std::fs::remove_dir_all(&dir).ok();
}

#[test]
fn what_the_bounded_path_holds_does_not_grow_with_the_rows() {
    // Whole sweeps a worker may hold at once: one file's traces being added, the bin's f64
    // sums, its means, and its gate buffers (one per trace, FFT size).
    let sweep = POINTS * 8;
    let per_worker = TRACES * (sweep + 2 * sweep + sweep) + TRACES * FFT_POINTS * 8;
    let threads = 2;
    let mut peaks = Vec::new();
    for (step, tag) in [(10, "10"), (5, "5")] {
        let dir = scratch(tag);
        let m = sphere(&dir, step, 12);
        let (whole, bounded) = both(&m, threads, None, None);
        assert_same(&whole, &bounded);
        let h = bounded.held.unwrap();
        let rows = bounded.files;
        let bins: usize = bounded.cuts.iter().map(|c| c.bins.len()).sum();
        assert_eq!((h.threads, h.block_bins), (threads, BLOCK_BINS));
        // While gating: at most every worker's share, at least one worker's buffers.
        assert!(h.gating_peak_bytes <= threads * per_worker, "{h:?}");
        assert!(h.gating_peak_bytes >= TRACES * FFT_POINTS * 8, "{h:?}");
        // The first look: the co-polar means of at most MAX_LOOKS bins, and the workers'
        // reading.
        assert_eq!(h.first_look_bins, bins.div_ceil(bins.div_ceil(MAX_LOOKS)));
        assert!(h.first_look_bins <= MAX_LOOKS);
        assert!(
            h.first_look_peak_bytes <= h.first_look_bins * sweep + threads * per_worker,
            "{h:?}"
        );
        assert!(
            h.first_look_peak_bytes >= h.first_look_bins * sweep,
            "{h:?}"
        );
        // Kept: per bin, two traces of raw and gated values at 3 frequencies, and a little.
        let per_bin = TRACES * (2 * 3 * 8 + 4) + 16;
        assert_eq!(h.kept_bytes, bins * per_bin);
        // The whole path held every file's traces: far more than the bound at 5°.
        let whole_bytes = rows * TRACES * sweep;
        peaks.push((rows, whole_bytes, h.gating_peak_bytes));
        std::fs::remove_dir_all(&dir).ok();
    }
    let (small, large) = (peaks[0], peaks[1]);
    assert!(large.0 > 3 * small.0, "{peaks:?}");
    assert!(large.1 > 20 * threads * per_worker, "{peaks:?}");
    // The bound is the same for both sizes; so is what was held, within the bound.
    assert!(large.2 <= threads * per_worker && small.2 <= threads * per_worker);
}

#[test]
fn a_given_gate_needs_no_first_look_and_summary_has_the_peak_memory() {
    let dir = scratch("given");
    let m = sphere(&dir, 30, 5);
    let (whole, bounded) = both(&m, 2, Some((10.0, 3.0)), None);
    assert_same(&whole, &bounded);
    assert_eq!(whole.gating.gate_source, "command line");
    let h = bounded.held.unwrap();
    assert_eq!((h.first_look_bins, h.first_look_peak_bytes), (0, 0));
    let out = dir.join("report");
    let (s, err) = cut_model::summary_after(
        cut_model::process_cuts()
            .args(["--bounded-memory"])
            .args(["--gate-center-ns", "10", "--gate-span-ns", "3", "--out"])
            .arg(&out)
            .arg(&m),
        &out,
    );
    let mem = &s["memory"];
    if cfg!(target_os = "linux") {
        // Plausible: more than the program's code and the report held (1 MiB), less than
        // the machine (64 GiB).
        let peak = mem["peak_resident_bytes"].as_u64().unwrap();
        assert!(peak > 1 << 20 && peak < 64 << 30, "{mem}");
        assert!(err.contains(" MiB (VmHWM)"), "{err}");
    } else {
        assert!(mem["peak_resident_bytes"].is_null());
        assert_eq!(mem["peak_resident"], "not available");
    }
    assert_eq!(mem["held"]["first_look_bins"], 0);
    std::fs::remove_dir_all(&dir).ok();
}

#[test]
fn bounded_memory_is_refused_where_it_does_not_apply_and_one_cut_prints_the_peak() {
    let dir = scratch("refused");
    std::fs::write(dir.join("a.s3p"), s3p(0.0, 0.0)).unwrap();
    std::fs::write(dir.join("one.csv"), "angle_deg,file\n0,a.s3p\n10,a.s3p\n").unwrap();
    let st = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .args(["process", "--bounded-memory", "--out"])
        .arg(dir.join("r"))
        .arg(dir.join("one.csv"))
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&st.stderr);
    assert!(!st.status.success());
    assert!(
        err.contains("--bounded-memory is for a scan of cuts"),
        "{err}"
    );
    // Without it, the one-cut report; the terminal's last line is the peak.
    let out = dir.join("one");
    let st = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .args([
            "process",
            "--gate-center-ns",
            "10",
            "--gate-span-ns",
            "3",
            "--out",
        ])
        .arg(&out)
        .arg(dir.join("one.csv"))
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&st.stderr);
    assert!(st.status.success(), "{err}");
    let last = err.lines().last().unwrap_or_default();
    if cfg!(target_os = "linux") {
        assert!(
            last.starts_with("peak resident memory: ") && last.ends_with(" MiB (VmHWM)"),
            "{err}"
        );
    } else {
        assert_eq!(last, "peak resident memory: not available");
    }
    std::fs::remove_dir_all(&dir).ok();
}

#[test]
fn a_bad_file_is_named_by_its_manifest_line_as_on_the_whole_path() {
    let dir = scratch("bad");
    let m = sphere(&dir, 30, 5);
    // Line 10 (the 9th row) names a file that is not there.
    let text = std::fs::read_to_string(&m).unwrap();
    let mut lines: Vec<String> = text.lines().map(String::from).collect();
    let row: Vec<&str> = lines[9].split(',').collect();
    lines[9] = format!("{},{},missing.s3p", row[0], row[1]);
    std::fs::write(&m, lines.join("\n") + "\n").unwrap();
    let r = resolve(&options(&m, 2, None)).unwrap();
    let job = CutJob {
        choices: &r.choices,
        spacing: r.spacing,
        threads: r.threads,
    };
    let traces = r.traces.clone().unwrap();
    let whole = process_cuts(&job, &m, traces.clone()).unwrap_err();
    let bounded = process_cuts_bounded(&job, &m, traces).unwrap_err();
    let (whole, bounded) = (format!("{whole:#}"), format!("{bounded:#}"));
    assert!(whole.contains("sphere.csv:10:"), "{whole}");
    assert!(whole.contains("missing.s3p"), "{whole}");
    assert_eq!(whole, bounded);
    std::fs::remove_dir_all(&dir).ok();
}
