//! The sphere report's SVG plots, drawn like the cut plots of `plot.rs` (white canvas,
//! caption, axes with their units, a legend box): a θ–φ colour map of one level and the
//! cuts overlaid. They take plain levels in dB; `crate::pipeline::sphere_report` makes
//! them from sphere samples.

use std::ops::Range;

use anyhow::Context;
use plotters::prelude::*;

/// Lowest level drawn, dB relative to the peak.
pub const MAP_FLOOR_DB: f64 = -50.0;

/// A level on a regular θ × φ grid, dB relative to the peak (≤ 0).
#[derive(Debug, Clone, PartialEq)]
pub struct ColourMap {
    /// Caption.
    pub title: String,
    /// θ of each row, degrees, ascending and equally spaced.
    pub theta_deg: Vec<f64>,
    /// φ of each column, degrees, ascending and equally spaced.
    pub phi_deg: Vec<f64>,
    /// Levels, `level_db[row][column]`.
    pub level_db: Vec<Vec<f64>>,
}

/// One curve of the overlaid cuts.
#[derive(Debug, Clone, PartialEq)]
pub struct CutCurve {
    /// Legend entry ("co, φ = 0°").
    pub name: String,
    /// Whether it is a cross-polar curve (drawn dashed-looking: thinner, lighter).
    pub cross: bool,
    /// (angle in degrees, level in dB relative to the co-polar peak).
    pub points: Vec<(f64, f64)>,
}

/// The colour of a level from [`MAP_FLOOR_DB`] (dark blue) to 0 dB (yellow), a
/// blue–green–yellow ramp of our own.
pub fn level_colour(level_db: f64) -> RGBColor {
    let t = ((level_db - MAP_FLOOR_DB) / -MAP_FLOOR_DB).clamp(0.0, 1.0);
    let ramp = [
        (20.0, 20.0, 90.0),
        (0.0, 140.0, 140.0),
        (250.0, 230.0, 40.0),
    ];
    let (a, b, u) = if t < 0.5 {
        (ramp[0], ramp[1], t * 2.0)
    } else {
        (ramp[1], ramp[2], t * 2.0 - 1.0)
    };
    let mix = |x: f64, y: f64| (x + (y - x) * u).round() as u8;
    RGBColor(mix(a.0, b.0), mix(a.1, b.1), mix(a.2, b.2))
}

/// Half the spacing of equally spaced `v` (the cell's half width), 0.5 for one value.
fn half_step(v: &[f64]) -> f64 {
    if v.len() > 1 {
        (v[1] - v[0]) / 2.0
    } else {
        0.5
    }
}

fn span(v: &[f64]) -> Range<f64> {
    let h = half_step(v);
    match (v.first(), v.last()) {
        (Some(a), Some(b)) => (a - h)..(b + h),
        _ => 0.0..1.0,
    }
}

/// The colour map as SVG text: φ across, θ down, one cell per sample, and a scale bar.
pub fn colour_map_svg(map: &ColourMap) -> anyhow::Result<String> {
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (960, 620)).into_drawing_area();
        root.fill(&WHITE).context("filling the background")?;
        let (plot_area, bar_area) = root.split_horizontally(860);
        let mut chart = ChartBuilder::on(&plot_area)
            .caption(&map.title, ("sans-serif", 20))
            .margin(12)
            .x_label_area_size(45)
            .y_label_area_size(60)
            .build_cartesian_2d(span(&map.phi_deg), span(&map.theta_deg))
            .context("laying out the colour map")?;
        chart
            .configure_mesh()
            .disable_mesh()
            .axis_desc_style(("sans-serif", 15))
            .label_style(("sans-serif", 13))
            .x_desc("phi (deg)")
            .y_desc("theta (deg)")
            .draw()
            .context("drawing the axes")?;
        let (ht, hp) = (half_step(&map.theta_deg), half_step(&map.phi_deg));
        let cells = map.theta_deg.iter().enumerate().flat_map(|(i, t)| {
            map.phi_deg.iter().enumerate().map(move |(j, p)| {
                let level = map.level_db[i][j];
                Rectangle::new(
                    [(p - hp, t - ht), (p + hp, t + ht)],
                    level_colour(level).filled(),
                )
            })
        });
        chart.draw_series(cells).context("drawing the cells")?;
        scale_bar(&bar_area)?;
        root.present().context("finishing the drawing")?;
    }
    Ok(svg)
}

/// The colour scale beside the map, 0 dB at the top, the floor at the bottom.
fn scale_bar(area: &DrawingArea<SVGBackend<'_>, plotters::coord::Shift>) -> anyhow::Result<()> {
    let mut bar = ChartBuilder::on(area)
        .margin_top(45)
        .margin_bottom(57)
        .y_label_area_size(50)
        .build_cartesian_2d(0.0..1.0, MAP_FLOOR_DB..0.0)
        .context("laying out the scale")?;
    bar.configure_mesh()
        .disable_mesh()
        .disable_x_axis()
        .label_style(("sans-serif", 12))
        .y_desc("dB")
        .draw()
        .context("drawing the scale")?;
    let steps = 50;
    bar.draw_series((0..steps).map(|k| {
        let lo = MAP_FLOOR_DB * (1.0 - k as f64 / steps as f64);
        let hi = MAP_FLOOR_DB * (1.0 - (k + 1) as f64 / steps as f64);
        Rectangle::new([(0.0, lo), (1.0, hi)], level_colour(hi).filled())
    }))
    .context("drawing the scale")?;
    Ok(())
}

const CUT_COLOURS: [RGBColor; 6] = [
    RGBColor(0, 90, 200),
    RGBColor(214, 120, 0),
    RGBColor(0, 150, 60),
    RGBColor(170, 40, 140),
    RGBColor(120, 120, 120),
    RGBColor(200, 30, 30),
];

/// The cuts overlaid against angle: co-polar curves wide, cross-polar ones thin in the
/// same colour as their cut (curves come in the order co, cross per cut).
pub fn cuts_svg(title: &str, curves: &[CutCurve]) -> anyhow::Result<String> {
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (960, 560)).into_drawing_area();
        root.fill(&WHITE).context("filling the background")?;
        let mut chart = ChartBuilder::on(&root)
            .caption(title, ("sans-serif", 20))
            .margin(12)
            .x_label_area_size(45)
            .y_label_area_size(60)
            .build_cartesian_2d(-180.0..180.0, MAP_FLOOR_DB..5.0)
            .context("laying out the chart")?;
        chart
            .configure_mesh()
            .axis_desc_style(("sans-serif", 15))
            .label_style(("sans-serif", 13))
            .x_desc("theta, signed (deg)")
            .y_desc("level relative to co-polar peak (dB)")
            .draw()
            .context("drawing the axes")?;
        let mut cut = 0;
        for c in curves {
            let colour = CUT_COLOURS[cut % CUT_COLOURS.len()];
            let width = if c.cross { 1 } else { 2 };
            let style = if c.cross {
                colour.mix(0.6).stroke_width(width)
            } else {
                colour.stroke_width(width)
            };
            let points = c.points.iter().map(|(a, l)| (*a, l.max(MAP_FLOOR_DB)));
            chart
                .draw_series(LineSeries::new(points, style))
                .with_context(|| format!("drawing {}", c.name))?
                .label(c.name.clone())
                .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], style));
            if c.cross {
                cut += 1;
            }
        }
        chart
            .configure_series_labels()
            .background_style(WHITE.mix(0.85))
            .border_style(BLACK)
            .position(SeriesLabelPosition::LowerRight)
            .draw()
            .context("drawing the legend")?;
        root.present().context("finishing the drawing")?;
    }
    Ok(svg)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_ramp_runs_from_dark_blue_to_yellow_and_clamps() {
        assert_eq!(level_colour(0.0), RGBColor(250, 230, 40));
        assert_eq!(level_colour(MAP_FLOOR_DB), RGBColor(20, 20, 90));
        assert_eq!(level_colour(-400.0), level_colour(MAP_FLOOR_DB));
        assert_eq!(level_colour(-25.0), RGBColor(0, 140, 140));
    }
}
