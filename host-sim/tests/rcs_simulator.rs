//! The product's RCS simulator (`simulate-rcs`) through the RCS pipeline: the calibrated RCS
//! of its targets against their exact values, a sphere by the Mie series (checked against
//! scipy in `rcs_targets.rs`) and a flat plate by physical optics (Knott, Shaeffer & Tuley,
//! Radar Cross Section, 2nd ed.).

use std::path::Path;

use sweepgate::plan::SPEED_OF_LIGHT_M_S;
use sweepgate::rcs::Zone;
use sweepgate_host::model::rcs_scene::{RcsScene, Scatterer};
use sweepgate_host::model::rcs_targets::ReferenceTarget;
use sweepgate_host::pipeline::options::{default_band_window, DEFAULT_GATE_SHAPE};
use sweepgate_host::pipeline::rcs::{self, RcsGate, RcsResult, RcsSettings};
use sweepgate_host::pipeline::rcs_input::{self, RcsFiles};
use sweepgate_host::pipeline::rcs_simulate;

fn process(dir: &Path, scene: &RcsScene) -> RcsResult {
    let ext = if dir.join("reference.s1p").exists() {
        "s1p"
    } else {
        "s2p"
    };
    let (t, b) = (dir.join("target.csv"), dir.join("background.csv"));
    let r = dir.join(format!("reference.{ext}"));
    let rb = dir.join(format!("reference_background.{ext}"));
    let files = RcsFiles {
        target: &t,
        background: Some(&b),
        reference: &r,
        reference_background: Some(&rb),
    };
    let sphere = ReferenceTarget::Sphere {
        diameter_m: scene.reference_sphere_m,
    };
    let input = rcs_input::read(&files, sphere).unwrap();
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

/// Largest |calibrated − exact| in dB where the exact RCS is within 20 dB of its peak, in
/// the inner 80 % of the band (the gate's renormalization leaves its residual errors in the
/// outer 10 % at each end: Dunsmore, "Gating effects in time domain transforms", ARFTG).
fn worst(result: &RcsResult, exact: impl Fn(f64, f64) -> f64) -> f64 {
    let k = result.grid.points();
    let mut all = Vec::new();
    for (a, s) in result.angles_deg.iter().zip(&result.calibrated) {
        for (i, v) in s.iter().enumerate().take(k - k / 10).skip(k / 10) {
            all.push((exact(*a, result.grid.frequency_hz(i)), rcs::dbsm(*v)));
        }
    }
    let peak = all.iter().map(|p| p.0).fold(f64::MIN, f64::max);
    all.iter()
        .filter(|p| p.0 >= peak - 20.0)
        .map(|p| (p.1 - p.0).abs())
        .fold(0.0, f64::max)
}

#[test]
fn simulated_sphere_is_measured_within_half_a_db() {
    let dir = tempfile::tempdir().unwrap();
    let scenario = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios/rcs/range.toml");
    rcs_simulate::run(&scenario, dir.path()).unwrap();
    let scene = rcs_simulate::read_scene(&scenario).unwrap();
    let result = process(dir.path(), &scene);
    let sphere = ReferenceTarget::Sphere { diameter_m: 0.2 };
    let err = worst(&result, |_, f| 10.0 * sphere.rcs_m2(f).unwrap().log10());
    println!("sphere 0.2 m: worst error {err:.3} dB");
    assert!(err < 0.5, "{err}");
    assert!(result.residual_background_dbsm.unwrap() < -50.0);
}

#[test]
fn simulated_plate_follows_physical_optics() {
    let text = std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios/rcs/range.toml"),
    )
    .unwrap();
    let mut scene: RcsScene = toml::from_str(&text).unwrap();
    let (w, h) = (0.12, 0.1);
    scene.target = vec![Scatterer::Plate {
        at_m: [0.0; 3],
        width_m: w,
        height_m: h,
    }];
    scene.angles_deg = [-12.0, 12.0, 0.25];
    let dir = tempfile::tempdir().unwrap();
    for (name, bytes) in rcs_simulate::scan_files(&scene).unwrap() {
        let p = dir.path().join(name);
        std::fs::create_dir_all(p.parent().unwrap()).unwrap();
        std::fs::write(p, bytes).unwrap();
    }
    let result = process(dir.path(), &scene);
    // σ(θ) = 4π(wh)²/λ²·[cos θ·sinc(kw sin θ)]²: the first null at sin θ = λ/(2w) (7.2° at
    // 10 GHz) lies inside the scan, so the 20 dB window leaves out the nulls.
    let exact = |a: f64, f: f64| {
        let lambda = SPEED_OF_LIGHT_M_S / f;
        let k = 2.0 * std::f64::consts::PI / lambda;
        let u = k * w * a.to_radians().sin();
        let sinc = if u.abs() < 1e-12 { 1.0 } else { u.sin() / u };
        let s = 4.0 * std::f64::consts::PI * (w * h).powi(2) / lambda.powi(2)
            * (a.to_radians().cos() * sinc).powi(2);
        10.0 * s.max(1e-30).log10()
    };
    let err = worst(&result, exact);
    println!("plate {w} m × {h} m: worst error {err:.3} dB");
    assert!(err < 0.5, "{err}");
}

#[test]
fn bad_scenes_are_refused_naming_the_file() {
    let dir = tempfile::tempdir().unwrap();
    let good = std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios/rcs/range.toml"),
    )
    .unwrap();
    for (what, text) in [
        (
            "too many angles",
            good.replace("[-10.0, 10.0, 0.5]", "[0.0, 360.0, 0.001]"),
        ),
        ("one point", good.replace("points = 401", "points = 1")),
        (
            "unknown field",
            good.replace("seed = 7", "seed = 7\ncolour = 1"),
        ),
    ] {
        let p = dir.path().join("scene.toml");
        std::fs::write(&p, text).unwrap();
        let err = format!("{:#}", rcs_simulate::read_scene(&p).unwrap_err());
        assert!(err.contains("scene.toml"), "{what}: {err}");
    }
}

/// One antenna (S11, 1-port files): the same measurements written as `.s1p` give the same
/// RCS as the 2-port files' S21 (the reader takes S11 from 1-port files).
#[test]
fn one_port_files_give_the_same_rcs() {
    let scenario = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios/rcs/range.toml");
    let mut scene = rcs_simulate::read_scene(&scenario).unwrap();
    scene.separation_m = 0.0; // one antenna: its mismatch stands where the coupling was
    let (two, one) = (tempfile::tempdir().unwrap(), tempfile::tempdir().unwrap());
    for (name, bytes) in rcs_simulate::scan_files(&scene).unwrap() {
        let p = two.path().join(&name);
        std::fs::create_dir_all(p.parent().unwrap()).unwrap();
        std::fs::write(&p, &bytes).unwrap();
        let text = String::from_utf8(bytes).unwrap();
        let (name, text) = if let Some(stem) = name.strip_suffix(".s2p") {
            // f S11 S21 S12 S22 → f S11 with S11 := S21.
            let lines: Vec<String> = text
                .lines()
                .map(|l| {
                    let v: Vec<&str> = l.split_whitespace().collect();
                    if l.starts_with(['!', '#']) || v.len() < 9 {
                        l.to_string()
                    } else {
                        format!("{} {} {}", v[0], v[3], v[4])
                    }
                })
                .collect();
            (format!("{stem}.s1p"), lines.join("\n") + "\n")
        } else {
            (name, text.replace(".s2p", ".s1p"))
        };
        let p = one.path().join(name);
        std::fs::create_dir_all(p.parent().unwrap()).unwrap();
        std::fs::write(p, text).unwrap();
    }
    let read = |dir: &Path, ext: &str| {
        let (t, b) = (dir.join("target.csv"), dir.join("background.csv"));
        let r = dir.join(format!("reference.{ext}"));
        let rb = dir.join(format!("reference_background.{ext}"));
        let files = RcsFiles {
            target: &t,
            background: Some(&b),
            reference: &r,
            reference_background: Some(&rb),
        };
        let sphere = ReferenceTarget::Sphere { diameter_m: 0.3 };
        rcs_input::read(&files, sphere).unwrap()
    };
    let (a, b) = (read(two.path(), "s2p"), read(one.path(), "s1p"));
    assert_eq!(a, b);
    let result = process(one.path(), &scene);
    let sphere = ReferenceTarget::Sphere { diameter_m: 0.2 };
    let err = worst(&result, |_, f| 10.0 * sphere.rcs_m2(f).unwrap().log10());
    println!("one antenna, 1-port files: worst error {err:.3} dB");
    assert!(err < 0.5, "{err}");
}
