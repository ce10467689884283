//! The transforms the whole pipeline shares, a leaf of `pipeline/`:
//!
//! - the FFT size: the core's [`FftSize`] chosen from the sweep's points
//!   ([`fft_size`], with an error that names the largest size), and [`run`], the one host
//!   dispatch from that run-time size to the core's const-generic code (through the core's
//!   [`sweepgate::with_fft_size!`]). Every host caller of a `Gate<M>` or `Scan<M, F, B>`
//!   goes through it;
//! - [`impulse_view`]: the impulse response of a sweep with the gate drawn on it, for the
//!   report's plot;
//! - [`c64`]: a single-precision value widened for the report.

use anyhow::Context;
use num_complex::Complex64;
use sweepgate::fft::Fft;
pub use sweepgate::fft::FftSize;
use sweepgate::gate::Gate;
use sweepgate::Complex32;

use crate::limits::MAX_POINTS;
use crate::output::report::ImpulseView;

/// Work that needs the FFT size as a constant: [`run`] calls [`FftJob::run`] with it.
pub trait FftJob {
    /// What the work gives.
    type Output;
    /// Does the work at FFT size `M`.
    fn run<const M: usize>(self) -> Self::Output
    where
        [Complex32; M]: Fft;
}

/// The smallest FFT size that holds `points` samples.
pub fn fft_size(points: usize) -> anyhow::Result<FftSize> {
    FftSize::for_points(points).with_context(|| {
        format!("{points} points per sweep: more than the largest FFT ({MAX_POINTS})")
    })
}

/// Runs `job` at FFT size `size`.
pub fn run<J: FftJob>(size: FftSize, job: J) -> J::Output {
    sweepgate::with_fft_size!(size, M => job.run::<M>())
}

/// Widens a single-precision value.
pub fn c64(z: Complex32) -> Complex64 {
    Complex64::new(f64::from(z.re), f64::from(z.im))
}

/// The impulse response of `sweep` (zero-padded to M) through the gate's band window, with
/// the gate window and its edges, for the report's plot.
pub fn impulse_view<const M: usize>(
    gate: &Gate<M>,
    sweep: &[Complex32],
    angle_deg: f64,
    sweeps: u32,
) -> ImpulseView
where
    [Complex32; M]: Fft,
{
    let zero = Complex32::new(0.0, 0.0);
    let mut raw: Box<[Complex32; M]> = Box::new([zero; M]);
    for (b, v) in raw.iter_mut().zip(sweep) {
        *b = *v;
    }
    let mut ir: Box<[Complex32; M]> = Box::new([zero; M]);
    gate.impulse_response(&raw, &mut ir);
    let cfg = gate.config();
    ImpulseView {
        angle_deg,
        sweeps,
        time_ns: (0..M).map(|m| cfg.grid.time_s(M, m) * 1e9).collect(),
        magnitude: ir.iter().map(|z| f64::from(z.norm())).collect(),
        gate: gate.gate_window().iter().map(|&x| f64::from(x)).collect(),
        gate_start_ns: (cfg.center_s - 0.5 * cfg.span_s) * 1e9,
        gate_stop_ns: (cfg.center_s + 0.5 * cfg.span_s) * 1e9,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::limits::FFT_SIZES;

    #[test]
    fn sizes_are_the_smallest_that_hold_the_sweep() {
        assert_eq!(fft_size(201).unwrap(), FftSize::M1024);
        assert_eq!(fft_size(1024).unwrap(), FftSize::M1024);
        assert_eq!(fft_size(1025).unwrap(), FftSize::M2048);
        assert_eq!(fft_size(4096).unwrap(), FftSize::M4096);
        let e = fft_size(4097).unwrap_err();
        assert!(format!("{e:#}").contains("largest FFT (4096)"), "{e:#}");
        // The host's sizes are the ones the core compiles in.
        assert_eq!(FftSize::largest(), MAX_POINTS);
        let points: Vec<usize> = FFT_SIZES
            .iter()
            .map(|&k| fft_size(k).unwrap().points())
            .collect();
        assert_eq!(points, FFT_SIZES);
    }

    #[test]
    fn the_dispatch_runs_at_the_size_asked() {
        struct Size;
        impl FftJob for Size {
            type Output = usize;
            fn run<const M: usize>(self) -> usize
            where
                [Complex32; M]: Fft,
            {
                M
            }
        }
        for k in FFT_SIZES {
            let s = fft_size(k).unwrap();
            assert_eq!(run(s, Size), s.points());
        }
    }
}
