//! The RCS range behind the simulated instrument (`sweepgate instrument --rcs-scenario FILE
//! --measurement WHAT [--turntable HOST:PORT]`): each `INITiate` measures the scene
//! ([`crate::model::rcs_scene`]) as `simulate-rcs` does ([`rcs_simulate::measure`]), with
//! what the measurement puts in the zone ([`rcs_simulate::items`]).
//!
//! The angle of a sweep is the turntable's: with `--turntable`, the instrument asks the
//! turntable (turntable line protocol, `WHERE`) before each sweep, so that a scan driven by
//! `acquire --drive` measures the scene at the angles the turntable stands at; without it,
//! sweeps step through the scene's angles in turn (the reference runs: 0°), starting again
//! after the last. The instrument server asks the turntable before it locks the
//! instrument's state ([`turntable_angle`], then [`RcsSource::give_angle`]), so a turntable
//! slow to answer holds up only the client whose `INITiate` is waiting for it.

use std::io::{BufRead, BufReader, Read, Write};
use std::net::TcpStream;
use std::time::Duration;

use anyhow::Context;
use num_complex::Complex32;

use crate::formats::rcs_record::Measurement;
use crate::link::drive::parse_status;
use crate::model::rcs_scene::{Noise, RcsScene, Scatterer};
use crate::pipeline::rcs_simulate;

/// How long the instrument waits for the turntable's answer.
const TURNTABLE_TIMEOUT: Duration = Duration::from_secs(5);

/// One measurement of an RCS scene, served sweep by sweep.
pub struct RcsSource {
    scene: RcsScene,
    items: Vec<Scatterer>,
    angles_deg: Vec<f64>,
    measurement: Measurement,
    turntable: Option<String>,
    next: usize,
    noise: Noise,
    /// The turntable's answer, asked for the next sweep before the state was locked.
    given: Option<anyhow::Result<f64>>,
}

impl RcsSource {
    /// Serves `measurement` of `scene`; the angle from the turntable at `turntable`, else
    /// the scene's angles in turn.
    pub fn new(scene: RcsScene, measurement: Measurement, turntable: Option<String>) -> Self {
        let items = rcs_simulate::items(&scene, measurement);
        let angles_deg = match measurement {
            Measurement::Target | Measurement::Background => scene.angles(),
            Measurement::Reference | Measurement::ReferenceBackground => vec![0.0],
        };
        let noise = Self::noise_for(&scene, measurement);
        Self {
            scene,
            items,
            angles_deg,
            measurement,
            turntable,
            next: 0,
            noise,
            given: None,
        }
    }

    /// The turntable whose angle each sweep is measured at, if any.
    pub fn turntable(&self) -> Option<&str> {
        self.turntable.as_deref()
    }

    /// The turntable's answer (asked by the caller, without holding the instrument's
    /// state) for the next sweep; `None` forgets an answer not used.
    pub fn give_angle(&mut self, angle: Option<anyhow::Result<f64>>) {
        self.given = angle;
    }

    /// Each measurement its own noise, repeatable from the scene's seed.
    fn noise_for(scene: &RcsScene, m: Measurement) -> Noise {
        let k = Measurement::ALL.iter().position(|x| *x == m).unwrap_or(0) as u64;
        Noise::new(scene.seed.wrapping_add(k + 1))
    }

    /// The scene's grid: (start, stop, points).
    pub fn grid(&self) -> (f64, f64, usize) {
        (self.scene.start_hz, self.scene.stop_hz, self.scene.points)
    }

    /// Which measurement it serves.
    pub fn measurement(&self) -> Measurement {
        self.measurement
    }

    /// Measures on a new grid from now on.
    pub fn set_grid(&mut self, start_hz: f64, stop_hz: f64, points: usize) {
        self.scene.start_hz = start_hz;
        self.scene.stop_hz = stop_hz;
        self.scene.points = points;
    }

    /// Back to the first angle and the first noise (`*RST`).
    pub fn restart(&mut self) {
        self.next = 0;
        self.noise = Self::noise_for(&self.scene, self.measurement);
    }

    /// The next sweep: its number since the start and its values. Its angle is the one
    /// given ([`Self::give_angle`]), else the turntable's (asked now), else the scene's next.
    pub fn next_sweep(&mut self) -> anyhow::Result<(u32, Vec<Complex32>)> {
        let angle_deg = match (self.given.take(), &self.turntable) {
            (Some(given), _) => given?,
            (None, Some(addr)) => turntable_angle(addr)?,
            (None, None) => self.angles_deg[self.next % self.angles_deg.len()],
        };
        let v = rcs_simulate::measure(&self.scene, &self.items, angle_deg, &mut self.noise)?;
        let index = self.next as u32;
        self.next += 1;
        Ok((
            index,
            v.iter()
                .map(|c| Complex32::new(c.re as f32, c.im as f32))
                .collect(),
        ))
    }
}

/// The turntable's angle now (`WHERE`, one connection per question; an answer within
/// [`TURNTABLE_TIMEOUT`]).
pub fn turntable_angle(addr: &str) -> anyhow::Result<f64> {
    let mut s = TcpStream::connect(addr).with_context(|| format!("turntable {addr}"))?;
    s.set_read_timeout(Some(TURNTABLE_TIMEOUT))
        .with_context(|| format!("turntable {addr}"))?;
    s.write_all(b"WHERE\n")
        .with_context(|| format!("turntable {addr}: asking WHERE"))?;
    let mut line = String::new();
    BufReader::new(s.take(256))
        .read_line(&mut line)
        .with_context(|| format!("turntable {addr}: reading its answer to WHERE"))?;
    let rest = line
        .trim()
        .strip_prefix("OK ")
        .with_context(|| format!("turntable {addr}: answered {:?} to WHERE", line.trim()))?;
    let status = parse_status(rest).map_err(anyhow::Error::msg)?;
    Ok(status.angle_deg)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn scene() -> RcsScene {
        let path = concat!(env!("CARGO_MANIFEST_DIR"), "/scenarios/rcs/range.toml");
        rcs_simulate::read_scene(std::path::Path::new(path)).unwrap()
    }

    #[test]
    fn without_a_turntable_it_steps_through_the_scene_and_starts_again() {
        let sc = scene();
        let n = sc.angles().len();
        let mut src = RcsSource::new(sc.clone(), Measurement::Background, None);
        let first = src.next_sweep().unwrap().1;
        for _ in 1..n {
            src.next_sweep().unwrap();
        }
        let again = src.next_sweep().unwrap();
        assert_eq!(again.0 as usize, n);
        // Same angle, other noise: equal to well under the noise (−130 dB rms) plus rounding.
        let worst = first
            .iter()
            .zip(&again.1)
            .map(|(a, b)| (a - b).norm())
            .fold(0.0f32, f32::max);
        assert!(worst > 0.0 && worst < 1e-5, "{worst}");
        src.restart();
        assert_eq!(src.next_sweep().unwrap().1, first);
        assert_eq!(first.len(), sc.points);
    }

    #[test]
    fn a_given_angle_is_used_once_and_then_the_turntable_is_asked() {
        // A turntable address nobody listens on: asking it fails.
        let l = std::net::TcpListener::bind("127.0.0.1:0").unwrap();
        let dead = l.local_addr().unwrap().to_string();
        drop(l);
        let m = Measurement::Reference;
        let mut asked = RcsSource::new(scene(), m, Some(dead.clone()));
        let mut stepped = RcsSource::new(scene(), m, None);
        asked.give_angle(Some(Ok(0.0)));
        // The reference runs stand at 0°: the same sweep, same noise.
        assert_eq!(asked.next_sweep().unwrap(), stepped.next_sweep().unwrap());
        let e = format!("{:#}", asked.next_sweep().unwrap_err());
        assert!(e.contains(&dead), "{e}");
        asked.give_angle(Some(Err(anyhow::anyhow!("no answer"))));
        assert!(asked.next_sweep().is_err());
    }

    #[test]
    fn a_silent_turntable_is_an_error_naming_it() {
        let l = std::net::TcpListener::bind("127.0.0.1:0").unwrap();
        let addr = l.local_addr().unwrap().to_string();
        std::thread::spawn(move || {
            if let Ok((mut s, _)) = l.accept() {
                s.write_all(b"ERR busy\n").ok();
            }
        });
        let mut src = RcsSource::new(scene(), Measurement::Target, Some(addr.clone()));
        let e = format!("{:#}", src.next_sweep().unwrap_err());
        assert!(e.contains(&addr) && e.contains("ERR busy"), "{e}");
    }
}
