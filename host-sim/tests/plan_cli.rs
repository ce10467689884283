//! `sweepgate plan` as a user runs it: every shipped scenario and example plan file, both
//! outputs, the options, and bad files.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use serde_json::Value;
use sweepgate::plan::SPEED_OF_LIGHT_M_S as C;

fn files_in(dir: &str) -> Vec<PathBuf> {
    let dir = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join(dir);
    let mut v: Vec<_> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|x| x == "toml"))
        .collect();
    v.sort();
    assert!(!v.is_empty());
    v
}

fn plan(file: &Path, extra: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .arg("plan")
        .arg("--scenario")
        .arg(file)
        .args(extra)
        .output()
        .expect("run sweepgate plan")
}

fn ok_stdout(out: &Output) -> String {
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout.clone()).unwrap()
}

fn json(file: &Path, extra: &[&str]) -> Value {
    let mut args = vec!["--json"];
    args.extend_from_slice(extra);
    serde_json::from_str(&ok_stdout(&plan(file, &args))).expect("plan --json parses")
}

fn num(v: &Value, path: &str) -> f64 {
    let mut x = v;
    for k in path.split('.') {
        x = &x[k];
    }
    x.as_f64()
        .unwrap_or_else(|| panic!("{path} is not a number: {x}"))
}

const CAUTION_WORDS: [&str; 3] = [
    "RF exposure",
    "moving machinery",
    "local regulations and the lab's licensed practice",
];

fn check_both_outputs(file: &Path, kind: &str) {
    let text = ok_stdout(&plan(file, &[]));
    for section in [
        "Far field",
        "Paths and echoes",
        "Time axis and aliasing",
        "Recommended gate",
        "Rotation limit",
        "Findings",
    ] {
        assert!(text.contains(section), "{}: no {section}", file.display());
    }
    for c in CAUTION_WORDS {
        assert!(text.contains(c), "{}: no caution {c:?}", file.display());
    }
    let j = json(file, &[]);
    assert_eq!(j["file_kind"], kind, "{}", file.display());
    let cautions = j["cautions"].as_array().unwrap().clone();
    for c in CAUTION_WORDS {
        assert!(
            cautions.iter().any(|x| x.as_str().unwrap().contains(c)),
            "{}: JSON lacks caution {c:?}",
            file.display()
        );
    }
    // Stable field names with units.
    for path in [
        "far_field.far_field_m",
        "far_field.range_m",
        "far_field.top_wavelength_m",
        "paths.direct_delay_s",
        "time_axis.bandwidth_hz",
        "time_axis.resolution_s",
        "time_axis.mainlobe_s",
        "time_axis.alias_free_s",
        "time_axis.max_step_hz",
        "rotation.max_rotation_deg_s",
        "inputs.aut_size_m",
        "inputs.step_hz",
    ] {
        assert!(num(&j, path).is_finite(), "{}: {path}", file.display());
    }
    // The direct path's delay is R/c plus the cable (textbook).
    let r = num(&j, "far_field.range_m");
    let want = r / C + num(&j, "inputs.cable_delay_s");
    assert!((num(&j, "paths.direct_delay_s") - want).abs() < 1e-15);
    // The gate, when there is one, closes half a main lobe before the first echo
    // (the planner's stated criterion).
    if !j["gate"].is_null() {
        let first = j["paths"]["echoes"]
            .as_array()
            .unwrap()
            .iter()
            .find(|e| e["first"] == true)
            .expect("a gate implies a first echo")
            .clone();
        let stop = num(&j, "gate.stop_s");
        let want = num(&first, "delay_s") - 0.5 * num(&j, "time_axis.mainlobe_s");
        assert!((stop - want).abs() < 1e-15, "{}", file.display());
    }
    for f in j["findings"].as_array().unwrap() {
        assert!(!f["kind"].as_str().unwrap().is_empty());
        assert!(f["text"].as_str().unwrap().ends_with('.'));
    }
}

#[test]
fn runs_on_every_shipped_scenario() {
    for f in files_in("scenarios") {
        check_both_outputs(&f, "scenario");
    }
}

#[test]
fn runs_on_every_example_plan_file() {
    for f in files_in("plans") {
        check_both_outputs(&f, "plan_file");
    }
}

#[test]
fn outdoor_ground_bounce_matches_the_image_method() {
    let f = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("scenarios/outdoor-ground.toml");
    let j = json(&f, &[]);
    // Image method, equal heights h over range R: ground path √(R² + (2h)²)
    // (common practice, no source); R = 12 m, h = 4 m from the scenario.
    let want = (12.0f64.powi(2) + 8.0f64.powi(2)).sqrt();
    let echo = &j["paths"]["echoes"][0];
    assert_eq!(echo["source"], "plane 0");
    assert!((num(echo, "path_m") - want).abs() < 1e-12);
    assert!((num(echo, "excess_delay_s") - (want - 12.0) / C).abs() < 1e-15);
    // Echo field relative to the direct path: |Γ|·R/L with Γ = −0.8 (1/r spreading).
    let rel = 20.0 * (0.8 * 12.0 / want).log10();
    assert!((num(echo, "relative_level_db") - rel).abs() < 1e-9);
    // 2D²/λ with D = 8 × 0.025 m (array length) at 8 GHz (IEEE Std 149 far-field criterion).
    let ff = 2.0 * 0.2f64.powi(2) / (C / 8e9);
    assert!((num(&j, "far_field.far_field_m") - ff).abs() < 1e-12);
    assert_eq!(j["inputs"]["aut_size_source"], "array_length");
    // Continuous mode at 5 deg/s; limit 0.5 · 1° / 0.03 s (half a bin per sweep).
    assert!((num(&j, "rotation.max_rotation_deg_s") - 0.5 / 0.03).abs() < 1e-12);
    assert_eq!(j["rotation"]["within_limit"], true);
}

#[test]
fn options_override_the_file() {
    let f = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("scenarios/outdoor-ground.toml");
    let j = json(
        &f,
        &[
            "--band-window",
            "hann",
            "--aut-size-m",
            "1.5",
            "--fractional-bandwidth",
            "0.05",
            "--rotation-deg-s",
            "2",
        ],
    );
    assert_eq!(j["inputs"]["band_window"], "hann");
    // Hann main lobe 4/B (Harris 1978), B = 6 GHz.
    assert!((num(&j, "time_axis.mainlobe_s") - 4.0 / 6e9).abs() < 1e-18);
    assert_eq!(j["inputs"]["aut_size_source"], "command_line");
    // 2·1.5²/λ at 8 GHz is 120 m, beyond the 12 m range.
    assert_eq!(j["far_field"]["meets_far_field"], false);
    let kinds: Vec<&str> = j["findings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| f["kind"].as_str().unwrap())
        .collect();
    assert!(kinds.contains(&"below_far_field"), "{kinds:?}");
    assert!(!kinds.contains(&"rotation_too_fast"), "{kinds:?}");
    assert_eq!(j["rotation"]["within_limit"], true);
    // Ring-down ln(100)/π / (FBW · f_centre), f_centre = 5 GHz (the planner's model).
    let rd = (100f64).ln() / std::f64::consts::PI / (0.05 * 5e9);
    assert!((num(&j, "ring_down_s") - rd).abs() < 1e-18);

    let bad = plan(&f, &["--band-window", "kaiser:80"]);
    assert!(!bad.status.success());
    let err = String::from_utf8_lossy(&bad.stderr);
    assert!(err.contains("kaiser:80"), "{err}");
}

fn temp_file(name: &str, text: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("sweepgate-plan-test-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

const PLAN_ONLY: &str = r#"
[sweep]
start_hz = 1.0e9
stop_hz = 3.0e9
points = 11
sweep_duration_s = 0.1
[range]
distance_m = 5.0
aut_height_m = 1.5
probe_height_m = 1.5
[[planes]]
axis = "x"
position_m = 12.0
reflection = -1.0
[plan]
aut_size_m = 0.5
"#;

#[test]
fn a_plan_only_file_works_and_reports_aliasing() {
    let f = temp_file("plan-only.toml", PLAN_ONLY);
    let j = json(&f, &[]);
    assert_eq!(j["file_kind"], "plan_file");
    assert_eq!(j["inputs"]["aut_size_source"], "plan_section");
    // Wall 7 m behind the probe: echo path 5 + 2·7 = 19 m (image method), delay 63.4 ns,
    // beyond the alias-free range 1/Δf = 1/200 MHz = 5 ns.
    let echo = &j["paths"]["echoes"][0];
    assert!((num(echo, "path_m") - 19.0).abs() < 1e-12);
    assert!((num(&j, "time_axis.alias_free_s") - 5e-9).abs() < 1e-20);
    let kinds: Vec<&str> = j["findings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| f["kind"].as_str().unwrap())
        .collect();
    assert!(kinds.contains(&"aliased"), "{kinds:?}");
    assert!(kinds.contains(&"step_too_coarse"), "{kinds:?}");
    // No positioner in a plan file: no rotation speed to check.
    assert!(j["rotation"]["planned_rotation_deg_s"].is_null());
    let text = ok_stdout(&plan(&f, &[]));
    assert!(text.contains("wraps around"), "{text}");
}

#[test]
fn bad_files_give_one_line_naming_the_file() {
    let cases = [
        ("syntax.toml", "[sweep\nstart_hz = 1\n", "line 1"),
        (
            "unknown.toml",
            &PLAN_ONLY.replace("points = 11", "points = 11\nspeed = 3"),
            "speed",
        ),
        (
            "field.toml",
            &PLAN_ONLY.replace("reflection = -1.0", "reflection = -2.0"),
            "planes[0].reflection",
        ),
        (
            "size.toml",
            &PLAN_ONLY.replace("aut_size_m = 0.5", "aut_size_m = -0.5"),
            "plan.aut_size_m",
        ),
    ];
    for (name, text, says) in cases {
        let f = temp_file(name, text);
        let out = plan(&f, &[]);
        assert!(!out.status.success(), "{name} was accepted");
        let err = String::from_utf8(out.stderr).unwrap();
        assert_eq!(err.trim_end().lines().count(), 1, "{name}: {err}");
        assert!(err.contains(&f.display().to_string()), "{name}: {err}");
        assert!(err.contains(says), "{name}: {err}");
        assert!(out.stdout.is_empty());
    }
    let missing = std::env::temp_dir().join("sweepgate-no-such-plan.toml");
    let out = plan(&missing, &[]);
    assert!(!out.status.success());
    let err = String::from_utf8(out.stderr).unwrap();
    assert!(err.contains("sweepgate-no-such-plan.toml"), "{err}");
    assert_eq!(err.trim_end().lines().count(), 1, "{err}");
}
