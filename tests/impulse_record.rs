//! The impulse-response preview record (kind 3) from the engine: sweeps of known impulses,
//! S21 = Σ aᵢ·e^(−j2π·f·tᵢ), are by the Fourier shift theorem (textbook) impulses of height
//! aᵢ at delay tᵢ; with each tᵢ on a time sample, the record's levels read 20·log10 of the
//! amplitude ratios at those delays (within its 0.5 dB steps).

use std::f64::consts::PI;
use sweepgate::bins::BinLayout;
use sweepgate::gate::GateConfig;
use sweepgate::grid::Grid;
use sweepgate::scan::{EchoMode, Event, Scan, ScanConfig};
use sweepgate::window::WindowKind;
use sweepgate::wire::impulse::{ImpulseRecord, LEVEL_FLOOR};
use sweepgate::wire::preview::{encode_frame, Decoder, PreviewRecord, MAX_FRAME};
use sweepgate::Complex32;

const M: usize = 1024;

fn grid() -> Grid {
    Grid::from_start_stop(8e9, 12e9, 801).unwrap() // Δf = 5 MHz
}

/// Time of sample m of the M-point response: m/(M·Δf).
fn t(m: usize) -> f64 {
    m as f64 / (M as f64 * 5e6)
}

fn sweep(paths: &[(f64, usize)]) -> Vec<Complex32> {
    let g = grid();
    (0..g.points())
        .map(|n| {
            let f = g.frequency_hz(n);
            let (re, im) = paths.iter().fold((0.0, 0.0), |(re, im), &(a, m)| {
                let ph = -2.0 * PI * f * t(m);
                (re + a * ph.cos(), im + a * ph.sin())
            });
            Complex32::new(re as f32, im as f32)
        })
        .collect()
}

/// A turn through 12 bins of 1°, 5 sweeps each, with impulse responses every `every` bins;
/// returns the closed bins in order and the records taken.
fn run(echo: EchoMode, every: u16) -> (Vec<u16>, Vec<ImpulseRecord>) {
    let gate = GateConfig {
        grid: grid(),
        band_window: WindowKind::Kaiser { beta: 6.0 },
        center_s: t(100),
        span_s: 4e-9,
        shape: WindowKind::Tukey { alpha: 0.5 },
        renormalize: true,
    };
    let mut cfg = ScanConfig::new(BinLayout::full_circle(0.0, 1.0).unwrap());
    cfg.echo = echo;
    cfg.impulse_every = every;
    let mut scan: Box<Scan<M, 2, 360>> = Box::new(Scan::new(&gate, [400, 400], cfg).unwrap());
    // Direct path at sample 100, an echo at half its amplitude 20 samples (3.9 ns) later.
    let s = sweep(&[(1.0, 100), (0.5, 120)]);
    let (mut closed, mut records) = (Vec::new(), Vec::new());
    let mut take = |ev: sweepgate::scan::Events<2>, scan: &mut Scan<M, 2, 360>| {
        for e in ev {
            if let Event::BinClosed(r) = e {
                closed.push(r.index);
            }
        }
        if let Some(r) = scan.take_impulse() {
            records.push(r.clone());
        }
    };
    for k in 0..60u64 {
        let t0 = k * 50_000;
        let deg = 0.5 + 0.2 * k as f32;
        let ev = scan.push_angle(t0, deg);
        take(ev, &mut scan);
        let ev = scan.push_angle(t0 + 40_000, deg + 0.16);
        take(ev, &mut scan);
        let ev = scan.push_sweep(t0, t0 + 40_000, &s);
        take(ev, &mut scan);
    }
    let ev = scan.finish();
    take(ev, &mut scan);
    (closed, records)
}

#[test]
fn every_other_bin_carries_its_impulse_response_at_the_right_delays_and_levels() {
    let (closed, records) = run(EchoMode::EveryBin, 2);
    assert_eq!(closed.len(), 12, "{closed:?}");
    // The first closed bin and every second one after it, in order.
    let want: Vec<u16> = closed.iter().copied().step_by(2).collect();
    assert_eq!(records.iter().map(|r| r.bin).collect::<Vec<_>>(), want);
    for r in &records {
        // Gate centre ± 2 spans: 8 ns either side, 82 samples in points of 2.
        let dt_ns = t(1) * 1e9;
        assert!(
            (f64::from(r.step_ns) - 2.0 * dt_ns).abs() < 1e-4,
            "{}",
            r.step_ns
        );
        assert_eq!(r.levels.len(), 41);
        let at = |delay_s: f64| {
            ((delay_s * 1e9 - f64::from(r.first_ns)) / f64::from(r.step_ns)) as usize
        };
        // The direct path is the strongest point; the echo reads −6.02 dB below it
        // (20·log10 0.5), to within half a 0.5 dB step.
        assert_eq!(r.levels[at(t(100))], 0);
        let echo = r.level_db(at(t(120))).unwrap() - r.peak_db;
        assert!(
            (f64::from(echo) - 20.0 * 0.5f64.log10()).abs() <= 0.26,
            "{echo}"
        );
        // Away from both paths the band window's sidelobes are far down.
        assert!(
            r.levels[0] >= 60 || r.levels[0] == LEVEL_FLOOR,
            "{:?}",
            r.levels
        );
    }
}

#[test]
fn no_impulse_records_without_the_fft_path_or_at_rate_zero() {
    assert!(run(EchoMode::Never, 2).1.is_empty());
    assert!(run(EchoMode::EveryBin, 0).1.is_empty());
}

#[test]
fn an_impulse_record_survives_its_frame() {
    let (_, records) = run(EchoMode::EveryBin, 4);
    let rec: PreviewRecord<2> = PreviewRecord::Impulse(records[0].clone());
    let mut frame = [0u8; MAX_FRAME];
    let n = encode_frame(&rec, 9, &mut frame).unwrap();
    assert_eq!(
        n,
        4 + 19 + 41 + 4 + 2,
        "one COBS code byte and the delimiter"
    );
    let mut dec: Decoder<2, MAX_FRAME> = Decoder::new();
    let mut got = None;
    dec.feed(&frame[..n], |seq, r| got = Some((seq, r)));
    assert_eq!(got, Some((9, rec)));
}
