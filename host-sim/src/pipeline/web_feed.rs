//! What a command's set-up tells the web view ([`crate::web`]): the pattern frequencies,
//! the bins and the gate, and the report folder's files at the end.

use std::path::{Path, PathBuf};

use crate::pipeline::setup::Setup;
use crate::web::{Ended, Hub, Meta};

/// The web view's names for a scan set up as `s`, fed from `source` (in words).
pub fn meta_of(s: &Setup, source: &str) -> Meta {
    Meta {
        title: s.title.clone(),
        source: source.to_owned(),
        frequencies_hz: s.frequencies_hz.clone(),
        total_bins: Some(s.layout.count()),
        gate_center_ns: Some(s.gate.center_s * 1e9),
        gate_span_ns: Some(s.gate.span_s * 1e9),
        gate_rule: Some(s.gate_rule.clone()),
        notes: s.remarks.clone(),
        grid_start_hz: Some(s.grid.frequency_hz(0)),
        grid_step_hz: Some(s.grid.frequency_hz(1) - s.grid.frequency_hz(0)),
        absolute_levels: None,
    }
}

/// Tells the web view that the scan has ended and which report files it may show.
pub fn report_written(hub: &Hub, dir: &Path, files: &[PathBuf], summary: String) {
    let names = files
        .iter()
        .filter_map(|p| p.file_name()?.to_str().map(str::to_owned))
        .collect();
    hub.end(
        Some(dir),
        Ended {
            files: names,
            summary,
        },
    );
}
