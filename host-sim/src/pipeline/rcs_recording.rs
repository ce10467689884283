//! RCS measurements as recordings: written by `simulate-rcs --recording` (one recording per
//! measurement) and read by `rcs` beside Touchstone files and manifests.
//!
//! A recording of an RCS measurement is an ordinary scan (`formats::recording`): a header
//! with the grid, sweep records and position records, plus a kind 9 record saying which
//! measurement it is (`formats::rcs_record`). Each sweep's angle is the positioner's angle
//! at the middle of the sweep, interpolated linearly between the position records either
//! side of it (held at the first or last sample outside them); sweeps at the same angle
//! (within a millionth of a degree) are averaged coherently, so a stepped turntable that
//! takes several sweeps per step gives one sweep per angle. When the header gives a bin
//! width (`acquire --bin-width-deg`), each angle is first taken to the nearest multiple of
//! it: a turntable settles near, never exactly on, its step, and the target and background
//! runs must meet at the same angles.

use std::io::Read;
use std::path::Path;

use anyhow::{bail, Context};
use num_complex::Complex64;
use sweepgate::grid::Grid;
use sweepgate::Complex32;

use crate::formats::rcs_record::{Measurement, RcsNote};
use crate::formats::recording::{
    self as record, GridInfo, Header, Record, Writer, MAGIC, SWEEP_FORMAT,
};

/// Two angles closer than this are the same angle, degrees.
const SAME_ANGLE_DEG: f64 = 1e-6;
/// Time between turntable steps in a written recording, µs.
const STEP_US: u64 = 1_000_000;
/// Encoder counts per turn written in the header (a thousandth of a degree per count).
const COUNTS_PER_TURN: u32 = 360_000;

/// Whether `path` starts like a recording (a file that cannot be read is not one; its
/// reader then says why).
pub fn is_recording(path: &Path) -> bool {
    let mut magic = [0u8; 8];
    std::fs::File::open(path)
        .and_then(|mut f| f.read_exact(&mut magic))
        .is_ok()
        && &magic == MAGIC
}

/// An RCS measurement read from a recording.
#[derive(Debug, Clone, PartialEq)]
pub struct RecordedScan {
    /// The recording's grid.
    pub grid: Grid,
    /// One sweep per angle, in the order the angles were first met.
    pub sweeps: Vec<(f64, Vec<Complex32>)>,
    /// The kind 9 record, when there is one.
    pub note: Option<RcsNote>,
}

/// The angle at `t_us` from position samples sorted by time.
fn angle_at(positions: &[(u64, f64)], t_us: f64) -> Option<f64> {
    let after = positions.partition_point(|p| (p.0 as f64) <= t_us);
    match (
        after.checked_sub(1).map(|i| positions[i]),
        positions.get(after).copied(),
    ) {
        (Some((t0, a0)), Some((t1, a1))) => {
            let x = (t_us - t0 as f64) / (t1 - t0) as f64;
            Some(a0 + (a1 - a0) * x)
        }
        (Some((_, a)), None) | (None, Some((_, a))) => Some(a),
        (None, None) => None,
    }
}

/// Adds `sweep` to the sum at `angle` (a new angle opens a new sum).
fn add(sums: &mut Vec<(f64, Vec<Complex32>, u32)>, angle: f64, sweep: &[Complex32]) {
    match sums
        .iter_mut()
        .find(|s| (s.0 - angle).abs() < SAME_ANGLE_DEG)
    {
        Some(s) => {
            s.1.iter_mut().zip(sweep).for_each(|(a, b)| *a += *b);
            s.2 += 1;
        }
        None => sums.push((angle, sweep.to_vec(), 1)),
    }
}

/// Reads an RCS measurement from the recording at `path` (see the module notes).
pub fn read_scan(path: &Path) -> anyhow::Result<RecordedScan> {
    let rec = record::recover_file(path)?;
    let h = rec
        .header()
        .with_context(|| crate::pipeline::stream::no_header(path))?;
    let grid = Grid::new(h.grid.start_hz, h.grid.step_hz, h.grid.points)
        .with_context(|| format!("{}: the header's grid", path.display()))?;
    let mut positions = Vec::new();
    let mut note = None;
    for (_, r) in &rec.records {
        if let Record::Position {
            t_us, angle_deg, ..
        } = r
        {
            positions.push((*t_us, *angle_deg));
        } else if let Some(n) = RcsNote::from_record(r) {
            note = Some(n.with_context(|| format!("{}: its RCS record", path.display()))?);
        }
    }
    positions.sort_by_key(|p| p.0);
    let mut sums = Vec::new();
    for (at, r) in &rec.records {
        let Record::Sweep {
            start_us,
            end_us,
            s21,
            ..
        } = r
        else {
            continue;
        };
        if s21.len() != grid.points() {
            bail!(
                "{}: the sweep at byte {at} has {} points, the header's grid {}",
                path.display(),
                s21.len(),
                grid.points()
            );
        }
        let mid_us = (*start_us as f64 + *end_us as f64) / 2.0;
        let Some(angle) = angle_at(&positions, mid_us) else {
            bail!(
                "{}: no position records, so no sweep has an angle",
                path.display()
            );
        };
        let angle = match h.bin_width_deg {
            Some(w) if w > 0.0 => (angle / w).round() * w,
            _ => angle,
        };
        add(&mut sums, angle, s21);
    }
    if sums.is_empty() {
        bail!("{}: no sweeps", path.display());
    }
    let sweeps = sums
        .into_iter()
        .map(|(a, s, n)| (a, s.into_iter().map(|v| v / n as f32).collect()))
        .collect();
    Ok(RecordedScan { grid, sweeps, note })
}

/// A recording of one RCS measurement: the header, the kind 9 record, and per angle a
/// position sample, the sweep and a position sample at the same angle (a stepped
/// turntable, one step a second).
pub fn measurement_bytes(
    grid: &Grid,
    rows: &[(f64, Vec<Complex64>)],
    measurement: Measurement,
    scene: Option<String>,
) -> anyhow::Result<Vec<u8>> {
    let mut w = Writer::new(Vec::new()).context("starting a recording")?;
    let header = Header {
        software: format!("sweepgate {}", env!("CARGO_PKG_VERSION")),
        source: format!("simulate-rcs: {}", measurement.word()),
        scenario: None,
        scenario_toml: None,
        seed: None,
        grid: GridInfo {
            start_hz: grid.start_hz(),
            step_hz: grid.step_hz(),
            points: grid.points(),
        },
        sweep_format: SWEEP_FORMAT.into(),
        pattern_frequencies_hz: Vec::new(),
        bin_width_deg: None,
        counts_per_turn: Some(COUNTS_PER_TURN),
    };
    w.write(&Record::Header(Box::new(header)))?;
    let note = RcsNote {
        measurement,
        scene,
        calibration: None,
    };
    w.write(&note.to_record())?;
    for (i, (angle_deg, values)) in rows.iter().enumerate() {
        let t0 = i as u64 * STEP_US;
        let counts = (angle_deg * f64::from(COUNTS_PER_TURN) / 360.0).round() as i64;
        let position = |t_us| Record::Position {
            t_us,
            counts,
            angle_deg: *angle_deg,
        };
        w.write(&position(t0))?;
        w.write(&Record::Sweep {
            index: i as u32,
            start_us: t0 + STEP_US / 10,
            end_us: t0 + STEP_US * 4 / 10,
            s21: values
                .iter()
                .map(|v| Complex32::new(v.re as f32, v.im as f32))
                .collect(),
        })?;
        w.write(&position(t0 + STEP_US / 2))?;
    }
    Ok(w.finish()?.0)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn angles_are_interpolated_and_held_outside_the_samples() {
        let p = [(100, 1.0), (200, 3.0)];
        assert_eq!(angle_at(&p, 150.0), Some(2.0));
        assert_eq!(angle_at(&p, 50.0), Some(1.0));
        assert_eq!(angle_at(&p, 250.0), Some(3.0));
        assert_eq!(angle_at(&[], 250.0), None);
    }

    #[test]
    fn written_measurements_read_back_one_sweep_per_angle() {
        let grid = Grid::new(8e9, 10e6, 3).unwrap();
        let rows: Vec<(f64, Vec<Complex64>)> = [-0.5, 0.0, 0.5]
            .iter()
            .map(|&a| (a, vec![Complex64::new(a, 1.0); 3]))
            .collect();
        let bytes = measurement_bytes(&grid, &rows, Measurement::Background, None).unwrap();
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("b.rec");
        std::fs::write(&path, bytes).unwrap();
        assert!(is_recording(&path));
        let scan = read_scan(&path).unwrap();
        assert_eq!(scan.grid, grid);
        assert_eq!(scan.note.unwrap().measurement, Measurement::Background);
        let angles: Vec<f64> = scan.sweeps.iter().map(|s| s.0).collect();
        assert_eq!(angles, vec![-0.5, 0.0, 0.5]);
        assert_eq!(scan.sweeps[2].1[1], Complex32::new(0.5, 1.0));
    }

    #[test]
    fn sweeps_at_one_angle_are_averaged() {
        let mut sums = Vec::new();
        add(&mut sums, 1.0, &[Complex32::new(1.0, 0.0)]);
        add(&mut sums, 2.0, &[Complex32::new(5.0, 0.0)]);
        add(&mut sums, 1.0 + 1e-9, &[Complex32::new(3.0, 2.0)]);
        assert_eq!(sums.len(), 2);
        assert_eq!(sums[0].1[0], Complex32::new(4.0, 2.0));
        assert_eq!(sums[0].2, 2);
    }
}
