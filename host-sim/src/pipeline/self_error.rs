//! The gate's own error at each pattern frequency, and the frequencies too close to the
//! band's ends to trust (`settings.gate_self_error` in `summary.json`).
//!
//! - **Self-error**: a clean direct response, e^(−j2πf·τ) (an ideal impulse at delay τ),
//!   goes through the same band window and gate chain (the FFT path) and is compared with
//!   itself ungated: |20·log10|gated/ungated||, the worst over the delays tried. The delays
//!   are the direct path's earliest and latest delay seen in the data when the gate was
//!   chosen from it, and the gate center (where renormalization makes the error zero up to
//!   rounding) otherwise.
//! - **Band edges**: the gate multiplies the impulse response by a window of its span, so
//!   each gated value is a mix of the band within half the gate's frequency kernel (null to
//!   null: the gate shape's main-lobe width over the span, in Hz) of it; a pattern
//!   frequency nearer a band end than that half-width mixes in the missing band beyond it
//!   and is marked `near_band_edge`.

use serde::Serialize;
use sweepgate::gate::GateConfig;
use sweepgate::Complex32;

use crate::pipeline::engine::gate_sweeps;

/// One pattern frequency's figures.
#[derive(Debug, Clone, Serialize)]
pub struct SelfError {
    /// The pattern frequency, Hz.
    pub frequency_hz: f64,
    /// The gate's own error on a clean direct response, dB (worst over the delays tried).
    pub self_error_db: f64,
    /// Nearer a band end than half the gate's frequency kernel.
    pub near_band_edge: bool,
}

/// The figures at the grid indices `indices`, for direct responses at `delays_s` (the gate
/// center when empty). `None` when the gate cannot be built.
pub fn self_errors(
    cfg: &GateConfig,
    indices: &[usize],
    delays_s: &[f64],
) -> Option<Vec<SelfError>> {
    let g = cfg.grid;
    let center = [cfg.center_s];
    let delays = if delays_s.is_empty() {
        &center[..]
    } else {
        delays_s
    };
    let clean: Vec<Vec<Complex32>> = delays
        .iter()
        .map(|t| {
            (0..g.points())
                .map(|n| {
                    let ph = -2.0 * std::f64::consts::PI * g.frequency_hz(n) * t;
                    Complex32::new(ph.cos() as f32, ph.sin() as f32)
                })
                .collect()
        })
        .collect();
    let refs: Vec<&[Complex32]> = clean.iter().map(|v| &v[..]).collect();
    let gated = gate_sweeps(cfg, &refs, None).ok()?;
    let half_kernel_hz = 0.5 * cfg.shape.mainlobe_width() / cfg.span_s;
    Some(
        indices
            .iter()
            .map(|&k| {
                let worst = clean
                    .iter()
                    .zip(&gated.spectra)
                    .map(|(u, y)| {
                        let r = y.get(k).copied().unwrap_or_default() / u[k];
                        (20.0 * f64::from(r.norm()).log10()).abs()
                    })
                    .fold(0.0, f64::max);
                let f = g.frequency_hz(k);
                SelfError {
                    frequency_hz: f,
                    self_error_db: worst,
                    near_band_edge: f - g.start_hz() < half_kernel_hz
                        || g.stop_hz() - f < half_kernel_hz,
                }
            })
            .collect(),
    )
}
