//! `sweepgate acquire` against a local `sweepgate instrument` and a local positioner line
//! server: the recording holds the expected sweeps and angle samples, and failures say
//! what went wrong.

mod instrument_support;

use std::io::Write;
use std::net::TcpListener;
use std::path::Path;
use std::process::{Command, Output};

use instrument_support::{dumped, start, temp_dir};
use sweepgate_host::formats::recording::{recover_file, Record, Stop};
use sweepgate_host::model::scenario::Scenario;
use sweepgate_host::model::simulator::Simulator;

fn acquire(args: &[&str], out: &Path) -> Output {
    Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .arg("acquire")
        .args(args)
        .arg("--out")
        .arg(out)
        .output()
        .expect("run sweepgate acquire")
}

fn ok(o: &Output) {
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
}

/// A line server sending `lines` then closing; returns its address.
fn line_server(lines: String) -> String {
    let l = TcpListener::bind("127.0.0.1:0").unwrap();
    let addr = l.local_addr().unwrap().to_string();
    std::thread::spawn(move || {
        if let Ok((mut s, _)) = l.accept() {
            s.write_all(lines.as_bytes()).ok();
        }
    });
    addr
}

fn split(path: &Path) -> (Vec<Record>, Vec<Record>, Vec<Record>) {
    let r = recover_file(path).unwrap();
    assert_eq!(r.stop, Stop::Complete, "{}", r.describe_stop());
    assert!(r.damage.is_empty());
    let mut sw = Vec::new();
    let mut pos = Vec::new();
    let mut other = Vec::new();
    for (_, rec) in r.records {
        match rec {
            Record::Sweep { .. } => sw.push(rec),
            Record::Position { .. } => pos.push(rec),
            _ => other.push(rec),
        }
    }
    (sw, pos, other)
}

#[test]
fn acquire_with_a_line_positioner_records_sweeps_and_angles() {
    let inst = start("acq-lines", &[]);
    let dir = temp_dir("acq-lines");
    let out = dir.join("scan.rec");
    let mut lines = String::from("# positioner test feed\n\n");
    for i in 0..20u64 {
        lines.push_str(&format!(
            "{} {}\r\n",
            1_000_000 + i * 10_000,
            -180.0 + 0.15 * i as f64
        ));
    }
    lines.push_str("garbage line\n");
    let pos = line_server(lines);
    let o = acquire(
        &[
            "--instrument",
            &inst.addr,
            "--positioner",
            &pos,
            "--sweeps",
            "5",
        ],
        &out,
    );
    ok(&o);
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("sweepgate,simulated-vna"), "{err}");
    assert!(err.contains("1 malformed positioner lines"), "{err}");
    let (sweeps, positions, other) = split(&out);
    assert_eq!(sweeps.len(), 5);
    assert_eq!(positions.len(), 20);
    let Some(Record::Header(h)) = other.first() else {
        panic!("no header first")
    };
    assert_eq!(h.grid.points, 201);
    assert_eq!(h.grid.start_hz, 8e9);
    assert!(
        h.source.starts_with("acquire: sweepgate,simulated-vna"),
        "{}",
        h.source
    );
    // Each sweep is the instrument's, bit for bit, after REAL,32 SWAPped and the decoder.
    for (n, rec) in sweeps.iter().enumerate() {
        let Record::Sweep {
            index,
            s21,
            start_us,
            end_us,
        } = rec
        else {
            unreachable!()
        };
        assert_eq!(*index as usize, n);
        assert!(end_us >= start_us);
        let (scan_index, re, im) = dumped(&inst.dump, n);
        assert_eq!(
            scan_index as usize, n,
            "*RST in the profile restarts the scan"
        );
        for (k, c) in s21.iter().enumerate() {
            assert_eq!((c.re, c.im), (re[k], im[k]), "sweep {n} point {k}");
        }
    }
    // Angles and counts as sent (36000 counts per turn); times keep their spacing.
    let mut prev_t = None;
    for (i, rec) in positions.iter().enumerate() {
        let Record::Position {
            t_us,
            counts,
            angle_deg,
        } = rec
        else {
            unreachable!()
        };
        let a = -180.0 + 0.15 * i as f64;
        assert_eq!(*angle_deg, a);
        assert_eq!(*counts, (a / 360.0 * 36000.0).round() as i64);
        if let Some(p) = prev_t {
            assert_eq!(t_us - p, 10_000);
        }
        prev_t = Some(*t_us);
    }
}

fn short_scenario(dir: &Path) -> (Scenario, std::path::PathBuf) {
    let mut s = Scenario::from_toml(include_str!("../scenarios/demo-lab.toml")).unwrap();
    s.positioner.start_deg = -2.0;
    s.positioner.stop_deg = 2.0;
    s.validate().unwrap();
    let p = dir.join("short.toml");
    std::fs::write(&p, toml::to_string(&s).unwrap()).unwrap();
    (s, p)
}

#[test]
fn acquire_with_the_simulated_positioner_covers_the_whole_schedule() {
    let dir = temp_dir("acq-sim");
    let (s, path) = short_scenario(&dir);
    let p = path.to_str().unwrap();
    let inst = start("acq-sim", &["--scenario", p]);
    let out = dir.join("scan.rec");
    let o = acquire(
        &[
            "--instrument",
            &inst.addr,
            "--positioner-sim",
            "--scenario",
            p,
        ],
        &out,
    );
    ok(&o);
    let (sweeps, positions, other) = split(&out);
    let expected = s.expected_sweeps();
    assert!(expected > 5);
    assert_eq!(sweeps.len(), expected);
    let samples = Simulator::new(&s, s.simulation.seed).samples();
    assert_eq!(positions.len(), samples.len());
    let Some(Record::Header(h)) = other.first() else {
        panic!("no header first")
    };
    assert!(h.scenario.is_some());
    assert_eq!(h.counts_per_turn, Some(s.positioner.counts_per_turn));
    // Sweep times follow the scenario's schedule.
    let starts = sweepgate_host::model::timeline::Timeline::new(&s)
        .sweep_starts_s()
        .to_vec();
    for (rec, t0) in sweeps.iter().zip(&starts) {
        let Record::Sweep { start_us, .. } = rec else {
            unreachable!()
        };
        assert_eq!(*start_us, (t0 * 1e6).round() as u64);
    }
}

#[test]
fn a_refused_connection_is_reported() {
    let port = TcpListener::bind("127.0.0.1:0")
        .unwrap()
        .local_addr()
        .unwrap()
        .port();
    let dir = temp_dir("acq-refused");
    let addr = format!("127.0.0.1:{port}");
    let o = acquire(
        &["--instrument", &addr, "--sweeps", "1"],
        &dir.join("x.rec"),
    );
    assert!(!o.status.success());
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains(&format!("connecting to the instrument at {addr}")),
        "{err}"
    );
    assert!(err.to_lowercase().contains("refused"), "{err}");
}

fn profile(dir: &Path, edit: &[(&str, &str)]) -> String {
    let mut text = include_str!("../profiles/simulated.toml").to_owned();
    for (from, to) in edit {
        assert!(text.contains(from), "{from}");
        text = text.replace(from, to);
    }
    let p = dir.join("profile.toml");
    std::fs::write(&p, text).unwrap();
    p.to_str().unwrap().to_owned()
}

#[test]
fn setup_errors_come_from_the_error_queue() {
    let inst = start("acq-setup", &[]);
    let dir = temp_dir("acq-setup");
    let p = profile(
        &dir,
        &[(
            "\"*CLS\",",
            "\"*CLS\", \"FORMat:DATA REAL,99\", \"SENSe:NOPE 3\",",
        )],
    );
    let o = acquire(
        &["--profile", &p, "--instrument", &inst.addr, "--sweeps", "1"],
        &dir.join("x.rec"),
    );
    assert!(!o.status.success());
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("after setup: -224,\"Illegal parameter value\"; -113,\"Undefined header\""),
        "{err}"
    );
}

#[test]
fn a_timeout_names_the_query_and_the_instrument_error() {
    let inst = start("acq-timeout", &[]);
    let dir = temp_dir("acq-timeout");
    // No trigger: the data query has nothing to answer (-230) and times out.
    let p = profile(
        &dir,
        &[
            ("trigger = [\"INITiate:IMMediate\"]", "trigger = []"),
            ("timeout_s = 5.0", "timeout_s = 0.5"),
        ],
    );
    let o = acquire(
        &["--profile", &p, "--instrument", &inst.addr, "--sweeps", "1"],
        &dir.join("x.rec"),
    );
    assert!(!o.status.success());
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("timeout: no answer within 0.5 s to \"TRACe:DATA?\""),
        "{err}"
    );
    assert!(err.contains("-230,\"Data corrupt or stale\""), "{err}");
}

#[test]
fn a_profile_that_does_not_match_the_instrument_stops_with_the_reason() {
    let inst = start("acq-mismatch", &[]);
    let dir = temp_dir("acq-mismatch");
    // The profile says REAL,64 but sets REAL,32: blocks hold half the bytes expected.
    let p = profile(&dir, &[("format = \"real32\"", "format = \"real64\"")]);
    let o = acquire(
        &["--profile", &p, "--instrument", &inst.addr, "--sweeps", "2"],
        &dir.join("x.rec"),
    );
    assert!(!o.status.success());
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("block of 1608 bytes is not a whole number of 16-byte complex samples"),
        "{err}"
    );
}

#[test]
fn with_a_gate_sweeps_go_through_the_scan_engine_and_bins_are_printed() {
    let dir = temp_dir("acq-gate");
    let (s, path) = short_scenario(&dir);
    let p = path.to_str().unwrap();
    let inst = start("acq-gate", &["--scenario", p]);
    // Direct path 4 m, about 13.3 ns; the floor echo 2.9 ns later (scenario comment).
    let o = acquire(
        &[
            "--instrument",
            &inst.addr,
            "--positioner-sim",
            "--scenario",
            p,
            "--gate-center-ns",
            "13.3",
            "--gate-span-ns",
            "2.5",
            "--frequencies-hz",
            "10e9",
        ],
        &dir.join("scan.rec"),
    );
    ok(&o);
    let stdout = String::from_utf8_lossy(&o.stdout);
    let bins: Vec<&str> = stdout.lines().filter(|l| l.starts_with("bin ")).collect();
    // ±2° in 1° bins: the engine closes the bins the scan crossed.
    assert!(bins.len() >= 3, "{stdout}");
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains(&format!("scan engine closed {} bins", bins.len())),
        "{err}"
    );
    assert!(
        err.contains(&format!(
            "scan: {} sweeps binned, 0 refused",
            s.expected_sweeps()
        )),
        "{err}"
    );
    assert!(
        bins.iter()
            .all(|l| l.contains("at 10.0000 GHz") && l.contains("gated")),
        "{stdout}"
    );
}

/// The fixed set-up profile sets grid, format, byte order, IF bandwidth, power and trace,
/// reads each back, and the sweeps are then the instrument's, bit for bit.
#[test]
fn a_fixed_set_up_is_read_back_and_the_scan_runs() {
    let inst = start("acq-fixed", &[]);
    let dir = temp_dir("acq-fixed");
    let out = dir.join("scan.rec");
    let profile = concat!(env!("CARGO_MANIFEST_DIR"), "/profiles/simulated-fixed.toml");
    let o = acquire(
        &[
            "--profile",
            profile,
            "--instrument",
            &inst.addr,
            "--sweeps",
            "3",
        ],
        &out,
    );
    ok(&o);
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("set-up read back as the profile says: start frequency, stop frequency, points, data format, byte order, IF bandwidth, source power, trace"),
        "{err}"
    );
    let (sweeps, _, _) = split(&out);
    assert_eq!(sweeps.len(), 3);
    for (n, rec) in sweeps.iter().enumerate() {
        let Record::Sweep { s21, .. } = rec else {
            unreachable!()
        };
        let (_, re, im) = dumped(&inst.dump, n);
        assert!(s21
            .iter()
            .zip(re.iter().zip(&im))
            .all(|(c, (r, i))| c.re == *r && c.im == *i));
    }
}

/// An instrument that reports one setting other than the one set (`--misreport`, the
/// simulated instrument's test-only option) stops `acquire` before the scan: exit 1, one
/// line naming the setting, and no recording created.
#[test]
fn a_set_up_mismatch_stops_before_the_scan() {
    let profile = concat!(env!("CARGO_MANIFEST_DIR"), "/profiles/simulated-fixed.toml");
    for (setting, name) in [
        ("bandwidth", "IF bandwidth"),
        ("power", "source power"),
        ("function", "trace"),
        ("points", "points"),
        ("start", "start frequency"),
        ("format", "data format"),
        ("order", "byte order"),
    ] {
        let inst = start(&format!("acq-mis-{setting}"), &["--misreport", setting]);
        let dir = temp_dir(&format!("acq-mis-{setting}"));
        let out = dir.join("scan.rec");
        let o = acquire(
            &[
                "--profile",
                profile,
                "--instrument",
                &inst.addr,
                "--sweeps",
                "3",
            ],
            &out,
        );
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(1), "{setting}: {err}");
        let last = err.lines().last().unwrap();
        assert!(
            last.starts_with(
                "error: the instrument's set-up does not match the profile, nothing was recorded: "
            ) && last.contains(&format!("{name}: "))
                && last.matches("answered").count() == 1,
            "{setting}: {last}"
        );
        assert!(!out.exists(), "{setting}: a recording was created");
        assert!(
            std::fs::read_dir(&inst.dump).unwrap().next().is_none(),
            "{setting}: a sweep was taken"
        );
    }
}
