//! Range geometry to path delays, echo arrivals, far-field distance, sweep and gate settings.
//!
//! Geometry convention (shared by the planner and the host's room simulator): the AUT's
//! turntable axis is vertical through the origin, x points from the AUT to the probe
//! (range antenna), y to the left looking from the AUT to the probe, z up from the floor
//! (z = 0). Reflecting planes are axis-aligned; echoes follow the image method.

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
        let c = |p: &Point| match self.axis {
            Axis::X => p.x_m,
            Axis::Y => p.y_m,
            Axis::Z => p.z_m,
        };
        let (da, db) = (c(a) - self.position_m, c(b) - self.position_m);
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn floor_bounce_matches_closed_form() {
        // Image method, equal heights h over range R: path √(R² + (2h)²)
        // (common practice, no source).
        let (r, h) = (7.0, 1.6);
        let floor = Plane {
            axis: Axis::Z,
            position_m: 0.0,
            reflection: -0.5,
        };
        let a = Point::new(0.0, 0.0, h);
        let b = Point::new(r, 0.0, h);
        let want = libm::sqrt(r * r + 4.0 * h * h);
        assert!((floor.bounce_path_m(&a, &b) - want).abs() < 1e-12);
        let p = floor.bounce_point(&a, &b).unwrap();
        assert!((p.x_m - r / 2.0).abs() < 1e-12 && p.z_m.abs() < 1e-12);
        let wall_between = Plane {
            axis: Axis::X,
            position_m: 3.0,
            reflection: 0.3,
        };
        assert_eq!(wall_between.bounce_point(&a, &b), None);
    }
}
