//! Host benchmarks of the core (criterion): one closed bin through the FFT path and through
//! the kernel path (window on the fly, and window in place then dot products as the scan
//! engine does it) for M = 256, 1024, 4096 and F = 1, 4, 16; the gate's set-up; decoding one
//! IEEE 488.2 block; and an end-to-end scan of 361 bins through the engine.
//!
//! `cargo bench -p sweepgate --bench gating`

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion, Throughput};
use std::hint::black_box;
use sweepgate::bins::BinLayout;
use sweepgate::fft::Fft;
use sweepgate::gate::{Gate, GateConfig};
use sweepgate::grid::Grid;
use sweepgate::scan::{EchoMode, Scan, ScanConfig};
use sweepgate::window::WindowKind;
use sweepgate::wire::block::{emit, BlockConfig, BlockDecoder, ByteOrder, DecodeEvent, Format};
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
    // As the scan engine closes a bin: window the sum in place, then the dot products.
    let mut buf = Box::new(*raw);
    c.bench_function(BenchmarkId::new(format!("window + kernel F={F}"), M), |b| {
        b.iter(|| {
            buf.copy_from_slice(black_box(raw));
            gate.window(&mut buf, 0.5);
            gate.apply_kernels_windowed(&kernels, &buf, &mut out);
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
    let cfg = *gate.config();
    g.bench_function(BenchmarkId::new("set-up", M), |b| {
        b.iter(|| black_box(Gate::<M>::new(black_box(&cfg)).is_ok()))
    });
    g.finish();
}

fn gating(c: &mut Criterion) {
    size::<256>(c, 201);
    size::<1024>(c, 801);
    size::<4096>(c, 3201);
}

fn decoding(c: &mut Criterion) {
    let (gate, raw) = setup::<1024>(801);
    let mut bytes = vec![0u8; 801 * 8 + 16];
    let n = emit(Format::Real32, ByteOrder::Normal, &raw[..801], &mut bytes).unwrap();
    bytes.truncate(n);
    let cfg = BlockConfig::for_grid(gate.grid(), Format::Real32, ByteOrder::Normal);
    let mut g = c.benchmark_group("decode");
    g.throughput(Throughput::Bytes(n as u64));
    let mut out = vec![ZERO; 1024];
    for chunk in [64usize, 4096] {
        g.bench_function(BenchmarkId::new("REAL,32 801 points, chunk", chunk), |b| {
            b.iter(|| {
                let mut d = BlockDecoder::new(cfg);
                let mut sweeps = 0;
                for mut part in bytes.chunks(chunk) {
                    while !part.is_empty() {
                        let f = d.feed(part, &mut out);
                        part = &part[f.consumed..];
                        if let Some(DecodeEvent::Sweep { .. }) = f.event {
                            sweeps += 1;
                        }
                    }
                }
                assert_eq!(sweeps, 1);
                black_box(&out);
            })
        });
    }
    g.finish();
}

/// A full turn of one-degree bins (361 closed: the first bin is passed again at the end),
/// two sweeps per bin, angle samples every 10 ms at 10°/s.
fn end_to_end(c: &mut Criterion) {
    let (gate, raw) = setup::<1024>(801);
    let sweep = raw[..801].to_vec();
    let mut g = c.benchmark_group("scan");
    g.sample_size(10);
    for echo in [EchoMode::Never, EchoMode::EveryBin] {
        g.bench_function(
            BenchmarkId::new("361 bins, 722 sweeps, F = 4", format!("{echo:?}")),
            |b| {
                b.iter(|| {
                    let mut cfg = ScanConfig::new(BinLayout::full_circle(-180.0, 1.0).unwrap());
                    cfg.echo = echo;
                    let mut scan: Box<Scan<1024, 4, 361>> =
                        Box::new(Scan::new(gate.config(), [100, 300, 500, 700], cfg).unwrap());
                    let mut closed = 0usize;
                    // 36.1 s of scan: −180.5° to 180.5° at 10°/s.
                    for i in 0..=3610u64 {
                        let t = i * 10_000;
                        scan.push_angle(t, -180.5 + i as f32 * 0.1);
                        // One 20 ms sweep every 50 ms: two per degree.
                        if i % 5 == 4 {
                            for e in scan.push_sweep(t - 30_000, t - 10_000, &sweep) {
                                closed +=
                                    matches!(e, sweepgate::scan::Event::BinClosed(_)) as usize;
                            }
                        }
                    }
                    for e in scan.finish() {
                        closed += matches!(e, sweepgate::scan::Event::BinClosed(_)) as usize;
                    }
                    assert!(closed >= 360, "{closed}");
                    black_box(closed)
                })
            },
        );
    }
    g.finish();
}

criterion_group!(benches, gating, decoding, end_to_end);
criterion_main!(benches);
