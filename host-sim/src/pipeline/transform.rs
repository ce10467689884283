//! The transforms the whole pipeline shares, a leaf of `pipeline/`:
//!
//! - the FFT size: the core's [`FftSize`] chosen from the sweep's points
//!   ([`fft_size`], with an error that names the largest size), and [`run`], the one host
//!   dispatch from that run-time size to the core's const-generic code (through the core's
//!   [`sweepgate::with_fft_size!`]). Every host caller of a `Gate<M>` or `Scan<M, F, B>`
//!   goes through it;
//! - [`HostFft`]: the host's FFT for the gate's FFT path ([`Gate::apply_using`],
//!   [`Gate::apply_many_using`]): rustfft's transforms with the `simd-fft` feature (on by
//!   default; SIMD where the CPU has it), the core's microfft without it. Both give the same
//!   gated values within 1e-5 (test `rustfft_path_matches_the_microfft_reference`);
//! - [`impulse_view`]: the impulse response of a sweep with the gate drawn on it, for the
//!   report's plot;
//! - [`c64`]: a single-precision value widened for the report.

use anyhow::Context;
use num_complex::Complex64;
pub use sweepgate::fft::FftSize;
use sweepgate::fft::{Fft, Transform};
use sweepgate::gate::{Gate, GateConfig};
use sweepgate::grid::Grid;
use sweepgate::window::WindowKind;
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

/// The host's M-point FFT for [`Gate::apply_using`] and [`Gate::apply_many_using`]:
/// rustfft's forward and inverse plans (the inverse scaled by 1/M afterwards, as microfft's
/// is) and their scratch; a batch is transformed in one call over the buffers laid end to
/// end. One per thread.
#[cfg(feature = "simd-fft")]
pub struct HostFft<const M: usize> {
    forward: std::sync::Arc<dyn rustfft::Fft<f32>>,
    inverse: std::sync::Arc<dyn rustfft::Fft<f32>>,
    scratch: Vec<Complex32>,
}

#[cfg(feature = "simd-fft")]
impl<const M: usize> HostFft<M> {
    /// Plans both directions at size M; the plans are made once per process and shared
    /// by every thread (each `HostFft` has its own scratch).
    pub fn new() -> Self {
        static PLANNER: std::sync::OnceLock<std::sync::Mutex<rustfft::FftPlanner<f32>>> =
            std::sync::OnceLock::new();
        let mut planner = PLANNER
            .get_or_init(|| std::sync::Mutex::new(rustfft::FftPlanner::new()))
            .lock()
            .unwrap_or_else(|e| e.into_inner());
        let forward = planner.plan_fft_forward(M);
        let inverse = planner.plan_fft_inverse(M);
        let len = forward
            .get_inplace_scratch_len()
            .max(inverse.get_inplace_scratch_len());
        Self {
            forward,
            inverse,
            scratch: vec![Complex32::new(0.0, 0.0); len],
        }
    }

    fn run_forward(&mut self, data: &mut [Complex32]) {
        self.forward.process_with_scratch(data, &mut self.scratch);
    }

    fn run_inverse(&mut self, data: &mut [Complex32]) {
        self.inverse.process_with_scratch(data, &mut self.scratch);
        let scale = 1.0 / M as f32;
        for v in data {
            *v *= scale;
        }
    }
}

#[cfg(feature = "simd-fft")]
impl<const M: usize> Transform<M> for HostFft<M> {
    fn forward(&mut self, buf: &mut [Complex32; M]) {
        self.run_forward(buf);
    }
    fn inverse(&mut self, buf: &mut [Complex32; M]) {
        self.run_inverse(buf);
    }
    fn forward_many(&mut self, bufs: &mut [[Complex32; M]]) {
        self.run_forward(bufs.as_flattened_mut());
    }
    fn inverse_many(&mut self, bufs: &mut [[Complex32; M]]) {
        self.run_inverse(bufs.as_flattened_mut());
    }
}

/// The host's M-point FFT (this build: without `simd-fft`, the core's microfft).
#[cfg(not(feature = "simd-fft"))]
pub struct HostFft<const M: usize>(sweepgate::fft::Microfft);

#[cfg(not(feature = "simd-fft"))]
impl<const M: usize> HostFft<M> {
    /// The core's transforms; nothing to plan.
    pub fn new() -> Self {
        Self(sweepgate::fft::Microfft)
    }
}

#[cfg(not(feature = "simd-fft"))]
impl<const M: usize> Transform<M> for HostFft<M>
where
    [Complex32; M]: Fft,
{
    fn forward(&mut self, buf: &mut [Complex32; M]) {
        self.0.forward(buf);
    }
    fn inverse(&mut self, buf: &mut [Complex32; M]) {
        self.0.inverse(buf);
    }
}

impl<const M: usize> Default for HostFft<M> {
    fn default() -> Self {
        Self::new()
    }
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

/// A gate for looking at impulse responses: only the band window matters for them, so the
/// gate itself is a placeholder.
pub fn provisional_gate<const M: usize>(
    grid: &Grid,
    band_window: WindowKind,
) -> anyhow::Result<Box<Gate<M>>>
where
    [Complex32; M]: Fft,
{
    let provisional = GateConfig {
        grid: *grid,
        band_window,
        center_s: 0.0,
        span_s: 0.25 * grid.alias_free_s(),
        shape: WindowKind::Rectangular,
        renormalize: false,
    };
    Ok(Box::new(
        Gate::<M>::new(&provisional).context("provisional gate")?,
    ))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::limits::FFT_SIZES;
    use sweepgate::fft::Microfft;
    use sweepgate::gate::GateConfig;
    use sweepgate::grid::Grid;
    use sweepgate::window::WindowKind;

    /// A sweep of a direct path, two echoes and a slow ripple (a set-up of our own).
    fn sweep(grid: &Grid, b: usize) -> Vec<Complex32> {
        (0..grid.points())
            .map(|n| {
                let f = grid.frequency_hz(n);
                let z = |a: f64, t: f64| {
                    let ph = -2.0 * std::f64::consts::PI * f * t;
                    Complex32::new((a * ph.cos()) as f32, (a * ph.sin()) as f32)
                };
                z(1.0 - 0.01 * b as f64, 18e-9) + z(0.4, 21e-9 + b as f64 * 1e-12) + z(0.2, 27e-9)
            })
            .collect()
    }

    /// Gates six sweeps one by one with microfft (the reference: the core's own FFT, itself
    /// checked against rustfft in the core's tests), and with the host's FFT one by one and
    /// as one batch; the three agree within 1e-5 of the largest value.
    fn compare_paths<const M: usize>(points: usize)
    where
        [Complex32; M]: Fft,
    {
        let grid = Grid::from_start_stop(8e9, 12e9, points).unwrap();
        let cfg = GateConfig {
            grid,
            band_window: WindowKind::Kaiser { beta: 6.0 },
            center_s: 18e-9,
            span_s: 2e-9,
            shape: WindowKind::Kaiser { beta: 4.0 },
            renormalize: true,
        };
        let gate = Box::new(Gate::<M>::new(&cfg).unwrap());
        let zero = Complex32::new(0.0, 0.0);
        let mut host = HostFft::<M>::new();
        let mut batch = vec![[zero; M]; 6];
        let mut batch_echo = [0.0f32; 6];
        let mut reference = Vec::new();
        for (b, buf) in batch.iter_mut().enumerate() {
            let mut raw = Box::new([zero; M]);
            raw[..points].copy_from_slice(&sweep(&grid, b));
            buf.copy_from_slice(&raw[..]);
            let mut want = Box::new([zero; M]);
            let want_echo = gate.apply_using(&mut Microfft, &raw, &mut want);
            let mut got = Box::new([zero; M]);
            let got_echo = gate.apply_using(&mut host, &raw, &mut got);
            assert!(
                (got_echo - want_echo).abs() < 1e-3,
                "{got_echo} {want_echo}"
            );
            reference.push((want, want_echo, got));
        }
        gate.apply_many_using(&mut host, &mut batch, &mut batch_echo);
        let peak = reference
            .iter()
            .flat_map(|(w, _, _)| w.iter())
            .fold(0.0f32, |m, v| m.max(v.norm()));
        assert!(peak > 0.5);
        for (b, (want, want_echo, one)) in reference.iter().enumerate() {
            assert!((batch_echo[b] - want_echo).abs() < 1e-3);
            for k in 0..M {
                assert!(
                    (one[k] - want[k]).norm() <= 1e-5 * peak,
                    "M {M}, sweep {b}, k {k}"
                );
                assert!(
                    (batch[b][k] - want[k]).norm() <= 1e-5 * peak,
                    "batch, k {k}"
                );
            }
        }
    }

    #[test]
    fn rustfft_path_matches_the_microfft_reference() {
        compare_paths::<1024>(801);
        compare_paths::<2048>(1601);
        compare_paths::<4096>(3201);
    }

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
