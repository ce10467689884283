//! `acquire --rcs-calibration FILE`: an RCS scan shown in dBsm while it runs.
//!
//! FILE is the calibration `rcs … --save-calibration FILE` wrote
//! ([`crate::formats::rcs_calibration`]), or a recording `rcs … --calibrated-recording`
//! wrote (its kind 9 record carries the same calibration). The live engine then gates with
//! the calibration's gate, band window and gate shape, at its pattern frequencies and in
//! its bins (gate options and a different `--bin-width-deg` are refused), and each closed
//! bin is shown as factor × (value − the background at the nearest angle), exactly as
//! `replay` of a calibrated recording shows it ([`crate::pipeline::replay_rcs`]): on
//! standard output in dBsm, and in the browser view in absolute dBsm. The recording
//! written carries the calibration (kind 9, measurement `target`), so `replay` of it shows
//! dBsm too; its sweeps are the plain measured ones, and `rcs` reads it as any target.
//!
//! The calibration holds for the range, antennas and set-up it was measured with: the
//! background and the reference must still be valid for the new scan (the same mount,
//! cables and band), as for any calibration by substitution.

use std::path::Path;

use anyhow::{bail, Context};
use sweepgate::wire::preview::BinRecord;

use crate::formats::rcs_calibration;
use crate::formats::rcs_record::{Measurement, RcsCalibration, RcsNote};
use crate::formats::recording::recover_file;
use crate::limits::MAX_FREQUENCIES;
use crate::pipeline::options::{Choices, Origin};
use crate::pipeline::rcs_recording::is_recording;
use crate::pipeline::replay_rcs;
use crate::pipeline::transform::c64;
use crate::units::db;

/// Reads the calibration at `path`: a calibration file, or a calibrated recording.
pub fn load(path: &Path) -> anyhow::Result<RcsCalibration> {
    let cal = if is_recording(path) {
        let rec = recover_file(path)?;
        replay_rcs::calibration_of(&rec)
            .with_context(|| path.display().to_string())?
            .with_context(|| {
                format!(
                    "{}: the recording carries no RCS calibration (rcs --calibrated-recording writes one)",
                    path.display()
                )
            })?
    } else {
        rcs_calibration::read(path)?
    };
    replay_rcs::check(&cal).with_context(|| path.display().to_string())?;
    Ok(cal)
}

/// Reads the calibration at `path` and takes the live engine's gate, frequencies and bins
/// from it; refuses choices of the user's that would make the dBsm wrong.
pub fn take(path: &Path, choices: &mut Choices) -> anyhow::Result<RcsCalibration> {
    let cal = load(path).context("--rcs-calibration")?;
    if let Some(w) = choices.bin_width_deg {
        if (w - cal.bin_width_deg).abs() > 1e-9 {
            bail!(
                "--bin-width-deg {w}: the RCS calibration {} has bins {}° wide, the background's angle step; leave --bin-width-deg out",
                path.display(),
                cal.bin_width_deg
            );
        }
    }
    replay_rcs::fill_from(choices, &cal, Origin::RcsFile).context("--rcs-calibration")?;
    Ok(cal)
}

/// The kind 9 record of the recording `acquire` writes with a calibration.
pub fn note(cal: &RcsCalibration) -> RcsNote {
    RcsNote {
        measurement: Measurement::Target,
        scene: None,
        calibration: Some(cal.clone()),
    }
}

/// A closed bin's values in dBsm, as `acquire` prints them:
/// `at <GHz> GHz raw <dBsm> dBsm, gated <dBsm> dBsm` per pattern frequency.
pub fn values_dbsm(
    cal: &RcsCalibration,
    bin: &BinRecord<MAX_FREQUENCIES>,
    frequencies_hz: &[f64],
) -> Vec<String> {
    let mut b = bin.clone();
    replay_rcs::calibrate_bin(cal, &mut b);
    frequencies_hz
        .iter()
        .zip(&b.values)
        .map(|(f, v)| {
            format!(
                "at {:.4} GHz raw {:>7.2} dBsm, gated {:>7.2} dBsm",
                f / 1e9,
                db(c64(v.raw)),
                db(c64(v.gated))
            )
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::formats::rcs_record::BackgroundAt;
    use sweepgate::wire::preview::FreqValue;
    use sweepgate::Complex32;

    fn cal() -> RcsCalibration {
        RcsCalibration {
            gate_center_ns: 28.2,
            gate_span_ns: 6.0,
            band_window: "kaiser:6".into(),
            gate_shape: "tukey:0.3".into(),
            bin_width_deg: 2.0,
            frequencies_hz: vec![10e9],
            factor: vec![[0.0, 0.5]],
            background: vec![BackgroundAt {
                angle_deg: 0.0,
                raw: vec![[1.0, 0.0]],
                gated: vec![[0.5, 0.0]],
            }],
        }
    }

    #[test]
    fn a_bins_values_are_printed_in_dbsm_after_calibration() {
        let mut values = heapless::Vec::new();
        values
            .push(FreqValue {
                index: 200,
                raw: Complex32::new(3.0, 0.0),
                gated: Complex32::new(0.5, 0.2),
                angle_offset_deg: 0.0,
            })
            .unwrap();
        let b = BinRecord {
            bin: 0,
            flags: 0,
            sweeps: 1,
            nominal_deg: 0.0,
            mean_deg: 0.0,
            max_smear_deg: 0.0,
            echo_db: f32::NAN,
            values,
        };
        // raw: |j0.5 × (3 − 1)| = 1 → 0 dBsm; gated: |j0.5 × j0.2| = 0.1 → −20 dBsm.
        let line = &values_dbsm(&cal(), &b, &[10e9])[0];
        assert_eq!(line, "at 10.0000 GHz raw    0.00 dBsm, gated  -20.00 dBsm");
    }

    #[test]
    fn gate_options_and_another_bin_width_are_refused() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("cal.json");
        rcs_calibration::write(&p, &cal()).unwrap();
        let mut given = Choices {
            center_ns: Some((20.0, Origin::CommandLine)),
            ..Choices::default()
        };
        let e = take(&p, &mut given).unwrap_err();
        assert!(
            format!("{e:#}").contains("leave out --gate-center-ns"),
            "{e:#}"
        );
        let mut width = Choices {
            bin_width_deg: Some(1.0),
            ..Choices::default()
        };
        let e = take(&p, &mut width).unwrap_err();
        assert!(format!("{e:#}").contains("bins 2° wide"), "{e:#}");
        let mut none = Choices {
            bin_width_deg: Some(2.0),
            ..Choices::default()
        };
        let c = take(&p, &mut none).unwrap();
        assert_eq!(c, cal());
        assert_eq!(none.center_ns, Some((28.2, Origin::RcsFile)));
        assert_eq!(none.frequencies_hz, Some(vec![10e9]));
    }
}
