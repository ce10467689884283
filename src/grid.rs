//! The frequency grid of a stepped sweep and the time axis it implies.
//!
//! A sweep of K points spaced Δf, transformed with an M-point inverse FFT (M ≥ K, zero
//! padded), gives time samples spaced 1/(M·Δf) over an alias-free range of 1/Δf; the
//! resolution is about 1/(K·Δf), one over the swept bandwidth (Richards, *Fundamentals of
//! Radar Signal Processing*, stepped-frequency waveforms). A response delayed by more than
//! 1/Δf wraps around and lands at its delay modulo 1/Δf.

use crate::error::GridError;

/// Most points a grid may hold. Point counts travel as `u16` on the wire.
pub const MAX_POINTS: usize = u16::MAX as usize;

/// A validated frequency grid: `points` frequencies `start_hz + n·step_hz`.
///
/// ```
/// use sweepgate::grid::Grid;
/// // 2–18 GHz in 801 points (the example of the reference notes): Δf = 20 MHz.
/// let g = Grid::from_start_stop(2e9, 18e9, 801).unwrap();
/// assert!((g.step_hz() - 20e6).abs() < 1e-3);
/// assert!((g.alias_free_s() - 50e-9).abs() < 1e-18);
/// assert!((g.time_step_s(1024) - 1.0 / (1024.0 * 20e6)).abs() < 1e-21);
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Grid {
    start_hz: f64,
    step_hz: f64,
    points: u16,
}

impl Grid {
    /// The grid of a gate or engine not yet configured: no points, step 0. It never comes
    /// out of [`Grid::new`] and is never used to compute anything.
    pub(crate) const UNSET: Grid = Grid {
        start_hz: 0.0,
        step_hz: 0.0,
        points: 0,
    };

    /// A grid from its first frequency, step and point count.
    pub fn new(start_hz: f64, step_hz: f64, points: usize) -> Result<Self, GridError> {
        if !start_hz.is_finite() || !step_hz.is_finite() {
            return Err(GridError::NonFinite);
        }
        if start_hz < 0.0 {
            return Err(GridError::NegativeStart);
        }
        if step_hz <= 0.0 {
            return Err(GridError::StepNotPositive);
        }
        if points < 2 {
            return Err(GridError::TooFewPoints);
        }
        if points > MAX_POINTS {
            return Err(GridError::TooManyPoints);
        }
        Ok(Self {
            start_hz,
            step_hz,
            points: points as u16,
        })
    }

    /// A grid from its first and last frequency (both measured) and point count, as a VNA
    /// is set up.
    pub fn from_start_stop(start_hz: f64, stop_hz: f64, points: usize) -> Result<Self, GridError> {
        if !start_hz.is_finite() || !stop_hz.is_finite() {
            return Err(GridError::NonFinite);
        }
        if points < 2 {
            return Err(GridError::TooFewPoints);
        }
        Self::new(start_hz, (stop_hz - start_hz) / (points - 1) as f64, points)
    }

    /// First frequency.
    pub fn start_hz(&self) -> f64 {
        self.start_hz
    }

    /// Frequency step Δf.
    pub fn step_hz(&self) -> f64 {
        self.step_hz
    }

    /// Number of points K.
    pub fn points(&self) -> usize {
        self.points as usize
    }

    /// Last frequency.
    pub fn stop_hz(&self) -> f64 {
        self.frequency_hz(self.points() - 1)
    }

    /// Swept span, last minus first frequency: (K − 1)·Δf.
    pub fn span_hz(&self) -> f64 {
        self.step_hz * (self.points() - 1) as f64
    }

    /// Frequency of point `index` (not range checked: any index gives the grid line there).
    pub fn frequency_hz(&self, index: usize) -> f64 {
        self.start_hz + self.step_hz * index as f64
    }

    /// Index of the grid point nearest to `frequency_hz`, or `None` when it lies more than
    /// half a step outside the grid (or is not finite).
    pub fn nearest_index(&self, frequency_hz: f64) -> Option<usize> {
        if !frequency_hz.is_finite() {
            return None;
        }
        let x = (frequency_hz - self.start_hz) / self.step_hz;
        if x < -0.5 || x > self.points() as f64 - 0.5 {
            return None;
        }
        let i = libm::round(x);
        Some((i.max(0.0) as usize).min(self.points() - 1))
    }

    /// Alias-free range 1/Δf: responses repeat in delay with this period.
    pub fn alias_free_s(&self) -> f64 {
        1.0 / self.step_hz
    }

    /// Nominal time resolution 1/(K·Δf), one over the swept bandwidth, before windowing.
    pub fn resolution_s(&self) -> f64 {
        1.0 / (self.step_hz * self.points() as f64)
    }

    /// Spacing of time samples after an `fft_size`-point transform: 1/(M·Δf).
    pub fn time_step_s(&self, fft_size: usize) -> f64 {
        1.0 / (self.step_hz * fft_size as f64)
    }

    /// Time of sample `index` of an `fft_size`-point impulse response.
    pub fn time_s(&self, fft_size: usize, index: usize) -> f64 {
        index as f64 * self.time_step_s(fft_size)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rejects_each_bad_setting() {
        assert_eq!(Grid::new(f64::NAN, 1e6, 10), Err(GridError::NonFinite));
        assert_eq!(Grid::new(1e9, f64::INFINITY, 10), Err(GridError::NonFinite));
        assert_eq!(Grid::new(-1.0, 1e6, 10), Err(GridError::NegativeStart));
        assert_eq!(Grid::new(1e9, 0.0, 10), Err(GridError::StepNotPositive));
        assert_eq!(
            Grid::from_start_stop(2e9, 1e9, 10),
            Err(GridError::StepNotPositive)
        );
        assert_eq!(Grid::new(1e9, 1e6, 1), Err(GridError::TooFewPoints));
        assert_eq!(Grid::new(1e9, 1e6, 70_000), Err(GridError::TooManyPoints));
    }

    #[test]
    fn reference_example_time_axis() {
        // Computed from Richards, stepped-frequency waveforms (see shared REFERENCES):
        // 2–18 GHz, 801 points: alias-free 50 ns, 1/B = 62.5 ps.
        let g = Grid::from_start_stop(2e9, 18e9, 801).unwrap();
        assert!((g.alias_free_s() * 1e9 - 50.0).abs() < 1e-9);
        assert!((1.0 / g.span_hz() * 1e12 - 62.5).abs() < 1e-9);
        assert!((g.alias_free_s() * 299_792_458.0 - 14.99).abs() < 0.01);
        assert_eq!(g.stop_hz(), 18e9);
    }

    #[test]
    fn nearest_index_rounds_and_bounds() {
        let g = Grid::new(1e9, 1e6, 11).unwrap();
        assert_eq!(g.nearest_index(1e9), Some(0));
        assert_eq!(g.nearest_index(1.0004e9), Some(0));
        assert_eq!(g.nearest_index(1.0006e9), Some(1));
        assert_eq!(g.nearest_index(1.0104e9), Some(10));
        assert_eq!(g.nearest_index(1.0106e9), None);
        assert_eq!(g.nearest_index(0.9994e9), None);
        assert_eq!(g.nearest_index(f64::NAN), None);
    }
}
