//! Radar cross section from a turntable scan: background subtraction, the down-range gate
//! around the target zone and calibration against a reference target, over the core's
//! [`sweepgate::rcs`] and [`sweepgate::gate`], on whole sweeps.
//!
//! For each angle: target − background (the background at the same angle, or the one
//! background sweep), gated around the zone on the FFT path, times the calibration factor
//! C(f) = A_ref(f) / gated(reference − its background)(f), where A_ref is the reference
//! target's complex amplitude ([`ReferenceTarget`]). The result is the target's complex
//! amplitude in m at every frequency of the sweep; its square is σ in m².

use anyhow::{bail, Context};
use num_complex::Complex64;
use sweepgate::gate::GateConfig;
use sweepgate::grid::Grid;
use sweepgate::rcs::{subtract, Calibration, Zone};
use sweepgate::window::WindowKind;
use sweepgate::Complex32;

use crate::model::rcs_targets::ReferenceTarget;
use crate::pipeline::engine::gate_sweeps;
use crate::pipeline::transform::c64;

/// The background the target sweeps are corrected with.
#[derive(Debug, Clone, PartialEq)]
pub enum BackgroundInput {
    /// One background sweep for every angle.
    One(Vec<Complex32>),
    /// A background sweep per angle, each used for the target sweep at the same angle.
    PerAngle(Vec<(f64, Vec<Complex32>)>),
    /// No background subtraction (for comparison only: the result carries the coupling,
    /// the mount and the room wherever the gate lets them through).
    Off,
}

/// The measurements of an RCS scan, all on one grid.
#[derive(Debug, Clone, PartialEq)]
pub struct RcsInput {
    /// The common frequency grid.
    pub grid: Grid,
    /// The target on the turntable: (angle, sweep) per angle.
    pub target: Vec<(f64, Vec<Complex32>)>,
    /// The empty zone (mount in place).
    pub background: BackgroundInput,
    /// The reference target measured in the zone.
    pub reference: Vec<Complex32>,
    /// The background of the reference measurement (used unless `background` is `Off`).
    pub reference_background: Vec<Complex32>,
    /// What the reference target is.
    pub reference_target: ReferenceTarget,
}

/// Where the down-range gate comes from.
#[derive(Debug, Clone, PartialEq)]
pub enum RcsGate {
    /// Around the target zone; the echoes (coupling first, then the mount) are checked to
    /// lie outside it.
    Zone {
        /// The zone as seen from the antennas.
        zone: Zone,
        /// Delays of the echoes to keep out, s.
        echoes_s: Vec<f64>,
    },
    /// Centre and span given by the user, s.
    Given {
        /// Gate centre, s.
        center_s: f64,
        /// Gate span, s.
        span_s: f64,
    },
    /// No gate (for comparison only).
    Off,
}

/// How the scan is processed.
#[derive(Debug, Clone, PartialEq)]
pub struct RcsSettings {
    /// The gate.
    pub gate: RcsGate,
    /// Band window before the inverse transform.
    pub band_window: WindowKind,
    /// Gate shape.
    pub gate_shape: WindowKind,
    /// Pattern frequencies, Hz (each taken at its nearest grid point).
    pub frequencies_hz: Vec<f64>,
}

/// The processed scan.
#[derive(Debug, Clone, PartialEq)]
pub struct RcsResult {
    /// The common grid.
    pub grid: Grid,
    /// The gate used (`None`: no gate).
    pub gate: Option<GateConfig>,
    /// The pattern frequencies: (grid index, frequency in Hz).
    pub frequencies: Vec<(usize, f64)>,
    /// The angles, in input order.
    pub angles_deg: Vec<f64>,
    /// Calibrated complex amplitude (m) per angle at every grid point.
    pub calibrated: Vec<Vec<Complex64>>,
    /// |target| at each pattern frequency per angle, dB (the raw S-parameter).
    pub raw_db: Vec<Vec<f64>>,
    /// |target − background| at each pattern frequency per angle, dB (before the gate).
    pub subtracted_db: Vec<Vec<f64>>,
    /// The calibration factor C(f) at every grid point, m per unit of S.
    pub calibration: Vec<Complex64>,
    /// The reference target's RCS at every grid point, dBsm.
    pub reference_dbsm: Vec<f64>,
    /// The residual background: the reference's background against the target run's
    /// background at the angle nearest 0°, through the same gate and calibration, mean
    /// power over the band in dBsm (`None` when they are the same sweep or there is none).
    pub residual_background_dbsm: Option<f64>,
}

/// 20·log10 |v|, floored at −300 dB.
fn db(v: Complex32) -> f64 {
    (20.0 * (v.norm() as f64).log10()).max(-300.0)
}

/// The gate the settings ask for on `grid`.
pub fn choose_gate(settings: &RcsSettings, grid: Grid) -> anyhow::Result<Option<GateConfig>> {
    Ok(match &settings.gate {
        RcsGate::Zone { zone, echoes_s } => Some(
            zone.gate(grid, settings.band_window, settings.gate_shape, echoes_s)
                .context("the gate around the target zone")?,
        ),
        RcsGate::Given { center_s, span_s } => Some(GateConfig {
            grid,
            band_window: settings.band_window,
            center_s: *center_s,
            span_s: *span_s,
            shape: settings.gate_shape,
            renormalize: true,
        }),
        RcsGate::Off => None,
    })
}

/// The background sweep for the target sweep at `angle_deg` (`None`: no subtraction).
fn background_at(bg: &BackgroundInput, angle_deg: f64) -> anyhow::Result<Option<&[Complex32]>> {
    Ok(match bg {
        BackgroundInput::One(s) => Some(s),
        BackgroundInput::PerAngle(list) => {
            let found = list.iter().find(|(a, _)| (a - angle_deg).abs() < 1e-9);
            match found {
                Some((_, s)) => Some(s),
                None => bail!("the background has no sweep at the target's angle {angle_deg}°"),
            }
        }
        BackgroundInput::Off => None,
    })
}

/// `sweep − background` (or the sweep itself), length-checked.
fn minus(sweep: &[Complex32], bg: Option<&[Complex32]>) -> anyhow::Result<Vec<Complex32>> {
    let mut s = sweep.to_vec();
    if let Some(b) = bg {
        subtract(&mut s, b).context("background subtraction")?;
    }
    Ok(s)
}

/// Gates every sweep with `gate` (or passes them through).
fn gate_all(
    gate: &Option<GateConfig>,
    sweeps: &[Vec<Complex32>],
) -> anyhow::Result<Vec<Vec<Complex32>>> {
    match gate {
        Some(cfg) => {
            let refs: Vec<&[Complex32]> = sweeps.iter().map(|s| s.as_slice()).collect();
            Ok(gate_sweeps(cfg, &refs, None)?.spectra)
        }
        None => Ok(sweeps.to_vec()),
    }
}

/// The pattern frequencies on `grid`.
fn pattern_frequencies(grid: &Grid, hz: &[f64]) -> anyhow::Result<Vec<(usize, f64)>> {
    hz.iter()
        .map(|&f| {
            grid.nearest_index(f)
                .map(|i| (i, grid.frequency_hz(i)))
                .with_context(|| format!("pattern frequency {f} Hz is outside the sweep"))
        })
        .collect()
}

/// The reference target's complex amplitude at every grid point.
fn known_amplitudes(target: &ReferenceTarget, grid: &Grid) -> anyhow::Result<Vec<Complex64>> {
    (0..grid.points())
        .map(|k| {
            target
                .amplitude(grid.frequency_hz(k))
                .with_context(|| format!("reference target at {} Hz", grid.frequency_hz(k)))
        })
        .collect()
}

/// Processes an RCS scan (see the module notes).
pub fn process(input: &RcsInput, settings: &RcsSettings) -> anyhow::Result<RcsResult> {
    let grid = input.grid;
    let gate = choose_gate(settings, grid)?;
    let frequencies = pattern_frequencies(&grid, &settings.frequencies_hz)?;
    let with_bg = !matches!(input.background, BackgroundInput::Off);
    // Everything that is gated, in one batch: the targets, the reference, the residual.
    let mut sweeps = Vec::with_capacity(input.target.len() + 2);
    for (angle, s) in &input.target {
        sweeps.push(minus(s, background_at(&input.background, *angle)?)?);
    }
    let ref_bg = with_bg.then_some(input.reference_background.as_slice());
    sweeps.push(minus(&input.reference, ref_bg).context("the reference measurement")?);
    let residual = residual_sweep(input)?;
    if let Some(r) = &residual {
        sweeps.push(r.clone());
    }
    let gated = gate_all(&gate, &sweeps)?;
    let n = input.target.len();
    let known = known_amplitudes(&input.reference_target, &grid)?;
    let known32: Vec<Complex32> = known
        .iter()
        .map(|a| Complex32::new(a.re as f32, a.im as f32))
        .collect();
    let cal = Calibration::<{ crate::limits::MAX_POINTS }>::from_reference(&gated[n], &known32)
        .context("calibration against the reference measurement")?;
    let calibrate = |s: &[Complex32]| -> anyhow::Result<Vec<Complex64>> {
        let mut v = s[..grid.points()].to_vec();
        cal.apply(&mut v).context("calibration")?;
        Ok(v.into_iter().map(c64).collect())
    };
    let calibrated = gated[..n]
        .iter()
        .map(|g| calibrate(g))
        .collect::<anyhow::Result<Vec<_>>>()?;
    let residual_background_dbsm = match residual {
        Some(_) => Some(mean_dbsm(&calibrate(&gated[n + 1])?)),
        None => None,
    };
    let raw: Vec<&[Complex32]> = input.target.iter().map(|(_, s)| s.as_slice()).collect();
    let less: Vec<&[Complex32]> = sweeps[..n].iter().map(|s| s.as_slice()).collect();
    let (raw_db, subtracted_db) = (levels(&raw, &frequencies), levels(&less, &frequencies));
    Ok(RcsResult {
        grid,
        gate,
        frequencies,
        angles_deg: input.target.iter().map(|(a, _)| *a).collect(),
        calibrated,
        raw_db,
        subtracted_db,
        calibration: cal.factor().iter().map(|&f| c64(f)).collect(),
        reference_dbsm: known.iter().map(|a| 10.0 * a.norm_sqr().log10()).collect(),
        residual_background_dbsm,
    })
}

/// |sweep| in dB at each pattern frequency, per sweep.
fn levels(sweeps: &[&[Complex32]], frequencies: &[(usize, f64)]) -> Vec<Vec<f64>> {
    sweeps
        .iter()
        .map(|s| frequencies.iter().map(|&(k, _)| db(s[k])).collect())
        .collect()
}

/// The reference's background minus the target run's background nearest 0°, when they
/// are different sweeps.
fn residual_sweep(input: &RcsInput) -> anyhow::Result<Option<Vec<Complex32>>> {
    let other = match &input.background {
        BackgroundInput::One(s) => s.as_slice(),
        BackgroundInput::PerAngle(list) => {
            match list.iter().min_by(|a, b| a.0.abs().total_cmp(&b.0.abs())) {
                Some((_, s)) => s.as_slice(),
                None => return Ok(None),
            }
        }
        BackgroundInput::Off => return Ok(None),
    };
    if other == input.reference_background.as_slice() {
        return Ok(None);
    }
    Ok(Some(minus(&input.reference_background, Some(other))?))
}

/// Mean of |a|² over the band, dBsm.
fn mean_dbsm(a: &[Complex64]) -> f64 {
    let p = a.iter().map(|v| v.norm_sqr()).sum::<f64>() / a.len().max(1) as f64;
    10.0 * p.max(1e-30).log10()
}

/// RCS in dBsm of calibrated amplitude `a` (m), floored at −300 dBsm.
pub fn dbsm(a: Complex64) -> f64 {
    (10.0 * a.norm_sqr().log10()).max(-300.0)
}
