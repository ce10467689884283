//! The report's sphere pieces from gated co- and cross-polar samples ([`SpherePoint`]):
//! the 3D pattern export (`sphere.csv`), per frequency a θ–φ colour map of the co-polar
//! level and the cuts overlaid (SVG), and the figures `summary.json` gains (directivity
//! with its quadrature and sampling error, cross-polar discrimination).

use num_complex::Complex64;
use serde_json::{json, Value};

use crate::output::report::sphere_plot::{colour_map_svg, cuts_svg, ColourMap, CutCurve};
use crate::pipeline::cuts::SpherePoint;
use crate::pipeline::sphere::{
    cross_polar, cross_polar_per_cut, frequencies, SphereGrid, QUADRATURE,
};
use crate::units::{db, FLOOR_DB};

/// Angles closer than this are the same, degrees.
const SAME_DEG: f64 = 1e-6;

/// The header of `sphere.csv`.
pub const SPHERE_CSV_HEADER: &str =
    "theta_deg,phi_deg,frequency_hz,co_db,cross_db,co_re,co_im,cross_re,cross_im";

/// `sphere.csv`: one row per sample, in the order given; levels are 20·log10|·| of the
/// traces as given (not normalized), complex parts as given.
pub fn sphere_csv(points: &[SpherePoint]) -> String {
    let mut out = Vec::with_capacity(80 * (points.len() + 1));
    // Writing into memory does not fail.
    let _ = write_sphere_csv(points, &mut out);
    String::from_utf8_lossy(&out).into_owned()
}

/// `sphere.csv` written a row at a time into `out`.
pub fn write_sphere_csv(
    points: &[SpherePoint],
    out: &mut dyn std::io::Write,
) -> std::io::Result<()> {
    writeln!(out, "{SPHERE_CSV_HEADER}")?;
    for p in points {
        writeln!(
            out,
            "{},{},{},{:.4},{:.4},{:e},{:e},{:e},{:e}",
            p.theta_deg,
            p.phi_deg,
            p.frequency_hz,
            db(p.co),
            db(p.cross),
            p.co.re,
            p.co.im,
            p.cross.re,
            p.cross.im
        )?;
    }
    Ok(())
}

fn at_frequency(points: &[SpherePoint], f_hz: f64) -> Vec<SpherePoint> {
    let tol = 1e-9 * f_hz.abs().max(1.0);
    points
        .iter()
        .copied()
        .filter(|p| (p.frequency_hz - f_hz).abs() <= tol)
        .collect()
}

fn distinct(mut v: Vec<f64>) -> Vec<f64> {
    v.sort_by(f64::total_cmp);
    v.dedup_by(|a, b| (*a - *b).abs() < SAME_DEG);
    v
}

fn index_of(v: &[f64], x: f64) -> Option<usize> {
    v.iter().position(|a| (a - x).abs() < SAME_DEG)
}

/// The co-polar peak |co|² of `points` (0 when all are zero).
fn co_peak(points: &[SpherePoint]) -> f64 {
    points.iter().map(|p| p.co.norm_sqr()).fold(0.0, f64::max)
}

fn relative_db(z: Complex64, peak: f64) -> f64 {
    if peak > 0.0 {
        db(z / peak.sqrt())
    } else {
        FLOOR_DB
    }
}

/// The θ–φ map of the co-polar (or, with `cross`, the cross-polar) level at `f_hz`,
/// relative to the co-polar peak; cells without a sample sit at the floor.
pub fn colour_map(points: &[SpherePoint], f_hz: f64, cross: bool, title: &str) -> ColourMap {
    let here = at_frequency(points, f_hz);
    let theta = distinct(here.iter().map(|p| p.theta_deg).collect());
    let phi = distinct(here.iter().map(|p| p.phi_deg).collect());
    let peak = co_peak(&here);
    let mut level = vec![vec![FLOOR_DB; phi.len()]; theta.len()];
    for p in &here {
        if let (Some(i), Some(j)) = (index_of(&theta, p.theta_deg), index_of(&phi, p.phi_deg)) {
            level[i][j] = relative_db(if cross { p.cross } else { p.co }, peak);
        }
    }
    let which = if cross { "cross-polar" } else { "co-polar" };
    ColourMap {
        title: format!("{title}: {which} level at {:.3} GHz", f_hz / 1e9),
        theta_deg: theta,
        phi_deg: phi,
        level_db: level,
    }
}

/// At most this many cuts are overlaid.
pub const MAX_CUTS: usize = 6;

/// The cut planes to overlay: those of 0°, 90°, 45° and 135° that are present (the
/// principal and diagonal planes), else up to [`MAX_CUTS`] spread evenly over the rest.
fn chosen_planes(planes: &[f64]) -> Vec<f64> {
    let principal: Vec<f64> = [0.0, 45.0, 90.0, 135.0]
        .into_iter()
        .filter(|p| index_of(planes, *p).is_some())
        .collect();
    if !principal.is_empty() {
        return principal;
    }
    let n = planes.len().min(MAX_CUTS);
    (0..n).map(|k| planes[k * planes.len() / n]).collect()
}

/// The cuts at `f_hz` (the planes of [`chosen_planes`]): for each plane φ in 0…180°, the
/// samples at φ (θ positive) and at φ + 180° (θ negative), co and cross relative to the
/// co-polar peak, in order of signed θ.
pub fn cut_curves(points: &[SpherePoint], f_hz: f64) -> Vec<CutCurve> {
    let here = at_frequency(points, f_hz);
    let peak = co_peak(&here);
    let planes = distinct(here.iter().map(|p| p.phi_deg.rem_euclid(180.0)).collect());
    let mut curves = Vec::new();
    let planes = chosen_planes(&planes);
    for plane in planes {
        let mut cut: Vec<(f64, Complex64, Complex64)> = here
            .iter()
            .filter_map(|p| {
                let phi = p.phi_deg.rem_euclid(360.0);
                if (phi - plane).abs() < SAME_DEG {
                    Some((p.theta_deg, p.co, p.cross))
                } else if (phi - plane - 180.0).abs() < SAME_DEG {
                    Some((-p.theta_deg, p.co, p.cross))
                } else {
                    None
                }
            })
            .collect();
        cut.sort_by(|a, b| a.0.total_cmp(&b.0));
        for (cross, word) in [(false, "co"), (true, "cross")] {
            curves.push(CutCurve {
                name: format!("{word}, phi {plane}°"),
                cross,
                points: cut
                    .iter()
                    .map(|(t, co, x)| (*t, relative_db(if cross { *x } else { *co }, peak)))
                    .collect(),
            });
        }
    }
    curves
}

fn mhz_name(f_hz: f64) -> String {
    format!("{}mhz", (f_hz / 1e6).round() as i64)
}

/// Every sphere file of the report: `sphere.csv`, and per frequency
/// `sphere_map_<f>mhz.svg` (co-polar θ–φ map) and `sphere_cuts_<f>mhz.svg`.
pub fn sphere_files(points: &[SpherePoint], title: &str) -> anyhow::Result<Vec<(String, Vec<u8>)>> {
    let mut files = vec![("sphere.csv".to_string(), sphere_csv(points).into_bytes())];
    each_sphere_plot(points, title, |name, bytes| {
        files.push((name, bytes));
        Ok(())
    })?;
    Ok(files)
}

/// The files of [`sphere_files`] but `sphere.csv` ([`write_sphere_csv`] writes that a row
/// at a time), made one at a time and handed to `put` in the same order, so that each can be
/// written and let go before the next is made.
pub fn each_sphere_plot(
    points: &[SpherePoint],
    title: &str,
    mut put: impl FnMut(String, Vec<u8>) -> anyhow::Result<()>,
) -> anyhow::Result<()> {
    for f in frequencies(points) {
        let name = mhz_name(f);
        let map = colour_map_svg(&colour_map(points, f, false, title))?;
        put(format!("sphere_map_{name}.svg"), map.into_bytes())?;
        let caption = format!("{title}: cuts at {:.3} GHz", f / 1e9);
        let cuts = cuts_svg(&caption, &cut_curves(points, f))?;
        put(format!("sphere_cuts_{name}.svg"), cuts.into_bytes())?;
    }
    Ok(())
}

fn finite_or_null(v: f64) -> Value {
    if v.is_finite() {
        json!(v)
    } else {
        Value::Null
    }
}

/// The sphere figures per frequency for `summary.json`: `directivity_dbi` (with the
/// quadrature, steps, peak direction and `sampling_error_db`; `null` with the reason when
/// the samples do not make a sphere grid) and the cross-polar discrimination
/// (`xpd_on_axis_db`, `xpd_main_beam_db`, `cross_peak_db`; `null` when infinite), over
/// all samples and per cut plane (`cuts`).
pub fn sphere_summary(points: &[SpherePoint]) -> Value {
    let rows: Vec<Value> = frequencies(points)
        .into_iter()
        .map(|f| {
            let mut row = json!({ "frequency_hz": f });
            match SphereGrid::from_points(points, f).and_then(|g| g.directivity()) {
                Ok(d) => {
                    row["directivity_dbi"] = json!(d.directivity_dbi);
                    row["co_directivity_dbi"] = json!(d.co_directivity_dbi);
                    row["peak_theta_deg"] = json!(d.peak_theta_deg);
                    row["peak_phi_deg"] = json!(d.peak_phi_deg);
                    row["theta_step_deg"] = json!(d.theta_step_deg);
                    row["phi_step_deg"] = json!(d.phi_step_deg);
                    row["sampling_error_db"] = json!(d.sampling_error_db);
                    row["quadrature"] = json!(QUADRATURE);
                }
                Err(e) => {
                    row["directivity_dbi"] = Value::Null;
                    row["directivity_note"] = json!(e.to_string());
                }
            }
            if let Some(x) = cross_polar(points, f) {
                row["xpd_on_axis_db"] = x.on_axis_db.map_or(Value::Null, finite_or_null);
                row["xpd_main_beam_db"] = finite_or_null(x.main_beam_db);
                row["cross_peak_db"] = finite_or_null(x.cross_peak_db);
            }
            row["cuts"] = cross_polar_per_cut(points, f)
                .into_iter()
                .map(|(plane, x)| {
                    json!({
                        "phi_deg": plane,
                        "xpd_on_axis_db": x.on_axis_db.map_or(Value::Null, finite_or_null),
                        "xpd_main_beam_db": finite_or_null(x.main_beam_db),
                        "cross_peak_db": finite_or_null(x.cross_peak_db),
                    })
                })
                .collect();
            row
        })
        .collect();
    json!(rows)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn point(t: f64, p: f64, co: f64, cross: f64) -> SpherePoint {
        SpherePoint {
            theta_deg: t,
            phi_deg: p,
            frequency_hz: 1e9,
            co: Complex64::new(co, 0.0),
            cross: Complex64::new(0.0, cross),
        }
    }

    #[test]
    fn the_csv_has_one_row_per_sample_with_levels_and_parts() {
        let csv = sphere_csv(&[point(10.0, 20.0, 0.1, 0.01)]);
        let lines: Vec<&str> = csv.lines().collect();
        assert_eq!(lines[0], SPHERE_CSV_HEADER);
        let f: Vec<&str> = lines[1].split(',').collect();
        assert_eq!(f.len(), 9);
        assert_eq!(&f[..5], ["10", "20", "1000000000", "-20.0000", "-40.0000"]);
        assert_eq!(f[8].parse::<f64>().unwrap(), 0.01);
    }

    #[test]
    fn cuts_join_both_halves_and_maps_normalize_to_the_co_peak() {
        let pts = [
            point(0.0, 0.0, 1.0, 0.0),
            point(30.0, 0.0, 0.5, 0.1),
            point(30.0, 180.0, 0.25, 0.0),
            point(30.0, 90.0, 0.1, 0.0),
        ];
        assert_eq!(chosen_planes(&[0.0, 30.0, 90.0, 120.0]), [0.0, 90.0]);
        let many: Vec<f64> = (0..60).map(|k| k as f64 * 3.0 + 1.0).collect();
        assert_eq!(chosen_planes(&many), [1.0, 31.0, 61.0, 91.0, 121.0, 151.0]);
        let curves = cut_curves(&pts, 1e9);
        assert_eq!(curves.len(), 4, "two planes, co and cross each");
        let co0 = &curves[0];
        assert_eq!(co0.name, "co, phi 0°");
        let angles: Vec<f64> = co0.points.iter().map(|p| p.0).collect();
        assert_eq!(angles, [-30.0, 0.0, 30.0]);
        assert!((co0.points[0].1 - 20.0 * 0.25f64.log10()).abs() < 1e-12);
        assert!((curves[1].points[2].1 + 20.0).abs() < 1e-12);
        let map = colour_map(&pts, 1e9, false, "t");
        assert_eq!(map.theta_deg, [0.0, 30.0]);
        assert_eq!(map.phi_deg, [0.0, 90.0, 180.0]);
        assert_eq!(map.level_db[0][1], FLOOR_DB, "no sample at (0°, 90°)");
        assert!((map.level_db[1][1] + 20.0).abs() < 1e-12);
        let files = sphere_files(&pts, "t").unwrap();
        let names: Vec<&str> = files.iter().map(|f| f.0.as_str()).collect();
        assert_eq!(
            names,
            [
                "sphere.csv",
                "sphere_map_1000mhz.svg",
                "sphere_cuts_1000mhz.svg"
            ]
        );
        assert!(String::from_utf8_lossy(&files[1].1).contains("<svg"));
        let summary = sphere_summary(&pts);
        assert!(summary[0]["directivity_dbi"].is_null());
        assert!(summary[0]["directivity_note"]
            .as_str()
            .unwrap()
            .contains("theta"));
        assert!(
            summary[0]["xpd_on_axis_db"].is_null(),
            "no cross on axis: infinite"
        );
    }
}
