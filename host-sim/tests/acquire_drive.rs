//! `sweepgate acquire --drive` against the simulated instrument (`sweepgate instrument`)
//! and the simulated turntable (`sweepgate positioner`) over TCP: step and stop, and a
//! continuous turn, each recorded and replayed; a stop on Ctrl-C and on a drive fault
//! that leaves the turntable stopped; a plan outside the limits refused before anything
//! moves; the turntable's clock offset and drift recovered from a drifting positioner.

mod instrument_support;

use std::io::{BufRead, BufReader, Write};
use std::net::TcpStream;
use std::path::Path;
use std::process::{Child, Command, Output, Stdio};
use std::time::{Duration, Instant};

use instrument_support::{start, temp_dir};
use sweepgate_host::formats::recording::{kind, recover_file, Record, Stop};

/// A running `sweepgate positioner`, killed on drop.
struct Table {
    child: Child,
    addr: String,
    started: Instant,
}

impl Drop for Table {
    fn drop(&mut self) {
        self.child.kill().ok();
        self.child.wait().ok();
    }
}

fn table(extra: &[&str]) -> Table {
    let started = Instant::now();
    let mut child = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .args(["positioner", "--port", "0"])
        .args(extra)
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let mut line = String::new();
    BufReader::new(child.stdout.take().unwrap())
        .read_line(&mut line)
        .unwrap();
    let addr = line
        .trim()
        .strip_prefix("listening on ")
        .unwrap()
        .to_owned();
    Table {
        child,
        addr,
        started,
    }
}

/// Asks the turntable `WHERE` directly: (angle, speed, state).
fn where_is(addr: &str) -> (f64, f64, String) {
    let mut s = TcpStream::connect(addr).unwrap();
    s.write_all(b"WHERE\n").unwrap();
    let mut line = String::new();
    BufReader::new(s).read_line(&mut line).unwrap();
    let w: Vec<&str> = line.split_whitespace().collect();
    assert_eq!(w[0], "OK", "{line}");
    (
        w[2].parse().unwrap(),
        w[3].parse().unwrap(),
        w[4].to_owned(),
    )
}

fn acquire(args: &[&str], out: &Path) -> Output {
    Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .arg("acquire")
        .args(args)
        .arg("--out")
        .arg(out)
        .output()
        .unwrap()
}

/// Sweeps as (start_us, end_us), positions as (t_us, angle), the report, and the stop.
type Read = (Vec<(u64, u64)>, Vec<(u64, f64)>, serde_json::Value, Stop);

fn read(path: &Path) -> Read {
    let r = recover_file(path).unwrap();
    assert!(r.damage.is_empty());
    let (mut sw, mut pos, mut report) = (Vec::new(), Vec::new(), serde_json::Value::Null);
    for (_, rec) in r.records {
        match rec {
            Record::Sweep {
                start_us, end_us, ..
            } => sw.push((start_us, end_us)),
            Record::Position {
                t_us, angle_deg, ..
            } => pos.push((t_us, angle_deg)),
            Record::Unknown { kind: k, payload } if k == kind::ACQUIRE_REPORT => {
                report = serde_json::from_slice(&payload).unwrap();
            }
            _ => {}
        }
    }
    (sw, pos, report, r.stop)
}

/// The angle samples just before and just after a sweep.
fn around(pos: &[(u64, f64)], sweep: (u64, u64)) -> (f64, f64) {
    let before = pos.iter().rev().find(|p| p.0 <= sweep.0).unwrap().1;
    let after = pos.iter().find(|p| p.0 >= sweep.1).unwrap().1;
    (before, after)
}

fn replay(rec: &Path, report: &Path) -> String {
    let o = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .arg("replay")
        .arg(rec)
        .args(["--as-fast-as-possible", "--no-preview"])
        .args(["--gate-center-ns", "3", "--gate-span-ns", "2"])
        .arg("--out")
        .arg(report)
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&o.stderr).into_owned();
    assert!(o.status.success(), "{err}");
    err
}

#[test]
fn step_and_stop_settles_at_each_angle_sweeps_and_replays() {
    let inst = start("drive-steps", &[]);
    let t = table(&["--ringing-deg", "0.3", "--settle-s", "0.5"]);
    let dir = temp_dir("drive-steps");
    let out = dir.join("steps.rec");
    let o = acquire(
        &[
            "--instrument",
            &inst.addr,
            "--drive",
            &t.addr,
            "--steps=-20:20:10",
            "--move-speed-deg-s",
            "20",
            "--settle-tolerance-deg",
            "0.02",
            "--gate-center-ns",
            "3",
            "--gate-span-ns",
            "2",
        ],
        &out,
    );
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(o.status.success(), "{err}");
    let (sw, pos, report, stop) = read(&out);
    assert_eq!(stop, Stop::Complete);
    assert_eq!(sw.len(), 5, "{err}");
    // Each sweep is taken settled: the samples around it within the tolerance of its
    // step (the ringing of 0.3° must have been waited out).
    for (i, s) in sw.iter().enumerate() {
        let target = -20.0 + 10.0 * i as f64;
        let (b, a) = around(&pos, *s);
        assert!(
            (b - target).abs() <= 0.02 && (a - target).abs() <= 0.02,
            "step {i}: {b} {a}"
        );
    }
    assert!(
        pos.windows(2).all(|w| w[1].0 >= w[0].0),
        "times never go back"
    );
    assert_eq!(report["positions"].as_u64(), Some(pos.len() as u64));
    let (angle, speed, state) = where_is(&t.addr);
    assert_eq!((speed, state.as_str()), (0.0, "HOLDING"));
    assert!((angle - 20.0).abs() <= 0.02, "{angle}");
    let r = replay(&out, &dir.join("steps-report"));
    assert!(r.contains("sweeps: 5 pushed, 5 binned"), "{r}");
}

#[test]
fn a_continuous_turn_is_recorded_while_turning_then_stopped_and_replays() {
    let inst = start("drive-turn", &[]);
    let t = table(&[]);
    let dir = temp_dir("drive-turn");
    let out = dir.join("turn.rec");
    let o = acquire(
        &[
            "--instrument",
            &inst.addr,
            "--drive",
            &t.addr,
            "--turn=-10:10:10",
            "--gate-center-ns",
            "3",
            "--gate-span-ns",
            "2",
        ],
        &out,
    );
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(o.status.success(), "{err}");
    let (sw, pos, _, stop) = read(&out);
    assert_eq!(stop, Stop::Complete);
    assert!(sw.len() >= 20, "{} sweeps", sw.len());
    turned_across(&sw, &pos);
    let (angle, speed, state) = where_is(&t.addr);
    assert_eq!((speed, state.as_str()), (0.0, "HOLDING"), "stopped");
    // 10 °/s braked at 60 °/s² runs 0.83° (closed form v²/2a) past the angle where the
    // stop was sent, itself at or past the end; how far past depends on how busy the
    // machine is between two polls: up to 1 s of turning is accepted.
    let tail: Vec<_> = pos.iter().rev().take(5).collect();
    assert!(
        (10.8..20.0).contains(&angle),
        "{angle}; last samples {tail:?}"
    );
    let r = replay(&out, &dir.join("turn-report"));
    let n = sw.len();
    assert!(
        r.contains(&format!("sweeps: {n} pushed, {n} binned")),
        "{r}"
    );
    assert!(r.contains("bins closed"), "{r}");
}

/// Ctrl-C (SIGINT) during a turn: the turntable is stopped, the recording ends cleanly,
/// the exit is non-zero with a one-line reason.
#[test]
fn ctrl_c_stops_the_turntable_and_ends_the_recording() {
    let inst = start("drive-int", &[]);
    let t = table(&[]);
    let dir = temp_dir("drive-int");
    let out = dir.join("int.rec");
    let child = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .arg("acquire")
        .args(["--instrument", &inst.addr, "--drive", &t.addr])
        .arg("--turn=0:300:20")
        .arg("--out")
        .arg(&out)
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    std::thread::sleep(Duration::from_millis(2500));
    let (_, speed, _) = where_is(&t.addr);
    assert!(speed > 0.0, "turning before the signal");
    let sent = Instant::now();
    let killed = Command::new("kill")
        .args(["-INT", &child.id().to_string()])
        .status()
        .unwrap();
    assert!(killed.success());
    let o = child.wait_with_output().unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(1), "{err}");
    assert!(sent.elapsed() < Duration::from_secs(10), "stopped in time");
    let last = err.lines().last().unwrap();
    assert!(last.contains("stopped by a signal (Ctrl-C)"), "{last}");
    assert!(err.contains("positioner: stopped at"), "{err}");
    let (_, speed, state) = where_is(&t.addr);
    assert_eq!((speed, state.as_str()), (0.0, "HOLDING"));
    let (sw, _, report, stop) = read(&out);
    assert_eq!(stop, Stop::Complete);
    assert!(!sw.is_empty());
    assert!(report["stopped_by"].as_str().unwrap().contains("Ctrl-C"));
}

#[test]
fn a_drive_fault_ends_the_scan_with_the_turntable_stopped() {
    let inst = start("drive-fault", &[]);
    let t = table(&["--fault-after-s", "1.5"]);
    let dir = temp_dir("drive-fault");
    let out = dir.join("fault.rec");
    let o = acquire(
        &[
            "--instrument",
            &inst.addr,
            "--drive",
            &t.addr,
            "--turn=0:200:20",
        ],
        &out,
    );
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(1), "{err}");
    assert!(
        err.lines()
            .last()
            .unwrap()
            .contains("the positioner reported a fault"),
        "{err}"
    );
    let (_, speed, state) = where_is(&t.addr);
    assert_eq!((speed, state.as_str()), (0.0, "FAULT"));
    let (_, _, _, stop) = read(&out);
    assert_eq!(stop, Stop::Complete);
}

#[test]
fn a_plan_outside_the_limits_is_refused_before_anything_moves() {
    let inst = start("drive-limits", &[]);
    let t = table(&[]);
    let dir = temp_dir("drive-limits");
    for (args, why) in [
        (
            vec!["--steps=0:90:10", "--angle-range=-45:45"],
            "outside the angle range",
        ),
        (
            vec!["--turn=0:90:20", "--max-speed-deg-s", "15"],
            "above the speed limit",
        ),
        (vec!["--turn=0:400:5"], "outside the angle range"),
        (vec!["--steps=0:10:1", "--settle-s", "NaN"], "--settle-s"),
    ] {
        let out = dir.join("limits.rec");
        let mut a = vec!["--instrument", &inst.addr, "--drive", &t.addr];
        a.extend(args);
        let o = acquire(&a, &out);
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(1), "{err}");
        assert!(err.lines().last().unwrap().contains(why), "{why}: {err}");
        assert!(!out.exists());
        let (angle, speed, _) = where_is(&t.addr);
        assert_eq!((angle, speed), (0.0, 0.0), "it moved");
    }
}

/// A turntable whose clock runs 300 ppm fast and reads 50 s at its start: the clock fit
/// must find a drift of −300/(1 + 300e-6) ppm ≈ −299.9 ppm within 20 ppm (loopback
/// scheduling on a shared machine is the noise), and an offset of −(50 s + the
/// turntable's age at the acquisition's start × (1 + 300e-6)) within the 1 s this test
/// can bracket that age to.
#[test]
fn the_turntable_clock_offset_and_drift_are_recovered() {
    let inst = start("drive-clock", &[]);
    let t = table(&["--drift-ppm", "300", "--clock-offset-s", "50"]);
    let dir = temp_dir("drive-clock");
    let out = dir.join("clock.rec");
    let age_s = t.started.elapsed().as_secs_f64();
    let o = acquire(
        &[
            "--instrument",
            &inst.addr,
            "--drive",
            &t.addr,
            "--turn=0:60:10",
        ],
        &out,
    );
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(o.status.success(), "{err}");
    let (_, _, report, _) = read(&out);
    let c = &report["clock"];
    let drift = c["drift_ppm"].as_f64().unwrap();
    let truth_ppm = (1.0 / (1.0 + 300e-6) - 1.0) * 1e6;
    assert!(c["in_use"].as_bool().unwrap(), "{c}");
    assert!(
        (drift - truth_ppm).abs() < 20.0,
        "{drift} vs {truth_ppm}: {c}"
    );
    assert!(c["drift_sigma_ppm"].as_f64().unwrap() < 20.0, "{c}");
    // Our clock minus the turntable's at the latest sample: −(50 s + age at our epoch ×
    // (1 + drift)) + (time since our epoch) × (−drift): the drift terms are under 20 ms.
    let offset_s = c["offset_us"].as_f64().unwrap() / 1e6;
    let lo = -(50.0 + age_s + 1.0);
    let hi = -(50.0 + age_s) + 0.05;
    assert!((lo..hi).contains(&offset_s), "{offset_s} not in {lo}..{hi}");
    println!(
        "clock fit: drift {drift:.2} ± {:.2} ppm (truth {truth_ppm:.2}), offset {offset_s:.4} s over {} samples",
        c["drift_sigma_ppm"].as_f64().unwrap(),
        c["samples"]
    );
}

/// The same protocol over a serial line: the simulated turntable on a pseudo-terminal
/// (`sweepgate positioner --serial`), `acquire --drive /dev/pts/<n>` stepping across it.
#[test]
fn a_step_scan_over_a_serial_line() {
    let inst = start("drive-serial", &[]);
    let (mut child, path) = serial_turntable();
    let dir = temp_dir("drive-serial");
    let out = dir.join("serial.rec");
    let o = acquire(
        &[
            "--instrument",
            &inst.addr,
            "--drive",
            &path,
            "--drive-baud",
            "115200",
            "--steps=0:10:5",
        ],
        &out,
    );
    child.kill().ok();
    child.wait().ok();
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(o.status.success(), "{err}");
    assert!(
        err.contains("positioner: sweepgate simulated turntable"),
        "{err}"
    );
    let (sw, pos, _, stop) = read(&out);
    assert_eq!(stop, Stop::Complete);
    assert_eq!(sw.len(), 3);
    for (i, s) in sw.iter().enumerate() {
        let (b, a) = around(&pos, *s);
        let target = 5.0 * i as f64;
        assert!(
            (b - target).abs() <= 0.05 && (a - target).abs() <= 0.05,
            "{b} {a}"
        );
    }
}

/// A continuous turn over the serial line: the same turntable on a pseudo-terminal, the
/// scan recorded while it turns, the turntable stopped at the end, and the recording
/// replayed.
#[test]
fn a_continuous_turn_over_a_serial_line() {
    let inst = start("drive-serial-turn", &[]);
    let (mut child, path) = serial_turntable();
    let dir = temp_dir("drive-serial-turn");
    let out = dir.join("serial-turn.rec");
    let o = acquire(
        &[
            "--instrument",
            &inst.addr,
            "--drive",
            &path,
            "--drive-baud",
            "115200",
            "--turn=-10:10:10",
            "--gate-center-ns",
            "3",
            "--gate-span-ns",
            "2",
        ],
        &out,
    );
    child.kill().ok();
    child.wait().ok();
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(o.status.success(), "{err}");
    let (sw, pos, _, stop) = read(&out);
    assert_eq!(stop, Stop::Complete);
    assert!(sw.len() >= 20, "{} sweeps", sw.len());
    turned_across(&sw, &pos);
    let r = replay(&out, &dir.join("serial-turn-report"));
    let n = sw.len();
    assert!(
        r.contains(&format!("sweeps: {n} pushed, {n} binned")),
        "{r}"
    );
}

/// The simulated turntable on a pseudo-terminal: the process and the terminal's path.
fn serial_turntable() -> (std::process::Child, String) {
    let mut child = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .args(["positioner", "--serial"])
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let mut line = String::new();
    BufReader::new(child.stdout.take().unwrap())
        .read_line(&mut line)
        .unwrap();
    let path = line.trim().strip_prefix("serial on ").unwrap().to_owned();
    (child, path)
}

/// The −10° to 10° turn: every sweep has the table past the start, not yet past the end,
/// and moving forward across it (most of them; the first may start at rest).
fn turned_across(sw: &[(u64, u64)], pos: &[(u64, f64)]) {
    let mut moving = 0;
    for s in sw {
        let (b, a) = around(pos, *s);
        assert!((-10.05..10.0).contains(&b), "{b}");
        assert!(a >= b - 1e-9, "{b} → {a}");
        moving += usize::from(a > b);
    }
    assert!(
        moving * 10 >= sw.len() * 9,
        "{moving} of {} sweeps turned",
        sw.len()
    );
}
