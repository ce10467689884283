//! Fuzz the scan engine with arbitrary event sequences: angle samples, encoder counts and
//! sweeps with arbitrary values and times, and finish. The first byte chooses the
//! configuration (encoder or angles, continuous or step-and-stop, revisit policy, echo
//! mode, full circle or sector); the rest is a list of operations. Checks that nothing
//! panics, that every input is counted (`binned + rejected = pushed` for sweeps,
//! `accepted + rejected = pushed` for samples), that each push yields at most 3 events,
//! and that every closed bin is inside the layout and counted once, and
//! that each call of finish (and only finish) reports `Finished`.
#![no_main]

use libfuzzer_sys::fuzz_target;
use sweepgate::bins::{BinLayout, RevisitPolicy};
use sweepgate::gate::GateConfig;
use sweepgate::grid::Grid;
use sweepgate::scan::{EchoMode, Event, Scan, ScanConfig, ScanMode};
use sweepgate::track::{CounterWidth, EncoderConfig, Sense};
use sweepgate::window::WindowKind;
use sweepgate::Complex32;

const K: usize = 33;

struct Bytes<'a>(&'a [u8]);

impl Bytes<'_> {
    fn take<const N: usize>(&mut self) -> Option<[u8; N]> {
        let (h, t) = self.0.split_first_chunk::<N>()?;
        self.0 = t;
        Some(*h)
    }
    fn u8(&mut self) -> Option<u8> {
        self.take::<1>().map(|b| b[0])
    }
}

fuzz_target!(|data: &[u8]| {
    let mut b = Bytes(data);
    let Some(cfg_byte) = b.u8() else { return };
    let Ok(grid) = Grid::from_start_stop(1e9, 2e9, K) else {
        return;
    };
    let gate = GateConfig {
        grid,
        band_window: WindowKind::Kaiser { beta: 6.0 },
        center_s: 5e-9,
        span_s: 4e-9,
        shape: WindowKind::Tukey { alpha: 0.5 },
        renormalize: cfg_byte & 0x80 != 0,
    };
    let layout = if cfg_byte & 1 == 0 {
        BinLayout::full_circle(0.0, 10.0)
    } else {
        BinLayout::sector(-40.0, 40.0, 10.0)
    };
    let Ok(layout) = layout else { return };
    let mut cfg = ScanConfig::new(layout);
    if cfg_byte & 2 != 0 {
        cfg.encoder = Some(EncoderConfig {
            counts_per_rev: 3600,
            zero_offset_counts: 100,
            sense: if cfg_byte & 4 == 0 {
                Sense::Positive
            } else {
                Sense::Negative
            },
            width: if cfg_byte & 8 == 0 {
                CounterWidth::Bits16
            } else {
                CounterWidth::Bits32
            },
        });
    }
    if cfg_byte & 16 != 0 {
        cfg.mode = ScanMode::StepAndStop {
            reject_moving: cfg_byte & 4 != 0,
        };
    }
    cfg.revisit = if cfg_byte & 32 == 0 {
        RevisitPolicy::Replace
    } else {
        RevisitPolicy::KeepFirst
    };
    cfg.echo = if cfg_byte & 64 == 0 {
        EchoMode::Never
    } else {
        EchoMode::EveryBin
    };
    let Ok(mut scan) = Scan::<64, 2, 36>::new(&gate, [3, 20], cfg) else {
        return;
    };
    let bins = layout.count();
    let mut closed = 0u32;
    let mut finished = 0u32;
    let mut finish_calls = 0u32;
    let mut sweep = [Complex32::new(1.0, 0.0); K + 1];
    let mut t_us: u64 = 0;
    let mut ops = 0u32;
    while let Some(op) = b.u8() {
        ops += 1;
        // Times: mostly small steps forward, sometimes arbitrary (backwards, huge).
        let ev = match op % 5 {
            0 => {
                let Some(dt) = b.take::<2>() else { break };
                let Some(a) = b.take::<4>() else { break };
                t_us = if op & 0x80 != 0 {
                    u64::from(u16::from_le_bytes(dt)) << (op & 0x3F)
                } else {
                    t_us.saturating_add(u64::from(u16::from_le_bytes(dt)))
                };
                let angle = if op & 0x40 != 0 {
                    f32::from_le_bytes(a)
                } else {
                    f32::from(i16::from_le_bytes([a[0], a[1]])) * 0.01
                };
                scan.push_angle(t_us, angle)
            }
            1 => {
                let Some(dt) = b.take::<2>() else { break };
                let Some(c) = b.take::<4>() else { break };
                t_us = t_us.saturating_add(u64::from(u16::from_le_bytes(dt)));
                scan.push_counts(t_us, u32::from_le_bytes(c))
            }
            2 | 3 => {
                let Some(d0) = b.take::<2>() else { break };
                let Some(d1) = b.take::<2>() else { break };
                let Some(v) = b.take::<4>() else { break };
                let start = t_us.saturating_sub(u64::from(u16::from_le_bytes(d0)));
                let end = if op & 0x80 != 0 {
                    start.wrapping_sub(u64::from(u16::from_le_bytes(d1)))
                } else {
                    start.saturating_add(u64::from(u16::from_le_bytes(d1)))
                };
                let value = if op & 0x40 != 0 {
                    f32::from_le_bytes(v)
                } else {
                    f32::from(i16::from_le_bytes([v[0], v[1]])) * 1e-3
                };
                let at = usize::from(v[2]) % K;
                sweep[at] = Complex32::new(value, -value);
                let n = match op & 0x30 {
                    0x10 => K - 1,
                    0x20 => K + 1,
                    _ => K,
                };
                scan.push_sweep(start, end, &sweep[..n])
            }
            _ => {
                finish_calls += 1;
                scan.finish()
            }
        };
        assert!(ev.len() <= 3);
        for e in &ev {
            match e {
                Event::BinClosed(r) => {
                    closed += 1;
                    assert!(r.index < bins, "closed bin {} of {bins}", r.index);
                    assert!(r.sweeps >= 1);
                }
                Event::Finished(_) => finished += 1,
                Event::Warning(_) => {}
            }
        }
        let c = scan.counters();
        assert_eq!(c.sweeps_binned + c.sweeps_rejected(), c.sweeps_pushed);
        assert_eq!(c.angles_accepted + c.angles_rejected(), c.angles_pushed);
        assert_eq!(c.track.accepted + c.track.rejected(), c.track.pushed);
        assert_eq!(c.bins_closed, closed);
    }
    let c = scan.counters();
    // Every call of finish reports Finished (again), and nothing else does.
    assert_eq!(finished, finish_calls);
    assert!(c.sweeps_pushed + c.angles_pushed + finish_calls <= ops);
    // A scan closes each bin at most once per visit, and a visit needs a sweep.
    assert!(c.bins_closed <= c.sweeps_binned);
});
