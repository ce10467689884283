//! The `settings` and `counters` sections of `summary.json`, as written by `replay` and
//! `process` alike (see [`crate::output::report`] for the rest of the file).

use serde::Serialize;
use sweepgate::gate::GateConfig;
use sweepgate::grid::Grid;
use sweepgate::scan::{ScanCounters, ScanMode};

use crate::pipeline::data_gate::DataGate;
use crate::pipeline::options::describe_window;
use crate::pipeline::self_error::{self_errors, SelfError};
use crate::pipeline::setup::{Gating, Setup};

/// The direct path's earliest and latest delay seen in the data, s (none without data).
fn direct_delays(data: &Option<DataGate>) -> Vec<f64> {
    data.as_ref().map_or(Vec::new(), |d| {
        vec![d.choice.direct_lo_s, d.choice.direct_hi_s]
    })
}

/// The sweep grid.
#[derive(Debug, Clone, Serialize)]
pub struct GridSettings {
    /// First frequency, Hz.
    pub start_hz: f64,
    /// Step, Hz.
    pub step_hz: f64,
    /// Points per sweep.
    pub points: usize,
    /// Alias-free range 1/Δf, ns.
    pub alias_free_ns: f64,
}

impl GridSettings {
    fn of(g: &Grid) -> Self {
        Self {
            start_hz: g.start_hz(),
            step_hz: g.step_hz(),
            points: g.points(),
            alias_free_ns: g.alias_free_s() * 1e9,
        }
    }
}

/// The angle bins.
#[derive(Debug, Clone, Serialize)]
pub struct BinSettings {
    /// Number of bins.
    pub count: usize,
    /// Bin width, degrees (`null` for one bin per manifest angle).
    pub width_deg: Option<f32>,
    /// Center of the first bin, degrees (`null` for one bin per manifest angle).
    pub first_center_deg: Option<f32>,
    /// The bins cover a full turn.
    pub full_circle: bool,
    /// One bin per manifest angle rather than a regular layout.
    pub one_per_manifest_angle: bool,
}

/// The gate.
#[derive(Debug, Clone, Serialize)]
pub struct GateSettings {
    /// Gate center, ns from the VNA's time zero.
    pub center_ns: f64,
    /// Gate span (full width), ns.
    pub span_ns: f64,
    /// Band window, in words.
    pub band_window: String,
    /// Gate shape, in words.
    pub shape: String,
    /// Edge renormalization on.
    pub renormalized: bool,
    /// How the gate was chosen, in words.
    pub rule: String,
}

impl GateSettings {
    fn of(g: &GateConfig, rule: &str) -> Self {
        Self {
            center_ns: g.center_s * 1e9,
            span_ns: g.span_s * 1e9,
            band_window: describe_window(&g.band_window),
            shape: describe_window(&g.shape),
            renormalized: g.renormalize,
            rule: rule.to_string(),
        }
    }
}

/// `settings` in `summary.json`.
#[derive(Debug, Clone, Serialize)]
pub struct Settings {
    /// `recording` or `manifest`.
    pub input: &'static str,
    /// The sweep grid.
    pub grid: GridSettings,
    /// FFT size.
    pub fft_size: usize,
    /// Pattern frequencies (grid points), Hz.
    pub pattern_frequencies_hz: Vec<f64>,
    /// Pattern frequencies as requested, Hz, when they were given.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub pattern_frequencies_requested_hz: Option<Vec<f64>>,
    /// Their grid indices.
    pub pattern_grid_indices: Vec<usize>,
    /// The angle bins.
    pub bins: BinSettings,
    /// `continuous` or `step-and-stop`.
    pub mode: &'static str,
    /// The gate.
    pub gate: GateSettings,
    /// Where center and span came from.
    pub gate_source: String,
    /// The gate chosen from the data: what its survey found (see
    /// [`crate::pipeline::data_gate`]), when the data were surveyed.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub data_gate: Option<serde_json::Value>,
    /// The gate's own error and the band-edge mark at each pattern frequency (see
    /// [`crate::pipeline::self_error`]).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub gate_self_error: Option<Vec<SelfError>>,
    /// Touchstone parameter (manifests).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub parameter: Option<String>,
    /// Where the truth came from.
    pub truth: String,
    /// Simulation seed (recordings).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub seed: Option<u64>,
    /// What wrote the recording.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub source: Option<String>,
    /// The software that wrote the recording.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub software: Option<String>,
}

impl Settings {
    /// The settings of a scan streamed through the engine.
    pub fn for_scan(setup: &Setup, truth: String) -> Self {
        let l = &setup.layout;
        Self {
            input: "recording",
            grid: GridSettings::of(&setup.grid),
            fft_size: setup.fft_size.points(),
            pattern_frequencies_hz: setup.frequencies_hz.clone(),
            pattern_frequencies_requested_hz: setup.requested_hz.clone(),
            pattern_grid_indices: setup.indices.clone(),
            bins: BinSettings {
                count: usize::from(l.count()),
                width_deg: Some(l.step_deg()),
                first_center_deg: Some(l.nominal_deg(0)),
                full_circle: l.is_full_circle(),
                one_per_manifest_angle: false,
            },
            mode: match setup.mode {
                ScanMode::Continuous => "continuous",
                ScanMode::StepAndStop { .. } => "step-and-stop",
            },
            gate: GateSettings::of(&setup.gate, &setup.gate_rule),
            gate_source: setup.gate_source.clone(),
            data_gate: setup.data.as_ref().map(|d| d.to_json(&setup.grid)),
            gate_self_error: self_errors(&setup.gate, &setup.indices, &direct_delays(&setup.data)),
            parameter: None,
            truth,
            seed: None,
            source: None,
            software: None,
        }
    }

    /// The settings of saved sweeps gated one per angle (a manifest).
    pub fn for_sweeps(g: &Gating, bins: usize, full_circle: bool) -> Self {
        Self {
            input: "manifest",
            grid: GridSettings::of(&g.gate.grid),
            fft_size: g.fft_size.points(),
            pattern_frequencies_hz: g.frequencies_hz.clone(),
            pattern_frequencies_requested_hz: g.requested_hz.clone(),
            pattern_grid_indices: g.indices.clone(),
            bins: BinSettings {
                count: bins,
                width_deg: None,
                first_center_deg: None,
                full_circle,
                one_per_manifest_angle: true,
            },
            mode: "step-and-stop",
            gate: GateSettings::of(&g.gate, &g.gate_rule),
            gate_source: g.gate_source.clone(),
            data_gate: g.data.as_ref().map(|d| d.to_json(&g.gate.grid)),
            gate_self_error: self_errors(&g.gate, &g.indices, &direct_delays(&g.data)),
            parameter: None,
            truth: "none".into(),
            seed: None,
            source: None,
            software: None,
        }
    }

    /// As JSON for the report.
    pub fn to_json(&self) -> serde_json::Value {
        serde_json::to_value(self).unwrap_or(serde_json::Value::Null)
    }
}

/// `counters` in `summary.json` for a scan streamed through the engine.
#[derive(Debug, Clone, Serialize)]
pub struct Counters {
    /// Sweeps pushed into the engine.
    pub sweeps_pushed: u32,
    /// Sweeps binned.
    pub sweeps_binned: u32,
    /// Sweeps refused.
    pub sweeps_rejected: u32,
    /// Sweeps refused, by reason (only reasons that occurred).
    pub sweeps_rejected_by: std::collections::BTreeMap<String, u32>,
    /// Sweeps taken while the positioner moved (step-and-stop).
    pub sweeps_taken_while_moving: u32,
    /// Sweeps whose angle was extrapolated.
    pub sweeps_extrapolated: u32,
    /// Angle samples pushed.
    pub angles_pushed: u32,
    /// Angle samples accepted.
    pub angles_accepted: u32,
    /// Angle samples refused.
    pub angles_rejected: u32,
    /// Bins closed.
    pub bins_closed: u32,
    /// Preview bytes sent.
    pub preview_bytes: u64,
    /// Records recovered from the recording.
    pub recording_records: usize,
    /// Damaged stretches skipped in the recording.
    pub recording_damage: usize,
}

impl Counters {
    /// From the engine's counters and the stream's figures.
    pub fn of(c: &ScanCounters, preview_bytes: u64, records: usize, damage: usize) -> Self {
        Self {
            sweeps_pushed: c.sweeps_pushed,
            sweeps_binned: c.sweeps_binned,
            sweeps_rejected: c.sweeps_rejected(),
            sweeps_rejected_by: sweepgate::error::SweepReject::ALL
                .iter()
                .zip(c.sweeps_rejected_by.iter())
                .filter(|(_, n)| **n > 0)
                .map(|(r, n)| (r.to_string(), *n))
                .collect(),
            sweeps_taken_while_moving: c.sweeps_moving,
            sweeps_extrapolated: c.sweeps_extrapolated,
            angles_pushed: c.angles_pushed,
            angles_accepted: c.angles_accepted,
            angles_rejected: c.angles_rejected(),
            bins_closed: c.bins_closed,
            preview_bytes,
            recording_records: records,
            recording_damage: damage,
        }
    }

    /// As JSON for the report.
    pub fn to_json(&self) -> serde_json::Value {
        serde_json::to_value(self).unwrap_or(serde_json::Value::Null)
    }
}
