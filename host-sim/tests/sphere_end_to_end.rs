//! End to end over the sphere, against a model written for the test alone:
//! `tests/sphere/sphere_room.py` (numpy; its own aperture with a cross-polar term, its own
//! image-method room with Fresnel reflections off a floor and two walls, a dual-polarised
//! probe) writes 3-port Touchstone files (S21 co port, S31 cross port) at every 5° of θ
//! and φ, a `theta_deg,phi_deg,file` manifest, one `angle_deg,file` manifest per cut plane,
//! the free-space truth and the AUT's directivity from its own fine-grid integration.
//!
//! Each cut goes through the library's manifest processing twice, as `sweepgate process
//! --parameter S21` with the gate chosen from the data, then `--parameter S31` with that
//! same gate (the cross-polar trace is gated with the co-polar trace's gate). The gated
//! values make sphere samples for `pipeline::sphere`; they must follow the truth (co
//! within 0.5 dB where it is at least −25 dB of its peak, cross within 1 dB where it is at
//! least −30 dB of the co-polar peak) and give the directivity within 0.1 dB; with the
//! model's reference antenna (a substitution measurement) they give its gain within 0.1 dB.
//!
//! Python: `SWEEPGATE_ROOMS_PYTHON` when set (CI's venv), else `python3` when it imports
//! numpy, else a venv made under the target folder (`rooms-venv`, numpy from PyPI). When
//! none works the test fails with a message; it never skips.

use std::collections::HashMap;
use std::path::Path;
use std::process::Command;

use num_complex::Complex64;
use sweepgate_host::pipeline::cuts::{cut_samples, SpherePoint};
use sweepgate_host::pipeline::options::GateOptions;
use sweepgate_host::pipeline::process::{process_manifest, resolve, Options};
use sweepgate_host::pipeline::sphere::{
    cross_polar, efficiency, substitution_gain_dbi, SphereGrid,
};
use sweepgate_host::pipeline::sphere_report::sphere_files;

#[path = "support/models.rs"]
mod models;
use models::{num, python, read_csv};

/// Key of a sample: θ and φ in whole degrees (φ in 0…359), frequency in MHz.
fn key(theta_deg: f64, phi_deg: f64, f_hz: f64) -> (i64, i64, i64) {
    (
        theta_deg.round() as i64,
        (phi_deg.round() as i64).rem_euclid(360),
        (f_hz / 1e6).round() as i64,
    )
}

const FREQUENCIES: &str = "9.6e9,10e9,10.4e9";

/// One cut's values: (signed angle, frequency, gated co, gated cross, raw co).
type CutValues = Vec<(f64, f64, Complex64, Complex64, Complex64)>;

/// One cut's gated values (and the raw co-polar value, to show what the echoes do).
fn gate_cut(manifest: &Path) -> CutValues {
    let pass = |parameter: &str, gate: GateOptions| {
        let opts = Options {
            manifest: Some(manifest.to_path_buf()),
            parameter: Some(parameter.to_string()),
            gate,
            threads: Some(1),
            ..Options::default()
        };
        process_manifest(&resolve(&opts).unwrap(), manifest).unwrap()
    };
    let co = pass(
        "S21",
        GateOptions {
            frequencies_hz: Some(FREQUENCIES.to_string()),
            ..GateOptions::default()
        },
    );
    assert_eq!(
        co.gate_source,
        "chosen from the data",
        "{}",
        manifest.display()
    );
    let cross = pass(
        "S31",
        GateOptions {
            frequencies_hz: Some(FREQUENCIES.to_string()),
            gate_center_ns: Some(co.gate.center_s * 1e9),
            gate_span_ns: Some(co.gate.span_s * 1e9),
            ..GateOptions::default()
        },
    );
    let mut out = Vec::new();
    let freqs = &co.report.frequencies_hz;
    for (b, x) in co.report.bins.iter().zip(&cross.report.bins) {
        assert_eq!(b.angle_deg, x.angle_deg);
        for (fi, f) in freqs.iter().enumerate() {
            let v = &b.values[fi];
            out.push((b.angle_deg, *f, v.gated, x.values[fi].gated, v.raw));
        }
    }
    out
}

/// Sphere samples from a cut plane's gated values (`cuts::cut_samples`), and the raw
/// co-polar values at the same (θ, φ).
fn to_sphere(cut_deg: f64, gated: &CutValues, raw: &mut Vec<SpherePoint>) -> Vec<SpherePoint> {
    let mut v = Vec::new();
    for &(a, f, co, cross, raw_co) in gated {
        let points = cut_samples(cut_deg, a, f, co, cross);
        raw.extend(points.iter().map(|p| SpherePoint {
            co: raw_co,
            cross: Complex64::default(),
            ..*p
        }));
        v.extend(points);
    }
    v
}

#[test]
fn gated_sphere_data_give_the_free_space_patterns_and_the_directivity() {
    let dir = tempfile::tempdir().unwrap();
    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/sphere/sphere_room.py");
    let out = Command::new(python())
        .arg(&script)
        .arg(dir.path())
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "sphere_room.py failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let truth_json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("truth.json")).unwrap())
            .unwrap();
    let (mut points, mut raw) = (Vec::new(), Vec::new());
    for cut in truth_json["cut_planes_deg"].as_array().unwrap() {
        let c = cut.as_f64().unwrap();
        let manifest = dir.path().join(format!("cut_{c:03.0}.csv"));
        points.extend(to_sphere(c, &gate_cut(&manifest), &mut raw));
    }
    // The manifest of both axes lists every file once.
    assert_eq!(read_csv(&dir.path().join("manifest.csv")).len(), 36 * 72);
    let truth = read_truth(dir.path());
    check_patterns(&points, &raw, &truth);
    let reference: HashMap<i64, Complex64> = read_csv(&dir.path().join("reference.csv"))
        .iter()
        .map(|r| {
            let f = (num(r, "frequency_hz") / 1e6).round() as i64;
            (f, Complex64::new(num(r, "re"), num(r, "im")))
        })
        .collect();
    check_directivity(&points, &truth, &truth_json, &reference);
    // The report pieces take the same samples.
    let files = sphere_files(&points, "sphere room").unwrap();
    assert_eq!(files.len(), 1 + 2 * 3);
    let csv = String::from_utf8(files[0].1.clone()).unwrap();
    assert_eq!(csv.lines().count(), 1 + points.len());
    // The same through the command an engineer runs: the manifest of both axes, 3-port
    // files, `--co S21 --cross S31`, one gate chosen from the data for every cut.
    check_command(dir.path(), &truth, &truth_json);
}

/// `sweepgate process manifest.csv --co S21 --cross S31`: the report's gated co- and
/// cross-polar columns against the model's truth (same limits as above), and its
/// `summary.json` directivity per frequency within 0.1 dB of the model's.
fn check_command(dir: &Path, truth: &Truth, truth_json: &serde_json::Value) {
    let out_dir = dir.join("report");
    let out = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .arg("process")
        .arg(dir.join("manifest.csv"))
        .args([
            "--co",
            "S21",
            "--cross",
            "S31",
            "--frequencies-hz",
            FREQUENCIES,
        ])
        .arg("--out")
        .arg(&out_dir)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "process: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let level = |c: Complex64| 20.0 * c.norm().log10();
    let mut peak: HashMap<i64, f64> = HashMap::new();
    for (k, (co, _)) in truth {
        let p = peak.entry(k.2).or_insert(f64::MIN);
        *p = p.max(level(*co));
    }
    let (mut worst_co, mut worst_cross, mut n) = (0.0f64, 0.0f64, 0);
    for r in read_csv(&out_dir.join("pattern.csv")) {
        let k = key(
            num(&r, "theta_deg"),
            num(&r, "phi_deg"),
            num(&r, "frequency_hz"),
        );
        let (tco, tcross) = truth[&k];
        let pk = peak[&k.2];
        if level(tco) >= pk - 25.0 {
            worst_co = worst_co.max((num(&r, "co_gated_db") - level(tco)).abs());
            n += 1;
        }
        if level(tcross) >= pk - 30.0 {
            worst_cross = worst_cross.max((num(&r, "cross_gated_db") - level(tcross)).abs());
        }
    }
    println!(
        "process: co worst {worst_co:.4} dB over {n} samples, cross worst {worst_cross:.4} dB"
    );
    assert!(n > 300, "{n}");
    assert!(
        worst_co < 0.5 && worst_cross < 1.0,
        "{worst_co} {worst_cross}"
    );
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out_dir.join("summary.json")).unwrap())
            .unwrap();
    let want = truth_json["directivity_dbi"].as_array().unwrap();
    let rows = summary["sphere"].as_array().unwrap();
    assert_eq!(rows.len(), want.len());
    for (row, w) in rows.iter().zip(want) {
        let (d, w) = (
            row["directivity_dbi"].as_f64().unwrap(),
            w.as_f64().unwrap(),
        );
        println!(
            "process: {} Hz directivity {d:.3} dBi (model {w:.3}), sampling error {:.3} dB",
            row["frequency_hz"], row["sampling_error_db"]
        );
        assert!((d - w).abs() < 0.1, "{d} vs {w}");
    }
    for name in [
        "sphere.csv",
        "sphere_map_10000mhz.svg",
        "sphere_cuts_10000mhz.svg",
    ] {
        assert!(out_dir.join(name).is_file(), "{name} not written");
    }
}

type Truth = HashMap<(i64, i64, i64), (Complex64, Complex64)>;

fn read_truth(dir: &Path) -> Truth {
    read_csv(&dir.join("truth.csv"))
        .iter()
        .map(|r| {
            let co = Complex64::new(num(r, "co_re"), num(r, "co_im"));
            let cross = Complex64::new(num(r, "cross_re"), num(r, "cross_im"));
            let k = key(
                num(r, "theta_deg"),
                num(r, "phi_deg"),
                num(r, "frequency_hz"),
            );
            (k, (co, cross))
        })
        .collect()
}

fn check_patterns(points: &[SpherePoint], raw: &[SpherePoint], truth: &Truth) {
    let mut peak: HashMap<i64, f64> = HashMap::new();
    for (k, (co, _)) in truth {
        let p = peak.entry(k.2).or_insert(0.0);
        *p = p.max(co.norm());
    }
    let (mut worst_co, mut worst_cross, mut n_co, mut n_cross) = (0.0f64, 0.0f64, 0, 0);
    for p in points {
        let Some((tco, tcross)) = truth.get(&key(p.theta_deg, p.phi_deg, p.frequency_hz)) else {
            continue;
        };
        let pk = peak[&((p.frequency_hz / 1e6).round() as i64)];
        if 20.0 * (tco.norm() / pk).log10() >= -25.0 {
            worst_co = worst_co.max((20.0 * (p.co.norm() / tco.norm()).log10()).abs());
            n_co += 1;
        }
        if 20.0 * (tcross.norm() / pk).log10() >= -30.0 {
            worst_cross = worst_cross.max((20.0 * (p.cross.norm() / tcross.norm()).log10()).abs());
            n_cross += 1;
        }
    }
    // Without the gate the echoes are plain to see in the same region.
    let worst_raw = raw
        .iter()
        .filter_map(|p| {
            let (tco, _) = truth.get(&key(p.theta_deg, p.phi_deg, p.frequency_hz))?;
            let pk = peak[&((p.frequency_hz / 1e6).round() as i64)];
            (20.0 * (tco.norm() / pk).log10() >= -25.0)
                .then(|| (20.0 * (p.co.norm() / tco.norm()).log10()).abs())
        })
        .fold(0.0f64, f64::max);
    println!(
        "co: {n_co} samples ≥ −25 dB, worst {worst_co:.4} dB (raw, ungated: {worst_raw:.2} dB)"
    );
    assert!(
        worst_raw > 1.0,
        "the room's echoes must matter: raw worst {worst_raw} dB"
    );
    println!("cross: {n_cross} samples ≥ −30 dB of the co peak, worst {worst_cross:.4} dB");
    assert!(n_co > 300 && n_cross > 200, "{n_co} {n_cross}");
    assert!(worst_co < 0.5, "co-polar worst {worst_co} dB");
    assert!(worst_cross < 1.0, "cross-polar worst {worst_cross} dB");
}

fn check_directivity(
    points: &[SpherePoint],
    truth: &Truth,
    truth_json: &serde_json::Value,
    reference: &HashMap<i64, Complex64>,
) {
    let freqs = truth_json["frequencies_hz"].as_array().unwrap();
    let want = truth_json["directivity_dbi"].as_array().unwrap();
    for (f, w) in freqs.iter().zip(want) {
        let (f, w) = (f.as_f64().unwrap(), w.as_f64().unwrap());
        let d = SphereGrid::from_points(points, f)
            .unwrap()
            .directivity()
            .unwrap();
        // The same grid of the free-space truth: what the sampling alone costs.
        let truth_points: Vec<SpherePoint> = points
            .iter()
            .filter(|p| (p.frequency_hz - f).abs() < 1.0)
            .map(|p| {
                // A pole's sample was written once per cut plane, at φ < 180°.
                let (co, cross) = truth
                    .get(&key(p.theta_deg, p.phi_deg, f))
                    .or_else(|| truth.get(&key(p.theta_deg, p.phi_deg - 180.0, f)))
                    .copied()
                    .unwrap();
                SpherePoint { co, cross, ..*p }
            })
            .collect();
        let dt = SphereGrid::from_points(&truth_points, f)
            .unwrap()
            .directivity()
            .unwrap();
        let x = cross_polar(points, f).unwrap();
        println!(
            "{f} Hz: gated {:.3} dBi, truth on the grid {:.3} dBi, fine-grid truth {w:.3} dBi, stated sampling error {:.3} dB; XPD on axis {:?} dB, main beam {:.1} dB",
            d.directivity_dbi,
            dt.directivity_dbi,
            d.sampling_error_db.unwrap(),
            x.on_axis_db,
            x.main_beam_db
        );
        assert!((d.directivity_dbi - w).abs() < 0.1, "{f} Hz: {d:?} vs {w}");
        check_gain(points, f, d.directivity_dbi, reference, truth_json);
        assert!((dt.directivity_dbi - w).abs() < d.sampling_error_db.unwrap().max(0.01));
    }
}

/// Gain by substitution from the gated boresight sample and the reference antenna's S21,
/// against the model's gain; the efficiency G/D against the model's.
fn check_gain(
    points: &[SpherePoint],
    f: f64,
    directivity_dbi: f64,
    reference: &HashMap<i64, Complex64>,
    truth_json: &serde_json::Value,
) {
    let boresight = points
        .iter()
        .find(|p| p.theta_deg == 0.0 && (p.frequency_hz - f).abs() < 1.0)
        .unwrap();
    // Total (co and cross) at boresight, as one trace of the same magnitude.
    let aut = Complex64::new(
        (boresight.co.norm_sqr() + boresight.cross.norm_sqr()).sqrt(),
        0.0,
    );
    let reference_gain = truth_json["reference_gain_dbi"].as_f64().unwrap();
    let g = substitution_gain_dbi(aut, reference[&((f / 1e6).round() as i64)], reference_gain);
    let want = truth_json["gain_dbi"].as_f64().unwrap();
    let want_d = truth_json["directivity_dbi"][truth_json["frequencies_hz"]
        .as_array()
        .unwrap()
        .iter()
        .position(|x| (x.as_f64().unwrap() - f).abs() < 1.0)
        .unwrap()]
    .as_f64()
    .unwrap();
    let eff = efficiency(g, directivity_dbi);
    let want_eff = efficiency(want, want_d);
    println!("{f} Hz: gain by substitution {g:.3} dBi (model {want:.3} dBi), efficiency {eff:.4} (model {want_eff:.4})");
    assert!((g - want).abs() < 0.1, "{f} Hz: gain {g} vs {want}");
    assert!(
        (eff - want_eff).abs() < 0.03,
        "{f} Hz: efficiency {eff} vs {want_eff}"
    );
}
