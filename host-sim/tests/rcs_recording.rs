//! `sweepgate rcs` on recordings: `simulate-rcs --recording` writes the same measurements
//! as recordings (one per measurement, the angles in the position records), and `rcs` on
//! them gives the RCS it gives on the Touchstone files of the same scene, through the same
//! chain (`pipeline::rcs_input` → `pipeline::rcs`).
//!
//! Tolerance, 1e-4 dB: both carry the same simulated values (same scene, same seed, same
//! order of measurement). The Touchstone files print each f64 exactly and the reader rounds
//! it to f32; the recording stores that f32 rounding. The grids differ only in the last
//! bits of start and step (read from the files' frequency column, or from the header), so
//! what is left is floating-point rounding in the gate's set-up, far below 1e-4 dB.

use std::path::Path;
use std::process::Command;

use sweepgate::rcs::Zone;
use sweepgate_host::formats::rcs_record::{Measurement, RcsNote};
use sweepgate_host::formats::recording::{self, Record};
use sweepgate_host::model::rcs_targets::ReferenceTarget;
use sweepgate_host::pipeline::options::{default_band_window, DEFAULT_GATE_SHAPE};
use sweepgate_host::pipeline::rcs::{self, RcsGate, RcsResult, RcsSettings};
use sweepgate_host::pipeline::rcs_input::{self, RcsFiles};
use sweepgate_host::pipeline::rcs_simulate;

const TOLERANCE_DB: f64 = 1e-4;

fn scenario() -> std::path::PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios/rcs/range.toml")
}

fn process(files: &RcsFiles) -> RcsResult {
    let scene = rcs_simulate::read_scene(&scenario()).unwrap();
    let input = rcs_input::read(files, ReferenceTarget::Sphere { diameter_m: 0.3 }).unwrap();
    let zone = Zone {
        time_zero_s: scene.time_zero_ns * 1e-9,
        distance_m: scene.distance_m,
        size_m: 0.6,
        separation_m: scene.separation_m,
    };
    let settings = RcsSettings {
        gate: RcsGate::Zone {
            zone,
            echoes_s: vec![scene.delay_s([-scene.distance_m, 0.0, 0.0])],
        },
        band_window: default_band_window(),
        gate_shape: DEFAULT_GATE_SHAPE,
        frequencies_hz: vec![10e9],
    };
    rcs::process(&input, &settings).unwrap()
}

fn files(names: &[std::path::PathBuf; 4]) -> RcsFiles<'_> {
    RcsFiles {
        target: &names[0],
        background: Some(&names[1]),
        reference: &names[2],
        reference_background: Some(&names[3]),
    }
}

#[test]
fn a_recording_and_the_touchstone_files_give_the_same_rcs() {
    let (ts, rec) = (tempfile::tempdir().unwrap(), tempfile::tempdir().unwrap());
    rcs_simulate::run(&scenario(), ts.path()).unwrap();
    rcs_simulate::run_recordings(&scenario(), rec.path()).unwrap();
    let ts_names = [
        "target.csv",
        "background.csv",
        "reference.s2p",
        "reference_background.s2p",
    ]
    .map(|n| ts.path().join(n));
    let rec_names = Measurement::ALL.map(|m| rec.path().join(format!("{}.rec", m.word())));
    let (a, b) = (process(&files(&ts_names)), process(&files(&rec_names)));
    assert_eq!(a.angles_deg, b.angles_deg);
    assert_eq!(a.angles_deg.len(), 41);
    let mut worst = 0.0f64;
    for (ra, rb) in a.calibrated.iter().zip(&b.calibrated) {
        for (va, vb) in ra.iter().zip(rb) {
            worst = worst.max((rcs::dbsm(*va) - rcs::dbsm(*vb)).abs());
        }
    }
    println!(
        "recording vs Touchstone: worst |ΔRCS| {worst:.2e} dB over {} angles × {} points",
        a.angles_deg.len(),
        a.grid.points()
    );
    assert!(worst <= TOLERANCE_DB, "{worst}");
    // And the recording's RCS is the sphere's (Mie series; checked against scipy in
    // rcs_targets.rs) at 10 GHz, as the Touchstone path's is in rcs_simulator.rs.
    let sphere = ReferenceTarget::Sphere { diameter_m: 0.2 };
    let k = b.frequencies[0].0;
    let exact = 10.0 * sphere.rcs_m2(b.frequencies[0].1).unwrap().log10();
    let off = b
        .calibrated
        .iter()
        .map(|row| (rcs::dbsm(row[k]) - exact).abs())
        .fold(0.0, f64::max);
    println!("recording: worst |RCS − Mie| at 10 GHz {off:.3} dB");
    assert!(off < 0.5, "{off}");
}

#[test]
fn each_recording_says_which_measurement_it_holds() {
    let dir = tempfile::tempdir().unwrap();
    rcs_simulate::run_recordings(&scenario(), dir.path()).unwrap();
    for m in Measurement::ALL {
        let rec = recording::recover_file(&dir.path().join(format!("{}.rec", m.word()))).unwrap();
        let notes: Vec<RcsNote> = rec
            .records
            .iter()
            .filter_map(|(_, r)| RcsNote::from_record(r))
            .map(|n| n.unwrap())
            .collect();
        assert_eq!(notes.len(), 1);
        assert_eq!(notes[0].measurement, m);
        assert_eq!(notes[0].scene.as_deref(), Some("range.toml"));
        let sweeps = rec
            .records
            .iter()
            .filter(|(_, r)| matches!(r, Record::Sweep { .. }))
            .count();
        let want = if matches!(m, Measurement::Target | Measurement::Background) {
            41
        } else {
            1
        };
        assert_eq!(sweeps, want, "{}", m.word());
    }
}

/// The command line: `simulate-rcs --recording` then `rcs` on the recordings writes the
/// same pattern.csv as on the Touchstone files.
#[test]
fn the_command_reads_recordings() {
    let dir = tempfile::tempdir().unwrap();
    let bin = env!("CARGO_BIN_EXE_sweepgate");
    let run = |args: &[&str]| {
        let out = Command::new(bin)
            .args(args)
            .current_dir(dir.path())
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{args:?}: {}",
            String::from_utf8_lossy(&out.stderr)
        );
    };
    let sc = scenario();
    let sc = sc.to_str().unwrap();
    run(&["simulate-rcs", "--scenario", sc, "--out", "ts"]);
    run(&[
        "simulate-rcs",
        "--scenario",
        sc,
        "--out",
        "rec",
        "--recording",
    ]);
    let common = [
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
    let mut a = vec![
        "rcs",
        "ts/target.csv",
        "--background",
        "ts/background.csv",
        "--reference",
        "ts/reference.s2p",
        "--reference-background",
        "ts/reference_background.s2p",
        "--out",
        "ts-report",
    ];
    a.extend(common);
    run(&a);
    let mut b = vec![
        "rcs",
        "rec/target.rec",
        "--background",
        "rec/background.rec",
        "--reference",
        "rec/reference.rec",
        "--reference-background",
        "rec/reference_background.rec",
        "--out",
        "rec-report",
    ];
    b.extend(common);
    run(&b);
    let read = |p: &str| std::fs::read_to_string(dir.path().join(p)).unwrap();
    let (ta, tb) = (
        read("ts-report/pattern.csv"),
        read("rec-report/pattern.csv"),
    );
    assert_eq!(ta.lines().count(), 1 + 41 * 3);
    // The same values in, so the same figures out, to the last printed digit.
    assert_eq!(ta, tb);
}
