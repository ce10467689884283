//! The report's SVG plots: the pattern against angle, the polar pattern, and the impulse
//! response with the gate. They share the chart frame (caption, axes), the way curves are
//! drawn with their legend entries, and the legend box.

use std::ops::Range;

use anyhow::Context;
use plotters::coord::types::RangedCoordf64;
use plotters::coord::Shift;
use plotters::prelude::*;

use super::{ImpulseView, ReportInput};

/// Lowest level plotted on the pattern plots, dB relative to the peak.
const PLOT_FLOOR_DB: f64 = -50.0;

/// Lowest level plotted on the impulse plot, dB relative to the peak.
const IMPULSE_FLOOR_DB: f64 = -100.0;

const TRUTH_COLOUR: RGBColor = RGBColor(160, 160, 160);
const RAW_COLOUR: RGBColor = RGBColor(214, 120, 0);
const GATED_COLOUR: RGBColor = RGBColor(0, 90, 200);
const GATE_COLOUR: RGBColor = RGBColor(0, 150, 60);

/// A named, coloured line of (x, y) points and its stroke width.
struct Curve {
    name: &'static str,
    colour: RGBColor,
    width: u32,
    points: Vec<(f64, f64)>,
}

type Area<'b> = DrawingArea<SVGBackend<'b>, Shift>;
type Chart<'a, 'b> = ChartContext<'a, SVGBackend<'b>, Cartesian2d<RangedCoordf64, RangedCoordf64>>;

/// A white SVG drawing area of `size` pixels drawn into `svg`.
fn canvas(svg: &mut String, size: (u32, u32)) -> anyhow::Result<Area<'_>> {
    let root = SVGBackend::with_string(svg, size).into_drawing_area();
    root.fill(&WHITE).context("filling the background")?;
    Ok(root)
}

/// A chart with a caption over `x` × `y`, and with axes labelled `descriptions` (x, y)
/// when given (the polar plot draws its own grid).
fn frame<'a, 'b>(
    root: &'a Area<'b>,
    caption: String,
    x: Range<f64>,
    y: Range<f64>,
    descriptions: Option<(&str, &str)>,
) -> anyhow::Result<Chart<'a, 'b>> {
    let mut builder = ChartBuilder::on(root);
    builder.caption(caption, ("sans-serif", 20)).margin(12);
    if descriptions.is_some() {
        builder.x_label_area_size(45).y_label_area_size(60);
    }
    let mut chart = builder
        .build_cartesian_2d(x, y)
        .context("laying out the chart")?;
    if let Some((x_desc, y_desc)) = descriptions {
        chart
            .configure_mesh()
            .axis_desc_style(("sans-serif", 15))
            .label_style(("sans-serif", 13))
            .x_desc(x_desc)
            .y_desc(y_desc)
            .draw()
            .context("drawing the axes")?;
    }
    Ok(chart)
}

/// Draws the curves in order, each with its legend entry (a short line of its colour).
fn draw_curves(chart: &mut Chart<'_, '_>, curves: Vec<Curve>) -> anyhow::Result<()> {
    for c in curves {
        let colour = c.colour;
        chart
            .draw_series(LineSeries::new(c.points, colour.stroke_width(c.width)))
            .with_context(|| format!("drawing the {} curve", c.name))?
            .label(c.name)
            .legend(move |(x, y)| {
                PathElement::new(vec![(x, y), (x + 20, y)], colour.stroke_width(2))
            });
    }
    Ok(())
}

/// The legend box at `position`, then the drawing is finished into its text.
fn finish<'a, 'b: 'a>(
    mut chart: Chart<'a, 'b>,
    root: &Area<'b>,
    position: SeriesLabelPosition,
) -> anyhow::Result<()> {
    chart
        .configure_series_labels()
        .background_style(WHITE.mix(0.85))
        .border_style(BLACK)
        .position(position)
        .draw()
        .context("drawing the legend")?;
    root.present().context("finishing the drawing")
}

/// The free-space truth (when known, wide and light, drawn first so the gated curve over
/// it stays visible where the two agree), the raw and the gated cut, as (x, y) points
/// made by `point` from each angle and level.
fn pattern_curves(
    input: &ReportInput,
    fi: usize,
    point: impl Fn(f64, f64) -> (f64, f64),
) -> Vec<Curve> {
    let c = input.cut(fi);
    let curve = |name, colour, width, levels: Vec<f64>| Curve {
        name,
        colour,
        width,
        points: c
            .angles_deg
            .iter()
            .zip(levels)
            .map(|(a, l)| point(*a, l))
            .collect(),
    };
    let mut curves = Vec::new();
    if !c.truth_db.is_empty() {
        curves.push(curve("free-space truth", TRUTH_COLOUR, 5, c.truth_norm()));
    }
    curves.push(curve("raw", RAW_COLOUR, 2, c.raw_norm()));
    curves.push(curve("gated", GATED_COLOUR, 2, c.gated_norm()));
    curves
}

/// The pattern against angle, normalized to its peak.
pub(super) fn rect(name: &str, input: &ReportInput, fi: usize) -> anyhow::Result<String> {
    let mut svg = String::new();
    let mut plot = || -> anyhow::Result<()> {
        let angles = input.cut(fi).angles_deg;
        let f = input.frequencies_hz.get(fi).copied().unwrap_or(0.0);
        let (x0, x1) = match (angles.first(), angles.last()) {
            (Some(a), Some(b)) if b > a => (*a, *b),
            _ => (-180.0, 180.0),
        };
        let root = canvas(&mut svg, (960, 560))?;
        let mut chart = frame(
            &root,
            format!("{}: pattern at {:.3} GHz", input.title, f / 1e9),
            x0..x1,
            PLOT_FLOOR_DB..5.0,
            Some(("angle (deg)", "level relative to peak (dB)")),
        )?;
        let curves = pattern_curves(input, fi, |a, l| (a, l.max(PLOT_FLOOR_DB)));
        draw_curves(&mut chart, curves)?;
        finish(chart, &root, SeriesLabelPosition::LowerRight)
    };
    plot().with_context(|| format!("plotting {name}"))?;
    Ok(svg)
}

/// Radius of a level on the polar plot: 1 at the peak, 0 at [`PLOT_FLOOR_DB`].
fn polar_radius(level_db: f64) -> f64 {
    ((level_db.max(PLOT_FLOOR_DB) - PLOT_FLOOR_DB) / -PLOT_FLOOR_DB).clamp(0.0, 1.0)
}

/// The point at `angle_deg` (0° up, clockwise) and radius `r`.
fn polar_point(angle_deg: f64, r: f64) -> (f64, f64) {
    let t = angle_deg.to_radians();
    (r * t.sin(), r * t.cos())
}

/// Rings every 10 dB with their level, spokes every 30° with their angle, and the axis
/// description.
fn polar_grid(chart: &mut Chart<'_, '_>) -> anyhow::Result<()> {
    let grey = RGBColor(190, 190, 190);
    let text_style = ("sans-serif", 14).into_font().color(&BLACK);
    let rings = [0.0, -10.0, -20.0, -30.0, -40.0].map(|l: f64| {
        let r = polar_radius(l);
        let ring: Vec<_> = (0..=360).map(|a| polar_point(a as f64, r)).collect();
        (ring, format!("{l:.0} dB"), polar_point(15.0, r))
    });
    let spokes = (0..360).step_by(30).map(|a| {
        let a = a as f64;
        let shown = if a > 180.0 { a - 360.0 } else { a };
        let spoke = vec![(0.0, 0.0), polar_point(a, 1.0)];
        (spoke, format!("{shown:.0}°"), polar_point(a, 1.1))
    });
    for (line, text, at) in rings.into_iter().chain(spokes) {
        chart
            .draw_series(LineSeries::new(line, grey))
            .context("drawing the grid")?;
        chart
            .draw_series(std::iter::once(Text::new(text, at, text_style.clone())))
            .context("labelling the grid")?;
    }
    chart
        .draw_series(std::iter::once(Text::new(
            "angle (deg); radius: level relative to peak (dB)",
            (-1.2, -1.22),
            text_style.clone(),
        )))
        .context("describing the axes")?;
    Ok(())
}

/// The pattern in polar form, normalized to its peak; a full circle is closed.
pub(super) fn polar(name: &str, input: &ReportInput, fi: usize) -> anyhow::Result<String> {
    let mut svg = String::new();
    let mut plot = || -> anyhow::Result<()> {
        let f = input.frequencies_hz.get(fi).copied().unwrap_or(0.0);
        let root = canvas(&mut svg, (760, 800))?;
        let mut chart = frame(
            &root,
            format!("{}: polar pattern at {:.3} GHz", input.title, f / 1e9),
            -1.25f64..1.25,
            -1.25f64..1.25,
            None,
        )?;
        polar_grid(&mut chart)?;
        let mut curves = pattern_curves(input, fi, |a, l| polar_point(a, polar_radius(l)));
        if input.full_circle {
            for c in &mut curves {
                if let Some(p) = c.points.first().copied() {
                    c.points.push(p);
                }
            }
        }
        draw_curves(&mut chart, curves)?;
        finish(chart, &root, SeriesLabelPosition::UpperRight)
    };
    plot().with_context(|| format!("plotting {name}"))?;
    Ok(svg)
}

/// The impulse response, the response after the gate and the gate itself, in dB against
/// time: each relative to its own peak (the gate to 1), floored at [`IMPULSE_FLOOR_DB`].
fn impulse_curves(iv: &ImpulseView) -> Vec<Curve> {
    let peak = iv.magnitude.iter().copied().fold(0.0f64, f64::max);
    let relative = |m: f64, to: f64| {
        if to > 0.0 && m > 0.0 {
            (20.0 * (m / to).log10()).max(IMPULSE_FLOOR_DB)
        } else {
            IMPULSE_FLOOR_DB
        }
    };
    let t = &iv.time_ns;
    let curve = |name, colour, points| Curve {
        name,
        colour,
        width: 2,
        points,
    };
    vec![
        curve(
            "impulse response",
            RAW_COLOUR,
            t.iter()
                .zip(&iv.magnitude)
                .map(|(t, m)| (*t, relative(*m, peak)))
                .collect(),
        ),
        curve(
            "after the gate",
            GATED_COLOUR,
            t.iter()
                .zip(iv.magnitude.iter().zip(&iv.gate))
                .map(|(t, (m, g))| (*t, relative(m * g, peak)))
                .collect(),
        ),
        curve(
            "gate (dB)",
            GATE_COLOUR,
            t.iter()
                .zip(&iv.gate)
                .map(|(t, g)| (*t, relative(*g, 1.0)))
                .collect(),
        ),
    ]
}

/// Vertical lines where the gate opens and closes, labelled at two heights so that the
/// labels do not overlap on a short gate.
fn gate_marks(chart: &mut Chart<'_, '_>, iv: &ImpulseView) -> anyhow::Result<()> {
    for (t, name, y) in [
        (iv.gate_start_ns, "gate opens", -88.0),
        (iv.gate_stop_ns, "gate closes", -95.0),
    ] {
        chart
            .draw_series(LineSeries::new(
                vec![(t, IMPULSE_FLOOR_DB), (t, 5.0)],
                GATE_COLOUR,
            ))
            .context("drawing the gate edges")?;
        chart
            .draw_series(std::iter::once(Text::new(
                format!("{name} {t:.2} ns"),
                (t, y),
                ("sans-serif", 13).into_font().color(&GATE_COLOUR),
            )))
            .context("labelling the gate edges")?;
    }
    Ok(())
}

/// The impulse response of one bin with the gate.
pub(super) fn impulse(name: &str, input: &ReportInput, iv: &ImpulseView) -> anyhow::Result<String> {
    let mut svg = String::new();
    let mut plot = || -> anyhow::Result<()> {
        let t_end = iv.time_ns.last().copied().unwrap_or(1.0).max(1e-3);
        let root = canvas(&mut svg, (960, 560))?;
        let mut chart = frame(
            &root,
            format!(
                "{}: impulse response at {:.1}° ({} sweeps) with the gate",
                input.title, iv.angle_deg, iv.sweeps
            ),
            0.0..t_end,
            IMPULSE_FLOOR_DB..5.0,
            Some(("time (ns)", "|h| relative to peak (dB)")),
        )?;
        draw_curves(&mut chart, impulse_curves(iv))?;
        gate_marks(&mut chart, iv)?;
        finish(chart, &root, SeriesLabelPosition::UpperRight)
    };
    plot().with_context(|| format!("plotting {name}"))?;
    Ok(svg)
}
