//! The RCS record of a recording (kind 9, [`recording::kind::RCS`]): what an RCS
//! measurement is, as UTF-8 JSON, written once after the header.
//!
//! ```json
//! {"measurement": "target", "scene": "range.toml", "calibration": {...}}
//! ```
//!
//! `measurement` is one of `target` (the target on the turntable), `background` (the zone
//! empty, mount in place), `reference` (the reference target in the zone) and
//! `reference_background` (the reference run's background); `scene` names where the
//! measurement came from, when known. `calibration` (written by `rcs
//! --calibrated-recording` into a copy of the target's recording) makes the recording an
//! RCS scan `replay` shows in dBsm: the gate it was calibrated with (`gate_center_ns`,
//! `gate_span_ns`, `band_window`, `gate_shape` spelled as on the command line), the angle
//! `bin_width_deg`, the pattern `frequencies_hz`, and per frequency the calibration
//! `factor` (m per unit of S, `[re, im]`); `background` lists, per angle, the background's
//! `raw` and `gated` values at those frequencies (`[re, im]` each). A bin's RCS amplitude is
//! factor × (gated − gated background at the nearest angle). Readers that predate kind 9 pass it through as an
//! unknown kind and read the sweeps and positions as any scan.

use serde::{Deserialize, Serialize};

use crate::formats::recording::{self, Record};

/// Which measurement of an RCS scan a recording holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Measurement {
    /// The target on the turntable.
    Target,
    /// The zone empty, mount in place.
    Background,
    /// The reference target in the zone.
    Reference,
    /// The reference run's background.
    ReferenceBackground,
}

impl Measurement {
    /// The word used in files and on the command line.
    pub fn word(self) -> &'static str {
        match self {
            Self::Target => "target",
            Self::Background => "background",
            Self::Reference => "reference",
            Self::ReferenceBackground => "reference_background",
        }
    }

    /// All four, in the order a scan measures them.
    pub const ALL: [Measurement; 4] = [
        Self::Target,
        Self::Background,
        Self::Reference,
        Self::ReferenceBackground,
    ];
}

impl std::str::FromStr for Measurement {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        Self::ALL
            .into_iter()
            .find(|m| m.word() == s)
            .ok_or_else(|| {
                format!("{s:?}: one of target, background, reference, reference_background")
            })
    }
}

/// The content of a kind 9 record.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RcsNote {
    /// Which measurement this recording holds.
    pub measurement: Measurement,
    /// Where it came from (a scene file's name), when known.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub scene: Option<String>,
    /// The calibration, in a target recording marked by `rcs --calibrated-recording`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub calibration: Option<RcsCalibration>,
}

/// What `replay` needs to show a target recording in dBsm (see the module notes).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RcsCalibration {
    /// Gate centre, ns.
    pub gate_center_ns: f64,
    /// Gate span, ns.
    pub gate_span_ns: f64,
    /// Band window, as `--band-window` spells it.
    pub band_window: String,
    /// Gate shape, as `--gate-shape` spells it.
    pub gate_shape: String,
    /// Angle bin width, degrees (the target's angle step).
    pub bin_width_deg: f64,
    /// Pattern frequencies, Hz.
    pub frequencies_hz: Vec<f64>,
    /// Calibration factor per pattern frequency, m per unit of S, `[re, im]`.
    pub factor: Vec<[f64; 2]>,
    /// The background per angle.
    pub background: Vec<BackgroundAt>,
}

/// The background at one angle, at the pattern frequencies.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BackgroundAt {
    /// Angle, degrees.
    pub angle_deg: f64,
    /// Raw values, `[re, im]`.
    pub raw: Vec<[f64; 2]>,
    /// Gated values, `[re, im]`.
    pub gated: Vec<[f64; 2]>,
}

impl RcsNote {
    /// As a recording record (kind 9).
    pub fn to_record(&self) -> Record {
        Record::Unknown {
            kind: recording::kind::RCS,
            payload: serde_json::to_vec(self).unwrap_or_default(),
        }
    }

    /// Reads a kind 9 record; `None` for any other record.
    pub fn from_record(r: &Record) -> Option<Result<Self, serde_json::Error>> {
        match r {
            Record::Unknown { kind, payload } if *kind == recording::kind::RCS => {
                Some(serde_json::from_slice(payload))
            }
            _ => None,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_note_reads_back_through_its_record() {
        for m in Measurement::ALL {
            let note = RcsNote {
                measurement: m,
                scene: Some("range.toml".into()),
                calibration: None,
            };
            let rec = note.to_record();
            assert_eq!(rec.kind(), 9);
            let frame = rec.frame();
            let (back, used) = recording::read_record(&frame, 0).unwrap();
            assert_eq!(used, frame.len());
            assert_eq!(RcsNote::from_record(&back).unwrap().unwrap(), note);
            let text = String::from_utf8(rec.payload()).unwrap();
            assert!(text.contains(&format!("\"{}\"", m.word())), "{text}");
            assert_eq!(m.word().parse::<Measurement>(), Ok(m));
        }
    }

    #[test]
    fn other_records_and_bad_json_are_told_apart() {
        let pos = Record::Position {
            t_us: 1,
            counts: 0,
            angle_deg: 0.0,
        };
        assert!(RcsNote::from_record(&pos).is_none());
        let bad = Record::Unknown {
            kind: recording::kind::RCS,
            payload: b"{\"measurement\": \"sideways\"}".to_vec(),
        };
        assert!(RcsNote::from_record(&bad).unwrap().is_err());
        assert!("sideways".parse::<Measurement>().is_err());
    }
}
