//! Property tests: arbitrary interleavings of angle samples, encoder counts, sweeps and
//! garbage never panic the engine, and every input is accounted for
//! (binned + rejected = pushed for sweeps, accepted + rejected = pushed for angle samples).
//! The invariants are the engine's own contract (see `sweepgate::scan`), no outside source.

use proptest::prelude::*;
use sweepgate::bins::{BinLayout, RevisitPolicy};
use sweepgate::gate::GateConfig;
use sweepgate::grid::Grid;
use sweepgate::scan::{EchoMode, Event, Scan, ScanConfig, ScanMode};
use sweepgate::track::{CounterWidth, EncoderConfig, Sense};
use sweepgate::window::WindowKind;
use sweepgate::Complex32;

const K: usize = 33;
type S = Scan<64, 2, 40, 8>;

fn gate_cfg() -> GateConfig {
    GateConfig {
        grid: Grid::from_start_stop(1e9, 2e9, K).unwrap(),
        band_window: WindowKind::Kaiser { beta: 4.0 },
        center_s: 5e-9,
        span_s: 6e-9,
        shape: WindowKind::Tukey { alpha: 0.5 },
        renormalize: true,
    }
}

#[derive(Debug, Clone)]
enum Op {
    /// Angle sample: time step (may be 0 or go backwards), angle (any f32 bits).
    Angle { dt: i64, angle: f32 },
    /// Plausible angle: time step and a small move.
    Smooth { dt: u32, step: f32 },
    /// Encoder count (any u32).
    Counts { dt: i64, raw: u32 },
    /// Sweep: start offset from now, duration (may be negative), length, garbage value.
    Sweep {
        back: i64,
        dur: i64,
        len: usize,
        value: f32,
    },
    /// Finish the scan.
    Finish,
}

fn any_f32() -> impl Strategy<Value = f32> {
    prop_oneof![
        4 => -400.0f32..400.0,
        1 => any::<u32>().prop_map(f32::from_bits),
        1 => Just(f32::NAN),
        1 => Just(f32::INFINITY),
        1 => Just(f32::MAX),
    ]
}

fn op() -> impl Strategy<Value = Op> {
    prop_oneof![
        3 => (-1_000i64..200_000, any_f32()).prop_map(|(dt, angle)| Op::Angle { dt, angle }),
        6 => (1u32..60_000, -3.0f32..3.0).prop_map(|(dt, step)| Op::Smooth { dt, step }),
        1 => (-1_000i64..200_000, any::<u32>()).prop_map(|(dt, raw)| Op::Counts { dt, raw }),
        6 => (
            -100_000i64..300_000,
            -10_000i64..100_000,
            prop_oneof![8 => Just(K), 1 => 0usize..70],
            any_f32()
        )
            .prop_map(|(back, dur, len, value)| Op::Sweep { back, dur, len, value }),
        1 => Just(Op::Finish),
    ]
}

fn config(variant: u8) -> ScanConfig {
    let layout = if variant & 1 == 0 {
        BinLayout::full_circle(0.0, 9.0).unwrap()
    } else {
        BinLayout::sector(-30.0, 30.0, 2.0).unwrap()
    };
    let mut c = ScanConfig::new(layout);
    c.revisit = match variant % 3 {
        0 => RevisitPolicy::KeepFirst,
        1 => RevisitPolicy::Replace,
        _ => RevisitPolicy::Combine,
    };
    c.mode = match (variant >> 1) % 3 {
        0 => ScanMode::Continuous,
        1 => ScanMode::StepAndStop {
            reject_moving: true,
        },
        _ => ScanMode::StepAndStop {
            reject_moving: false,
        },
    };
    c.echo = if variant & 4 == 0 {
        EchoMode::EveryBin
    } else {
        EchoMode::Never
    };
    c.leave_close_us = if variant & 8 == 0 { Some(50_000) } else { None };
    if variant & 16 != 0 {
        c.encoder = Some(EncoderConfig {
            counts_per_rev: 4096,
            zero_offset_counts: 100,
            sense: Sense::Negative,
            width: CounterWidth::Bits16,
        });
    }
    c
}

fn step(now: u64, dt: i64) -> u64 {
    if dt >= 0 {
        now.saturating_add(dt as u64)
    } else {
        now.saturating_sub(dt.unsigned_abs())
    }
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 256, ..ProptestConfig::default() })]

    #[test]
    fn never_panics_and_counts_every_input(variant in 0u8..32, ops in prop::collection::vec(op(), 0..120)) {
        let mut scan: S = Scan::new(&gate_cfg(), [3, 20], config(variant)).unwrap();
        let mut now: u64 = 1_000_000;
        let mut angle: f32 = 0.0;
        let mut count: u32 = 0;
        let mut buf = [Complex32::new(0.5, -0.25); 70];
        let mut closed = 0u32;
        for op in &ops {
            let ev = match *op {
                Op::Angle { dt, angle: a } => {
                    now = step(now, dt);
                    scan.push_angle(now, a)
                }
                Op::Smooth { dt, step: s } => {
                    now = now.saturating_add(u64::from(dt));
                    angle += s;
                    count = count.wrapping_add((s * 20.0) as i32 as u32) & 0xFFFF;
                    if variant & 16 != 0 { scan.push_counts(now, count) } else { scan.push_angle(now, angle) }
                }
                Op::Counts { dt, raw } => {
                    now = step(now, dt);
                    scan.push_counts(now, raw)
                }
                Op::Sweep { back, dur, len, value } => {
                    let start = step(now, -back);
                    let end = step(start, dur);
                    buf[len % 7] = Complex32::new(value, 0.0);
                    scan.push_sweep(start, end, &buf[..len])
                }
                Op::Finish => scan.finish(),
            };
            for e in &ev {
                if let Event::BinClosed(r) = e {
                    closed += 1;
                    prop_assert!(r.sweeps >= 1);
                    prop_assert!(r.index < 40);
                }
            }
            let c = scan.counters();
            prop_assert_eq!(c.sweeps_binned + c.sweeps_rejected(), c.sweeps_pushed);
            prop_assert_eq!(c.angles_accepted + c.angles_rejected(), c.angles_pushed);
            prop_assert_eq!(c.track.accepted + c.track.rejected(), c.track.pushed);
            prop_assert_eq!(c.bins_closed, closed);
            let _ = scan.status();
        }
        let ev = scan.finish();
        prop_assert!(matches!(ev.last(), Some(Event::Finished(_))));
        let c = scan.counters();
        prop_assert_eq!(c.sweeps_binned + c.sweeps_rejected(), c.sweeps_pushed);
        prop_assert_eq!(c.sweeps_pushed as usize, ops.iter().filter(|o| matches!(o, Op::Sweep { .. })).count());
    }
}
