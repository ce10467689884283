//! The demo command as a user runs it.

use std::process::Command;

#[test]
fn demo_prints_the_two_path_table() {
    let out = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .arg("demo")
        .output()
        .expect("run sweepgate demo");
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8(out.stdout).unwrap();
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
