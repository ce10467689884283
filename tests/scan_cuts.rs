//! A scan of two traces over two cuts ([`sweepgate::cuts::CutScan`]) against the one-trace
//! engine and against rustfft: the first trace of the two-trace scan is, bit for bit, what
//! the one-trace `Scan` gives for the same sweeps (same engine, no outside source needed);
//! the second trace's gated values match the whole gating chain written out in f64 with
//! rustfft (general-purpose FFT library, the oracle also of `tests/gate_reference.rs`).

use rustfft::num_complex::Complex64;
use rustfft::FftPlanner;
use std::f64::consts::PI;
use sweepgate::bins::{BinFlags, BinLayout};
use sweepgate::cuts::{CutBinResult, CutConfig, CutEvent, CutLayout, CutScan, CutWarning};
use sweepgate::gate::GateConfig;
use sweepgate::grid::Grid;
use sweepgate::scan::{BinResult, EchoMode, Event, Scan, ScanConfig};
use sweepgate::window::WindowKind;
use sweepgate::Complex32;

const K: usize = 201;
const IDX: [usize; 3] = [20, 100, 180];
type Two = CutScan<256, 3, 16, 64, 1>;
type One = Scan<256, 3, 16>;

fn gate_cfg() -> GateConfig {
    GateConfig {
        // 8–12 GHz, 201 points: Δf = 20 MHz, alias-free 50 ns.
        grid: Grid::from_start_stop(8e9, 12e9, K).unwrap(),
        band_window: WindowKind::Kaiser { beta: 6.0 },
        center_s: 10.15e-9,
        span_s: 3e-9,
        shape: WindowKind::Tukey { alpha: 0.5 },
        renormalize: true,
    }
}

fn scan_cfg(echo: EchoMode) -> ScanConfig {
    let mut c = ScanConfig::new(BinLayout::sector(0.0, 10.0, 1.0).unwrap());
    c.echo = echo;
    c
}

/// The motion law: cut 0 turns forward from −3° to 13° at 10°/s (0…1.6 s) with the second
/// axis at 0°; the second axis then moves to 90° at 75°/s (1.6…2.8 s); cut 1 turns back from
/// 13° to −3° (2.8…4.4 s).
fn axes(t_s: f64) -> (f64, f64) {
    if t_s <= 1.6 {
        (-3.0 + 10.0 * t_s, 0.0)
    } else if t_s <= 2.8 {
        (13.0, 75.0 * (t_s - 1.6))
    } else {
        (13.0 - 10.0 * (t_s - 2.8), 90.0)
    }
}

/// Σ a·e^(−j2π f τ) over (a, τ) (Fourier shift theorem: impulses at the delays).
fn paths(paths: &[(f64, f64)]) -> Vec<Complex64> {
    let grid = gate_cfg().grid;
    (0..K)
        .map(|n| {
            let f = grid.frequency_hz(n);
            paths
                .iter()
                .map(|&(a, tau)| Complex64::from_polar(a, -2.0 * PI * f * tau))
                .sum()
        })
        .collect()
}

/// The two traces of a sweep whose mid-angle lies in bin `bin` of cut `cut`: constant over
/// the bin, so the bin's average is the sweep itself.
fn traces(bin: i64, cut: i64) -> (Vec<Complex32>, Vec<Complex32>) {
    let (b, c) = (bin as f64, cut as f64);
    let co = paths(&[(1.0 + 0.05 * b + 0.3 * c, 10e-9), (0.5, 22e-9)]);
    let cross = paths(&[(0.1 + 0.02 * b, 10.3e-9), (0.2, 19e-9)]);
    let f = |v: Vec<Complex64>| {
        v.iter()
            .map(|z| Complex32::new(z.re as f32, z.im as f32))
            .collect()
    };
    (f(co), f(cross))
}

/// A sweep: start and end, µs, and its traces.
struct Sweep {
    start_us: u64,
    end_us: u64,
    co: Vec<Complex32>,
    cross: Vec<Complex32>,
}

fn sweeps() -> Vec<Sweep> {
    (0..176u64)
        .map(|j| {
            let start_us = 25_000 * j + 3_000;
            let end_us = start_us + 10_000;
            let (a1, a2) = axes((start_us + 5_000) as f64 * 1e-6);
            let cut = if a2 > 45.0 { 1 } else { 0 };
            let (co, cross) = traces(a1.round() as i64, cut);
            Sweep {
                start_us,
                end_us,
                co,
                cross,
            }
        })
        .collect()
}

/// Runs the two-trace scan; returns its results and, per sweep, the cut it was passed on
/// with (None: refused by the two-trace engine's own checks).
fn run_two(echo: EchoMode) -> (Vec<CutBinResult<3, 1>>, Vec<Option<u16>>) {
    let mut cfg = CutConfig::new(scan_cfg(echo), CutLayout::new(0.0, 90.0, 2, 1.0).unwrap());
    cfg.axis2_track.max_speed_deg_s = 100.0;
    let mut s = Two::new(&gate_cfg(), IDX, cfg).unwrap();
    let all = sweeps();
    let (mut out, mut passed) = (Vec::new(), Vec::new());
    let take = |ev: sweepgate::cuts::CutEvents<3, 1>, out: &mut Vec<_>| {
        let mut refused = false;
        for e in ev {
            match e {
                CutEvent::BinClosed(r) => out.push(r),
                CutEvent::Warning(CutWarning::SweepRejected(_)) => refused = true,
                _ => {}
            }
        }
        refused
    };
    let mut next = 0;
    for i in 0..=220u64 {
        let t_us = i * 20_000;
        let (a1, a2) = axes(t_us as f64 * 1e-6);
        take(s.push_axes(t_us, a1 as f32, a2 as f32), &mut out);
        while next < all.len() && all[next].end_us <= t_us {
            let w = &all[next];
            let refused = take(
                s.push_traces(w.start_us, w.end_us, &w.co, [&w.cross]),
                &mut out,
            );
            passed.push((!refused).then(|| s.current_cut().unwrap()));
            next += 1;
        }
    }
    take(s.finish(), &mut out);
    let c = s.counters();
    assert_eq!(c.sweeps_pushed, 176);
    assert_eq!(c.sweeps_binned() + c.sweeps_rejected(), c.sweeps_pushed);
    assert_eq!(c.cuts_started, 2);
    (out, passed)
}

/// The one-trace engine fed every angle sample and the first trace of the sweeps the
/// two-trace engine passed on for cut `cut`.
fn run_one(echo: EchoMode, passed: &[Option<u16>], cut: u16) -> Vec<BinResult<3>> {
    let mut s = One::new(&gate_cfg(), IDX, scan_cfg(echo)).unwrap();
    let all = sweeps();
    let mut out = Vec::new();
    let mut take = |ev: heapless::Vec<Event<3>, 3>| {
        for e in ev {
            if let Event::BinClosed(r) = e {
                out.push(r);
            }
        }
    };
    let mut next = 0;
    for i in 0..=220u64 {
        let t_us = i * 20_000;
        take(s.push_angle(t_us, axes(t_us as f64 * 1e-6).0 as f32));
        while next < all.len() && all[next].end_us <= t_us {
            if passed[next] == Some(cut) {
                let w = &all[next];
                take(s.push_sweep(w.start_us, w.end_us, &w.co));
            }
            next += 1;
        }
    }
    take(s.finish());
    out
}

#[test]
fn first_trace_equals_the_one_trace_engine_bit_for_bit() {
    for echo in [EchoMode::EveryBin, EchoMode::Never] {
        let (two, passed) = run_two(echo);
        for cut in 0..2u16 {
            let mine: Vec<BinResult<3>> = two
                .iter()
                .filter(|r| r.cut == cut)
                .map(|r| r.first)
                .collect();
            let one = run_one(echo, &passed, cut);
            assert_eq!(mine.len(), 11, "cut {cut}: every bin of 0…10° once");
            assert_eq!(mine.len(), one.len(), "cut {cut}");
            for (a, b) in mine.iter().zip(&one) {
                assert_eq!(a, b, "cut {cut}");
                let bits = |r: &BinResult<3>| r.gated.map(|z| (z.re.to_bits(), z.im.to_bits()));
                assert_eq!(bits(a), bits(b));
            }
        }
    }
}

#[test]
fn cuts_carry_both_axes_and_start_afresh() {
    let (two, _) = run_two(EchoMode::EveryBin);
    for r in &two {
        let want2 = if r.cut == 0 { 0.0 } else { 90.0 };
        assert_eq!(r.cut_nominal_deg, want2);
        assert!((r.axis2_deg - want2).abs() < 1e-4, "{}", r.axis2_deg);
        // A new cut is a new turn: its bins are first visits, turning the other way is not
        // a reversal, and the first axis's angle is the bin's.
        assert!(!r.first.flags.has(BinFlags::REVISITED), "{r:?}");
        assert!(!r.first.flags.has(BinFlags::REVERSED), "{r:?}");
        assert!((r.first.mean_deg - r.first.nominal_deg).abs() <= 0.5);
        assert!(r.more[0].echo_db.is_some());
    }
    // Cut 0 runs forward (bins 0, 1, …), cut 1 back (10, 9, …).
    let order: Vec<(u16, u16)> = two.iter().map(|r| (r.cut, r.first.index)).collect();
    let want: Vec<(u16, u16)> = (0..11)
        .map(|i| (0, i))
        .chain((0..11).rev().map(|i| (1, i)))
        .collect();
    assert_eq!(order, want);
}

/// The whole FFT-path chain in f64 with rustfft: band window, zero pad, inverse FFT, time
/// gate, forward FFT, renormalization by the gated response of an impulse at the gate
/// centre (as `tests/gate_reference.rs` writes it out).
fn reference_chain(cfg: &GateConfig, m: usize, raw: &[Complex64]) -> Vec<Complex64> {
    let k = cfg.grid.points();
    let mut band = vec![0f32; k];
    cfg.band_window.fill(&mut band);
    let dt = cfg.grid.time_step_s(m);
    let period = cfg.grid.alias_free_s();
    let gate: Vec<f64> = (0..m)
        .map(|i| {
            let mut d = i as f64 * dt - cfg.center_s;
            d -= period * (d / period + 0.5).floor();
            cfg.shape.at((d + cfg.span_s / 2.0) / cfg.span_s)
        })
        .collect();
    let mut planner = FftPlanner::<f64>::new();
    let inv = planner.plan_fft_inverse(m);
    let fwd = planner.plan_fft_forward(m);
    let run = |x: &[Complex64]| {
        let mut buf = vec![Complex64::new(0.0, 0.0); m];
        for n in 0..k {
            buf[n] = x[n] * band[n] as f64 / m as f64;
        }
        inv.process(&mut buf);
        for (v, g) in buf.iter_mut().zip(&gate) {
            *v *= g;
        }
        fwd.process(&mut buf);
        buf.truncate(k);
        buf
    };
    let y = run(raw);
    let u: Vec<Complex64> = (0..k)
        .map(|n| {
            Complex64::from_polar(
                1.0,
                -2.0 * PI * n as f64 * cfg.grid.step_hz() * cfg.center_s,
            )
        })
        .collect();
    let yu = run(&u);
    y.iter()
        .zip(&yu)
        .zip(&u)
        .map(|((y, yu), u)| y * u / yu)
        .collect()
}

#[test]
fn second_trace_matches_the_rustfft_chain() {
    // Oracle: rustfft 6 in f64, the chain written out (see `reference_chain`).
    let cfg = gate_cfg();
    for echo in [EchoMode::EveryBin, EchoMode::Never] {
        let (two, _) = run_two(echo);
        assert_eq!(two.len(), 22);
        for r in &two {
            let (_, cross) = traces(i64::from(r.first.index), i64::from(r.cut));
            let raw: Vec<Complex64> = cross
                .iter()
                .map(|z| Complex64::new(f64::from(z.re), f64::from(z.im)))
                .collect();
            let want = reference_chain(&cfg, 256, &raw);
            let scale = want.iter().map(|z| z.norm()).fold(0.0, f64::max);
            for (j, &i) in IDX.iter().enumerate() {
                let got = r.more[0].gated[j];
                let got = Complex64::new(f64::from(got.re), f64::from(got.im));
                let e = (got - want[i]).norm() / scale;
                assert!(
                    e < 2e-5,
                    "{echo:?} bin {} cut {}: {e:e}",
                    r.first.index,
                    r.cut
                );
                let raw_e = (f64::from(r.more[0].raw[j].re) - raw[i].re).abs();
                assert!(raw_e < 1e-6);
            }
            // The gate keeps the direct path (0.1 + 0.02·bin at 10.3 ns) and removes the
            // echo at 19 ns: |gated| is near the direct amplitude, |raw| is not.
            let direct = 0.1 + 0.02 * f64::from(r.first.index);
            let g = r.more[0].gated[1].norm() as f64;
            assert!((g - direct).abs() < 0.01 * direct + 2e-3, "{g} vs {direct}");
        }
    }
}

#[test]
fn a_closed_bin_of_cuts_goes_out_as_a_preview_record_and_back() {
    use sweepgate::wire::preview::{encode_frame, Decoder, PreviewRecord, MAX_FRAME};
    let (two, _) = run_two(EchoMode::EveryBin);
    let mut dec: Decoder<3, 1024> = Decoder::new();
    for (seq, r) in two.iter().enumerate() {
        let rec = PreviewRecord::Cut(r.to_record());
        let mut frame = [0u8; MAX_FRAME];
        let n = encode_frame(&rec, seq as u16, &mut frame).unwrap();
        let mut got = None;
        dec.feed(&frame[..n], |_, g| got = Some(g));
        let Some(PreviewRecord::Cut(c)) = got else {
            panic!("no cut record for {r:?}");
        };
        assert_eq!(
            (c.cut, c.bin, c.sweeps),
            (r.cut, r.first.index, r.first.sweeps)
        );
        assert_eq!(c.axis2_deg, r.axis2_deg);
        assert_eq!(c.traces.len(), 2);
        assert_eq!(&c.traces[0].gated[..], &r.first.gated[..]);
        assert_eq!(&c.traces[1].gated[..], &r.more[0].gated[..]);
        assert_eq!(&c.traces[1].raw[..], &r.more[0].raw[..]);
        assert_eq!(Some(c.traces[1].echo_db), r.more[0].echo_db);
        assert_eq!(c.indices.to_vec(), IDX.map(|i| i as u16).to_vec());
    }
    assert_eq!(dec.counters().good, 22);
}
