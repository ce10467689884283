//! The report folder: table columns and rows, summary fields, plots with titles, axis
//! labels and legends.

use num_complex::Complex64;
use serde_json::json;
use sweepgate::bins::BinFlags;
use sweepgate_host::output::report::{
    flag_words, pattern_csv, write_report, ImpulseView, ReportBin, ReportInput, ReportValue,
};

/// A cos^4 field pattern every 2° with a constant echo added on the raw side.
fn input() -> ReportInput {
    let bins = (0..180)
        .map(|i| {
            let a = -180.0 + 2.0 * i as f64;
            let t = a.to_radians().cos().max(0.0).powi(4).max(1e-4) * 0.01;
            let truth = Complex64::new(t, 0.0);
            ReportBin {
                angle_deg: a,
                mean_deg: a,
                sweeps: 3,
                flags: if i == 5 {
                    BinFlags::SMEARED | BinFlags::REVISITED
                } else {
                    0
                },
                echo_db: Some(-20.0),
                values: vec![ReportValue {
                    raw: truth + Complex64::new(0.002, 0.0),
                    gated: truth,
                    truth: Some(truth),
                    angle_offset_deg: 0.0,
                }],
            }
        })
        .collect();
    ReportInput {
        title: "invented bench".into(),
        source: "test".into(),
        frequencies_hz: vec![10e9],
        full_circle: true,
        bins,
        settings: json!({"gate": {"span_ns": 3.0}}),
        counters: json!({"sweeps_pushed": 540}),
        warnings: vec!["a warning".into()],
        impulse: Some(ImpulseView {
            angle_deg: 0.0,
            sweeps: 3,
            time_ns: (0..64).map(|m| m as f64 * 0.5).collect(),
            magnitude: (0..64).map(|m| if m == 20 { 1.0 } else { 0.01 }).collect(),
            gate: (0..64)
                .map(|m| if (17..24).contains(&m) { 1.0 } else { 0.0 })
                .collect(),
            gate_start_ns: 8.5,
            gate_stop_ns: 11.5,
        }),
        gain: None,
    }
}

#[test]
fn csv_has_the_columns_and_one_row_per_bin_and_frequency() {
    let text = pattern_csv(&input());
    let mut lines = text.lines();
    assert_eq!(
        lines.next().unwrap(),
        "angle_deg,frequency_hz,raw_db,gated_db,gated_phase_deg,raw_phase_deg,echo_db,sweeps,flags,truth_db"
    );
    let rows: Vec<Vec<&str>> = lines.map(|l| l.split(',').collect()).collect();
    assert_eq!(rows.len(), 180);
    // Boresight row: |S21| = 0.01 → −40 dB (20·log10, not normalized); raw adds 0.002
    // in phase: 20·log10(0.012) = −38.416 dB.
    let bore = rows.iter().find(|r| r[0] == "0.000").unwrap();
    assert_eq!(bore[1], "10000000000");
    assert!((bore[3].parse::<f64>().unwrap() + 40.0).abs() < 1e-3);
    assert!((bore[2].parse::<f64>().unwrap() - 20.0 * 0.012f64.log10()).abs() < 1e-3);
    assert_eq!(bore[9], bore[3]);
    let flagged = rows.iter().find(|r| r[0] == "-170.000").unwrap();
    assert_eq!(flagged[8], "smeared|revisited");
    assert_eq!(flag_words(0), "");
}

#[test]
fn folder_holds_table_summary_and_labelled_plots() {
    let dir = tempfile::tempdir().unwrap();
    let files = write_report(&input(), dir.path()).unwrap();
    assert_eq!(files.len(), 5);
    let sum: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("summary.json")).unwrap())
            .unwrap();
    let m = &sum["metrics_normalized_to_peak"][0];
    assert_eq!(m["frequency_hz"], 10e9);
    // cos^4 field = cos^8 power: HPBW 2·acos(0.5^(1/8)) = 47.1° (closed form, common
    // practice, no source); 2° sampling and linear interpolation stay within 0.5°.
    let hpbw = m["gated"]["hpbw_deg"].as_f64().unwrap();
    assert!(
        (hpbw - 2.0 * 0.5f64.powf(0.125).acos().to_degrees()).abs() < 0.5,
        "{hpbw}"
    );
    assert_eq!(
        m["error_vs_truth"]["gated_worst_db_where_truth_above_-25_db"],
        0.0
    );
    assert!(
        m["error_vs_truth"]["raw_worst_db_where_truth_above_-25_db"]
            .as_f64()
            .unwrap()
            > 1.0
    );
    assert_eq!(sum["counters"]["sweeps_pushed"], 540);
    assert_eq!(sum["warnings"][0], "a warning");
    for (f, needles) in [
        (
            "pattern-rect-10000MHz.svg",
            &[
                "invented bench",
                "angle (deg)",
                "level relative to peak (dB)",
                "gated",
                "free-space truth",
            ][..],
        ),
        (
            "pattern-polar-10000MHz.svg",
            &["invented bench", "-10 dB", "90°", "raw"][..],
        ),
        (
            "impulse-boresight.svg",
            &[
                "invented bench",
                "time (ns)",
                "gate opens",
                "impulse response",
            ][..],
        ),
    ] {
        let svg = std::fs::read_to_string(dir.path().join(f)).unwrap();
        assert!(svg.starts_with("<svg"), "{f}");
        for n in needles {
            assert!(svg.contains(n), "{f} lacks {n:?}");
        }
    }
}

#[test]
fn levels_and_phases_give_back_the_complex_values() {
    // 20·log10|z| and arg z in degrees (definitions): |z|·e^(j·arg z) rebuilds z, within the
    // rounding of 6 decimals of dB (5.8e-8 relative) and 5 of degrees (8.7e-8 rad).
    let mut inp = input();
    let raw = Complex64::new(-0.0123, 0.0456);
    let gated = Complex64::new(0.000321, -0.000987);
    inp.bins[90].values[0].raw = raw;
    inp.bins[90].values[0].gated = gated;
    let text = pattern_csv(&inp);
    let header: Vec<&str> = text.lines().next().unwrap().split(',').collect();
    let col = |n: &str| header.iter().position(|h| *h == n).unwrap();
    let row: Vec<&str> = text
        .lines()
        .find(|l| l.starts_with("0.000,"))
        .unwrap()
        .split(',')
        .collect();
    let back = |db: &str, deg: &str| {
        let m = 10f64.powf(db.parse::<f64>().unwrap() / 20.0);
        Complex64::from_polar(m, deg.parse::<f64>().unwrap().to_radians())
    };
    let r = back(row[col("raw_db")], row[col("raw_phase_deg")]);
    let g = back(row[col("gated_db")], row[col("gated_phase_deg")]);
    assert!((r - raw).norm() / raw.norm() < 2e-7, "{r} vs {raw}");
    assert!((g - gated).norm() / gated.norm() < 2e-7, "{g} vs {gated}");
    assert_eq!(col("raw_phase_deg"), col("gated_phase_deg") + 1);
}

/// The folder's file names, sorted.
fn names(dir: &std::path::Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    v.sort();
    v
}

#[test]
fn a_new_run_replaces_the_whole_set_and_leaves_other_files() {
    let dir = tempfile::tempdir().unwrap();
    write_report(&input(), dir.path()).unwrap();
    std::fs::write(dir.path().join("notes.txt"), "mine").unwrap();
    // A plot name with something other than digits before "MHz" is not a report plot.
    std::fs::write(dir.path().join("pattern-rect-oldMHz.svg"), "mine").unwrap();
    // Expected: a run at 9 GHz without an impulse view writes its four files and removes
    // the 10 GHz plots and the impulse plot of the run before, so no plot is left beside a
    // table it does not belong to; the user's files stay.
    let mut next = input();
    next.frequencies_hz = vec![9e9];
    next.impulse = None;
    let files = write_report(&next, dir.path()).unwrap();
    assert_eq!(files.len(), 4);
    assert_eq!(
        names(dir.path()),
        [
            "notes.txt",
            "pattern-polar-9000MHz.svg",
            "pattern-rect-9000MHz.svg",
            "pattern-rect-oldMHz.svg",
            "pattern.csv",
            "summary.json"
        ]
    );
    let csv = std::fs::read_to_string(dir.path().join("pattern.csv")).unwrap();
    assert!(
        csv.lines().nth(1).unwrap().contains(",9000000000,"),
        "{csv}"
    );
}

#[test]
fn a_report_that_cannot_be_written_leaves_the_last_one_whole() {
    let dir = tempfile::tempdir().unwrap();
    let report = dir.path().join("report");
    write_report(&input(), &report).unwrap();
    let before: Vec<(String, Vec<u8>)> = names(&report)
        .into_iter()
        .map(|n| {
            let b = std::fs::read(report.join(&n)).unwrap();
            (n, b)
        })
        .collect();
    // Expected: one plot's name is taken by a folder, which is found before any file is
    // renamed into place: the run fails naming that file and the last report is kept whole.
    let blocked = report.join("pattern-polar-9000MHz.svg");
    std::fs::create_dir(&blocked).unwrap();
    std::fs::write(blocked.join("inside"), "x").unwrap();
    let mut next = input();
    next.frequencies_hz = vec![9e9];
    let e = write_report(&next, &report).unwrap_err();
    let msg = format!("{e:#}");
    assert!(msg.contains("pattern-polar-9000MHz.svg"), "{msg}");
    assert!(!msg.contains('\n'), "{msg}");
    for (n, b) in &before {
        assert_eq!(&std::fs::read(report.join(n)).unwrap(), b, "{n} changed");
    }
}
