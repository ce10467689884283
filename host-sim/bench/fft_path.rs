//! Criterion benchmarks of the host's FFT path: one bin through the core's microfft
//! (`Gate::apply`), through the host's FFT one bin at a time (`Gate::apply_using` with
//! `HostFft`) and 16 bins at a time (`Gate::apply_many_using`), and the host FFT's bare
//! forward transform, at M = 1024, 2048, 4096 (K = 801, 1601, 3201).
//!
//! `cargo bench -p sweepgate-host --bench fft_path`

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion, Throughput};
use std::hint::black_box;
use sweepgate::fft::{Fft, Microfft, Transform};
use sweepgate::gate::{Gate, GateConfig};
use sweepgate::grid::Grid;
use sweepgate::window::WindowKind;
use sweepgate::Complex32;
use sweepgate_host::pipeline::transform::HostFft;

const ZERO: Complex32 = Complex32::new(0.0, 0.0);

/// 8–12 GHz with K points; a direct path at 18 ns and an echo 3 ns later.
fn setup<const M: usize>(points: usize) -> (Box<Gate<M>>, Box<[Complex32; M]>)
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
    for (n, v) in raw.iter_mut().take(points).enumerate() {
        let f = grid.frequency_hz(n);
        let z = |a: f64, t: f64| {
            let ph = -2.0 * std::f64::consts::PI * f * t;
            Complex32::new((a * ph.cos()) as f32, (a * ph.sin()) as f32)
        };
        *v = z(1.0, 18e-9) + z(0.4, 21e-9);
    }
    (Box::new(Gate::new(&cfg).unwrap()), raw)
}

fn size<const M: usize>(c: &mut Criterion, points: usize)
where
    [Complex32; M]: Fft,
{
    let (gate, raw) = setup::<M>(points);
    let mut out = Box::new([ZERO; M]);
    let mut g = c.benchmark_group(format!("host fft path M={M} K={points}"));
    g.throughput(Throughput::Elements(1));
    g.bench_function(BenchmarkId::new("microfft, one bin", M), |b| {
        b.iter(|| black_box(gate.apply_using(&mut Microfft, black_box(&raw), &mut out)))
    });
    let mut fft = HostFft::<M>::new();
    g.bench_function(BenchmarkId::new("host fft, one bin", M), |b| {
        b.iter(|| black_box(gate.apply_using(&mut fft, black_box(&raw), &mut out)))
    });
    g.bench_function(BenchmarkId::new("host fft forward transform", M), |b| {
        b.iter(|| fft.forward(black_box(&mut out)))
    });
    let mut bufs = vec![[ZERO; M]; 16];
    let mut echo = [0.0f32; 16];
    g.throughput(Throughput::Elements(16));
    g.bench_function(BenchmarkId::new("host fft, 16 bins at once", M), |b| {
        b.iter(|| {
            for buf in bufs.iter_mut() {
                buf.copy_from_slice(&raw[..]);
            }
            gate.apply_many_using(&mut fft, &mut bufs, &mut echo);
            black_box(&bufs);
        })
    });
    g.finish();
}

fn fft_path(c: &mut Criterion) {
    size::<1024>(c, 801);
    size::<2048>(c, 1601);
    size::<4096>(c, 3201);
}

criterion_group!(benches, fft_path);
criterion_main!(benches);
