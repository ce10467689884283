//! `sweepgate plan-rcs` prints the figures of the core's RCS plan with their checks.

use std::process::Command;

fn plan(extra: &[&str]) -> (bool, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .args([
            "plan-rcs",
            "--zone-distance-m",
            "4",
            "--zone-size-m",
            "0.6",
            "--antenna-separation-m",
            "0.3",
            "--time-zero-ns",
            "1.5",
            "--start-hz",
            "8e9",
            "--stop-hz",
            "12e9",
        ])
        .args(extra)
        .output()
        .unwrap();
    let text =
        String::from_utf8_lossy(&out.stdout).into_owned() + &String::from_utf8_lossy(&out.stderr);
    (out.status.success(), text)
}

#[test]
fn plan_rcs_states_far_field_resolution_gate_and_clearances() {
    let (ok, text) = plan(&["--points", "401", "--mount-distance-m", "4.8"]);
    assert!(ok, "{text}");
    // 2D²/λ at 12 GHz: 2·0.36/(c/12 GHz) = 28.82 m (Federal Standard 1037C), not met at 4 m.
    assert!(text.contains("(2D²/λ): 28.82 m; zone at 4 m: NO"), "{text}");
    // c/(2B), B = 401 × 10 MHz: 37.4 mm (Mensa).
    assert!(text.contains("c/(2B): 37.4 mm"), "{text}");
    // Centre t0 + 2·√(4² + 0.15²)/c = 1.5 + 26.704 = 28.204 ns.
    assert!(text.contains("centre 28.204 ns"), "{text}");
    assert!(
        text.contains("mount echo clear of the gate by 2.120 ns: yes"),
        "{text}"
    );
    // A mount 4.2 m away sits inside the 0.6 m zone's gate.
    let (_, near) = plan(&["--points", "401", "--mount-distance-m", "4.2"]);
    assert!(near.contains("mount echo clear of the gate by -"), "{near}");
    assert!(near.contains(": NO\n"), "{near}");
    // 41 points: 1/Δf = 10 ns cannot hold a 28 ns gate.
    let (_, few) = plan(&["--points", "41"]);
    assert!(few.contains("(have 41): NO"), "{few}");
    let (bad, msg) = plan(&["--points", "401", "--mount-distance-m=NaN"]);
    assert!(!bad && msg.contains("target zone"), "{msg}");
}
