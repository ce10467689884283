//! The demo command as a user runs it: the two-path table, then the main job (simulate,
//! replay, report) into a temporary folder.

use std::process::Command;

#[test]
fn demo_prints_the_two_path_table() {
    let dir = tempfile::tempdir().unwrap();
    let out = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .args(["demo", "--as-fast-as-possible", "--no-preview", "--out"])
        .arg(dir.path())
        .output()
        .expect("run sweepgate demo");
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8(out.stdout).unwrap();
    // The main job: simulated, replayed, reported, and the caution said once.
    for f in [
        "demo.rec",
        "pattern.csv",
        "summary.json",
        "impulse-boresight.svg",
    ] {
        assert!(dir.path().join(f).is_file(), "{f} missing");
    }
    assert_eq!(text.matches("Caution:").count(), 1, "{text}");
    assert!(text.contains("report written to"), "{text}");
    assert!(text.contains("small lab, X-band horn"), "{text}");
    for needle in [
        "alias-free range",
        "resolution 1/B",
        "ripple from the echo (dB)",
        "worst error vs direct path (dB)",
        "echo level in impulse response",
    ] {
        assert!(text.contains(needle), "missing {needle:?} in\n{text}");
    }
}

#[test]
fn bad_option_fails_with_a_message() {
    let out = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .args(["demo", "--gate-span-ns", "-3"])
        .output()
        .expect("run sweepgate demo");
    assert!(!out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("gate span must be above 0 s"), "{err}");
}
