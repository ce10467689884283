//! The gate with a caller's FFT (`fft::Transform`): the core's own `Microfft` through
//! `Gate::apply_using` and `Gate::apply_many_using` gives `Gate::apply`'s values bit for bit,
//! and rustfft (the reference FFT of these tests, as in `gate_reference.rs`) through the same
//! calls agrees within 1e-5 of the largest value.

use rustfft::FftPlanner;
use sweepgate::fft::{Microfft, Transform};
use sweepgate::gate::{Gate, GateConfig};
use sweepgate::grid::Grid;
use sweepgate::window::WindowKind;
use sweepgate::Complex32;

const M: usize = 1024;
const K: usize = 801;
const ZERO: Complex32 = Complex32::new(0.0, 0.0);

/// rustfft at M points, the inverse scaled by 1/M as `Transform` asks.
struct Reference {
    forward: std::sync::Arc<dyn rustfft::Fft<f32>>,
    inverse: std::sync::Arc<dyn rustfft::Fft<f32>>,
}

impl Transform<M> for Reference {
    fn forward(&mut self, buf: &mut [Complex32; M]) {
        self.forward.process(buf);
    }
    fn inverse(&mut self, buf: &mut [Complex32; M]) {
        self.inverse.process(buf);
        for v in buf.iter_mut() {
            *v /= M as f32;
        }
    }
}

/// A direct path at 18 ns, echoes at 21 and 27 ns, level and delay moving with `b`.
fn sweep(grid: &Grid, b: usize) -> Box<[Complex32; M]> {
    let mut s = Box::new([ZERO; M]);
    for (n, v) in s.iter_mut().take(K).enumerate() {
        let f = grid.frequency_hz(n);
        let z = |a: f64, t: f64| {
            let ph = -2.0 * std::f64::consts::PI * f * t;
            Complex32::new((a * ph.cos()) as f32, (a * ph.sin()) as f32)
        };
        *v = z(1.0 - 0.05 * b as f64, 18e-9) + z(0.4, 21e-9 + b as f64 * 2e-12) + z(0.2, 27e-9);
    }
    s
}

fn gate() -> (Grid, Box<Gate<M>>) {
    let grid = Grid::from_start_stop(8e9, 12e9, K).unwrap();
    let cfg = GateConfig {
        grid,
        band_window: WindowKind::Kaiser { beta: 6.0 },
        center_s: 18e-9,
        span_s: 2e-9,
        shape: WindowKind::Tukey { alpha: 0.3 },
        renormalize: true,
    };
    (grid, Box::new(Gate::new(&cfg).unwrap()))
}

#[test]
fn microfft_through_the_transform_calls_is_apply_bit_for_bit() {
    let (grid, gate) = gate();
    let mut batch = vec![[ZERO; M]; 5];
    let mut echo = [0.0f32; 5];
    let mut want = Vec::new();
    for (b, buf) in batch.iter_mut().enumerate() {
        let raw = sweep(&grid, b);
        buf.copy_from_slice(&raw[..]);
        let mut out = Box::new([ZERO; M]);
        let e = gate.apply(&raw, &mut out);
        let mut again = Box::new([ZERO; M]);
        assert_eq!(gate.apply_using(&mut Microfft, &raw, &mut again), e);
        assert_eq!(again, out);
        want.push((out, e));
    }
    gate.apply_many_using(&mut Microfft, &mut batch, &mut echo);
    for (b, (out, e)) in want.iter().enumerate() {
        assert_eq!(&batch[b], &**out, "sweep {b}");
        assert_eq!(echo[b], *e, "sweep {b}");
        assert!(*e > -60.0 && *e < 0.0, "echo level {e}");
    }
}

#[test]
fn rustfft_through_the_transform_calls_agrees_within_1e_5() {
    let (grid, gate) = gate();
    let mut planner = FftPlanner::new();
    let mut fft = Reference {
        forward: planner.plan_fft_forward(M),
        inverse: planner.plan_fft_inverse(M),
    };
    let mut batch = vec![[ZERO; M]; 3];
    let mut echo = [0.0f32; 2]; // shorter than the batch: the third level is not asked for
    let mut want = Vec::new();
    for (b, buf) in batch.iter_mut().enumerate() {
        let raw = sweep(&grid, b);
        buf.copy_from_slice(&raw[..]);
        let mut out = Box::new([ZERO; M]);
        let e = gate.apply(&raw, &mut out);
        let mut got = Box::new([ZERO; M]);
        let g = gate.apply_using(&mut fft, &raw, &mut got);
        assert!((g - e).abs() < 1e-3, "{g} {e}");
        want.push((out, e, got));
    }
    gate.apply_many_using(&mut fft, &mut batch, &mut echo);
    let peak = want
        .iter()
        .flat_map(|(w, _, _)| w.iter())
        .fold(0.0f32, |m, v| m.max(v.norm()));
    assert!(peak > 0.5);
    for (b, (out, e, got)) in want.iter().enumerate() {
        if let Some(l) = echo.get(b) {
            assert!((l - e).abs() < 1e-3);
        }
        for k in 0..M {
            assert!((got[k] - out[k]).norm() <= 1e-5 * peak, "sweep {b}, k {k}");
            assert!(
                (batch[b][k] - out[k]).norm() <= 1e-5 * peak,
                "batch {b}, k {k}"
            );
        }
        assert!(out[K..].iter().all(|v| *v == ZERO) && batch[b][K..].iter().all(|v| *v == ZERO));
    }
}
