//! The RCS calibration file: what `acquire` needs to show an RCS scan in dBsm while it
//! runs, written by `rcs … --save-calibration FILE` and read by `acquire --rcs-calibration
//! FILE`. UTF-8 JSON:
//!
//! ```json
//! {"format": "sweepgate RCS calibration 1", "calibration": {...}}
//! ```
//!
//! `calibration` is exactly what a calibrated recording's kind 9 record carries
//! ([`crate::formats::rcs_record::RcsCalibration`]): the gate (centre, span, band window,
//! gate shape), the angle bin width, the pattern frequencies, the calibration factor per
//! frequency (m per unit of S, `[re, im]`) and the background per angle (raw and gated).
//! A file of another `format` is refused.

use std::path::Path;

use anyhow::{bail, Context};
use serde::{Deserialize, Serialize};

use crate::formats::files::write_atomic;
use crate::formats::rcs_record::RcsCalibration;

/// The `format` of the files this build writes and reads.
pub const FORMAT: &str = "sweepgate RCS calibration 1";

/// A file's bytes are refused beyond this (a calibration of eight frequencies and a few
/// thousand angles is well under it).
pub const MAX_BYTES: u64 = 16 << 20;

#[derive(Serialize, Deserialize)]
struct CalibrationFile {
    format: String,
    calibration: RcsCalibration,
}

/// The file's bytes for `calibration`.
pub fn to_bytes(calibration: &RcsCalibration) -> anyhow::Result<Vec<u8>> {
    let f = CalibrationFile {
        format: FORMAT.into(),
        calibration: calibration.clone(),
    };
    let mut v = serde_json::to_vec_pretty(&f).context("making the RCS calibration file")?;
    v.push(b'\n');
    Ok(v)
}

/// Reads a calibration from file bytes (`name` names them in errors).
pub fn from_bytes(bytes: &[u8], name: &str) -> anyhow::Result<RcsCalibration> {
    let f: CalibrationFile = serde_json::from_slice(bytes)
        .with_context(|| format!("{name}: not an RCS calibration file (rcs --save-calibration)"))?;
    if f.format != FORMAT {
        bail!("{name}: format {:?}, this build reads {FORMAT:?}", f.format);
    }
    Ok(f.calibration)
}

/// Writes `calibration` to `path`, whole or not at all.
pub fn write(path: &Path, calibration: &RcsCalibration) -> anyhow::Result<()> {
    write_atomic(path, &to_bytes(calibration)?)?;
    Ok(())
}

/// Reads the calibration file at `path`.
pub fn read(path: &Path) -> anyhow::Result<RcsCalibration> {
    let len = std::fs::metadata(path)
        .with_context(|| format!("reading {}", path.display()))?
        .len();
    if len > MAX_BYTES {
        bail!(
            "{}: {len} bytes, more than an RCS calibration file holds ({MAX_BYTES})",
            path.display()
        );
    }
    let bytes = std::fs::read(path).with_context(|| format!("reading {}", path.display()))?;
    from_bytes(&bytes, &path.display().to_string())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::formats::rcs_record::BackgroundAt;

    fn cal() -> RcsCalibration {
        RcsCalibration {
            gate_center_ns: 28.2,
            gate_span_ns: 6.0,
            band_window: "kaiser:6".into(),
            gate_shape: "tukey:0.3".into(),
            bin_width_deg: 2.0,
            frequencies_hz: vec![9e9, 10e9],
            factor: vec![[1.5, -0.25], [0.125, 3.0]],
            background: vec![BackgroundAt {
                angle_deg: -2.0,
                raw: vec![[0.1, 0.2], [0.3, 0.4]],
                gated: vec![[0.01, 0.02], [0.03, 0.04]],
            }],
        }
    }

    #[test]
    fn a_calibration_reads_back_exactly() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("cal.json");
        write(&p, &cal()).unwrap();
        assert_eq!(read(&p).unwrap(), cal());
        let text = std::fs::read_to_string(&p).unwrap();
        assert!(text.contains(FORMAT), "{text}");
    }

    #[test]
    fn other_files_are_refused_naming_the_file() {
        let e = from_bytes(b"{\"measurement\": \"target\"}", "x.json").unwrap_err();
        assert!(
            format!("{e:#}").starts_with("x.json: not an RCS calibration file"),
            "{e:#}"
        );
        let other = to_bytes(&cal())
            .map(|b| {
                String::from_utf8(b)
                    .unwrap()
                    .replace(FORMAT, "sweepgate RCS calibration 2")
            })
            .unwrap();
        let e = from_bytes(other.as_bytes(), "y.json").unwrap_err();
        assert!(format!("{e:#}").contains("calibration 2"), "{e:#}");
        let dir = tempfile::tempdir().unwrap();
        let e = read(&dir.path().join("none.json")).unwrap_err();
        assert!(format!("{e:#}").contains("none.json"), "{e:#}");
    }
}
