//! Room physics: the paths from AUT to probe (direct, one and two bounces by the image
//! method, point scatterers), the antenna patterns, the turntable's motion, and the swept
//! S21 they add up to.
//!
//! For a path of length L the probe receives, at frequency f (λ = c/f),
//!
//! ```text
//! S21 += Γ · F_aut(f, d_dep in the turning AUT's frame) · F_probe(f, d_arr) · λ/(4π·L)
//!        · exp(−j·2π·f·(L/c + τ_cable))
//! ```
//!
//! where Γ is the product of the reflection coefficients met, F are field patterns
//! normalized so that |F|² is the gain (average |F|² over the sphere is 1), so the direct
//! path between isotropic antennas is the Friis free-space value λ/(4πR). A point
//! scatterer of radar cross-section σ at distances r1 (from the AUT) and r2 (to the probe)
//! contributes with λ/(4π) · √(σ/4π)/(r1·r2) in place of λ/(4π·L) (radar equation). The
//! AUT turns about the vertical axis by the positioner angle φ: a room direction d is
//! seen in the AUT's frame as Rz(−φ)·d. Each frequency point is measured at its own
//! instant, so the angle moves during a sweep. Noise is additive complex Gaussian from a
//! seeded generator.
//!
//! Limits: planes are infinite and reflect with a real, angle- and polarization-
//! independent coefficient; second order means two different planes (parallel pairs only
//! when they enclose the antennas); no diffraction; antennas are points at their phase
//! centres.

use std::f64::consts::PI;

use num_complex::{Complex32, Complex64};
use sweepgate::plan::{Point, SPEED_OF_LIGHT_M_S};

use crate::model::scenario::{Antenna, AxisName, Mode, Scenario, Taper};

type Vec3 = [f64; 3];

fn sub(a: &Point, b: &Point) -> Vec3 {
    [a.x_m - b.x_m, a.y_m - b.y_m, a.z_m - b.z_m]
}

fn unit(v: Vec3) -> Vec3 {
    let n = (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]).sqrt();
    if n > 0.0 {
        [v[0] / n, v[1] / n, v[2] / n]
    } else {
        [1.0, 0.0, 0.0]
    }
}

/// What a path does on its way.
#[derive(Debug, Clone, PartialEq)]
pub enum PathKind {
    /// Straight from AUT to probe.
    Direct,
    /// One bounce off plane `index` of the scenario.
    Bounce {
        /// Index into `Scenario::planes`.
        plane: usize,
    },
    /// Two bounces: first plane, then second plane.
    DoubleBounce {
        /// First plane met, index into `Scenario::planes`.
        first: usize,
        /// Second plane met.
        second: usize,
    },
    /// Via point scatterer `index`.
    Scatter {
        /// Index into `Scenario::scatterers`.
        scatterer: usize,
    },
}

/// One propagation path, fixed in the room (the AUT turns, the path does not).
#[derive(Debug, Clone, PartialEq)]
pub struct Path {
    /// What the path does.
    pub kind: PathKind,
    /// Total length, m.
    pub length_m: f64,
    /// Unit direction leaving the AUT, room frame.
    pub depart: Vec3,
    /// Unit direction from the probe towards where the wave comes from, room frame.
    pub arrive: Vec3,
    /// Everything but λ/(4π), the patterns and the phase: Γ/L for bounces,
    /// √(σ/4π)/(r1·r2) for scatterers, 1/R for the direct path (1/m).
    pub weight_per_m: f64,
}

impl Path {
    /// Propagation delay (without the cable), s.
    pub fn delay_s(&self) -> f64 {
        self.length_m / SPEED_OF_LIGHT_M_S
    }
}

/// A pattern-bearing antenna with its gain normalization over the band.
#[derive(Debug, Clone)]
pub struct AntennaModel {
    antenna: Antenna,
    /// (frequency, scale) pairs: scale² · |raw field|² is the gain.
    scale: Vec<(f64, f64)>,
}

fn sinc(u: f64) -> f64 {
    if u.abs() < 1e-9 {
        1.0
    } else {
        u.sin() / u
    }
}

fn taper_field(u: f64, taper: Taper) -> f64 {
    match taper {
        Taper::Uniform => sinc(u),
        Taper::Cosine => {
            // Cosine illumination: cos u / (1 − (2u/π)²), value π/4 at u = ±π/2
            // (common practice, no source).
            let d = 1.0 - (2.0 * u / PI).powi(2);
            if d.abs() < 1e-9 {
                PI / 4.0
            } else {
                u.cos() / d
            }
        }
    }
}

impl AntennaModel {
    /// Models `antenna` over `start_hz…stop_hz`, computing its gain normalization by
    /// quadrature over the sphere at a few frequencies (interpolated between them).
    pub fn new(antenna: &Antenna, start_hz: f64, stop_hz: f64) -> Self {
        let mut scale = Vec::new();
        if matches!(antenna, Antenna::Isotropic) {
            scale.push((start_hz, 1.0));
        } else {
            const STEPS: usize = 16;
            for i in 0..=STEPS {
                let f = start_hz + (stop_hz - start_hz) * i as f64 / STEPS as f64;
                scale.push((f, Self::normalization(antenna, f)));
                if stop_hz <= start_hz {
                    break;
                }
            }
        }
        Self {
            antenna: antenna.clone(),
            scale,
        }
    }

    /// √(Σw / Σw·|F|²) over a midpoint grid in (θ, φ): makes the mean gain 1.
    fn normalization(antenna: &Antenna, f_hz: f64) -> f64 {
        const NT: usize = 120;
        const NP: usize = 240;
        let (mut sw, mut swf) = (0.0, 0.0);
        for i in 0..NT {
            let th = (i as f64 + 0.5) * PI / NT as f64;
            let w = th.sin();
            for j in 0..NP {
                let ph = (j as f64 + 0.5) * 2.0 * PI / NP as f64;
                let d = [th.sin() * ph.cos(), th.sin() * ph.sin(), th.cos()];
                let f = raw_field(antenna, f_hz, d);
                sw += w;
                swf += w * f * f;
            }
        }
        if swf > 0.0 {
            (sw / swf).sqrt()
        } else {
            0.0
        }
    }

    fn scale_at(&self, f_hz: f64) -> f64 {
        let s = &self.scale;
        if s.len() == 1 || f_hz <= s[0].0 {
            return s[0].1;
        }
        for w in s.windows(2) {
            if f_hz <= w[1].0 {
                let t = (f_hz - w[0].0) / (w[1].0 - w[0].0);
                return w[0].1 + t * (w[1].1 - w[0].1);
            }
        }
        s[s.len() - 1].1
    }

    /// Field pattern (signed, real) in direction `d` of the antenna's own frame
    /// (boresight +x): its square is the gain.
    pub fn field(&self, f_hz: f64, d: Vec3) -> f64 {
        self.scale_at(f_hz) * raw_field(&self.antenna, f_hz, d)
    }

    /// Gain at boresight, dBi.
    pub fn boresight_gain_dbi(&self, f_hz: f64) -> f64 {
        20.0 * self.field(f_hz, [1.0, 0.0, 0.0]).abs().log10()
    }
}

/// Unnormalized field pattern of `antenna` at unit direction `d` (antenna frame).
fn raw_field(antenna: &Antenna, f_hz: f64, d: Vec3) -> f64 {
    let k = 2.0 * PI * f_hz / SPEED_OF_LIGHT_M_S;
    let [x, y, z] = d;
    match antenna {
        Antenna::Isotropic => 1.0,
        Antenna::Aperture {
            width_m,
            height_m,
            width_taper,
            height_taper,
        } => {
            // Rectangular aperture in the y–z plane with a Huygens obliquity factor
            // (1 + cos θ)/2 (common practice, no source).
            let u = k * width_m * y / 2.0;
            let v = k * height_m * z / 2.0;
            taper_field(u, *width_taper) * taper_field(v, *height_taper) * (1.0 + x) / 2.0
        }
        Antenna::Dipole { length_m, axis } => {
            // Thin centre-fed dipole: (cos(kL/2·cos ψ) − cos(kL/2)) / sin ψ, ψ from the
            // wire (Balanis, Antenna Theory, finite-length dipole).
            let c = match axis {
                AxisName::X => x,
                AxisName::Y => y,
                AxisName::Z => z,
            };
            let s = (1.0 - c * c).max(0.0).sqrt();
            if s < 1e-9 {
                0.0
            } else {
                let h = k * length_m / 2.0;
                ((h * c).cos() - h.cos()) / s
            }
        }
        Antenna::CosPower { n } => {
            if x > 0.0 {
                x.powf(n / 2.0)
            } else {
                0.0
            }
        }
        Antenna::Array {
            elements,
            spacing_m,
            element_n,
        } => {
            let e = if *element_n == 0.0 {
                1.0
            } else if x > 0.0 {
                x.powf(element_n / 2.0)
            } else {
                0.0
            };
            // Array factor of N equal elements along y: sin(Nψ/2) / (N·sin(ψ/2)),
            // ψ = k·d·sin(angle from broadside) (Balanis, Antenna Theory, ch. 6).
            let n = *elements as f64;
            let psi = k * spacing_m * y;
            let den = (psi / 2.0).sin();
            let af = if den.abs() < 1e-9 {
                (n * psi / 2.0).cos() / (psi / 2.0).cos()
            } else {
                (n * psi / 2.0).sin() / (n * den)
            };
            e * af
        }
    }
}

/// The room with its antennas: paths and the response at any angle.
#[derive(Debug, Clone)]
pub struct Room {
    paths: Vec<Path>,
    aut: AntennaModel,
    probe: AntennaModel,
    cable_delay_s: f64,
}

/// Turns a room direction into the AUT's frame at positioner angle `angle_deg`.
pub fn to_aut_frame(d: Vec3, angle_deg: f64) -> Vec3 {
    let (s, c) = angle_deg.to_radians().sin_cos();
    [d[0] * c + d[1] * s, -d[0] * s + d[1] * c, d[2]]
}

/// Turns a room arrival direction into the probe's frame (boresight towards −x).
pub fn to_probe_frame(d: Vec3) -> Vec3 {
    [-d[0], -d[1], d[2]]
}

impl Room {
    /// The paths and antenna models of a (validated) scenario.
    pub fn new(s: &Scenario) -> Self {
        let a = s.aut_position();
        let p = s.probe_position();
        let mut paths = vec![Path {
            kind: PathKind::Direct,
            length_m: a.distance_m(&p),
            depart: unit(sub(&p, &a)),
            arrive: unit(sub(&a, &p)),
            weight_per_m: 1.0 / a.distance_m(&p),
        }];
        let planes: Vec<_> = s.planes.iter().map(|x| x.plane()).collect();
        for (i, pl) in planes.iter().enumerate() {
            let ip = pl.image_of(&p);
            let ia = pl.image_of(&a);
            let len = pl.bounce_path_m(&a, &p);
            paths.push(Path {
                kind: PathKind::Bounce { plane: i },
                length_m: len,
                depart: unit(sub(&ip, &a)),
                arrive: unit(sub(&ia, &p)),
                weight_per_m: pl.reflection / len,
            });
        }
        if s.simulation.second_order {
            let coord = |pt: &Point, ax: AxisName| match ax {
                AxisName::X => pt.x_m,
                AxisName::Y => pt.y_m,
                AxisName::Z => pt.z_m,
            };
            for (i, p1) in planes.iter().enumerate() {
                for (j, p2) in planes.iter().enumerate() {
                    if i == j {
                        continue;
                    }
                    let (ax1, ax2) = (s.planes[i].axis, s.planes[j].axis);
                    if ax1 == ax2 {
                        // Parallel planes: a path between them exists only when they
                        // lie on opposite sides of the antennas.
                        let s1 = coord(&a, ax1) - p1.position_m;
                        let s2 = coord(&a, ax2) - p2.position_m;
                        if s1 * s2 >= 0.0 {
                            continue;
                        }
                    }
                    let ip = p1.image_of(&p2.image_of(&p));
                    let ia = p2.image_of(&p1.image_of(&a));
                    let len = a.distance_m(&ip);
                    paths.push(Path {
                        kind: PathKind::DoubleBounce {
                            first: i,
                            second: j,
                        },
                        length_m: len,
                        depart: unit(sub(&ip, &a)),
                        arrive: unit(sub(&ia, &p)),
                        weight_per_m: p1.reflection * p2.reflection / len,
                    });
                }
            }
        }
        for (i, sc) in s.scatterers.iter().enumerate() {
            let q = sc.point();
            let (r1, r2) = (a.distance_m(&q), q.distance_m(&p));
            paths.push(Path {
                kind: PathKind::Scatter { scatterer: i },
                length_m: r1 + r2,
                depart: unit(sub(&q, &a)),
                arrive: unit(sub(&q, &p)),
                weight_per_m: (sc.rcs_m2 / (4.0 * PI)).sqrt() / (r1 * r2),
            });
        }
        let (f0, f1) = (s.sweep.start_hz, s.sweep.stop_hz);
        Self {
            paths,
            aut: AntennaModel::new(&s.aut, f0, f1),
            probe: AntennaModel::new(&s.probe, f0, f1),
            cable_delay_s: s.range.cable_delay_s,
        }
    }

    /// All paths, the direct one first.
    pub fn paths(&self) -> &[Path] {
        &self.paths
    }

    /// The AUT's model.
    pub fn aut(&self) -> &AntennaModel {
        &self.aut
    }

    /// The probe's model.
    pub fn probe(&self) -> &AntennaModel {
        &self.probe
    }

    /// One path's contribution at `f_hz` with the AUT at `angle_deg`.
    pub fn path_response(&self, path: &Path, f_hz: f64, angle_deg: f64) -> Complex64 {
        let lambda = SPEED_OF_LIGHT_M_S / f_hz;
        let g_aut = self.aut.field(f_hz, to_aut_frame(path.depart, angle_deg));
        let g_probe = self.probe.field(f_hz, to_probe_frame(path.arrive));
        let amp = path.weight_per_m * lambda / (4.0 * PI) * g_aut * g_probe;
        let phase = -2.0 * PI * f_hz * (path.delay_s() + self.cable_delay_s);
        Complex64::from_polar(amp, phase)
    }

    /// Noise-free S21 at `f_hz` with the AUT held at `angle_deg` (all paths).
    pub fn response(&self, f_hz: f64, angle_deg: f64) -> Complex64 {
        self.paths
            .iter()
            .map(|p| self.path_response(p, f_hz, angle_deg))
            .sum()
    }

    /// The free-space S21 (direct path only, no noise) at `f_hz`, `angle_deg`.
    pub fn free_space(&self, f_hz: f64, angle_deg: f64) -> Complex64 {
        self.path_response(&self.paths[0], f_hz, angle_deg)
    }
}

/// The ground truth: free-space S21 (direct path only, no noise, AUT held still) at each
/// angle (outer) and frequency (inner).
pub fn truth(s: &Scenario, frequencies_hz: &[f64], angles_deg: &[f64]) -> Vec<Vec<Complex64>> {
    let room = Room::new(s);
    angles_deg
        .iter()
        .map(|a| {
            frequencies_hz
                .iter()
                .map(|f| room.free_space(*f, *a))
                .collect()
        })
        .collect()
}

/// One leg of the turntable's motion.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Leg {
    /// Trapezoidal (or triangular) speed profile from `from` to `to`.
    Move {
        t0: f64,
        from: f64,
        to: f64,
        accel: f64,
        v_peak: f64,
        t_acc: f64,
        t_total: f64,
    },
    /// Standing still.
    Hold { t0: f64, angle: f64 },
}

impl Leg {
    fn t0(&self) -> f64 {
        match self {
            Leg::Move { t0, .. } | Leg::Hold { t0, .. } => *t0,
        }
    }

    fn motion(t0: f64, from: f64, to: f64, speed: f64, accel: f64) -> (Leg, f64) {
        let dist = (to - from).abs();
        let mut t_acc = speed / accel;
        let mut v_peak = speed;
        let t_cruise;
        if accel * t_acc * t_acc >= dist {
            t_acc = (dist / accel).sqrt();
            v_peak = accel * t_acc;
            t_cruise = 0.0;
        } else {
            t_cruise = (dist - accel * t_acc * t_acc) / speed;
        }
        let t_total = 2.0 * t_acc + t_cruise;
        (
            Leg::Move {
                t0,
                from,
                to,
                accel,
                v_peak,
                t_acc,
                t_total,
            },
            t0 + t_total,
        )
    }

    fn angle_at(&self, t: f64) -> f64 {
        match *self {
            Leg::Hold { angle, .. } => angle,
            Leg::Move {
                t0,
                from,
                to,
                accel,
                v_peak,
                t_acc,
                t_total,
            } => {
                let tau = (t - t0).clamp(0.0, t_total);
                let dist = (to - from).abs();
                let d = if tau < t_acc {
                    0.5 * accel * tau * tau
                } else if tau < t_total - t_acc {
                    0.5 * accel * t_acc * t_acc + v_peak * (tau - t_acc)
                } else {
                    let r = t_total - tau;
                    dist - 0.5 * accel * r * r
                };
                from + (to - from).signum() * d.clamp(0.0, dist)
            }
        }
    }
}

/// The scan's schedule: the turntable's motion and when each sweep starts.
#[derive(Debug, Clone)]
pub struct Timeline {
    legs: Vec<Leg>,
    sweeps_s: Vec<f64>,
    end_s: f64,
    sweep_duration_s: f64,
}

impl Timeline {
    /// The schedule of a scenario.
    pub fn new(s: &Scenario) -> Self {
        let q = &s.positioner;
        let dur = s.sweep.sweep_duration_s;
        let period = dur + s.sweep.sweep_gap_s;
        let mut legs = Vec::new();
        let mut sweeps = Vec::new();
        let end_s;
        match q.mode {
            Mode::Continuous => {
                let (leg, t1) = Leg::motion(
                    0.0,
                    q.start_deg,
                    q.stop_deg,
                    q.speed_deg_s,
                    q.acceleration_deg_s2,
                );
                legs.push(leg);
                legs.push(Leg::Hold {
                    t0: t1,
                    angle: q.stop_deg,
                });
                end_s = t1;
                let mut t = 0.0;
                while t + dur <= t1 && sweeps.len() <= crate::model::scenario::MAX_SWEEPS {
                    sweeps.push(t);
                    t += period;
                }
            }
            Mode::Step => {
                let step = q.step_deg.unwrap_or(1.0);
                let span = (q.stop_deg - q.start_deg).abs();
                let dir = (q.stop_deg - q.start_deg).signum();
                let n = (span / step + 1e-9).floor() as usize + 1;
                let n = n.min(crate::model::scenario::MAX_SWEEPS + 1);
                let mut t = 0.0;
                let mut prev = q.start_deg;
                for i in 0..n {
                    let angle = q.start_deg + dir * step * i as f64;
                    if i > 0 {
                        let (leg, t1) =
                            Leg::motion(t, prev, angle, q.speed_deg_s, q.acceleration_deg_s2);
                        legs.push(leg);
                        t = t1;
                    }
                    legs.push(Leg::Hold { t0: t, angle });
                    t += q.settle_s;
                    for _ in 0..q.sweeps_per_step {
                        sweeps.push(t);
                        t += period;
                    }
                    prev = angle;
                    if sweeps.len() > crate::model::scenario::MAX_SWEEPS {
                        break;
                    }
                }
                end_s = t;
            }
        }
        Self {
            legs,
            sweeps_s: sweeps,
            end_s,
            sweep_duration_s: dur,
        }
    }

    /// True turntable angle at time `t_s` (degrees, not quantized).
    pub fn angle_at(&self, t_s: f64) -> f64 {
        let i = self.legs.partition_point(|l| l.t0() <= t_s);
        let leg = if i == 0 {
            &self.legs[0]
        } else {
            &self.legs[i - 1]
        };
        leg.angle_at(t_s)
    }

    /// Start time of every sweep, s.
    pub fn sweep_starts_s(&self) -> &[f64] {
        &self.sweeps_s
    }

    /// When the motion (and the scan) ends, s.
    pub fn end_s(&self) -> f64 {
        self.end_s
    }

    /// Duration of one sweep, s.
    pub fn sweep_duration_s(&self) -> f64 {
        self.sweep_duration_s
    }
}

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
        t0_s + self.timeline.sweep_duration_s * k as f64 / self.freqs_hz.len().max(1) as f64
    }

    /// Simulates sweep `index` of the schedule (`None` past the last).
    pub fn sweep(&mut self, index: usize) -> Option<SimSweep> {
        let t0 = *self.timeline.sweeps_s.get(index)?;
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
            end_us: to_us(t0 + self.timeline.sweep_duration_s),
            s21,
        })
    }

    /// All positioner samples of the scan, every `sample_interval_s` from 0 to the end of
    /// the motion. Each carries the true angle at its instant quantized to encoder counts
    /// and a timestamp off by Gaussian jitter (kept strictly increasing).
    pub fn samples(&mut self) -> Vec<Sample> {
        let mut out = Vec::new();
        let cpr = f64::from(self.counts_per_turn);
        let n = (self.timeline.end_s / self.sample_interval_s).floor() as usize + 1;
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
    use crate::model::scenario::Scenario;

    fn lab() -> Scenario {
        Scenario::from_toml(include_str!("../../scenarios/demo-lab.toml")).unwrap()
    }

    #[test]
    fn continuous_motion_covers_the_span_with_limited_speed() {
        let s = lab();
        let tl = Timeline::new(&s);
        let q = &s.positioner;
        assert!((tl.angle_at(0.0) - q.start_deg).abs() < 1e-9);
        assert!((tl.angle_at(tl.end_s()) - q.stop_deg).abs() < 1e-9);
        let dt = 1e-3;
        let mut t = 0.0;
        while t < tl.end_s() {
            let v = (tl.angle_at(t + dt) - tl.angle_at(t)) / dt;
            assert!(v.abs() <= q.speed_deg_s * 1.0001, "speed {v} at {t}");
            t += 0.05;
        }
        // Trapezoid: total time = span/speed + speed/accel (common practice, no source).
        let want = (q.stop_deg - q.start_deg).abs() / q.speed_deg_s
            + q.speed_deg_s / q.acceleration_deg_s2;
        assert!((tl.end_s() - want).abs() < 1e-9);
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
    fn step_mode_holds_still_while_sweeping() {
        let mut s = lab();
        s.positioner.mode = Mode::Step;
        s.positioner.step_deg = Some(5.0);
        s.positioner.settle_s = 0.2;
        s.positioner.sweeps_per_step = 2;
        s.positioner.start_deg = -10.0;
        s.positioner.stop_deg = 10.0;
        s.validate().unwrap();
        let tl = Timeline::new(&s);
        assert_eq!(tl.sweep_starts_s().len(), 5 * 2);
        for &t in tl.sweep_starts_s() {
            let a = tl.angle_at(t);
            let b = tl.angle_at(t + s.sweep.sweep_duration_s);
            assert!((a - b).abs() < 1e-12);
            assert!(((a + 10.0) / 5.0 - ((a + 10.0) / 5.0).round()).abs() < 1e-9);
        }
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
    fn gains_match_textbook_directivities() {
        // Half-wave dipole D = 1.641 (2.15 dBi); cos^n power pattern D = 2(n+1) (see
        // shared REFERENCES: Balanis, Antenna Theory; cos^n computed).
        let f = 10e9;
        let half = SPEED_OF_LIGHT_M_S / f / 2.0;
        let d = AntennaModel::new(
            &Antenna::Dipole {
                length_m: half,
                axis: AxisName::Z,
            },
            f,
            f,
        );
        assert!(
            (d.boresight_gain_dbi(f) - 2.15).abs() < 0.02,
            "{}",
            d.boresight_gain_dbi(f)
        );
        let c = AntennaModel::new(&Antenna::CosPower { n: 4.0 }, f, f);
        assert!(
            (c.boresight_gain_dbi(f) - 10.0).abs() < 0.03,
            "{}",
            c.boresight_gain_dbi(f)
        );
        // Uniform aperture of many wavelengths: D ≈ 4πA/λ² (Balanis, Antenna Theory).
        let a = AntennaModel::new(
            &Antenna::Aperture {
                width_m: 0.2,
                height_m: 0.2,
                width_taper: Taper::Uniform,
                height_taper: Taper::Uniform,
            },
            f,
            f,
        );
        let lambda = SPEED_OF_LIGHT_M_S / f;
        let want = 10.0 * (4.0 * PI * 0.04 / (lambda * lambda)).log10();
        assert!(
            (a.boresight_gain_dbi(f) - want).abs() < 0.5,
            "{} vs {want}",
            a.boresight_gain_dbi(f)
        );
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
