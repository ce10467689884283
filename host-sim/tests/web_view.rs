//! The web view (`--web`): loopback by default, the page and its files served, the live
//! records reaching a browser, and browsers that stop reading never slowing the scan.
//! Every peer here is on 127.0.0.1; every wait has a deadline.

use std::collections::BTreeSet;
use std::io::{BufRead, BufReader, Read, Write};
use std::net::{SocketAddr, TcpStream};
use std::process::{Command, Stdio};
use std::sync::mpsc;
use std::time::{Duration, Instant};

use sweepgate::wire::preview::{
    encode_frame, PositionerState, PreviewRecord, StatusRecord, MAX_FRAME,
};
use sweepgate_host::model::scenario::Scenario;
use sweepgate_host::pipeline::replay::{replay_file, Options};
use sweepgate_host::pipeline::simulate::simulate_to;
use sweepgate_host::web::{Hub, Limits, Meta, WebServer};

fn short_lab() -> Scenario {
    let mut s = Scenario::from_toml(include_str!("../scenarios/demo-lab.toml")).unwrap();
    s.positioner.start_deg = -30.0;
    s.positioner.stop_deg = 30.0;
    s
}

fn get(addr: SocketAddr, path: &str) -> (String, Vec<u8>) {
    let mut s = TcpStream::connect(addr).unwrap();
    s.set_read_timeout(Some(Duration::from_secs(10))).unwrap();
    write!(s, "GET {path} HTTP/1.1\r\nHost: x\r\n\r\n").unwrap();
    let mut all = Vec::new();
    s.read_to_end(&mut all).unwrap();
    let split = all.windows(4).position(|w| w == b"\r\n\r\n").unwrap();
    let head = String::from_utf8_lossy(&all[..split]).into_owned();
    (head, all[split + 4..].to_vec())
}

/// A browser that asks for the event stream and then never reads a byte.
fn stalled_browser(addr: SocketAddr) -> TcpStream {
    let mut s = TcpStream::connect(addr).unwrap();
    s.write_all(b"GET /events HTTP/1.1\r\nHost: x\r\n\r\n")
        .unwrap();
    s
}

fn status_frame(seq: u16) -> Vec<u8> {
    let r: PreviewRecord<8> = PreviewRecord::Status(StatusRecord {
        time_us: u64::from(seq) * 1000,
        angle_deg: 1.0,
        speed_deg_s: 2.0,
        state: PositionerState::Moving,
        open_bin: Some(3),
        bins_closed: 3,
        sweeps_pushed: u32::from(seq),
        sweeps_binned: u32::from(seq),
        sweeps_rejected: 0,
        angles_pushed: 10,
        angles_rejected: 0,
    });
    let mut buf = [0u8; MAX_FRAME];
    let n = encode_frame(&r, seq, &mut buf).unwrap();
    buf[..n].to_vec()
}

fn wait_for(what: &str, deadline_s: u64, mut ok: impl FnMut() -> bool) {
    let t0 = Instant::now();
    while !ok() {
        assert!(
            t0.elapsed() < Duration::from_secs(deadline_s),
            "no {what} within {deadline_s} s"
        );
        std::thread::sleep(Duration::from_millis(10));
    }
}

/// Publishes status records until the stalled browser is dropped for a full queue. After
/// each, its server thread gets up to 200 ms to write everything queued into the socket, as
/// it can until the socket is full; from then on it is blocked in a write that would wait an
/// hour, so only the queue bound can drop the browser, and `publish` never waited for it.
fn flood_until_dropped(hub: &Hub) -> u32 {
    let mut n = 0u32;
    while hub.counters().dropped_slow == 0 {
        hub.publish(&status_frame(n as u16));
        n += 1;
        let t0 = Instant::now();
        while t0.elapsed() < Duration::from_millis(200) {
            let c = hub.counters();
            if c.events_written >= c.events_queued || c.dropped_slow > 0 {
                break;
            }
            std::thread::sleep(Duration::from_millis(1));
        }
        assert!(n < 2_000_000, "the stalled browser was never dropped");
    }
    n
}

#[test]
fn a_stalled_browser_is_dropped_for_a_full_queue_and_publish_never_waits() {
    let limits = Limits {
        clients: 4,
        queue_events: 16,
        write_timeout: Duration::from_secs(3600),
    };
    let server = WebServer::start(
        "127.0.0.1:0".parse().unwrap(),
        Hub::new(Meta::default(), limits),
    )
    .unwrap();
    let hub = server.hub().clone();
    let _stalled = stalled_browser(server.addr());
    wait_for("subscription", 20, || hub.clients() == 1);
    let n = flood_until_dropped(&hub);
    let c = hub.counters();
    println!("the stalled browser was dropped after {n} status records: {c:?}");
    assert_eq!(c.dropped_slow, 1);
    assert_eq!(hub.clients(), 0);
    // The socket took far more than the queue before the server thread was stuck in its
    // write; the queue then filled and the browser was dropped.
    assert!(c.events_written as usize > 4 * limits.queue_events, "{c:?}");
    assert!(
        c.events_queued - c.events_written <= limits.queue_events as u64 + 1,
        "{c:?}"
    );
    // The server still answers others.
    let (head, body) = get(server.addr(), "/state");
    assert!(head.starts_with("HTTP/1.1 200"), "{head}");
    let v: serde_json::Value = serde_json::from_slice(&body).unwrap();
    assert_eq!(v["status"]["sweeps_pushed"], n - 1);
}

/// Reads the event stream like a browser's EventSource: reconnects when dropped, and
/// collects the bins seen (from snapshots and bin events) until the `end` event.
fn read_until_end(addr: SocketAddr, deadline: Instant) -> (BTreeSet<u64>, u32) {
    let mut bins = BTreeSet::new();
    let mut connections = 0;
    loop {
        assert!(
            Instant::now() < deadline,
            "no end event before the deadline"
        );
        connections += 1;
        let mut s = TcpStream::connect(addr).unwrap();
        s.set_read_timeout(Some(Duration::from_secs(30))).unwrap();
        s.write_all(b"GET /events HTTP/1.1\r\nHost: x\r\n\r\n")
            .unwrap();
        let mut r = BufReader::new(s);
        let mut event = String::new();
        let mut line = String::new();
        while r.read_line(&mut line).unwrap_or(0) > 0 {
            if let Some(e) = line.strip_prefix("event: ") {
                event = e.trim().to_owned();
            } else if let Some(d) = line.strip_prefix("data: ") {
                let v: serde_json::Value = serde_json::from_str(d).unwrap();
                match event.as_str() {
                    "snapshot" => {
                        for b in v["bins"].as_array().unwrap() {
                            bins.insert(b["bin"].as_u64().unwrap());
                        }
                        if !v["ended"].is_null() {
                            return (bins, connections);
                        }
                    }
                    "bin" => {
                        bins.insert(v["bin"].as_u64().unwrap());
                    }
                    "end" => return (bins, connections),
                    _ => {}
                }
            }
            line.clear();
        }
    }
}

#[test]
fn replay_with_a_stalled_browser_gives_the_same_scan_and_a_reader_sees_every_bin() {
    let dir = tempfile::tempdir().unwrap();
    let (bytes, _) = simulate_to(&short_lab(), None, 3, Vec::new(), false).unwrap();
    let rec = dir.path().join("lab.rec");
    std::fs::write(&rec, &bytes).unwrap();
    let plain = Options {
        out: Some(dir.path().join("plain")),
        ..Options::fast(&rec)
    };
    let (without, _) = replay_file(&plain).unwrap();

    let limits = Limits {
        clients: 4,
        queue_events: 64,
        write_timeout: Duration::from_secs(3600),
    };
    let server = WebServer::start(
        "127.0.0.1:0".parse().unwrap(),
        Hub::new(Meta::default(), limits),
    )
    .unwrap();
    let hub = server.hub().clone();
    // One browser stalled and already dropped, one stalled from the start of the scan.
    let _first = stalled_browser(server.addr());
    wait_for("subscription", 20, || hub.clients() == 1);
    flood_until_dropped(&hub);
    let _second = stalled_browser(server.addr());
    wait_for("subscription", 20, || hub.clients() == 1);
    let addr = server.addr();
    let (tx, rx) = mpsc::channel();
    std::thread::spawn(move || {
        let _ = tx.send(read_until_end(
            addr,
            Instant::now() + Duration::from_secs(120),
        ));
    });
    wait_for("reader", 20, || hub.clients() == 2);

    let web = Options {
        out: Some(dir.path().join("web")),
        web: Some(hub.clone()),
        ..Options::fast(&rec)
    };
    let (with, report_dir) = replay_file(&web).unwrap();
    assert_eq!(with.counters, without.counters);
    assert_eq!(with.report.bins.len(), without.report.bins.len());
    for (a, b) in with.report.bins.iter().zip(&without.report.bins) {
        assert_eq!(a.values, b.values);
    }
    let (bins, connections) = rx.recv_timeout(Duration::from_secs(120)).unwrap();
    println!(
        "bins closed {}, bins the reader saw {} over {connections} connection(s); hub {:?}",
        with.counters.bins_closed,
        bins.len(),
        hub.counters()
    );
    assert_eq!(bins.len(), with.report.bins.len());
    assert_eq!(bins.len() as u32, with.counters.bins_closed);
    // The report's files are served once the scan has ended, and only those.
    let (head, body) = get(addr, "/report/pattern.csv");
    assert!(head.starts_with("HTTP/1.1 200"), "{head}");
    assert_eq!(body, std::fs::read(report_dir.join("pattern.csv")).unwrap());
    let (head, _) = get(addr, "/report/..%2Flab.rec");
    assert!(head.starts_with("HTTP/1.1 404"), "{head}");
    let (head, _) = get(addr, "/report/../lab.rec");
    assert!(head.starts_with("HTTP/1.1 404"), "{head}");
}

#[test]
fn replay_web_binds_loopback_by_default_and_serves_the_page() {
    let dir = tempfile::tempdir().unwrap();
    let (bytes, _) = simulate_to(&short_lab(), None, 3, Vec::new(), false).unwrap();
    let rec = dir.path().join("lab.rec");
    std::fs::write(&rec, &bytes).unwrap();
    let mut child = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .arg("replay")
        .arg(&rec)
        .args([
            "--as-fast-as-possible",
            "--no-preview",
            "--web",
            "0",
            "--out",
        ])
        .arg(dir.path().join("report"))
        .stdin(Stdio::null())
        .stdout(Stdio::null())
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
    let line = rx.recv_timeout(Duration::from_secs(60)).unwrap();
    let url = line
        .strip_prefix("web view on http://")
        .unwrap_or_else(|| panic!("first line: {line}"));
    let addr: SocketAddr = url.trim_end_matches('/').parse().unwrap();
    assert!(
        addr.ip().is_loopback() && addr.ip().to_string() == "127.0.0.1",
        "{addr}"
    );
    // The scan ends, and the command stays up with the page.
    let deadline = Instant::now() + Duration::from_secs(120);
    loop {
        let l = rx.recv_timeout(deadline - Instant::now()).unwrap();
        if l.contains("stays up") {
            break;
        }
    }
    assert!(child.try_wait().unwrap().is_none(), "the command stays up");
    let (head, body) = get(addr, "/");
    assert!(head.starts_with("HTTP/1.1 200"), "{head}");
    let page = String::from_utf8(body).unwrap();
    assert!(page.contains("<canvas id=\"polar\""));
    assert!(
        !page.contains("http://") && !page.contains("https://"),
        "no outside address"
    );
    let (head, js) = get(addr, "/app.js");
    assert!(head.contains("text/javascript"), "{head}");
    assert!(String::from_utf8(js).unwrap().contains("EventSource"));
    let (_, state) = get(addr, "/state");
    let v: serde_json::Value = serde_json::from_slice(&state).unwrap();
    assert!(!v["ended"].is_null());
    assert_eq!(v["meta"]["frequencies_hz"].as_array().unwrap().len(), 3);
    let mut post = TcpStream::connect(addr).unwrap();
    post.write_all(b"POST /state HTTP/1.1\r\nContent-Length: 0\r\n\r\n")
        .unwrap();
    let mut answer = String::new();
    post.read_to_string(&mut answer).unwrap();
    assert!(answer.starts_with("HTTP/1.1 405"), "{answer}");
    // Ctrl-C (SIGINT) ends the command normally.
    let pid = child.id().to_string();
    assert!(Command::new("kill")
        .args(["-INT", &pid])
        .status()
        .unwrap()
        .success());
    let t0 = Instant::now();
    let status = loop {
        if let Some(st) = child.try_wait().unwrap() {
            break st;
        }
        assert!(
            t0.elapsed() < Duration::from_secs(20),
            "still up after SIGINT"
        );
        std::thread::sleep(Duration::from_millis(20));
    };
    assert!(status.success(), "{status}");
}

#[test]
fn view_web_serves_a_recorded_preview_stream_with_frequencies_from_the_grid() {
    use std::sync::atomic::AtomicBool;
    use sweepgate_host::formats::recording::recover;
    use sweepgate_host::pipeline::replay::replay_records;
    let (bytes, _) = simulate_to(&short_lab(), None, 3, Vec::new(), false).unwrap();
    let rec = recover(&bytes);
    let mut stream = Vec::new();
    let o = replay_records(
        &rec,
        &Options::fast(std::path::Path::new("x.rec")),
        &mut stream,
        None,
        &AtomicBool::new(false),
    )
    .unwrap();
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("preview.bin");
    std::fs::write(&file, &stream).unwrap();
    let mut child = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .args([
            "view",
            "--no-preview",
            "--web",
            "0",
            "--grid-hz",
            "8e9:12e9:201",
            "--from",
        ])
        .arg(&file)
        .stdin(Stdio::null())
        .stdout(Stdio::null())
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
    let line = rx.recv_timeout(Duration::from_secs(60)).unwrap();
    let addr: SocketAddr = line
        .strip_prefix("web view on http://")
        .unwrap_or_else(|| panic!("first line: {line}"))
        .trim_end_matches('/')
        .parse()
        .unwrap();
    assert!(addr.ip().is_loopback());
    let deadline = Instant::now() + Duration::from_secs(60);
    let v = loop {
        let (_, body) = get(addr, "/state");
        let v: serde_json::Value = serde_json::from_slice(&body).unwrap();
        if !v["ended"].is_null() {
            break v;
        }
        assert!(Instant::now() < deadline, "the stream never ended: {v}");
        std::thread::sleep(Duration::from_millis(50));
    };
    child.kill().unwrap();
    child.wait().unwrap();
    assert_eq!(v["bins"].as_array().unwrap().len(), o.report.bins.len());
    // The grid names the records' grid points: 8 GHz + 20 MHz per point.
    assert_eq!(v["meta"]["grid_start_hz"], 8e9);
    assert_eq!(v["meta"]["grid_step_hz"], 20e6);
    // The engine's impulse-response records came through the stream too.
    assert!(!v["impulses"].as_array().unwrap().is_empty());
}
