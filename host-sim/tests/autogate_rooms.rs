//! Acceptance test of the gate chosen from the data, against rooms modelled for the test
//! alone: `tests/rooms/room_model.py` (numpy; its own image-method reflections, antenna
//! patterns and probe, no code of sweepgate's simulator) writes per-angle Touchstone files,
//! a manifest and the free-space truth for four rooms. `sweepgate process` gates each
//! manifest with no gate options; the gated pattern must follow the free-space truth, and
//! the room whose echo cannot be separated must be reported as such.
//!
//! Python: `SWEEPGATE_ROOMS_PYTHON` when set (CI's venv), else `python3` when it imports
//! numpy, else a venv made under the target folder (`rooms-venv`, numpy from PyPI). When
//! none works the test fails with a message; it never skips.

use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::process::Command;

#[path = "support/models.rs"]
mod models;
use models::{num, python, read_csv};

/// Angle in whole degrees within [−180, 180).
fn whole_deg(a: f64) -> i64 {
    (a.round() as i64 + 180).rem_euclid(360) - 180
}

/// Worst |gated − truth| (dB) per pattern frequency where the truth is within 10 dB and
/// 25 dB of its peak at that frequency, and the worst |raw − truth| within 10 dB.
fn worst_errors(room: &Path) -> Vec<(f64, f64, f64, f64)> {
    let mut truth: HashMap<(i64, i64), f64> = HashMap::new();
    let mut peak: HashMap<i64, f64> = HashMap::new();
    for r in read_csv(&room.join("truth.csv")) {
        let f = num(&r, "frequency_hz").round() as i64;
        let v = num(&r, "truth_db");
        truth.insert((whole_deg(num(&r, "angle_deg")), f), v);
        let p = peak.entry(f).or_insert(f64::NEG_INFINITY);
        *p = p.max(v);
    }
    let mut worst: HashMap<i64, (f64, f64, f64)> = HashMap::new();
    for r in read_csv(&room.join("report/pattern.csv")) {
        let f = num(&r, "frequency_hz").round() as i64;
        let t = truth[&(whole_deg(num(&r, "angle_deg")), f)];
        let rel = t - peak[&f];
        let (gated, raw) = (
            (num(&r, "gated_db") - t).abs(),
            (num(&r, "raw_db") - t).abs(),
        );
        let w = worst.entry(f).or_insert((0.0, 0.0, 0.0));
        if rel >= -10.0 {
            w.0 = w.0.max(gated);
            w.2 = w.2.max(raw);
        }
        if rel >= -25.0 {
            w.1 = w.1.max(gated);
        }
    }
    let mut v: Vec<_> = worst
        .into_iter()
        .map(|(f, (a, b, c))| (f as f64, a, b, c))
        .collect();
    v.sort_by(|a, b| a.0.total_cmp(&b.0));
    v
}

/// Runs `sweepgate process` on a room's manifest with no gate options, at 20 %, 50 % and
/// 80 % of its band; the summary and the terminal's text.
fn process(room: &Path, frequencies: &[f64]) -> (serde_json::Value, String) {
    let n = frequencies.len();
    let pick: Vec<String> = [0.2, 0.5, 0.8]
        .iter()
        .map(|q| frequencies[(q * n as f64) as usize].to_string())
        .collect();
    let out = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .arg("process")
        .arg("--manifest")
        .arg(room.join("manifest.csv"))
        .arg("--frequencies-hz")
        .arg(pick.join(","))
        .arg("--out")
        .arg(room.join("report"))
        .output()
        .unwrap();
    let text = format!(
        "{}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(out.status.success(), "{}: {text}", room.display());
    let summary = std::fs::read_to_string(room.join("report/summary.json")).unwrap();
    (serde_json::from_str(&summary).unwrap(), text)
}

#[test]
fn the_gate_from_the_data_gives_the_free_space_pattern_or_says_it_cannot() {
    let dir = tempfile::tempdir().unwrap();
    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/rooms/room_model.py");
    let out = Command::new(python())
        .arg(&script)
        .arg(dir.path())
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "room_model.py failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    eprint!("{}", String::from_utf8_lossy(&out.stdout));
    let mut rooms: Vec<PathBuf> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().path())
        .collect();
    rooms.sort();
    assert_eq!(rooms.len(), 4, "the script writes four rooms");
    let (mut separable, mut unseparable) = (0, 0);
    for room in &rooms {
        let info: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(room.join("room.json")).unwrap())
                .unwrap();
        let name = info["name"].as_str().unwrap();
        let frequencies: Vec<f64> = info["frequencies_hz"]
            .as_array()
            .unwrap()
            .iter()
            .map(|v| v.as_f64().unwrap())
            .collect();
        let (summary, text) = process(room, &frequencies);
        let settings = &summary["settings"];
        assert_eq!(settings["gate_source"], "chosen from the data", "{name}");
        let data = &settings["data_gate"];
        let gate = &settings["gate"];
        eprintln!(
            "{name}: {}",
            text.lines().find(|l| l.starts_with("gate ")).unwrap_or("")
        );
        if info["separable"].as_bool().unwrap() {
            separable += 1;
            check_separable(name, &info, data, gate, room);
            // The gate's own error on the direct path at the delays the data showed
            // (settings.gate_self_error): at most 0.05 dB where the room allows a wide gate.
            for e in settings["gate_self_error"].as_array().unwrap() {
                let err = e["self_error_db"].as_f64().unwrap();
                eprintln!(
                    "{name} at {:.3} GHz: gate self-error {err:.5} dB, near a band edge: {}",
                    e["frequency_hz"].as_f64().unwrap() / 1e9,
                    e["near_band_edge"]
                );
                assert!(err <= 0.05, "{name}: {e}");
            }
        } else {
            unseparable += 1;
            // Reported as such in summary.json (its own field and the warnings) and on the
            // terminal.
            assert!(!data["unseparable"].is_null(), "{name}: {data}");
            assert!(data["warning"].as_str().unwrap().starts_with("unseparable"));
            let warned = summary["warnings"]
                .as_array()
                .unwrap()
                .iter()
                .any(|w| w.as_str().unwrap().starts_with("unseparable"));
            assert!(warned, "{name}: {}", summary["warnings"]);
            assert!(text.contains("warning: unseparable"), "{name}: {text}");
        }
    }
    assert!(separable >= 3 && unseparable >= 1);
}

/// A room whose echoes can be gated away: no `unseparable`, the gate holds the direct path
/// and closes before the earliest reflection, and the gated pattern follows the truth.
fn check_separable(
    name: &str,
    info: &serde_json::Value,
    data: &serde_json::Value,
    gate: &serde_json::Value,
    room: &Path,
) {
    assert!(data["unseparable"].is_null(), "{name}: {data}");
    // The model's delays: path length / c plus the cable (textbook: delay = distance / c).
    let direct = info["direct_ns"].as_array().unwrap();
    let (d_lo, d_hi) = (direct[0].as_f64().unwrap(), direct[1].as_f64().unwrap());
    let echo = info["earliest_echo_ns"].as_f64().unwrap();
    let (c, s) = (
        gate["center_ns"].as_f64().unwrap(),
        gate["span_ns"].as_f64().unwrap(),
    );
    eprintln!(
        "{name}: model direct {d_lo:.3}..{d_hi:.3} ns, earliest reflection {echo:.3} ns; gate {:.3}..{:.3} ns",
        c - s / 2.0,
        c + s / 2.0
    );
    assert!(
        c - s / 2.0 < d_lo && c + s / 2.0 > d_hi,
        "{name}: gate misses the direct path"
    );
    assert!(
        c + s / 2.0 < echo,
        "{name}: gate reaches the earliest reflection"
    );
    for (f, within_10, within_25, raw) in worst_errors(room) {
        eprintln!(
            "{name} at {:.3} GHz: worst |gated − truth| {within_10:.4} dB (truth ≥ −10 dB), {within_25:.4} dB (≥ −25 dB); ungated {raw:.3} dB",
            f / 1e9
        );
        // The free-space truth is the direct path alone by the Friis transmission equation;
        // the reflections are image-method paths (image theory, Balanis, Antenna Theory,
        // ch. 4). Acceptance of issue 13: 0.3 dB where the truth is ≥ −10 dB, 0.5 dB where
        // it is ≥ −25 dB.
        assert!(within_10 <= 0.3, "{name} at {f} Hz: {within_10} dB");
        assert!(within_25 <= 0.5, "{name} at {f} Hz: {within_25} dB");
        // The room's echoes matter: ungated, the pattern misses the truth by more.
        assert!(
            raw > 0.3,
            "{name} at {f} Hz: the echoes change nothing ({raw} dB)"
        );
    }
}
