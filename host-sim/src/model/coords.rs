//! The antenna coordinate system, positioner axes and the definitions of co- and
//! cross-polarisation.
//!
//! # The antenna frame
//!
//! Sphere analysis works in the antenna frame of IEEE Std 149: the AUT's boresight is `+z`,
//! `x` is the reference polarisation direction at boresight (horizontal on the range), `y`
//! completes a right-handed frame (vertical on the range). A direction is given by the polar
//! angle θ from `+z` and the azimuth φ from `+x` towards `+y`:
//!
//! ```text
//! r̂ = (sin θ cos φ, sin θ sin φ, cos θ)
//! θ̂ = (cos θ cos φ, cos θ sin φ, −sin θ)
//! φ̂ = (−sin φ, cos φ, 0)
//! ```
//!
//! A far field is E = E_θ θ̂ + E_φ φ̂ (complex). The product's room frame (x from the AUT to
//! the probe, y left, z up, see [`crate::model::scenario`]) maps onto it by
//! [`room_to_antenna`]: the room's `x` is the antenna's `z` (boresight), the room's `y` the
//! antenna's `x`, the room's `z` (up) the antenna's `y`.
//!
//! # Positioner axes
//!
//! [`Axes`] names a pair of positioner angles and converts them to and from (θ, φ). Every
//! set has boresight at (0, 0):
//!
//! | axes | first, second | direction (x, y, z) |
//! |---|---|---|
//! | `ThetaPhi` | θ, φ | (sin θ cos φ, sin θ sin φ, cos θ) |
//! | `AzimuthOverElevation` | Az, El | (sin Az cos El, sin El, cos Az cos El) |
//! | `ElevationOverAzimuth` | Az, El | (sin Az, cos Az sin El, cos Az cos El) |
//! | `RollOverAzimuth` | Az (signed θ), roll (φ) | (sin Az cos r, sin Az sin r, cos Az) |
//!
//! On an azimuth-over-elevation positioner the azimuth axis rides on the elevation axis, so
//! an azimuth cut at fixed elevation traces a cone about `y`; on elevation-over-azimuth the
//! elevation cut at fixed azimuth is a cone about `x`. Roll-over-azimuth (the AUT rolls
//! about its boresight, the turntable turns below it) measures great circles through the
//! pole: each roll angle is one φ cut, azimuth being θ with its sign (negative azimuth is
//! θ = |Az| at φ + 180°).
//!
//! # Co- and cross-polarisation (Ludwig 1973)
//!
//! A. C. Ludwig, "The definition of cross polarization", IEEE Trans. Antennas Propag.
//! AP-21, 1973, gives three pairs of reference and cross unit vectors for an AUT whose
//! reference polarisation is along `x` at boresight ([`Definition`]):
//!
//! - first: the fixed rectangular vectors x̂ and ŷ, projected on the field;
//! - second: the unit vectors along the positioner's lines (Az/El or El/Az): on
//!   azimuth-over-elevation the co vector is the tangent of the azimuth line and the cross
//!   vector that of the elevation line, on elevation-over-azimuth the same two tangents
//!   (each set then names the frame the positioner measures natively);
//! - third (the default): co = cos φ θ̂ − sin φ φ̂, cross = sin φ θ̂ + cos φ φ̂, what a
//!   probe sees when it is rotated with φ, as in a roll-over-azimuth or a φ-cut
//!   measurement. A Huygens source has no cross-polar component under it.
//!
//! A reference polarisation along `y` ([`Reference::Y`]) turns each pair by 90° about the
//! boresight: co_y = cross_x, cross_y = −co_x.

use std::f64::consts::PI;

use num_complex::Complex64;

/// A direction or vector in the antenna frame, `[x, y, z]`.
pub type Vec3 = [f64; 3];

fn dot(a: Vec3, b: Vec3) -> f64 {
    a[0] * b[0] + a[1] * b[1] + a[2] * b[2]
}

/// The unit vectors (r̂, θ̂, φ̂) at (θ, φ), degrees.
///
/// ```
/// use sweepgate_host::model::coords::unit_vectors;
/// let (r, t, p) = unit_vectors(90.0, 0.0);
/// assert!((r[0] - 1.0).abs() < 1e-12 && (t[2] + 1.0).abs() < 1e-12 && (p[1] - 1.0).abs() < 1e-12);
/// ```
pub fn unit_vectors(theta_deg: f64, phi_deg: f64) -> (Vec3, Vec3, Vec3) {
    let (st, ct) = theta_deg.to_radians().sin_cos();
    let (sp, cp) = phi_deg.to_radians().sin_cos();
    (
        [st * cp, st * sp, ct],
        [ct * cp, ct * sp, -st],
        [-sp, cp, 0.0],
    )
}

/// (θ, φ) in degrees of a direction (need not be unit length): θ in 0…180, φ in 0…360. At
/// the poles φ is 0.
pub fn theta_phi_of(d: Vec3) -> (f64, f64) {
    let rho = (d[0] * d[0] + d[1] * d[1]).sqrt();
    let theta = rho.atan2(d[2]).to_degrees();
    let phi = if rho < 1e-15 {
        0.0
    } else {
        d[1].atan2(d[0]).to_degrees().rem_euclid(360.0)
    };
    (theta, phi)
}

/// A room-frame direction (x to the probe, y left, z up) in the antenna frame (see the
/// module notes): `(y, z, x)`.
pub fn room_to_antenna(d: Vec3) -> Vec3 {
    [d[1], d[2], d[0]]
}

/// An antenna-frame direction in the room frame: the inverse of [`room_to_antenna`].
pub fn antenna_to_room(d: Vec3) -> Vec3 {
    [d[2], d[0], d[1]]
}

/// A pair of positioner angles (see the module notes for each set's formula).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Axes {
    /// θ and φ themselves.
    ThetaPhi,
    /// Azimuth over elevation: (Az, El).
    AzimuthOverElevation,
    /// Elevation over azimuth: (Az, El).
    ElevationOverAzimuth,
    /// Roll over azimuth: (Az, roll); Az is θ with its sign, roll is φ.
    RollOverAzimuth,
}

impl Axes {
    /// The antenna-frame unit direction of positioner angles (`first_deg`, `second_deg`).
    pub fn direction(self, first_deg: f64, second_deg: f64) -> Vec3 {
        let (s1, c1) = first_deg.to_radians().sin_cos();
        let (s2, c2) = second_deg.to_radians().sin_cos();
        match self {
            Axes::ThetaPhi | Axes::RollOverAzimuth => [s1 * c2, s1 * s2, c1],
            Axes::AzimuthOverElevation => [s1 * c2, s2, c1 * c2],
            Axes::ElevationOverAzimuth => [s1, c1 * s2, c1 * c2],
        }
    }

    /// (θ, φ) in degrees of positioner angles (`first_deg`, `second_deg`).
    ///
    /// ```
    /// use sweepgate_host::model::coords::Axes;
    /// // 30° of azimuth at no elevation is θ = 30°, φ = 0°.
    /// let (t, p) = Axes::AzimuthOverElevation.to_theta_phi(30.0, 0.0);
    /// assert!((t - 30.0).abs() < 1e-9 && p.abs() < 1e-9);
    /// ```
    pub fn to_theta_phi(self, first_deg: f64, second_deg: f64) -> (f64, f64) {
        theta_phi_of(self.direction(first_deg, second_deg))
    }

    /// Positioner angles of (θ, φ) in degrees: for `AzimuthOverElevation` and
    /// `ElevationOverAzimuth` Az in −180…180 and El in −90…90; for `RollOverAzimuth` Az in
    /// 0…180 (θ) and roll = φ; for `ThetaPhi` θ and φ as [`theta_phi_of`] gives them.
    pub fn from_theta_phi(self, theta_deg: f64, phi_deg: f64) -> (f64, f64) {
        let (r, _, _) = unit_vectors(theta_deg, phi_deg);
        let [x, y, z] = r;
        match self {
            Axes::ThetaPhi | Axes::RollOverAzimuth => theta_phi_of(r),
            Axes::AzimuthOverElevation => {
                let el = y.clamp(-1.0, 1.0).asin();
                (x.atan2(z).to_degrees(), el.to_degrees())
            }
            Axes::ElevationOverAzimuth => {
                let az = x.clamp(-1.0, 1.0).asin();
                (az.to_degrees(), y.atan2(z).to_degrees())
            }
        }
    }
}

/// Which of Ludwig's three definitions of co- and cross-polarisation (module notes).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Definition {
    /// Ludwig's first: fixed rectangular vectors x̂, ŷ.
    First,
    /// Ludwig's second on an azimuth-over-elevation positioner.
    SecondAzimuthOverElevation,
    /// Ludwig's second on an elevation-over-azimuth positioner.
    SecondElevationOverAzimuth,
    /// Ludwig's third (the default).
    #[default]
    Third,
}

/// The AUT's reference polarisation at boresight.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Reference {
    /// Along the antenna frame's `x` (horizontal on the range).
    #[default]
    X,
    /// Along `y` (vertical on the range).
    Y,
}

/// The co- and cross-polar unit vectors at (θ, φ) as (θ, φ) components:
/// `([co_θ, co_φ], [cross_θ, cross_φ])`. For the first definition they are the
/// projections of x̂ and ŷ on the tangent plane (not unit length off boresight).
pub fn co_cross_vectors(
    definition: Definition,
    reference: Reference,
    theta_deg: f64,
    phi_deg: f64,
) -> ([f64; 2], [f64; 2]) {
    let (r, t, p) = unit_vectors(theta_deg, phi_deg);
    let (sp, cp) = phi_deg.to_radians().sin_cos();
    let (co, cross): (Vec3, Vec3) = match definition {
        Definition::First => ([1.0, 0.0, 0.0], [0.0, 1.0, 0.0]),
        Definition::SecondAzimuthOverElevation => {
            let (az, el) = Axes::AzimuthOverElevation.from_theta_phi(theta_deg, phi_deg);
            let (sa, ca) = az.to_radians().sin_cos();
            let (se, ce) = el.to_radians().sin_cos();
            ([ca, 0.0, -sa], [-sa * se, ce, -ca * se])
        }
        Definition::SecondElevationOverAzimuth => {
            let (az, el) = Axes::ElevationOverAzimuth.from_theta_phi(theta_deg, phi_deg);
            let (sa, ca) = az.to_radians().sin_cos();
            let (se, ce) = el.to_radians().sin_cos();
            ([ca, -sa * se, -sa * ce], [0.0, ce, -se])
        }
        Definition::Third => {
            let co = [0, 1, 2].map(|i| cp * t[i] - sp * p[i]);
            let cross = [0, 1, 2].map(|i| sp * t[i] + cp * p[i]);
            (co, cross)
        }
    };
    debug_assert!(definition == Definition::First || dot(co, r).abs() < 1e-9);
    let co2 = [dot(co, t), dot(co, p)];
    let cross2 = [dot(cross, t), dot(cross, p)];
    match reference {
        Reference::X => (co2, cross2),
        Reference::Y => (cross2, [-co2[0], -co2[1]]),
    }
}

/// The co- and cross-polar components of a far field (E_θ, E_φ) at (θ, φ):
/// `(co, cross)`, each the field's projection on the definition's unit vector.
///
/// ```
/// use num_complex::Complex64;
/// use sweepgate_host::model::coords::{co_cross, Definition, Reference};
/// // A field along θ̂ in the φ = 0 plane is all co-polar for an x reference.
/// let one = Complex64::new(1.0, 0.0);
/// let (co, cross) = co_cross(Definition::Third, Reference::X, 40.0, 0.0, one, Complex64::default());
/// assert!((co - one).norm() < 1e-12 && cross.norm() < 1e-12);
/// ```
pub fn co_cross(
    definition: Definition,
    reference: Reference,
    theta_deg: f64,
    phi_deg: f64,
    e_theta: Complex64,
    e_phi: Complex64,
) -> (Complex64, Complex64) {
    let (co, cross) = co_cross_vectors(definition, reference, theta_deg, phi_deg);
    (
        e_theta * co[0] + e_phi * co[1],
        e_theta * cross[0] + e_phi * cross[1],
    )
}

/// The field (E_θ, E_φ) back from Ludwig-3 co and cross components (their unit vectors are
/// orthonormal, so this is the transpose of [`co_cross`]).
pub fn from_co_cross_third(
    reference: Reference,
    theta_deg: f64,
    phi_deg: f64,
    co: Complex64,
    cross: Complex64,
) -> (Complex64, Complex64) {
    let (c, x) = co_cross_vectors(Definition::Third, reference, theta_deg, phi_deg);
    (co * c[0] + cross * x[0], co * c[1] + cross * x[1])
}

/// The far field (E_θ, E_φ) from its (co, cross) components under `definition`, the
/// inverse of [`co_cross`]; `None` where the definition's two vectors are parallel (the
/// first definition on θ = 90°, where x̂ and ŷ both project onto φ̂).
pub fn field_from_co_cross(
    definition: Definition,
    reference: Reference,
    theta_deg: f64,
    phi_deg: f64,
    co: Complex64,
    cross: Complex64,
) -> Option<(Complex64, Complex64)> {
    let (c, x) = co_cross_vectors(definition, reference, theta_deg, phi_deg);
    let det = c[0] * x[1] - c[1] * x[0];
    if det.abs() < 1e-12 {
        return None;
    }
    Some((
        (co * x[1] - cross * c[1]) / det,
        (cross * c[0] - co * x[0]) / det,
    ))
}

/// (co, cross) measured under one definition (e.g. Ludwig's second, what an
/// azimuth-over-elevation positioner with a fixed probe measures natively) in another
/// (e.g. the third, the report's default); `None` where `from` cannot be inverted.
///
/// ```
/// use num_complex::Complex64;
/// use sweepgate_host::model::coords::{convert, Definition, Reference};
/// let (co, cross) = (Complex64::new(1.0, 0.0), Complex64::new(0.0, 0.0));
/// // On the principal planes the second and third definitions agree.
/// let (c3, x3) = convert(Definition::SecondElevationOverAzimuth, Definition::Third,
///     Reference::X, 30.0, 0.0, co, cross).unwrap();
/// assert!((c3 - co).norm() < 1e-12 && x3.norm() < 1e-12);
/// ```
pub fn convert(
    from: Definition,
    to: Definition,
    reference: Reference,
    theta_deg: f64,
    phi_deg: f64,
    co: Complex64,
    cross: Complex64,
) -> Option<(Complex64, Complex64)> {
    let (et, ep) = field_from_co_cross(from, reference, theta_deg, phi_deg, co, cross)?;
    Some(co_cross(to, reference, theta_deg, phi_deg, et, ep))
}

/// The angle in radians between two directions, atan2(|a × b|, a · b) (accurate near 0
/// and π, where acos is not).
pub fn angle_between(a: Vec3, b: Vec3) -> f64 {
    let c = [
        a[1] * b[2] - a[2] * b[1],
        a[2] * b[0] - a[0] * b[2],
        a[0] * b[1] - a[1] * b[0],
    ];
    dot(c, c).sqrt().atan2(dot(a, b)).min(PI)
}

#[cfg(test)]
mod tests {
    use super::*;

    const ALL: [Axes; 4] = [
        Axes::ThetaPhi,
        Axes::AzimuthOverElevation,
        Axes::ElevationOverAzimuth,
        Axes::RollOverAzimuth,
    ];

    #[test]
    fn unit_vectors_are_a_right_handed_orthonormal_set() {
        for &(t, p) in &[(10.0, 20.0), (90.0, 135.0), (170.0, 300.0)] {
            let (r, th, ph) = unit_vectors(t, p);
            for (a, b) in [(r, th), (r, ph), (th, ph)] {
                assert!(dot(a, b).abs() < 1e-12);
            }
            // r̂ × θ̂ = φ̂
            let c = [
                r[1] * th[2] - r[2] * th[1],
                r[2] * th[0] - r[0] * th[2],
                r[0] * th[1] - r[1] * th[0],
            ];
            assert!(angle_between(c, ph) < 1e-9);
        }
    }

    #[test]
    fn positioner_angles_round_trip_through_theta_phi() {
        for axes in ALL {
            for t in [0.5, 15.0, 45.0, 89.0, 91.0, 135.0, 179.5] {
                for p in [0.0, 30.0, 95.0, 180.0, 250.0, 359.0] {
                    let (a, b) = axes.from_theta_phi(t, p);
                    let back = axes.to_theta_phi(a, b);
                    let (d0, d1) = (unit_vectors(t, p).0, unit_vectors(back.0, back.1).0);
                    assert!(
                        angle_between(d0, d1) < 1e-9,
                        "{axes:?} ({t}, {p}) → ({a}, {b})"
                    );
                    assert!(angle_between(d0, axes.direction(a, b)) < 1e-9);
                }
            }
        }
        // Boresight is (0, 0) on every set.
        for axes in ALL {
            assert!(angle_between(axes.direction(0.0, 0.0), [0.0, 0.0, 1.0]) < 1e-12);
        }
        // Az-over-El: pure elevation is the y–z plane (φ = 90°); El-over-Az: pure azimuth
        // the x–z plane (φ = 0°).
        let (t, p) = Axes::AzimuthOverElevation.to_theta_phi(0.0, 30.0);
        assert!((t - 30.0).abs() < 1e-9 && (p - 90.0).abs() < 1e-9);
        let (t, p) = Axes::ElevationOverAzimuth.to_theta_phi(-30.0, 0.0);
        assert!((t - 30.0).abs() < 1e-9 && (p - 180.0).abs() < 1e-9);
        // Roll-over-azimuth: negative azimuth is the other half of the same great circle.
        let (t, p) = Axes::RollOverAzimuth.to_theta_phi(-40.0, 30.0);
        assert!((t - 40.0).abs() < 1e-9 && (p - 210.0).abs() < 1e-9);
    }

    #[test]
    fn room_and_antenna_frames_map_boresight_and_up() {
        let up = room_to_antenna([0.0, 0.0, 1.0]);
        assert_eq!(up, [0.0, 1.0, 0.0]);
        assert_eq!(room_to_antenna([1.0, 0.0, 0.0]), [0.0, 0.0, 1.0]);
        let d = [0.3, -0.5, 0.81];
        assert_eq!(antenna_to_room(room_to_antenna(d)), d);
        // Right-handed: room x × y = z maps to antenna z × x = y.
    }

    #[test]
    fn every_definition_agrees_at_boresight_and_stays_orthogonal() {
        for def in [
            Definition::First,
            Definition::SecondAzimuthOverElevation,
            Definition::SecondElevationOverAzimuth,
            Definition::Third,
        ] {
            let (co, cross) = co_cross_vectors(def, Reference::X, 1e-6, 0.0);
            assert!((co[0] - 1.0).abs() < 1e-9 && co[1].abs() < 1e-9, "{def:?}");
            assert!(
                cross[0].abs() < 1e-9 && (cross[1] - 1.0).abs() < 1e-9,
                "{def:?}"
            );
            if def != Definition::First {
                for &(t, p) in &[(30.0, 20.0), (80.0, 135.0), (120.0, 300.0)] {
                    let (c, x) = co_cross_vectors(def, Reference::X, t, p);
                    assert!((c[0] * x[0] + c[1] * x[1]).abs() < 1e-12, "{def:?}");
                    assert!((c[0].hypot(c[1]) - 1.0).abs() < 1e-12, "{def:?}");
                    assert!((x[0].hypot(x[1]) - 1.0).abs() < 1e-12, "{def:?}");
                }
            }
        }
        // A y reference swaps the roles: co_y = cross_x.
        let (cx, xx) = co_cross_vectors(Definition::Third, Reference::X, 50.0, 70.0);
        let (cy, xy) = co_cross_vectors(Definition::Third, Reference::Y, 50.0, 70.0);
        assert_eq!(cy, xx);
        assert_eq!(xy, [-cx[0], -cx[1]]);
        let one = Complex64::new(0.3, -0.7);
        let two = Complex64::new(-0.2, 0.1);
        let (et, ep) = from_co_cross_third(Reference::X, 50.0, 70.0, one, two);
        let (co, cross) = co_cross(Definition::Third, Reference::X, 50.0, 70.0, et, ep);
        assert!((co - one).norm() < 1e-12 && (cross - two).norm() < 1e-12);
    }

    #[test]
    fn every_definition_converts_into_every_other() {
        let defs = [
            Definition::First,
            Definition::SecondAzimuthOverElevation,
            Definition::SecondElevationOverAzimuth,
            Definition::Third,
        ];
        let (et, ep) = (Complex64::new(0.4, -0.3), Complex64::new(-0.1, 0.8));
        for &(t, p) in &[(20.0, 30.0), (70.0, 100.0), (130.0, 250.0)] {
            for reference in [Reference::X, Reference::Y] {
                for from in defs {
                    let (c, x) = co_cross(from, reference, t, p, et, ep);
                    let (bt, bp) = field_from_co_cross(from, reference, t, p, c, x).unwrap();
                    assert!((bt - et).norm() < 1e-12 && (bp - ep).norm() < 1e-12);
                    for to in defs {
                        let want = co_cross(to, reference, t, p, et, ep);
                        let got = convert(from, to, reference, t, p, c, x).unwrap();
                        assert!((got.0 - want.0).norm() < 1e-12, "{from:?} → {to:?}");
                        assert!((got.1 - want.1).norm() < 1e-12, "{from:?} → {to:?}");
                    }
                }
            }
        }
        // The first definition degenerates on θ = 90° (x̂ and ŷ both project onto φ̂
        // there, as cos θ = 0 removes their θ̂ parts).
        let one = Complex64::new(1.0, 0.0);
        assert!(
            field_from_co_cross(Definition::First, Reference::X, 90.0, 45.0, one, one).is_none()
        );
    }
}
