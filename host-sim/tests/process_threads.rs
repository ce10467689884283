//! `process --threads N`: a manifest read and gated on one, two and three threads gives the
//! same report folder bit for bit (every file, made and synced on the threads too, and the
//! same as the report written file by file on one thread), and the library call behind it
//! the same gated spectra and echo levels; `--threads 0` and a count over the limit are
//! refused.

use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use sweepgate::gate::GateConfig;
use sweepgate::grid::Grid;
use sweepgate::window::WindowKind;
use sweepgate::Complex32;
use sweepgate_host::output::report;
use sweepgate_host::pipeline::engine::gate_sweeps_on;
use sweepgate_host::pipeline::process::{self, Options};

/// Every file of a folder by name, with its bytes.
fn folder(dir: &Path) -> BTreeMap<String, Vec<u8>> {
    std::fs::read_dir(dir)
        .unwrap()
        .map(|e| {
            let e = e.unwrap();
            let name = e.file_name().to_string_lossy().into_owned();
            (name, std::fs::read(e.path()).unwrap())
        })
        .collect()
}

/// S21 of a direct path at 18 ns whose level follows the angle, an echo at 24 ns and a
/// little deterministic ripple (a set-up of our own).
fn s21(f_hz: f64, angle_deg: f64, n: usize) -> Complex32 {
    let z = |a: f64, t: f64| {
        let ph = -2.0 * std::f64::consts::PI * f_hz * t;
        (a * ph.cos(), a * ph.sin())
    };
    let level = 0.5 + 0.5 * angle_deg.to_radians().cos();
    let (d, e) = (z(level, 18e-9), z(0.2, 24e-9));
    let ripple = 1e-3 * ((n * 7 + angle_deg as usize) % 13) as f64;
    Complex32::new((d.0 + e.0 + ripple) as f32, (d.1 + e.1) as f32)
}

/// 36 files of 201 points over 8–12 GHz, 10° apart (a full turn), and their manifest.
fn write_scan(dir: &Path) -> PathBuf {
    let grid = Grid::from_start_stop(8e9, 12e9, 201).unwrap();
    let mut manifest = String::from("angle_deg,file\n");
    for i in 0..36 {
        let angle = -180.0 + 10.0 * i as f64;
        let mut text = String::from("# Hz S RI R 50\n");
        for n in 0..grid.points() {
            let f = grid.frequency_hz(n);
            let v = s21(f, angle, n);
            writeln!(text, "{f} 0 0 {:e} {:e} 0 0 0 0", v.re, v.im).unwrap();
        }
        let name = format!("a{i:02}.s2p");
        std::fs::write(dir.join(&name), text).unwrap();
        writeln!(manifest, "{angle},{name}").unwrap();
    }
    let path = dir.join("scan.csv");
    std::fs::write(&path, manifest).unwrap();
    path
}

#[test]
fn any_number_of_threads_gives_the_same_report() {
    let dir = tempfile::tempdir().unwrap();
    let manifest = write_scan(dir.path());
    let mut reports = Vec::new();
    for threads in [1, 2, 3] {
        let out = dir.path().join(format!("report-{threads}"));
        let opts = Options {
            manifest: Some(manifest.clone()),
            out: Some(out.clone()),
            threads: Some(threads),
            ..Options::default()
        };
        let r = process::resolve(&opts).unwrap();
        assert_eq!(r.threads, threads);
        let p = process::process(&r).unwrap();
        assert_eq!(p.report.bins.len(), 36);
        let files = folder(&out);
        if threads == 1 {
            // The same files as the report made and written one by one on this thread.
            let serial = dir.path().join("report-serial");
            std::fs::create_dir(&serial).unwrap();
            report::write_report(&p.report, &serial).unwrap();
            assert!(folder(&serial) == files, "one thread against file by file");
        }
        let bands = p.bands.unwrap();
        let gated: Vec<Vec<Complex32>> = bands.rows.into_iter().map(|r| r.gated).collect();
        reports.push((files, p.report.bins, gated));
    }
    // A table, a summary, two plots at the default pattern frequency (the band's centre)
    // and the impulse plot; no temporary file left behind.
    let names: Vec<&str> = reports[0].0.keys().map(String::as_str).collect();
    assert_eq!(
        names,
        [
            "impulse-boresight.svg",
            "pattern-polar-10000MHz.svg",
            "pattern-rect-10000MHz.svg",
            "pattern.csv",
            "summary.json"
        ]
    );
    let csv = String::from_utf8_lossy(&reports[0].0["pattern.csv"]).into_owned();
    assert!(csv.lines().count() > 36, "{csv}");
    for (threads, r) in [2, 3].iter().zip(&reports[1..]) {
        for (name, bytes) in &reports[0].0 {
            assert!(r.0.get(name) == Some(bytes), "{name}, {threads} threads");
        }
        assert_eq!(r.0.len(), reports[0].0.len(), "files, {threads} threads");
        assert_eq!(r.1, reports[0].1, "bins, {threads} threads");
        assert_eq!(r.2, reports[0].2, "gated bands, {threads} threads");
    }
    // The gate did something: the echo at 24 ns is outside a 4 ns gate around 18 ns, so
    // the echo level is well above the floor.
    assert!(reports[0].1.iter().all(|b| b.echo_db.unwrap() > -60.0));
}

#[test]
fn the_library_call_gives_the_same_values_on_any_number_of_threads() {
    // 50 sweeps: three batches of 16 and a short one, split differently for each count.
    let grid = Grid::from_start_stop(8e9, 12e9, 801).unwrap();
    let cfg = GateConfig {
        grid,
        band_window: WindowKind::Kaiser { beta: 6.0 },
        center_s: 18e-9,
        span_s: 2e-9,
        shape: WindowKind::Kaiser { beta: 4.0 },
        renormalize: true,
    };
    let sweeps: Vec<Vec<Complex32>> = (0..50)
        .map(|b| {
            (0..801)
                .map(|n| s21(grid.frequency_hz(n), b as f64 * 3.0, n))
                .collect()
        })
        .collect();
    let views: Vec<&[Complex32]> = sweeps.iter().map(|s| &s[..]).collect();
    let one = gate_sweeps_on(&cfg, &views, Some((0, 0.0)), 1).unwrap();
    assert_eq!(one.spectra.len(), 50);
    for threads in [2, 3, 7] {
        let many = gate_sweeps_on(&cfg, &views, Some((0, 0.0)), threads).unwrap();
        assert_eq!(many.spectra, one.spectra, "{threads} threads");
        assert_eq!(many.echo_db, one.echo_db, "{threads} threads");
    }
}

#[test]
fn zero_threads_is_refused() {
    let opts = Options {
        manifest: Some(PathBuf::from("scan.csv")),
        threads: Some(0),
        ..Options::default()
    };
    let e = process::resolve(&opts).unwrap_err();
    assert!(format!("{e:#}").contains("--threads 0"), "{e:#}");
}

#[test]
fn a_million_threads_is_refused_with_the_limit() {
    let opts = Options {
        manifest: Some(PathBuf::from("scan.csv")),
        threads: Some(1_000_000),
        ..Options::default()
    };
    let e = format!("{:#}", process::resolve(&opts).unwrap_err());
    assert!(e.contains("--threads 1000000 is over 256"), "{e}");
}
