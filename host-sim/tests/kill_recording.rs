//! Crash safety of recordings: the real `sweepgate simulate --progress-lines` is killed with
//! SIGKILL at pseudo-random moments (fixed seed) many times; every record the process
//! reported as written must be read back intact by `record::recover`, byte for byte equal
//! to an uninterrupted run with the same seed, and the file may end in at most one partial
//! record. The same for `sweepgate replay --record --progress-lines` (20 kills), and for
//! `sweepgate acquire` against a local `sweepgate instrument` (it
//! reports no progress: the file read after the kill must hold whole records in order with
//! at most one partial record after them). The policy under test is documented in `host-sim/src/record.rs`.
#![cfg(unix)]

use std::io::{BufRead, BufReader};
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::Duration;

use sweepgate_host::formats::recording::{recover, Fault, Record, Stop};

#[path = "instrument_support/mod.rs"]
mod support;

/// Kills that must land while the file is being written.
const KILLS: usize = 50;
/// Most attempts (some land before the first record or after the end).
const MAX_ATTEMPTS: usize = 200;

/// splitmix64: a fixed-seed generator for the kill times (common practice, no source).
struct Rng(u64);
impl Rng {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
}

/// The demo lab over a quarter turn (−45° to 45°), so that each run is short.
fn scenario() -> PathBuf {
    scenario_in(&dir())
}

fn scenario_in(d: &Path) -> PathBuf {
    let p = d.join("quarter.toml");
    if !p.exists() {
        let text = std::fs::read_to_string(
            Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios/demo-lab.toml"),
        )
        .unwrap();
        let mut s = sweepgate_host::model::scenario::Scenario::from_toml(&text).unwrap();
        s.positioner.start_deg = -45.0;
        s.positioner.stop_deg = 45.0;
        s.validate().unwrap();
        std::fs::write(&p, toml::to_string(&s).unwrap()).unwrap();
    }
    p
}

fn dir() -> PathBuf {
    let d = std::env::temp_dir().join(format!("sweepgate-kill-{}", std::process::id()));
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn simulate(out: &Path) -> Command {
    simulate_with(&scenario(), out)
}

fn simulate_with(scenario: &Path, out: &Path) -> Command {
    let mut c = Command::new(env!("CARGO_BIN_EXE_sweepgate"));
    c.args(["simulate", "--seed", "7", "--progress-lines", "--scenario"])
        .arg(scenario)
        .arg("--out")
        .arg(out)
        .stdout(Stdio::piped())
        .stderr(Stdio::null());
    c
}

fn parse_line(l: &str) -> (u64, u64) {
    let mut it = l.split_whitespace();
    assert_eq!(it.next(), Some("written"), "progress line {l:?}");
    let off = it.next().and_then(|x| x.parse().ok()).expect("offset");
    let n = it.next().and_then(|x| x.parse().ok()).expect("records");
    (off, n)
}

#[test]
fn killed_simulate_keeps_every_reported_record() {
    kill_many("simulate", KILLS, &dir(), &|out| simulate(out));
}

/// Kills of `replay --record` (the simulate test covers the 50).
const REPLAY_KILLS: usize = 20;

/// `replay --record`, paced (×8) so that a run lasts about a second.
fn replay_record(input: &Path, out: &Path) -> Command {
    let mut c = Command::new(env!("CARGO_BIN_EXE_sweepgate"));
    c.arg("replay")
        .arg(input)
        .args([
            "--speed",
            "8",
            "--no-preview",
            "--progress-lines",
            "--record",
        ])
        .arg(out)
        .arg("--out")
        .arg(out.with_extension("report"))
        .stdout(Stdio::piped())
        .stderr(Stdio::null());
    c
}

#[test]
fn killed_replay_record_keeps_every_reported_record() {
    let d = std::env::temp_dir().join(format!("sweepgate-kill-replay-{}", std::process::id()));
    std::fs::create_dir_all(&d).unwrap();
    let input = d.join("input.rec");
    assert!(simulate_with(&scenario_in(&d), &input)
        .status()
        .unwrap()
        .success());
    kill_many("replay --record", REPLAY_KILLS, &d, &|out| {
        replay_record(&input, out)
    });
}

/// Kills the command `cmd(out)` at pseudo-random moments until `kills` of them landed while
/// the file was being written, and checks each file against an uninterrupted run.
fn kill_many(what: &str, kills: usize, d: &Path, cmd: &dyn Fn(&Path) -> Command) {
    let simulate = cmd;
    let d = d.to_path_buf();
    // The uninterrupted run: the reference bytes.
    let full_path = d.join("full.rec");
    let t0 = std::time::Instant::now();
    let mut child = simulate(&full_path).spawn().unwrap();
    let mut first_ms = None;
    let mut lines = Vec::new();
    for l in BufReader::new(child.stdout.take().unwrap()).lines() {
        first_ms.get_or_insert(t0.elapsed().as_millis() as u64);
        lines.push(parse_line(&l.unwrap()));
    }
    assert!(child.wait().unwrap().success());
    // Kill times are drawn from the first record to the end of this run (not a timed
    // assertion: it only spreads the kills over the run on a slow or a fast machine).
    let run_ms = (t0.elapsed().as_millis() as u64).max(50);
    let first_ms = first_ms.unwrap_or(0).min(run_ms - 10);
    let full = std::fs::read(&full_path).unwrap();
    let &(last_off, last_n) = lines.last().unwrap();
    assert_eq!(last_off, full.len() as u64);
    let r = recover(&full);
    assert_eq!(r.stop, Stop::Complete);
    assert_eq!(r.records.len() as u64, last_n);
    let total_records = last_n;

    let mut rng = Rng(0x5EED_0FC0_FFEE);
    let (mut mid_file, mut partial_tail, mut before_first) = (0, 0, 0);
    let (mut min_n, mut max_n, mut beyond_reported) = (u64::MAX, 0, 0u64);
    let mut attempts = 0;
    let mut hi_ms = run_ms;
    for k in 0..MAX_ATTEMPTS {
        if mid_file == kills {
            break;
        }
        attempts += 1;
        let path = d.join(format!("kill-{k}.rec"));
        let _ = std::fs::remove_file(&path);
        // From the child's first reported record (so that a slow start on a loaded machine
        // does not push the kills before it) to the end of the run (shortened whenever a
        // run ends before its kill).
        let wait_ms = rng.next() % (hi_ms - first_ms).max(1);
        let mut child = simulate(&path).spawn().unwrap();
        let stdout = child.stdout.take().unwrap();
        let (first_tx, first_rx) = std::sync::mpsc::channel();
        let reader = std::thread::spawn(move || {
            let mut last = None;
            for l in BufReader::new(stdout).lines() {
                let Ok(l) = l else { break };
                last = Some(parse_line(&l));
                let _ = first_tx.send(());
            }
            last
        });
        // A deadline on the wait: a child that reports nothing within a minute is killed.
        let _ = first_rx.recv_timeout(Duration::from_secs(60));
        std::thread::sleep(Duration::from_millis(wait_ms));
        child.kill().unwrap(); // SIGKILL on Unix
        let status = child.wait().unwrap();
        let reported = reader.join().unwrap();
        let Some((off, n)) = reported else {
            before_first += 1;
            continue;
        };
        if status.success() {
            hi_ms = (first_ms + (hi_ms - first_ms) * 3 / 4).max(first_ms + 1);
            // Finished before the kill: the file is complete.
            assert_eq!(std::fs::read(&path).unwrap(), full);
            continue;
        }
        mid_file += 1;
        min_n = min_n.min(n);
        max_n = max_n.max(n);
        let bytes = std::fs::read(&path).unwrap();
        assert!(
            bytes.len() as u64 >= off,
            "kill {k}: file shorter than reported"
        );
        // Everything reported is the reference, byte for byte.
        assert_eq!(&bytes[..off as usize], &full[..off as usize], "kill {k}");
        let r = recover(&bytes);
        assert!(r.damage.is_empty(), "kill {k}: damage {:?}", r.damage);
        assert!(
            r.records.len() as u64 >= n,
            "kill {k}: {} < {n}",
            r.records.len()
        );
        assert!(r.stop_offset >= off);
        beyond_reported += r.records.len() as u64 - n;
        // The reported records are exactly the reference's first n.
        let rr = recover(&full);
        for (i, ((oa, ra), (ob, rb))) in r.records.iter().zip(&rr.records).enumerate() {
            assert_eq!((oa, ra), (ob, rb), "kill {k}: record {i}");
        }
        // At most one partial record at the end.
        match &r.stop {
            Stop::EndOfData => {}
            // Killed after the end record, before the process exited.
            Stop::Complete => assert_eq!(bytes, full, "kill {k}"),
            Stop::Fault(Fault::Truncated { .. }) => partial_tail += 1,
            other => panic!("kill {k}: stopped with {other:?}"),
        }
        assert!(n <= total_records);
    }
    eprintln!(
        "kill test ({what}): {attempts} kills; {mid_file} mid-file (reported records {min_n}..={max_n} of \
         {total_records}, {partial_tail} ending in a partial record, {beyond_reported} records \
         written but not yet reported), {before_first} before the first record"
    );
    assert_eq!(
        mid_file, kills,
        "{what}: only {mid_file} of {attempts} kills landed mid-file"
    );
    std::fs::remove_dir_all(&d).ok();
}

/// Kills of `acquire` (the simulate test above covers the 50).
const ACQUIRE_KILLS: usize = 20;

#[test]
fn killed_acquire_leaves_whole_records_and_at_most_one_partial() {
    // Its own directory: the simulate test removes its own when done.
    let d = support::temp_dir("kill-acquire-out");
    let inst = support::start("kill-acquire", &[]);
    let mut rng = Rng(0xACC0_1DE5);
    let (mut kills, mut partial, mut most) = (0, 0, 0usize);
    for k in 0..ACQUIRE_KILLS {
        let path = d.join(format!("acq-{k}.rec"));
        let mut child = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
            .args([
                "acquire",
                "--sweeps",
                "100000",
                "--instrument",
                &inst.addr,
                "--out",
            ])
            .arg(&path)
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .unwrap();
        std::thread::sleep(Duration::from_millis(100 + rng.next() % 700));
        child.kill().unwrap();
        child.wait().unwrap();
        kills += 1;
        let Ok(bytes) = std::fs::read(&path) else {
            continue; // killed before the file was created
        };
        let r = recover(&bytes);
        assert!(r.damage.is_empty(), "kill {k}: damage {:?}", r.damage);
        let sweeps: Vec<u32> = r
            .records
            .iter()
            .filter_map(|(_, x)| match x {
                Record::Sweep { index, s21, .. } => {
                    assert_eq!(s21.len(), 201);
                    Some(*index)
                }
                _ => None,
            })
            .collect();
        assert!(
            sweeps.iter().enumerate().all(|(i, &n)| n as usize == i),
            "kill {k}"
        );
        most = most.max(sweeps.len());
        // At most one partial record (a sweep record of 201 points is the longest here).
        let tail = bytes.len() as u64 - r.stop_offset;
        match &r.stop {
            Stop::EndOfData => assert_eq!(tail, 0),
            Stop::Fault(Fault::Truncated { .. }) => {
                partial += 1;
                assert!(
                    tail < 13 + 24 + 201 * 8,
                    "kill {k}: {tail} bytes after the last record"
                );
            }
            Stop::BadFileHeader(_) if bytes.is_empty() => {}
            other => panic!("kill {k}: {other:?}"),
        }
    }
    eprintln!(
        "acquire kill test: {kills} kills, up to {most} sweeps recovered, {partial} ending in a partial record"
    );
    assert_eq!(kills, ACQUIRE_KILLS);
    assert!(most > 0, "no kill landed after the first sweep");
    std::fs::remove_dir_all(&d).ok();
}
