//! RCS in dBsm beyond `replay`'s terminal screen: the browser view (`--web`) of an RCS scan
//! and `acquire`'s live preview with a calibration.
//!
//! The source of truth in every check is `rcs`'s own `pattern.csv` for the same
//! measurement: the host's FFT path on whole sweeps, calibrated in f64. The live values come
//! through the scan engine (f32, as on the board), so they agree within a few hundredths of
//! a dB at most (the tolerances are stated beside each check).

use std::collections::BTreeMap;
use std::path::Path;
use std::process::Command;

#[path = "support/rcs_scan.rs"]
mod rcs_scan;

use rcs_scan::{calibrated_scan, pattern, run, RCS_ARGS};
use sweepgate_host::pipeline::replay::{replay_file, Options};
use sweepgate_host::pipeline::replay_rcs;
use sweepgate_host::web::{Hub, Limits, Meta};

/// replay of a calibrated recording against `rcs`'s pattern.csv (as in rcs_replay.rs).
const WEB_TOLERANCE_DB: f64 = 0.01;

/// Replays `rec` into a web view's hub and returns the hub's state (what a browser that
/// connects after the scan is sent first).
fn replayed_state(rec: &Path, out: &Path) -> serde_json::Value {
    let hub = Hub::new(Meta::default(), Limits::default());
    let opts = Options {
        out: Some(out.to_path_buf()),
        web: Some(hub.clone()),
        ..Options::fast(rec)
    };
    replay_file(&opts).unwrap();
    hub.snapshot()
}

fn level_db(v: &serde_json::Value) -> f64 {
    let re = v[0].as_f64().unwrap();
    let im = v[1].as_f64().unwrap();
    20.0 * re.hypot(im).log10()
}

#[test]
fn the_browser_view_of_an_rcs_scan_carries_dbsm_equal_to_rcs() {
    let dir = tempfile::tempdir().unwrap();
    calibrated_scan(dir.path());
    let want = pattern(&dir.path().join("report/pattern.csv"));
    let state = replayed_state(&dir.path().join("calibrated.rec"), &dir.path().join("r1"));
    let levels = &state["meta"]["absolute_levels"];
    assert_eq!(levels["label"], replay_rcs::WEB_LEVEL_LABEL);
    assert_eq!(levels["label"], "RCS (dBsm)");
    assert_eq!(levels["unit"], "dBsm");
    let freqs: Vec<f64> = state["meta"]["frequencies_hz"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| f.as_f64().unwrap())
        .collect();
    assert_eq!(freqs, vec![9e9, 10e9, 11e9]);
    let bins = state["bins"].as_array().unwrap();
    assert_eq!(bins.len(), 41);
    let mut worst = 0.0f64;
    for b in bins {
        let deg = b["nominal_deg"].as_f64().unwrap();
        let deg = (deg + 180.0).rem_euclid(360.0) - 180.0;
        for (j, f) in freqs.iter().enumerate() {
            // The page's level: 20·log10 |gated| of the bin's values (app.js `db`).
            let got = level_db(&b["values"][j]["gated"]);
            let truth = want[&((deg * 1000.0).round() as i64, *f as i64)];
            worst = worst.max((got - truth).abs());
        }
    }
    println!(
        "browser view vs rcs's pattern.csv: worst {worst:.2e} dB over 41 bins × 3 frequencies"
    );
    assert!(worst <= WEB_TOLERANCE_DB, "{worst}");

    // The same scan without its calibration is a plain |S21| scan: relative levels, and
    // values far from the dBsm ones (the calibration and background do change them).
    let plain = replayed_state(&dir.path().join("rec/target.rec"), &dir.path().join("r2"));
    assert!(plain["meta"]["absolute_levels"].is_null());
    let p0 = level_db(&plain["bins"][20]["values"][0]["gated"]);
    let c0 = level_db(&bins[20]["values"][0]["gated"]);
    assert!((p0 - c0).abs() > 1.0, "{p0} vs {c0}");
}

mod instrument_support;

use std::io::{BufRead, BufReader};
use std::net::SocketAddr;
use std::process::{Child, Stdio};
use std::sync::mpsc;
use std::time::{Duration, Instant};

use sweepgate_host::formats::rcs_record::Measurement;

/// `acquire`'s live dBsm against `rcs` on the recording it wrote: the live engine gates in
/// f32 on the scan engine's kernel path, `rcs` on the host's FFT path in f64.
const ACQUIRE_TOLERANCE_DB: f64 = 0.05;

/// A running `sweepgate positioner`, killed on drop.
struct Table {
    child: Child,
    addr: String,
}

impl Drop for Table {
    fn drop(&mut self) {
        self.child.kill().ok();
        self.child.wait().ok();
    }
}

fn table() -> Table {
    let mut child = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .args(["positioner", "--port", "0"])
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
    Table { child, addr }
}

/// The `acquire` command of one measurement of `scene` over `steps`.
fn acquire_cmd(inst: &str, table: &Table, steps: &str, out: &Path) -> Command {
    let mut c = Command::new(env!("CARGO_BIN_EXE_sweepgate"));
    c.arg("acquire")
        .args(["--instrument", inst, "--drive", &table.addr])
        .arg(format!("--steps={steps}"))
        .args(["--move-speed-deg-s", "20", "--settle-tolerance-deg", "0.02"])
        .arg("--out")
        .arg(out);
    c
}

fn instrument(scene: &Path, what: Measurement, table: &Table) -> instrument_support::Running {
    instrument_support::start(
        &format!("rcs-live-{}", what.word()),
        &[
            "--rcs-scenario",
            scene.to_str().unwrap(),
            "--measurement",
            what.word(),
            "--turntable",
            &table.addr,
        ],
    )
}

/// (angle in m°, frequency in Hz) → gated dBsm from `acquire`'s printed bins:
/// `bin I DEG deg: N sweeps, at F GHz raw R dBsm, gated G dBsm; at …, echo E`.
fn printed(stdout: &str) -> BTreeMap<(i64, i64), f64> {
    let mut out = BTreeMap::new();
    for line in stdout.lines().filter(|l| l.starts_with("bin ")) {
        let deg: f64 = line.split_whitespace().nth(2).unwrap().parse().unwrap();
        let deg = (deg + 180.0).rem_euclid(360.0) - 180.0;
        for part in line.split("; ") {
            let w: Vec<&str> = part.split_whitespace().collect();
            let Some(i) = w.iter().position(|x| *x == "GHz") else {
                continue;
            };
            let f_ghz: f64 = w[i - 1].parse().unwrap();
            let g = w.iter().position(|x| *x == "gated").unwrap();
            assert_eq!(w[g + 2].trim_end_matches(','), "dBsm", "{line}");
            let v: f64 = w[g + 1].parse().unwrap();
            out.insert(
                ((deg * 1000.0).round() as i64, (f_ghz * 1e9).round() as i64),
                v,
            );
        }
    }
    out
}

/// Polls the web view's state until the scan has ended.
fn ended_state(addr: SocketAddr, deadline: Instant) -> serde_json::Value {
    use std::io::{Read, Write};
    loop {
        let mut s = std::net::TcpStream::connect(addr).unwrap();
        s.set_read_timeout(Some(Duration::from_secs(10))).unwrap();
        write!(s, "GET /state HTTP/1.1\r\nHost: x\r\n\r\n").unwrap();
        let mut all = Vec::new();
        s.read_to_end(&mut all).unwrap();
        let at = all.windows(4).position(|w| w == b"\r\n\r\n").unwrap();
        let v: serde_json::Value = serde_json::from_slice(&all[at + 4..]).unwrap();
        if !v["ended"].is_null() {
            return v;
        }
        assert!(
            Instant::now() < deadline,
            "the acquisition never ended: {v}"
        );
        std::thread::sleep(Duration::from_millis(100));
    }
}

/// Runs `acquire … --web 0` to its end; returns its standard output and the web view's
/// final state, then stops it (Ctrl-C).
fn acquire_with_web(mut cmd: Command) -> (String, serde_json::Value) {
    let mut child = cmd
        .args(["--web", "0"])
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let (tx, rx) = mpsc::channel();
    let err = child.stderr.take().unwrap();
    std::thread::spawn(move || {
        for line in BufReader::new(err).lines().map_while(Result::ok) {
            let _ = tx.send(line);
        }
    });
    let mut out = child.stdout.take().unwrap();
    let stdout = std::thread::spawn(move || {
        let mut s = String::new();
        std::io::Read::read_to_string(&mut out, &mut s).unwrap();
        s
    });
    let deadline = Instant::now() + Duration::from_secs(300);
    let addr: SocketAddr = loop {
        let l = rx.recv_timeout(deadline - Instant::now()).unwrap();
        if let Some(u) = l.strip_prefix("web view on http://") {
            break u.trim_end_matches('/').parse().unwrap();
        }
    };
    let state = ended_state(addr, deadline);
    let mut errs = Vec::new();
    loop {
        let l = rx.recv_timeout(deadline - Instant::now()).unwrap();
        let up = l.contains("stays up");
        errs.push(l);
        if up {
            break;
        }
    }
    let pid = child.id().to_string();
    assert!(Command::new("kill")
        .args(["-INT", &pid])
        .status()
        .unwrap()
        .success());
    let status = loop {
        if let Some(st) = child.try_wait().unwrap() {
            break st;
        }
        assert!(Instant::now() < deadline, "acquire still up after SIGINT");
        std::thread::sleep(Duration::from_millis(20));
    };
    assert!(status.success(), "{status}: {}", errs.join("\n"));
    let text = stdout.join().unwrap();
    for l in errs.iter().filter(|l| l.starts_with("RCS at ")) {
        println!("acquire: {l}");
    }
    (text, state)
}

#[test]
fn acquire_with_a_calibration_shows_the_dbsm_rcs_finds() {
    let dir = instrument_support::temp_dir("rcs-live-acquire");
    let text = std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios/rcs/range.toml"),
    )
    .unwrap();
    // The shipped scene over five angles, to keep the test short (as rcs_acquire.rs).
    let scene = dir.join("scene.toml");
    std::fs::write(
        &scene,
        text.replace("[-10.0, 10.0, 0.5]", "[-4.0, 4.0, 2.0]"),
    )
    .unwrap();
    let t = table();
    let rec = |name: &str| dir.join(format!("{name}.rec"));
    // The calibration run: the four measurements as any acquisition, then `rcs`.
    for m in Measurement::ALL {
        let steps = match m {
            Measurement::Target | Measurement::Background => "-4:4:2",
            _ => "-2:2:2",
        };
        let inst = instrument(&scene, m, &t);
        let o = acquire_cmd(&inst.addr, &t, steps, &rec(m.word()))
            // Angles to the nearest 2° (the target and background runs meet at the same
            // angles) and a live engine's gate at the zone, as in rcs_acquire.rs.
            .args(["--bin-width-deg", "2"])
            .args(["--gate-center-ns", "28.2", "--gate-span-ns", "6"])
            .output()
            .unwrap();
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    }
    let rcs = |target: &str, out: &str, extra: &[&str]| {
        let mut args = vec![
            "rcs",
            target,
            "--background",
            "background.rec",
            "--reference",
            "reference.rec",
            "--reference-background",
            "reference_background.rec",
            "--out",
            out,
        ];
        args.extend_from_slice(RCS_ARGS);
        args.extend_from_slice(extra);
        run(&dir, &args);
    };
    rcs("target.rec", "report", &["--save-calibration", "cal.json"]);

    // The next scan of the target, shown live in dBsm.
    let inst = instrument(&scene, Measurement::Target, &t);
    let mut cmd = acquire_cmd(&inst.addr, &t, "-4:4:2", &rec("live"));
    cmd.arg("--rcs-calibration").arg(dir.join("cal.json"));
    let (stdout, state) = acquire_with_web(cmd);
    drop(inst);
    // The source of truth: `rcs`'s pattern.csv of the recording that acquisition wrote.
    rcs("live.rec", "report-live", &[]);
    let want = pattern(&dir.join("report-live/pattern.csv"));
    for l in stdout.lines().filter(|l| l.starts_with("bin ")) {
        println!("acquire: {l}");
    }
    let live = printed(&stdout);
    assert_eq!(live.len(), 5 * 3, "{stdout}");
    let mut worst = 0.0f64;
    for (k, v) in &live {
        worst = worst.max((v - want[k]).abs());
    }
    // The page's bins, in calibrated amplitude: 20·log10 |gated| is dBsm.
    assert_eq!(state["meta"]["absolute_levels"]["label"], "RCS (dBsm)");
    let freqs = state["meta"]["frequencies_hz"].as_array().unwrap().clone();
    let bins = state["bins"].as_array().unwrap();
    assert_eq!(bins.len(), 5);
    let mut worst_web = 0.0f64;
    for b in bins {
        let deg = b["nominal_deg"].as_f64().unwrap();
        let deg = (deg + 180.0).rem_euclid(360.0) - 180.0;
        for (j, f) in freqs.iter().enumerate() {
            let got = level_db(&b["values"][j]["gated"]);
            let key = ((deg * 1000.0).round() as i64, f.as_f64().unwrap() as i64);
            worst_web = worst_web.max((got - want[&key]).abs());
        }
    }
    // And against the calibration run's own table (another scan of the same target:
    // shown, not checked, since the turntable settles anew).
    let first = pattern(&dir.join("report/pattern.csv"));
    let drift = live
        .iter()
        .map(|(k, v)| (v - first[k]).abs())
        .fold(0.0, f64::max);
    println!(
        "acquire --rcs-calibration: printed dBsm vs rcs's pattern.csv worst {worst:.2e} dB, \
         web view {worst_web:.2e} dB over 5 bins × 3 frequencies; vs the calibration run's scan {drift:.3} dB"
    );
    assert!(worst <= ACQUIRE_TOLERANCE_DB, "{worst}");
    assert!(worst_web <= ACQUIRE_TOLERANCE_DB, "{worst_web}");
    // The recording carries the calibration: `replay` shows it in dBsm too.
    let o = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .args([
            "replay",
            "live.rec",
            "--as-fast-as-possible",
            "--no-preview",
        ])
        .current_dir(&dir)
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(o.status.success(), "{err}");
    assert_eq!(
        err.lines().filter(|l| l.starts_with("RCS at ")).count(),
        3,
        "{err}"
    );
}

/// Runs `f` on a thread and fails when it has no result within `secs` (a deadline, as in
/// hostile_edges.rs).
fn within<T: Send + 'static>(secs: u64, name: &str, f: impl FnOnce() -> T + Send + 'static) -> T {
    let (tx, rx) = mpsc::channel();
    std::thread::spawn(move || {
        let _ = tx.send(f());
    });
    rx.recv_timeout(Duration::from_secs(secs))
        .unwrap_or_else(|e| panic!("{name}: no result within {secs} s ({e})"))
}

/// The simulated instrument asks the turntable for each RCS sweep's angle before it locks
/// its state: a turntable that takes the question and never answers holds up the client
/// whose `INITiate` waits for it (until the instrument's 5 s turntable timeout, which then
/// queues -240), never another client.
#[test]
fn a_stalled_turntable_holds_up_no_other_client() {
    use instrument_support::Client;
    use std::io::Read;
    let stalled = std::net::TcpListener::bind("127.0.0.1:0").unwrap();
    let table_addr = stalled.local_addr().unwrap().to_string();
    let (asked_tx, asked_rx) = mpsc::channel();
    std::thread::spawn(move || {
        let mut held = Vec::new();
        for s in stalled.incoming() {
            let mut s = s.unwrap();
            let mut question = [0u8; 6];
            if s.read_exact(&mut question).is_ok() {
                let _ = asked_tx.send(question);
            }
            // Keep the connection open, never answering.
            held.push(s);
        }
    });
    let scene = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios/rcs/range.toml");
    let inst = instrument_support::start(
        "rcs-live-stalled",
        &[
            "--rcs-scenario",
            scene.to_str().unwrap(),
            "--measurement",
            "target",
            "--turntable",
            &table_addr,
        ],
    );
    let addr = inst.addr.clone();
    let first = std::thread::spawn(move || {
        let mut c = Client::connect(&addr);
        c.send("INIT");
        c.query("SYST:ERR?")
    });
    let question = asked_rx.recv_timeout(Duration::from_secs(30)).unwrap();
    assert_eq!(&question, b"WHERE\n");
    // The first client's INITiate is now waiting for the turntable. Another client's
    // queries are answered meanwhile, well before the turntable's 5 s timeout.
    let addr = inst.addr.clone();
    let idn = within(
        3,
        "another client's query while the turntable stalls",
        move || {
            let mut c = Client::connect(&addr);
            (c.query("*IDN?"), c.query("SENS:FREQ:STAR?"))
        },
    );
    assert!(idn.0.contains("simulated-vna"), "{idn:?}");
    assert_eq!(idn.1.parse::<f64>().unwrap(), 8e9);
    // The stalled turntable is still an error for the client that asked for the sweep.
    let err = within(30, "the first client's answer", move || {
        first.join().unwrap()
    });
    assert!(err.starts_with("-240"), "{err}");
}

/// `--save-calibration` and `--calibrated-recording` never overwrite a measurement they read:
/// refused before any work, with the option named, and the input left as it was.
#[test]
fn rcs_outputs_never_overwrite_its_inputs() {
    let dir = tempfile::tempdir().unwrap();
    calibrated_scan(dir.path());
    for (option, input) in [
        ("--save-calibration", "rec/target.rec"),
        ("--save-calibration", "rec/reference_background.rec"),
        ("--calibrated-recording", "rec/background.rec"),
    ] {
        let before = std::fs::read(dir.path().join(input)).unwrap();
        let mut args = vec![
            "rcs",
            "rec/target.rec",
            "--background",
            "rec/background.rec",
            "--reference",
            "rec/reference.rec",
            "--reference-background",
            "rec/reference_background.rec",
            "--out",
            "report2",
            option,
            input,
        ];
        args.extend_from_slice(RCS_ARGS);
        let o = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
            .args(&args)
            .current_dir(dir.path())
            .output()
            .unwrap();
        let err = String::from_utf8_lossy(&o.stderr);
        assert!(!o.status.success(), "{option} {input} was accepted");
        assert!(err.contains(option), "{err}");
        assert_eq!(std::fs::read(dir.path().join(input)).unwrap(), before);
        assert!(
            !dir.path().join("report2").exists(),
            "work done before refusing"
        );
    }
}
