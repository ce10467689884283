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
