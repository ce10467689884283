//! `sweepgate acquire` against misbehaving peers written for this test (a fake instrument
//! and a fake positioner on 127.0.0.1): an unasked extra answer, a wrong `*OPC?` answer,
//! bytes sent unasked, values that are never finite, an answer trickling in one byte at a
//! time, an instrument that never stops sending, a block header claiming a gigabyte, a
//! positioner sending bytes that are not UTF-8, flooding lines, a line without end; and
//! bad options (timeouts of 1e20, NaN, below 0), an output folder that
//! cannot be one, an output that is an input, a full disk.
//!
//! Each case checks: no panic, no hang past its deadline (the process is killed there and
//! the case fails), bounded memory (the peak resident size, `VmHWM` of
//! `/proc/<pid>/status`, polled while it runs), no wrong sweep recorded (the fake
//! instrument puts its data-query number in every value, so a stale or repeated answer
//! shows), the exit status, and a one-line reason. All cases run, a table of them is
//! printed (`cargo test --test acquire_hostile -- --nocapture`), and the test fails when
//! any failed.

use std::io::{BufRead, BufReader, Write};
use std::net::{TcpListener, TcpStream};
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};

use sweepgate_host::formats::recording::{kind, recover_file, Record, Stop};

const POINTS: usize = 5;
/// Peak resident size allowed to the acquire process, kB (the unfixed program reached
/// 1.5 GB under a flooding positioner).
const MAX_HWM_KB: u64 = 100 * 1024;

/// How the fake instrument misbehaves.
#[derive(Clone, Copy, Debug)]
enum Inst {
    /// Answers every query right.
    Good,
    /// Sends the answer to data query n twice.
    ExtraBlockAt(usize),
    /// Answers `*OPC?` number n with `0`.
    OpcZeroAt(usize),
    /// Sends a line nobody asked for after data query n.
    UnaskedAt(usize),
    /// Every value NaN.
    AlwaysNan,
    /// Answers data query n one byte every 100 ms, and every later one too.
    TrickleFrom(usize),
    /// Answers data query n with NaN values, then sends garbage without end.
    FloodAt(usize),
    /// Answers data query n with a block header claiming 999 999 999 bytes.
    HugeHeaderAt(usize),
}

struct FakeInst {
    addr: String,
    /// Lines received, all connections.
    received: Arc<AtomicUsize>,
}

/// The IEEE 488.2 definite block (§8.7.9) of REAL,32 big-endian values: `n` in every real
/// part and `-n` in every imaginary part (NaN for `nan`), with its line end.
fn block(n: usize, nan: bool) -> Vec<u8> {
    let v = if nan { f32::NAN } else { n as f32 };
    let mut body = Vec::new();
    for _ in 0..POINTS {
        body.extend_from_slice(&v.to_be_bytes());
        body.extend_from_slice(&(-v).to_be_bytes());
    }
    let len = body.len().to_string();
    let mut out = format!("#{}{len}", len.len()).into_bytes();
    out.extend_from_slice(&body);
    out.push(b'\n');
    out
}

/// Counters shared by one fake instrument's connections.
#[derive(Default)]
struct Counts {
    data: AtomicUsize,
    opc: AtomicUsize,
}

fn answer_data(w: &mut TcpStream, how: Inst, q: usize) -> std::io::Result<()> {
    match how {
        Inst::ExtraBlockAt(n) if n == q => {
            w.write_all(&block(q, false))?;
            w.write_all(&block(q, false))
        }
        Inst::UnaskedAt(n) if n == q => {
            w.write_all(&block(q, false))?;
            w.flush()?;
            std::thread::sleep(Duration::from_millis(30));
            w.write_all(b"SERVICE REQUEST\n")
        }
        Inst::AlwaysNan => w.write_all(&block(q, true)),
        Inst::TrickleFrom(n) if q >= n => {
            for b in block(q, false) {
                w.write_all(&[b])?;
                std::thread::sleep(Duration::from_millis(100));
            }
            Ok(())
        }
        Inst::FloodAt(n) if n == q => {
            w.write_all(&block(q, true))?;
            let junk = vec![b'x'; 64 * 1024];
            loop {
                w.write_all(&junk)?;
            }
        }
        Inst::HugeHeaderAt(n) if n == q => {
            w.write_all(b"#9999999999")?;
            w.write_all(&vec![0u8; 256 * 1024])
        }
        _ => w.write_all(&block(q, false)),
    }
}

fn serve_inst(s: TcpStream, how: Inst, counts: Arc<Counts>, received: Arc<AtomicUsize>) {
    let Ok(mut w) = s.try_clone() else { return };
    for line in BufReader::new(s).lines() {
        let Ok(line) = line else { return };
        received.fetch_add(1, Ordering::SeqCst);
        let r = match line.trim() {
            "*OPC?" => {
                let n = counts.opc.fetch_add(1, Ordering::SeqCst);
                let zero = matches!(how, Inst::OpcZeroAt(k) if k == n);
                w.write_all(if zero { b"0\n" } else { b"1\n" })
            }
            "D?" => {
                let q = counts.data.fetch_add(1, Ordering::SeqCst);
                answer_data(&mut w, how, q)
            }
            _ => Ok(()),
        };
        if r.is_err() {
            return;
        }
    }
}

fn fake_instrument(how: Inst) -> FakeInst {
    let l = TcpListener::bind("127.0.0.1:0").unwrap();
    let addr = l.local_addr().unwrap().to_string();
    let received = Arc::new(AtomicUsize::new(0));
    let counts = Arc::new(Counts::default());
    let r = received.clone();
    std::thread::spawn(move || {
        for s in l.incoming() {
            let Ok(s) = s else { return };
            let (c, r) = (counts.clone(), r.clone());
            std::thread::spawn(move || serve_inst(s, how, c, r));
        }
    });
    FakeInst { addr, received }
}

/// A fake positioner: one connection, `feed` writes to it, then it closes.
fn fake_positioner(feed: impl FnOnce(&mut TcpStream) + Send + 'static) -> String {
    let l = TcpListener::bind("127.0.0.1:0").unwrap();
    let addr = l.local_addr().unwrap().to_string();
    std::thread::spawn(move || {
        if let Ok((mut s, _)) = l.accept() {
            feed(&mut s);
        }
    });
    addr
}

fn dir(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("sweepgate-hostile-{name}-{}", std::process::id()));
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn profile(d: &Path, extra: &str) -> PathBuf {
    let p = d.join("fake.toml");
    let timeout = if extra.contains("timeout_s") {
        ""
    } else {
        "timeout_s = 0.5\n"
    };
    std::fs::write(
        &p,
        format!(
            "name = \"fake\"\n{timeout}wait = \"*OPC?\"\nsync = \"*OPC?\"\ndata = \"D?\"\n\
             format = \"real32\"\nbyte_order = \"normal\"\nretries = 2\nretry_backoff_s = 0.05\n\
             {extra}\n[grid]\nstart_hz = 1e9\nstop_hz = 2e9\npoints = {POINTS}\n"
        ),
    )
    .unwrap();
    p
}

/// What one run of `acquire` did.
struct Run {
    code: Option<i32>,
    stderr: String,
    secs: f64,
    hwm_kb: u64,
}

fn hwm_kb(pid: u32) -> Option<u64> {
    let text = std::fs::read_to_string(format!("/proc/{pid}/status")).ok()?;
    text.lines()
        .find_map(|l| l.strip_prefix("VmHWM:"))
        .and_then(|v| v.split_whitespace().next()?.parse().ok())
}

/// Runs `sweepgate acquire args`, polling its peak resident size; killed at `deadline`.
fn run(args: &[String], deadline: Duration) -> Result<Run, String> {
    let t0 = Instant::now();
    let mut child = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .arg("acquire")
        .args(args)
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let mut err_pipe = child.stderr.take().unwrap();
    let reader = std::thread::spawn(move || {
        let mut s = String::new();
        std::io::Read::read_to_string(&mut err_pipe, &mut s).ok();
        s
    });
    let mut hwm = 0;
    let status = loop {
        if let Some(h) = hwm_kb(child.id()) {
            hwm = hwm.max(h);
        }
        if let Some(st) = child.try_wait().unwrap() {
            break st;
        }
        if t0.elapsed() > deadline {
            child.kill().ok();
            child.wait().ok();
            return Err(format!("still running after {deadline:?}: killed"));
        }
        std::thread::sleep(Duration::from_millis(20));
    };
    let stderr = reader.join().unwrap();
    if stderr.contains("panicked") {
        return Err(format!("panicked: {stderr}"));
    }
    if hwm > MAX_HWM_KB {
        return Err(format!("VmHWM {hwm} kB above {MAX_HWM_KB} kB"));
    }
    Ok(Run {
        code: status.code(),
        stderr,
        secs: t0.elapsed().as_secs_f64(),
        hwm_kb: hwm,
    })
}

fn args(profile: &Path, inst: &str, extra: &[&str], out: &Path) -> Vec<String> {
    let mut v = vec![
        "--profile".to_string(),
        profile.display().to_string(),
        "--instrument".into(),
        inst.into(),
        "--out".into(),
        out.display().to_string(),
    ];
    v.extend(extra.iter().map(|s| s.to_string()));
    v
}

/// The recording's sweeps (each one's query number, checked uniform), its report record
/// and whether it ended cleanly.
fn read_back(path: &Path) -> Result<(Vec<f32>, serde_json::Value), String> {
    let r = recover_file(path).map_err(|e| e.to_string())?;
    if r.stop != Stop::Complete {
        return Err(format!("no end record: {}", r.describe_stop()));
    }
    let mut sweeps = Vec::new();
    let mut report = serde_json::Value::Null;
    for (_, rec) in r.records {
        match rec {
            Record::Sweep { s21, .. } => {
                let q = s21[0].re;
                if s21.len() != POINTS || !s21.iter().all(|c| c.re == q && c.im == -q) {
                    return Err(format!("a sweep mixing two answers: {s21:?}"));
                }
                sweeps.push(q);
            }
            Record::Unknown { kind: k, payload } if k == kind::ACQUIRE_REPORT => {
                report = serde_json::from_slice(&payload).map_err(|e| e.to_string())?;
            }
            _ => {}
        }
    }
    Ok((sweeps, report))
}

/// Every recorded sweep is a fresh answer: query numbers strictly increasing.
fn all_fresh(v: &[f32]) -> Result<(), String> {
    if v.windows(2).all(|w| w[1] > w[0]) {
        Ok(())
    } else {
        Err(format!("a stale or repeated sweep was recorded: {v:?}"))
    }
}

fn expect(cond: bool, what: &str, r: &Run) -> Result<(), String> {
    if cond {
        Ok(())
    } else {
        Err(format!("{what}; exit {:?}; stderr: {}", r.code, r.stderr))
    }
}

/// The last line of standard error: the one-line reason of a failed run.
fn last_line(r: &Run) -> &str {
    r.stderr.lines().last().unwrap_or("")
}

fn counter(report: &serde_json::Value, name: &str) -> u64 {
    report[name].as_u64().unwrap_or(u64::MAX)
}

/// A scan against a misbehaving instrument that must still succeed with fresh sweeps only.
fn recovers(name: &str, how: Inst, counter_name: &str) -> Result<Run, String> {
    let d = dir(name);
    let inst = fake_instrument(how);
    let out = d.join("scan.rec");
    let r = run(
        &args(&profile(&d, ""), &inst.addr, &["--sweeps", "10"], &out),
        Duration::from_secs(30),
    )?;
    expect(r.code == Some(0), "exit 0 expected", &r)?;
    let (v, report) = read_back(&out)?;
    expect(v.len() == 10, &format!("10 sweeps expected, got {v:?}"), &r)?;
    all_fresh(&v)?;
    let n = counter(&report, counter_name);
    expect((1..10).contains(&n), &format!("{counter_name} = {n}"), &r)?;
    expect(
        r.stderr.contains("answer out of step") || r.stderr.contains("link fault"),
        "the terminal names the event",
        &r,
    )?;
    std::fs::remove_dir_all(&d).ok();
    Ok(r)
}

/// A scan that cannot go on: non-zero exit, one-line reason, the partial recording ended
/// cleanly with its report giving the reason.
fn stops(name: &str, how: Inst, reason: &str, deadline_s: u64) -> Result<Run, String> {
    let d = dir(name);
    let inst = fake_instrument(how);
    let out = d.join("scan.rec");
    let r = run(
        &args(&profile(&d, ""), &inst.addr, &["--sweeps", "10"], &out),
        Duration::from_secs(deadline_s),
    )?;
    expect(r.code == Some(1), "exit 1 expected", &r)?;
    let last = last_line(&r);
    expect(
        last.starts_with("error: ") && last.contains(reason),
        &format!("last line {last:?} should give {reason:?}"),
        &r,
    )?;
    let (v, report) = read_back(&out)?;
    all_fresh(&v)?;
    let stopped = report["stopped_by"].as_str().unwrap_or("");
    expect(stopped.contains(reason), "the report names the reason", &r)?;
    std::fs::remove_dir_all(&d).ok();
    Ok(r)
}

fn case_extra_answer() -> Result<Run, String> {
    recovers("extra", Inst::ExtraBlockAt(3), "answers_out_of_step")
}

fn case_opc_zero() -> Result<Run, String> {
    recovers("opc", Inst::OpcZeroAt(4), "answers_out_of_step")
}

fn case_unasked_line() -> Result<Run, String> {
    recovers("unasked", Inst::UnaskedAt(2), "answers_out_of_step")
}

fn case_huge_header() -> Result<Run, String> {
    recovers("huge", Inst::HugeHeaderAt(5), "link_faults")
}

fn case_always_nan() -> Result<Run, String> {
    stops("nan", Inst::AlwaysNan, "max_dropped_in_row", 30)
}

fn case_trickle() -> Result<Run, String> {
    // 0.5 s per answer, 2 retries with 0.05 and 0.1 s waits: 2 s at most, past 4 s is a hang.
    let r = stops(
        "trickle",
        Inst::TrickleFrom(3),
        "timeout: no answer within 0.5 s",
        20,
    )?;
    expect(r.secs < 4.0, &format!("took {:.1} s", r.secs), &r)?;
    Ok(r)
}

fn case_flooding_instrument() -> Result<Run, String> {
    // Clearing the link after the dropped sweep never ends in quiet: a link fault, then a
    // new connection.
    let r = recovers("flood", Inst::FloodAt(2), "link_faults")?;
    // Usually the link is never quiet while it is cleared ("kept sending"). On a loaded
    // machine the flooding thread can stall for longer than the quiet time, the clearing
    // ends, and the next answer, all junk, is refused by its length: the same fault, found
    // one step later (seen in CI-like runs; either way the scan goes on after a reconnect).
    expect(
        r.stderr.contains("kept sending") || r.stderr.contains("longer than"),
        "the reason is given",
        &r,
    )?;
    Ok(r)
}

fn case_positioner_bad_bytes() -> Result<Run, String> {
    let d = dir("bad-bytes");
    let inst = fake_instrument(Inst::Good);
    let pos = fake_positioner(|s| {
        for i in 0..40u64 {
            let line: Vec<u8> = if i == 5 {
                b"1000 \xff\xfe12.5\n".to_vec()
            } else {
                format!("{} {}\n", i * 20_000, i as f64 * 0.5).into_bytes()
            };
            if s.write_all(&line).is_err() {
                return;
            }
            std::thread::sleep(Duration::from_millis(20));
        }
    });
    let out = d.join("scan.rec");
    // No --sweeps: only the positioner closing ends the scan.
    let r = run(
        &args(&profile(&d, ""), &inst.addr, &["--positioner", &pos], &out),
        Duration::from_secs(30),
    )?;
    expect(r.code == Some(0), "exit 0 expected", &r)?;
    let (v, report) = read_back(&out)?;
    all_fresh(&v)?;
    expect(
        counter(&report, "positions") == 39,
        &format!("39 positions expected: {report}"),
        &r,
    )?;
    expect(
        counter(&report, "positioner_bad_byte_lines") == 1,
        "one bad line counted",
        &r,
    )?;
    expect(
        r.stderr.contains("1 not UTF-8"),
        "counted on the terminal",
        &r,
    )?;
    std::fs::remove_dir_all(&d).ok();
    Ok(r)
}

fn case_positioner_flood() -> Result<Run, String> {
    let d = dir("pos-flood");
    let inst = fake_instrument(Inst::Good);
    let pos = fake_positioner(|s| {
        let mut chunk = Vec::new();
        for i in 0..2000u64 {
            chunk.extend_from_slice(format!("{} {}\n", i, (i % 3600) as f64 * 0.1).as_bytes());
        }
        let t0 = Instant::now();
        while t0.elapsed() < Duration::from_secs(3) {
            if s.write_all(&chunk).is_err() {
                return;
            }
        }
    });
    let out = d.join("scan.rec");
    let r = run(
        &args(
            &profile(&d, "positioner_queue = 1000"),
            &inst.addr,
            &["--positioner", &pos],
            &out,
        ),
        Duration::from_secs(60),
    )?;
    expect(r.code == Some(0), "exit 0 expected", &r)?;
    let (v, report) = read_back(&out)?;
    all_fresh(&v)?;
    expect(!v.is_empty(), "sweeps recorded", &r)?;
    expect(
        counter(&report, "positioner_samples_dropped") > 0,
        &format!("samples dropped and counted: {report}"),
        &r,
    )?;
    std::fs::remove_dir_all(&d).ok();
    Ok(r)
}

fn case_positioner_endless_line() -> Result<Run, String> {
    let d = dir("pos-line");
    let inst = fake_instrument(Inst::Good);
    let pos = fake_positioner(|s| {
        let junk = vec![b'7'; 1 << 20];
        for _ in 0..300 {
            if s.write_all(&junk).is_err() {
                return;
            }
        }
        s.write_all(b"\n0 1.5\n").ok();
    });
    let out = d.join("scan.rec");
    let r = run(
        &args(&profile(&d, ""), &inst.addr, &["--positioner", &pos], &out),
        Duration::from_secs(60),
    )?;
    expect(r.code == Some(0), "exit 0 expected", &r)?;
    let (_, report) = read_back(&out)?;
    expect(
        counter(&report, "positioner_long_lines") == 1 && counter(&report, "positions") == 1,
        &format!("one long line counted, the next sample kept: {report}"),
        &r,
    )?;
    std::fs::remove_dir_all(&d).ok();
    Ok(r)
}

/// A bad option is refused with one line naming it, before the instrument hears anything.
fn refused(name: &str, extra_profile: &str, extra: &[String], what: &str) -> Result<Run, String> {
    let d = dir(name);
    let inst = fake_instrument(Inst::Good);
    let out = d.join("scan.rec");
    let mut a = args(
        &profile(&d, extra_profile),
        &inst.addr,
        &["--sweeps", "3"],
        &out,
    );
    a.extend(extra.iter().cloned());
    let r = run(&a, Duration::from_secs(20))?;
    expect(r.code == Some(1), "exit 1 expected", &r)?;
    expect(
        r.stderr.lines().count() == 1 && r.stderr.contains(what),
        &format!("one line naming {what:?}"),
        &r,
    )?;
    let heard = inst.received.load(Ordering::SeqCst);
    expect(
        heard == 0,
        &format!("the instrument heard {heard} lines"),
        &r,
    )?;
    std::fs::remove_dir_all(&d).ok();
    Ok(r)
}

fn case_bad_numbers() -> Result<Run, String> {
    for v in ["1e20", "nan", "-1.0", "0.0", "inf"] {
        refused(
            "timeout",
            &format!("timeout_s = {v}"),
            &[],
            "timeout_s must be",
        )?;
    }
    for v in ["1e20", "nan", "-1.0", "inf"] {
        refused(
            "backoff",
            &format!("retry_backoff_s = {v}"),
            &[],
            "retry_backoff_s",
        )?;
    }
    for v in ["1e20", "NaN", "-1", "inf"] {
        let a = [format!("--linger-s={v}")];
        refused("linger", "", &a, "--linger-s must be")?;
    }
    refused("queue", "positioner_queue = 0", &[], "positioner_queue")?;
    refused("rows", "max_dropped_in_row = 0", &[], "max_dropped_in_row")
}

fn case_output_checked_first() -> Result<Run, String> {
    let d = dir("out");
    let inst = fake_instrument(Inst::Good);
    let file = d.join("a-file");
    std::fs::write(&file, b"x").unwrap();
    let p = profile(&d, "");
    let r = run(
        &args(&p, &inst.addr, &["--sweeps", "3"], &file.join("scan.rec")),
        Duration::from_secs(20),
    )?;
    expect(r.code == Some(1), "exit 1 for a folder that is a file", &r)?;
    expect(
        r.stderr.contains("a-file") && r.stderr.lines().count() == 1,
        "one line naming it",
        &r,
    )?;
    let r2 = run(
        &args(&p, &inst.addr, &["--sweeps", "3"], &p),
        Duration::from_secs(20),
    )?;
    expect(
        r2.code == Some(1),
        "exit 1 for an output that is the profile",
        &r2,
    )?;
    let heard = inst.received.load(Ordering::SeqCst);
    expect(
        heard == 0,
        &format!("the instrument heard {heard} lines"),
        &r,
    )?;
    expect(
        std::fs::read(&p).is_ok_and(|b| b.starts_with(b"name")),
        "profile kept",
        &r2,
    )?;
    std::fs::remove_dir_all(&d).ok();
    Ok(r)
}

/// A 64 KiB tmpfs at a fresh folder (the test runs as root), unmounted on drop.
struct Small(PathBuf);

impl Drop for Small {
    fn drop(&mut self) {
        let _ = Command::new("umount").arg(&self.0).status();
        let _ = std::fs::remove_dir(&self.0);
    }
}

fn small_disk() -> Option<Small> {
    let d = dir("small-disk");
    let ok = Command::new("mount")
        .args(["-t", "tmpfs", "-o", "size=64k", "tmpfs"])
        .arg(&d)
        .stderr(Stdio::null())
        .status()
        .is_ok_and(|s| s.success());
    ok.then_some(Small(d))
}

/// A full disk: a small tmpfs when the test may mount one, else `/dev/full` (every write
/// fails with "no space"); the error names the file and keeps the cause.
fn case_full_disk() -> Result<Run, String> {
    let d = dir("full");
    let inst = fake_instrument(Inst::Good);
    let small = small_disk();
    let out = match &small {
        Some(s) => s.0.join("scan.rec"),
        None => PathBuf::from("/dev/full"),
    };
    let r = run(
        &args(&profile(&d, ""), &inst.addr, &["--sweeps", "100000"], &out),
        Duration::from_secs(60),
    )?;
    expect(r.code == Some(1), "exit 1 expected", &r)?;
    let last = last_line(&r);
    let named = out.display().to_string();
    expect(
        last.contains(&named) && last.contains("No space left on device"),
        "the file and the cause named",
        &r,
    )?;
    drop(small);
    std::fs::remove_dir_all(&d).ok();
    Ok(r)
}

#[test]
fn every_hostile_peer_is_survived() {
    type Case = fn() -> Result<Run, String>;
    let cases: &[(&str, Case)] = &[
        ("extra unasked answer (a block twice)", case_extra_answer),
        ("*OPC? answering 0", case_opc_zero),
        ("a line sent unasked", case_unasked_line),
        ("a block header claiming 1 GB", case_huge_header),
        ("every value NaN", case_always_nan),
        ("an answer trickling 1 byte / 100 ms", case_trickle),
        (
            "an instrument that never stops sending",
            case_flooding_instrument,
        ),
        ("positioner: a line not UTF-8", case_positioner_bad_bytes),
        ("positioner: flooding lines", case_positioner_flood),
        ("positioner: a 300 MB line", case_positioner_endless_line),
        ("options: 1e20, NaN, -1, 0, inf", case_bad_numbers),
        (
            "output folder and same file checked first",
            case_output_checked_first,
        ),
        ("full disk", case_full_disk),
    ];
    let handles: Vec<_> = cases
        .iter()
        .map(|&(name, f)| (name, std::thread::spawn(f)))
        .collect();
    let mut failed = 0;
    println!("hostile peers against `sweepgate acquire`:");
    for (name, h) in handles {
        match h.join().unwrap() {
            Ok(r) => println!(
                "  ok    {name:<45} exit {:?}, {:5.2} s, VmHWM {:6} kB",
                r.code, r.secs, r.hwm_kb
            ),
            Err(e) => {
                failed += 1;
                println!("  FAIL  {name:<45} {e}");
            }
        }
    }
    println!(
        "hostile cases: {} passed, {failed} failed",
        cases.len() - failed
    );
    assert_eq!(failed, 0);
}
