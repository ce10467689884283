//! Shared by the instrument and acquire tests: start `sweepgate instrument` on a free
//! port, and a small SCPI client.
#![allow(dead_code)]

use std::io::{BufRead, BufReader, Read, Write};
use std::net::TcpStream;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};

/// A running `sweepgate instrument --port 0`, stopped on drop.
pub struct Running {
    child: Child,
    /// Its address, 127.0.0.1:<port>.
    pub addr: String,
    /// Its `--dump` directory.
    pub dump: PathBuf,
}

impl Drop for Running {
    fn drop(&mut self) {
        self.child.kill().ok();
        self.child.wait().ok();
    }
}

impl Running {
    /// The server's process id.
    pub fn pid(&self) -> u32 {
        self.child.id()
    }

    /// A figure of the server's `/proc/<pid>/status` in kB (`VmRSS`, `VmHWM`, `Threads`).
    pub fn status_kb(&self, field: &str) -> u64 {
        let text = std::fs::read_to_string(format!("/proc/{}/status", self.pid())).unwrap();
        text.lines()
            .find_map(|l| l.strip_prefix(field)?.strip_prefix(':'))
            .and_then(|v| v.split_whitespace().next()?.parse().ok())
            .unwrap_or_else(|| panic!("no {field} in /proc status"))
    }
}

/// A fresh, empty temporary directory for one test.
pub fn temp_dir(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("sweepgate-{name}-{}", std::process::id()));
    std::fs::remove_dir_all(&d).ok();
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// Starts the instrument with extra arguments; it dumps sweeps into a temp directory.
pub fn start(name: &str, extra: &[&str]) -> Running {
    let dump = temp_dir(&format!("{name}-dump"));
    let mut child = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
        .arg("instrument")
        .args(["--port", "0", "--dump"])
        .arg(&dump)
        .args(extra)
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .expect("start sweepgate instrument");
    let mut line = String::new();
    BufReader::new(child.stdout.take().unwrap())
        .read_line(&mut line)
        .unwrap();
    let addr = line
        .trim()
        .strip_prefix("listening on ")
        .unwrap_or_else(|| panic!("unexpected first line {line:?}"))
        .to_owned();
    Running { child, addr, dump }
}

/// The sweep the instrument dumped as its n-th: (scan index, re, im).
pub fn dumped(dir: &Path, n: usize) -> (u32, Vec<f32>, Vec<f32>) {
    let text = std::fs::read_to_string(dir.join(format!("sweep-{n}.json"))).unwrap();
    let v: serde_json::Value = serde_json::from_str(&text).unwrap();
    let f = |k: &str| -> Vec<f32> {
        v[k].as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_f64().unwrap() as f32)
            .collect()
    };
    (v["index"].as_u64().unwrap() as u32, f("re"), f("im"))
}

/// A blocking SCPI client.
pub struct Client {
    r: BufReader<TcpStream>,
    w: TcpStream,
}

impl Client {
    pub fn connect(addr: &str) -> Self {
        let s = TcpStream::connect(addr).unwrap();
        s.set_read_timeout(Some(std::time::Duration::from_secs(20)))
            .unwrap();
        Self {
            w: s.try_clone().unwrap(),
            r: BufReader::new(s),
        }
    }

    pub fn send(&mut self, cmd: &str) {
        self.w.write_all(format!("{cmd}\n").as_bytes()).unwrap();
    }

    pub fn line(&mut self) -> String {
        let mut s = String::new();
        self.r.read_line(&mut s).unwrap();
        assert!(s.ends_with('\n'), "answer without newline: {s:?}");
        s.trim_end().to_owned()
    }

    pub fn query(&mut self, q: &str) -> String {
        self.send(q);
        self.line()
    }

    /// Reads a definite-length block answer and its newline; returns the whole bytes.
    pub fn block(&mut self) -> Vec<u8> {
        let mut head = [0u8; 2];
        self.r.read_exact(&mut head).unwrap();
        assert_eq!(head[0], b'#');
        let nd = (head[1] - b'0') as usize;
        let mut digits = vec![0u8; nd];
        self.r.read_exact(&mut digits).unwrap();
        let len: usize = std::str::from_utf8(&digits).unwrap().parse().unwrap();
        let mut data = vec![0u8; len + 1];
        self.r.read_exact(&mut data).unwrap();
        assert_eq!(data.last(), Some(&b'\n'), "block not ended by newline");
        let mut all = head.to_vec();
        all.extend_from_slice(&digits);
        all.extend_from_slice(&data);
        all
    }

    /// Every error queue entry, oldest first, until `0,"No error"`.
    pub fn errors(&mut self) -> Vec<String> {
        let mut v = Vec::new();
        loop {
            let e = self.query("SYSTem:ERRor?");
            if e == "0,\"No error\"" {
                return v;
            }
            v.push(e);
            assert!(v.len() < 50, "error queue does not end: {v:?}");
        }
    }
}
