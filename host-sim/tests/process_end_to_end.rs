//! `sweepgate process` end to end: a manifest of per-angle Touchstone files written from a
//! simulated step-and-stop scan gives the replay's pattern; reprocessing a recording gives
//! the replay's bins exactly; the command line writes the report folder.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::atomic::AtomicBool;

use sweepgate_host::formats::recording::{recover, Record, Recovered};
use sweepgate_host::formats::touchstone::Spacing;
use sweepgate_host::model::scenario::Scenario;
use sweepgate_host::output::report::ReportBin;
use sweepgate_host::pipeline::options::{Choices, Origin, DEFAULT_GATE_SHAPE};
use sweepgate_host::pipeline::process::{self, Input, Resolved};
use sweepgate_host::pipeline::replay::{self, replay_records};
use sweepgate_host::pipeline::simulate::simulate_to;
use sweepgate_host::units::db;

/// The workshop bay cut to seven stops, −6°…6° in 2° steps, one sweep per stop.
fn short_bay() -> Scenario {
    let mut s = Scenario::from_toml(include_str!("../scenarios/workshop-bay.toml")).unwrap();
    s.positioner.start_deg = -6.0;
    s.positioner.stop_deg = 6.0;
    s
}

fn short_lab() -> Scenario {
    let mut s = Scenario::from_toml(include_str!("../scenarios/demo-lab.toml")).unwrap();
    s.positioner.start_deg = -10.0;
    s.positioner.stop_deg = 10.0;
    s
}

fn resolved(input: Input, out: &Path) -> Resolved {
    Resolved {
        input,
        choices: Choices {
            band_window: Some(sweepgate::window::WindowKind::kaiser_for_sidelobe_db(50.0)),
            gate_shape: Some(DEFAULT_GATE_SHAPE),
            ..Choices::default()
        },
        parameter: None,
        spacing: Spacing::RequireUniform,
        out: out.to_path_buf(),
        gain: None,
        exports: Default::default(),
        threads: 2,
        traces: None,
        bounded_memory: false,
    }
}

/// Writes one .s2p per sweep of a step-and-stop recording (S21 only non-zero; RI format,
/// values with 10 significant digits, which read back to the same f32) and the manifest.
fn write_manifest(rec: &Recovered, dir: &Path, start_deg: f64, step_deg: f64) -> PathBuf {
    let h = rec.header().unwrap();
    let sweeps: Vec<&Vec<_>> = rec
        .records
        .iter()
        .filter_map(|(_, r)| match r {
            Record::Sweep { s21, .. } => Some(s21),
            _ => None,
        })
        .collect();
    let mut manifest = String::from("angle_deg,file\n");
    std::fs::create_dir_all(dir.join("sweeps")).unwrap();
    for (i, s21) in sweeps.iter().enumerate() {
        let angle = start_deg + step_deg * i as f64;
        let name = format!("sweeps/stop{i:03}.s2p");
        let mut text = format!("! stop {i} at {angle} deg\n# Hz S RI R 50\n");
        for (k, z) in s21.iter().enumerate() {
            let f = h.grid.start_hz + h.grid.step_hz * k as f64;
            writeln!(text, "{f:?} 0 0 {:.9e} {:.9e} 0 0 0 0", z.re, z.im).unwrap();
        }
        std::fs::write(dir.join(&name), text).unwrap();
        writeln!(manifest, "{angle},{name}").unwrap();
    }
    let m = dir.join("scan.csv");
    std::fs::write(&m, manifest).unwrap();
    m
}

fn by_angle(bins: &[ReportBin]) -> Vec<&ReportBin> {
    let mut v: Vec<&ReportBin> = bins.iter().collect();
    v.sort_by(|a, b| a.angle_deg.total_cmp(&b.angle_deg));
    v
}

#[test]
fn manifest_of_touchstone_files_gives_the_replayed_pattern() {
    let s = short_bay();
    let (bytes, _) = simulate_to(&s, None, 3, Vec::new(), false).unwrap();
    let rec = recover(&bytes);
    let q = AtomicBool::new(false);
    let live = replay_records(
        &rec,
        &replay::Options::fast(Path::new("bay.rec")),
        &mut Vec::new(),
        None,
        &q,
    )
    .unwrap();
    let live_bins = by_angle(&live.report.bins);
    assert_eq!(live_bins.len(), 7);
    assert!(
        live_bins.iter().all(|b| b.sweeps == 1),
        "one sweep per stop"
    );

    let dir = tempfile::tempdir().unwrap();
    let m = write_manifest(&rec, dir.path(), -6.0, 2.0);
    // The same gate as the replay (the planner's), given in ns as a user would.
    let mut r = resolved(Input::Manifest(m.clone()), &dir.path().join("report"));
    r.choices.center_ns = Some((live.setup.gate.center_s * 1e9, Origin::CommandLine));
    r.choices.span_ns = Some((live.setup.gate.span_s * 1e9, Origin::CommandLine));
    r.choices.frequencies_hz = Some(live.setup.frequencies_hz.clone());
    let p = process::process(&r).unwrap();
    assert_eq!(p.gate_source, "command line");
    let off = by_angle(&p.report.bins);
    assert_eq!(off.len(), live_bins.len());
    let mut worst_db = 0.0f64;
    for (a, b) in live_bins.iter().zip(&off) {
        assert!((a.angle_deg - b.angle_deg).abs() < 1e-6);
        for (x, y) in a.values.iter().zip(&b.values) {
            worst_db = worst_db.max((db(x.gated) - db(y.gated)).abs());
            worst_db = worst_db.max((db(x.raw) - db(y.raw)).abs());
        }
        let (ea, eb) = (a.echo_db.unwrap(), b.echo_db.unwrap());
        assert!((ea - eb).abs() < 1e-3, "echo {ea} vs {eb}");
    }
    eprintln!("manifest vs replay: largest |Δ| of raw and gated levels {worst_db:e} dB");
    // 1e-3 dB (common practice, no source): the Touchstone grid's step is (last − first)/
    // (K − 1), which may differ from the recording's step in the last bits, and the ns
    // round trip of the gate may move it by an ulp; both change f32 results by a few ulps.
    assert!(worst_db < 1e-3, "{worst_db} dB");

    // Without a gate the manifest's gate is chosen from the data, centered on the direct
    // path, 3 m / c (textbook: delay = distance / speed of light), to within two time
    // samples of the 1024-point response (1/(1024·20 MHz) = 48.8 ps each).
    let r = resolved(Input::Manifest(m), &dir.path().join("auto"));
    let p = process::process(&r).unwrap();
    assert_eq!(p.gate_source, "chosen from the data");
    let direct = 3.0 / 299_792_458.0;
    assert!(
        (p.gate.center_s - direct).abs() < 2.0 * 48.83e-12,
        "{} ns",
        p.gate.center_s * 1e9
    );
    let summary: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(dir.path().join("auto/summary.json")).unwrap(),
    )
    .unwrap();
    assert_eq!(summary["settings"]["gate_source"], "chosen from the data");
}

fn write_recording(s: &Scenario, dir: &Path) -> (PathBuf, Recovered) {
    let (bytes, _) = simulate_to(s, None, 1, Vec::new(), false).unwrap();
    let path = dir.join("lab.rec");
    std::fs::write(&path, &bytes).unwrap();
    (path, recover(&bytes))
}

fn assert_bins_bit_equal(a: &[ReportBin], b: &[ReportBin]) {
    assert_eq!(a.len(), b.len());
    for (x, y) in by_angle(a).iter().zip(by_angle(b)) {
        assert_eq!(x.angle_deg.to_bits(), y.angle_deg.to_bits());
        assert_eq!(x.sweeps, y.sweeps);
        assert_eq!(x.flags, y.flags);
        assert_eq!(x.echo_db.map(f64::to_bits), y.echo_db.map(f64::to_bits));
        for (u, v) in x.values.iter().zip(&y.values) {
            assert_eq!(u.raw.re.to_bits(), v.raw.re.to_bits());
            assert_eq!(u.raw.im.to_bits(), v.raw.im.to_bits());
            assert_eq!(u.gated.re.to_bits(), v.gated.re.to_bits());
            assert_eq!(u.gated.im.to_bits(), v.gated.im.to_bits());
        }
    }
}

#[test]
fn reprocessing_a_recording_reproduces_the_replayed_bins_bit_for_bit() {
    // Bit-equal, not within a tolerance: processing runs the same engine on the same
    // records with the same gate, in the same order, so nothing may differ at all.
    let dir = tempfile::tempdir().unwrap();
    let (path, rec) = write_recording(&short_lab(), dir.path());
    let q = AtomicBool::new(false);
    let live = replay_records(
        &rec,
        &replay::Options::fast(&path),
        &mut Vec::new(),
        None,
        &q,
    )
    .unwrap();
    assert_eq!(live.report.bins.len(), 20);

    // Defaults: the planner's gate, as replay.
    let r = resolved(Input::Recording(path.clone()), &dir.path().join("a"));
    let p = process::process(&r).unwrap();
    assert_eq!(p.gate_source, "planner");
    assert_eq!(p.gate, live.setup.gate);
    assert_bins_bit_equal(&live.report.bins, &p.report.bins);

    // Explicit gate and band window, the same on both sides.
    let mut a = replay::Options::fast(&path);
    a.gate.gate_center_ns = Some(13.0);
    a.gate.gate_span_ns = Some(2.5);
    a.gate.band_window = Some("hamming".into());
    let live = replay_records(&rec, &a, &mut Vec::new(), None, &q).unwrap();
    let mut r = resolved(Input::Recording(path), &dir.path().join("b"));
    r.choices.center_ns = Some((13.0, Origin::SettingsFile));
    r.choices.span_ns = Some((2.5, Origin::SettingsFile));
    r.choices.band_window = Some(sweepgate::window::WindowKind::Hamming);
    let p = process::process(&r).unwrap();
    assert_eq!(p.gate_source, "settings file");
    assert_eq!(p.gate, live.setup.gate);
    assert_bins_bit_equal(&live.report.bins, &p.report.bins);
    // A different gate gives different bins (the comparison above can fail).
    r.choices.span_ns = Some((1.5, Origin::SettingsFile));
    let q = process::process(&r).unwrap();
    assert_ne!(
        q.report.bins[0].values[0].gated,
        p.report.bins[0].values[0].gated
    );
}

#[test]
fn the_command_writes_pattern_csv_at_grid_frequencies() {
    let s = short_bay();
    let (bytes, _) = simulate_to(&s, None, 3, Vec::new(), false).unwrap();
    let rec = recover(&bytes);
    let dir = tempfile::tempdir().unwrap();
    let m = write_manifest(&rec, dir.path(), -6.0, 2.0);
    let out = dir.path().join("D");
    // 6.007 GHz is off the 20 MHz grid: taken at 6.000 GHz; 10 GHz is on it.
    let st = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .args(["process", "--manifest"])
        .arg(&m)
        .args([
            "--gate-center-ns",
            "10.0",
            "--gate-span-ns",
            "4.0",
            "--frequencies-hz",
            "6.007e9,10e9",
            "--out",
        ])
        .arg(&out)
        .output()
        .unwrap();
    assert!(
        st.status.success(),
        "{}",
        String::from_utf8_lossy(&st.stderr)
    );
    let csv = std::fs::read_to_string(out.join("pattern.csv")).unwrap();
    let mut lines = csv.lines();
    assert_eq!(
        lines.next().unwrap(),
        "angle_deg,frequency_hz,raw_db,gated_db,gated_phase_deg,raw_phase_deg,echo_db,sweeps,flags,near_band_edge"
    );
    let rows: Vec<Vec<&str>> = lines.map(|l| l.split(',').collect()).collect();
    assert_eq!(rows.len(), 7 * 2);
    let mut freqs: Vec<f64> = rows.iter().map(|r| r[1].parse().unwrap()).collect();
    freqs.sort_by(f64::total_cmp);
    freqs.dedup();
    assert_eq!(freqs, vec![6e9, 10e9]);
    let summary = std::fs::read_to_string(out.join("summary.json")).unwrap();
    let json: serde_json::Value = serde_json::from_str(&summary).unwrap();
    // The band-edge column repeats summary.json's mark for the row's frequency.
    let marks: Vec<(f64, bool)> = json["settings"]["gate_self_error"]
        .as_array()
        .unwrap()
        .iter()
        .map(|e| {
            (
                e["frequency_hz"].as_f64().unwrap(),
                e["near_band_edge"].as_bool().unwrap(),
            )
        })
        .collect();
    assert_eq!(marks.len(), 2);
    for r in &rows {
        assert_eq!(r.len(), 10);
        let g: f64 = r[3].parse().unwrap();
        assert!(g.is_finite() && g < 0.0, "gated level {g}");
        assert_eq!(r[7], "1");
        let f: f64 = r[1].parse().unwrap();
        let mark = marks.iter().find(|m| m.0 == f).unwrap().1;
        assert_eq!(r[9], mark.to_string());
    }
    assert!(
        summary.contains("\"gate_source\": \"command line\""),
        "{summary}"
    );
    assert!(
        summary.contains("6007000000"),
        "the moved frequency is named"
    );
    assert!(out.join("impulse-boresight.svg").exists());

    // A settings file with an unknown key is refused by the command, naming the key.
    let bad = dir.path().join("bad.toml");
    std::fs::write(&bad, "gate_width_ns = 3\n").unwrap();
    let st = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .args(["process", "--settings"])
        .arg(&bad)
        .arg(&m)
        .output()
        .unwrap();
    assert!(!st.status.success());
    assert!(String::from_utf8_lossy(&st.stderr).contains("gate_width_ns"));
}

#[test]
fn a_recording_without_scenario_is_gated_with_the_gate_from_its_data() {
    use sweepgate_host::formats::recording::Writer;
    let (bytes, _) = simulate_to(&short_lab(), None, 1, Vec::new(), false).unwrap();
    let rec = recover(&bytes);
    let mut w = Writer::new(Vec::new()).unwrap();
    let mut step_hz = 0.0;
    for (_, r) in &rec.records {
        match r {
            Record::Header(h) => {
                let mut h = h.clone();
                h.scenario = None;
                h.scenario_toml = None;
                step_hz = h.grid.step_hz;
                w.write(&Record::Header(h)).unwrap();
            }
            Record::End { .. } => {}
            other => {
                w.write(other).unwrap();
            }
        }
    }
    let (plain, _) = w.finish().unwrap();
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("plain.rec");
    std::fs::write(&path, plain).unwrap();
    let r = resolved(Input::Recording(path), &dir.path().join("r"));
    let p = process::process(&r).unwrap();
    assert_eq!(p.gate_source, "chosen from the data");
    // Direct path 4 m (the demo lab's range; textbook delay = distance / c), to within two
    // samples of the 1024-point impulse response.
    let dt = 1.0 / (1024.0 * step_hz);
    let direct = 4.0 / 299_792_458.0;
    assert!(
        (p.gate.center_s - direct).abs() < 2.0 * dt,
        "{} ns",
        p.gate.center_s * 1e9
    );
    assert!(!p.report.bins.is_empty());
}

#[test]
fn gain_by_substitution_gives_the_aut_gain_in_dbi() {
    // A cos^n power pattern over the upper hemisphere has directivity D = 2(n + 1)
    // (shared REFERENCES, computed; e.g. Balanis): the reference, n = 10, is 13.424 dBi; the
    // AUT, n = 4, is 10.000 dBi at boresight. Both are measured in the same (reflective) bay
    // and gated alike; gain transfer G_AUT = G_ref + P_AUT − P_ref (common practice, no
    // source) must give the AUT's gain within 0.05 dB.
    use sweepgate_host::model::scenario::Antenna;
    let dir = tempfile::tempdir().unwrap();
    let mut aut = short_bay();
    aut.aut = Antenna::CosPower { n: 4.0 };
    let (bytes, _) = simulate_to(&aut, None, 3, Vec::new(), false).unwrap();
    let m = write_manifest(&recover(&bytes), &dir.path().join("aut"), -6.0, 2.0);

    let mut refs = short_bay();
    refs.aut = Antenna::CosPower { n: 10.0 };
    let (bytes, _) = simulate_to(&refs, None, 4, Vec::new(), false).unwrap();
    let rm = write_manifest(&recover(&bytes), &dir.path().join("ref"), -6.0, 2.0);
    // The stop at 0° (the fourth of −6…6 in 2° steps) is the reference measurement.
    let reference = rm.parent().unwrap().join("sweeps/stop003.s2p");
    let table = dir.path().join("reference-gain.csv");
    let g_ref = 10.0 * 22f64.log10();
    std::fs::write(
        &table,
        format!("frequency_hz,gain_dbi\n1e9,{g_ref}\n20e9,{g_ref}\n"),
    )
    .unwrap();

    let out = dir.path().join("report");
    let st = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .arg("process")
        .arg("--manifest")
        .arg(&m)
        .arg("--gain-table")
        .arg(&table)
        .arg("--reference")
        .arg(&reference)
        .arg("--out")
        .arg(&out)
        .output()
        .unwrap();
    assert!(
        st.status.success(),
        "{}",
        String::from_utf8_lossy(&st.stderr)
    );
    let csv = std::fs::read_to_string(out.join("pattern.csv")).unwrap();
    let header: Vec<&str> = csv.lines().next().unwrap().split(',').collect();
    let col = |name: &str| header.iter().position(|h| *h == name).unwrap();
    let (a, g) = (col("angle_deg"), col("gain_dbi"));
    let mut rows = 0;
    for line in csv.lines().skip(1) {
        let v: Vec<&str> = line.split(',').collect();
        if v[a].parse::<f64>().unwrap().abs() < 1e-9 {
            let gain: f64 = v[g].parse().unwrap();
            eprintln!("boresight gain by substitution: {gain:.4} dBi (AUT 10.000 dBi)");
            assert!(
                (gain - 10.0).abs() < 0.05,
                "boresight gain {gain} dBi, want 10.000"
            );
            rows += 1;
        }
    }
    assert!(rows > 0, "no boresight rows in\n{csv}");
    let summary: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    let peak = summary["metrics_normalized_to_peak"][0]["absolute_gain"]["peak_gain_dbi"]
        .as_f64()
        .unwrap();
    assert!((peak - 10.0).abs() < 0.05, "peak gain {peak} dBi");

    // A reference on another grid is refused, naming the file.
    let bad = dir.path().join("bad.s1p");
    std::fs::write(&bad, "# GHz S RI R 50\n1 0.1 0\n2 0.1 0\n3 0.1 0\n").unwrap();
    let st = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .arg("process")
        .arg("--manifest")
        .arg(&m)
        .arg("--gain-table")
        .arg(&table)
        .arg("--reference")
        .arg(&bad)
        .arg("--out")
        .arg(dir.path().join("bad-report"))
        .output()
        .unwrap();
    assert!(!st.status.success());
    let err = String::from_utf8_lossy(&st.stderr);
    assert!(err.contains("bad.s1p") && err.contains("differ"), "{err}");
}

#[test]
fn two_files_at_one_angle_are_averaged_and_reported_not_dropped() {
    // −6° and 354° are one angle once the manifest spans a full turn: both files go into
    // one bin (here the same sweep twice, so the average is that sweep) and a warning and
    // the counters say so.
    let s = short_bay();
    let (bytes, _) = simulate_to(&s, None, 3, Vec::new(), false).unwrap();
    let rec = recover(&bytes);
    let dir = tempfile::tempdir().unwrap();
    let m = write_manifest(&rec, dir.path(), -6.0, 2.0);
    let mut text = std::fs::read_to_string(&m).unwrap();
    text.push_str("354,sweeps/stop000.s2p\n");
    std::fs::write(&m, text).unwrap();
    let r = resolved(Input::Manifest(m), &dir.path().join("report"));
    let p = process::process(&r).unwrap();
    assert_eq!(p.report.bins.len(), 7);
    let b = p
        .report
        .bins
        .iter()
        .find(|b| (b.angle_deg + 6.0).abs() < 1e-9)
        .unwrap();
    assert_eq!(b.sweeps, 2);
    let w: Vec<&String> = p
        .report
        .warnings
        .iter()
        .filter(|w| w.contains("fall into one bin"))
        .collect();
    assert_eq!(w.len(), 1, "{:?}", p.report.warnings);
    assert!(w[0].contains("(354°)") && w[0].contains("(-6°)"), "{w:?}");
    let summary: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(dir.path().join("report/summary.json")).unwrap(),
    )
    .unwrap();
    assert_eq!(summary["counters"]["files"], 8);
    assert_eq!(summary["counters"]["bins_combining_files"], 1);
    assert_eq!(summary["settings"]["bins"]["width_deg"], 2.0);
    assert_eq!(summary["settings"]["bins"]["one_per_manifest_angle"], false);
}
