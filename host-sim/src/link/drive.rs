//! Driving a positioner: the [`Drive`] trait every controller fits behind, and
//! [`LineDrive`], our own plain line protocol over TCP (the simulated positioner of
//! `sweepgate positioner`, [`crate::link::turntable`], speaks it). A real controller's
//! protocol fits in one file: implement [`Drive`] for it (connect, and the six calls
//! below), and `acquire` drives it the same way.
//!
//! # The turntable line protocol
//!
//! ASCII lines ending in `\n` (a `\r` before it is ignored), one request, one reply
//! line. Numbers are decimal; angles in degrees, speeds in degrees per second,
//! accelerations in degrees per second squared, times in microseconds on the
//! positioner's own clock.
//!
//! | Request | Reply | Meaning |
//! |---|---|---|
//! | `HELLO` | `OK <name…>` | who is there |
//! | `LIMITS` | `OK <min_deg> <max_deg> <max_speed> <max_accel>` | what the positioner allows |
//! | `ACCEL <a>` | `OK` | acceleration and braking from now on |
//! | `GOTO <deg> <speed>` | `OK` | move to an angle at most at this speed, then hold it |
//! | `TURN <speed>` | `OK` | turn without end at a signed speed |
//! | `STOP` | `OK` | brake to a stop and hold |
//! | `WHERE` | `OK <t_us> <deg> <speed> <state>` | now: time, angle, speed, `MOVING`, `HOLDING` or `FAULT` |
//! | `CLEAR` | `OK` | clear a fault (the positioner stays stopped) |
//!
//! Anything refused is answered `ERR <reason>` (a value out of the positioner's limits, a
//! move while in fault, an unknown request). A positioner in `FAULT` has stopped and
//! refuses moves until `CLEAR`. Replies are at most [`MAX_REPLY_BYTES`]; each has a
//! deadline.

use std::io::{BufReader, Read, Write};
use std::net::{TcpStream, ToSocketAddrs};
use std::time::Duration;

use anyhow::{bail, Context};

use crate::link::lines::{read_bounded_line, LineRead};

/// Longest reply line, bytes.
pub const MAX_REPLY_BYTES: usize = 256;

/// What a positioner is doing.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Motion {
    /// Moving (to a target, turning, or braking).
    Moving,
    /// Holding an angle.
    Holding,
    /// Stopped by a fault; refuses moves until cleared.
    Fault,
}

/// One status reading.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DriveStatus {
    /// On the positioner's clock, µs.
    pub t_us: u64,
    /// Angle, degrees.
    pub angle_deg: f64,
    /// Speed, degrees per second (signed).
    pub speed_deg_s: f64,
    /// What it is doing.
    pub motion: Motion,
}

/// What a positioner allows.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DriveLimits {
    /// Lowest angle, degrees.
    pub min_deg: f64,
    /// Highest angle, degrees.
    pub max_deg: f64,
    /// Highest speed, degrees per second.
    pub max_speed_deg_s: f64,
    /// Highest acceleration, degrees per second squared.
    pub max_accel_deg_s2: f64,
}

/// A positioner `acquire` can drive.
pub trait Drive {
    /// Who is there.
    fn identify(&mut self) -> anyhow::Result<String>;
    /// What the positioner allows.
    fn limits(&mut self) -> anyhow::Result<DriveLimits>;
    /// Sets acceleration and braking.
    fn set_accel(&mut self, accel_deg_s2: f64) -> anyhow::Result<()>;
    /// Starts a move to `angle_deg` at most at `speed_deg_s`.
    fn move_to(&mut self, angle_deg: f64, speed_deg_s: f64) -> anyhow::Result<()>;
    /// Starts turning at a signed speed.
    fn turn(&mut self, speed_deg_s: f64) -> anyhow::Result<()>;
    /// Brakes to a stop.
    fn stop(&mut self) -> anyhow::Result<()>;
    /// Reads the status now.
    fn status(&mut self) -> anyhow::Result<DriveStatus>;
}

/// A positioner speaking the turntable line protocol over TCP or a serial line.
pub struct LineDrive {
    reader: BufReader<Box<dyn Read + Send>>,
    writer: Box<dyn Write + Send>,
    addr: String,
}

impl LineDrive {
    /// Connects with `timeout` for the connection and each reply.
    pub fn connect(addr: &str, timeout: Duration) -> anyhow::Result<Self> {
        let a = addr
            .to_socket_addrs()
            .with_context(|| format!("{addr:?} is not HOST:PORT"))?
            .next()
            .with_context(|| format!("{addr} resolves to no address"))?;
        let s = TcpStream::connect_timeout(&a, timeout)
            .with_context(|| format!("connecting to the positioner at {addr}"))?;
        s.set_read_timeout(Some(timeout))?;
        s.set_write_timeout(Some(timeout))?;
        s.set_nodelay(true).ok();
        Ok(Self {
            writer: Box::new(s.try_clone()?),
            reader: BufReader::with_capacity(1024, Box::new(s)),
            addr: addr.to_owned(),
        })
    }

    /// Opens a serial line at `bps` with `timeout` for each reply (0.1 s steps, at most
    /// 25.5 s).
    #[cfg(unix)]
    pub fn serial(path: &std::path::Path, bps: u32, timeout: Duration) -> anyhow::Result<Self> {
        let f = crate::link::serial::open(path, bps, timeout)?;
        Ok(Self {
            writer: Box::new(f.try_clone()?),
            reader: BufReader::with_capacity(1024, Box::new(f)),
            addr: path.display().to_string(),
        })
    }

    /// Connects to `target`: a path (starting with `/`) is a serial line at `bps`,
    /// anything else HOST:PORT.
    pub fn open(target: &str, bps: u32, timeout: Duration) -> anyhow::Result<Self> {
        #[cfg(unix)]
        if target.starts_with('/') {
            return Self::serial(std::path::Path::new(target), bps, timeout);
        }
        let _ = bps;
        Self::connect(target, timeout)
    }

    /// Sends one request and reads its reply; `ERR` replies are errors.
    fn ask(&mut self, req: &str) -> anyhow::Result<String> {
        let ctx = || format!("positioner at {}: {req:?}", self.addr);
        self.writer
            .write_all(format!("{req}\n").as_bytes())
            .with_context(ctx)?;
        let mut line = Vec::new();
        match read_bounded_line(&mut self.reader, &mut line, MAX_REPLY_BYTES).with_context(ctx)? {
            LineRead::Line => {}
            LineRead::TooLong => bail!("{}: reply longer than {MAX_REPLY_BYTES} bytes", ctx()),
            LineRead::Closed => bail!(
                "{}: no reply in time, or the positioner closed the connection",
                ctx()
            ),
        }
        let text = String::from_utf8_lossy(&line);
        let text = text.trim_end_matches('\r').trim();
        if let Some(rest) = text.strip_prefix("OK") {
            return Ok(rest.trim().to_owned());
        }
        match text.strip_prefix("ERR") {
            Some(why) => bail!("{}: refused: {}", ctx(), why.trim()),
            None => bail!("{}: reply {text:?} is neither OK nor ERR", ctx()),
        }
    }

    fn numbers(&mut self, req: &str, n: usize) -> anyhow::Result<Vec<f64>> {
        let a = self.ask(req)?;
        let v: Vec<f64> = a
            .split_whitespace()
            .take(n)
            .map(|w| w.parse::<f64>().ok().filter(|x| x.is_finite()))
            .collect::<Option<_>>()
            .with_context(|| format!("reply {a:?} to {req:?}: expected {n} numbers"))?;
        if v.len() != n {
            bail!("reply {a:?} to {req:?}: expected {n} numbers");
        }
        Ok(v)
    }
}

/// Parses the rest of a `WHERE` reply: `<t_us> <deg> <speed> <state>`.
pub fn parse_status(rest: &str) -> Result<DriveStatus, String> {
    let w: Vec<&str> = rest.split_whitespace().collect();
    let [t, a, s, m] = w.as_slice() else {
        return Err(format!(
            "expected `<t_us> <deg> <speed> <state>`, got {rest:?}"
        ));
    };
    let t_us = t.parse().map_err(|_| format!("bad t_us in {rest:?}"))?;
    let num = |x: &str| x.parse::<f64>().ok().filter(|v| v.is_finite());
    let (Some(angle_deg), Some(speed_deg_s)) = (num(a), num(s)) else {
        return Err(format!("bad angle or speed in {rest:?}"));
    };
    let motion = match *m {
        "MOVING" => Motion::Moving,
        "HOLDING" => Motion::Holding,
        "FAULT" => Motion::Fault,
        _ => return Err(format!("unknown state in {rest:?}")),
    };
    Ok(DriveStatus {
        t_us,
        angle_deg,
        speed_deg_s,
        motion,
    })
}

impl Drive for LineDrive {
    fn identify(&mut self) -> anyhow::Result<String> {
        self.ask("HELLO")
    }

    fn limits(&mut self) -> anyhow::Result<DriveLimits> {
        let v = self.numbers("LIMITS", 4)?;
        Ok(DriveLimits {
            min_deg: v[0],
            max_deg: v[1],
            max_speed_deg_s: v[2],
            max_accel_deg_s2: v[3],
        })
    }

    fn set_accel(&mut self, accel_deg_s2: f64) -> anyhow::Result<()> {
        self.ask(&format!("ACCEL {accel_deg_s2}")).map(drop)
    }

    fn move_to(&mut self, angle_deg: f64, speed_deg_s: f64) -> anyhow::Result<()> {
        self.ask(&format!("GOTO {angle_deg} {speed_deg_s}"))
            .map(drop)
    }

    fn turn(&mut self, speed_deg_s: f64) -> anyhow::Result<()> {
        self.ask(&format!("TURN {speed_deg_s}")).map(drop)
    }

    fn stop(&mut self) -> anyhow::Result<()> {
        self.ask("STOP").map(drop)
    }

    fn status(&mut self) -> anyhow::Result<DriveStatus> {
        let a = self.ask("WHERE")?;
        parse_status(&a).map_err(|e| anyhow::anyhow!("positioner at {}: {e}", self.addr))
    }
}

/// The longest plan of steps accepted.
pub const MAX_STEPS: usize = 100_000;

/// What a driven scan does.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Plan {
    /// Step and stop: move to each angle from `from_deg` to `to_deg` by `step_deg`, settle,
    /// sweep, next.
    Steps {
        /// First angle, degrees.
        from_deg: f64,
        /// Last angle, degrees (included when the steps land on it).
        to_deg: f64,
        /// Step, degrees (above 0; the direction follows from and to).
        step_deg: f64,
    },
    /// Continuous: move to `from_deg`, settle, turn toward `to_deg` at `speed_deg_s`,
    /// sweeping while it turns, stop once past `to_deg`.
    Turn {
        /// Start angle, degrees.
        from_deg: f64,
        /// End angle, degrees.
        to_deg: f64,
        /// Speed, degrees per second (above 0).
        speed_deg_s: f64,
    },
}

impl Plan {
    /// Parses `FROM:TO:STEP` (`turn` false) or `FROM:TO:SPEED` (`turn` true).
    pub fn parse(text: &str, turn: bool) -> anyhow::Result<Self> {
        let what = if turn {
            "--turn FROM:TO:SPEED"
        } else {
            "--steps FROM:TO:STEP"
        };
        let v: Vec<f64> = text
            .split(':')
            .map(|x| x.trim().parse::<f64>().ok().filter(|v| v.is_finite()))
            .collect::<Option<_>>()
            .with_context(|| format!("{what}: {text:?} is not three numbers"))?;
        let [from_deg, to_deg, third] = v.as_slice() else {
            bail!("{what}: {text:?} is not three numbers");
        };
        if *third <= 0.0 {
            bail!("{what}: the third value must be above 0 (got {third})");
        }
        Ok(if turn {
            Plan::Turn {
                from_deg: *from_deg,
                to_deg: *to_deg,
                speed_deg_s: *third,
            }
        } else {
            Plan::Steps {
                from_deg: *from_deg,
                to_deg: *to_deg,
                step_deg: *third,
            }
        })
    }

    /// The angles of a step plan (empty for a turn).
    pub fn targets(&self) -> Vec<f64> {
        let Plan::Steps {
            from_deg,
            to_deg,
            step_deg,
        } = *self
        else {
            return Vec::new();
        };
        let n = ((to_deg - from_deg).abs() / step_deg + 1e-9).floor() as usize;
        let dir = if to_deg >= from_deg { 1.0 } else { -1.0 };
        (0..=n.min(MAX_STEPS))
            .map(|i| from_deg + dir * step_deg * i as f64)
            .collect()
    }

    /// The lowest and highest angle the plan visits.
    pub fn span_deg(&self) -> (f64, f64) {
        let (a, b) = match *self {
            Plan::Steps {
                from_deg, to_deg, ..
            }
            | Plan::Turn {
                from_deg, to_deg, ..
            } => (from_deg, to_deg),
        };
        (a.min(b), a.max(b))
    }
}

/// How to drive the positioner during `acquire` (options of the command).
#[derive(Debug, Clone)]
pub struct DriveOptions {
    /// The positioner: HOST:PORT, or a serial device path (starting with `/`).
    pub addr: String,
    /// Serial speed, bits per second (serial lines only).
    pub baud: u32,
    /// What to do.
    pub plan: Plan,
    /// Speed of the moves between steps and to the start, degrees per second.
    pub move_speed_deg_s: f64,
    /// Software angle range (default: the positioner's).
    pub angle_range_deg: Option<(f64, f64)>,
    /// Software speed limit (default: the positioner's).
    pub max_speed_deg_s: Option<f64>,
    /// Acceleration to set (default: the positioner's highest).
    pub max_accel_deg_s2: Option<f64>,
    /// Settled: within this of the target, degrees.
    pub settle_tolerance_deg: f64,
    /// Settled: within the tolerance for this long, s.
    pub settle_s: f64,
    /// A move must settle within this, s.
    pub settle_timeout_s: f64,
}

/// The limits a driven scan keeps: the tighter of the options and the positioner's.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Kept {
    /// Angle range, degrees.
    pub range_deg: (f64, f64),
    /// Highest speed, degrees per second.
    pub max_speed_deg_s: f64,
    /// Acceleration set, degrees per second squared.
    pub accel_deg_s2: f64,
}

impl DriveOptions {
    /// Checks every number and the plan against the limits, before anything moves.
    pub fn check(&self, reported: &DriveLimits) -> anyhow::Result<Kept> {
        let fin = |v: f64| v.is_finite();
        let (lo, hi) = self
            .angle_range_deg
            .unwrap_or((reported.min_deg, reported.max_deg));
        if !(fin(lo) && fin(hi) && lo < hi) {
            bail!("--angle-range {lo}:{hi}: needs MIN below MAX");
        }
        let range_deg = (lo.max(reported.min_deg), hi.min(reported.max_deg));
        let max_speed = self
            .max_speed_deg_s
            .unwrap_or(reported.max_speed_deg_s)
            .min(reported.max_speed_deg_s);
        let accel = self
            .max_accel_deg_s2
            .unwrap_or(reported.max_accel_deg_s2)
            .min(reported.max_accel_deg_s2);
        for (name, v) in [
            ("--max-speed-deg-s", max_speed),
            ("--max-accel-deg-s2", accel),
            ("--move-speed-deg-s", self.move_speed_deg_s),
            ("--settle-tolerance-deg", self.settle_tolerance_deg),
            ("--settle-s", self.settle_s),
            ("--settle-timeout-s", self.settle_timeout_s),
        ] {
            if !(fin(v) && v > 0.0 && v <= 1e6) {
                bail!("{name} must be above 0 (got {v})");
            }
        }
        let plan_speed = match self.plan {
            Plan::Turn { speed_deg_s, .. } => speed_deg_s,
            Plan::Steps { .. } => 0.0,
        };
        for (name, v) in [
            ("--move-speed-deg-s", self.move_speed_deg_s),
            ("--turn speed", plan_speed),
        ] {
            if v > max_speed {
                bail!("{name} {v} °/s is above the speed limit {max_speed} °/s");
            }
        }
        let (a, b) = self.plan.span_deg();
        if a < range_deg.0 || b > range_deg.1 {
            bail!(
                "the plan spans {a}° to {b}°, outside the angle range {}° to {}°",
                range_deg.0,
                range_deg.1
            );
        }
        if let Plan::Steps {
            from_deg,
            to_deg,
            step_deg,
        } = self.plan
        {
            if (to_deg - from_deg).abs() / step_deg > MAX_STEPS as f64 {
                bail!("--steps: more than {MAX_STEPS} steps");
            }
        }
        Ok(Kept {
            range_deg,
            max_speed_deg_s: max_speed,
            accel_deg_s2: accel,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn plans_are_parsed_and_checked_against_the_limits() {
        let p = Plan::parse("-10:10:5", false).unwrap();
        assert_eq!(p.targets(), [-10.0, -5.0, 0.0, 5.0, 10.0]);
        assert_eq!(
            Plan::parse("10:-5:10", false).unwrap().targets(),
            [10.0, 0.0]
        );
        assert!(Plan::parse("0:10:0", false).is_err());
        assert!(Plan::parse("0:10:NaN", true).is_err());
        assert!(Plan::parse("0:10", true).is_err());
        let lim = DriveLimits {
            min_deg: -180.0,
            max_deg: 180.0,
            max_speed_deg_s: 20.0,
            max_accel_deg_s2: 40.0,
        };
        let mut o = DriveOptions {
            addr: String::new(),
            baud: 115200,
            plan: Plan::parse("-90:90:15", true).unwrap(),
            move_speed_deg_s: 10.0,
            angle_range_deg: Some((-100.0, 100.0)),
            max_speed_deg_s: Some(50.0),
            max_accel_deg_s2: None,
            settle_tolerance_deg: 0.05,
            settle_s: 0.2,
            settle_timeout_s: 30.0,
        };
        let k = o.check(&lim).unwrap();
        assert_eq!(k.range_deg, (-100.0, 100.0));
        assert_eq!((k.max_speed_deg_s, k.accel_deg_s2), (20.0, 40.0));
        o.plan = Plan::parse("-90:90:25", true).unwrap();
        assert!(o
            .check(&lim)
            .unwrap_err()
            .to_string()
            .contains("speed limit"));
        o.plan = Plan::parse("-90:120:5", false).unwrap();
        assert!(o
            .check(&lim)
            .unwrap_err()
            .to_string()
            .contains("outside the angle range"));
        o.plan = Plan::parse("0:10:1", false).unwrap();
        o.settle_s = f64::NAN;
        assert!(o.check(&lim).is_err());
    }

    #[test]
    fn status_replies() {
        let s = parse_status("1500 12.5 -3 MOVING").unwrap();
        assert_eq!((s.t_us, s.angle_deg, s.speed_deg_s), (1500, 12.5, -3.0));
        assert_eq!(s.motion, Motion::Moving);
        assert_eq!(parse_status("0 0 0 FAULT").unwrap().motion, Motion::Fault);
        assert!(parse_status("1 2 3").is_err());
        assert!(parse_status("1 NaN 3 HOLDING").is_err());
        assert!(parse_status("-1 2 3 HOLDING").is_err());
        assert!(parse_status("1 2 3 SPINNING").is_err());
    }
}
