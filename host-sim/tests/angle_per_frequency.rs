//! Acceptance: in a continuous scan each pattern frequency is placed at the angle where it
//! was measured, so the gated pattern's −3 dB beam centre matches the truth's at every
//! pattern frequency; a step-and-stop scan has no offsets at all.
//!
//! Reference: the simulator's free-space truth at the bins' nominal angles (the model
//! written for the tests, `sweepgate_host::model::room::truth`). The beam centre is the
//! centre of the −3 dB beam (`sweepgate::metrics`), taken on the report's cuts: the truth on
//! the nominal angles, the gated values on the nominal angles (as the report took them before)
//! and on the measured angles (each bin's mean sweep angle + the engine's per-frequency
//! offset, `Cut::measured_deg`).

use std::path::PathBuf;
use std::sync::atomic::AtomicBool;

use sweepgate_host::formats::recording::recover_file;
use sweepgate_host::model::scenario::Scenario;
use sweepgate_host::output::report::ReportInput;
use sweepgate_host::pipeline::replay::{replay_records, Options};
use sweepgate_host::pipeline::simulate::simulate_to_file;

fn report(text: &str) -> ReportInput {
    let s = Scenario::from_toml(text).unwrap();
    let dir = tempfile::tempdir().unwrap();
    let rec = dir.path().join("scan.rec");
    simulate_to_file(&s, Some(text), s.simulation.seed, &rec, false).unwrap();
    let recovered = recover_file(&rec).unwrap();
    let o = replay_records(
        &recovered,
        &Options::fast(&rec),
        &mut Vec::new(),
        None,
        &AtomicBool::new(false),
    )
    .unwrap();
    assert_eq!(o.counters.sweeps_rejected(), 0, "sweeps refused");
    o.report
}

fn demo_lab() -> String {
    let path = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("scenarios/demo-lab.toml");
    std::fs::read_to_string(path).unwrap()
}

/// Beam centres per pattern frequency: (frequency, truth, gated on nominal angles, gated on
/// measured angles).
fn centres(r: &ReportInput) -> Vec<(f64, f64, f64, f64)> {
    (0..r.frequencies_hz.len())
        .map(|fi| {
            let c = r.cut(fi);
            let centre = |angles: &[f64], levels: &[f64]| {
                r.metrics(angles, levels)
                    .and_then(|m| m.beam_3db)
                    .map(|b| b.centre_deg())
                    .expect("a −3 dB beam")
            };
            (
                r.frequencies_hz[fi],
                centre(&c.angles_deg, &c.truth_norm()),
                centre(&c.angles_deg, &c.gated_norm()),
                centre(&c.measured_deg, &c.gated_norm()),
            )
        })
        .collect()
}

#[test]
fn continuous_demo_beam_centre_matches_truth_at_every_frequency() {
    let r = report(&demo_lab());
    let mut worst_before: f64 = 0.0;
    let all = centres(&r);
    for &(f, truth, nominal, measured) in &all {
        eprintln!(
            "demo-lab (continuous) {:.3} GHz: −3 dB beam centre truth {truth:+.4}°, gated on bin angles {nominal:+.4}° (off by {:+.4}°), gated on measured angles {measured:+.4}° (off by {:+.4}°)",
            f / 1e9,
            nominal - truth,
            measured - truth
        );
    }
    for &(f, truth, nominal, measured) in &all {
        assert!(
            (measured - truth).abs() <= 0.05,
            "{f} Hz: beam centre {measured:.4}° against the truth's {truth:.4}°"
        );
        worst_before = worst_before.max((nominal - truth).abs());
    }
    // The sweeps take 40 ms at 10°/s: without the offsets, the band's edges are off by
    // about a tenth of a degree or more.
    assert!(
        worst_before > 0.05,
        "without offsets only {worst_before:.4}°"
    );
}

#[test]
fn step_and_stop_scans_have_no_offsets() {
    let text = demo_lab().replace(
        "mode = \"continuous\"",
        "mode = \"step\"\nstep_deg = 1.0\nsettle_s = 0.05",
    );
    let r = report(&text);
    assert!(!r.bins.is_empty());
    for b in &r.bins {
        for v in &b.values {
            assert_eq!(v.angle_offset_deg, 0.0, "bin at {}°", b.angle_deg);
        }
    }
    for (f, truth, nominal, measured) in centres(&r) {
        eprintln!(
            "demo-lab (step-and-stop) {:.3} GHz: −3 dB beam centre truth {truth:+.4}°, gated {nominal:+.4}° (measured angles {measured:+.4}°)",
            f / 1e9
        );
        assert_eq!(nominal, measured);
    }
}
