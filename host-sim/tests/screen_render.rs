//! The terminal screen at the sizes people use (80 × 24, an SSH session's default, and
//! 160 × 48), rendered to ratatui's test backend: levels below the peak with labelled ticks,
//! frequencies in GHz, the polar view, the gate flags and the marker readout, and no label or
//! legend drawn over a trace.

use ratatui::backend::TestBackend;
use ratatui::Terminal;
use sweepgate::bins::BinFlags;
use sweepgate::grid::Grid;
use sweepgate::wire::preview::{
    encode_frame, BinRecord, FreqValue, PositionerState, PreviewRecord, StatusRecord, MAX_FRAME,
};
use sweepgate::Complex32;
use sweepgate_host::output::screen::{closes_by_itself, draw, KeyAction, Screen, PREVIEW_F};

fn frame(rec: &PreviewRecord<PREVIEW_F>, seq: u16) -> Vec<u8> {
    let mut b = [0u8; MAX_FRAME];
    let n = encode_frame(rec, seq, &mut b).unwrap();
    b[..n].to_vec()
}

/// A full turn of 1° bins of |E| = max(cos θ, 0.003) (about −50 dB behind), gated a tenth
/// lower than raw; three bins flagged by the gate's self-checks.
fn cosine_scan() -> Screen {
    let mut screen = Screen::new("cosine room");
    screen.grid = Some(Grid::from_start_stop(8e9, 12e9, 201).unwrap());
    screen.total_bins = Some(360);
    screen.frequencies = Some(1);
    let mut bytes = Vec::new();
    for i in 0..360u16 {
        let deg = -179.5 + f32::from(i);
        let level = deg.to_radians().cos().max(0.003);
        let mut values = heapless::Vec::new();
        values
            .push(FreqValue {
                index: 100,
                raw: Complex32::new(level, 0.0),
                gated: Complex32::new(0.9 * level, 0.0),
                angle_offset_deg: 0.0,
            })
            .unwrap();
        let flags = match i {
            10 | 20 => BinFlags::ECHO_IN_GATE,
            30 => BinFlags::DIRECT_OUTSIDE_GATE,
            _ => 0,
        };
        let r = PreviewRecord::Bin(BinRecord {
            bin: i,
            flags,
            sweeps: 2,
            nominal_deg: deg,
            mean_deg: deg,
            max_smear_deg: 0.1,
            echo_db: -30.0,
            values,
        });
        bytes.extend(frame(&r, i));
    }
    let st = PreviewRecord::Status(StatusRecord {
        time_us: 9_000_000,
        angle_deg: 180.0,
        speed_deg_s: 10.0,
        state: PositionerState::Finished,
        open_bin: None,
        bins_closed: 360,
        sweeps_pushed: 720,
        sweeps_binned: 720,
        sweeps_rejected: 0,
        angles_pushed: 3000,
        angles_rejected: 0,
    });
    bytes.extend(frame(&st, 360));
    screen.feed(&bytes);
    screen
}

fn render(screen: &Screen, w: u16, h: u16) -> Vec<Vec<String>> {
    let mut term = Terminal::new(TestBackend::new(w, h)).unwrap();
    term.draw(|f| draw(f, screen)).unwrap();
    let buf = term.backend().buffer().clone();
    (0..h)
        .map(|y| (0..w).map(|x| buf[(x, y)].symbol().to_owned()).collect())
        .collect()
}

fn text(cells: &[Vec<String>]) -> String {
    cells.iter().map(|r| r.concat() + "\n").collect()
}

fn is_braille(s: &str) -> bool {
    s.chars()
        .next()
        .is_some_and(|c| ('\u{2801}'..='\u{28FF}').contains(&c))
}

/// The smallest box holding every braille cell of the plot (the columns left of the panel).
fn trace_box(cells: &[Vec<String>], plot_w: usize) -> (usize, usize, usize, usize) {
    let (mut x0, mut y0, mut x1, mut y1) = (usize::MAX, usize::MAX, 0, 0);
    for (y, row) in cells.iter().enumerate() {
        for (x, c) in row.iter().enumerate().take(plot_w) {
            if is_braille(c) {
                (x0, y0, x1, y1) = (x0.min(x), y0.min(y), x1.max(x), y1.max(y));
            }
        }
    }
    assert!(x0 <= x1, "no trace drawn");
    (x0, y0, x1, y1)
}

/// Where `needle` is written in the plot's columns: (row, first column, last column).
fn places(cells: &[Vec<String>], plot_w: usize, needle: &str) -> Vec<(usize, usize, usize)> {
    let n = needle.chars().count();
    let mut out = Vec::new();
    for (y, row) in cells.iter().enumerate() {
        let line: Vec<&str> = row.iter().take(plot_w).map(String::as_str).collect();
        for x in 0..line.len().saturating_sub(n - 1) {
            if line[x..x + n].concat() == needle {
                out.push((y, x, x + n - 1));
            }
        }
    }
    out
}

/// Every label and legend word is written somewhere in the plot, none inside the box of
/// the traces, and the box holds nothing but the traces, the cursor and blank cells.
fn labels_clear_of_traces(cells: &[Vec<String>], plot_w: usize, labels: &[&str]) {
    let (x0, y0, x1, y1) = trace_box(cells, plot_w);
    for label in labels {
        let at = places(cells, plot_w, label);
        assert!(!at.is_empty(), "{label:?} not shown in\n{}", text(cells));
        for (y, a, b) in at {
            let inside = (y0..=y1).contains(&y) && a <= x1 && b >= x0;
            assert!(
                !inside,
                "{label:?} at row {y} over the traces in\n{}",
                text(cells)
            );
        }
    }
    for row in &cells[y0..=y1] {
        for c in &row[x0..=x1] {
            assert!(
                !c.chars().any(|ch| ch.is_ascii_alphanumeric()),
                "text {c:?} inside the traces' box in\n{}",
                text(cells)
            );
        }
    }
}

fn check_size(w: u16, h: u16) {
    let mut screen = cosine_scan();
    let plot_w = usize::from(w) - if w >= 120 { 52 } else { 40 };
    let cells = render(&screen, w, h);
    let all = text(&cells);
    labels_clear_of_traces(
        &cells,
        plot_w,
        &[
            "0 dB",
            "-40 dB",
            "-20",
            "-180",
            "180",
            "raw",
            "gated",
            "10.000 GHz",
        ],
    );
    // The marker readout: the gated peak (0.9 → −0.92 dB) at a bin next to 0°, and the
    // −3 dB points of |cos θ|, ±acos(10^(−3/20)) = ±44.93° (closed form).
    let half = 10f64.powf(-3.0 / 20.0).acos().to_degrees();
    for needle in [
        "frequency    10.000 GHz (1/1)".to_owned(),
        "bins filled  360 / 360".to_owned(),
        "peak         -0.9 dB at 0.5 deg".to_owned(),
        format!("-3 dB        -{half:.1}..{half:.1} ({:.1} deg)", 2.0 * half),
        "echo in gate 2 bins".to_owned(),
        "direct path  1 bin outside the gate".to_owned(),
    ] {
        assert!(
            all.contains(&needle),
            "missing {needle:?} at {w}×{h} in\n{all}"
        );
    }
    // The cursor: on the peak (0.5°) first, then a bin up; its line is drawn, not text.
    assert_eq!(
        screen.key(ratatui::crossterm::event::KeyCode::Char(']')),
        KeyAction::Stay
    );
    screen.key(ratatui::crossterm::event::KeyCode::Char(']'));
    let cells = render(&screen, w, h);
    for needle in [
        "cursor       1.5 deg",
        "  level      -0.0 dB gated, -0.0 raw",
    ] {
        assert!(
            text(&cells).contains(needle),
            "{needle:?} in\n{}",
            text(&cells)
        );
    }
    labels_clear_of_traces(&cells, plot_w, &["0 dB", "-40 dB", "raw", "gated"]);
    // The polar view: round rings and the traces, the legend and ring levels in the border.
    screen.key(ratatui::crossterm::event::KeyCode::Char('p'));
    let cells = render(&screen, w, h);
    println!("polar view at {w}×{h}:\n{}", text(&cells));
    labels_clear_of_traces(
        &cells,
        plot_w,
        &["raw", "gated", "10.000 GHz", "0° up, rings 10 dB to -40"],
    );
    let (x0, y0, x1, y1) = trace_box(&cells, plot_w);
    // The outer ring spans the plot's height; cells being twice as tall as wide, about
    // twice as many columns as rows.
    let ratio = (x1 - x0 + 1) as f64 / (y1 - y0 + 1) as f64;
    assert!(
        (1.6..=2.4).contains(&ratio),
        "ring {}×{} cells",
        x1 - x0 + 1,
        y1 - y0 + 1
    );
}

#[test]
fn at_80_by_24_labels_and_legend_stay_off_the_traces() {
    check_size(80, 24);
}

#[test]
fn at_160_by_48_labels_and_legend_stay_off_the_traces() {
    check_size(160, 48);
}

#[test]
fn the_screen_stays_open_after_the_end_until_q() {
    let mut screen = cosine_scan();
    screen.ended = true;
    let long_ago = std::time::Instant::now() - std::time::Duration::from_secs(3600);
    assert!(!closes_by_itself(Some(long_ago), None));
    assert!(closes_by_itself(
        Some(long_ago),
        Some(std::time::Duration::from_secs(1))
    ));
    assert_eq!(
        screen.key(ratatui::crossterm::event::KeyCode::Char('q')),
        KeyAction::Quit
    );
    assert!(text(&render(&screen, 80, 24)).contains("stream ended: q quits"));
}
