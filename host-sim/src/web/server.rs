//! The web view's HTTP server: a thread per connection on `std::net`, requests parsed by
//! `httparse`, the page's files built into the binary, and the live records as server-sent
//! events (`GET /events`, one `text/event-stream` response that stays open).
//!
//! | path | answer |
//! |---|---|
//! | `/` | the page (`page/index.html`) |
//! | `/app.js`, `/style.css` | its script and style |
//! | `/state` | the whole state as JSON (what `/events` sends first) |
//! | `/events` | `snapshot`, then `bin`, `status`, `note` and `end` events as they happen |
//! | `/report/NAME` | a file of the report folder, once the scan has ended and the report names it |
//!
//! Only `GET` is answered: the page is read-only. Connections are bounded (the event
//! streams by [`crate::web::Limits::clients`], all connections by twice that plus 8), every read and
//! write has a timeout, and a browser whose queue fills is dropped by the [`Hub`].

use std::io::{Read, Write};
use std::net::{IpAddr, Ipv4Addr, SocketAddr, TcpListener, TcpStream};
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::mpsc::RecvTimeoutError;
use std::sync::Arc;
use std::time::Duration;

use anyhow::Context;

use crate::web::hub::Hub;

const INDEX_HTML: &str = include_str!("page/index.html");
const APP_JS: &str = include_str!("page/app.js");
const STYLE_CSS: &str = include_str!("page/style.css");

/// Longest request head read, bytes.
pub const MAX_REQUEST_BYTES: usize = 8 * 1024;
/// Largest report file served, bytes.
pub const MAX_REPORT_FILE_BYTES: u64 = 64 << 20;
/// Time a browser has to send its request.
const REQUEST_TIMEOUT: Duration = Duration::from_secs(5);
/// An idle event stream gets a comment line this often, so a browser gone away is noticed.
const KEEP_ALIVE: Duration = Duration::from_secs(10);

/// The address `--web [ADDR:]PORT` names: a bare port is on 127.0.0.1.
pub fn parse_addr(spec: &str) -> anyhow::Result<SocketAddr> {
    if let Ok(port) = spec.parse::<u16>() {
        return Ok(SocketAddr::new(IpAddr::V4(Ipv4Addr::LOCALHOST), port));
    }
    spec.parse::<SocketAddr>().with_context(|| {
        format!(
            "--web {}: expected PORT or ADDR:PORT (e.g. 8080, 127.0.0.1:8080, [::1]:8080)",
            crate::quote::clipped(spec)
        )
    })
}

/// The warning to print when the page is reachable from other machines.
pub fn exposure_warning(addr: SocketAddr) -> Option<String> {
    (!addr.ip().is_loopback()).then(|| {
        format!(
            "the web view on {addr} is reachable from other machines on that network \
             (read-only: it shows the scan and the report, and takes no commands)"
        )
    })
}

/// A running web view.
#[derive(Debug, Clone)]
pub struct WebServer {
    hub: Hub,
    addr: SocketAddr,
}

impl WebServer {
    /// Binds `addr` and serves `hub` on a thread of its own until the process ends.
    pub fn start(addr: SocketAddr, hub: Hub) -> anyhow::Result<Self> {
        let l =
            TcpListener::bind(addr).with_context(|| format!("web view: listening on {addr}"))?;
        let addr = l.local_addr().context("web view: the bound address")?;
        let h = hub.clone();
        std::thread::Builder::new()
            .name("web".into())
            .spawn(move || accept_loop(&l, &h))
            .context("web view: starting the server thread")?;
        Ok(Self { hub, addr })
    }

    /// The bound address (the port chosen when 0 was asked for).
    pub fn addr(&self) -> SocketAddr {
        self.addr
    }

    /// The page's address.
    pub fn url(&self) -> String {
        format!("http://{}/", self.addr)
    }

    /// The hub it serves.
    pub fn hub(&self) -> &Hub {
        &self.hub
    }
}

fn accept_loop(l: &TcpListener, hub: &Hub) {
    let open = Arc::new(AtomicUsize::new(0));
    let most = hub.limits().clients * 2 + 8;
    for s in l.incoming() {
        let Ok(s) = s else {
            // No descriptor left or a reset connection: go on after a pause.
            std::thread::sleep(Duration::from_millis(50));
            continue;
        };
        if open.load(Ordering::Relaxed) >= most {
            drop(s);
            continue;
        }
        open.fetch_add(1, Ordering::Relaxed);
        let (hub, open2) = (hub.clone(), Arc::clone(&open));
        let started = std::thread::Builder::new()
            .name("web-client".into())
            .spawn(move || {
                handle(s, &hub);
                open2.fetch_sub(1, Ordering::Relaxed);
            });
        if started.is_err() {
            open.fetch_sub(1, Ordering::Relaxed);
        }
    }
}

/// Reads a request head: up to the blank line, [`MAX_REQUEST_BYTES`] at most.
fn read_head(s: &mut TcpStream) -> Option<Vec<u8>> {
    let mut buf = Vec::with_capacity(1024);
    let mut chunk = [0u8; 1024];
    while !buf.windows(4).any(|w| w == b"\r\n\r\n") {
        if buf.len() >= MAX_REQUEST_BYTES {
            return None;
        }
        let n = s.read(&mut chunk).ok()?;
        if n == 0 {
            return None;
        }
        buf.extend_from_slice(&chunk[..n]);
    }
    Some(buf)
}

fn handle(mut s: TcpStream, hub: &Hub) {
    let _ = s.set_read_timeout(Some(REQUEST_TIMEOUT));
    let _ = s.set_write_timeout(Some(hub.limits().write_timeout));
    let _ = s.set_nodelay(true);
    let Some(head) = read_head(&mut s) else {
        return;
    };
    let mut headers = [httparse::EMPTY_HEADER; 32];
    let mut req = httparse::Request::new(&mut headers);
    let (method, path) = match req.parse(&head) {
        Ok(httparse::Status::Complete(_)) => (
            req.method.unwrap_or("").to_owned(),
            req.path.unwrap_or("/").to_owned(),
        ),
        _ => {
            let _ = respond(&mut s, "400 Bad Request", "text/plain", b"bad request\n");
            return;
        }
    };
    if method != "GET" {
        let _ = respond(
            &mut s,
            "405 Method Not Allowed",
            "text/plain",
            b"read-only\n",
        );
        return;
    }
    let path = path.split('?').next().unwrap_or("/");
    let _ = route(&mut s, hub, path);
    let _ = s.shutdown(std::net::Shutdown::Both);
}

fn route(s: &mut TcpStream, hub: &Hub, path: &str) -> std::io::Result<()> {
    match path {
        "/" | "/index.html" => respond(
            s,
            "200 OK",
            "text/html; charset=utf-8",
            INDEX_HTML.as_bytes(),
        ),
        "/app.js" => respond(
            s,
            "200 OK",
            "text/javascript; charset=utf-8",
            APP_JS.as_bytes(),
        ),
        "/style.css" => respond(s, "200 OK", "text/css; charset=utf-8", STYLE_CSS.as_bytes()),
        "/state" => {
            let body = hub.snapshot().to_string();
            respond(s, "200 OK", "application/json", body.as_bytes())
        }
        "/events" => events(s, hub),
        _ => match path.strip_prefix("/report/") {
            Some(name) => report_file(s, hub, name),
            None => respond(s, "404 Not Found", "text/plain", b"not found\n"),
        },
    }
}

fn respond(s: &mut TcpStream, status: &str, kind: &str, body: &[u8]) -> std::io::Result<()> {
    let head = format!(
        "HTTP/1.1 {status}\r\nContent-Type: {kind}\r\nContent-Length: {}\r\n\
         Cache-Control: no-store\r\nX-Content-Type-Options: nosniff\r\nConnection: close\r\n\r\n",
        body.len()
    );
    s.write_all(head.as_bytes())?;
    s.write_all(body)?;
    s.flush()
}

fn report_file(s: &mut TcpStream, hub: &Hub, name: &str) -> std::io::Result<()> {
    let kind = match name.rsplit('.').next() {
        Some("svg") => "image/svg+xml",
        Some("csv") => "text/csv; charset=utf-8",
        Some("json") => "application/json",
        _ => "application/octet-stream",
    };
    let bytes = hub.report_file(name).and_then(|p| {
        let len = std::fs::metadata(&p).ok()?.len();
        (len <= MAX_REPORT_FILE_BYTES)
            .then(|| std::fs::read(&p).ok())
            .flatten()
    });
    match bytes {
        Some(b) => respond(s, "200 OK", kind, &b),
        None => respond(s, "404 Not Found", "text/plain", b"no such report file\n"),
    }
}

/// The event stream: the snapshot, then the hub's events until the hub drops this browser,
/// a write fails or times out, or the process ends.
fn events(s: &mut TcpStream, hub: &Hub) -> std::io::Result<()> {
    let Some(sub) = hub.subscribe() else {
        return respond(
            s,
            "503 Service Unavailable",
            "text/plain",
            b"too many browsers connected\n",
        );
    };
    s.write_all(
        b"HTTP/1.1 200 OK\r\nContent-Type: text/event-stream\r\nCache-Control: no-store\r\n\
          Connection: close\r\n\r\nretry: 2000\n\n",
    )?;
    s.write_all(sub.first.as_bytes())?;
    loop {
        match sub.rx.recv_timeout(KEEP_ALIVE) {
            Ok(ev) => {
                s.write_all(ev.as_bytes())?;
                hub.wrote();
            }
            Err(RecvTimeoutError::Timeout) => s.write_all(b": still here\n\n")?,
            // Dropped by the hub (queue full): the browser reconnects and starts afresh.
            Err(RecvTimeoutError::Disconnected) => return Ok(()),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_bare_port_is_loopback_and_an_address_is_taken_as_given() {
        assert_eq!(
            parse_addr("8080").unwrap(),
            "127.0.0.1:8080".parse::<SocketAddr>().unwrap()
        );
        assert_eq!(
            parse_addr("[::1]:9000").unwrap(),
            "[::1]:9000".parse::<SocketAddr>().unwrap()
        );
        assert!(parse_addr("localhost:abc").is_err());
        assert!(exposure_warning(parse_addr("8080").unwrap()).is_none());
        assert!(exposure_warning(parse_addr("[::1]:1").unwrap()).is_none());
        assert!(exposure_warning(parse_addr("0.0.0.0:8080").unwrap()).is_some());
    }
}
