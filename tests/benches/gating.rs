//! Host benchmarks of the gating core (criterion): one closed bin through the FFT path and
//! through the kernel path, for M = 256, 1024, 4096 and F = 1, 4, 16.
//!
//! `cargo bench -p sweepgate --bench gating`

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion, Throughput};
use std::hint::black_box;
use sweepgate::fft::Fft;
use sweepgate::gate::{Gate, GateConfig};
use sweepgate::grid::Grid;
use sweepgate::window::WindowKind;
use sweepgate::Complex32;

const ZERO: Complex32 = Complex32::new(0.0, 0.0);

/// 8–12 GHz with K points; a direct path at 18 ns and an echo 3 ns later.
fn setup<const M: usize>(points: usize) -> (Gate<M>, Box<[Complex32; M]>)
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
    let mut raw = Box::new([ZERO; M]);
    for n in 0..points {
        let f = grid.frequency_hz(n);
        let z = |a: f64, t: f64| {
            let ph = -2.0 * std::f64::consts::PI * f * t;
            Complex32::new((a * ph.cos()) as f32, (a * ph.sin()) as f32)
        };
        raw[n] = z(1.0, 18e-9) + z(0.4, 21e-9);
    }
    (Gate::new(&cfg).unwrap(), raw)
}

fn kernel_bench<const M: usize, const F: usize>(
    c: &mut criterion::BenchmarkGroup<'_, criterion::measurement::WallTime>,
    gate: &Gate<M>,
    raw: &[Complex32; M],
) where
    [Complex32; M]: Fft,
{
    let k = gate.points();
    let mut idx = [0usize; F];
    for (i, v) in idx.iter_mut().enumerate() {
        *v = (i + 1) * k / (F + 1);
    }
    let kernels = gate.kernels(idx).unwrap();
    let mut out = [ZERO; F];
    c.bench_function(BenchmarkId::new(format!("kernel F={F}"), M), |b| {
        b.iter(|| {
            gate.apply_kernels(&kernels, black_box(raw), &mut out);
            black_box(&out);
        })
    });
}

fn size<const M: usize>(c: &mut Criterion, points: usize)
where
    [Complex32; M]: Fft,
{
    let (gate, raw) = setup::<M>(points);
    let mut g = c.benchmark_group(format!("gate M={M} K={points}"));
    g.throughput(Throughput::Elements(1));
    let mut out = Box::new([ZERO; M]);
    g.bench_function(BenchmarkId::new("fft path", M), |b| {
        b.iter(|| black_box(gate.apply(black_box(&raw), &mut out)))
    });
    kernel_bench::<M, 1>(&mut g, &gate, &raw);
    kernel_bench::<M, 4>(&mut g, &gate, &raw);
    kernel_bench::<M, 16>(&mut g, &gate, &raw);
    g.finish();
}

fn gating(c: &mut Criterion) {
    size::<256>(c, 201);
    size::<1024>(c, 801);
    size::<4096>(c, 3201);
}

criterion_group!(benches, gating);
criterion_main!(benches);
