//! RCS in dBsm beyond `replay`'s terminal screen: the browser view (`--web`) of an RCS scan
//! and `acquire`'s live preview with a calibration.
//!
//! The source of truth in every check is `rcs`'s own `pattern.csv` for the same
//! measurement: the host's FFT path on whole sweeps, calibrated in f64. The live values come
//! through the scan engine (f32, as on the board), so they agree within a few hundredths of
//! a dB at most (the tolerances are stated beside each check).

use std::collections::BTreeMap;
use std::path::Path;
use std::process::Command;

use sweepgate_host::pipeline::replay::{replay_file, Options};
use sweepgate_host::pipeline::replay_rcs;
use sweepgate_host::web::{Hub, Limits, Meta};

/// replay of a calibrated recording against `rcs`'s pattern.csv (as in rcs_replay.rs).
const WEB_TOLERANCE_DB: f64 = 0.01;

/// (angle in m°, frequency in Hz) → RCS dBsm from `rcs`'s pattern.csv.
fn pattern(path: &Path) -> BTreeMap<(i64, i64), f64> {
    let text = std::fs::read_to_string(path).unwrap();
    let mut lines = text.lines();
    let head: Vec<&str> = lines.next().unwrap().split(',').collect();
    let col = |name: &str| head.iter().position(|h| *h == name).unwrap();
    let (a, f, r) = (col("angle_deg"), col("frequency_hz"), col("rcs_dbsm"));
    lines
        .map(|l| {
            let v: Vec<f64> = l.split(',').map(|x| x.parse().unwrap()).collect();
            (((v[a] * 1000.0).round() as i64, v[f] as i64), v[r])
        })
        .collect()
}

fn run(dir: &Path, args: &[&str]) -> String {
    let o = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .args(args)
        .current_dir(dir)
        .output()
        .unwrap();
    assert!(
        o.status.success(),
        "{args:?}: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    String::from_utf8_lossy(&o.stdout).into_owned()
}

/// The shipped range's geometry and reference, as `rcs` takes them.
const RCS_ARGS: &[&str] = &[
    "--sphere-diameter-m",
    "0.3",
    "--zone-distance-m",
    "4",
    "--zone-size-m",
    "0.6",
    "--antenna-separation-m",
    "0.3",
    "--time-zero-ns",
    "1.5",
    "--mount-distance-m",
    "4.8",
    "--frequencies-hz",
    "9e9,10e9,11e9",
];

/// Simulates the shipped scene as recordings and runs `rcs --calibrated-recording`.
fn calibrated_scan(dir: &Path) {
    let sc = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios/rcs/range.toml");
    run(
        dir,
        &[
            "simulate-rcs",
            "--scenario",
            sc.to_str().unwrap(),
            "--out",
            "rec",
            "--recording",
        ],
    );
    let mut args = vec![
        "rcs",
        "rec/target.rec",
        "--background",
        "rec/background.rec",
        "--reference",
        "rec/reference.rec",
        "--reference-background",
        "rec/reference_background.rec",
        "--out",
        "report",
        "--calibrated-recording",
        "calibrated.rec",
    ];
    args.extend_from_slice(RCS_ARGS);
    run(dir, &args);
}

/// Replays `rec` into a web view's hub and returns the hub's state (what a browser that
/// connects after the scan is sent first).
fn replayed_state(rec: &Path, out: &Path) -> serde_json::Value {
    let hub = Hub::new(Meta::default(), Limits::default());
    let opts = Options {
        out: Some(out.to_path_buf()),
        web: Some(hub.clone()),
        ..Options::fast(rec)
    };
    replay_file(&opts).unwrap();
    hub.snapshot()
}

fn level_db(v: &serde_json::Value) -> f64 {
    let re = v[0].as_f64().unwrap();
    let im = v[1].as_f64().unwrap();
    20.0 * re.hypot(im).log10()
}

#[test]
fn the_browser_view_of_an_rcs_scan_carries_dbsm_equal_to_rcs() {
    let dir = tempfile::tempdir().unwrap();
    calibrated_scan(dir.path());
    let want = pattern(&dir.path().join("report/pattern.csv"));
    let state = replayed_state(&dir.path().join("calibrated.rec"), &dir.path().join("r1"));
    let levels = &state["meta"]["absolute_levels"];
    assert_eq!(levels["label"], replay_rcs::WEB_LEVEL_LABEL);
    assert_eq!(levels["label"], "RCS (dBsm)");
    assert_eq!(levels["unit"], "dBsm");
    let freqs: Vec<f64> = state["meta"]["frequencies_hz"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| f.as_f64().unwrap())
        .collect();
    assert_eq!(freqs, vec![9e9, 10e9, 11e9]);
    let bins = state["bins"].as_array().unwrap();
    assert_eq!(bins.len(), 41);
    let mut worst = 0.0f64;
    for b in bins {
        let deg = b["nominal_deg"].as_f64().unwrap();
        let deg = (deg + 180.0).rem_euclid(360.0) - 180.0;
        for (j, f) in freqs.iter().enumerate() {
            // The page's level: 20·log10 |gated| of the bin's values (app.js `db`).
            let got = level_db(&b["values"][j]["gated"]);
            let truth = want[&((deg * 1000.0).round() as i64, *f as i64)];
            worst = worst.max((got - truth).abs());
        }
    }
    println!(
        "browser view vs rcs's pattern.csv: worst {worst:.2e} dB over 41 bins × 3 frequencies"
    );
    assert!(worst <= WEB_TOLERANCE_DB, "{worst}");

    // The same scan without its calibration is a plain |S21| scan: relative levels, and
    // values far from the dBsm ones (the calibration and background do change them).
    let plain = replayed_state(&dir.path().join("rec/target.rec"), &dir.path().join("r2"));
    assert!(plain["meta"]["absolute_levels"].is_null());
    let p0 = level_db(&plain["bins"][20]["values"][0]["gated"]);
    let c0 = level_db(&bins[20]["values"][0]["gated"]);
    assert!((p0 - c0).abs() > 1.0, "{p0} vs {c0}");
}
