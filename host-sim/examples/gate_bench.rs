//! The host's FFT-path gating throughput, and the data for `host-sim/bench/gate_vs_numpy.py`.
//!
//! `cargo run --release -p sweepgate-host --example gate_bench -- [--out FILE] [--bins N]`
//!
//! Builds N bins (default 361) of an 8–12 GHz, 801-point sweep (a direct path, two echoes
//! and a little noise, a bench set-up of our own), gates them at M = 1024 and prints bins per
//! second for: the core's microfft one bin at a time (`Gate::apply`), the host's FFT
//! (`HostFft`, rustfft with the default `simd-fft` feature) one bin at a time
//! (`Gate::apply_using`) and in batches of 16 (`Gate::apply_many_using`), and the library
//! call `process` makes (`gate_sweeps_on`: copies in and out, batches, one and two threads).
//! Each figure is the best of 25 passes after a warm-up; the set-up (the gate's windows and
//! renormalization, the FFT plans) is timed too, as the library call makes it each time.
//!
//! With `--out`, writes the inputs, the gate settings and the library call's outputs (one
//! thread) to FILE; the inputs and the layout are in `examples/bench_data/` (one home,
//! shared with the core's `gate_throughput` example).

use std::time::Instant;

use sweepgate::fft::Microfft;
use sweepgate::gate::{Gate, GateConfig};
use sweepgate::grid::Grid;
use sweepgate::window::WindowKind;
use sweepgate::Complex32;
use sweepgate_host::pipeline::engine::gate_sweeps_on;
use sweepgate_host::pipeline::transform::HostFft;

const M: usize = 1024;
const K: usize = 801;
const ZERO: Complex32 = Complex32::new(0.0, 0.0);

#[path = "../../examples/bench_data/mod.rs"]
mod bench_data;

/// Timed passes of each figure; the best is kept (the machine may be shared).
const PASSES: usize = 25;

/// Best of [`PASSES`] timed passes of `pass` after one warm-up, as bins per second.
fn rate(bins: usize, mut pass: impl FnMut()) -> f64 {
    pass();
    let mut best = f64::MAX;
    for _ in 0..PASSES {
        let t = Instant::now();
        pass();
        best = best.min(t.elapsed().as_secs_f64());
    }
    bins as f64 / best
}

fn report(what: &str, rate: f64) {
    println!("{what}: {rate:.0} bins/s ({:.2} µs per bin)", 1e6 / rate);
}

/// `--out FILE` and `--bins N` (default 361).
fn arguments() -> Result<(Option<String>, usize), Box<dyn std::error::Error>> {
    let mut out_path = None;
    let mut bins = 361usize;
    let mut args = std::env::args().skip(1);
    while let Some(a) = args.next() {
        match a.as_str() {
            "--out" => out_path = Some(args.next().ok_or("--out needs a file")?),
            "--bins" => bins = args.next().ok_or("--bins needs a number")?.parse()?,
            other => return Err(format!("unknown option {other}").into()),
        }
    }
    Ok((out_path, bins))
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let (out_path, bins) = arguments()?;
    let grid = Grid::from_start_stop(8e9, 12e9, K)?;
    let (band_beta, gate_beta) = (6.0f32, 4.0f32);
    let cfg = GateConfig {
        grid,
        band_window: WindowKind::Kaiser { beta: band_beta },
        center_s: 18e-9,
        span_s: 2e-9,
        shape: WindowKind::Kaiser { beta: gate_beta },
        renormalize: true,
    };
    let t = Instant::now();
    let gate = Box::new(Gate::<M>::new(&cfg).map_err(|e| e.to_string())?);
    let gate_us = t.elapsed().as_secs_f64() * 1e6;
    let t = Instant::now();
    let mut fft = HostFft::<M>::new();
    let plan_us = t.elapsed().as_secs_f64() * 1e6;
    let t = Instant::now();
    let _again = HostFft::<M>::new();
    let again_us = t.elapsed().as_secs_f64() * 1e6;
    println!(
        "set-up: gate {gate_us:.0} µs, FFT plans {plan_us:.0} µs (first), {again_us:.0} µs (again)"
    );
    let inputs = bench_data::inputs::<M>(&grid, K, bins);
    let mut out = vec![[ZERO; M]; bins];
    let mut echo = vec![0.0f32; bins];
    println!("M = {M}, K = {K}, {bins} bins");

    report(
        "microfft, bin by bin",
        rate(bins, || {
            for (i, o) in inputs.iter().zip(out.iter_mut()) {
                std::hint::black_box(gate.apply_using(&mut Microfft, i, o));
            }
        }),
    );
    report(
        "host FFT, bin by bin",
        rate(bins, || {
            for (i, o) in inputs.iter().zip(out.iter_mut()) {
                std::hint::black_box(gate.apply_using(&mut fft, i, o));
            }
        }),
    );
    report(
        "host FFT, batches of 16",
        rate(bins, || {
            out.copy_from_slice(&inputs);
            for (b, e) in out.chunks_mut(16).zip(echo.chunks_mut(16)) {
                gate.apply_many_using(&mut fft, b, e);
            }
            std::hint::black_box(&out);
        }),
    );
    let views: Vec<&[Complex32]> = inputs.iter().map(|s| &s[..K]).collect();
    let mut kept = None;
    for threads in [1, 2] {
        report(
            &format!("library call (gate_sweeps_on), {threads} thread(s)"),
            rate(bins, || {
                let g = gate_sweeps_on(&cfg, &views, None, threads).expect("gating");
                if threads == 1 {
                    kept = Some(g.spectra);
                }
            }),
        );
    }
    if let (Some(path), Some(spectra)) = (out_path, kept) {
        let betas = [f64::from(band_beta), f64::from(gate_beta)];
        let outs: Vec<&[Complex32]> = spectra.iter().map(|s| &s[..]).collect();
        bench_data::write_data(&path, &cfg, betas, &inputs, &outs)?;
        println!("wrote inputs and gated outputs to {path}");
    }
    Ok(())
}
