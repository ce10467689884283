//! The simulator: a scan of a scenario as the instrument and the encoder would report it.
//! Each frequency point of a sweep is taken at its own instant of the [`Timeline`] (so the
//! angle moves during a sweep), the room's S21 there gets additive complex Gaussian noise,
//! and the positioner samples carry the encoder's quantization and timestamp jitter. The
//! noise and the jitter come from a seeded generator: the same seed gives the same scan on
//! every machine.

use std::f64::consts::PI;

use num_complex::{Complex32, Complex64};

use crate::model::room::Room;
use crate::model::scenario::Scenario;
use crate::model::timeline::Timeline;

/// A small seeded generator (SplitMix64) with Gaussian draws (Box–Muller): the same seed
/// gives the same noise and jitter on every machine.
#[derive(Debug, Clone)]
pub struct Noise {
    state: u64,
    spare: Option<f64>,
}

impl Noise {
    /// A generator from a seed.
    pub fn new(seed: u64) -> Self {
        Self {
            state: seed ^ 0x5EED_5EED_5EED_5EED,
            spare: None,
        }
    }

    /// Next 64 random bits (SplitMix64, Steele, Lea & Flood 2014).
    pub fn next_u64(&mut self) -> u64 {
        self.state = self.state.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.state;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// Uniform in (0, 1).
    pub fn uniform(&mut self) -> f64 {
        ((self.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }

    /// Standard normal.
    pub fn gaussian(&mut self) -> f64 {
        if let Some(s) = self.spare.take() {
            return s;
        }
        let (u1, u2) = (self.uniform(), self.uniform());
        let r = (-2.0 * u1.ln()).sqrt();
        let (s, c) = (2.0 * PI * u2).sin_cos();
        self.spare = Some(r * s);
        r * c
    }
}

/// One positioner sample as the encoder reports it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Sample {
    /// Timestamp (with jitter), µs from the scan start.
    pub t_us: u64,
    /// Encoder counts, unwrapped, from angle 0.
    pub counts: i64,
    /// Angle the counts stand for, degrees.
    pub angle_deg: f64,
}

/// One simulated sweep.
#[derive(Debug, Clone, PartialEq)]
pub struct SimSweep {
    /// Sweep number from 0.
    pub index: u32,
    /// First point's instant, µs from the scan start.
    pub start_us: u64,
    /// End of the sweep, µs.
    pub end_us: u64,
    /// S21 at each grid point.
    pub s21: Vec<Complex32>,
}

/// The simulator: the room, the schedule and the noise generator.
#[derive(Debug, Clone)]
pub struct Simulator {
    room: Room,
    timeline: Timeline,
    freqs_hz: Vec<f64>,
    noise_rms: f64,
    counts_per_turn: u32,
    sample_interval_s: f64,
    jitter_s: f64,
    noise: Noise,
    jitter: Noise,
}

impl Simulator {
    /// A simulator for a validated scenario.
    pub fn new(s: &Scenario, seed: u64) -> Self {
        let grid = s.grid().ok();
        let freqs_hz = match grid {
            Some(g) => (0..g.points()).map(|i| g.frequency_hz(i)).collect(),
            None => Vec::new(),
        };
        Self {
            room: Room::new(s),
            timeline: Timeline::new(s),
            freqs_hz,
            noise_rms: s.sweep.noise_db.map_or(0.0, |db| 10f64.powf(db / 20.0)),
            counts_per_turn: s.positioner.counts_per_turn,
            sample_interval_s: s.positioner.sample_interval_s,
            jitter_s: s.positioner.timing_jitter_s,
            noise: Noise::new(seed),
            jitter: Noise::new(seed.wrapping_add(0x0123_4567_89AB_CDEF)),
        }
    }

    /// The room.
    pub fn room(&self) -> &Room {
        &self.room
    }

    /// The schedule.
    pub fn timeline(&self) -> &Timeline {
        &self.timeline
    }

    /// Instant of point `k` of a sweep starting at `t0_s`.
    pub fn point_time_s(&self, t0_s: f64, k: usize) -> f64 {
        t0_s + self.timeline.sweep_duration_s() * k as f64 / self.freqs_hz.len().max(1) as f64
    }

    /// Simulates sweep `index` of the schedule (`None` past the last).
    pub fn sweep(&mut self, index: usize) -> Option<SimSweep> {
        let t0 = *self.timeline.sweep_starts_s().get(index)?;
        let sigma = self.noise_rms / std::f64::consts::SQRT_2;
        let mut s21 = Vec::with_capacity(self.freqs_hz.len());
        for (k, f) in self.freqs_hz.iter().enumerate() {
            let angle = self.timeline.angle_at(self.point_time_s(t0, k));
            let mut v = self.room.response(*f, angle);
            if sigma > 0.0 {
                v += Complex64::new(sigma * self.noise.gaussian(), sigma * self.noise.gaussian());
            }
            s21.push(Complex32::new(v.re as f32, v.im as f32));
        }
        Some(SimSweep {
            index: index as u32,
            start_us: to_us(t0),
            end_us: to_us(t0 + self.timeline.sweep_duration_s()),
            s21,
        })
    }

    /// All positioner samples of the scan, every `sample_interval_s` from 0 to the end of
    /// the motion. Each carries the true angle at its instant quantized to encoder counts
    /// and a timestamp off by Gaussian jitter (kept strictly increasing).
    pub fn samples(&mut self) -> Vec<Sample> {
        let mut out = Vec::new();
        let cpr = f64::from(self.counts_per_turn);
        let n = (self.timeline.end_s() / self.sample_interval_s).floor() as usize + 1;
        let mut last: Option<u64> = None;
        for i in 0..n {
            let t = i as f64 * self.sample_interval_s;
            let angle = self.timeline.angle_at(t);
            let counts = (angle / 360.0 * cpr).round() as i64;
            let stamped = t + self.jitter_s * self.jitter.gaussian();
            let mut t_us = to_us(stamped);
            if let Some(l) = last {
                t_us = t_us.max(l + 1);
            }
            last = Some(t_us);
            out.push(Sample {
                t_us,
                counts,
                angle_deg: counts as f64 * 360.0 / cpr,
            });
        }
        out
    }
}

fn to_us(t_s: f64) -> u64 {
    (t_s * 1e6).round().max(0.0) as u64
}

#[cfg(test)]
mod tests {
    use super::*;

    fn lab() -> Scenario {
        Scenario::from_toml(include_str!("../../scenarios/demo-lab.toml")).unwrap()
    }

    #[test]
    fn the_angle_moves_during_a_sweep() {
        let s = lab();
        let mut sim = Simulator::new(&s, 1);
        let mid = sim.timeline().sweep_starts_s().len() / 2;
        let t0 = sim.timeline().sweep_starts_s()[mid];
        let k = s.sweep.points - 1;
        let a0 = sim.timeline().angle_at(sim.point_time_s(t0, 0));
        let a1 = sim.timeline().angle_at(sim.point_time_s(t0, k));
        let want =
            s.positioner.speed_deg_s * s.sweep.sweep_duration_s * k as f64 / s.sweep.points as f64;
        assert!(((a1 - a0) - want).abs() < 1e-6, "{a0} {a1} {want}");
        let sw = sim.sweep(mid).unwrap();
        assert_eq!(sw.s21.len(), s.sweep.points);
        assert!(sim.sweep(usize::MAX).is_none());
    }

    #[test]
    fn samples_are_quantized_and_increasing() {
        let s = lab();
        let mut sim = Simulator::new(&s, 3);
        let v = sim.samples();
        assert!(v.len() > 10);
        let step = 360.0 / f64::from(s.positioner.counts_per_turn);
        for w in v.windows(2) {
            assert!(w[1].t_us > w[0].t_us);
        }
        for x in &v {
            assert!((x.angle_deg / step - (x.angle_deg / step).round()).abs() < 1e-6);
        }
    }

    #[test]
    fn noise_is_seeded_and_roughly_normal() {
        let mut a = Noise::new(7);
        let mut b = Noise::new(7);
        let xs: Vec<f64> = (0..20000).map(|_| a.gaussian()).collect();
        assert!(xs
            .iter()
            .zip((0..20000).map(|_| b.gaussian()))
            .all(|(x, y)| *x == y));
        let mean = xs.iter().sum::<f64>() / xs.len() as f64;
        let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / xs.len() as f64;
        assert!(
            mean.abs() < 0.03 && (var - 1.0).abs() < 0.05,
            "{mean} {var}"
        );
    }
}
