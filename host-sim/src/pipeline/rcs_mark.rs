//! `rcs --calibrated-recording FILE`: a copy of the target's recording that carries the
//! scan's RCS calibration (recording kind 9, `formats::rcs_record`), so that `replay`
//! shows it in dBsm ([`crate::pipeline::replay_rcs`]).

use std::path::Path;

use anyhow::{bail, Context};
use sweepgate::window::WindowKind;
use sweepgate::Complex32;

use crate::formats::files::{refuse_if_same_file, write_atomic};
use crate::formats::rcs_record::{BackgroundAt, Measurement, RcsCalibration, RcsNote};
use crate::formats::recording::{self as record, Record, Writer};
use crate::pipeline::engine::gate_sweeps;
use crate::pipeline::rcs::{BackgroundInput, RcsInput, RcsResult, RcsSettings};
use crate::pipeline::rcs_recording;

/// A window as `--band-window` and `--gate-shape` spell it.
pub fn spelling(w: &WindowKind) -> String {
    match w {
        WindowKind::Rectangular => "rectangular".into(),
        WindowKind::Kaiser { beta } => format!("kaiser:{beta}"),
        WindowKind::Tukey { alpha } => format!("tukey:{alpha}"),
        WindowKind::Hann => "hann".into(),
        WindowKind::Hamming => "hamming".into(),
        WindowKind::BlackmanHarris => "blackman-harris".into(),
    }
}

fn pair(v: Complex32) -> [f64; 2] {
    [f64::from(v.re), f64::from(v.im)]
}

/// The smallest step between the target's angles (1° for a single angle).
fn angle_step_deg(angles: &[f64]) -> f64 {
    let mut a = angles.to_vec();
    a.sort_by(f64::total_cmp);
    let step = a
        .windows(2)
        .map(|w| w[1] - w[0])
        .filter(|d| *d > 1e-9)
        .fold(f64::INFINITY, f64::min);
    if step.is_finite() {
        step
    } else {
        1.0
    }
}

/// The calibration of a processed scan, as kind 9 carries it.
pub fn calibration(
    input: &RcsInput,
    settings: &RcsSettings,
    result: &RcsResult,
) -> anyhow::Result<RcsCalibration> {
    let Some(cfg) = result.gate else {
        bail!("--calibrated-recording and --save-calibration need a gate (replay and acquire gate with it)");
    };
    let backgrounds: Vec<(f64, &[Complex32])> = match &input.background {
        BackgroundInput::One(s) => vec![(0.0, s.as_slice())],
        BackgroundInput::PerAngle(list) => list.iter().map(|(a, s)| (*a, s.as_slice())).collect(),
        BackgroundInput::Off => {
            bail!("--calibrated-recording and --save-calibration need a background")
        }
    };
    let refs: Vec<&[Complex32]> = backgrounds.iter().map(|b| b.1).collect();
    let gated = gate_sweeps(&cfg, &refs, None)
        .context("gating the background")?
        .spectra;
    let at = |s: &[Complex32]| -> Vec<[f64; 2]> {
        result
            .frequencies
            .iter()
            .map(|&(k, _)| pair(s[k]))
            .collect()
    };
    let background = backgrounds
        .iter()
        .zip(&gated)
        .map(|((a, raw), g)| BackgroundAt {
            angle_deg: *a,
            raw: at(raw),
            gated: at(g),
        })
        .collect();
    Ok(RcsCalibration {
        gate_center_ns: cfg.center_s * 1e9,
        gate_span_ns: cfg.span_s * 1e9,
        band_window: spelling(&settings.band_window),
        gate_shape: spelling(&settings.gate_shape),
        bin_width_deg: angle_step_deg(&result.angles_deg),
        frequencies_hz: result.frequencies.iter().map(|f| f.1).collect(),
        factor: result
            .frequencies
            .iter()
            .map(|&(k, _)| [result.calibration[k].re, result.calibration[k].im])
            .collect(),
        background,
    })
}

/// Writes to `out` the recording `target` with `calibration` in its kind 9 record (the
/// header first, then the kind 9 record, then every other record as it was).
pub fn write(target: &Path, calibration: RcsCalibration, out: &Path) -> anyhow::Result<()> {
    if !rcs_recording::is_recording(target) {
        bail!(
            "--calibrated-recording: the target {} is not a recording",
            target.display()
        );
    }
    refuse_if_same_file(out, &[target]).context("--calibrated-recording")?;
    let rec = record::recover_file(target)?;
    let header = rec
        .header()
        .with_context(|| crate::pipeline::stream::no_header(target))?;
    let old = rec
        .records
        .iter()
        .find_map(|(_, r)| RcsNote::from_record(r));
    let scene = old.and_then(|n| n.ok()).and_then(|n| n.scene);
    let note = RcsNote {
        measurement: Measurement::Target,
        scene,
        calibration: Some(calibration),
    };
    let mut w = Writer::new(Vec::new()).context("starting the calibrated recording")?;
    w.write(&Record::Header(Box::new(header.clone())))?;
    w.write(&note.to_record())?;
    for (_, r) in &rec.records {
        let skip = matches!(
            r,
            Record::Header(_) | Record::HeaderCopy(_) | Record::End { .. }
        ) || RcsNote::from_record(r).is_some();
        if !skip {
            w.write(r)?;
        }
    }
    let (bytes, _) = w.finish()?;
    write_atomic(out, &bytes)?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::pipeline::options::parse_window;

    #[test]
    fn spellings_parse_back_to_the_same_window() {
        for w in [
            WindowKind::Rectangular,
            WindowKind::Kaiser { beta: 6.2 },
            WindowKind::Tukey { alpha: 0.3 },
            WindowKind::Hann,
            WindowKind::Hamming,
            WindowKind::BlackmanHarris,
        ] {
            assert_eq!(parse_window(&spelling(&w)), Ok(w));
        }
    }

    #[test]
    fn the_bin_width_is_the_smallest_angle_step() {
        assert_eq!(angle_step_deg(&[-1.0, 0.0, 0.5, 1.0]), 0.5);
        assert_eq!(angle_step_deg(&[3.0]), 1.0);
    }
}
