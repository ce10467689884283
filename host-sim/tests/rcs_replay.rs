//! `replay` of an RCS scan in dBsm: `rcs --calibrated-recording` writes a copy of the target
//! recording carrying the calibration, the gate and the background (recording kind 9);
//! `replay` of it prints the RCS per pattern frequency and shows the screen's bins in
//! dBsm, agreeing with `rcs`'s own pattern.csv.
//!
//! Tolerance, 0.01 dB: `rcs` gates whole sweeps on the host's FFT path and calibrates in
//! f64; `replay` gates through the scan engine as the board does (f32) and calibrates the
//! bin values with the same factor and the same gated background.

use std::process::Command;
use std::sync::atomic::AtomicBool;

#[path = "support/rcs_scan.rs"]
mod rcs_scan;

use ratatui::backend::TestBackend;
use ratatui::Terminal;
use rcs_scan::{calibrated_scan, pattern};
use sweepgate_host::formats::recording::recover_file;
use sweepgate_host::model::rcs_targets::ReferenceTarget;
use sweepgate_host::output::screen::{draw, Screen};
use sweepgate_host::pipeline::replay::{replay_records, Options};
use sweepgate_host::pipeline::replay_rcs::{self, Calibrator};
use sweepgate_host::pipeline::stream::Sink;

const TOLERANCE_DB: f64 = 0.01;

#[test]
fn replay_prints_the_rcs_that_rcs_found() {
    let dir = tempfile::tempdir().unwrap();
    calibrated_scan(dir.path());
    let o = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .args([
            "replay",
            "calibrated.rec",
            "--as-fast-as-possible",
            "--no-preview",
        ])
        .current_dir(dir.path())
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(o.status.success(), "{err}");
    let want = pattern(&dir.path().join("report/pattern.csv"));
    let sphere = ReferenceTarget::Sphere { diameter_m: 0.2 };
    let lines: Vec<&str> = err.lines().filter(|l| l.starts_with("RCS at ")).collect();
    assert_eq!(lines.len(), 3, "{err}");
    for (line, f_hz) in lines.iter().zip([9e9, 10e9, 11e9]) {
        // "... highest H dBsm at A°, mean M dBsm over N bins"
        let words: Vec<&str> = line.split_whitespace().collect();
        let num = |after: &str| -> f64 {
            let i = words.iter().rposition(|w| *w == after).unwrap();
            words[i + 1].trim_end_matches(['°', ',']).parse().unwrap()
        };
        let (highest, at, mean) = (num("highest"), num("at"), num("mean"));
        let col: Vec<(i64, f64)> = want
            .iter()
            .filter(|(k, _)| k.1 == f_hz as i64)
            .map(|(k, v)| (k.0, *v))
            .collect();
        assert_eq!(col.len(), 41);
        let top = col
            .iter()
            .cloned()
            .fold((0, f64::MIN), |a, b| if b.1 > a.1 { b } else { a });
        let mean_want =
            10.0 * (col.iter().map(|c| 10f64.powf(c.1 / 10.0)).sum::<f64>() / 41.0).log10();
        println!(
            "{:.0} GHz: replay highest {highest:.3} dBsm at {at}°, rcs {:.4} at {}°; mean {mean:.3} vs {mean_want:.4}",
            f_hz / 1e9,
            top.1,
            top.0 as f64 / 1000.0
        );
        assert!((highest - top.1).abs() <= TOLERANCE_DB, "{line}");
        // The angle it names holds that value in rcs's table too (the sphere's RCS is
        // nearly flat over angle, so the highest may fall on a neighbour within noise).
        let there = want[&((at * 1000.0).round() as i64, f_hz as i64)];
        assert!((highest - there).abs() <= TOLERANCE_DB, "{line}: {there}");
        assert!((mean - mean_want).abs() <= TOLERANCE_DB, "{line}");
        // And it is the sphere's RCS (Mie series; rcs_targets.rs checks it against scipy).
        let exact = 10.0 * sphere.rcs_m2(f_hz).unwrap().log10();
        assert!((highest - exact).abs() < 0.5, "{highest} vs {exact}");
    }
}

/// Frames to the screen as `replay` sends them, rewritten in dBsm.
struct ToScreen<'a> {
    screen: &'a mut Screen,
    calibrator: Calibrator,
}

impl Sink for ToScreen<'_> {
    fn send(&mut self, bytes: &[u8]) {
        let shown = self.calibrator.frames(bytes);
        self.screen.feed(&shown);
    }
}

#[test]
fn the_screen_shows_each_bin_in_dbsm() {
    let dir = tempfile::tempdir().unwrap();
    calibrated_scan(dir.path());
    let path = dir.path().join("calibrated.rec");
    let rec = recover_file(&path).unwrap();
    let cal = replay_rcs::calibration_of(&rec).unwrap().unwrap();
    let mut screen = Screen::new("RCS scan");
    screen.level_label = Some(replay_rcs::LEVEL_LABEL.into());
    let quit = AtomicBool::new(false);
    let mut sink = ToScreen {
        screen: &mut screen,
        calibrator: Calibrator::new(cal),
    };
    replay_records(&rec, &Options::fast(&path), &mut sink, None, &quit).unwrap();
    let want = pattern(&dir.path().join("report/pattern.csv"));
    screen.selected = 1; // 10 GHz
    let pts = screen.pattern_points();
    assert_eq!(pts.len(), 41);
    let mut worst = 0.0f64;
    for (a, _raw, gated) in &pts {
        let v = want[&((a * 1000.0).round() as i64, 10_000_000_000)];
        worst = worst.max((gated - v).abs());
    }
    println!("screen vs rcs at 10 GHz: worst {worst:.2e} dB over 41 bins");
    assert!(worst <= TOLERANCE_DB, "{worst}");
    let mut term = Terminal::new(TestBackend::new(130, 36)).unwrap();
    term.draw(|f| draw(f, &screen)).unwrap();
    let buf = term.backend().buffer();
    let text: String = (0..buf.area.height)
        .flat_map(|y| (0..buf.area.width).map(move |x| (x, y)))
        .map(|(x, y)| buf[(x, y)].symbol().to_string())
        .collect();
    assert!(text.contains("RCS dBsm at"), "{text}");
    // The peak readout is the calibrated level, in dBsm (the plot itself is relative).
    let peak = pts.iter().map(|p| p.2).fold(f64::NEG_INFINITY, f64::max);
    assert!(text.contains(&format!("{peak:.1} dBsm at")), "{text}");
    assert!(!text.contains("|S21| dB at"), "{text}");
}
