//! Range geometry: points, axis-aligned reflecting planes, point scatterers, and the paths
//! between the AUT and the probe by the image method.
//!
//! The planner and the host's room simulator both take their paths from here, so a path
//! length or an echo level is computed in one place.

use core::f64::consts::PI;

/// Speed of light in vacuum, m/s (SI definition, exact).
pub const SPEED_OF_LIGHT_M_S: f64 = 299_792_458.0;

/// A point in the range, metres.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Point {
    /// Towards the probe.
    pub x_m: f64,
    /// To the left, looking from AUT to probe.
    pub y_m: f64,
    /// Up from the floor.
    pub z_m: f64,
}

impl Point {
    /// A point from its coordinates.
    pub const fn new(x_m: f64, y_m: f64, z_m: f64) -> Self {
        Self { x_m, y_m, z_m }
    }

    /// Straight-line distance to `other`.
    pub fn distance_m(&self, other: &Point) -> f64 {
        let (dx, dy, dz) = (
            other.x_m - self.x_m,
            other.y_m - self.y_m,
            other.z_m - self.z_m,
        );
        libm::sqrt(dx * dx + dy * dy + dz * dz)
    }
}

/// The axis a reflecting plane is perpendicular to.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Axis {
    /// A wall across the range (behind the AUT or behind the probe): x = const.
    X,
    /// A side wall: y = const.
    Y,
    /// Floor or ceiling: z = const.
    Z,
}

/// An infinite, axis-aligned reflecting plane.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Plane {
    /// Which coordinate is constant on the plane.
    pub axis: Axis,
    /// Value of that coordinate, metres.
    pub position_m: f64,
    /// Field reflection coefficient (real, −1…1; −1 is a perfect conductor for the
    /// polarization parallel to the plane).
    pub reflection: f64,
}

impl Plane {
    /// The coordinate of `p` along this plane's axis.
    fn coordinate(&self, p: &Point) -> f64 {
        match self.axis {
            Axis::X => p.x_m,
            Axis::Y => p.y_m,
            Axis::Z => p.z_m,
        }
    }

    /// Mirror image of `p` in this plane.
    pub fn image_of(&self, p: &Point) -> Point {
        let mut q = *p;
        match self.axis {
            Axis::X => q.x_m = 2.0 * self.position_m - p.x_m,
            Axis::Y => q.y_m = 2.0 * self.position_m - p.y_m,
            Axis::Z => q.z_m = 2.0 * self.position_m - p.z_m,
        }
        q
    }

    /// Length of the single-bounce path from `a` via this plane to `b` (image method):
    /// the distance from `a` to the image of `b`.
    pub fn bounce_path_m(&self, a: &Point, b: &Point) -> f64 {
        a.distance_m(&self.image_of(b))
    }

    /// Where the single-bounce path from `a` to `b` meets the plane, or `None` when both
    /// points are not strictly on the same side of it (no specular bounce exists).
    pub fn bounce_point(&self, a: &Point, b: &Point) -> Option<Point> {
        let (da, db) = (
            self.coordinate(a) - self.position_m,
            self.coordinate(b) - self.position_m,
        );
        if da * db <= 0.0 {
            return None;
        }
        let img = self.image_of(b);
        let t = da / (da + db);
        Some(Point::new(
            a.x_m + t * (img.x_m - a.x_m),
            a.y_m + t * (img.y_m - a.y_m),
            a.z_m + t * (img.z_m - a.z_m),
        ))
    }
}

/// A second-order path: from `a` off plane `first`, then off plane `second`, to `b`, by the
/// image method.
///
/// ```
/// use sweepgate::plan::{double_bounces, Axis, Plane, Point};
/// let floor = Plane { axis: Axis::Z, position_m: 0.0, reflection: -0.5 };
/// let ceiling = Plane { axis: Axis::Z, position_m: 3.0, reflection: -0.4 };
/// let (a, b) = (Point::new(0.0, 0.0, 1.0), Point::new(4.0, 0.0, 1.0));
/// let planes = [floor, ceiling];
/// let paths: Vec<_> = double_bounces(&planes, &a, &b).collect();
/// assert_eq!(paths.len(), 2);
/// // Floor, then ceiling: the probe imaged in the ceiling (z = 5), then in the floor
/// // (z = −5), lies 4 m along and 6 m below the AUT.
/// assert!((paths[0].path_m - (16.0f64 + 36.0).sqrt()).abs() < 1e-12);
/// assert!(paths[0].exists && (paths[0].reflection - 0.2).abs() < 1e-12);
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct DoubleBounce {
    /// Index of the plane met first (nearer `a` along the path).
    pub first: u32,
    /// Index of the plane met second (nearer `b`).
    pub second: u32,
    /// `b` imaged in `second`, then in `first`: the path leaves `a` towards it, and its
    /// distance from `a` is the path length.
    pub image_of_b: Point,
    /// `a` imaged in `first`, then in `second`: the path arrives at `b` from it.
    pub image_of_a: Point,
    /// Path length, metres.
    pub path_m: f64,
    /// Product of the two planes' reflection coefficients.
    pub reflection: f64,
    /// `false` when the two planes are parallel and on the same side of `a`: no such path
    /// exists (the nearer plane hides the farther one). Planes on different axes, and
    /// parallel planes enclosing `a`, always give a path.
    pub exists: bool,
}

impl DoubleBounce {
    /// The path from `a` off `planes[first]`, then off `planes[second]`, to `b`; `None` when
    /// an index is out of range.
    pub fn new(
        planes: &[Plane],
        first: usize,
        second: usize,
        a: &Point,
        b: &Point,
    ) -> Option<Self> {
        let (p1, p2) = (planes.get(first)?, planes.get(second)?);
        let image_of_b = p1.image_of(&p2.image_of(b));
        let image_of_a = p2.image_of(&p1.image_of(a));
        let exists = p1.axis != p2.axis
            || (p1.coordinate(a) - p1.position_m) * (p2.coordinate(a) - p2.position_m) < 0.0;
        Some(Self {
            first: u32::try_from(first).unwrap_or(u32::MAX),
            second: u32::try_from(second).unwrap_or(u32::MAX),
            image_of_b,
            image_of_a,
            path_m: a.distance_m(&image_of_b),
            reflection: p1.reflection * p2.reflection,
            exists,
        })
    }
}

/// Every second-order path between two different planes, first plane in the outer order
/// and second plane in the inner one: `(0, 1), (0, 2), …, (1, 0), (1, 2), …`. Paths that
/// cannot exist are included with [`DoubleBounce::exists`] false. No allocation.
pub fn double_bounces<'a>(
    planes: &'a [Plane],
    a: &Point,
    b: &Point,
) -> impl Iterator<Item = DoubleBounce> + 'a {
    let (a, b) = (*a, *b);
    let n = planes.len();
    (0..n).flat_map(move |i| {
        (0..n)
            .filter(move |&j| j != i)
            .filter_map(move |j| DoubleBounce::new(planes, i, j, &a, &b))
    })
}

/// Field of a point scatterer's echo per metre of path, from the radar equation:
/// √(σ/4π)/(r₁·r₂) for a bistatic radar cross-section σ (m²) at distances r₁ from the AUT
/// and r₂ from the probe. Times λ/(4π) and the antenna patterns it is the echo's S21, in
/// the same way as 1/R times λ/(4π) is the direct path's (Friis).
pub fn scatterer_echo_per_m(rcs_m2: f64, aut_distance_m: f64, probe_distance_m: f64) -> f64 {
    libm::sqrt(rcs_m2 / (4.0 * PI)) / (aut_distance_m * probe_distance_m)
}

/// A point scatterer (mast, fixture, cable tray): its echo path is |AUT − S| + |S − probe|.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Scatterer {
    /// Where it is.
    pub position: Point,
    /// Field reflection coefficient relative to the direct path (used for reporting only).
    pub reflection: f64,
}

impl Scatterer {
    /// A scatterer of bistatic radar cross-section `rcs_m2` at `position`, its reflection
    /// the echo's field relative to the direct path between isotropic antennas:
    /// [`scatterer_echo_per_m`] · R, R the AUT-to-probe distance.
    ///
    /// ```
    /// use sweepgate::plan::{Point, Scatterer};
    /// let (aut, probe) = (Point::new(0.0, 0.0, 1.0), Point::new(4.0, 0.0, 1.0));
    /// let s = Scatterer::from_rcs(Point::new(2.0, 2.0, 1.0), 4.0 * core::f64::consts::PI, &aut, &probe);
    /// // √(σ/4π) = 1, r₁ = r₂ = √8, R = 4: 4/8.
    /// assert!((s.reflection - 0.5).abs() < 1e-12);
    /// ```
    pub fn from_rcs(position: Point, rcs_m2: f64, aut: &Point, probe: &Point) -> Self {
        let (r1, r2) = (aut.distance_m(&position), position.distance_m(probe));
        Self {
            position,
            reflection: scatterer_echo_per_m(rcs_m2, r1, r2) * aut.distance_m(probe),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn plane(axis: Axis, position_m: f64, reflection: f64) -> Plane {
        Plane {
            axis,
            position_m,
            reflection,
        }
    }

    #[test]
    fn corner_double_bounce_matches_closed_form() {
        // Image method (common practice, no source): AUT (0, 0, h), probe (R, 0, h), floor
        // z = 0 and side wall y = W: the probe imaged in both is (R, 2W, −h), so the path
        // is √(R² + (2W)² + (2h)²) in either order, and the AUT's image is (0, 2W, −h).
        let (r, w, h) = (6.0, 2.5, 1.4);
        let planes = [plane(Axis::Z, 0.0, -0.5), plane(Axis::Y, w, 0.3)];
        let (a, b) = (Point::new(0.0, 0.0, h), Point::new(r, 0.0, h));
        let want = libm::sqrt(r * r + 4.0 * w * w + 4.0 * h * h);
        let paths: [DoubleBounce; 2] = {
            let mut it = double_bounces(&planes, &a, &b);
            [it.next().unwrap(), it.next().unwrap()]
        };
        for d in &paths {
            assert!((d.path_m - want).abs() < 1e-12, "{d:?}");
            assert!(d.exists);
            assert!((d.reflection - (-0.15)).abs() < 1e-15);
            assert_eq!(d.image_of_b, Point::new(r, 2.0 * w, -h));
            assert_eq!(d.image_of_a, Point::new(0.0, 2.0 * w, -h));
        }
        assert_eq!((paths[0].first, paths[0].second), (0, 1));
        assert_eq!((paths[1].first, paths[1].second), (1, 0));
    }

    #[test]
    fn every_ordered_pair_once_and_hidden_ones_marked() {
        // Floor below the antennas, ceiling above, and a second "floor" under the first:
        // floor/ceiling enclose the AUT (a path), the two floors are on the same side (none).
        let planes = [
            plane(Axis::Z, 0.0, -0.5),
            plane(Axis::Z, 3.0, -0.5),
            plane(Axis::Z, -1.0, -0.5),
        ];
        let (a, b) = (Point::new(0.0, 0.0, 1.5), Point::new(5.0, 0.0, 1.5));
        let pairs: heapless::Vec<(u32, u32, bool), 8> = double_bounces(&planes, &a, &b)
            .map(|d| (d.first, d.second, d.exists))
            .collect();
        assert_eq!(
            pairs.as_slice(),
            &[
                (0, 1, true),
                (0, 2, false),
                (1, 0, true),
                (1, 2, true),
                (2, 0, false),
                (2, 1, true),
            ]
        );
        assert!(DoubleBounce::new(&planes, 0, 3, &a, &b).is_none());
    }

    #[test]
    fn scatterer_echo_follows_the_radar_equation() {
        // Radar equation (common practice, no source): field ∝ √(σ/4π)/(r₁·r₂); σ = 4π m²
        // at r₁ = 2 m, r₂ = 5 m gives 1/10.
        let e = scatterer_echo_per_m(4.0 * PI, 2.0, 5.0);
        assert!((e - 0.1).abs() < 1e-15);
        assert_eq!(scatterer_echo_per_m(0.0, 2.0, 5.0), 0.0);
    }
}
