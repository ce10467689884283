//! RCS end to end on a range modelled for the test alone: `tests/rcs/rcs_range.py` (numpy
//! and scipy; its own geometry, coupling, mount, room echoes, noise and drift, its own Mie
//! series; no code of sweepgate's simulator) writes the target, background and reference
//! measurements of two scenes as Touchstone files with manifests, and the targets' own RCS.
//! The library's RCS pipeline must give the target's RCS within 0.5 dB wherever it is within
//! 20 dB of its peak, and without the background subtraction or without the gate it must
//! not.

#[path = "support/models.rs"]
mod python;

use std::collections::HashMap;
use std::path::{Path, PathBuf};

use sweepgate::rcs::Zone;
use sweepgate_host::model::rcs_targets::ReferenceTarget;
use sweepgate_host::pipeline::options::{default_band_window, DEFAULT_GATE_SHAPE};
use sweepgate_host::pipeline::rcs::{self, RcsGate, RcsInput, RcsResult, RcsSettings};
use sweepgate_host::pipeline::rcs_image;
use sweepgate_host::pipeline::rcs_input::{self, RcsFiles};

struct Range {
    dir: tempfile::TempDir,
    geometry: serde_json::Value,
}

fn range() -> Range {
    let dir = tempfile::tempdir().unwrap();
    python::run("rcs_range.py", &[dir.path().display().to_string()]);
    let text = std::fs::read_to_string(dir.path().join("range.json")).unwrap();
    Range {
        geometry: serde_json::from_str(&text).unwrap(),
        dir,
    }
}

impl Range {
    fn g(&self, key: &str) -> f64 {
        self.geometry[key].as_f64().unwrap()
    }
    fn scene(&self, name: &str) -> PathBuf {
        self.dir.path().join(name)
    }
    fn zone_gate(&self) -> RcsGate {
        RcsGate::Zone {
            zone: Zone {
                time_zero_s: self.g("time_zero_s"),
                distance_m: self.g("distance_m"),
                size_m: self.g("zone_m"),
                separation_m: self.g("separation_m"),
            },
            echoes_s: vec![self.g("coupling_s"), self.g("mount_s")],
        }
    }
    fn input(&self, scene: &str, background: bool) -> RcsInput {
        let d = self.scene(scene);
        let (t, b) = (d.join("target.csv"), d.join("background.csv"));
        let (r, rb) = (d.join("reference.s2p"), d.join("reference_background.s2p"));
        let files = RcsFiles {
            target: &t,
            background: background.then_some(b.as_path()),
            reference: &r,
            reference_background: background.then_some(rb.as_path()),
        };
        let sphere = ReferenceTarget::Sphere {
            diameter_m: self.g("reference_diameter_m"),
        };
        rcs_input::read(&files, sphere).unwrap()
    }
}

fn settings(gate: RcsGate) -> RcsSettings {
    RcsSettings {
        gate,
        band_window: default_band_window(),
        gate_shape: DEFAULT_GATE_SHAPE,
        frequencies_hz: vec![9e9, 10e9, 11e9],
    }
}

/// (angle, frequency) → the target's own RCS, dBsm, from the model's truth.csv.
fn truth(dir: &Path) -> HashMap<(i64, i64), f64> {
    let text = std::fs::read_to_string(dir.join("truth.csv")).unwrap();
    text.lines()
        .skip(1)
        .map(|l| {
            let v: Vec<f64> = l.split(',').map(|x| x.parse().unwrap()).collect();
            (((v[0] * 10.0).round() as i64, v[1].round() as i64), v[2])
        })
        .collect()
}

/// Largest |error| in dB over the points where the truth is within 20 dB of its peak,
/// leaving out the outer 10 % of the band at each end (where the gate's renormalization
/// has its residual errors: Dunsmore, "Gating effects in time domain transforms", ARFTG),
/// and how many points were compared.
fn worst_error(result: &RcsResult, truth: &HashMap<(i64, i64), f64>) -> (f64, usize) {
    let peak = truth.values().cloned().fold(f64::MIN, f64::max);
    let k = result.grid.points();
    let (mut worst, mut count) = (0.0f64, 0usize);
    for (a, spectrum) in result.angles_deg.iter().zip(&result.calibrated) {
        for (i, v) in spectrum.iter().enumerate().take(k - k / 10).skip(k / 10) {
            let f = result.grid.frequency_hz(i).round() as i64;
            let want = truth[&((a * 10.0).round() as i64, f)];
            if want >= peak - 20.0 {
                worst = worst.max((rcs::dbsm(*v) - want).abs());
                count += 1;
            }
        }
    }
    (worst, count)
}

#[test]
fn calibrated_rcs_follows_the_truth_and_needs_background_and_gate() {
    let r = range();
    for scene in ["sphere", "points"] {
        let t = truth(&r.scene(scene));
        let full = rcs::process(&r.input(scene, true), &settings(r.zone_gate())).unwrap();
        let (err, n) = worst_error(&full, &t);
        let no_bg = rcs::process(&r.input(scene, false), &settings(r.zone_gate())).unwrap();
        let (err_bg, _) = worst_error(&no_bg, &t);
        let no_gate = rcs::process(&r.input(scene, true), &settings(RcsGate::Off)).unwrap();
        let (err_gate, _) = worst_error(&no_gate, &t);
        println!(
            "{scene}: worst error {err:.3} dB over {n} points; without background {err_bg:.2} dB; without gate {err_gate:.2} dB; residual background {:?} dBsm",
            full.residual_background_dbsm
        );
        assert!(n > 1000, "{scene}: only {n} points compared");
        assert!(err <= 0.5, "{scene}: worst error {err} dB");
        assert!(
            err_bg > 2.0,
            "{scene}: without background only {err_bg} dB off"
        );
        assert!(
            err_gate > 2.0,
            "{scene}: without gate only {err_gate} dB off"
        );
    }
}

/// Local maxima of the image above `floor_db`, strongest first: (x, y, level).
fn peaks(img: &rcs_image::Image, floor_db: f64) -> Vec<(f64, f64, f64)> {
    let (nx, ny) = (img.x_m.len(), img.y_m.len());
    let mut out = Vec::new();
    for iy in 1..ny - 1 {
        for ix in 1..nx - 1 {
            let v = img.db[iy][ix];
            let around = (0..9)
                .filter(|&j| j != 4)
                .all(|j| img.db[iy + j / 3 - 1][ix + j % 3 - 1] < v);
            if v > floor_db && around {
                out.push((img.x_m[ix], img.y_m[iy], v));
            }
        }
    }
    out.sort_by(|a, b| b.2.total_cmp(&a.2));
    out
}

#[test]
fn image_places_point_scatterers_within_a_resolution_cell() {
    let r = range();
    let result = rcs::process(&r.input("points", true), &settings(r.zone_gate())).unwrap();
    let profiles = rcs_image::profiles(&result, 0.45);
    let img = rcs_image::image(&result, &profiles, 0.3, 121);
    // Nominal resolution (Mensa, High Resolution Radar Cross-Section Imaging): c/(2B) with
    // B = 401 × 10 MHz → 37.4 mm; λc/(2Δθ) at 10 GHz over 24° → 35.8 mm.
    assert!((img.down_range_resolution_m - 0.0374).abs() < 1e-3);
    assert!((img.cross_range_resolution_m - 0.0358).abs() < 1e-3);
    let text = std::fs::read_to_string(r.scene("points").join("scatterers.csv")).unwrap();
    let truth: Vec<(f64, f64)> = text
        .lines()
        .skip(1)
        .map(|l| {
            let v: Vec<f64> = l.split(',').map(|x| x.parse().unwrap()).collect();
            (v[0], v[1])
        })
        .collect();
    let found = peaks(&img, -20.0);
    println!(
        "image peaks (x m, y m, dB): {:?}",
        &found[..found.len().min(6)]
    );
    // One peak per scatterer and no ghost above −20 dB (the image's Kaiser windows keep
    // sidelobes near −37 dB).
    assert_eq!(found.len(), truth.len(), "{found:?}");
    for &(x, y) in &truth {
        let hit = found[..truth.len()].iter().any(|&(px, py, _)| {
            (px - x).abs() <= img.down_range_resolution_m
                && (py - y).abs() <= img.cross_range_resolution_m
        });
        assert!(
            hit,
            "no image peak within a resolution cell of ({x}, {y}): {found:?}"
        );
    }
}

fn sweepgate(args: &[&str], dir: &Path) -> std::process::Output {
    std::process::Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .args(args)
        .current_dir(dir)
        .output()
        .unwrap()
}

#[test]
fn rcs_command_writes_the_report() {
    let r = range();
    let d = r.scene("sphere");
    let common = [
        "rcs",
        "target.csv",
        "--background",
        "background.csv",
        "--reference",
        "reference.s2p",
        "--reference-background",
        "reference_background.s2p",
        "--sphere-diameter-m",
        "0.3",
        "--frequencies-hz",
        "9e9,10e9,11e9",
    ];
    let zone = [
        "--zone-distance-m",
        "4",
        "--zone-size-m",
        "0.6",
        "--antenna-separation-m",
        "0.3",
        "--time-zero-ns",
        "1.5",
        "--out",
        "report",
    ];
    // The mount's ring (4.7 m) is outside the zone's gate.
    let ok = sweepgate(
        &[&common[..], &zone, &["--mount-distance-m", "4.7"]].concat(),
        &d,
    );
    assert!(
        ok.status.success(),
        "{}",
        String::from_utf8_lossy(&ok.stderr)
    );
    let rep = d.join("report");
    for f in ["pattern.csv", "profiles.svg", "image.svg", "summary.json"] {
        assert!(rep.join(f).is_file(), "{f} missing");
    }
    let t = truth(&d);
    let csv = std::fs::read_to_string(rep.join("pattern.csv")).unwrap();
    let mut lines = csv.lines();
    assert_eq!(
        lines.next(),
        Some("angle_deg,frequency_hz,rcs_dbsm,raw_db,background_subtracted_db")
    );
    let rows: Vec<Vec<f64>> = lines
        .map(|l| l.split(',').map(|x| x.parse().unwrap()).collect())
        .collect();
    assert_eq!(rows.len(), 49 * 3);
    for row in &rows {
        // The model's own RCS of the 0.18 m sphere at this angle and frequency (truth.csv).
        let want = t[&((row[0] * 10.0).round() as i64, row[1].round() as i64)];
        assert!((row[2] - want).abs() < 0.5, "{row:?} vs {want}");
        // The raw level holds the coupling and the room, far above the target's echo.
        assert!(row[3] > row[4] + 20.0, "{row:?}");
    }
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(rep.join("summary.json")).unwrap()).unwrap();
    assert_eq!(summary["gate"]["from"], "the target zone");
    let res = summary["residual_background_dbsm"].as_f64().unwrap();
    assert!(res < -40.0, "residual background {res} dBsm");
    let svg = std::fs::read_to_string(rep.join("image.svg")).unwrap();
    assert!(
        svg.contains("cross-range λc/(2Δθ) = 35.8 mm"),
        "resolution not stated"
    );
    // A mount echo 4.2 m away lies inside the 0.6 m zone's gate: refused, the mount named.
    let bad = sweepgate(
        &[&common[..], &zone, &["--mount-distance-m", "4.2"]].concat(),
        &d,
    );
    assert!(!bad.status.success());
    let err = String::from_utf8_lossy(&bad.stderr);
    assert!(err.contains("mount's echo lies inside"), "{err}");
    // No gate and no zone: refused with the options to give.
    let none = sweepgate(&common, &d);
    assert!(!none.status.success());
    assert!(String::from_utf8_lossy(&none.stderr).contains("--zone-distance-m"));
}
