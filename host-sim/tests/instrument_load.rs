//! Load test of `sweepgate instrument` on loopback (127.0.0.1 only): 200 well-behaved
//! clients at once, plus one hostile client of each kind (a 64 MB line, a stream without
//! newline, an idle client, a client that never reads, a flood of connections past the
//! client limit). Every well-behaved answer must be right, the server's memory must stay
//! bounded, and it must still answer afterwards. Prints p50/p99/max latency.
//! Expected answers: the instrument's documented `*IDN?` and the demo lab's grid
//! (8 GHz to 12 GHz, 201 points), as in `instrument.rs`.

mod instrument_support;

use std::io::{Read, Write};
use std::net::TcpStream;
use std::sync::{Arc, Barrier};
use std::thread;
use std::time::{Duration, Instant};

use instrument_support::{start, Client};

const GOOD: usize = 200;
const ROUNDS: usize = 10;
const FLOOD: usize = 300;

fn idn() -> String {
    format!("sweepgate,simulated-vna,0,{}", env!("CARGO_PKG_VERSION"))
}

/// A good client: connects, waits for every other, then asks ROUNDS queries and
/// returns each one's latency.
fn good_client(addr: String, go: Arc<Barrier>) -> Vec<Duration> {
    let mut c = Client::connect(&addr);
    go.wait();
    let want = format!("{};201;8E9", idn());
    (0..ROUNDS)
        .map(|_| {
            let t = Instant::now();
            let got = c.query("*IDN?;SWE:POIN?;FREQ:STAR?");
            let dt = t.elapsed();
            assert_eq!(got, want);
            dt
        })
        .collect()
}

/// Sends `bytes` in 1 MB pieces of `fill`, then maybe a newline; ignores a dropped link.
fn spew(addr: &str, bytes: usize, fill: u8, newline: bool) -> TcpStream {
    let mut s = TcpStream::connect(addr).unwrap();
    s.set_write_timeout(Some(Duration::from_secs(30))).unwrap();
    let piece = vec![fill; 1 << 20];
    for _ in 0..bytes >> 20 {
        if s.write_all(&piece).is_err() {
            return s;
        }
    }
    if newline {
        let _ = s.write_all(b"\n");
    }
    s
}

fn percentile(sorted: &[Duration], p: f64) -> Duration {
    let i = ((sorted.len() - 1) as f64 * p).round() as usize;
    sorted[i]
}

#[test]
fn two_hundred_clients_and_one_hostile_client_of_each_kind() {
    let inst = start("load", &["--max-clients", "220", "--idle-timeout-s", "3"]);
    let addr = inst.addr.clone();
    let rss_before_kb = inst.status_kb("VmRSS");

    // The hostile clients that hold a slot: idle, never-reading, long line, no newline.
    let mut idle = TcpStream::connect(&addr).unwrap();
    let deaf = TcpStream::connect(&addr).unwrap();
    let deaf_writer = {
        let mut d = deaf.try_clone().unwrap();
        d.set_write_timeout(Some(Duration::from_secs(30))).unwrap();
        thread::spawn(move || {
            let _ = d.write_all(b"INIT\n");
            // Each line asks for two traces; the client never reads them. The server stops
            // reading it once its answers fill the socket, then drops it: a write fails.
            let q = b"TRAC?;TRAC?\n".repeat(1000);
            (0..2000).any(|_| d.write_all(&q).is_err())
        })
    };
    let a = addr.clone();
    let long_line = thread::spawn(move || spew(&a, 64 << 20, b'A', true));
    let a = addr.clone();
    let no_newline = thread::spawn(move || spew(&a, 64 << 20, 0, false));

    // The good clients all connect, then ask at once.
    let go = Arc::new(Barrier::new(GOOD + 1));
    let good: Vec<_> = (0..GOOD)
        .map(|_| {
            let (a, g) = (addr.clone(), Arc::clone(&go));
            thread::spawn(move || good_client(a, g))
        })
        .collect();
    // Wait until the server has accepted every good client before the flood.
    let t0 = Instant::now();
    while inst.status_kb("Threads") < (GOOD + 4) as u64 && t0.elapsed() < Duration::from_secs(60) {
        thread::sleep(Duration::from_millis(20));
    }
    let flood: Vec<TcpStream> = (0..FLOOD)
        .filter_map(|_| TcpStream::connect(&addr).ok())
        .collect();
    go.wait();
    let mut lat: Vec<Duration> = good
        .into_iter()
        .flat_map(|h| h.join().expect("a good client failed"))
        .collect();
    assert_eq!(lat.len(), GOOD * ROUNDS);
    lat.sort();
    let (p50, p99, max) = (
        percentile(&lat, 0.5),
        percentile(&lat, 0.99),
        lat[lat.len() - 1],
    );
    println!(
        "load: {GOOD} clients x {ROUNDS} queries: p50 {:.3} ms, p99 {:.3} ms, max {:.3} ms",
        p50.as_secs_f64() * 1e3,
        p99.as_secs_f64() * 1e3,
        max.as_secs_f64() * 1e3
    );
    // A deadline, not a performance figure: no good client waits behind a hostile one.
    assert!(max < Duration::from_secs(10), "max latency {max:?}");

    // Flooded connections past the limit are closed by the server: they read EOF.
    let mut closed = 0;
    for mut s in flood {
        s.set_read_timeout(Some(Duration::from_secs(10))).unwrap();
        let mut b = [0u8; 1];
        if matches!(s.read(&mut b), Ok(0) | Err(_)) {
            closed += 1;
        }
    }
    println!("load: {closed} of {FLOOD} flood connections closed by the server");
    assert!(
        closed >= FLOOD - 20,
        "only {closed} flood connections closed"
    );

    // The idle client is dropped after its 3 s: it reads EOF.
    idle.set_read_timeout(Some(Duration::from_secs(20)))
        .unwrap();
    let mut b = [0u8; 16];
    assert!(matches!(idle.read(&mut b), Ok(0) | Err(_)));
    // The deaf client is dropped: its writes fail.
    assert!(
        deaf_writer.join().unwrap(),
        "the never-reading client was not dropped"
    );
    drop(deaf);
    drop(long_line.join().unwrap());
    drop(no_newline.join().unwrap());

    let hwm_kb = inst.status_kb("VmHWM");
    println!("load: server VmRSS before {rss_before_kb} kB, peak {hwm_kb} kB");
    assert!(
        hwm_kb < rss_before_kb + 96 * 1024,
        "the server grew from {rss_before_kb} kB to {hwm_kb} kB"
    );

    // Still serving, and the long line was reported as an input buffer overrun.
    let mut c = Client::connect(&addr);
    assert_eq!(c.query("*IDN?"), idn());
    let errors = c.errors();
    assert!(
        errors.iter().any(|e| e == "-363,\"Input buffer overrun\""),
        "{errors:?}"
    );
}
