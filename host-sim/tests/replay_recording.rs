//! Replay of recordings: set-up from the header, damaged and cut-short files, the command
//! line, and `view` reading the byte stream from a file and over TCP.

use std::io::Write;
use std::path::Path;
use std::process::Command;
use std::sync::atomic::AtomicBool;

use sweepgate_host::formats::recording::recover;
use sweepgate_host::link::view;
use sweepgate_host::model::scenario::Scenario;
use sweepgate_host::pipeline::replay::{replay_records, setup, Options};
use sweepgate_host::pipeline::simulate::simulate_to;

fn short_lab() -> Scenario {
    let mut s = Scenario::from_toml(include_str!("../scenarios/demo-lab.toml")).unwrap();
    s.positioner.start_deg = -10.0;
    s.positioner.stop_deg = 10.0;
    s
}

fn fast() -> Options {
    Options::fast(Path::new("scan.rec"))
}

#[test]
fn gate_follows_the_planner_and_options_override_it() {
    let s = short_lab();
    let (bytes, _) = simulate_to(&s, None, 1, Vec::new(), false).unwrap();
    let rec = recover(&bytes);
    let st = setup(&rec, &fast()).unwrap();
    // Direct path 4 m: centre 4 m / c (cable delay 0), by the image method the floor echo
    // 2·√(2² + 1.4²) − 4 m later; the gate closes half a main lobe before the first echo
    // (common practice, no source: the planner's documented rule, recomputed here).
    let c = 299_792_458.0;
    assert!((st.gate.center_s - 4.0 / c).abs() < 1e-15);
    let floor_excess = (2.0 * (2.0f64.powi(2) + 1.4f64.powi(2)).sqrt() - 4.0) / c;
    let stop = st.gate.center_s + 0.5 * st.gate.span_s;
    assert!(
        stop < st.gate.center_s + floor_excess,
        "gate reaches the floor echo"
    );
    assert!(st.gate.span_s > 2e-9);
    // Pattern frequencies snapped to the grid; 1° bins centred on the truth angles.
    assert_eq!(st.frequencies_hz, vec![9e9, 10e9, 11e9]);
    assert_eq!(st.layout.count(), 20);
    assert!((st.layout.nominal_deg(0) + 9.5).abs() < 1e-6);
    assert_eq!(st.fft_size.points(), 1024);

    let mut a = fast();
    a.gate.gate_center_ns = Some(13.0);
    a.gate.gate_span_ns = Some(2.0);
    a.gate.band_window = Some("hann".into());
    let st = setup(&rec, &a).unwrap();
    assert!((st.gate.center_s - 13e-9).abs() < 1e-18);
    assert!((st.gate.span_s - 2e-9).abs() < 1e-18);
    assert!(st.gate_rule.contains("--gate-span-ns"));
    a.gate.band_window = Some("triangle".into());
    assert!(setup(&rec, &a).is_err());
}

#[test]
fn damaged_and_cut_short_recordings_still_replay() {
    let s = short_lab();
    let (bytes, _) = simulate_to(&s, None, 1, Vec::new(), false).unwrap();
    let whole = recover(&bytes);
    let q = AtomicBool::new(false);
    let full = replay_records(&whole, &fast(), &mut Vec::new(), None, &q).unwrap();
    assert_eq!(full.report.bins.len(), 20);

    // Flip a byte in the middle: one record is lost, the reader says where, the replay
    // goes on and reports it.
    let mut bad = bytes.clone();
    let mid = bad.len() / 2;
    bad[mid] ^= 0x5A;
    let rec = recover(&bad);
    assert_eq!(rec.damage.len(), 1);
    let o = replay_records(&rec, &fast(), &mut Vec::new(), None, &q).unwrap();
    assert!(o
        .report
        .warnings
        .iter()
        .any(|w| w.contains("recording damaged at byte")));
    assert!(o.report.bins.len() >= 19);

    // Cut at two thirds: the bins before the cut are there, and the stop is reported.
    let cut = &bytes[..bytes.len() * 2 / 3];
    let rec = recover(cut);
    let o = replay_records(&rec, &fast(), &mut Vec::new(), None, &q).unwrap();
    assert!(o.report.bins.len() >= 10 && o.report.bins.len() < 20);
    assert!(o
        .report
        .warnings
        .iter()
        .any(|w| w.starts_with("recording: ")));

    // No header, no replay (and a message saying so).
    let e = replay_records(&recover(&bytes[..12]), &fast(), &mut Vec::new(), None, &q).unwrap_err();
    assert!(format!("{e:#}").contains("no intact header"), "{e:#}");
}

#[test]
fn replay_command_writes_the_report_next_to_the_recording() {
    let dir = tempfile::tempdir().unwrap();
    let rec = dir.path().join("bench.rec");
    let (bytes, _) = simulate_to(&short_lab(), None, 1, Vec::new(), false).unwrap();
    std::fs::write(&rec, bytes).unwrap();
    let out = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .args(["replay", "--as-fast-as-possible", "--no-preview"])
        .arg(&rec)
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{err}");
    assert!(err.contains("bins filled 20 / 20"), "{err}");
    let report = dir.path().join("bench-report");
    for f in ["pattern.csv", "summary.json", "impulse-boresight.svg"] {
        assert!(report.join(f).is_file(), "{f} missing");
    }
    // A bad pace is refused.
    let out = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .args(["replay", "--speed", "0", "--no-preview"])
        .arg(&rec)
        .output()
        .unwrap();
    assert!(!out.status.success());
    assert!(String::from_utf8_lossy(&out.stderr).contains("--speed"));
}

#[test]
fn view_reads_a_stream_from_a_file_and_over_tcp() {
    let (bytes, _) = simulate_to(&short_lab(), None, 1, Vec::new(), false).unwrap();
    let mut stream = Vec::new();
    let o = replay_records(
        &recover(&bytes),
        &fast(),
        &mut stream,
        None,
        &AtomicBool::new(false),
    )
    .unwrap();
    let n = o.report.bins.len();

    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("preview.bin");
    std::fs::write(&file, &stream).unwrap();
    let args = view::Options {
        from: file.display().to_string(),
        no_preview: true,
        bins: Some(20),
        grid: None,
        web: None,
    };
    assert_eq!(view::view(&args).unwrap().bins.len(), n);

    let l = std::net::TcpListener::bind("127.0.0.1:0").unwrap();
    let addr = l.local_addr().unwrap();
    let server = std::thread::spawn(move || {
        let (mut s, _) = l.accept().unwrap();
        // Join mid-frame: the first partial frame is dropped, the rest decode.
        s.write_all(&stream[5..]).unwrap();
    });
    let args = view::Options {
        from: addr.to_string(),
        no_preview: true,
        bins: None,
        grid: None,
        web: None,
    };
    let screen = view::view(&args).unwrap();
    server.join().unwrap();
    assert!(screen.bins.len() >= n - 1);
    assert!(screen.decoder_counters().damaged() <= 1);
}
