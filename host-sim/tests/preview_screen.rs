//! The live preview, rendered to ratatui's test backend: the screen is drawn from preview
//! records only, so records go in as framed bytes and the drawn text is checked.

use std::sync::atomic::AtomicBool;

use ratatui::backend::TestBackend;
use ratatui::Terminal;
use sweepgate::grid::Grid;
use sweepgate::wire::preview::{
    encode_frame, BinRecord, FreqValue, PositionerState, PreviewRecord, StatusRecord, MAX_FRAME,
};
use sweepgate::Complex32;
use sweepgate_host::model::scenario::Scenario;
use sweepgate_host::output::screen::{draw, Screen, PREVIEW_F};
use sweepgate_host::pipeline::replay::{replay_records, Options};
use sweepgate_host::pipeline::simulate::simulate_to;

fn text_of(term: &Terminal<TestBackend>) -> String {
    let buf = term.backend().buffer();
    let mut s = String::new();
    for y in 0..buf.area.height {
        for x in 0..buf.area.width {
            s.push_str(buf[(x, y)].symbol());
        }
        s.push('\n');
    }
    s
}

fn frame(rec: &PreviewRecord<PREVIEW_F>, seq: u16) -> Vec<u8> {
    let mut b = [0u8; MAX_FRAME];
    let n = encode_frame(rec, seq, &mut b).unwrap();
    b[..n].to_vec()
}

fn bin(i: u16, deg: f32, level: f32) -> PreviewRecord<PREVIEW_F> {
    let mut values = heapless::Vec::new();
    values
        .push(FreqValue {
            index: 100,
            raw: Complex32::new(level, 0.0),
            gated: Complex32::new(level * 0.9, 0.0),
            angle_offset_deg: 0.0,
        })
        .unwrap();
    PreviewRecord::Bin(BinRecord {
        bin: i,
        flags: 1,
        sweeps: 2,
        nominal_deg: deg,
        mean_deg: deg,
        max_smear_deg: 0.6,
        echo_db: -17.5,
        values,
    })
}

#[test]
fn screen_shows_title_axes_and_bins_filled() {
    let mut screen = Screen::new("test room");
    screen.grid = Some(Grid::from_start_stop(8e9, 12e9, 201).unwrap());
    screen.total_bins = Some(360);
    let mut bytes = Vec::new();
    for (i, a) in [(0u16, -10.0f32), (1, 0.0), (2, 10.0)] {
        bytes.extend(frame(&bin(i, a, 0.01), i));
    }
    let st = |t: u64, n: u32| {
        PreviewRecord::Status(StatusRecord {
            time_us: t,
            angle_deg: 10.4,
            speed_deg_s: 10.0,
            state: PositionerState::Moving,
            open_bin: Some(3),
            bins_closed: 3,
            sweeps_pushed: n,
            sweeps_binned: n,
            sweeps_rejected: 0,
            angles_pushed: 100,
            angles_rejected: 0,
        })
    };
    bytes.extend(frame(&st(1_000_000, 10), 3));
    bytes.extend(frame(&st(2_000_000, 30), 4));
    // A damaged frame in between is dropped and counted, the rest still decode.
    bytes.extend([0x11, 0x22, 0x33, 0x00]);
    screen.feed(&bytes);
    assert_eq!(screen.bins.len(), 3);
    assert_eq!(screen.decoder_counters().damaged(), 1);
    // 20 sweeps in 1 s of scan time.
    assert!((screen.sweeps_per_s.unwrap() - 20.0).abs() < 1e-9);

    let mut term = Terminal::new(TestBackend::new(130, 36)).unwrap();
    term.draw(|f| draw(f, &screen)).unwrap();
    let text = text_of(&term);
    for needle in [
        "sweepgate: test room",
        "dB below peak, deg",
        "10.000 GHz ── raw",
        "bins filled  3 / 360",
        "-17.5 dB",
        "sweeps/s     20.0",
        "3 bins smeared",
        "1 damaged",
        "q quit",
    ] {
        assert!(text.contains(needle), "missing {needle:?} in\n{text}");
    }
}

#[test]
fn the_sweep_rate_is_the_scans_own() {
    // From the first status record to the latest, not between the last two (common
    // practice, no source: a rate over the whole scan is what "sweeps per second" says).
    let st = |t: u64, n: u32| {
        PreviewRecord::Status(StatusRecord {
            time_us: t,
            angle_deg: 0.0,
            speed_deg_s: 10.0,
            state: PositionerState::Moving,
            open_bin: None,
            bins_closed: 0,
            sweeps_pushed: n,
            sweeps_binned: n,
            sweeps_rejected: 0,
            angles_pushed: 10,
            angles_rejected: 0,
        })
    };
    let mut screen = Screen::new("rate");
    let mut bytes = Vec::new();
    for (i, (t, n)) in [(1_000_000, 10), (2_000_000, 30), (3_000_000, 90)]
        .into_iter()
        .enumerate()
    {
        bytes.extend(frame(&st(t, n), i as u16));
    }
    screen.feed(&bytes);
    // 80 sweeps in 2 s; the last two records alone would say 60.
    assert!((screen.sweeps_per_s.unwrap() - 40.0).abs() < 1e-9);
    assert!(screen
        .summary_lines()
        .iter()
        .any(|l| l == "sweeps per second over the scan (scan time): 40.0"));
}

#[test]
fn replayed_scan_fills_the_screen_from_its_byte_stream() {
    let mut s = Scenario::from_toml(include_str!("../scenarios/workshop-bay.toml")).unwrap();
    s.positioner.start_deg = -20.0;
    s.positioner.stop_deg = 20.0;
    let (bytes, _) = simulate_to(&s, None, 3, Vec::new(), false).unwrap();
    let rec = sweepgate_host::formats::recording::recover(&bytes);
    let mut stream = Vec::new();
    let o = replay_records(
        &rec,
        &Options::fast(std::path::Path::new("x.rec")),
        &mut stream,
        None,
        &AtomicBool::new(false),
    )
    .unwrap();
    let mut screen = Screen::new(o.setup.title.clone());
    screen.grid = Some(o.setup.grid);
    screen.total_bins = Some(o.setup.layout.count());
    screen.feed(&stream);
    assert_eq!(screen.bins.len(), o.report.bins.len());
    assert_eq!(screen.decoder_counters().damaged(), 0);
    // The screen's gated values are the engine's, through the wire.
    for b in &o.report.bins {
        let idx = o.setup.layout.index_of(b.angle_deg as f32).unwrap();
        let got = screen.bins[&idx].values[0].gated;
        assert!((f64::from(got.re) - b.values[0].gated.re).abs() < 1e-12);
    }
    let mut term = Terminal::new(TestBackend::new(120, 32)).unwrap();
    screen.cycle(1);
    term.draw(|f| draw(f, &screen)).unwrap();
    let text = text_of(&term);
    let want = format!(
        "bins filled  {} / {}",
        screen.bins.len(),
        o.setup.layout.count()
    );
    assert!(text.contains(&want), "missing {want:?} in\n{text}");
    assert!(text.contains("workshop bay"), "{text}");
    assert!(text.contains("8.000 GHz (2/3)"), "{text}");
    assert!(text.contains("finished"), "{text}");
}
