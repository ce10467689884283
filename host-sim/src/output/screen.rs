//! The live preview: a screen model fed only from preview records (bytes framed by
//! [`sweepgate::wire::preview`]), the drawing of that model onto a ratatui [`Frame`], and the
//! two ways of showing it: a full terminal screen, or a progress line on stderr when there is
//! no terminal.
//!
//! The same model serves `sweepgate replay` (fed by the replayed scan engine) and
//! `sweepgate view` (fed by a board's byte stream), so what the screen shows is exactly what
//! the records carry: raw and gated |S21| at each pattern frequency against angle, each in dB
//! below its own peak, as a rectangular or a polar plot; markers (the gated peak, its −3 dB
//! points and width, and a cursor); the gate's self-check flags; bins filled, the last echo
//! level, the scan's sweeps per second (from status records), counters and warnings. The
//! legend sits in the plot's border and the level labels outside the plot, so neither covers
//! a trace at any size (`host-sim/tests/screen_render.rs`, 80 × 24 and 160 × 48).
//!
//! Keys: `q` or Esc quits (the terminal is restored), `f`/Tab/→ shows the next pattern
//! frequency, `F`/← the previous one, `p` switches between the rectangular and the polar
//! plot, `[` and `]` move the cursor a bin down or up. With a terminal the screen stays
//! open after the stream ends until `q`.

use std::collections::BTreeMap;
use std::io::IsTerminal;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::{Receiver, RecvTimeoutError};
use std::time::{Duration, Instant};

use ratatui::layout::{Constraint, Direction, Layout, Rect};
use ratatui::style::{Color, Style};
use ratatui::symbols::Marker;
use ratatui::text::{Line, Span};
use ratatui::widgets::canvas::{Canvas, Circle, Line as CanvasLine, Points};
use ratatui::widgets::{Axis, Block, Borders, Chart, Dataset, GraphType, Paragraph};
use ratatui::Frame;
use sweepgate::bins::BinFlags;
use sweepgate::grid::Grid;
use sweepgate::wire::preview::{
    BinRecord, Decoder, DecoderCounters, PositionerState, PreviewRecord, StatusRecord,
};

use crate::output::markers::{markers, Markers};

/// Levels shown below each trace's peak, dB.
pub const RANGE_DB: f64 = 40.0;

/// Pattern frequencies a preview record may carry here (unused slots are padded).
pub const PREVIEW_F: usize = crate::limits::MAX_FREQUENCIES;
/// Frame buffer of the preview decoder, bytes (≥ the longest frame).
pub const PREVIEW_BUF: usize = crate::limits::MAX_FRAME_BYTES;

/// The decoder the preview uses.
pub type PreviewDecoder = Decoder<PREVIEW_F, PREVIEW_BUF>;

/// What a producer sends the preview.
#[derive(Debug, Clone)]
pub enum ScreenInput {
    /// Preview frame bytes.
    Bytes(Vec<u8>),
    /// A warning to show (not from the stream, e.g. recording damage).
    Note(String),
    /// The stream has ended.
    End,
}

/// Everything the preview screen shows, built from preview records only.
#[derive(Debug, Clone)]
pub struct Screen {
    /// Title (the scenario or source name).
    pub title: String,
    /// The sweep grid, if known, to name the pattern frequencies.
    pub grid: Option<Grid>,
    /// Number of pattern frequencies in use (the rest are padding), if known.
    pub frequencies: Option<usize>,
    /// Number of bins of the layout, if known.
    pub total_bins: Option<u16>,
    /// Latest record of each bin.
    pub bins: BTreeMap<u16, BinRecord<PREVIEW_F>>,
    /// Latest status record.
    pub status: Option<StatusRecord>,
    /// The scan's sweep rate: sweeps per second of scan time from the first status record
    /// to the latest.
    pub sweeps_per_s: Option<f64>,
    /// Echo level of the last closed bin, dB.
    pub last_echo_db: Option<f32>,
    /// Pattern frequency shown (slot number).
    pub selected: usize,
    /// Warnings from outside the stream.
    pub notes: Vec<String>,
    /// The stream has ended.
    pub ended: bool,
    /// The polar plot instead of the rectangular one.
    pub polar: bool,
    /// The cursor's angle, deg (`None`: no cursor).
    pub cursor_deg: Option<f64>,
    /// What the levels are, named under the plot (`None`: |S21|, not named; an RCS scan:
    /// `RCS dBsm`, whose bins hold calibrated levels: the plot stays in dB below its peak,
    /// the readouts of the peak and the cursor are in dBsm).
    pub level_label: Option<String>,
    decoder: PreviewDecoder,
    first_status: Option<(u64, u32)>,
}

impl Screen {
    /// An empty screen.
    pub fn new(title: impl Into<String>) -> Self {
        Self {
            title: title.into(),
            grid: None,
            frequencies: None,
            total_bins: None,
            bins: BTreeMap::new(),
            status: None,
            sweeps_per_s: None,
            last_echo_db: None,
            selected: 0,
            notes: Vec::new(),
            ended: false,
            polar: false,
            cursor_deg: None,
            level_label: None,
            decoder: PreviewDecoder::new(),
            first_status: None,
        }
    }

    /// Decodes preview frame bytes and applies every good record.
    pub fn feed(&mut self, bytes: &[u8]) {
        let mut got = Vec::new();
        self.decoder.feed(bytes, |_, r| got.push(r));
        for r in got {
            self.apply(r);
        }
    }

    /// Applies one decoded record.
    pub fn apply(&mut self, rec: PreviewRecord<PREVIEW_F>) {
        match rec {
            PreviewRecord::Bin(b) => {
                if b.echo_db.is_finite() {
                    self.last_echo_db = Some(b.echo_db);
                }
                self.bins.insert(b.bin, b);
            }
            PreviewRecord::Status(s) => {
                if let Some((t0, n0)) = self.first_status {
                    if s.time_us > t0 && s.sweeps_pushed >= n0 {
                        let dt = (s.time_us - t0) as f64 * 1e-6;
                        self.sweeps_per_s = Some(f64::from(s.sweeps_pushed - n0) / dt);
                    }
                }
                self.first_status
                    .get_or_insert((s.time_us, s.sweeps_pushed));
                self.status = Some(s);
            }
            // One cut on screen: the first trace of the latest cut's bins.
            PreviewRecord::Cut(c) => self.apply(PreviewRecord::Bin(c.first_trace_bin())),
            // The map of impulse responses is the web view's; the terminal has no room.
            PreviewRecord::Impulse(_) => {}
        }
    }

    /// Applies a feed message.
    pub fn take(&mut self, f: ScreenInput) {
        match f {
            ScreenInput::Bytes(b) => self.feed(&b),
            ScreenInput::Note(n) => self.notes.push(n),
            ScreenInput::End => self.ended = true,
        }
    }

    /// The preview decoder's counters.
    pub fn decoder_counters(&self) -> &DecoderCounters {
        self.decoder.counters()
    }

    /// Grid indices of the pattern frequencies, from the records seen.
    pub fn frequency_indices(&self) -> Vec<u16> {
        let Some(b) = self.bins.values().next() else {
            return Vec::new();
        };
        match self.frequencies {
            Some(n) => b.values.iter().take(n).map(|v| v.index).collect(),
            None => {
                // Unused slots repeat a frequency: show each grid point once.
                let mut v: Vec<u16> = Vec::new();
                for x in &b.values {
                    if !v.contains(&x.index) {
                        v.push(x.index);
                    }
                }
                v
            }
        }
    }

    /// A frequency's name: its value when the grid is known, else its grid point.
    pub fn frequency_label(&self, index: u16) -> String {
        match &self.grid {
            Some(g) => format!("{:.3} GHz", g.frequency_hz(usize::from(index)) / 1e9),
            None => format!("grid point {index}"),
        }
    }

    /// Shows the next (`step` = 1) or previous (`step` = −1) pattern frequency.
    pub fn cycle(&mut self, step: isize) {
        let n = self.frequency_indices().len().max(1) as isize;
        self.selected = (self.selected as isize + step).rem_euclid(n) as usize;
    }

    /// (angle in −180…180°, raw dB, gated dB) of the shown frequency, sorted by angle.
    pub fn pattern_points(&self) -> Vec<(f64, f64, f64)> {
        let db = |z: sweepgate::Complex32| 20.0 * f64::from(z.norm()).max(1e-15).log10();
        let mut v: Vec<(f64, f64, f64)> = self
            .bins
            .values()
            .filter_map(|b| {
                let fv = b.values.get(self.selected)?;
                let a = (f64::from(b.nominal_deg) + 180.0).rem_euclid(360.0) - 180.0;
                Some((a, db(fv.raw), db(fv.gated)))
            })
            .collect();
        v.sort_by(|a, b| a.0.total_cmp(&b.0));
        v
    }

    /// [`Self::pattern_points`] with each trace in dB below its own peak.
    pub fn normalised_points(&self) -> Vec<(f64, f64, f64)> {
        let pts = self.pattern_points();
        let peak =
            |k: fn(&(f64, f64, f64)) -> f64| pts.iter().map(k).fold(f64::NEG_INFINITY, f64::max);
        let (raw_peak, gated_peak) = (peak(|p| p.1), peak(|p| p.2));
        pts.iter()
            .map(|p| (p.0, p.1 - raw_peak, p.2 - gated_peak))
            .collect()
    }

    /// Markers of the gated trace (absolute levels) at the shown frequency.
    pub fn gated_markers(&self) -> Option<Markers> {
        let cut: Vec<(f64, f64)> = self.pattern_points().iter().map(|p| (p.0, p.2)).collect();
        markers(&cut)
    }

    /// The bin nearest the cursor: (angle, raw and gated dB below their peaks).
    pub fn cursor_point(&self) -> Option<(f64, f64, f64)> {
        let c = self.cursor_deg?;
        self.normalised_points()
            .into_iter()
            .min_by(|a, b| (a.0 - c).abs().total_cmp(&(b.0 - c).abs()))
    }

    /// Moves the cursor `step` bins up (1) or down (−1); the first move puts it on the peak.
    pub fn move_cursor(&mut self, step: isize) {
        let pts = self.pattern_points();
        if pts.is_empty() {
            return;
        }
        let Some(c) = self.cursor_deg else {
            self.cursor_deg = self.gated_markers().map(|m| m.peak_deg);
            return;
        };
        let i = pts
            .iter()
            .enumerate()
            .min_by(|a, b| (a.1 .0 - c).abs().total_cmp(&(b.1 .0 - c).abs()))
            .map_or(0, |(i, _)| i);
        let j = (i as isize + step).rem_euclid(pts.len() as isize) as usize;
        self.cursor_deg = Some(pts[j].0);
    }

    /// Bins whose latest record has `flag` set.
    pub fn bins_flagged(&self, flag: u16) -> usize {
        self.bins
            .values()
            .filter(|b| BinFlags(b.flags).has(flag))
            .count()
    }

    /// Warning lines derived from the records (and the notes).
    pub fn warnings(&self) -> Vec<String> {
        let mut w = Vec::new();
        if let Some(s) = &self.status {
            if s.sweeps_rejected > 0 {
                w.push(format!(
                    "{} sweeps refused by the engine",
                    s.sweeps_rejected
                ));
            }
            if s.angles_rejected > 0 {
                w.push(format!("{} angle samples refused", s.angles_rejected));
            }
            if s.state == PositionerState::Stalled {
                w.push("positioner stalled".into());
            }
        }
        for (flag, word) in [
            (BinFlags::SMEARED, "smeared (sweep travel over half a bin)"),
            (BinFlags::SPARSE, "sparse"),
            (BinFlags::MOVING, "taken while moving"),
            (BinFlags::EXTRAPOLATED, "extrapolated angle"),
        ] {
            let n = self.bins_flagged(flag);
            if n > 0 {
                w.push(format!("{n} bins {word}"));
            }
        }
        let d = self.decoder.counters();
        if d.damaged() > 0 || d.seq_gaps > 0 {
            w.push(format!(
                "preview link: {} damaged frames, {} frames lost",
                d.damaged(),
                d.seq_gaps
            ));
        }
        w.extend(self.notes.iter().cloned());
        w
    }

    /// "filled / total" text.
    pub fn bins_filled_text(&self) -> String {
        match self.total_bins {
            Some(t) => format!("{} / {}", self.bins.len(), t),
            None => format!("{} / ?", self.bins.len()),
        }
    }

    /// The lines of the final summary.
    pub fn summary_lines(&self) -> Vec<String> {
        let mut v = vec![format!("bins filled {}", self.bins_filled_text())];
        if let Some(s) = &self.status {
            v.push(format!(
                "sweeps: {} pushed, {} binned, {} refused; angle samples: {} pushed, {} refused",
                s.sweeps_pushed,
                s.sweeps_binned,
                s.sweeps_rejected,
                s.angles_pushed,
                s.angles_rejected
            ));
        }
        if let Some(r) = self.sweeps_per_s {
            v.push(format!(
                "sweeps per second over the scan (scan time): {r:.1}"
            ));
        }
        let d = self.decoder.counters();
        v.push(format!(
            "preview frames: {} good, {} damaged, {} lost",
            d.good,
            d.damaged(),
            d.seq_gaps
        ));
        for w in self.warnings() {
            v.push(format!("warning: {w}"));
        }
        v
    }
}

fn state_word(s: PositionerState) -> &'static str {
    match s {
        PositionerState::NoAngle => "no angle yet",
        PositionerState::Moving => "moving",
        PositionerState::Settled => "settled",
        PositionerState::Stalled => "stalled",
        PositionerState::Finished => "finished",
    }
}

/// Draws the screen. Only `screen` is read, so a test can render it to
/// `ratatui::backend::TestBackend`.
pub fn draw(frame: &mut Frame, screen: &Screen) {
    let area = frame.area();
    let panel = if area.width >= 120 { 52 } else { 40 };
    let cols = Layout::default()
        .direction(Direction::Horizontal)
        .constraints([Constraint::Min(30), Constraint::Length(panel)])
        .split(area);
    let freqs = screen.frequency_indices();
    let freq_text = freqs
        .get(screen.selected)
        .map(|&i| screen.frequency_label(i))
        .unwrap_or_else(|| "waiting for bins".into());
    if screen.polar {
        draw_polar(frame, cols[0], screen, &freq_text);
    } else {
        draw_pattern(frame, cols[0], screen, &freq_text);
    }
    let lines = scan_lines(screen, &freq_text, freqs.len());
    let info = Paragraph::new(lines).block(
        Block::default()
            .borders(Borders::ALL)
            .title(format!("sweepgate: {}", screen.title))
            .title_bottom("f freq  p polar  [ ] cursor  q quit"),
    );
    frame.render_widget(info, cols[1]);
}

/// The plot's title: the frequency and the legend, in the border, never over a trace.
fn legend_title(freq_text: &str) -> Line<'static> {
    Line::from(vec![
        Span::raw(format!("{freq_text} ")),
        Span::styled("── raw", Style::default().fg(Color::Yellow)),
        Span::raw(" "),
        Span::styled("── gated", Style::default().fg(Color::Cyan)),
        Span::raw(" "),
    ])
}

/// A trace in dB below its peak, held at the bottom of the range.
fn clamp_db(v: f64) -> f64 {
    if v.is_finite() {
        v.max(-RANGE_DB)
    } else {
        -RANGE_DB
    }
}

/// The chart of raw and gated |S21| against angle at the selected frequency, each in dB
/// below its peak, labelled every 10 dB; the cursor as a vertical line.
fn draw_pattern(frame: &mut Frame, area: Rect, screen: &Screen, freq_text: &str) {
    let pts = screen.normalised_points();
    let raw: Vec<(f64, f64)> = pts.iter().map(|p| (p.0, clamp_db(p.1))).collect();
    let gated: Vec<(f64, f64)> = pts.iter().map(|p| (p.0, clamp_db(p.2))).collect();
    let cursor: Vec<(f64, f64)> = screen
        .cursor_deg
        .map(|c| vec![(c, -RANGE_DB), (c, 0.0)])
        .unwrap_or_default();
    let line = |colour: Color, data| {
        Dataset::default()
            .marker(Marker::Braille)
            .graph_type(GraphType::Line)
            .style(Style::default().fg(colour))
            .data(data)
    };
    let datasets = vec![
        line(Color::Yellow, &raw),
        line(Color::Cyan, &gated),
        line(Color::Magenta, &cursor),
    ];
    let steps = (RANGE_DB / 10.0) as i32;
    let y_labels: Vec<String> = (0..=steps)
        .map(|k| {
            let v = -RANGE_DB + 10.0 * f64::from(k);
            if k == 0 || k == steps {
                format!("{v:.0} dB")
            } else {
                format!("{v:.0}")
            }
        })
        .collect();
    let chart = Chart::new(datasets)
        .legend_position(None)
        .block(
            Block::default()
                .borders(Borders::ALL)
                .title(legend_title(freq_text))
                .title_bottom(match screen.level_label.as_deref() {
                    Some(l) => format!("{l} at {freq_text}: plotted in dB below its peak, deg"),
                    None => "dB below peak, deg".to_string(),
                }),
        )
        .x_axis(
            Axis::default()
                .bounds([-180.0, 180.0])
                .labels(["-180", "-90", "0", "90", "180"]),
        )
        .y_axis(Axis::default().bounds([-RANGE_DB, 0.0]).labels(y_labels));
    frame.render_widget(chart, area);
}

/// The polar plot: 0° up, angles clockwise, rings every 10 dB down to [`RANGE_DB`] below
/// each trace's peak; the ring levels are named in the border, not over the traces.
fn draw_polar(frame: &mut Frame, area: Rect, screen: &Screen, freq_text: &str) {
    let pts = screen.normalised_points();
    let xy = |deg: f64, db: f64| {
        let r = 1.0 + clamp_db(db) / RANGE_DB;
        let t = deg.to_radians();
        (r * t.sin(), r * t.cos())
    };
    let raw: Vec<(f64, f64)> = pts.iter().map(|p| xy(p.0, p.1)).collect();
    let gated: Vec<(f64, f64)> = pts.iter().map(|p| xy(p.0, p.2)).collect();
    // Cells are about twice as tall as wide: widen x so that circles stay round.
    let inner_h = f64::from(area.height.saturating_sub(2).max(1));
    let inner_w = f64::from(area.width.saturating_sub(2).max(1));
    let half_x = 1.05 * inner_w / (2.0 * inner_h);
    let cursor = screen.cursor_deg;
    let canvas = Canvas::default()
        .block(
            Block::default()
                .borders(Borders::ALL)
                .title(legend_title(freq_text))
                .title_bottom(format!("0° up, rings 10 dB to -{RANGE_DB:.0}")),
        )
        .marker(Marker::Braille)
        .x_bounds([-half_x, half_x])
        .y_bounds([-1.05, 1.05])
        .paint(move |ctx| {
            for k in 1..=(RANGE_DB / 10.0) as i32 {
                let radius = f64::from(k) * 10.0 / RANGE_DB;
                ctx.draw(&Circle {
                    x: 0.0,
                    y: 0.0,
                    radius,
                    color: Color::DarkGray,
                });
            }
            if let Some(c) = cursor {
                let (x, y) = xy(c, 0.0);
                ctx.draw(&CanvasLine::new(0.0, 0.0, x, y, Color::Magenta));
            }
            ctx.layer();
            ctx.draw(&Points {
                coords: &raw,
                color: Color::Yellow,
            });
            ctx.layer();
            ctx.draw(&Points {
                coords: &gated,
                color: Color::Cyan,
            });
        });
    frame.render_widget(canvas, area);
}

/// The markers of the shown frequency: the gated peak, its −3 dB points and width, the
/// cursor's bin.
fn marker_lines(screen: &Screen) -> Vec<Line<'static>> {
    // The bins of an RCS scan hold calibrated levels: their readouts are absolute.
    let unit = if screen.level_label.is_some() {
        "dBsm"
    } else {
        "dB"
    };
    let mut lines = Vec::new();
    match screen.gated_markers() {
        Some(m) => {
            lines.push(Line::from(format!(
                "peak         {:.1} {unit} at {:.1} deg",
                m.peak_db, m.peak_deg
            )));
            let a = |x: Option<f64>| x.map_or("-".into(), |v| format!("{v:.1}"));
            lines.push(Line::from(format!(
                "-3 dB        {}..{} ({} deg)",
                a(m.left_deg),
                a(m.right_deg),
                a(m.width_deg)
            )));
        }
        None => lines.push(Line::from("peak         -")),
    }
    if let Some((deg, raw, gated)) = screen.cursor_point() {
        let magenta = Style::default().fg(Color::Magenta);
        lines.push(Line::styled(format!("cursor       {deg:.1} deg"), magenta));
        lines.push(Line::styled(
            format!("  level      {gated:.1} {unit} gated, {raw:.1} raw"),
            magenta,
        ));
    }
    let echo_in = screen.bins_flagged(BinFlags::ECHO_IN_GATE);
    let outside = screen.bins_flagged(BinFlags::DIRECT_OUTSIDE_GATE);
    let style = if echo_in + outside > 0 {
        Style::default().fg(Color::LightRed)
    } else {
        Style::default()
    };
    let bins = |n: usize| {
        if n == 1 {
            "1 bin".to_owned()
        } else {
            format!("{n} bins")
        }
    };
    lines.push(Line::styled(
        format!("echo in gate {}", bins(echo_in)),
        style,
    ));
    lines.push(Line::styled(
        format!("direct path  {} outside the gate", bins(outside)),
        style,
    ));
    lines
}

/// The scan panel: frequency, bins, markers, gate flags, echo level, rates, positioner and
/// counters, warnings.
fn scan_lines(screen: &Screen, freq_text: &str, n_freqs: usize) -> Vec<Line<'static>> {
    let mut lines: Vec<Line> = vec![
        Line::from(format!(
            "frequency    {freq_text} ({}/{})",
            (screen.selected + 1).min(n_freqs),
            n_freqs
        )),
        Line::from(format!("bins filled  {}", screen.bins_filled_text())),
    ];
    lines.extend(marker_lines(screen));
    lines.push(Line::from(format!(
        "echo level   {}",
        screen
            .last_echo_db
            .map_or("-".into(), |e| format!("{e:.1} dB (last bin)"))
    )));
    lines.push(Line::from(format!(
        "sweeps/s     {}",
        screen
            .sweeps_per_s
            .map_or("-".into(), |r| format!("{r:.1}"))
    )));
    lines.extend(counter_lines(screen));
    if screen.ended {
        lines.push(Line::styled(
            "stream ended: q quits",
            Style::default().fg(Color::Green),
        ));
    }
    let warns = screen.warnings();
    if warns.is_empty() {
        lines.push(Line::from("no warnings"));
    } else {
        lines.push(Line::from("warnings:"));
        for w in warns {
            lines.push(Line::styled(
                format!(" {w}"),
                Style::default().fg(Color::LightRed),
            ));
        }
    }
    lines
}

/// The positioner and the engine's counters (from the last status record), and the
/// preview decoder's frame counts.
fn counter_lines(screen: &Screen) -> Vec<Line<'static>> {
    let mut lines = Vec::new();
    if let Some(s) = &screen.status {
        lines.push(Line::from(format!(
            "positioner   {:.2} deg, {}",
            s.angle_deg,
            state_word(s.state)
        )));
        lines.push(Line::from(format!(
            "sweeps       {} in, {} binned, {} refused",
            s.sweeps_pushed, s.sweeps_binned, s.sweeps_rejected
        )));
        lines.push(Line::from(format!(
            "angles       {} in, {} refused",
            s.angles_pushed, s.angles_rejected
        )));
    }
    let d = screen.decoder.counters();
    lines.push(Line::from(format!(
        "frames       {} good, {} damaged",
        d.good,
        d.damaged()
    )));
    lines
}

/// True when stdout is a terminal (the full screen can be shown).
pub fn have_terminal() -> bool {
    std::io::stdout().is_terminal()
}

/// Shows the full-screen preview until `q` is pressed, which sets `quit`; with `linger`
/// given, also until that long after the feed ends (`None`: the screen stays open after
/// the end until `q`). The terminal is restored on every exit path.
pub fn run_terminal(
    rx: &Receiver<ScreenInput>,
    screen: &mut Screen,
    quit: &AtomicBool,
    linger: Option<Duration>,
) -> std::io::Result<()> {
    let mut term = ratatui::try_init()?;
    let r = terminal_loop(&mut term, rx, screen, quit, linger);
    ratatui::restore();
    r
}

/// What a key does on the screen.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum KeyAction {
    /// Leave the screen.
    Quit,
    /// Redraw (the key changed the view, or did nothing).
    Stay,
}

impl Screen {
    /// Applies a key press: `q`/Esc quit, `f`/Tab/→ and `F`/BackTab/← the frequency, `p` the
    /// polar plot, `[` and `]` the cursor.
    pub fn key(&mut self, code: ratatui::crossterm::event::KeyCode) -> KeyAction {
        use ratatui::crossterm::event::KeyCode;
        match code {
            KeyCode::Char('q') | KeyCode::Esc => return KeyAction::Quit,
            KeyCode::Char('f') | KeyCode::Tab | KeyCode::Right => self.cycle(1),
            KeyCode::Char('F') | KeyCode::BackTab | KeyCode::Left => self.cycle(-1),
            KeyCode::Char('p') => self.polar = !self.polar,
            KeyCode::Char(']') => self.move_cursor(1),
            KeyCode::Char('[') => self.move_cursor(-1),
            _ => {}
        }
        KeyAction::Stay
    }
}

/// True when the screen closes by itself: only with a `linger`, that long after the end.
pub fn closes_by_itself(ended_at: Option<Instant>, linger: Option<Duration>) -> bool {
    matches!((ended_at, linger), (Some(t), Some(l)) if t.elapsed() >= l)
}

fn terminal_loop(
    term: &mut ratatui::DefaultTerminal,
    rx: &Receiver<ScreenInput>,
    screen: &mut Screen,
    quit: &AtomicBool,
    linger: Option<Duration>,
) -> std::io::Result<()> {
    use ratatui::crossterm::event::{self, Event, KeyEventKind};
    let mut ended_at: Option<Instant> = None;
    loop {
        loop {
            match rx.try_recv() {
                Ok(f) => screen.take(f),
                Err(std::sync::mpsc::TryRecvError::Empty) => break,
                Err(std::sync::mpsc::TryRecvError::Disconnected) => {
                    screen.ended = true;
                    break;
                }
            }
        }
        if screen.ended && ended_at.is_none() {
            ended_at = Some(Instant::now());
        }
        term.draw(|f| draw(f, screen))?;
        if closes_by_itself(ended_at, linger) {
            return Ok(());
        }
        if event::poll(Duration::from_millis(50))? {
            if let Event::Key(k) = event::read()? {
                if k.kind == KeyEventKind::Press && screen.key(k.code) == KeyAction::Quit {
                    quit.store(true, Ordering::Relaxed);
                    return Ok(());
                }
            }
        }
    }
}

/// Without a terminal: a progress line on stderr (bins filled against the total) until the
/// feed ends.
pub fn run_plain(rx: &Receiver<ScreenInput>, screen: &mut Screen, progress: bool) {
    let bar = if progress {
        let b = indicatif::ProgressBar::new(u64::from(screen.total_bins.unwrap_or(0)));
        b.set_style(
            indicatif::ProgressStyle::with_template("replaying {bar:40} {pos}/{len} bins {msg}")
                .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
        );
        b
    } else {
        indicatif::ProgressBar::hidden()
    };
    loop {
        match rx.recv_timeout(Duration::from_millis(200)) {
            Ok(f) => {
                let end = matches!(f, ScreenInput::End);
                screen.take(f);
                if end {
                    break;
                }
            }
            Err(RecvTimeoutError::Timeout) => {}
            Err(RecvTimeoutError::Disconnected) => {
                screen.ended = true;
                break;
            }
        }
        bar.set_position(screen.bins.len() as u64);
        if let Some(r) = screen.sweeps_per_s {
            bar.set_message(format!("{r:.1} sweeps/s"));
        }
    }
    bar.finish_and_clear();
}
