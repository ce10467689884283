//! What the RCS tests share: the shipped range (`scenarios/rcs/range.toml`) simulated as
//! recordings and put through `rcs`, its geometry and reference as `rcs` takes them, and
//! `rcs`'s `pattern.csv` read back (their source of truth).

// Each test file takes what it needs of this module.
#![allow(dead_code)]

use std::collections::BTreeMap;
use std::path::Path;
use std::process::Command;

/// The shipped range's geometry and reference, as `rcs` takes them.
pub const RCS_ARGS: &[&str] = &[
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

/// (angle in m°, frequency in Hz) → RCS dBsm from `rcs`'s pattern.csv.
pub fn pattern(path: &Path) -> BTreeMap<(i64, i64), f64> {
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

/// Runs `sweepgate args` in `dir`, which must succeed; returns its standard output.
pub fn run(dir: &Path, args: &[&str]) -> String {
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

/// `rcs` of the four recordings `simulate-rcs --recording` wrote to `dir/rec`, with
/// [`RCS_ARGS`], the report to `dir/report`, and `extra` options.
pub fn rcs_of_recordings(dir: &Path, extra: &[&str]) -> String {
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
    ];
    args.extend_from_slice(RCS_ARGS);
    args.extend_from_slice(extra);
    run(dir, &args)
}

/// Simulates the shipped scene as recordings (`dir/rec`) and runs `rcs
/// --calibrated-recording calibrated.rec`.
pub fn calibrated_scan(dir: &Path) {
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
    rcs_of_recordings(dir, &["--calibrated-recording", "calibrated.rec"]);
}
