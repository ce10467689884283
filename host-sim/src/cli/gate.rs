//! The gate and pattern options every gating command takes (`replay`, `process`,
//! `acquire`), spelled once so that they read the same everywhere.

use crate::pipeline::options::GateOptions;

/// Gate and pattern options.
#[derive(clap::Args, Debug, Clone, Default)]
pub struct GateArgs {
    /// Gate center, ns from the VNA's time zero (default: the planner's from the scenario,
    /// else chosen from the data: holding the direct path, closing before the earliest echo).
    #[arg(long, allow_negative_numbers = true)]
    pub gate_center_ns: Option<f64>,
    /// Gate span (full width), ns (default: as for the center).
    #[arg(long, allow_negative_numbers = true)]
    pub gate_span_ns: Option<f64>,
    /// Band window: kaiser:BETA, kaiser-sidelobe:DB, tukey:ALPHA, hann, hamming,
    /// blackman-harris or rectangular (default: the scenario's, else kaiser-sidelobe:50).
    #[arg(long)]
    pub band_window: Option<String>,
    /// Gate shape, the same spellings (default: tukey:0.3).
    #[arg(long)]
    pub gate_shape: Option<String>,
    /// Pattern frequencies, Hz, comma-separated, each taken at its nearest grid point
    /// (default: the recording's or scenario's, else the center point).
    #[arg(long)]
    pub frequencies_hz: Option<String>,
}

impl From<GateArgs> for GateOptions {
    fn from(a: GateArgs) -> Self {
        GateOptions {
            gate_center_ns: a.gate_center_ns,
            gate_span_ns: a.gate_span_ns,
            band_window: a.band_window,
            gate_shape: a.gate_shape,
            frequencies_hz: a.frequencies_hz,
        }
    }
}
