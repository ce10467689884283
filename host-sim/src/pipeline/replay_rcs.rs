//! `replay` of an RCS scan: a target recording carrying its calibration (recording kind 9,
//! written by `rcs --calibrated-recording`) is replayed with the calibration's gate, bins
//! and pattern frequencies, and shown in dBsm: each closed bin's values become
//! factor × (value − background at the nearest angle) before they reach the screen (raw:
//! the ungated background subtracted; gated: the gated one), the level axis reads
//! `RCS dBsm`, and the summary gives the RCS per pattern frequency. The browser view
//! (`--web`) gets the same calibrated bins and draws them in absolute dBsm under
//! [`WEB_LEVEL_LABEL`]. The report folder and the `--serve` stream keep the plain |S21|
//! values.

use anyhow::{bail, Context};
use num_complex::Complex64;
use sweepgate::wire::preview::{encode_frame, BinRecord, PreviewRecord, MAX_FRAME};
use sweepgate::Complex32;

use crate::formats::rcs_record::{BackgroundAt, RcsCalibration, RcsNote};
use crate::formats::recording::Recovered;
use crate::output::report::{ReportBin, ReportInput};
use crate::output::screen::{PreviewDecoder, PREVIEW_F};
use crate::pipeline::options::{parse_window, Choices, Origin};
use crate::web::AbsoluteLevels;

/// The level axis' label of an RCS scan.
pub const LEVEL_LABEL: &str = "RCS dBsm";

/// The browser view's level axis title of an RCS scan.
pub const WEB_LEVEL_LABEL: &str = "RCS (dBsm)";

/// How the browser view names the levels of an RCS scan: absolute, in dBsm.
pub fn web_levels() -> AbsoluteLevels {
    AbsoluteLevels {
        label: WEB_LEVEL_LABEL.into(),
        unit: "dBsm".into(),
    }
}

/// Checks that a calibration's lists fit its frequencies (one to [`PREVIEW_F`] of them, a
/// factor each, a background with a value at each).
pub fn check(c: &RcsCalibration) -> anyhow::Result<()> {
    let n = c.frequencies_hz.len();
    let fits = c.factor.len() == n
        && !c.background.is_empty()
        && c.background
            .iter()
            .all(|b| b.raw.len() == n && b.gated.len() == n);
    if !fits || n == 0 || n > PREVIEW_F {
        bail!("its calibration does not fit its {n} frequencies");
    }
    if !(c.bin_width_deg.is_finite() && c.bin_width_deg > 0.0) {
        bail!(
            "its bin width {} is not a positive number of degrees",
            c.bin_width_deg
        );
    }
    Ok(())
}

/// The calibration a recording carries, if any.
pub fn calibration_of(rec: &Recovered) -> anyhow::Result<Option<RcsCalibration>> {
    for (at, r) in &rec.records {
        if let Some(note) = RcsNote::from_record(r) {
            let note = note.with_context(|| format!("the RCS record at byte {at}"))?;
            if let Some(c) = note.calibration {
                check(&c).with_context(|| format!("the RCS record at byte {at}"))?;
                return Ok(Some(c));
            }
        }
    }
    Ok(None)
}

/// Takes the gate, bins and frequencies from the calibration; refuses choices of the user's
/// that would make it wrong.
pub fn fill(choices: &mut Choices, cal: &RcsCalibration) -> anyhow::Result<()> {
    fill_from(choices, cal, Origin::RcsRecord)
}

/// [`fill`] for a calibration that came from `origin` (a recording's kind 9 record, or a
/// calibration file).
pub fn fill_from(
    choices: &mut Choices,
    cal: &RcsCalibration,
    origin: Origin,
) -> anyhow::Result<()> {
    let given = choices.center_ns.is_some()
        || choices.span_ns.is_some()
        || choices.band_window.is_some()
        || choices.gate_shape.is_some()
        || choices.frequencies_hz.is_some();
    if given {
        let whose = match origin {
            Origin::RcsFile => "the RCS calibration file was made",
            _ => "the recording carries an RCS calibration made",
        };
        bail!("{whose} with its own gate and frequencies: leave out --gate-center-ns, --gate-span-ns, --band-window, --gate-shape and --frequencies-hz");
    }
    let window = |t: &str| parse_window(t).map_err(anyhow::Error::msg);
    choices.center_ns = Some((cal.gate_center_ns, origin));
    choices.span_ns = Some((cal.gate_span_ns, origin));
    choices.band_window = Some(window(&cal.band_window).context("its band window")?);
    choices.gate_shape = Some(window(&cal.gate_shape).context("its gate shape")?);
    choices.frequencies_hz = Some(cal.frequencies_hz.clone());
    choices.bin_width_deg = Some(cal.bin_width_deg);
    Ok(())
}

fn c64(v: [f64; 2]) -> Complex64 {
    Complex64::new(v[0], v[1])
}

/// `a − b` taken round the circle, in −180…180°.
fn turn_deg(a: f64, b: f64) -> f64 {
    (a - b + 180.0).rem_euclid(360.0) - 180.0
}

/// The background nearest `angle_deg` round the circle.
fn nearest(cal: &RcsCalibration, angle_deg: f64) -> &BackgroundAt {
    cal.background
        .iter()
        .min_by(|a, b| {
            turn_deg(a.angle_deg, angle_deg)
                .abs()
                .total_cmp(&turn_deg(b.angle_deg, angle_deg).abs())
        })
        .unwrap_or(&cal.background[0])
}

/// factor × (v − background): the calibrated amplitude, m.
fn calibrated(factor: [f64; 2], v: Complex64, background: [f64; 2]) -> Complex64 {
    c64(factor) * (v - c64(background))
}

/// A bin's values in calibrated amplitude (m), so that their dB are dBsm.
pub fn calibrate_bin(cal: &RcsCalibration, b: &mut BinRecord<PREVIEW_F>) {
    let bg = nearest(cal, f64::from(b.nominal_deg));
    let to32 = |v: Complex64| Complex32::new(v.re as f32, v.im as f32);
    for (j, fv) in b.values.iter_mut().enumerate().take(cal.factor.len()) {
        let raw = Complex64::new(f64::from(fv.raw.re), f64::from(fv.raw.im));
        let gated = Complex64::new(f64::from(fv.gated.re), f64::from(fv.gated.im));
        fv.raw = to32(calibrated(cal.factor[j], raw, bg.raw[j]));
        fv.gated = to32(calibrated(cal.factor[j], gated, bg.gated[j]));
    }
}

/// Rewrites preview frames with calibrated bin values (other records as they were).
pub struct Calibrator {
    cal: RcsCalibration,
    decoder: PreviewDecoder,
}

impl Calibrator {
    /// A rewriter for `cal`.
    pub fn new(cal: RcsCalibration) -> Self {
        Self {
            cal,
            decoder: PreviewDecoder::new(),
        }
    }

    /// The frames in `bytes`, rewritten.
    pub fn frames(&mut self, bytes: &[u8]) -> Vec<u8> {
        let mut out = Vec::with_capacity(bytes.len());
        let cal = &self.cal;
        self.decoder.feed(bytes, |seq, mut rec| {
            if let PreviewRecord::Bin(b) = &mut rec {
                calibrate_bin(cal, b);
            }
            let mut frame = [0u8; MAX_FRAME];
            if let Ok(n) = encode_frame(&rec, seq, &mut frame) {
                out.extend_from_slice(&frame[..n]);
            }
        });
        out
    }
}

/// RCS per pattern frequency over the replayed bins: the highest and its angle, and the
/// mean power, in dBsm.
pub fn summary_lines(report: &ReportInput, cal: &RcsCalibration) -> Vec<String> {
    summary_of(&report.frequencies_hz, &report.bins, cal)
}

/// [`summary_lines`] of `bins` at `frequencies_hz` (an acquisition's live bins).
pub fn summary_of(frequencies_hz: &[f64], bins: &[ReportBin], cal: &RcsCalibration) -> Vec<String> {
    let mut lines = Vec::new();
    for (j, f) in frequencies_hz.iter().enumerate() {
        let mut rows: Vec<(f64, f64)> = Vec::new();
        for b in bins {
            if let Some(v) = b.values.get(j) {
                let bg = nearest(cal, b.angle_deg);
                let a = calibrated(cal.factor[j], v.gated, bg.gated[j]);
                rows.push((turn_deg(b.angle_deg, 0.0), a.norm_sqr()));
            }
        }
        let Some(&(at, top)) = rows.iter().max_by(|a, b| a.1.total_cmp(&b.1)) else {
            continue;
        };
        let mean = rows.iter().map(|r| r.1).sum::<f64>() / rows.len() as f64;
        let dbsm = |p: f64| 10.0 * p.max(1e-30).log10();
        lines.push(format!(
            "RCS at {:.4} GHz (gated, background subtracted, calibrated): highest {:.3} dBsm at {at}°, mean {:.3} dBsm over {} bins",
            f / 1e9,
            dbsm(top),
            dbsm(mean),
            rows.len()
        ));
    }
    lines
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cal() -> RcsCalibration {
        let at = |angle_deg: f64, v: f64| BackgroundAt {
            angle_deg,
            raw: vec![[v, 0.0]],
            gated: vec![[v / 2.0, 0.0]],
        };
        RcsCalibration {
            gate_center_ns: 28.0,
            gate_span_ns: 4.0,
            band_window: "kaiser:6".into(),
            gate_shape: "tukey:0.3".into(),
            bin_width_deg: 1.0,
            frequencies_hz: vec![10e9],
            factor: vec![[0.0, 2.0]],
            background: vec![at(-10.0, 1.0), at(-1.0, 3.0), at(10.0, 5.0)],
        }
    }

    #[test]
    fn the_nearest_background_is_found_round_the_circle() {
        let c = cal();
        assert_eq!(nearest(&c, 359.5).angle_deg, -1.0);
        assert_eq!(nearest(&c, 349.0).angle_deg, -10.0);
        assert_eq!(nearest(&c, 9.0).angle_deg, 10.0);
    }

    #[test]
    fn a_bin_is_calibrated_after_subtracting_its_background() {
        let c = cal();
        let mut b = BinRecord::<PREVIEW_F> {
            bin: 0,
            flags: 0,
            sweeps: 1,
            nominal_deg: 359.0,
            mean_deg: 359.0,
            max_smear_deg: 0.0,
            echo_db: f32::NAN,
            values: heapless::Vec::new(),
        };
        let v = sweepgate::wire::preview::FreqValue {
            index: 0,
            raw: Complex32::new(4.0, 0.0),
            gated: Complex32::new(2.5, 1.0),
            angle_offset_deg: 0.0,
        };
        b.values.push(v).unwrap();
        calibrate_bin(&c, &mut b);
        // j2 × (4 − 3) and j2 × ((2.5 + j) − 1.5), worked by hand.
        assert_eq!(b.values[0].raw, Complex32::new(0.0, 2.0));
        assert_eq!(b.values[0].gated, Complex32::new(-2.0, 2.0));
    }

    #[test]
    fn a_users_gate_is_refused_and_the_calibrations_taken_otherwise() {
        let c = cal();
        let mut mine = Choices {
            center_ns: Some((20.0, Origin::CommandLine)),
            ..Choices::default()
        };
        assert!(fill(&mut mine, &c).is_err());
        let mut none = Choices::default();
        fill(&mut none, &c).unwrap();
        assert_eq!(none.center_ns, Some((28.0, Origin::RcsRecord)));
        assert_eq!(none.frequencies_hz, Some(vec![10e9]));
        assert_eq!(none.bin_width_deg, Some(1.0));
    }
}
