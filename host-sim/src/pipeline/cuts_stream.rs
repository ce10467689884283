//! A recording of cuts through the core's engine of cuts ([`sweepgate::cuts::CutScan`]):
//! a recording whose kind 8 records ([`crate::formats::traces`]) give each position
//! sample's second axis and each sweep's further trace, as `acquire` writes them with a
//! positioner of two axes and a profile of two traces.
//!
//! The set-up is the recording's ([`setup::for_recording`]: the same gate, pattern
//! frequencies, bins and engine settings as for its first trace alone). The cuts are the
//! second-axis values the positioner held: every value (to 0.01°) seen at a tenth or more of
//! as many samples as the most-held one, which must lie on a uniform grid (within 0.05°);
//! a sweep belongs to a cut when its second axis is within a quarter step (at most 1°) of
//! it. Samples and sweeps go through the engine in time order; the first trace of each bin
//! is the one-trace engine's result, the second gated with the same gate.

use std::collections::BTreeMap;
use std::path::Path;

use anyhow::{bail, Context};
use sweepgate::cuts::{CutBinResult, CutConfig, CutEvent, CutLayout, CutScan};
use sweepgate::fft::Fft;
use sweepgate::Complex32;

use crate::formats::recording::{self as record, Record};
use crate::formats::touchstone::Parameter;
use crate::formats::traces::Traces;
use crate::limits::{MAX_BINS, MAX_FREQUENCIES};
use crate::pipeline::cuts::{CutBin, CutPattern, CutTraces, CutsResult, TraceBin};
use crate::pipeline::options::Choices;
use crate::pipeline::setup::{self, Gating, Setup};
use crate::pipeline::stream;
use crate::pipeline::transform::{self, FftJob};

/// Whether a recording holds a second axis and a further trace (a recording of cuts).
pub fn is_cut_recording(rec: &record::Recovered) -> bool {
    let t = Traces::collect(&rec.records);
    !t.axes.is_empty() && !t.further.is_empty()
}

/// The held second-axis values as a cut layout (see the module docs).
pub fn cut_layout(traces: &Traces) -> anyhow::Result<CutLayout> {
    let mut held: BTreeMap<i64, usize> = BTreeMap::new();
    for a in traces.axes.values().filter_map(|v| v.first()) {
        *held.entry((a * 100.0).round() as i64).or_default() += 1;
    }
    let most = held
        .values()
        .copied()
        .max()
        .context("no second-axis samples")?;
    let values: Vec<f64> = held
        .iter()
        .filter(|(_, &n)| n * 10 >= most)
        .map(|(&k, _)| k as f64 / 100.0)
        .collect();
    let (first, last) = (values[0], values[values.len() - 1]);
    if values.len() == 1 {
        return CutLayout::single(first as f32, 1.0).context("the cut");
    }
    let step = (last - first) / (values.len() - 1) as f64;
    if let Some(v) = values
        .iter()
        .enumerate()
        .find(|(i, v)| (first + *i as f64 * step - **v).abs() > 0.05)
    {
        bail!(
            "the second axis held {values:?}°: not evenly spaced ({}° is off the {step}° steps)",
            v.1
        );
    }
    let tolerance = (step / 4.0).min(1.0);
    CutLayout::new(
        first as f32,
        step as f32,
        values.len() as u16,
        tolerance as f32,
    )
    .context("the cuts the second axis held")
}

/// Position and sweep records in time order (a sweep at its end), as the replay streams
/// them: record indices.
fn time_order(rec: &record::Recovered) -> Vec<usize> {
    let mut order: Vec<(u64, usize)> = rec
        .records
        .iter()
        .enumerate()
        .filter_map(|(i, (_, r))| match r {
            Record::Position { t_us, .. } => Some((*t_us, i)),
            Record::Sweep { end_us, .. } => Some((*end_us, i)),
            _ => None,
        })
        .collect();
    order.sort_by_key(|&(t, _)| t);
    order.into_iter().map(|(_, i)| i).collect()
}

/// The engine's run over the recording at FFT size `M`.
struct RunCuts<'a> {
    rec: &'a record::Recovered,
    traces: &'a Traces,
    setup: &'a Setup,
    cuts: CutLayout,
}

type Results = Vec<CutBinResult<MAX_FREQUENCIES, 1>>;

impl FftJob for RunCuts<'_> {
    type Output = anyhow::Result<Results>;
    fn run<const M: usize>(self) -> Self::Output
    where
        [Complex32; M]: Fft,
    {
        let idx = self.setup.indices.clone();
        let last = *idx.last().context("no pattern frequency")?;
        let pattern: [usize; MAX_FREQUENCIES] =
            core::array::from_fn(|i| idx.get(i).copied().unwrap_or(last));
        let mut cfg = CutConfig::new(self.setup.scan_config(), self.cuts);
        // The second axis steps between cuts: its tracker takes any speed up to 3600°/s.
        cfg.axis2_track.max_speed_deg_s = 3600.0;
        let mut s: Box<CutScan<M, MAX_FREQUENCIES, MAX_BINS, 64, 1>> =
            Box::new(CutScan::unconfigured());
        s.configure(&self.setup.gate, pattern, cfg)
            .map_err(|e| anyhow::anyhow!("the engine of cuts: {e}"))?;
        let mut out = Vec::new();
        let mut take = |ev: sweepgate::cuts::CutEvents<MAX_FREQUENCIES, 1>| {
            out.extend(ev.into_iter().filter_map(|e| match e {
                CutEvent::BinClosed(r) => Some(r),
                _ => None,
            }));
        };
        for i in time_order(self.rec) {
            match &self.rec.records[i].1 {
                Record::Position {
                    t_us, angle_deg, ..
                } => {
                    if let Some(a2) = self.traces.axes.get(t_us).and_then(|v| v.first()) {
                        take(s.push_axes(*t_us, *angle_deg as f32, *a2 as f32));
                    } else {
                        take(s.push_angle(*t_us, *angle_deg as f32));
                    }
                }
                Record::Sweep {
                    index,
                    start_us,
                    end_us,
                    s21,
                } => {
                    let empty = Vec::new();
                    let x = self.traces.further.get(index).and_then(|t| t.first());
                    take(s.push_traces(*start_us, *end_us, s21, [x.unwrap_or(&empty)]));
                }
                _ => {}
            }
        }
        take(s.finish());
        Ok(out)
    }
}

fn trace_bin(raw: &[Complex32], gated: &[Complex32], echo_db: Option<f32>, n: usize) -> TraceBin {
    TraceBin {
        raw: raw[..n].to_vec(),
        gated: gated[..n].to_vec(),
        echo_db: echo_db.unwrap_or(f32::NAN),
    }
}

/// The engine's bins as cuts (a revisited bin replaced by its latest visit).
fn to_cuts(results: &Results, layout: &CutLayout, n: usize, full: bool, w: f64) -> Vec<CutPattern> {
    let mut by_cut: BTreeMap<u16, BTreeMap<u16, CutBin>> = BTreeMap::new();
    for r in results {
        let f = &r.first;
        let m = &r.more[0];
        by_cut.entry(r.cut).or_default().insert(
            f.index,
            CutBin {
                theta_deg: f64::from(f.nominal_deg),
                files: f.sweeps as usize,
                co: trace_bin(&f.raw, &f.gated, f.echo_db, n),
                cross: Some(trace_bin(&m.raw, &m.gated, m.echo_db, n)),
            },
        );
    }
    by_cut
        .into_iter()
        .map(|(c, bins)| CutPattern {
            phi_deg: f64::from(layout.value_deg(c)),
            full_circle: full,
            width_deg: w,
            bins: bins.into_values().collect(),
        })
        .collect()
}

/// Processes a recording of cuts into the cuts' result.
pub fn process_cut_recording(choices: &Choices, path: &Path) -> anyhow::Result<CutsResult> {
    let rec = record::recover_file(path)?;
    if !is_cut_recording(&rec) {
        bail!(
            "{}: no second axis and further trace recorded (kind 8 records): not a recording of cuts",
            path.display()
        );
    }
    let h = rec.header().with_context(|| stream::no_header(path))?;
    let setup = setup::for_recording(h, choices, &stream::sweeps_of(&rec))?;
    let traces = Traces::collect(&rec.records);
    if let Some((at, f)) = traces.faults.first() {
        bail!(
            "{}: the kind 8 record at byte {at} is damaged: {f}",
            path.display()
        );
    }
    let cuts = cut_layout(&traces).with_context(|| path.display().to_string())?;
    let job = RunCuts {
        rec: &rec,
        traces: &traces,
        setup: &setup,
        cuts,
    };
    let results = transform::run(setup.fft_size, job)?;
    let names = traces.names.clone().map(|n| n.traces).unwrap_or_default();
    let name = |i: usize, d: &str| {
        names
            .get(i)
            .and_then(|n| n.parse::<Parameter>().ok())
            .unwrap_or_else(|| d.parse().unwrap_or(Parameter::default_for(2)))
    };
    let n = setup.frequencies_hz.len();
    let full = setup.layout.is_full_circle();
    let width = f64::from(setup.layout.step_deg());
    Ok(CutsResult {
        name: format!("recording {}", path.display()),
        traces: CutTraces {
            co: name(0, "S21"),
            cross: Some(name(1, "S31")),
            cross_manifest: None,
        },
        grid: setup.grid,
        cuts: to_cuts(&results, &cuts, n, full, width),
        files: stream::sweeps_of(&rec).len(),
        impulse: None,
        warnings: setup.remarks.clone(),
        gating: Gating {
            frequencies_hz: setup.frequencies_hz,
            requested_hz: setup.requested_hz,
            indices: setup.indices,
            gate: setup.gate,
            fft_size: setup.fft_size,
            gate_rule: setup.gate_rule,
            gate_source: setup.gate_source,
            remarks: setup.remarks,
            data: setup.data,
        },
        held: None,
    })
}
