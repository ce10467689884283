//! A colour map as an SVG file: a grid of levels in dB drawn as cells, with its axes, a
//! colour bar and lines of notes under the title (used for the RCS report's down-range
//! profiles and image).

use std::fmt::Write;

/// What a colour map shows.
#[derive(Debug, Clone, PartialEq)]
pub struct ColourMap<'a> {
    /// Title, first line of the picture.
    pub title: &'a str,
    /// Lines under the title (resolution, scale, …).
    pub notes: &'a [String],
    /// Horizontal axis label and cell centres.
    pub x_label: &'a str,
    /// Horizontal cell centres, ascending.
    pub x: &'a [f64],
    /// Vertical axis label.
    pub y_label: &'a str,
    /// Vertical cell centres, ascending (drawn bottom to top).
    pub y: &'a [f64],
    /// Levels, dB, `levels[iy][ix]`.
    pub levels: &'a [Vec<f64>],
    /// Levels at or below this are drawn in the darkest colour, dB.
    pub floor_db: f64,
    /// Levels at or above this are drawn in the brightest colour, dB.
    pub top_db: f64,
}

/// The colour of `t` ∈ [0, 1]: dark blue through teal to pale yellow (our own ramp).
fn colour(t: f64) -> String {
    let t = t.clamp(0.0, 1.0);
    let stops = [
        (10.0, 12.0, 60.0),
        (20.0, 120.0, 140.0),
        (250.0, 240.0, 150.0),
    ];
    let (a, b, u) = if t < 0.5 {
        (stops[0], stops[1], t * 2.0)
    } else {
        (stops[1], stops[2], t * 2.0 - 1.0)
    };
    let mix = |p: f64, q: f64| (p + (q - p) * u).round() as u8;
    format!(
        "#{:02x}{:02x}{:02x}",
        mix(a.0, b.0),
        mix(a.1, b.1),
        mix(a.2, b.2)
    )
}

fn edges(c: &[f64]) -> (f64, f64) {
    match (c.first(), c.last()) {
        (Some(&a), Some(&b)) if c.len() > 1 => {
            let half = (b - a) / (c.len() - 1) as f64 / 2.0;
            (a - half, b + half)
        }
        (Some(&a), _) => (a - 0.5, a + 0.5),
        _ => (0.0, 1.0),
    }
}

const LEFT: f64 = 80.0;
const TOP: f64 = 90.0;
const W: f64 = 520.0;
const H: f64 = 420.0;

/// The map as SVG text.
pub fn colour_map_svg(m: &ColourMap) -> String {
    let mut s = String::new();
    let (width, height) = (LEFT + W + 110.0, TOP + H + 60.0);
    let _ = writeln!(
        s,
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" font-family="sans-serif" font-size="12">"#
    );
    let _ = writeln!(s, r#"<rect width="100%" height="100%" fill="white"/>"#);
    let _ = writeln!(
        s,
        r#"<text x="{LEFT}" y="22" font-size="15">{}</text>"#,
        esc(m.title)
    );
    for (i, n) in m.notes.iter().enumerate() {
        let _ = writeln!(
            s,
            r#"<text x="{LEFT}" y="{}">{}</text>"#,
            40 + 15 * i,
            esc(n)
        );
    }
    cells(&mut s, m);
    axes(&mut s, m);
    colour_bar(&mut s, m);
    s.push_str("</svg>\n");
    s
}

fn esc(t: &str) -> String {
    t.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
}

fn cells(s: &mut String, m: &ColourMap) {
    let (nx, ny) = (m.x.len().max(1), m.y.len().max(1));
    let (cw, ch) = (W / nx as f64, H / ny as f64);
    let span = (m.top_db - m.floor_db).max(1e-9);
    for (iy, row) in m.levels.iter().enumerate().take(ny) {
        for (ix, &v) in row.iter().enumerate().take(nx) {
            let (x, y) = (LEFT + ix as f64 * cw, TOP + H - (iy + 1) as f64 * ch);
            let _ = writeln!(
                s,
                r#"<rect x="{x:.2}" y="{y:.2}" width="{:.2}" height="{:.2}" fill="{}"/>"#,
                cw + 0.3,
                ch + 0.3,
                colour((v - m.floor_db) / span)
            );
        }
    }
}

fn axes(s: &mut String, m: &ColourMap) {
    let _ = writeln!(
        s,
        r#"<rect x="{LEFT}" y="{TOP}" width="{W}" height="{H}" fill="none" stroke="black"/>"#
    );
    let ((x0, x1), (y0, y1)) = (edges(m.x), edges(m.y));
    for i in 0..=4 {
        let t = i as f64 / 4.0;
        let (px, py) = (LEFT + t * W, TOP + H - t * H);
        let _ = writeln!(
            s,
            r#"<text x="{px:.1}" y="{}" text-anchor="middle">{:.3}</text>"#,
            TOP + H + 16.0,
            x0 + t * (x1 - x0)
        );
        let _ = writeln!(
            s,
            r#"<text x="{}" y="{:.1}" text-anchor="end">{:.3}</text>"#,
            LEFT - 6.0,
            py + 4.0,
            y0 + t * (y1 - y0)
        );
    }
    let _ = writeln!(
        s,
        r#"<text x="{}" y="{}" text-anchor="middle">{}</text>"#,
        LEFT + W / 2.0,
        TOP + H + 36.0,
        esc(m.x_label)
    );
    let _ = writeln!(
        s,
        r#"<text transform="translate(20,{}) rotate(-90)" text-anchor="middle">{}</text>"#,
        TOP + H / 2.0,
        esc(m.y_label)
    );
}

fn colour_bar(s: &mut String, m: &ColourMap) {
    let x = LEFT + W + 25.0;
    let steps = 40;
    for i in 0..steps {
        let t = i as f64 / (steps - 1) as f64;
        let y = TOP + H - (i + 1) as f64 * H / steps as f64;
        let _ = writeln!(
            s,
            r#"<rect x="{x}" y="{y:.2}" width="18" height="{:.2}" fill="{}"/>"#,
            H / steps as f64 + 0.3,
            colour(t)
        );
    }
    for (v, y) in [(m.top_db, TOP + 4.0), (m.floor_db, TOP + H)] {
        let _ = writeln!(s, r#"<text x="{}" y="{y}">{v:.0} dB</text>"#, x + 22.0);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn draws_every_cell_and_its_labels() {
        let levels = vec![vec![0.0, -10.0, -40.0], vec![-20.0, -5.0, -60.0]];
        let notes = vec!["resolution 37.5 mm".to_string()];
        let svg = colour_map_svg(&ColourMap {
            title: "image <test>",
            notes: &notes,
            x_label: "down-range (m)",
            x: &[0.0, 1.0, 2.0],
            y_label: "cross-range (m)",
            y: &[0.0, 1.0],
            levels: &levels,
            floor_db: -40.0,
            top_db: 0.0,
        });
        // 6 cells, the frame, the background and 40 colour-bar steps.
        assert_eq!(svg.matches("<rect").count(), 6 + 2 + 40);
        assert!(svg.contains("image &lt;test&gt;"));
        assert!(svg.contains("resolution 37.5 mm"));
        // The brightest and darkest colours of the ramp appear for 0 dB and ≤ −40 dB.
        assert!(svg.contains(&colour(1.0)) && svg.contains(&colour(0.0)));
    }
}
