//! The input of the sphere analysis ([`crate::pipeline::sphere`]) and the report's sphere
//! pieces: one gated sample of both traces at one direction and frequency.

use num_complex::Complex64;

/// One gated sample: direction (θ, φ) of the antenna frame (see
/// [`crate::model::coords`]), frequency, and the co- and cross-polar traces (complex, the
/// same scale for both, e.g. gated S21 and S31 of a dual-polarised probe).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SpherePoint {
    /// Polar angle from boresight, degrees (0…180; negative values are read as the other
    /// half of the same great circle, θ → −θ, φ → φ + 180°).
    pub theta_deg: f64,
    /// Azimuth about boresight, degrees.
    pub phi_deg: f64,
    /// Frequency, Hz.
    pub frequency_hz: f64,
    /// Co-polar trace.
    pub co: Complex64,
    /// Cross-polar trace.
    pub cross: Complex64,
}

/// The sphere samples of one gated cut value: a cut in the plane `plane_deg` (0…180°) at
/// signed angle `angle_deg` (−180…180°: positive θ at φ = plane, negative θ at φ = plane +
/// 180°, as a roll-over-azimuth positioner or a turntable cut gives them). A pole (0° or
/// 180°) lies on both halves of the plane and is returned for both, so that a set of cut
/// planes fills a regular sphere grid.
///
/// ```
/// use num_complex::Complex64;
/// use sweepgate_host::pipeline::cuts::cut_samples;
/// let one = Complex64::new(1.0, 0.0);
/// let p = cut_samples(30.0, -45.0, 1e9, one, one);
/// assert_eq!((p.len(), p[0].theta_deg, p[0].phi_deg), (1, 45.0, 210.0));
/// assert_eq!(cut_samples(30.0, 0.0, 1e9, one, one).len(), 2);
/// ```
pub fn cut_samples(
    plane_deg: f64,
    angle_deg: f64,
    frequency_hz: f64,
    co: Complex64,
    cross: Complex64,
) -> Vec<SpherePoint> {
    const POLE_DEG: f64 = 1e-9;
    let at = |theta_deg, phi_deg| SpherePoint {
        theta_deg,
        phi_deg,
        frequency_hz,
        co,
        cross,
    };
    let mut v = Vec::with_capacity(2);
    if angle_deg >= 0.0 {
        v.push(at(angle_deg, plane_deg));
    }
    if angle_deg <= POLE_DEG || angle_deg >= 180.0 - POLE_DEG {
        v.push(at(angle_deg.abs(), plane_deg + 180.0));
    }
    v
}
