//! Manifest angles into bins: the bin width follows the manifest's own angle step unless one
//! is given, and files that fall into one bin are combined (their sweeps averaged) and
//! reported, never one silently dropped.
//!
//! On a full circle an angle's bin key is its angle wrapped to (−180°, 180°] (so 350° and
//! −10° are one angle, and so are −180° and 180°); on a sector it is the angle as given. Bin
//! `k` holds the keys nearest `first + k·width`, `first` the smallest key; with the default
//! width (the smallest step between distinct keys) two different angles never share a bin.

use sweepgate::metrics::wrap_deg;
use sweepgate::Complex32;

use crate::formats::manifest::AngleSweep;

/// Keys closer than this (degrees) are one angle.
const SAME_ANGLE_DEG: f64 = 1e-9;

/// The binned sweeps of a manifest.
#[derive(Debug, Clone)]
pub struct ManifestBins {
    /// One sweep per bin (the mean of the files in it), at the mean key of its files, in
    /// increasing key order.
    pub sweeps: Vec<AngleSweep>,
    /// Files in each bin.
    pub counts: Vec<usize>,
    /// The bin width used.
    pub width_deg: f64,
    /// One sentence per bin holding more than one file.
    pub combined: Vec<String>,
}

fn key(angle_deg: f64, full_circle: bool) -> f64 {
    if full_circle {
        wrap_deg(angle_deg)
    } else {
        angle_deg
    }
}

/// The smallest step between distinct angle keys (the seam gap included on a full circle),
/// or `None` with fewer than two distinct angles.
pub fn angle_step_deg(angles_deg: &[f64], full_circle: bool) -> Option<f64> {
    let mut keys: Vec<f64> = angles_deg.iter().map(|&a| key(a, full_circle)).collect();
    keys.sort_by(f64::total_cmp);
    keys.dedup_by(|a, b| (*a - *b).abs() < SAME_ANGLE_DEG);
    let mut step = keys
        .windows(2)
        .map(|w| w[1] - w[0])
        .fold(f64::INFINITY, f64::min);
    if full_circle {
        if let (Some(lo), Some(hi)) = (keys.first(), keys.last()) {
            if keys.len() > 1 {
                step = step.min(lo + 360.0 - hi);
            }
        }
    }
    step.is_finite().then_some(step)
}

/// Which angles share a bin: the width used and, per bin in increasing key order, the
/// indices of its angles (in increasing key, ties in the order given). It needs the angles
/// alone, so a bin's files can be read when the bin is worked ([`Mean`]).
#[derive(Debug, Clone, PartialEq)]
pub struct BinPlan {
    /// The bin width used.
    pub width_deg: f64,
    /// Per bin, the indices of its angles.
    pub groups: Vec<Vec<usize>>,
}

/// The bins of `angles_deg`: `width_deg` when given, else the manifest's own step (1° for a
/// single angle).
pub fn plan_bins(
    angles_deg: &[f64],
    width_deg: Option<f64>,
    full_circle: bool,
) -> anyhow::Result<BinPlan> {
    let angles = angles_deg;
    let width_deg = width_deg
        .or_else(|| angle_step_deg(angles, full_circle))
        .unwrap_or(1.0);
    if !(width_deg.is_finite() && width_deg > 0.0) {
        anyhow::bail!("bin width {width_deg}° must be a positive number of degrees");
    }
    let mut order: Vec<usize> = (0..angles.len()).collect();
    order.sort_by(|&a, &b| key(angles[a], full_circle).total_cmp(&key(angles[b], full_circle)));
    let first = order.first().map_or(0.0, |&i| key(angles[i], full_circle));
    let index = |i: usize| ((key(angles[i], full_circle) - first) / width_deg + 1e-9).round();
    let mut groups: Vec<Vec<usize>> = Vec::new();
    for &i in &order {
        match groups.last_mut() {
            Some(g) if g.first().is_some_and(|&j| index(j) == index(i)) => g.push(i),
            _ => groups.push(vec![i]),
        }
    }
    Ok(BinPlan { width_deg, groups })
}

/// The angle of a bin: the mean key of its members' angles (in member order).
pub fn bin_angle_deg(member_angles_deg: &[f64], full_circle: bool) -> f64 {
    let n = member_angles_deg.len().max(1) as f64;
    member_angles_deg
        .iter()
        .map(|&a| key(a, full_circle))
        .sum::<f64>()
        / n
}

/// The sentence for a bin combining several files: (file, angle) of each member.
pub fn combined_note(files: &[(String, f64)], angle_deg: f64, width_deg: f64) -> String {
    let list: Vec<String> = files.iter().map(|(f, a)| format!("{f} ({a}°)")).collect();
    format!(
        "{} files fall into one bin at {angle_deg:.4}° (bin width {width_deg}°): {}; \
         their sweeps are averaged",
        files.len(),
        list.join(", ")
    )
}

/// Bins the sweeps ([`plan_bins`]). A bin of one file takes that file's sweep (no copy);
/// the others are averaged.
pub fn bin_sweeps(
    mut sweeps: Vec<AngleSweep>,
    width_deg: Option<f64>,
    full_circle: bool,
) -> anyhow::Result<ManifestBins> {
    let angles: Vec<f64> = sweeps.iter().map(|s| s.angle_deg).collect();
    let plan = plan_bins(&angles, width_deg, full_circle)?;
    let width_deg = plan.width_deg;
    let groups = plan.groups;
    let mut out = ManifestBins {
        sweeps: Vec::with_capacity(groups.len()),
        counts: Vec::with_capacity(groups.len()),
        width_deg,
        combined: Vec::new(),
    };
    for g in &groups {
        let (sweep, note) = combine(&mut sweeps, g, full_circle, width_deg);
        out.sweeps.push(sweep);
        out.counts.push(g.len());
        out.combined.extend(note);
    }
    Ok(out)
}

/// The mean of a bin's sweeps made one sweep at a time, as [`bin_sweeps`] makes it (f64
/// sums from 0 in member order, divided by the count, to f32): the same values bit for bit
/// while only the sums and the sweep being added are held.
#[derive(Debug, Clone, Default)]
pub struct Mean {
    sums: Vec<(f64, f64)>,
    count: usize,
}

impl Mean {
    /// Adds the next member's sweep.
    pub fn add(&mut self, values: &[Complex32]) {
        if self.sums.len() < values.len() {
            self.sums.resize(values.len(), (0.0, 0.0));
        }
        for (s, v) in self.sums.iter_mut().zip(values) {
            s.0 += f64::from(v.re);
            s.1 += f64::from(v.im);
        }
        self.count += 1;
    }

    /// Bytes held by the sums.
    pub fn bytes(&self) -> usize {
        self.sums.capacity() * std::mem::size_of::<(f64, f64)>()
    }

    /// The mean of the sweeps added.
    pub fn finish(self) -> Vec<Complex32> {
        let n = self.count.max(1) as f64;
        self.sums
            .into_iter()
            .map(|(re, im)| Complex32::new((re / n) as f32, (im / n) as f32))
            .collect()
    }
}

/// The mean of the sweeps `members` (complex, point by point) at their mean key, and the
/// sentence saying so when there is more than one. A single member's sweep is taken out of
/// `sweeps`, not copied (each file is in one bin only).
fn combine(
    sweeps: &mut [AngleSweep],
    members: &[usize],
    full_circle: bool,
    width_deg: f64,
) -> (AngleSweep, Option<String>) {
    let n = members.len().max(1) as f64;
    let member_angles: Vec<f64> = members.iter().map(|&i| sweeps[i].angle_deg).collect();
    let angle_deg = bin_angle_deg(&member_angles, full_circle);
    let points = members
        .iter()
        .map(|&i| sweeps[i].values.len())
        .max()
        .unwrap_or(0);
    if let [only] = members {
        // One file: its values as the mean below makes them (0 + v, over 1, in f64, is v
        // exactly, but for −0 made +0, as v + 0 in f32 makes it), in place, without the
        // f64 pass.
        let mut sweep = std::mem::take(&mut sweeps[*only]);
        for v in &mut sweep.values {
            *v = Complex32::new(v.re + 0.0, v.im + 0.0);
        }
        sweep.angle_deg = angle_deg;
        return (sweep, None);
    }
    let values = (0..points)
        .map(|p| {
            let (re, im) = members.iter().fold((0.0f64, 0.0f64), |(re, im), &i| {
                let v = sweeps[i].values.get(p).copied().unwrap_or_default();
                (re + f64::from(v.re), im + f64::from(v.im))
            });
            Complex32::new((re / n) as f32, (im / n) as f32)
        })
        .collect();
    let first = members
        .first()
        .map(|&i| sweeps[i].file.clone())
        .unwrap_or_default();
    let note = (members.len() > 1).then(|| {
        let files: Vec<(String, f64)> = members
            .iter()
            .map(|&i| (sweeps[i].file.display().to_string(), sweeps[i].angle_deg))
            .collect();
        combined_note(&files, angle_deg, width_deg)
    });
    (
        AngleSweep {
            angle_deg,
            values,
            file: first,
        },
        note,
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::path::PathBuf;

    fn sweep(angle_deg: f64, v: f32) -> AngleSweep {
        AngleSweep {
            angle_deg,
            values: vec![Complex32::new(v, -v); 3],
            file: PathBuf::from(format!("a{angle_deg}.s2p")),
        }
    }

    #[test]
    fn the_same_angle_twice_on_a_circle_is_combined_and_reported() {
        // 350° and −10° are one angle on a full circle; so are −180° and 180°.
        let s = [
            sweep(-180.0, 1.0),
            sweep(-10.0, 2.0),
            sweep(0.0, 5.0),
            sweep(10.0, 5.0),
            sweep(180.0, 3.0),
            sweep(350.0, 4.0),
        ];
        let b = bin_sweeps(s.to_vec(), None, true).unwrap();
        assert_eq!(b.width_deg, 10.0);
        let angles: Vec<f64> = b.sweeps.iter().map(|s| s.angle_deg).collect();
        assert_eq!(angles, [-10.0, 0.0, 10.0, 180.0]);
        assert_eq!(b.counts, [2, 1, 1, 2]);
        assert_eq!(b.sweeps[0].values[0], Complex32::new(3.0, -3.0)); // (2 + 4) / 2
        assert_eq!(b.sweeps[3].values[2], Complex32::new(2.0, -2.0)); // (1 + 3) / 2
        assert_eq!(b.combined.len(), 2);
        assert!(
            b.combined[0].contains("a350.s2p (350°)"),
            "{:?}",
            b.combined
        );
        assert!(
            b.combined[0].contains("a-10.s2p (-10°)"),
            "{:?}",
            b.combined
        );
        // Every file is in some bin.
        assert_eq!(b.counts.iter().sum::<usize>(), s.len());
    }

    #[test]
    fn the_default_width_keeps_the_manifest_resolution() {
        // A 0.25° manifest over a sector: 0.25° bins, one file each.
        let s: Vec<AngleSweep> = (0..41)
            .map(|i| sweep(-5.0 + 0.25 * i as f64, 1.0))
            .collect();
        let b = bin_sweeps(s.clone(), None, false).unwrap();
        assert!((b.width_deg - 0.25).abs() < 1e-12);
        assert_eq!(b.sweeps.len(), 41);
        assert!(b.combined.is_empty());
        // A given 1° width combines four files a bin (the first and last bins hold fewer).
        let b = bin_sweeps(s, Some(1.0), false).unwrap();
        assert_eq!(b.counts.iter().sum::<usize>(), 41);
        assert_eq!(b.sweeps.len(), 11);
        assert!(b.counts.iter().all(|&c| c <= 4), "{:?}", b.counts);
        // On a sector 350° and −10° are different angles.
        let b = bin_sweeps(vec![sweep(-10.0, 1.0), sweep(350.0, 1.0)], None, false).unwrap();
        assert_eq!(b.sweeps.len(), 2);
    }

    #[test]
    fn a_bin_of_one_file_holds_what_the_mean_of_one_makes() {
        // The mean over one file, computed as the mean of several is (f64 sums from 0,
        // divided by the count), against the bin of one file: equal bit for bit, −0 and
        // the smallest and largest single-precision values included.
        let odd = [
            0.0,
            -0.0,
            f32::MIN_POSITIVE,
            -f32::MIN_POSITIVE / 8.0,
            f32::MAX,
            -f32::MAX,
            0.1,
            -3.25e-12,
        ];
        let values: Vec<Complex32> = odd
            .iter()
            .zip(odd.iter().rev())
            .map(|(&a, &b)| Complex32::new(a, b))
            .collect();
        let one = AngleSweep {
            angle_deg: 5.0,
            values: values.clone(),
            file: PathBuf::from("one.s2p"),
        };
        let b = bin_sweeps(vec![one], None, false).unwrap();
        let mean: Vec<Complex32> = values
            .iter()
            .map(|v| {
                let (re, im) = (0.0f64 + f64::from(v.re), 0.0f64 + f64::from(v.im));
                Complex32::new((re / 1.0) as f32, (im / 1.0) as f32)
            })
            .collect();
        let bits = |v: &[Complex32]| -> Vec<(u32, u32)> {
            v.iter().map(|c| (c.re.to_bits(), c.im.to_bits())).collect()
        };
        assert_eq!(bits(&b.sweeps[0].values), bits(&mean));
        assert_eq!(b.sweeps[0].values[1].re.to_bits(), 0.0f32.to_bits());
    }

    #[test]
    fn a_bad_width_is_refused() {
        assert!(bin_sweeps(vec![sweep(0.0, 1.0)], Some(0.0), false).is_err());
        assert!(bin_sweeps(vec![sweep(0.0, 1.0)], Some(f64::NAN), false).is_err());
        assert_eq!(angle_step_deg(&[5.0], true), None);
        // The seam gap counts on a circle: 0…350 every 10° plus 355°.
        let mut a: Vec<f64> = (0..36).map(|i| 10.0 * i as f64).collect();
        a.push(355.0);
        assert_eq!(angle_step_deg(&a, true), Some(5.0));
    }
}
