//! Gating throughput on the host, and the data for the numpy comparison.
//!
//! `cargo run --release --example gate_throughput -- [--out FILE] [--bins N]`
//!
//! Builds N bins (default 361) of an 8–12 GHz, 801-point sweep — a direct path, two echoes and
//! a little noise, a bench set-up of our own — gates each through the FFT path at M = 1024 and
//! prints bins per second. With `--out`, writes the inputs, the gate settings and our gated
//! outputs to FILE for `examples/numpy_compare.py`, which runs the same chain with numpy on
//! the same data and reports the ratio.
//!
//! The inputs and the file layout are in `examples/bench_data/`, shared with the host's
//! `gate_bench` example.

use std::time::Instant;
use sweepgate::gate::{Gate, GateConfig};
use sweepgate::grid::Grid;
use sweepgate::window::WindowKind;
use sweepgate::Complex32;

const M: usize = 1024;
const K: usize = 801;

#[path = "bench_data/mod.rs"]
mod bench_data;

fn main() -> Result<(), Box<dyn std::error::Error>> {
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
    let gate = Gate::<M>::new(&cfg).map_err(|e| e.to_string())?;

    let inputs = bench_data::inputs::<M>(&grid, K, bins);

    let mut outputs = vec![[Complex32::new(0.0, 0.0); M]; bins];
    // Warm up once, then time several passes and keep the best.
    for (i, o) in inputs.iter().zip(outputs.iter_mut()) {
        gate.apply(i, o);
    }
    let mut best = f64::MAX;
    for _ in 0..5 {
        let t = Instant::now();
        for (i, o) in inputs.iter().zip(outputs.iter_mut()) {
            std::hint::black_box(gate.apply(std::hint::black_box(i), o));
        }
        best = best.min(t.elapsed().as_secs_f64());
    }
    let rate = bins as f64 / best;
    println!(
        "sweepgate FFT path, M = {M}, K = {K}: {rate:.0} bins/s ({:.2} µs per bin)",
        best / bins as f64 * 1e6
    );

    if let Some(path) = out_path {
        let outs: Vec<&[Complex32]> = outputs.iter().map(|s| &s[..]).collect();
        let betas = [f64::from(band_beta), f64::from(gate_beta)];
        bench_data::write_data(&path, &cfg, betas, &inputs, &outs)?;
        println!("wrote inputs and gated outputs to {path}");
    }
    Ok(())
}
