//! The scan's schedule: the turntable's motion (trapezoidal speed profile, or steps with
//! settling) and when each sweep starts. Each frequency point is measured at its own
//! instant, so the angle moves during a sweep of a continuous scan.

use crate::model::scenario::{Mode, Positioner, Scenario, MAX_SWEEPS};

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
        let dur = s.sweep.sweep_duration_s;
        let period = dur + s.sweep.sweep_gap_s;
        let (legs, sweeps_s, end_s) = match s.positioner.mode {
            Mode::Continuous => Self::continuous(&s.positioner, dur, period),
            Mode::Step => Self::steps(&s.positioner, period),
        };
        Self {
            legs,
            sweeps_s,
            end_s,
            sweep_duration_s: dur,
        }
    }

    /// One move from start to stop, sweeps back to back while it lasts: (legs, sweep
    /// starts, end).
    fn continuous(q: &Positioner, dur: f64, period: f64) -> (Vec<Leg>, Vec<f64>, f64) {
        let (leg, t1) = Leg::motion(
            0.0,
            q.start_deg,
            q.stop_deg,
            q.speed_deg_s,
            q.acceleration_deg_s2,
        );
        let legs = vec![
            leg,
            Leg::Hold {
                t0: t1,
                angle: q.stop_deg,
            },
        ];
        let mut sweeps = Vec::new();
        let mut t = 0.0;
        while t + dur <= t1 && sweeps.len() <= MAX_SWEEPS {
            sweeps.push(t);
            t += period;
        }
        (legs, sweeps, t1)
    }

    /// Move to each step angle, settle, take the step's sweeps: (legs, sweep starts, end).
    fn steps(q: &Positioner, period: f64) -> (Vec<Leg>, Vec<f64>, f64) {
        let (mut legs, mut sweeps) = (Vec::new(), Vec::new());
        let mut t = 0.0;
        let mut prev = q.start_deg;
        for (i, angle) in q.step_angles_deg().into_iter().enumerate() {
            if i > 0 {
                let (leg, t1) = Leg::motion(t, prev, angle, q.speed_deg_s, q.acceleration_deg_s2);
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
            if sweeps.len() > MAX_SWEEPS {
                break;
            }
        }
        (legs, sweeps, t)
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

#[cfg(test)]
mod tests {
    use super::*;

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
}
