//! The simulated positioner of `sweepgate positioner`: a turntable with inertia that
//! speaks the turntable line protocol of [`crate::link::drive`] on a TCP port.
//!
//! ```text
//! sweepgate positioner [--port 0] [--bind 127.0.0.1] [--min-deg -370] [--max-deg 370]
//!                      [--max-speed-deg-s 30] [--max-accel-deg-s2 60] [--ringing-deg 0.1]
//!                      [--settle-s 0.4] [--fault-after-s S] [--drift-ppm P]
//!                      [--clock-offset-s S]
//! ```
//!
//! Once listening it prints `listening on 127.0.0.1:<port>` on standard output; with
//! `--serial` it serves a pseudo-terminal instead and prints `serial on /dev/pts/<n>`, the
//! device a client opens as its serial line. Clients
//! share one turntable. Motion: speed changes at most by the acceleration set (`ACCEL`,
//! default and most `--max-accel-deg-s2`), never passes the speed asked nor
//! `--max-speed-deg-s`, and a move brakes so as to arrive at its target; on arrival the
//! table rings, `--ringing-deg` decaying by e⁻⁴ over `--settle-s` at 3 Hz (the inertia a
//! client must wait out). Reaching `--min-deg` or `--max-deg` is a fault (an emergency
//! stop), as is `--fault-after-s` seconds after start (the fault mode, for tests). Its
//! clock runs `--drift-ppm` fast from `--clock-offset-s`, so a client's clock fit can be
//! tested. The model advances in 1 ms steps up to the moment of each request.

use std::io::{BufReader, Write};
use std::net::{TcpListener, TcpStream};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

use anyhow::Context;

use crate::link::drive::{DriveLimits, Motion, MAX_REPLY_BYTES};
use crate::link::lines::{read_bounded_line, LineRead};

/// Model step, s.
const STEP_S: f64 = 1e-3;
/// Ringing frequency after a move, Hz.
const RINGING_HZ: f64 = 3.0;

/// The turntable's settings.
#[derive(Debug, Clone, Copy)]
pub struct TableOptions {
    /// Angle range, speed and acceleration limits.
    pub limits: DriveLimits,
    /// Ringing amplitude after a move, degrees.
    pub ringing_deg: f64,
    /// Time for the ringing to decay by e⁻⁴, s.
    pub settle_s: f64,
    /// Fault after this many seconds (test mode).
    pub fault_after_s: Option<f64>,
    /// Clock rate error, ppm (positive: fast).
    pub drift_ppm: f64,
    /// Clock reading at start, s.
    pub clock_offset_s: f64,
}

impl Default for TableOptions {
    fn default() -> Self {
        Self {
            limits: DriveLimits {
                min_deg: -370.0,
                max_deg: 370.0,
                max_speed_deg_s: 30.0,
                max_accel_deg_s2: 60.0,
            },
            ringing_deg: 0.1,
            settle_s: 0.4,
            fault_after_s: None,
            drift_ppm: 0.0,
            clock_offset_s: 0.0,
        }
    }
}

#[derive(Debug, Clone, Copy, PartialEq)]
enum Mode {
    Hold,
    Goto { target: f64, speed: f64 },
    Turn { speed: f64 },
    Brake,
    Fault,
}

/// The turntable model.
#[derive(Debug, Clone)]
pub struct Turntable {
    o: TableOptions,
    accel: f64,
    /// Path angle (without ringing) and speed.
    angle: f64,
    speed: f64,
    mode: Mode,
    /// Model time, s, and the last arrival (for the ringing).
    t_s: f64,
    arrived_s: Option<f64>,
    fault: Option<&'static str>,
}

impl Turntable {
    /// A turntable at rest at 0°.
    pub fn new(o: TableOptions) -> Self {
        Self {
            accel: o.limits.max_accel_deg_s2,
            o,
            angle: 0.0,
            speed: 0.0,
            mode: Mode::Hold,
            t_s: 0.0,
            arrived_s: None,
            fault: None,
        }
    }

    /// Advances the model to `t_s` (seconds since start).
    pub fn advance(&mut self, t_s: f64) {
        while self.t_s + STEP_S <= t_s {
            self.t_s += STEP_S;
            self.step();
        }
    }

    fn step(&mut self) {
        if self.o.fault_after_s.is_some_and(|f| self.t_s >= f) && self.mode != Mode::Fault {
            self.trip("fault mode: the drive reported a fault");
            return;
        }
        let dv = self.accel * STEP_S;
        let want = match self.mode {
            Mode::Hold | Mode::Fault => return,
            Mode::Brake => 0.0,
            Mode::Turn { speed } => speed,
            Mode::Goto { target, speed } => {
                let d = target - self.angle;
                if d.abs() <= (self.speed.abs() * STEP_S).max(1e-9) && self.speed.abs() <= dv {
                    self.angle = target;
                    self.speed = 0.0;
                    self.mode = Mode::Hold;
                    self.arrived_s = Some(self.t_s);
                    return;
                }
                d.signum() * speed.min((2.0 * self.accel * d.abs()).sqrt())
            }
        };
        self.speed += (want - self.speed).clamp(-dv, dv);
        self.angle += self.speed * STEP_S;
        if self.mode == Mode::Brake && self.speed == 0.0 {
            self.mode = Mode::Hold;
        }
        if self.angle <= self.o.limits.min_deg || self.angle >= self.o.limits.max_deg {
            self.trip("angle limit reached");
        }
    }

    fn trip(&mut self, why: &'static str) {
        self.mode = Mode::Fault;
        self.speed = 0.0;
        self.fault = Some(why);
    }

    /// The angle now, ringing included, degrees.
    pub fn angle_deg(&self) -> f64 {
        let ring = self.arrived_s.map_or(0.0, |a| {
            let dt = self.t_s - a;
            let tau = self.o.settle_s / 4.0;
            self.o.ringing_deg
                * (-dt / tau).exp()
                * (2.0 * std::f64::consts::PI * RINGING_HZ * dt).cos()
        });
        self.angle + ring
    }

    /// What it is doing.
    pub fn motion(&self) -> Motion {
        match self.mode {
            Mode::Fault => Motion::Fault,
            Mode::Hold => Motion::Holding,
            _ => Motion::Moving,
        }
    }

    /// The positioner's clock at model time `t_s`, µs.
    pub fn clock_us(&self, t_s: f64) -> u64 {
        let t = self.o.clock_offset_s + t_s * (1.0 + self.o.drift_ppm * 1e-6);
        (t.max(0.0) * 1e6).round() as u64
    }

    fn check_speed(&self, v: f64) -> Result<(), String> {
        if !v.is_finite() || v.abs() > self.o.limits.max_speed_deg_s {
            return Err(format!(
                "speed {v} beyond {}",
                self.o.limits.max_speed_deg_s
            ));
        }
        Ok(())
    }

    /// Handles one request line at model time `t_s`; returns the reply line (no newline).
    pub fn handle(&mut self, line: &str, t_s: f64) -> String {
        self.advance(t_s);
        match self.request(line.trim_end_matches('\r').trim(), t_s) {
            Ok(s) if s.is_empty() => "OK".into(),
            Ok(s) => format!("OK {s}"),
            Err(e) => format!("ERR {e}"),
        }
    }

    fn request(&mut self, line: &str, t_s: f64) -> Result<String, String> {
        let mut w = line.split_whitespace();
        let verb = w.next().unwrap_or("");
        let args: Vec<f64> = w
            .map(|x| {
                x.parse::<f64>()
                    .map_err(|_| format!("{x:?} is not a number"))
            })
            .collect::<Result<_, _>>()?;
        let moving = matches!(verb, "GOTO" | "TURN");
        if moving && self.mode == Mode::Fault {
            return Err(format!(
                "in fault ({}); CLEAR first",
                self.fault.unwrap_or("")
            ));
        }
        let l = self.o.limits;
        match (verb, args.as_slice()) {
            ("HELLO", []) => Ok("sweepgate simulated turntable".into()),
            ("LIMITS", []) => Ok(format!(
                "{} {} {} {}",
                l.min_deg, l.max_deg, l.max_speed_deg_s, l.max_accel_deg_s2
            )),
            ("ACCEL", [a]) if *a > 0.0 && *a <= l.max_accel_deg_s2 => {
                self.accel = *a;
                Ok(String::new())
            }
            ("ACCEL", [a]) => Err(format!(
                "acceleration {a} not in (0, {}]",
                l.max_accel_deg_s2
            )),
            ("GOTO", [target, speed]) => self.goto(*target, *speed),
            ("TURN", [speed]) => {
                self.check_speed(*speed)?;
                self.arrived_s = None;
                self.mode = Mode::Turn { speed: *speed };
                Ok(String::new())
            }
            ("STOP", []) => {
                if self.mode != Mode::Fault && self.mode != Mode::Hold {
                    self.mode = Mode::Brake;
                }
                Ok(String::new())
            }
            ("CLEAR", []) => {
                if self.mode == Mode::Fault {
                    self.mode = Mode::Hold;
                    self.fault = None;
                    self.o.fault_after_s = None;
                }
                Ok(String::new())
            }
            ("WHERE", []) => Ok(self.where_reply(t_s)),
            _ => Err(format!("unknown request {line:?}")),
        }
    }
}

impl Turntable {
    fn goto(&mut self, target: f64, speed: f64) -> Result<String, String> {
        let l = self.o.limits;
        self.check_speed(speed)?;
        if !(target.is_finite() && target > l.min_deg && target < l.max_deg) {
            return Err(format!(
                "angle {target} outside {} to {}",
                l.min_deg, l.max_deg
            ));
        }
        if speed <= 0.0 {
            return Err("speed must be above 0".into());
        }
        self.arrived_s = None;
        self.mode = Mode::Goto { target, speed };
        Ok(String::new())
    }

    fn where_reply(&self, t_s: f64) -> String {
        let state = match self.motion() {
            Motion::Moving => "MOVING",
            Motion::Holding => "HOLDING",
            Motion::Fault => "FAULT",
        };
        format!(
            "{} {:.6} {:.6} {state}",
            self.clock_us(t_s),
            self.angle_deg(),
            self.speed
        )
    }
}

impl TableOptions {
    /// Whether every setting is a finite number in its range.
    pub fn valid(&self) -> bool {
        let l = self.limits;
        let pos = |v: f64| v.is_finite() && v > 0.0;
        let range = l.min_deg.is_finite() && l.max_deg.is_finite() && l.min_deg < l.max_deg;
        let rates = pos(l.max_speed_deg_s) && pos(l.max_accel_deg_s2) && pos(self.settle_s);
        let ring = self.ringing_deg.is_finite() && self.ringing_deg >= 0.0;
        let clock = self.drift_ppm.is_finite()
            && self.drift_ppm.abs() <= 1e4
            && self.clock_offset_s.is_finite()
            && self.clock_offset_s >= 0.0;
        let fault = self.fault_after_s.is_none_or(|f| f.is_finite() && f >= 0.0);
        range && rates && ring && clock && fault
    }
}

/// Serves one client until it closes or sends a line over [`MAX_REPLY_BYTES`].
fn serve_client(s: TcpStream, table: &Mutex<Turntable>, start: Instant) -> std::io::Result<()> {
    s.set_read_timeout(Some(Duration::from_secs(3600)))?;
    let w = s.try_clone()?;
    serve_stream(s, w, table, start)
}

/// Serves requests from `r`, replies to `w`, until `r` ends.
fn serve_stream(
    r: impl std::io::Read,
    mut w: impl Write,
    table: &Mutex<Turntable>,
    start: Instant,
) -> std::io::Result<()> {
    let mut r = BufReader::new(r);
    let mut line = Vec::new();
    loop {
        match read_bounded_line(&mut r, &mut line, MAX_REPLY_BYTES)? {
            LineRead::Closed => return Ok(()),
            LineRead::TooLong => w.write_all(b"ERR line too long\n")?,
            LineRead::Line => {
                let text = String::from_utf8_lossy(&line).into_owned();
                let reply = match table.lock() {
                    Ok(mut t) => t.handle(&text, start.elapsed().as_secs_f64()),
                    Err(_) => return Ok(()),
                };
                w.write_all(format!("{reply}\n").as_bytes())?;
            }
        }
    }
}

/// Serves the turntable on a pseudo-terminal: prints `serial on <path>` (the device side,
/// for a client to open as its serial line) and serves until killed.
#[cfg(unix)]
pub fn run_pty(o: TableOptions) -> anyhow::Result<()> {
    if !o.valid() {
        anyhow::bail!("positioner options out of range: {o:?}");
    }
    let p = crate::link::serial::pty()?;
    println!("serial on {}", p.path.display());
    std::io::stdout().flush()?;
    let table = Mutex::new(Turntable::new(o));
    let w = p.device.try_clone()?;
    serve_stream(&p.device, w, &table, Instant::now())?;
    Ok(())
}

/// Listens on `bind:port`, prints `listening on <address>`, and serves clients (one thread
/// each) until killed.
pub fn run_server(bind: &str, port: u16, o: TableOptions) -> anyhow::Result<()> {
    if !o.valid() {
        anyhow::bail!("positioner options out of range: {o:?}");
    }
    let listener =
        TcpListener::bind((bind, port)).with_context(|| format!("listening on {bind}:{port}"))?;
    println!("listening on {}", listener.local_addr()?);
    std::io::stdout().flush()?;
    let table = Arc::new(Mutex::new(Turntable::new(o)));
    let start = Instant::now();
    for s in listener.incoming() {
        let Ok(s) = s else { continue };
        let t = Arc::clone(&table);
        std::thread::spawn(move || serve_client(s, &t, start).ok());
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A move of 90° at 30°/s with 60°/s²: 0.5 s to speed (7.5°), 2.5 s at speed, 0.5 s
    /// braking (trapezoid, closed form): 3.5 s in all; then the ringing decays within the
    /// settling time.
    #[test]
    fn a_move_follows_the_trapezoid_then_rings_down() {
        let mut t = Turntable::new(TableOptions::default());
        assert_eq!(t.handle("GOTO 90 30", 0.0), "OK");
        t.advance(0.5);
        assert!((t.angle_deg() - 7.5).abs() < 0.1, "{}", t.angle_deg());
        t.advance(2.0);
        assert!((t.angle_deg() - 52.5).abs() < 0.2, "{}", t.angle_deg());
        t.advance(3.45);
        assert_eq!(t.motion(), Motion::Moving);
        t.advance(3.6);
        assert_eq!(t.motion(), Motion::Holding);
        let ring = (t.angle_deg() - 90.0).abs();
        assert!(ring > 0.01 && ring <= 0.1, "{ring}");
        t.advance(3.6 + 0.4 + 0.1);
        assert!(
            (t.angle_deg() - 90.0).abs() < 0.1 * (-4f64).exp(),
            "{}",
            t.angle_deg()
        );
    }

    #[test]
    fn limits_faults_and_the_clock() {
        let o = TableOptions {
            fault_after_s: Some(1.0),
            drift_ppm: 100.0,
            clock_offset_s: 5.0,
            ..TableOptions::default()
        };
        let mut t = Turntable::new(o);
        assert!(t.handle("GOTO 400 10", 0.0).starts_with("ERR"));
        assert!(t.handle("TURN 31", 0.0).starts_with("ERR"));
        assert!(t.handle("FLY", 0.0).starts_with("ERR"));
        assert_eq!(t.handle("TURN 20", 0.0), "OK");
        let w = t.handle("WHERE", 0.9);
        assert!(w.ends_with("MOVING"), "{w}");
        let w = t.handle("WHERE", 1.5);
        assert!(w.ends_with("0.000000 FAULT"), "{w}");
        assert!(w.starts_with("OK 6500150 "), "{w}");
        assert!(t.handle("GOTO 0 10", 1.5).starts_with("ERR in fault"));
        assert_eq!(t.handle("CLEAR", 1.6), "OK");
        assert_eq!(t.handle("GOTO 0 10", 1.6), "OK");
    }
}
