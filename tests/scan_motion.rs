//! Sweeps at known times during known positioner motions land in the expected bins with the
//! expected mean angles and smears. Expectations are computed here from the motion law θ(t)
//! in f64 (analytic; no source needed beyond the definitions in `sweepgate::scan`: a sweep's
//! angle is θ at its mid-time, its smear |θ(end) − θ(start)|, one open bin that closes on
//! leaving or on reversal).

use sweepgate::bins::{BinFlags, BinLayout, RevisitPolicy};
use sweepgate::gate::GateConfig;
use sweepgate::grid::Grid;
use sweepgate::scan::{BinResult, EchoMode, Event, Scan, ScanConfig, ScanCounters};
use sweepgate::track::{CounterWidth, Direction, EncoderConfig, Sense};
use sweepgate::window::WindowKind;
use sweepgate::Complex32;

const K: usize = 101;
type S = Scan<128, 2, 360>;

fn gate_cfg() -> GateConfig {
    GateConfig {
        grid: Grid::from_start_stop(2e9, 18e9, K).unwrap(),
        band_window: WindowKind::Kaiser { beta: 6.0 },
        center_s: 3e-9,
        span_s: 2e-9,
        shape: WindowKind::Tukey { alpha: 0.5 },
        renormalize: true,
    }
}

fn scan_cfg(layout: BinLayout) -> ScanConfig {
    let mut c = ScanConfig::new(layout);
    c.leave_close_us = None;
    c.revisit = RevisitPolicy::Replace;
    c.echo = EchoMode::EveryBin;
    c.min_sweeps = 2;
    c
}

fn wrap360(x: f64) -> f64 {
    x.rem_euclid(360.0)
}
fn wrap180(x: f64) -> f64 {
    (x + 180.0).rem_euclid(360.0) - 180.0
}

/// The open bin while expectations are built: index, direction, and per sweep
/// (mid angle, smear, value).
type OpenExpect = (u16, Direction, Vec<(f64, f64, f64)>);

/// What the engine should report for one bin.
#[derive(Debug)]
struct Expect {
    index: u16,
    sweeps: u32,
    mean_deg: f64,
    max_smear_deg: f64,
    mean_value: f64,
    reversed: bool,
    revisited: bool,
}

/// Full-circle layout of 1° bins starting at 0°: bin of θ and its centre.
fn bin_of(theta: f64) -> (u16, f64) {
    let i = (wrap360(theta + 0.5)).floor() as u16 % 360;
    (i, f64::from(i))
}

/// Expected bins, by the rules documented in `sweepgate::scan` and `sweepgate::bins`.
fn expected(theta: &dyn Fn(f64) -> f64, sweeps: &[(u64, u64)], tol_deg: f64) -> Vec<Expect> {
    let th = |t_us: u64| theta(t_us as f64 * 1e-6);
    let mut out: Vec<Expect> = Vec::new();
    // (index, direction, [(mid angle, smear, value)])
    let mut open: Option<OpenExpect> = None;
    let mut first_dir = Direction::Still;
    let mut visited = [false; 360];
    let close = |o: OpenExpect,
                 out: &mut Vec<Expect>,
                 visited: &mut [bool; 360],
                 first_dir: Direction| {
        let (idx, dir, v) = o;
        let n = v.len() as f64;
        let nominal = f64::from(idx);
        out.push(Expect {
            index: idx,
            sweeps: v.len() as u32,
            mean_deg: nominal + v.iter().map(|s| wrap180(s.0 - nominal)).sum::<f64>() / n,
            max_smear_deg: v.iter().map(|s| s.1).fold(0.0, f64::max),
            mean_value: v.iter().map(|s| s.2).sum::<f64>() / n,
            reversed: dir != Direction::Still && first_dir != Direction::Still && dir != first_dir,
            revisited: visited[usize::from(idx)],
        });
        visited[usize::from(idx)] = true;
    };
    for (k, &(s, e)) in sweeps.iter().enumerate() {
        let mid = s + (e - s) / 2;
        let am = th(mid);
        let travel = th(e) - th(s);
        // Preconditions that keep the test away from f32 rounding at decision edges.
        let edge = (wrap360(am + 0.5) - wrap360(am + 0.5).floor())
            .min(1.0 - (wrap360(am + 0.5) - wrap360(am + 0.5).floor()));
        assert!(
            edge > 2e-4,
            "sweep {k} mid-angle {am} too close to a bin edge"
        );
        assert!(
            (travel.abs() - tol_deg).abs() > 2e-4,
            "sweep {k} travel {travel} too close to the direction tolerance"
        );
        let dir = if travel > tol_deg {
            Direction::Forward
        } else if travel < -tol_deg {
            Direction::Reverse
        } else {
            Direction::Still
        };
        let (idx, _) = bin_of(am);
        if let Some(o) = &open {
            let reverse = dir != Direction::Still && o.1 != Direction::Still && dir != o.1;
            if o.0 != idx || reverse {
                close(open.take().unwrap(), &mut out, &mut visited, first_dir);
            }
        }
        if first_dir == Direction::Still {
            first_dir = dir;
        }
        let o = open.get_or_insert((idx, Direction::Still, Vec::new()));
        if o.1 == Direction::Still {
            o.1 = dir;
        }
        o.2.push((am, travel.abs(), k as f64));
    }
    if let Some(o) = open.take() {
        close(o, &mut out, &mut visited, first_dir);
    }
    out
}

/// Runs a scan: angle samples every `sample_us` from 0 to `end_us` (fed by `feed`), each
/// sweep pushed once the first sample at or after its end time is in. Sweep k carries the
/// constant value k at every point.
fn run(
    scan: &mut S,
    sample_us: u64,
    end_us: u64,
    sweeps: &[(u64, u64)],
    mut feed: impl FnMut(&mut S, u64) -> sweepgate::scan::Events<2>,
) -> (Vec<BinResult<2>>, ScanCounters) {
    let mut results = Vec::new();
    let take = |ev: sweepgate::scan::Events<2>, results: &mut Vec<BinResult<2>>| {
        for e in ev {
            match e {
                Event::BinClosed(r) => results.push(r),
                Event::Warning(w) => panic!("unexpected warning {w:?}"),
                Event::Finished(_) => {}
            }
        }
    };
    let mut next = 0;
    let mut t = 0;
    while t <= end_us {
        let ev = feed(scan, t);
        take(ev, &mut results);
        while next < sweeps.len() && sweeps[next].1 <= t {
            let (s, e) = sweeps[next];
            let pts = [Complex32::new(next as f32, 0.0); K];
            let ev = scan.push_sweep(s, e, &pts);
            take(ev, &mut results);
            next += 1;
        }
        t += sample_us;
    }
    assert_eq!(next, sweeps.len(), "every sweep pushed");
    let ev = scan.finish();
    take(ev, &mut results);
    (results, scan.counters())
}

fn check(results: &[BinResult<2>], want: &[Expect], scan: &S, smear_step_half: f64) {
    // Gated value of a flat unit spectrum at the pattern frequencies: gating is linear, so a
    // bin of flat sweeps with mean value v must gate to v times this.
    let ones = [Complex32::new(1.0, 0.0); 128];
    let mut unit = [Complex32::new(0.0, 0.0); 2];
    let kernels = scan.gate().kernels([10, 50]).unwrap();
    scan.gate().apply_kernels(&kernels, &ones, &mut unit);
    assert_eq!(
        results.len(),
        want.len(),
        "bin count\n{results:#?}\n{want:#?}"
    );
    for (r, w) in results.iter().zip(want) {
        assert_eq!(r.index, w.index, "{r:?} {w:?}");
        assert_eq!(r.sweeps, w.sweeps, "{r:?} {w:?}");
        assert!(
            (f64::from(r.mean_deg) - w.mean_deg).abs() < 1e-3,
            "{r:?} {w:?}"
        );
        assert!(
            (f64::from(r.max_smear_deg) - w.max_smear_deg).abs() < 1e-3,
            "{r:?} {w:?}"
        );
        assert!((f64::from(r.raw[0].re) - w.mean_value).abs() < 1e-3 * w.mean_value.max(1.0));
        for (&u, &got) in unit.iter().zip(&r.gated) {
            let g = u * w.mean_value as f32;
            assert!((got - g).norm() <= 1e-4 * g.norm().max(1.0), "{r:?}");
        }
        assert!(r.echo_db.is_some());
        assert_eq!(r.flags.has(BinFlags::REVERSED), w.reversed, "{r:?} {w:?}");
        assert_eq!(r.flags.has(BinFlags::REVISITED), w.revisited, "{r:?} {w:?}");
        assert_eq!(r.flags.has(BinFlags::SPARSE), w.sweeps < 2);
        assert_eq!(
            r.flags.has(BinFlags::SMEARED),
            w.max_smear_deg > smear_step_half,
            "{r:?}"
        );
        assert!(!r.flags.has(BinFlags::EXTRAPOLATED));
    }
}

fn schedule(first_us: u64, period_us: u64, dur_us: u64, until_us: u64) -> Vec<(u64, u64)> {
    let mut v = Vec::new();
    let mut s = first_us;
    while s + dur_us <= until_us {
        v.push((s, s + dur_us));
        s += period_us;
    }
    v
}

fn angle_feed(
    theta: impl Fn(f64) -> f64,
    wrapped: bool,
) -> impl FnMut(&mut S, u64) -> sweepgate::scan::Events<2> {
    move |scan: &mut S, t: u64| {
        let a = theta(t as f64 * 1e-6);
        let a = if wrapped { wrap360(a) } else { a };
        scan.push_angle(t, a as f32)
    }
}

#[test]
fn constant_speed() {
    // θ = 10.2° + 5 deg/s · t; 30 ms sweeps every 70 ms.
    let theta = |t: f64| 10.2 + 5.0 * t;
    let sweeps = schedule(3_000, 70_000, 30_000, 4_000_000);
    let mut scan: S = Scan::new(
        &gate_cfg(),
        [10, 50],
        scan_cfg(BinLayout::full_circle(0.0, 1.0).unwrap()),
    )
    .unwrap();
    let (res, c) = run(
        &mut scan,
        10_000,
        4_100_000,
        &sweeps,
        angle_feed(theta, false),
    );
    let want = expected(&theta, &sweeps, 0.02);
    check(&res, &want, &scan, 0.5);
    assert_eq!(c.sweeps_binned, sweeps.len() as u32);
    assert_eq!(c.sweeps_binned + c.sweeps_rejected(), c.sweeps_pushed);
    // Smear 5 deg/s × 30 ms = 0.15° (analytic).
    assert!(res.iter().all(|r| (r.max_smear_deg - 0.15).abs() < 1e-3));
}

#[test]
fn accelerating() {
    // θ = 0.3° + 2 deg/s² · (t + 0.5 s)²: the bins fill with fewer sweeps as speed grows, and the
    // smear grows as 4(t + 0.5 s) · 40 ms.
    let theta = |t: f64| 0.3 + 2.0 * (t + 0.5) * (t + 0.5);
    let sweeps = schedule(7_000, 50_000, 40_000, 6_000_000);
    let mut scan: S = Scan::new(
        &gate_cfg(),
        [10, 50],
        scan_cfg(BinLayout::full_circle(0.0, 1.0).unwrap()),
    )
    .unwrap();
    let (res, c) = run(
        &mut scan,
        10_000,
        6_100_000,
        &sweeps,
        angle_feed(theta, false),
    );
    let want = expected(&theta, &sweeps, 0.02);
    check(&res, &want, &scan, 0.5);
    assert_eq!(c.sweeps_binned, sweeps.len() as u32);
    // Late bins are smeared over half a bin: at t ≈ 5.9 s, 4·6.4·0.04 ≈ 1.02°.
    assert!(res.last().unwrap().flags.has(BinFlags::SMEARED));
    assert!(res.len() > 50);
}

#[test]
fn reversing() {
    // θ = 20° + 6° · sin(2π t / 8 s): out to 26°, back through 20° to 14°, and forward again.
    let theta = |t: f64| 20.0 + 6.0 * (2.0 * core::f64::consts::PI * t / 8.0).sin();
    let sweeps = schedule(11_000, 60_000, 20_000, 9_000_000);
    let mut scan: S = Scan::new(
        &gate_cfg(),
        [10, 50],
        scan_cfg(BinLayout::full_circle(0.0, 1.0).unwrap()),
    )
    .unwrap();
    let (res, c) = run(
        &mut scan,
        10_000,
        9_100_000,
        &sweeps,
        angle_feed(theta, false),
    );
    let want = expected(&theta, &sweeps, 0.02);
    check(&res, &want, &scan, 0.5);
    assert_eq!(c.sweeps_binned, sweeps.len() as u32);
    assert!(res.iter().any(|r| r.flags.has(BinFlags::REVERSED)));
    assert!(res.iter().any(|r| r.flags.has(BinFlags::REVISITED)));
}

#[test]
fn wrapping_359_to_0() {
    // Readings wrapped to 0–360°: θ = 357.3° + 3 deg/s · t, crossing 360° at t = 0.9 s.
    let theta = |t: f64| 357.3 + 3.0 * t;
    let sweeps = schedule(1_000, 40_000, 25_000, 3_000_000);
    let mut scan: S = Scan::new(
        &gate_cfg(),
        [10, 50],
        scan_cfg(BinLayout::full_circle(0.0, 1.0).unwrap()),
    )
    .unwrap();
    let (res, c) = run(
        &mut scan,
        10_000,
        3_100_000,
        &sweeps,
        angle_feed(theta, true),
    );
    let want = expected(&theta, &sweeps, 0.02);
    check(&res, &want, &scan, 0.5);
    assert_eq!(c.sweeps_binned, sweeps.len() as u32);
    let idx: Vec<u16> = res.iter().map(|r| r.index).collect();
    assert_eq!(&idx[..6], &[357, 358, 359, 0, 1, 2]);
    // Bin 0 is filled from 359.5° up to 0.5°: its mean sits near 0°, not near 180°.
    let b0 = res.iter().find(|r| r.index == 0).unwrap();
    assert!(b0.mean_deg.abs() < 0.5);
}

#[test]
fn encoder_u16_wrap() {
    // 14 400 counts per turn (40 per degree), zero at count 65 336: the 16-bit counter wraps
    // to 0 at θ = 5°. θ = 0.7° + 2 deg/s · t is exactly 80 counts/s, so samples every 25 ms
    // step 2 counts and the encoder angle is exact at every sample.
    let enc = EncoderConfig {
        counts_per_rev: 14_400,
        zero_offset_counts: 65_336,
        sense: Sense::Positive,
        width: CounterWidth::Bits16,
    };
    let mut cfg = scan_cfg(BinLayout::full_circle(0.0, 1.0).unwrap());
    cfg.encoder = Some(enc);
    let theta = |t: f64| 0.7 + 2.0 * t;
    let counts = |t_us: u64| -> u32 {
        // 0.7° = 28 counts; 80 counts/s = 2 counts per 25 ms.
        let c = 65_336u64 + 28 + t_us / 12_500;
        (c % 65_536) as u32
    };
    let sweeps = schedule(2_000, 90_000, 30_000, 5_000_000);
    let mut scan: S = Scan::new(&gate_cfg(), [10, 50], cfg).unwrap();
    let (res, c) = run(&mut scan, 25_000, 5_100_000, &sweeps, |s: &mut S, t| {
        assert_eq!(t % 12_500, 0);
        s.push_counts(t, counts(t))
    });
    let want = expected(&theta, &sweeps, 0.02);
    check(&res, &want, &scan, 0.5);
    assert_eq!(c.sweeps_binned, sweeps.len() as u32);
    assert_eq!(c.track.accepted, c.angles_pushed);
    assert_eq!(res.first().unwrap().index, 1);
    assert_eq!(res.last().unwrap().index, 11); // θ(4.9 s) = 10.5°: bin 11
}

#[test]
fn positioner_leaving_closes_the_bin_without_a_sweep() {
    // Two sweeps at 5°, then the table moves on and no more sweeps come: with a 100 ms
    // leave delay the bin closes from angle samples alone.
    let mut cfg = scan_cfg(BinLayout::full_circle(0.0, 1.0).unwrap());
    cfg.leave_close_us = Some(100_000);
    let mut scan: S = Scan::new(&gate_cfg(), [10, 50], cfg).unwrap();
    let pts = [Complex32::new(1.0, 0.0); K];
    for t in 0..5u64 {
        scan.push_angle(t * 10_000, 5.0);
    }
    assert!(scan.push_sweep(0, 20_000, &pts).is_empty());
    assert!(scan.push_sweep(20_000, 40_000, &pts).is_empty());
    let mut closed_at = None;
    for t in 5..40u64 {
        // 10 deg/s from t = 50 ms: leaves bin 5 (at 5.5°) at t = 100 ms.
        let a = 5.0 + 10.0 * (t as f32 * 0.01 - 0.05);
        for e in scan.push_angle(t * 10_000, a) {
            if let Event::BinClosed(r) = e {
                assert_eq!((r.index, r.sweeps), (5, 2));
                closed_at.get_or_insert(t * 10_000);
            }
        }
    }
    // Last inside at the sweep end (40 ms) or the 100 ms sample (5.5° is bin 6): the first
    // sample more than 100 ms after 90 ms (the last inside sample) is at 200 ms.
    assert_eq!(closed_at, Some(200_000));
}

#[test]
fn step_and_stop_flags_moving_sweeps() {
    let mut cfg = scan_cfg(BinLayout::full_circle(0.0, 1.0).unwrap());
    cfg.mode = sweepgate::scan::ScanMode::StepAndStop {
        reject_moving: false,
    };
    let mut scan: S = Scan::new(&gate_cfg(), [10, 50], cfg).unwrap();
    let pts = [Complex32::new(1.0, 0.0); K];
    // Parked at 3° for 400 ms (settle time 200 ms): settled from t = 200 ms.
    for t in 0..=40u64 {
        scan.push_angle(t * 10_000, 3.0);
    }
    assert!(scan.is_settled());
    assert!(scan.push_sweep(300_000, 350_000, &pts).is_empty());
    // Steps to 4° over 100 ms; a sweep during the step is flagged.
    for t in 41..=50u64 {
        scan.push_angle(t * 10_000, 3.0 + (t - 40) as f32 * 0.1);
    }
    assert!(!scan.is_settled());
    let ev = scan.push_sweep(470_000, 500_000, &pts);
    let closed: Vec<_> = ev
        .iter()
        .filter_map(|e| match e {
            Event::BinClosed(r) => Some(*r),
            _ => None,
        })
        .collect();
    assert_eq!(closed.len(), 1);
    assert_eq!(closed[0].index, 3);
    assert!(!closed[0].flags.has(BinFlags::MOVING));
    assert!(ev.contains(&Event::Warning(sweepgate::scan::Warning::TakenWhileMoving)));
    let fin = scan.finish();
    let Some(Event::BinClosed(r)) = fin.first() else {
        panic!("{fin:?}")
    };
    assert_eq!(r.index, 4);
    assert!(r.flags.has(BinFlags::MOVING));
    assert_eq!(scan.counters().sweeps_moving, 1);
}
