//! Link faults in `acquire`: a fake instrument on 127.0.0.1 that closes the connection in
//! the middle of an answer, stalls, or sends garbage on cue. The real `sweepgate acquire`
//! must report each fault, reconnect by the documented policy (module docs of
//! `host-sim/src/acquire.rs`), take the sweep again, and keep the partial scan when the
//! instrument is gone for good.

use std::collections::BTreeMap;
use std::io::{BufRead, BufReader, Write};
use std::net::{TcpListener, TcpStream};
use std::path::{Path, PathBuf};
use std::process::{Command, Output};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::Arc;
use std::time::Duration;

use sweepgate_host::formats::recording::{recover, Record, Stop};

const POINTS: usize = 5;

#[derive(Clone, Copy, Debug)]
enum Fault {
    /// Half the block, then the connection is closed.
    Close,
    /// No answer at all (the connection stays open).
    Stall,
    /// Bytes that are no IEEE 488.2 block.
    Garbage,
    /// Close, and refuse every later connection.
    Die,
}

struct Fake {
    addr: String,
    queries: Arc<AtomicUsize>,
    connections: Arc<AtomicUsize>,
}

/// The IEEE 488.2 definite block (§8.7.9) of REAL,32 big-endian values, `n` in every real
/// part and `-n` in every imaginary part, with its line end.
fn block(n: usize) -> Vec<u8> {
    let mut body = Vec::new();
    for _ in 0..POINTS {
        body.extend_from_slice(&(n as f32).to_be_bytes());
        body.extend_from_slice(&(-(n as f32)).to_be_bytes());
    }
    let len = body.len().to_string();
    let mut out = format!("#{}{len}", len.len()).into_bytes();
    out.extend_from_slice(&body);
    out.push(b'\n');
    out
}

fn serve(
    s: TcpStream,
    script: Arc<BTreeMap<usize, Fault>>,
    queries: Arc<AtomicUsize>,
    dead: Arc<AtomicBool>,
) {
    let mut w = s.try_clone().unwrap();
    for line in BufReader::new(s).lines() {
        let Ok(line) = line else { return };
        if line.trim() != "D?" {
            continue;
        }
        let q = queries.fetch_add(1, Ordering::SeqCst);
        let answer = block(q);
        match script.get(&q) {
            None => {
                if w.write_all(&answer).is_err() {
                    return;
                }
            }
            Some(Fault::Close) => {
                let _ = w.write_all(&answer[..answer.len() / 2]);
                return;
            }
            Some(Fault::Stall) => {}
            Some(Fault::Garbage) => {
                let _ = w.write_all(b"#9zz\x01\x02\xffgarbage from a confused link\n");
            }
            Some(Fault::Die) => {
                dead.store(true, Ordering::SeqCst);
                return;
            }
        }
    }
}

fn fake(script: &[(usize, Fault)]) -> Fake {
    let l = TcpListener::bind("127.0.0.1:0").unwrap();
    l.set_nonblocking(true).unwrap();
    let addr = l.local_addr().unwrap().to_string();
    let script: Arc<BTreeMap<usize, Fault>> = Arc::new(script.iter().copied().collect());
    let queries = Arc::new(AtomicUsize::new(0));
    let connections = Arc::new(AtomicUsize::new(0));
    let dead = Arc::new(AtomicBool::new(false));
    let (q, c) = (queries.clone(), connections.clone());
    std::thread::spawn(move || loop {
        if dead.load(Ordering::SeqCst) {
            return; // the listener is dropped: connections are refused from now on
        }
        match l.accept() {
            Ok((s, _)) => {
                s.set_nonblocking(false).unwrap();
                c.fetch_add(1, Ordering::SeqCst);
                let (script, q, dead) = (script.clone(), q.clone(), dead.clone());
                std::thread::spawn(move || serve(s, script, q, dead));
            }
            Err(_) => std::thread::sleep(Duration::from_millis(5)),
        }
    });
    Fake {
        addr,
        queries,
        connections,
    }
}

fn dir(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("sweepgate-{name}-{}", std::process::id()));
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn profile(dir: &Path) -> PathBuf {
    let p = dir.join("fake.toml");
    std::fs::write(
        &p,
        format!(
            "name = \"fake\"\ntimeout_s = 0.3\ndata = \"D?\"\nformat = \"real32\"\n\
             byte_order = \"normal\"\nretries = 3\nretry_backoff_s = 0.05\n\
             [grid]\nstart_hz = 1e9\nstop_hz = 2e9\npoints = {POINTS}\n"
        ),
    )
    .unwrap();
    p
}

fn acquire(f: &Fake, dir: &Path, sweeps: u32) -> (Output, PathBuf) {
    let out = dir.join("scan.rec");
    let o = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .arg("acquire")
        .arg("--profile")
        .arg(profile(dir))
        .args(["--instrument", &f.addr, "--sweeps", &sweeps.to_string()])
        .arg("--out")
        .arg(&out)
        .output()
        .unwrap();
    (o, out)
}

/// The real part of the first point of each recorded sweep: the fake's query number.
fn recorded(path: &Path) -> (Vec<f32>, Stop) {
    let r = recover(&std::fs::read(path).unwrap());
    assert!(r.damage.is_empty(), "{:?}", r.damage);
    let v = r
        .records
        .iter()
        .filter_map(|(_, rec)| match rec {
            Record::Sweep { s21, .. } => {
                assert_eq!(s21.len(), POINTS);
                assert!(s21.iter().all(|c| c.re == s21[0].re && c.im == -c.re));
                Some(s21[0].re)
            }
            _ => None,
        })
        .collect();
    (v, r.stop)
}

#[test]
fn close_stall_and_garbage_mid_scan_are_retried_and_no_sweep_is_lost() {
    let d = dir("link-faults");
    let f = fake(&[(2, Fault::Close), (5, Fault::Stall), (8, Fault::Garbage)]);
    let (o, path) = acquire(&f, &d, 10);
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(o.status.success(), "{err}");
    let faults: Vec<_> = err
        .lines()
        .filter(|l| l.contains(": link fault: "))
        .collect();
    assert_eq!(faults.len(), 3, "{err}");
    assert!(faults[0].starts_with("sweep 2: link fault: the instrument closed the connection"));
    assert!(faults[1].starts_with("sweep 4: link fault: timeout: no answer within 0.3 s"));
    assert!(faults[2].starts_with("sweep 6: link fault: answer to \"D?\" rejected"));
    assert!(faults.iter().all(|l| l.contains("retry 1 of 3")));
    assert!(err.contains("3 link faults, 3 reconnections"), "{err}");
    assert_eq!(f.connections.load(Ordering::SeqCst), 4);
    assert_eq!(f.queries.load(Ordering::SeqCst), 13);
    // Every good answer recorded once, in order; the faulty ones never.
    let (v, stop) = recorded(&path);
    assert_eq!(v, [0., 1., 3., 4., 6., 7., 9., 10., 11., 12.]);
    assert_eq!(stop, Stop::Complete);
    std::fs::remove_dir_all(&d).ok();
}

#[test]
fn repeated_faults_on_one_sweep_use_up_the_retries_then_keep_the_partial_scan() {
    let d = dir("link-retries");
    // Sweep 3 fails four times in a row (one try and three retries).
    let f = fake(&[
        (3, Fault::Stall),
        (4, Fault::Close),
        (5, Fault::Garbage),
        (6, Fault::Close),
    ]);
    let (o, path) = acquire(&f, &d, 10);
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(1), "{err}");
    let last = err.lines().last().unwrap();
    assert!(
        last.starts_with("error: acquisition stopped; the recording ")
            && last.contains("keeps the 3 sweeps taken before the fault: link fault at sweep 3, 3 retries failed: the instrument closed the connection"),
        "{last}"
    );
    assert_eq!(err.lines().filter(|l| l.contains("retry ")).count(), 3);
    let (v, stop) = recorded(&path);
    assert_eq!(v, [0., 1., 2.]);
    assert_eq!(stop, Stop::Complete);
    std::fs::remove_dir_all(&d).ok();
}

#[test]
fn an_instrument_gone_for_good_keeps_the_partial_scan_and_exits_non_zero() {
    let d = dir("link-dead");
    let f = fake(&[(4, Fault::Die)]);
    let (o, path) = acquire(&f, &d, 10);
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(1), "{err}");
    assert_eq!(
        err.lines()
            .filter(|l| l.contains("reconnecting failed") && l.contains("refused"))
            .count(),
        3,
        "{err}"
    );
    let last = err.lines().last().unwrap();
    assert!(
        last.contains("keeps the 4 sweeps taken before the fault"),
        "{last}"
    );
    let (v, stop) = recorded(&path);
    assert_eq!(v, [0., 1., 2., 3.]);
    assert_eq!(stop, Stop::Complete);
    std::fs::remove_dir_all(&d).ok();
}
