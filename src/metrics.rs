//! Pattern figures: peak, beamwidths, nulls, sidelobes, front-to-back, squint; and gain by
//! substitution.
//!
//! A pattern cut is two slices: angles in degrees (strictly increasing) and levels in dB
//! (any reference: every figure except the peak level is relative to the peak). A cut is
//! either a [`Coverage::FullCircle`] (the last sample wraps around to the first) or a
//! [`Coverage::Sector`] (the ends are edges). Zero magnitudes must be clipped to a finite
//! floor (say −300 dB) before the call; NaN and infinite levels are refused.
//!
//! Definitions (common practice, no source):
//! - peak: the highest sample, refined by a parabola through it and its two neighbours (in dB
//!   against angle); among equal highest samples the one nearest mechanical boresight (0°);
//! - −3 dB and −10 dB beam: walking out from the peak on each side, the first crossing of
//!   peak − [`HALF_POWER_DB`] (half power, 3.0103 dB) or peak − 10 dB, interpolated linearly in dB between the two samples around it;
//! - first null: walking out from the peak, the first sample lower than the one before and not
//!   higher than the one after (the sample angle, no interpolation); a sector's end sample is
//!   never taken as a null;
//! - first sidelobe: the first local maximum beyond the first null, parabola-refined;
//! - highest sidelobe: the highest local maximum outside the main lobe (between the first
//!   nulls), parabola-refined;
//! - front-to-back: peak level minus the level (interpolated) at peak angle + 180°;
//! - squint: the centre of the −3 dB beam, as an angle from mechanical boresight 0° in
//!   (−180°, 180°].
//!
//! Every angle figure (peak, crossings, nulls, lobes, squint) is wrapped to (−180°, 180°];
//! a beam across the ±180° seam has `upper_deg < lower_deg` and its width in
//! [`Beam::width_deg`].
//!
//! ```
//! use sweepgate::metrics::{pattern_metrics, Coverage};
//! // A cos² power pattern sampled every degree over −90°…90°: HPBW 2·acos(0.5^(1/2)) = 90°.
//! let angles: Vec<f64> = (0..=180).map(|i| i as f64 - 90.0).collect();
//! let levels: Vec<f64> = angles
//!     .iter()
//!     .map(|a| (10.0 * (a.to_radians().cos().powi(2)).log10()).max(-100.0))
//!     .collect();
//! let m = pattern_metrics(&angles, &levels, Coverage::Sector).unwrap();
//! assert!((m.beam_3db.unwrap().width_deg() - 90.0).abs() < 0.1);
//! assert!(m.squint_deg.unwrap().abs() < 1e-9);
//! ```

use crate::error::{GainError, MetricsError};

/// The half-power drop 10·log10(2) dB used for the "−3 dB" beam (HPBW is the half-power
/// width; a flat 3.000 dB would read the dipole's 78.08° as 77.95°).
pub const HALF_POWER_DB: f64 = 3.010_299_956_639_812;

/// Levels closer than this (dB) count as equal when choosing the peak.
const PEAK_TIE_DB: f64 = 1e-9;

/// Whether a cut closes on itself.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Coverage {
    /// The samples cover a full turn: after the last sample comes the first, 360° later.
    /// The first-to-last span must be below 360°.
    FullCircle,
    /// The samples cover a sector; its ends are edges.
    Sector,
}

/// The two angles where a beam crosses a level below the peak.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Beam {
    /// Crossing on the side of lower angles (walking from the peak towards lower angles),
    /// wrapped to (−180°, 180°].
    pub lower_deg: f64,
    /// Crossing on the side of higher angles, wrapped to (−180°, 180°]. A beam across the
    /// ±180° seam has `upper_deg < lower_deg`; use [`Beam::width_deg`] for its width.
    pub upper_deg: f64,
    /// Angle walked from the lower to the upper crossing (the beamwidth), ≥ 0.
    pub span_deg: f64,
}

impl Beam {
    /// Builds a beam from its two crossings on a continuous (unwrapped) angle axis.
    fn from_crossings(lower_deg: f64, upper_deg: f64) -> Self {
        Self {
            lower_deg: wrap_deg(lower_deg),
            upper_deg: wrap_deg(upper_deg),
            span_deg: upper_deg - lower_deg,
        }
    }

    /// Beamwidth between the two crossings.
    pub fn width_deg(&self) -> f64 {
        self.span_deg
    }

    /// Centre between the two crossings, wrapped to (−180°, 180°].
    pub fn centre_deg(&self) -> f64 {
        wrap_deg(self.lower_deg + 0.5 * self.span_deg)
    }
}

/// A lobe maximum.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Lobe {
    /// Its angle (parabola-refined).
    pub angle_deg: f64,
    /// Its level relative to the peak (≤ 0 dB for a sidelobe).
    pub level_db: f64,
}

/// The figures of one pattern cut. `None` where the cut does not contain the feature.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct PatternMetrics {
    /// Peak level, in the cut's own dB reference.
    pub peak_db: f64,
    /// Peak angle.
    pub peak_angle_deg: f64,
    /// The half-power (−3.01 dB) beam; its width is the HPBW.
    pub beam_3db: Option<Beam>,
    /// The −10 dB beam.
    pub beam_10db: Option<Beam>,
    /// First null on the side of lower angles.
    pub first_null_lower_deg: Option<f64>,
    /// First null on the side of higher angles.
    pub first_null_upper_deg: Option<f64>,
    /// First sidelobe on the side of lower angles.
    pub first_sidelobe_lower: Option<Lobe>,
    /// First sidelobe on the side of higher angles.
    pub first_sidelobe_upper: Option<Lobe>,
    /// Highest sidelobe outside the main lobe.
    pub highest_sidelobe: Option<Lobe>,
    /// Peak level minus the level at peak angle + 180° (positive when the back is lower).
    pub front_to_back_db: Option<f64>,
    /// Centre of the −3 dB beam from mechanical boresight 0°, in (−180°, 180°].
    pub squint_deg: Option<f64>,
}

/// Wraps an angle into (−180°, 180°].
pub fn wrap_deg(angle_deg: f64) -> f64 {
    let mut a = libm::fmod(angle_deg, 360.0);
    if a > 180.0 {
        a -= 360.0;
    } else if a <= -180.0 {
        a += 360.0;
    }
    a
}

/// A validated cut with circular or edged access by virtual position.
struct Cut<'a> {
    angles: &'a [f64],
    levels: &'a [f64],
    circle: bool,
}

impl Cut<'_> {
    fn len(&self) -> isize {
        self.angles.len() as isize
    }

    /// Angle (unwrapped by whole turns) and level at virtual position `pos`.
    fn at(&self, pos: isize) -> Option<(f64, f64)> {
        let n = self.len();
        let (idx, turns) = if self.circle {
            (pos.rem_euclid(n), pos.div_euclid(n))
        } else if (0..n).contains(&pos) {
            (pos, 0)
        } else {
            return None;
        };
        let i = usize::try_from(idx).ok()?;
        let a = *self.angles.get(i)?;
        let l = *self.levels.get(i)?;
        Some((a + 360.0 * turns as f64, l))
    }

    fn level(&self, pos: isize) -> Option<f64> {
        self.at(pos).map(|(_, l)| l)
    }

    /// Parabola through `pos` and its neighbours; the sample itself when there is no
    /// neighbour or the three are not concave.
    fn refine(&self, pos: isize) -> Option<(f64, f64)> {
        let (a1, y1) = self.at(pos)?;
        let (Some((a0, y0)), Some((a2, y2))) = (self.at(pos - 1), self.at(pos + 1)) else {
            return Some((a1, y1));
        };
        let (x0, x2) = (a0 - a1, a2 - a1);
        let (d0, d2) = (y0 - y1, y2 - y1);
        let det = x0 * x2 * (x0 - x2);
        if det == 0.0 {
            return Some((a1, y1));
        }
        let a = (d0 * x2 - d2 * x0) / det;
        let b = (x0 * x0 * d2 - x2 * x2 * d0) / det;
        if a.is_nan() || a >= 0.0 {
            return Some((a1, y1));
        }
        let t = (-b / (2.0 * a)).clamp(x0, x2);
        Some((a1 + t, y1 + b * t + a * t * t))
    }

    fn is_local_max(&self, pos: isize) -> bool {
        match (self.level(pos - 1), self.level(pos), self.level(pos + 1)) {
            (Some(p), Some(c), Some(n)) => c > p && c >= n,
            _ => false,
        }
    }

    fn is_local_min(&self, pos: isize) -> bool {
        match (self.level(pos - 1), self.level(pos), self.level(pos + 1)) {
            (Some(p), Some(c), Some(n)) => c < p && c <= n,
            _ => false,
        }
    }

    /// Steps available from the peak on one side before running out of samples.
    fn steps(&self) -> isize {
        self.len() - 1
    }

    /// First crossing of `threshold_db` walking from `peak` in direction `dir` (±1).
    fn crossing(&self, peak: isize, dir: isize, threshold_db: f64) -> Option<f64> {
        let (mut prev_a, mut prev_l) = self.at(peak)?;
        for k in 1..=self.steps() {
            let (a, l) = self.at(peak + dir * k)?;
            if l <= threshold_db {
                return Some(prev_a + (threshold_db - prev_l) * (a - prev_a) / (l - prev_l));
            }
            (prev_a, prev_l) = (a, l);
        }
        None
    }

    /// Virtual position of the first null walking from `peak` in direction `dir`.
    fn first_null(&self, peak: isize, dir: isize) -> Option<isize> {
        (1..self.steps())
            .map(|k| peak + dir * k)
            .find(|&pos| self.is_local_min(pos))
    }

    /// Virtual position of the first local maximum beyond `null` in direction `dir`, not
    /// going past the peak again.
    fn first_max_after(&self, peak: isize, null: isize, dir: isize) -> Option<isize> {
        let done = (null - peak).abs();
        (1..self.steps() - done)
            .map(|k| null + dir * k)
            .find(|&pos| self.is_local_max(pos))
    }

    /// Level interpolated at `angle_deg` (any turn for a circle), or `None` outside a sector.
    fn level_at_angle(&self, angle_deg: f64) -> Option<f64> {
        let first = *self.angles.first()?;
        let last = *self.angles.last()?;
        let n = self.len();
        let a = if self.circle {
            first + libm::fmod(libm::fmod(angle_deg - first, 360.0) + 360.0, 360.0)
        } else if angle_deg >= first && angle_deg <= last {
            angle_deg
        } else {
            return None;
        };
        // Segment [pos, pos + 1] holding `a`; for a circle the last segment wraps.
        let idx = self.angles.partition_point(|&x| x <= a) as isize - 1;
        let pos = idx.clamp(0, n - 1);
        let (a0, l0) = self.at(pos)?;
        let (a1, l1) = match self.at(pos + 1) {
            Some(p) => p,
            None => return Some(l0),
        };
        if a1 == a0 {
            return Some(l0);
        }
        let t = ((a - a0) / (a1 - a0)).clamp(0.0, 1.0);
        Some(l0 + t * (l1 - l0))
    }
}

fn validate_cut(
    angles_deg: &[f64],
    levels_db: &[f64],
    coverage: Coverage,
) -> Result<(), MetricsError> {
    if angles_deg.is_empty() && levels_db.is_empty() {
        return Err(MetricsError::Empty);
    }
    if angles_deg.len() != levels_db.len() {
        return Err(MetricsError::LengthMismatch {
            angles: u32::try_from(angles_deg.len()).unwrap_or(u32::MAX),
            levels: u32::try_from(levels_db.len()).unwrap_or(u32::MAX),
        });
    }
    if angles_deg.len() < 3 {
        return Err(MetricsError::TooFewPoints);
    }
    let index = |i: usize| u32::try_from(i).unwrap_or(u32::MAX);
    for (i, (&a, &l)) in angles_deg.iter().zip(levels_db).enumerate() {
        if !a.is_finite() {
            return Err(MetricsError::NonFiniteAngle { index: index(i) });
        }
        if !l.is_finite() {
            return Err(MetricsError::NonFiniteLevel { index: index(i) });
        }
    }
    for (i, w) in angles_deg.windows(2).enumerate() {
        if let [a, b] = w {
            if b <= a {
                return Err(MetricsError::NotIncreasing {
                    index: index(i + 1),
                });
            }
        }
    }
    if coverage == Coverage::FullCircle {
        if let (Some(first), Some(last)) = (angles_deg.first(), angles_deg.last()) {
            if last - first >= 360.0 {
                return Err(MetricsError::SpanExceedsCircle);
            }
        }
    }
    Ok(())
}

/// The peak sample: the highest level; among levels within [`PEAK_TIE_DB`] of it, the one
/// nearest mechanical boresight (0°).
fn peak_sample(angles_deg: &[f64], levels_db: &[f64]) -> Option<usize> {
    let mut best: Option<(usize, f64, f64)> = None;
    for (i, (&a, &l)) in angles_deg.iter().zip(levels_db).enumerate() {
        let off = libm::fabs(wrap_deg(a));
        best = match best {
            Some((_, bl, _)) if l < bl - PEAK_TIE_DB => best,
            Some((_, bl, boff)) if l <= bl + PEAK_TIE_DB && off >= boff => best,
            _ => Some((i, l, off)),
        };
    }
    best.map(|(i, _, _)| i)
}

impl Cut<'_> {
    /// The beam between the crossings `drop_db` below `peak_db` on each side of `peak`.
    fn beam(&self, peak: isize, peak_db: f64, drop_db: f64) -> Option<Beam> {
        let t = peak_db - drop_db;
        Some(Beam::from_crossings(
            self.crossing(peak, -1, t)?,
            self.crossing(peak, 1, t)?,
        ))
    }

    /// The lobe at virtual position `pos`, its level relative to `peak_db`.
    fn lobe(&self, pos: isize, peak_db: f64) -> Option<Lobe> {
        let (angle_deg, l) = self.refine(pos)?;
        Some(Lobe {
            angle_deg: wrap_deg(angle_deg),
            level_db: l - peak_db,
        })
    }

    /// Virtual position of the highest local maximum outside the main lobe between the
    /// first nulls `null_lo` and `null_hi`.
    fn highest_outside(&self, null_lo: Option<isize>, null_hi: Option<isize>) -> Option<isize> {
        let n = self.len();
        let (from, to) = if self.circle {
            match (null_lo, null_hi) {
                (Some(lo), Some(hi)) => (hi + 1, lo + n - 1),
                _ => (1, 0),
            }
        } else {
            (0, n - 1)
        };
        let lo_edge = null_lo.unwrap_or(0);
        let hi_edge = null_hi.unwrap_or(n - 1);
        let mut highest: Option<isize> = None;
        for pos in from..=to {
            let outside = self.circle || pos < lo_edge || pos > hi_edge;
            if outside && self.is_local_max(pos) {
                let better = match highest.and_then(|h| self.level(h)) {
                    Some(hl) => self.level(pos).is_some_and(|l| l > hl),
                    None => true,
                };
                if better {
                    highest = Some(pos);
                }
            }
        }
        highest
    }

    /// Peak level minus the level half a turn from the peak, when the cut reaches it.
    fn front_to_back(&self, peak_angle_deg: f64, peak_db: f64) -> Option<f64> {
        self.level_at_angle(peak_angle_deg + 180.0)
            .or_else(|| self.level_at_angle(peak_angle_deg - 180.0))
            .map(|back| peak_db - back)
    }
}

/// Computes the figures of a pattern cut. See the module documentation for the definitions.
/// Work is linear in the number of samples.
pub fn pattern_metrics(
    angles_deg: &[f64],
    levels_db: &[f64],
    coverage: Coverage,
) -> Result<PatternMetrics, MetricsError> {
    validate_cut(angles_deg, levels_db, coverage)?;
    let cut = Cut {
        angles: angles_deg,
        levels: levels_db,
        circle: coverage == Coverage::FullCircle,
    };
    let peak = peak_sample(angles_deg, levels_db).ok_or(MetricsError::Empty)? as isize;
    let (peak_angle_deg, peak_db) = cut.refine(peak).ok_or(MetricsError::Empty)?;
    let beam_3db = cut.beam(peak, peak_db, HALF_POWER_DB);
    let null_lo = cut.first_null(peak, -1);
    let null_hi = cut.first_null(peak, 1);
    let sidelobe = |null: Option<isize>, dir: isize| {
        null.and_then(|z| cut.first_max_after(peak, z, dir))
            .and_then(|pos| cut.lobe(pos, peak_db))
    };
    Ok(PatternMetrics {
        peak_db,
        peak_angle_deg: wrap_deg(peak_angle_deg),
        beam_3db,
        beam_10db: cut.beam(peak, peak_db, 10.0),
        first_null_lower_deg: null_lo.and_then(|p| cut.at(p)).map(|(a, _)| wrap_deg(a)),
        first_null_upper_deg: null_hi.and_then(|p| cut.at(p)).map(|(a, _)| wrap_deg(a)),
        first_sidelobe_lower: sidelobe(null_lo, -1),
        first_sidelobe_upper: sidelobe(null_hi, 1),
        highest_sidelobe: cut
            .highest_outside(null_lo, null_hi)
            .and_then(|pos| cut.lobe(pos, peak_db)),
        front_to_back_db: cut.front_to_back(peak_angle_deg, peak_db),
        squint_deg: beam_3db.map(|b| b.centre_deg()),
    })
}

fn validate_table(table_hz: &[f64], table_dbi: &[f64]) -> Result<(), GainError> {
    if table_hz.is_empty() && table_dbi.is_empty() {
        return Err(GainError::EmptyTable);
    }
    if table_hz.len() != table_dbi.len() {
        return Err(GainError::LengthMismatch {
            frequencies: u32::try_from(table_hz.len()).unwrap_or(u32::MAX),
            gains: u32::try_from(table_dbi.len()).unwrap_or(u32::MAX),
        });
    }
    let index = |i: usize| u32::try_from(i).unwrap_or(u32::MAX);
    for (i, (f, g)) in table_hz.iter().zip(table_dbi).enumerate() {
        if !f.is_finite() || !g.is_finite() {
            return Err(GainError::NonFiniteTable { index: index(i) });
        }
    }
    for (i, w) in table_hz.windows(2).enumerate() {
        if let [a, b] = w {
            if b <= a {
                return Err(GainError::NotIncreasing {
                    index: index(i + 1),
                });
            }
        }
    }
    Ok(())
}

/// A reference antenna's gain at `frequency_hz` from its table (frequencies strictly
/// increasing, gains in dBi), interpolated linearly in dB between rows. Frequencies outside
/// the table are refused, not extrapolated.
///
/// ```
/// use sweepgate::metrics::interpolate_gain_dbi;
/// let g = interpolate_gain_dbi(&[8e9, 12e9], &[15.0, 17.0], 9e9).unwrap();
/// assert!((g - 15.5).abs() < 1e-12);
/// ```
pub fn interpolate_gain_dbi(
    table_hz: &[f64],
    table_dbi: &[f64],
    frequency_hz: f64,
) -> Result<f64, GainError> {
    validate_table(table_hz, table_dbi)?;
    if !frequency_hz.is_finite() {
        return Err(GainError::NonFiniteInput);
    }
    let (Some(&first), Some(&last)) = (table_hz.first(), table_hz.last()) else {
        return Err(GainError::EmptyTable);
    };
    if frequency_hz < first || frequency_hz > last {
        return Err(GainError::OutsideTable);
    }
    // Last row at or below the frequency.
    let i = table_hz
        .partition_point(|&f| f <= frequency_hz)
        .saturating_sub(1);
    let (Some(&f0), Some(&g0)) = (table_hz.get(i), table_dbi.get(i)) else {
        return Err(GainError::OutsideTable);
    };
    match (table_hz.get(i + 1), table_dbi.get(i + 1)) {
        (Some(&f1), Some(&g1)) => Ok(g0 + (frequency_hz - f0) / (f1 - f0) * (g1 - g0)),
        _ => Ok(g0),
    }
}

/// Gain by substitution (gain transfer): G_AUT = G_ref + P_AUT − P_ref, all in dB, with the
/// AUT and the reference measured in the same range and set-up (common practice, no source).
pub fn gain_by_substitution_dbi(
    reference_gain_dbi: f64,
    aut_level_db: f64,
    reference_level_db: f64,
) -> f64 {
    reference_gain_dbi + aut_level_db - reference_level_db
}

/// [`gain_by_substitution_dbi`] with the reference gain interpolated from its table at
/// `frequency_hz`.
pub fn absolute_gain_dbi(
    table_hz: &[f64],
    table_dbi: &[f64],
    frequency_hz: f64,
    aut_level_db: f64,
    reference_level_db: f64,
) -> Result<f64, GainError> {
    if !aut_level_db.is_finite() || !reference_level_db.is_finite() {
        return Err(GainError::NonFiniteInput);
    }
    let g_ref = interpolate_gain_dbi(table_hz, table_dbi, frequency_hz)?;
    Ok(gain_by_substitution_dbi(
        g_ref,
        aut_level_db,
        reference_level_db,
    ))
}

/// Turns a measured pattern cut (dB, same set-up as the reference measurement) into absolute
/// gain in dBi in place: every level gets G_ref − P_ref added. Refuses non-finite inputs
/// before changing anything.
pub fn pattern_to_dbi(
    levels_db: &mut [f64],
    reference_gain_dbi: f64,
    reference_level_db: f64,
) -> Result<(), GainError> {
    let offset = reference_gain_dbi - reference_level_db;
    if !offset.is_finite() || levels_db.iter().any(|l| !l.is_finite()) {
        return Err(GainError::NonFiniteInput);
    }
    for l in levels_db.iter_mut() {
        *l += offset;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rejects_each_bad_cut() {
        let s = Coverage::Sector;
        assert_eq!(pattern_metrics(&[], &[], s), Err(MetricsError::Empty));
        assert_eq!(
            pattern_metrics(&[0.0, 1.0, 2.0], &[0.0, 1.0], s),
            Err(MetricsError::LengthMismatch {
                angles: 3,
                levels: 2
            })
        );
        assert_eq!(
            pattern_metrics(&[0.0, 1.0], &[0.0, 1.0], s),
            Err(MetricsError::TooFewPoints)
        );
        assert_eq!(
            pattern_metrics(&[0.0, f64::NAN, 2.0], &[0.0; 3], s),
            Err(MetricsError::NonFiniteAngle { index: 1 })
        );
        assert_eq!(
            pattern_metrics(&[0.0, 1.0, 2.0], &[0.0, 0.0, f64::NEG_INFINITY], s),
            Err(MetricsError::NonFiniteLevel { index: 2 })
        );
        assert_eq!(
            pattern_metrics(&[0.0, 1.0, 1.0], &[0.0; 3], s),
            Err(MetricsError::NotIncreasing { index: 2 })
        );
        assert_eq!(
            pattern_metrics(&[0.0, 180.0, 360.0], &[0.0; 3], Coverage::FullCircle),
            Err(MetricsError::SpanExceedsCircle)
        );
    }

    #[test]
    fn every_angle_figure_is_wrapped_near_the_back() {
        // A triangle lobe (1 dB/°) centred on 180° of a −179…180° cut, with a sidelobe bump
        // 20° on each side: the peak refines to 180°, the −3.01 dB crossings sit 3.01° from
        // it on each side (linear in dB, exact), the first nulls at ±160°… all in (−180, 180].
        let angles: [f64; 360] = core::array::from_fn(|i| i as f64 - 179.0);
        let levels: [f64; 360] = core::array::from_fn(|i| {
            let off = 180.0 - libm::fabs(i as f64 - 179.0); // distance from 180°
            if off < 15.0 {
                -off
            } else if off < 25.0 {
                -20.0 + (5.0 - libm::fabs(off - 20.0)).max(0.0)
            } else {
                -40.0
            }
        });
        let m = pattern_metrics(&angles, &levels, Coverage::FullCircle).unwrap();
        let in_range = |a: f64| a > -180.0 && a <= 180.0;
        assert!(in_range(m.peak_angle_deg), "{m:?}");
        assert!((libm::fabs(m.peak_angle_deg) - 180.0).abs() < 1e-9, "{m:?}");
        let b = m.beam_3db.unwrap();
        assert!(in_range(b.lower_deg) && in_range(b.upper_deg), "{b:?}");
        assert!(
            (b.lower_deg - (180.0 - HALF_POWER_DB)).abs() < 1e-9,
            "{b:?}"
        );
        assert!(
            (b.upper_deg - (-180.0 + HALF_POWER_DB)).abs() < 1e-9,
            "{b:?}"
        );
        assert!((b.width_deg() - 2.0 * HALF_POWER_DB).abs() < 1e-9, "{b:?}");
        assert!((libm::fabs(m.squint_deg.unwrap()) - 180.0).abs() < 1e-9);
        for a in [m.first_null_lower_deg, m.first_null_upper_deg]
            .into_iter()
            .flatten()
        {
            assert!(in_range(a), "{m:?}");
        }
        for l in [
            m.first_sidelobe_lower,
            m.first_sidelobe_upper,
            m.highest_sidelobe,
        ]
        .into_iter()
        .flatten()
        {
            assert!(in_range(l.angle_deg), "{m:?}");
        }
        assert!(m.highest_sidelobe.is_some(), "{m:?}");
    }

    #[test]
    fn peak_at_wrap_is_found_across_the_seam() {
        // A triangle lobe centred on 0° of a 0…359° cut: crossings on both sides of the seam.
        let angles: [f64; 360] = core::array::from_fn(|i| i as f64);
        let levels: [f64; 360] = core::array::from_fn(|i| {
            let a = wrap_deg(i as f64).abs();
            (-a / 10.0).max(-30.0)
        });
        let m = pattern_metrics(&angles, &levels, Coverage::FullCircle).unwrap();
        assert_eq!(m.peak_angle_deg, 0.0);
        let b = m.beam_3db.unwrap();
        assert!((b.width_deg() - 20.0 * HALF_POWER_DB).abs() < 1e-9, "{b:?}");
        assert!(m.squint_deg.unwrap().abs() < 1e-9);
        assert!((m.front_to_back_db.unwrap() - 18.0).abs() < 1e-9);
        // No sidelobes in a plain triangle on a floor.
        assert_eq!(m.highest_sidelobe, None);
    }

    #[test]
    fn sector_edge_gives_none_not_a_panic() {
        // Monotonic ramp: peak at the edge, one side missing.
        let angles = [0.0, 1.0, 2.0, 3.0, 4.0];
        let levels = [0.0, -1.0, -2.0, -4.0, -6.0];
        let m = pattern_metrics(&angles, &levels, Coverage::Sector).unwrap();
        assert_eq!(m.peak_angle_deg, 0.0);
        assert_eq!(m.beam_3db, None);
        assert_eq!(m.first_null_upper_deg, None);
        assert_eq!(m.front_to_back_db, None);
    }

    #[test]
    fn gain_table_errors() {
        assert_eq!(
            interpolate_gain_dbi(&[], &[], 1e9),
            Err(GainError::EmptyTable)
        );
        assert_eq!(
            interpolate_gain_dbi(&[1e9], &[1.0, 2.0], 1e9),
            Err(GainError::LengthMismatch {
                frequencies: 1,
                gains: 2
            })
        );
        assert_eq!(
            interpolate_gain_dbi(&[1e9, 2e9], &[1.0, f64::NAN], 1e9),
            Err(GainError::NonFiniteTable { index: 1 })
        );
        assert_eq!(
            interpolate_gain_dbi(&[2e9, 1e9], &[1.0, 2.0], 1e9),
            Err(GainError::NotIncreasing { index: 1 })
        );
        assert_eq!(
            interpolate_gain_dbi(&[1e9, 2e9], &[1.0, 2.0], f64::NAN),
            Err(GainError::NonFiniteInput)
        );
        assert_eq!(
            interpolate_gain_dbi(&[1e9, 2e9], &[1.0, 2.0], 2.5e9),
            Err(GainError::OutsideTable)
        );
        assert_eq!(interpolate_gain_dbi(&[1e9, 2e9], &[1.0, 2.0], 2e9), Ok(2.0));
        assert_eq!(interpolate_gain_dbi(&[1e9], &[7.0], 1e9), Ok(7.0));
        let mut p = [0.0, f64::NAN];
        assert_eq!(
            pattern_to_dbi(&mut p, 1.0, 0.0),
            Err(GainError::NonFiniteInput)
        );
        assert_eq!(p[0], 0.0);
    }
}
