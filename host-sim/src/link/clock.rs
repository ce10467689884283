//! The positioner's clock against ours: a running least-squares line through the recent
//! (positioner time, arrival time) pairs, giving an offset and a drift, each with its
//! standard error, updated with every sample.
//!
//! With `x = t_pos − t_pos,first` and `y = t_arrival − t_arrival,first − x` (both µs), the
//! fit is `y = offset + drift · x` over the last [`WINDOW`] samples; a positioner time `t`
//! maps to `t_arrival,first + x + offset + drift · x` on our clock. The link's latency has
//! a positive mean that the offset includes (a constant delay of the angle readings cannot
//! be told from a clock offset); its jitter averages out instead of shaking each sample.
//! Until the window spans [`MIN_SPAN_US`] and holds [`MIN_SAMPLES`], or when the fitted
//! drift is beyond ±[`MAX_DRIFT_PPM`] (samples arriving in a burst, not as they are
//! taken), times are placed as before any fit: with the offset of the first sample's
//! arrival and no drift (the estimate still reports the window's mean offset).
//!
//! ```
//! use sweepgate_host::link::clock::ClockFit;
//! let mut f = ClockFit::default();
//! // Positioner clock 100 ppm fast, 5 s behind ours, samples every 10 ms for 20 s.
//! for i in 0..2000 {
//!     let t_pos = i as f64 * 10_000.0;
//!     f.add(t_pos, 5e6 + t_pos / (1.0 + 100e-6));
//! }
//! let e = f.estimate().unwrap();
//! assert!((e.drift_ppm + 100.0).abs() < 0.1, "{e:?}");
//! assert!((f.to_host_us(20e6) - (5e6 + 20e6 / (1.0 + 100e-6))).abs() < 1.0);
//! ```

use std::collections::VecDeque;

/// Samples the fit keeps (at 100 samples a second, the last 41 s).
pub const WINDOW: usize = 4096;
/// Least span of positioner time before a drift is fitted, µs.
pub const MIN_SPAN_US: f64 = 1e6;
/// Least samples before a drift is fitted.
pub const MIN_SAMPLES: usize = 8;
/// Largest drift believed, ppm (crystal clocks are within ±100 ppm).
pub const MAX_DRIFT_PPM: f64 = 1000.0;

/// The fitted relation and its uncertainty.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ClockEstimate {
    /// Our clock minus the positioner's at the latest sample, µs (latency included).
    pub offset_us: f64,
    /// Standard error of `offset_us`, µs.
    pub offset_sigma_us: f64,
    /// Rate of our clock against the positioner's minus one, parts per million.
    pub drift_ppm: f64,
    /// Standard error of `drift_ppm`.
    pub drift_sigma_ppm: f64,
    /// Samples in the fit.
    pub samples: usize,
    /// Whether times are placed by this fit (else by the first sample's offset).
    pub in_use: bool,
    /// Spread of the arrivals about the line (latency jitter), µs.
    pub residual_us: f64,
}

/// A running least-squares fit of our clock against the positioner's.
#[derive(Debug, Clone, Default)]
pub struct ClockFit {
    first: Option<(f64, f64)>,
    points: VecDeque<(f64, f64)>,
    /// Σx, Σy, Σx², Σxy, Σy² over `points`, kept as samples come and go (O(1) a sample),
    /// summed afresh every [`WINDOW`] samples so rounding cannot build up.
    sums: [f64; 5],
    last_x: f64,
    added: u64,
}

impl ClockFit {
    /// Adds one sample: its positioner time and its arrival on our clock, µs.
    pub fn add(&mut self, t_pos_us: f64, arrival_us: f64) {
        let (p0, a0) = *self.first.get_or_insert((t_pos_us, arrival_us));
        let x = t_pos_us - p0;
        let y = arrival_us - a0 - x;
        self.points.push_back((x, y));
        self.account(x, y, 1.0);
        if self.points.len() > WINDOW {
            if let Some((ox, oy)) = self.points.pop_front() {
                self.account(ox, oy, -1.0);
            }
        }
        self.last_x = x;
        self.added += 1;
        if self.added % WINDOW as u64 == 0 {
            self.sums = [0.0; 5];
            let pts: Vec<(f64, f64)> = self.points.iter().copied().collect();
            for (x, y) in pts {
                self.account(x, y, 1.0);
            }
        }
    }

    fn account(&mut self, x: f64, y: f64, sign: f64) {
        for (s, v) in self.sums.iter_mut().zip([x, y, x * x, x * y, y * y]) {
            *s += sign * v;
        }
    }

    fn spans(n: usize, span_us: f64) -> bool {
        n >= MIN_SAMPLES && span_us >= MIN_SPAN_US
    }

    /// Whether the fit places times: established and believable.
    fn in_use(&self, slope: f64) -> bool {
        let n = self.points.len();
        let span =
            self.points.back().map_or(0.0, |b| b.0) - self.points.front().map_or(0.0, |f| f.0);
        Self::spans(n, span) && (slope * 1e6).abs() <= MAX_DRIFT_PPM
    }

    /// Samples added in all.
    pub fn added(&self) -> u64 {
        self.added
    }

    /// (offset, drift) of the line, with standard errors, or `None` before any sample.
    fn fit(&self) -> Option<(f64, f64, f64, f64, f64)> {
        let n = self.points.len();
        if n == 0 {
            return None;
        }
        let nf = n as f64;
        let [sx, sy, sxx_raw, sxy_raw, syy_raw] = self.sums;
        let (mx, my) = (sx / nf, sy / nf);
        // Centred sums (the usual one-pass forms).
        let sxx = (sxx_raw - sx * mx).max(0.0);
        let sxy = sxy_raw - sx * my;
        let syy = (syy_raw - sy * my).max(0.0);
        let span = self.points.back().map_or(0.0, |b| b.0) - self.points[0].0;
        let slope = if Self::spans(n, span) && sxx > 0.0 {
            sxy / sxx
        } else {
            0.0
        };
        let intercept = my - slope * mx;
        let dof = if slope == 0.0 { nf - 1.0 } else { nf - 2.0 };
        let rss = (syy - slope * sxy).max(0.0);
        let s2 = if dof > 0.0 { rss / dof } else { 0.0 };
        // Standard errors of the line at the latest x and of its slope (ordinary least
        // squares, e.g. any regression text: var(a + b x0) = s² (1/n + (x0 − x̄)² / Sxx)).
        let at = self.last_x;
        let var_at = s2
            * (1.0 / nf
                + if sxx > 0.0 {
                    (at - mx).powi(2) / sxx
                } else {
                    0.0
                });
        let var_slope = if slope != 0.0 { s2 / sxx } else { 0.0 };
        Some((intercept, slope, var_at.sqrt(), var_slope.sqrt(), s2.sqrt()))
    }

    /// The current estimate, or `None` before any sample.
    pub fn estimate(&self) -> Option<ClockEstimate> {
        let (a, b, sa, sb, r) = self.fit()?;
        let (p0, a0) = self.first?;
        let x = self.last_x;
        Some(ClockEstimate {
            offset_us: a0 - p0 + a + b * x,
            offset_sigma_us: sa,
            drift_ppm: b * 1e6,
            drift_sigma_ppm: sb * 1e6,
            samples: self.points.len(),
            in_use: self.in_use(b),
            residual_us: r,
        })
    }

    /// A positioner time on our clock by the current fit (before any sample: unchanged).
    pub fn to_host_us(&self, t_pos_us: f64) -> f64 {
        match (self.first, self.fit()) {
            (Some((p0, a0)), Some((a, b, ..))) if self.in_use(b) => {
                let x = t_pos_us - p0;
                a0 + x + a + b * x
            }
            (Some((p0, a0)), _) => a0 + t_pos_us - p0,
            _ => t_pos_us,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A model written for the test: our clock = 2 s + (1 − 250 ppm) × positioner clock,
    /// plus a latency of 300 µs ± 100 µs (uniform, from a fixed linear congruential
    /// sequence), a sample every 5 ms for 15 s. Ordinary least squares gives the slope's
    /// standard error σ/√Σ(x−x̄)² with σ = 200/√12 µs (uniform spread) and, for evenly
    /// spaced x, Σ(x−x̄)² = Δ²·n(n²−1)/12: 0.24 ppm here. The fit must report that σ
    /// within 20 %, recover the drift within 1 ppm (4 σ) and place the latest sample
    /// within 60 µs of the model's mean-latency line.
    #[test]
    fn drift_and_offset_are_recovered_from_jittered_arrivals() {
        let mut f = ClockFit::default();
        let mut seed = 12345u64;
        let rate = 1.0 - 250e-6;
        let mut t_pos = 0.0;
        for _ in 0..3000 {
            seed = seed
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            let u = (seed >> 11) as f64 / (1u64 << 53) as f64;
            let latency = 200.0 + 200.0 * u;
            f.add(t_pos, 2e6 + rate * t_pos + latency);
            t_pos += 5_000.0;
        }
        let e = f.estimate().unwrap();
        assert!(e.in_use);
        let n = 3000.0f64;
        let sigma_ppm = 200.0 / 12f64.sqrt() / (5_000.0 * (n * (n * n - 1.0) / 12.0).sqrt()) * 1e6;
        assert!(
            (e.drift_sigma_ppm / sigma_ppm - 1.0).abs() < 0.2,
            "{e:?} vs {sigma_ppm}"
        );
        assert!((e.drift_ppm + 250.0).abs() < 1.0, "{e:?}");
        let truth = 2e6 + rate * (t_pos - 5_000.0) + 300.0;
        assert!((f.to_host_us(t_pos - 5_000.0) - truth).abs() < 60.0);
        assert!((e.residual_us - 200.0 / 12f64.sqrt()).abs() < 15.0, "{e:?}");
    }

    #[test]
    fn a_short_span_gives_an_offset_only() {
        let mut f = ClockFit::default();
        for i in 0..20 {
            f.add(f64::from(i) * 1000.0, 500.0 + f64::from(i) * 1000.0 * 1.01);
        }
        let e = f.estimate().unwrap();
        assert_eq!(e.drift_ppm, 0.0);
        assert!(!e.in_use);
        // Placed by the first sample's offset: spacing kept.
        assert_eq!(f.to_host_us(5000.0) - f.to_host_us(4000.0), 1000.0);
        assert!(f.estimate().is_some() && ClockFit::default().estimate().is_none());
    }
}
