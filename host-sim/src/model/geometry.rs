//! The paths from the AUT to the probe in a scenario's room: the direct path, one bounce
//! off each plane and (when `[simulation] second_order` is set) two bounces off two
//! different planes by the image method, and one path via each point scatterer; and the
//! frames the antennas see them in.
//!
//! Path lengths, the double-bounce images and the scatterer echo level come from the core
//! (`sweepgate::plan`), the same functions the planner uses. Limits: planes are infinite
//! and reflect with a real, angle- and polarization-independent coefficient; second order
//! means two different planes (parallel pairs only when they enclose the antennas); no
//! diffraction; antennas are points at their phase centres.

use sweepgate::plan::{double_bounces, scatterer_echo_per_m, Point, SPEED_OF_LIGHT_M_S};

use crate::model::scenario::Scenario;

/// A direction or displacement in the room, metres or unit length: `[x, y, z]`.
pub type Vec3 = [f64; 3];

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

/// Every path of a (validated) scenario: the direct one first, then the single bounces in
/// plane order, the double bounces (first plane outer, second inner), the scatterers.
pub fn paths(s: &Scenario) -> Vec<Path> {
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
        let len = pl.bounce_path_m(&a, &p);
        paths.push(Path {
            kind: PathKind::Bounce { plane: i },
            length_m: len,
            depart: unit(sub(&pl.image_of(&p), &a)),
            arrive: unit(sub(&pl.image_of(&a), &p)),
            weight_per_m: pl.reflection / len,
        });
    }
    if s.simulation.second_order {
        for d in double_bounces(&planes, &a, &p).filter(|d| d.exists) {
            paths.push(Path {
                kind: PathKind::DoubleBounce {
                    first: d.first as usize,
                    second: d.second as usize,
                },
                length_m: d.path_m,
                depart: unit(sub(&d.image_of_b, &a)),
                arrive: unit(sub(&d.image_of_a, &p)),
                weight_per_m: d.reflection / d.path_m,
            });
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
            weight_per_m: scatterer_echo_per_m(sc.rcs_m2, r1, r2),
        });
    }
    paths
}

/// Turns a room direction into the AUT's frame at positioner angle `angle_deg`: the AUT
/// turns about the vertical axis, so a room direction d is seen as Rz(−φ)·d.
pub fn to_aut_frame(d: Vec3, angle_deg: f64) -> Vec3 {
    let (s, c) = angle_deg.to_radians().sin_cos();
    [d[0] * c + d[1] * s, -d[0] * s + d[1] * c, d[2]]
}

/// Turns a room arrival direction into the probe's frame (boresight towards −x).
pub fn to_probe_frame(d: Vec3) -> Vec3 {
    [-d[0], -d[1], d[2]]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn double_bounces_of_the_lab_match_closed_forms() {
        // Image method (common practice, no source), AUT and probe at height h = 1.4 m,
        // R = 4 m apart. Floor z = 0 then left wall y = 1.8: the probe's image (R, 3.6, −h)
        // gives √(R² + 3.6² + (2h)²). Floor then ceiling z = 3: the probe imaged in the
        // ceiling (6 − h), then the floor (h − 6), gives √(R² + 6²). Left and right walls
        // enclose the antennas: 2·1.8 + 2·1.8 = 7.2 m across.
        let mut s = crate::model::scenario::Scenario::from_toml(include_str!(
            "../../scenarios/demo-lab.toml"
        ))
        .unwrap();
        s.simulation.second_order = true;
        let all = paths(&s);
        let find = |first, second| {
            all.iter()
                .find(|p| p.kind == PathKind::DoubleBounce { first, second })
                .map(|p| (p.length_m, p.weight_per_m))
        };
        let (r, h) = (4.0f64, 1.4f64);
        let (len, w) = find(0, 2).unwrap();
        assert!((len - (r * r + 3.6f64.powi(2) + 4.0 * h * h).sqrt()).abs() < 1e-12);
        assert!((w - (-0.3 * -0.4) / len).abs() < 1e-15);
        let (len, _) = find(0, 1).unwrap();
        assert!((len - (r * r + 36.0f64).sqrt()).abs() < 1e-12);
        let (len, _) = find(2, 3).unwrap();
        assert!((len - (r * r + 7.2f64.powi(2)).sqrt()).abs() < 1e-12);
        // Six planes in three parallel pairs, each pair enclosing the antennas: every
        // ordered pair of different planes gives a path.
        let doubles = all
            .iter()
            .filter(|p| matches!(p.kind, PathKind::DoubleBounce { .. }))
            .count();
        assert_eq!(doubles, 6 * 5);
        s.simulation.second_order = false;
        assert_eq!(paths(&s).len(), 1 + 6 + 1);
    }
}
