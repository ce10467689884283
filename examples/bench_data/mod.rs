//! The bench data of the host throughput examples (`examples/gate_throughput.rs` and
//! `host-sim/examples/gate_bench.rs`), and the file the numpy comparisons read: one home for
//! both, included by each with `#[path]`.
//!
//! File layout (little-endian): magic `SGTP`, u32 K, u32 M, u32 N, f64 start_hz, f64 step_hz,
//! f64 centre_s, f64 span_s, f64 band Kaiser β, f64 gate Kaiser β, then N·K complex f32 inputs
//! (re, im), then N·K complex f32 gated outputs.

use std::io::Write;

use sweepgate::gate::GateConfig;
use sweepgate::grid::Grid;
use sweepgate::Complex32;

/// `bins` sweeps of `k` points on `grid` (zero beyond): a direct path at 18 ns, echoes at
/// 21 ns and 27 ns and a little noise, a bench set-up of our own. The amplitude and the
/// first echo's delay vary with the bin, as a turning antenna makes them.
pub fn inputs<const M: usize>(grid: &Grid, k: usize, bins: usize) -> Vec<[Complex32; M]> {
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
        for (n, v) in sweep.iter_mut().take(k).enumerate() {
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
    inputs
}

/// Writes the inputs, the gate settings (`betas`: band and gate Kaiser β) and the gated
/// outputs (their first `k` points each) to `path` in the layout above.
pub fn write_data<const M: usize>(
    path: &str,
    cfg: &GateConfig,
    betas: [f64; 2],
    inputs: &[[Complex32; M]],
    outputs: &[&[Complex32]],
) -> std::io::Result<()> {
    let k = cfg.grid.points();
    let mut f = std::io::BufWriter::new(std::fs::File::create(path)?);
    f.write_all(b"SGTP")?;
    for v in [k as u32, M as u32, inputs.len() as u32] {
        f.write_all(&v.to_le_bytes())?;
    }
    let g = cfg.grid;
    for v in [
        g.start_hz(),
        g.step_hz(),
        cfg.center_s,
        cfg.span_s,
        betas[0],
        betas[1],
    ] {
        f.write_all(&v.to_le_bytes())?;
    }
    let ins = inputs.iter().map(|s| &s[..k]);
    for sweep in ins.chain(outputs.iter().map(|s| &s[..k])) {
        for z in sweep {
            f.write_all(&z.re.to_le_bytes())?;
            f.write_all(&z.im.to_le_bytes())?;
        }
    }
    f.flush()
}
