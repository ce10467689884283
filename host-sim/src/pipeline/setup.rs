//! The one set-up: a grid, the user's choices ([`Choices`], from options or a settings
//! file) and what is known of the room (a scenario to plan from, or the sweeps themselves)
//! become the gate, the FFT size, the pattern frequencies and the bin layout. Every command
//! that gates goes through here — `demo`, `replay`, `process`, `acquire`'s live engine —
//! and `simulate` writes its truth at the bins and frequencies chosen here, so that the same
//! data gated by different commands with the same choices gives the same values.
//!
//! # The rules
//!
//! - **Band window**: the choice, else the scenario's `[plan] band_window`, else the
//!   default (see [`crate::pipeline::options`]: Kaiser for 50 dB sidelobes). **Gate
//!   shape**: the choice, else Tukey α = 0.3. The gate is always renormalized.
//! - **FFT size**: the smallest of [`crate::limits::FFT_SIZES`] that holds the sweep's K
//!   points ([`FftSize::for_points`]).
//! - **Pattern frequencies**: the chosen ones, else the recording's, else the grid's
//!   center point; each taken at its nearest grid point (a remark says when a chosen one
//!   moved or was left out), at most [`MAX_FREQUENCIES`].
//! - **Bins**: the chosen width, else the recording's, else the scenario's, else 1°. With
//!   a scenario, bins are centered where the simulator writes its truth: `start + (i + ½)·w`
//!   for a continuous scan, the step angles `start + i·w` for step-and-stop; a full turn
//!   gives a full-circle layout. Without one, a full circle starting at 0°.
//! - **Gate**: a given center or span is used as it is; what is not given comes from the
//!   automatic gate ([`Automatic`]):
//!   - `planner` (a scenario): the core planner ([`sweepgate::plan::plan`]) with the same
//!     room, AUT size, fractional bandwidth, longest path and rotation as `sweepgate plan`:
//!     center at the direct-path delay plus the cable delay, span 2·(first echo's excess
//!     delay − half the band window's main lobe). With no separable echo: center at the
//!     direct path, span four main lobes (at most half the alias-free range).
//!     When the planner's gate is used and there are sweeps, the gate from the data is
//!     worked out beside it and a disagreement is a remark.
//!   - `chosen from the data` (saved sweeps without a scenario): every sweep's
//!     band-windowed impulse response is surveyed ([`crate::pipeline::data_gate`], the
//!     core's [`sweepgate::autogate`]): the gate holds the direct main lobe over its whole
//!     delay swing and closes before the earliest echo that matters at any angle; when no
//!     gate can, a remark says `unseparable` and the bandwidth that would be needed.
//!     [`peak_gate`] (the strongest impulse-response peak, four band-window main lobes)
//!     is kept for the Python binding.
//!
//! `gate_source` (in `summary.json`) says where center and span came from: `command line`,
//! `settings file`, or the automatic gate's name; two joined when they differ.

use anyhow::{bail, Context};
use sweepgate::bins::{BinLayout, RevisitPolicy};
use sweepgate::fft::Fft;
use sweepgate::gate::GateConfig;
use sweepgate::grid::Grid;
use sweepgate::plan::{self, PlanInput};
use sweepgate::scan::{ScanConfig, ScanMode};
use sweepgate::window::WindowKind;
use sweepgate::Complex32;

use crate::formats::recording::{Header, SWEEP_FORMAT};
use crate::limits::MAX_FREQUENCIES;
use crate::model::scenario::{Mode, Scenario};
use crate::pipeline::data_gate::{self, DataGate};
use crate::pipeline::options::{
    default_band_window, parse_window, Choices, Origin, DEFAULT_GATE_SHAPE,
};
use crate::pipeline::plan::{aut_size_m, room_geometry, Overrides};
use crate::pipeline::transform::{self, impulse_view, FftJob, FftSize};

/// An automatic gate: center and span, s, the rule in words and its name.
#[derive(Debug, Clone, PartialEq)]
pub struct AutoGate {
    /// Gate center, s.
    pub center_s: f64,
    /// Gate span, s.
    pub span_s: f64,
    /// How it was chosen, in words.
    pub rule: String,
    /// Its name in `gate_source`: `planner`, `strongest impulse-response peak`, …
    pub source: &'static str,
}

/// Where the gate comes from when the choices leave center or span open.
#[derive(Debug, Clone)]
pub enum Automatic<'a> {
    /// The core planner on a scenario's room (it runs even when both are given, for its
    /// findings); when its gate is used, the gate from the sweeps (may be empty) is
    /// compared with it and a disagreement is a remark.
    Planner(&'a Scenario, &'a [&'a [Complex32]]),
    /// The gate chosen from the data ([`crate::pipeline::data_gate`]) of the sweeps of the
    /// grid's length, in angle regions when `angles_deg` is given (else by sweep order).
    Data {
        /// The sweeps.
        sweeps: &'a [&'a [Complex32]],
        /// Their angles, degrees, when known.
        angles_deg: Option<&'a [f64]>,
        /// Threads to look at them on.
        threads: usize,
    },
    /// A gate the caller worked out (the demo's two-path geometry).
    Fixed(AutoGate),
}

/// Everything gating needs: what saved sweeps without angle bins need.
#[derive(Debug, Clone)]
pub struct Gating {
    /// Pattern frequencies (on the grid), Hz.
    pub frequencies_hz: Vec<f64>,
    /// The pattern frequencies as chosen, Hz, when they were chosen.
    pub requested_hz: Option<Vec<f64>>,
    /// Their grid indices.
    pub indices: Vec<usize>,
    /// The gate.
    pub gate: GateConfig,
    /// FFT size.
    pub fft_size: FftSize,
    /// How the gate was chosen, in words.
    pub gate_rule: String,
    /// Where center and span came from (see the module notes).
    pub gate_source: String,
    /// Planner findings and other set-up remarks.
    pub remarks: Vec<String>,
    /// The gate chosen from the data and what its survey found, when it was surveyed.
    pub data: Option<DataGate>,
}

/// Everything a scan's engine is built from.
#[derive(Debug, Clone)]
pub struct Setup {
    /// Title for screens and plots.
    pub title: String,
    /// The sweep grid.
    pub grid: Grid,
    /// Pattern frequencies (on the grid), Hz.
    pub frequencies_hz: Vec<f64>,
    /// The pattern frequencies as chosen, Hz, when they were chosen.
    pub requested_hz: Option<Vec<f64>>,
    /// Their grid indices.
    pub indices: Vec<usize>,
    /// Bin layout.
    pub layout: BinLayout,
    /// The gate.
    pub gate: GateConfig,
    /// FFT size.
    pub fft_size: FftSize,
    /// How the gate was chosen, in words.
    pub gate_rule: String,
    /// Where center and span came from.
    pub gate_source: String,
    /// Planner findings and other set-up remarks.
    pub remarks: Vec<String>,
    /// Continuous or step-and-stop.
    pub mode: ScanMode,
    /// Settle time for step-and-stop, µs.
    pub settle_us: u32,
    /// Top positioner speed of the scenario, deg/s.
    pub speed_deg_s: Option<f64>,
    /// The gate chosen from the data and what its survey found, when it was surveyed.
    pub data: Option<DataGate>,
}

impl Setup {
    /// The engine's configuration: the layout and mode, a revisited bin replaced by its
    /// latest visit, the settle time, and a speed limit of three times the scenario's.
    pub fn scan_config(&self) -> ScanConfig {
        let mut cfg = ScanConfig::new(self.layout);
        cfg.mode = self.mode;
        cfg.revisit = RevisitPolicy::Replace;
        cfg.track.settle_time_us = self.settle_us;
        // The impulse responses near the gate at a board's rate, for the web view's map.
        cfg.impulse_every = sweepgate::scan::IMPULSE_EVERY_DEFAULT;
        if let Some(v) = self.speed_deg_s {
            cfg.track.max_speed_deg_s = cfg.track.max_speed_deg_s.max((3.0 * v) as f32);
        }
        cfg
    }
}

/// The band window: the choice, else the scenario's `[plan] band_window`, else the default.
pub fn band_window(choices: &Choices, scenario: Option<&Scenario>) -> anyhow::Result<WindowKind> {
    if let Some(w) = choices.band_window {
        return Ok(w);
    }
    match scenario.and_then(|s| s.plan.band_window.as_ref()) {
        Some(t) => parse_window(t)
            .map_err(anyhow::Error::msg)
            .context("the scenario's [plan] band_window"),
        None => Ok(default_band_window()),
    }
}

/// The gate shape: the choice, else [`DEFAULT_GATE_SHAPE`].
pub fn gate_shape(choices: &Choices) -> WindowKind {
    choices.gate_shape.unwrap_or(DEFAULT_GATE_SHAPE)
}

/// Builds the gating of `grid` from the choices; `recorded_hz` are the pattern frequencies
/// to use when none are chosen.
pub fn gating(
    grid: Grid,
    choices: &Choices,
    band_window: WindowKind,
    recorded_hz: &[f64],
    auto: Automatic,
) -> anyhow::Result<Gating> {
    let mut remarks = Vec::new();
    let indices = match &choices.frequencies_hz {
        Some(f) => snap_frequencies(&grid, f, &mut remarks, true),
        None => snap_frequencies(&grid, recorded_hz, &mut remarks, false),
    };
    let need = choices.center_ns.is_none() || choices.span_ns.is_none();
    let mut data = None;
    let auto = match auto {
        Automatic::Planner(s, sweeps) => {
            let p = planned_gate(s, &grid, band_window, &mut remarks)?;
            if need && !sweeps.is_empty() {
                data = compare_with_data(&grid, band_window, sweeps, &p, &mut remarks);
            }
            Some(p)
        }
        Automatic::Data {
            sweeps,
            angles_deg,
            threads,
        } if need => {
            let d = data_gate::data_gate_on(&grid, band_window, sweeps, angles_deg, threads)
                .context(
                "no gate was given and none could be chosen from the data; give --gate-center-ns and --gate-span-ns",
            )?;
            remarks.extend(data_gate::unseparable_warning(&d.choice, &grid));
            let g = AutoGate {
                center_s: d.choice.center_s,
                span_s: d.choice.span_s,
                rule: d.rule.clone(),
                source: data_gate::SOURCE,
            };
            data = Some(d);
            Some(g)
        }
        Automatic::Fixed(g) => Some(g),
        Automatic::Data { .. } => None,
    };
    let (center_s, span_s, rule, source) = choose_gate(choices, auto)?;
    Ok(Gating {
        frequencies_hz: indices.iter().map(|&i| grid.frequency_hz(i)).collect(),
        requested_hz: choices.frequencies_hz.clone(),
        indices,
        gate: GateConfig {
            grid,
            band_window,
            center_s,
            span_s,
            shape: gate_shape(choices),
            renormalize: true,
        },
        fft_size: transform::fft_size(grid.points())?,
        gate_rule: rule,
        gate_source: source,
        remarks,
        data,
    })
}

/// The gate from the data beside the planner's: a disagreement, or no gate from the
/// data at all, is a remark.
fn compare_with_data(
    grid: &Grid,
    band_window: WindowKind,
    sweeps: &[&[Complex32]],
    planned: &AutoGate,
    remarks: &mut Vec<String>,
) -> Option<DataGate> {
    match data_gate::data_gate(grid, band_window, sweeps, None) {
        Ok(d) => {
            remarks.extend(d.disagreement(planned.source, planned.center_s, planned.span_s));
            remarks.extend(data_gate::unseparable_warning(&d.choice, grid));
            Some(d)
        }
        Err(e) => {
            remarks.push(format!(
                "no gate from the data to compare with the planner's: {e:#}"
            ));
            None
        }
    }
}

/// Center and span from the choices, the rest from the automatic gate; the rule in words
/// and the source.
fn choose_gate(
    choices: &Choices,
    auto: Option<AutoGate>,
) -> anyhow::Result<(f64, f64, String, String)> {
    let (mut center, mut span, mut rule, auto_source) = match auto {
        Some(a) => (Some(a.center_s), Some(a.span_s), a.rule, a.source),
        None => (None, None, String::new(), "none"),
    };
    if let Some((v, o)) = choices.center_ns {
        center = Some(v * 1e-9);
        rule.push_str(&format!("; center set by {}", o.by("gate-center-ns")));
    }
    if let Some((v, o)) = choices.span_ns {
        span = Some(v * 1e-9);
        rule.push_str(&format!("; span set by {}", o.by("gate-span-ns")));
    }
    let (Some(center_s), Some(span_s)) = (center, span) else {
        bail!("no gate: there is no scenario to plan one from and no sweep to find one in; give --gate-center-ns and --gate-span-ns");
    };
    let text = |o: Option<(f64, Origin)>| o.map_or(auto_source, |(_, o)| o.text());
    let (c, s) = (text(choices.center_ns), text(choices.span_ns));
    let source = if c == s {
        c.to_string()
    } else {
        format!("{c} (center) + {s} (span)")
    };
    Ok((
        center_s,
        span_s,
        rule.trim_start_matches("; ").to_string(),
        source,
    ))
}

/// Builds the set-up of a recording from its header and the choices; `sweeps` are its
/// sweeps, for the automatic gate when the header has no scenario (may be empty when
/// center and span are chosen).
pub fn for_recording(
    h: &Header,
    choices: &Choices,
    sweeps: &[&[Complex32]],
) -> anyhow::Result<Setup> {
    let grid = Grid::new(h.grid.start_hz, h.grid.step_hz, h.grid.points)
        .context("the recording's grid")?;
    if h.sweep_format != SWEEP_FORMAT {
        bail!("unknown sweep format {:?}", h.sweep_format);
    }
    let scenario = h.scenario.as_ref();
    let auto = match scenario {
        Some(s) => Automatic::Planner(s, sweeps),
        None => Automatic::Data {
            sweeps,
            angles_deg: None,
            threads: crate::threads::available(),
        },
    };
    let bw = band_window(choices, scenario)?;
    let g = gating(grid, choices, bw, &h.pattern_frequencies_hz, auto)?;
    let width_deg = choices
        .bin_width_deg
        .or(h.bin_width_deg)
        .or(scenario.map(Scenario::bin_width_deg))
        .unwrap_or(1.0);
    let bins = match scenario {
        Some(s) => BinSpec::for_scenario(s, width_deg),
        None => BinSpec::full_circle(0.0, width_deg),
    };
    let (mode, settle_us, speed_deg_s) = scan_mode(scenario);
    let title = match (scenario, h.source.is_empty()) {
        (Some(s), _) => s.name.clone(),
        (None, true) => "recording".into(),
        (None, false) => h.source.clone(),
    };
    Ok(Setup {
        title,
        grid,
        frequencies_hz: g.frequencies_hz,
        requested_hz: g.requested_hz,
        indices: g.indices,
        layout: bins.layout()?,
        gate: g.gate,
        fft_size: g.fft_size,
        gate_rule: g.gate_rule,
        gate_source: g.gate_source,
        remarks: g.remarks,
        mode,
        settle_us,
        speed_deg_s,
        data: g.data,
    })
}

/// Scan mode, settle time (µs) and top speed of a scenario's positioner.
fn scan_mode(scenario: Option<&Scenario>) -> (ScanMode, u32, Option<f64>) {
    match scenario {
        Some(s) if s.positioner.mode == Mode::Step => (
            ScanMode::StepAndStop {
                reject_moving: false,
            },
            ((s.positioner.settle_s * 0.5 * 1e6) as u32).clamp(10_000, 200_000),
            Some(s.positioner.speed_deg_s),
        ),
        Some(s) => (
            ScanMode::Continuous,
            200_000,
            Some(s.positioner.speed_deg_s),
        ),
        None => (ScanMode::Continuous, 200_000, None),
    }
}

/// Angle bins, in f64: the engine's layout and the simulator's truth angles both come
/// from here.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BinSpec {
    /// Center of the lowest bin, degrees.
    pub first_deg: f64,
    /// Bin width, degrees.
    pub width_deg: f64,
    /// Number of bins.
    pub count: usize,
    /// A full turn.
    pub full_circle: bool,
    /// The scan runs from high angles to low.
    pub descending: bool,
}

impl BinSpec {
    /// A full circle of `width_deg` bins, the first centered at `first_deg`.
    pub fn full_circle(first_deg: f64, width_deg: f64) -> Self {
        Self {
            first_deg,
            width_deg,
            count: ((360.0 / width_deg) + 1e-9).floor().max(1.0) as usize,
            full_circle: true,
            descending: false,
        }
    }

    /// The bins of a scenario's scan (see the module notes).
    pub fn for_scenario(s: &Scenario, width_deg: f64) -> Self {
        let q = &s.positioner;
        let lo = q.start_deg.min(q.stop_deg);
        let span = (q.stop_deg - q.start_deg).abs();
        let step = q.mode == Mode::Step;
        let first_deg = if step { lo } else { lo + 0.5 * width_deg };
        let n = ((span / width_deg) + 1e-9).floor() as usize;
        if span >= 360.0 - 1e-6 {
            return Self {
                descending: q.stop_deg < q.start_deg,
                ..Self::full_circle(first_deg, width_deg)
            };
        }
        Self {
            first_deg,
            width_deg,
            count: if step { n + 1 } else { n.max(1) },
            full_circle: false,
            descending: q.stop_deg < q.start_deg,
        }
    }

    /// The core's layout of these bins.
    pub fn layout(&self) -> anyhow::Result<BinLayout> {
        let (first, w) = (self.first_deg as f32, self.width_deg as f32);
        let last = self.first_deg + (self.count.max(1) - 1) as f64 * self.width_deg;
        let r = if self.full_circle {
            BinLayout::full_circle(first, w)
        } else {
            BinLayout::sector(first, last as f32, w)
        };
        r.with_context(|| {
            format!(
                "bin layout of {} bins of {}° from {}°",
                self.count, self.width_deg, self.first_deg
            )
        })
    }

    /// Bin centers in scan order, degrees.
    pub fn centers_deg(&self) -> Vec<f64> {
        let mut v: Vec<f64> = (0..self.count)
            .map(|i| self.first_deg + i as f64 * self.width_deg)
            .collect();
        if self.descending {
            v.reverse();
        }
        v
    }
}

/// Where `simulate` writes the free-space truth of a scenario: the pattern frequencies and
/// the bin centers (in scan order) a recording of it is set up with by default.
pub fn truth_points(s: &Scenario) -> anyhow::Result<(Vec<f64>, Vec<f64>)> {
    let grid = s.grid().context("the scenario's sweep")?;
    let indices = snap_frequencies(&grid, &s.pattern.frequencies_hz, &mut Vec::new(), false);
    let frequencies_hz = indices.iter().map(|&i| grid.frequency_hz(i)).collect();
    let angles = BinSpec::for_scenario(s, s.bin_width_deg()).centers_deg();
    Ok((frequencies_hz, angles))
}

/// Pattern frequencies at their nearest grid points, at most [`MAX_FREQUENCIES`] (the
/// first ones), with a remark for each one that moved or was dropped (moves only with
/// `report_moves`). Empty input: the center point.
pub fn snap_frequencies(
    grid: &Grid,
    requested_hz: &[f64],
    remarks: &mut Vec<String>,
    report_moves: bool,
) -> Vec<usize> {
    let mut indices = Vec::new();
    for f in requested_hz {
        match grid.nearest_index(*f) {
            Some(i) => {
                let g = grid.frequency_hz(i);
                if report_moves && g != *f {
                    remarks.push(format!(
                        "pattern frequency {f} Hz taken at the nearest grid point, {g} Hz"
                    ));
                }
                indices.push(i);
            }
            None if report_moves => remarks.push(format!(
                "pattern frequency {f} Hz is not on or near the grid; left out"
            )),
            None => {}
        }
    }
    if indices.is_empty() {
        indices.push(grid.points() / 2);
    }
    if indices.len() > MAX_FREQUENCIES {
        remarks.push(format!(
            "only the first {MAX_FREQUENCIES} of {} pattern frequencies are gated",
            indices.len()
        ));
        indices.truncate(MAX_FREQUENCIES);
    }
    indices
}

/// The planner's gate for a scenario (see the module notes); findings go to `remarks`.
pub fn planned_gate(
    s: &Scenario,
    grid: &Grid,
    band_window: WindowKind,
    remarks: &mut Vec<String>,
) -> anyhow::Result<AutoGate> {
    let room = room_geometry(s);
    let planes = &room.planes[..room.planes.len().min(plan::MAX_PLANES)];
    let scatterers = &room.scatterers[..room.scatterers.len().min(plan::MAX_SCATTERERS)];
    let (aut_size_m, _) = aut_size_m(s, &Overrides::default());
    let continuous = s.positioner.mode == Mode::Continuous;
    let input = PlanInput {
        grid: *grid,
        aut_size_m,
        aut: room.aut,
        probe: room.probe,
        planes,
        scatterers,
        band_window,
        bin_step_deg: s.bin_width_deg(),
        sweep_duration_s: s.sweep.sweep_duration_s,
        cable_delay_s: s.range.cable_delay_s,
        aut_fractional_bandwidth: s.plan.aut_fractional_bandwidth,
        longest_path_m: s.plan.longest_path_m,
        rotation_deg_s: continuous.then_some(s.positioner.speed_deg_s),
    };
    let p = plan::plan(&input).context("planning the gate")?;
    for f in &p.findings {
        remarks.push(format!("planner: {f}"));
    }
    if let Some(g) = p.gate {
        return Ok(AutoGate {
            center_s: g.center_s,
            span_s: g.span_s,
            rule: format!(
                "planner: center at the direct path ({:.3} ns incl. cable), closing half a band-window main lobe ({:.3} ns) before the first echo",
                g.center_s * 1e9,
                p.mainlobe_s * 1e9
            ),
            source: "planner",
        });
    }
    // No echo to avoid (or none separable): hold the direct path's main lobe and a margin,
    // within the alias-free range.
    let span_s = (4.0 * p.mainlobe_s).min(0.5 * grid.alias_free_s());
    remarks.push(format!(
        "no separable echo: gate span set to four band-window main lobes ({:.3} ns)",
        span_s * 1e9
    ));
    Ok(AutoGate {
        center_s: p.direct_delay_s,
        span_s,
        rule: "center at the direct path; span four main lobes (no separable echo)".into(),
        source: "planner",
    })
}

/// Index of the sweep with the largest Σ|S|² (the first, on ties; 0 when empty).
pub fn strongest(sweeps: &[&[Complex32]]) -> usize {
    let energy = |s: &[Complex32]| s.iter().map(|z| f64::from(z.norm_sqr())).sum::<f64>();
    let mut best = (0usize, f64::NEG_INFINITY);
    for (i, s) in sweeps.iter().enumerate() {
        let e = energy(s);
        if e > best.1 {
            best = (i, e);
        }
    }
    best.0
}

/// The gate on the strongest impulse-response peak (see the module notes).
pub fn peak_gate(
    grid: &Grid,
    band_window: WindowKind,
    sweeps: &[&[Complex32]],
    angles_deg: Option<&[f64]>,
) -> anyhow::Result<AutoGate> {
    let usable: Vec<(usize, &[Complex32])> = sweeps
        .iter()
        .enumerate()
        .filter(|(_, s)| s.len() == grid.points())
        .map(|(i, s)| (i, *s))
        .collect();
    let only: Vec<&[Complex32]> = usable.iter().map(|(_, s)| *s).collect();
    let Some(&(i, sweep)) = usable.get(strongest(&only)) else {
        bail!("no gate: there is no scenario to plan one from and no sweep to find one in; give --gate-center-ns and --gate-span-ns");
    };
    let size = transform::fft_size(grid.points())?;
    let peak_m = transform::run(
        size,
        PeakSample {
            grid,
            band_window,
            sweep,
        },
    )?;
    let m = size.points();
    let center_s = grid.time_s(m, peak_m);
    let mainlobe_s = band_window.mainlobe_width() / (grid.points() as f64 * grid.step_hz());
    let span_s = (4.0 * mainlobe_s)
        .min(0.5 * grid.alias_free_s())
        .max(4.0 * grid.time_step_s(m));
    let mut rule = format!(
        "strongest impulse-response peak: center on the peak at {:.3} ns, span four band-window main lobes ({:.3} ns)",
        center_s * 1e9,
        span_s * 1e9
    );
    if let Some(a) = angles_deg.and_then(|a| a.get(i)) {
        rule.push_str(&format!(" (sweep at {a}°)"));
    }
    Ok(AutoGate {
        center_s,
        span_s,
        rule,
        source: "strongest impulse-response peak",
    })
}

/// The sample of largest |h| in a sweep's impulse response (band window only).
struct PeakSample<'a> {
    grid: &'a Grid,
    band_window: WindowKind,
    sweep: &'a [Complex32],
}

impl FftJob for PeakSample<'_> {
    type Output = anyhow::Result<usize>;
    fn run<const M: usize>(self) -> Self::Output
    where
        [Complex32; M]: Fft,
    {
        let gate = transform::provisional_gate::<M>(self.grid, self.band_window)?;
        let view = impulse_view(&gate, self.sweep, 0.0, 1);
        let mut peak = (0usize, -1.0f64);
        for (m, h) in view.magnitude.iter().enumerate() {
            if *h > peak.1 {
                peak = (m, *h);
            }
        }
        if peak.1 <= 0.0 {
            bail!("no impulse-response peak to gate on (the sweep is all zero); give --gate-center-ns and --gate-span-ns");
        }
        Ok(peak.0)
    }
}
