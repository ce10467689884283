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
//! File layout (little-endian): magic `SGTP`, u32 K, u32 M, u32 N, f64 start_hz, f64 step_hz,
//! f64 centre_s, f64 span_s, f64 band Kaiser β, f64 gate Kaiser β, then N·K complex f32 inputs
//! (re, im), then N·K complex f32 gated outputs.

use std::io::Write;
use std::time::Instant;
use sweepgate::gate::{Gate, GateConfig};
use sweepgate::grid::Grid;
use sweepgate::window::WindowKind;
use sweepgate::Complex32;

const M: usize = 1024;
const K: usize = 801;

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

    // Inputs: amplitude and echo phase vary with the bin, as a turning AUT would make them.
    let mut state = 0x2545_F491_4F6C_DD1Du64;
    let mut noise = move || {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        ((state >> 40) as f32 / (1u64 << 24) as f32 - 0.5) * 1e-3
    };
    let mut inputs = vec![[Complex32::new(0.0, 0.0); M]; bins];
    for (b, sweep) in inputs.iter_mut().enumerate() {
        let a = 1.0 - 0.5 * (b as f64 / bins as f64);
        for (n, v) in sweep.iter_mut().take(K).enumerate() {
            let f = grid.frequency_hz(n);
            let z = |amp: f64, t: f64| {
                let ph = -2.0 * std::f64::consts::PI * f * t;
                Complex32::new((amp * ph.cos()) as f32, (amp * ph.sin()) as f32)
            };
            *v = z(a, 18e-9)
                + z(0.4, 21e-9 + b as f64 * 1e-12)
                + z(0.2, 27e-9)
                + Complex32::new(noise(), noise());
        }
    }

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
        let mut f = std::io::BufWriter::new(std::fs::File::create(&path)?);
        f.write_all(b"SGTP")?;
        for v in [K as u32, M as u32, bins as u32] {
            f.write_all(&v.to_le_bytes())?;
        }
        for v in [
            grid.start_hz(),
            grid.step_hz(),
            cfg.center_s,
            cfg.span_s,
            band_beta as f64,
            gate_beta as f64,
        ] {
            f.write_all(&v.to_le_bytes())?;
        }
        for set in [&inputs, &outputs] {
            for sweep in set.iter() {
                for z in &sweep[..K] {
                    f.write_all(&z.re.to_le_bytes())?;
                    f.write_all(&z.im.to_le_bytes())?;
                }
            }
        }
        f.flush()?;
        println!("wrote inputs and gated outputs to {path}");
    }
    Ok(())
}
