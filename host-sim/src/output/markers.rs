//! Pattern markers for the screens: the peak of a cut and its −3 dB points either side,
//! found between the samples by linear interpolation in dB.
//!
//! ```
//! use sweepgate_host::output::markers::markers;
//! // A cut falling 1 dB per degree either side of its peak at 10°: −3 dB at 7° and 13°.
//! let cut: Vec<(f64, f64)> = (0..=20).map(|a| (f64::from(a), -(f64::from(a) - 10.0).abs())).collect();
//! let m = markers(&cut).unwrap();
//! assert_eq!((m.peak_deg, m.peak_db), (10.0, 0.0));
//! assert_eq!((m.left_deg, m.right_deg, m.width_deg), (Some(7.0), Some(13.0), Some(6.0)));
//! ```

/// The peak of a cut and its −3 dB points.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Markers {
    /// Angle of the highest sample, deg.
    pub peak_deg: f64,
    /// Its level, dB.
    pub peak_db: f64,
    /// Where the level first falls 3 dB below the peak, going down in angle (`None`: the
    /// cut ends first).
    pub left_deg: Option<f64>,
    /// The same going up in angle.
    pub right_deg: Option<f64>,
    /// `right − left`, when both are known.
    pub width_deg: Option<f64>,
}

/// The markers of a cut given as (angle in deg, level in dB), sorted by angle; `None` for
/// an empty cut or one with no finite level.
pub fn markers(cut: &[(f64, f64)]) -> Option<Markers> {
    let (i0, &(peak_deg, peak_db)) = cut
        .iter()
        .enumerate()
        .filter(|(_, p)| p.1.is_finite())
        .max_by(|a, b| a.1 .1.total_cmp(&b.1 .1))?;
    let level = peak_db - 3.0;
    let crossing = |a: (f64, f64), b: (f64, f64)| {
        let t = (level - a.1) / (b.1 - a.1);
        a.0 + t * (b.0 - a.0)
    };
    let left = (1..=i0)
        .rev()
        .find(|&i| cut[i - 1].1 <= level)
        .map(|i| crossing(cut[i], cut[i - 1]));
    let right = (i0 + 1..cut.len())
        .find(|&i| cut[i].1 <= level)
        .map(|i| crossing(cut[i - 1], cut[i]));
    Some(Markers {
        peak_deg,
        peak_db,
        left_deg: left,
        right_deg: right,
        width_deg: left.zip(right).map(|(l, r)| r - l),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_half_power_width_of_a_cosine_cut_matches_its_closed_form() {
        // |E| = cos θ: −3 dB where cos θ = 10^(−3/20), θ = ±44.93° (closed form).
        let cut: Vec<(f64, f64)> = (-89..=89)
            .map(|a| {
                let t = f64::from(a).to_radians();
                (f64::from(a), 20.0 * t.cos().log10())
            })
            .collect();
        let m = markers(&cut).unwrap();
        let half = (10f64.powf(-3.0 / 20.0)).acos().to_degrees();
        assert_eq!(m.peak_deg, 0.0);
        assert!((m.right_deg.unwrap() - half).abs() < 0.01, "{m:?}");
        assert!((m.left_deg.unwrap() + half).abs() < 0.01, "{m:?}");
        assert!((m.width_deg.unwrap() - 2.0 * half).abs() < 0.02);
    }

    #[test]
    fn a_cut_that_ends_above_minus_3_db_has_no_point_there() {
        let cut = [(0.0, -1.0), (1.0, 0.0), (2.0, -5.0)];
        let m = markers(&cut).unwrap();
        assert_eq!(m.left_deg, None);
        assert_eq!(m.right_deg, Some(1.6));
        assert_eq!(m.width_deg, None);
        assert!(markers(&[]).is_none());
        assert!(markers(&[(0.0, f64::NAN)]).is_none());
    }
}
