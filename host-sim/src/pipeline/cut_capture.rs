//! Captures of cuts for the emulated board ([`sweepgate::wire::cut_capture`]): a two-trace,
//! two-cut scan made from closed forms, its replay through the core's board loop of cuts
//! ([`sweepgate::cut_pump::CutPump`], as the firmware runs it) and the comparison of two
//! preview streams of cut-bin records.
//!
//! The scan: 8–12 GHz in 201 points (REAL,32 blocks), bins of 2° from −20° to 20°, a
//! co-polar and a cross-polar trace per sweep, each a direct path at 10 ns (amplitudes from
//! simple beam shapes of θ and φ) and two echoes at 14.5 and 16 ns. Cut 0 turns forward at
//! 10°/s with the second axis at 0°; the second axis then moves to 90° at 30°/s; cut 1 turns
//! back. One 10 ms sweep every 40 ms, a sample of both axes every 20 ms.

use anyhow::Context;
use num_complex::Complex64;
use sweepgate::bins::{BinFlags, BinLayout};
use sweepgate::cut_pump::{CutPump, CutPumpCounters};
use sweepgate::cuts::{CutCounters, CutLayout};
use sweepgate::gate::GateConfig;
use sweepgate::grid::Grid;
use sweepgate::scan::EchoMode;
use sweepgate::window::WindowKind;
use sweepgate::wire::block::{emit, ByteOrder, Format};
use sweepgate::wire::capture::{CaptureHeader, MAX_PATTERN};
use sweepgate::wire::cut_capture::{CutCaptureHeader, CutEntry, CUT_HEADER_LEN, CUT_MAX_ENTRY_LEN};
use sweepgate::wire::preview::{CutRecord, Decoder, PreviewRecord};
use sweepgate::Complex32;

/// Pattern frequencies a cut record carries on the board (the capture names 3).
pub const F: usize = 8;
/// The board loop of cuts the firmware runs: M = 256, 8 pattern frequencies, 64 bins, a
/// history of 64 samples per axis, one further trace.
pub type BoardCutPump = CutPump<256, F, 64, 64, 1>;

const POINTS: usize = 201;

/// The capture's header: gate at 10 ns, 3 ns wide; two cuts at 0° and 90°.
pub fn model_header(echo: EchoMode) -> anyhow::Result<CutCaptureHeader> {
    let grid = Grid::from_start_stop(8e9, 12e9, POINTS).context("grid")?;
    let mut pattern = [0u16; MAX_PATTERN];
    pattern[..3].copy_from_slice(&[50, 100, 150]);
    Ok(CutCaptureHeader {
        cuts: CutLayout::new(0.0, 90.0, 2, 1.0).context("cuts")?,
        axis2_max_speed_deg_s: 100.0,
        traces: 2,
        link: CaptureHeader {
            gate: GateConfig {
                grid,
                band_window: WindowKind::Kaiser { beta: 6.0 },
                center_s: 10e-9,
                span_s: 3e-9,
                shape: WindowKind::Tukey { alpha: 0.3 },
                renormalize: true,
            },
            layout: BinLayout::sector(-20.0, 20.0, 2.0).context("bins")?,
            pattern,
            pattern_count: 3,
            format: Format::Real32,
            order: ByteOrder::Swapped,
            echo,
        },
    })
}

/// Both axes at `t_s`: cut 0 forward (0…4.6 s), the second axis to 90° (…7.6 s), cut 1 back.
fn axes(t_s: f64) -> (f64, f64) {
    if t_s <= 4.6 {
        (-23.0 + 10.0 * t_s, 0.0)
    } else if t_s <= 7.6 {
        (23.0, 30.0 * (t_s - 4.6))
    } else {
        (23.0 - 10.0 * (t_s - 7.6), 90.0)
    }
}

/// Co- and cross-polar values at grid point `n` with both axes at (θ, φ) degrees.
fn traces(theta: f64, phi: f64, n: usize) -> (Complex32, Complex32) {
    let f = 8e9 + n as f64 * 20e6;
    let path = |a: f64, tau: f64| Complex64::from_polar(a, -2.0 * std::f64::consts::PI * f * tau);
    let (t, p) = (theta.to_radians(), phi.to_radians());
    let co = (0.5 + 0.5 * t.cos()).powi(2) * (1.0 - 0.2 * p.sin().powi(2));
    let cross = 0.02 + 0.06 * ((2.0 * p).sin() * t.sin()).abs() + 0.03 * t.sin().abs();
    let a = path(co, 10e-9) + path(0.1, 14.5e-9) + path(0.3, 16e-9);
    let b = path(cross, 10e-9) + path(0.05, 14.5e-9) + path(0.04, 16e-9);
    let c = |z: Complex64| Complex32::new(z.re as f32, z.im as f32);
    (c(a), c(b))
}

fn put_entry(out: &mut Vec<u8>, e: CutEntry) {
    let mut head = [0u8; CUT_MAX_ENTRY_LEN];
    let n = e.emit(&mut head);
    out.extend_from_slice(&head[..n]);
}

/// The whole capture, with `echo` as the engine's echo mode.
pub fn model_capture(echo: EchoMode) -> anyhow::Result<Vec<u8>> {
    let h = model_header(echo)?;
    let mut out = vec![0u8; CUT_HEADER_LEN];
    let mut head = [0u8; CUT_HEADER_LEN];
    h.emit(&mut head);
    out.copy_from_slice(&head);
    let mut block = vec![0u8; 16 + POINTS * 8];
    let mut next_sweep_us = 5_000u64;
    for i in 0..=600u64 {
        let t_us = i * 20_000;
        let (a1, a2) = axes(t_us as f64 * 1e-6);
        put_entry(
            &mut out,
            CutEntry::Axes {
                t_us,
                axis1_deg: a1 as f32,
                axis2_deg: a2 as f32,
            },
        );
        while next_sweep_us + 10_000 <= t_us {
            let (start_us, end_us) = (next_sweep_us, next_sweep_us + 10_000);
            let (th, ph) = axes((start_us + 5_000) as f64 * 1e-6);
            let (co, cross): (Vec<_>, Vec<_>) = (0..POINTS).map(|n| traces(th, ph, n)).unzip();
            for (j, values) in [co, cross].iter().enumerate() {
                let len = emit(h.link.format, h.link.order, values, &mut block)
                    .context("encoding a sweep as an IEEE 488.2 block")?;
                let e = if j == 0 {
                    CutEntry::Sweep {
                        start_us,
                        end_us,
                        len: len as u32,
                    }
                } else {
                    CutEntry::Trace { len: len as u32 }
                };
                put_entry(&mut out, e);
                out.extend_from_slice(&block[..len]);
            }
            next_sweep_us += 40_000;
        }
    }
    put_entry(&mut out, CutEntry::End);
    Ok(out)
}

/// The host's replay of a capture of cuts.
#[derive(Debug, Clone)]
pub struct CutReplayed {
    /// The preview frames.
    pub preview: Vec<u8>,
    /// The engine's counters.
    pub counters: CutCounters,
    /// The loop's counters.
    pub pump: CutPumpCounters,
}

/// Replays a capture of cuts through [`BoardCutPump`], as the firmware does.
pub fn replay(capture: &[u8]) -> anyhow::Result<CutReplayed> {
    let mut pump = Box::new(BoardCutPump::unconfigured());
    let mut preview = Vec::new();
    let mut input = capture;
    pump.replay(&mut input, &mut preview)
        .map_err(|e| anyhow::anyhow!("replaying the capture of cuts: {e:?}"))?;
    Ok(CutReplayed {
        preview,
        counters: pump.scan().counters(),
        pump: pump.counters(),
    })
}

/// Two preview streams of cut-bin records compared.
#[derive(Debug, Clone, Default)]
pub struct CutComparison {
    /// Cut-bin records in each stream.
    pub records: (usize, usize),
    /// Records that agree.
    pub matched: usize,
    /// Cuts seen in the second stream.
    pub cuts: Vec<u16>,
    /// Largest value difference relative to the largest value of its record's trace.
    pub worst_relative: f64,
    /// What differed (the first 20).
    pub problems: Vec<String>,
}

fn cut_records(bytes: &[u8]) -> Vec<CutRecord<F>> {
    let mut d: Decoder<F, 1024> = Decoder::new();
    let mut out = Vec::new();
    d.feed(bytes, |_, r| {
        if let PreviewRecord::Cut(c) = r {
            out.push(c)
        }
    });
    out
}

/// Whether two records agree: cut, bin, sweeps and flags equal, every value within
/// `tolerance` of its trace's largest, echo levels within 0.01 dB.
fn same(x: &CutRecord<F>, y: &CutRecord<F>, tolerance: f64, c: &mut CutComparison) -> bool {
    let head = (x.cut, x.bin, x.sweeps, x.flags) == (y.cut, y.bin, y.sweeps, y.flags)
        && x.traces.len() == y.traces.len();
    let mut ok = head;
    for (a, b) in x.traces.iter().zip(&y.traces) {
        let scale = b
            .gated
            .iter()
            .chain(&b.raw)
            .map(|z| z.norm())
            .fold(1e-30, f32::max);
        let pairs = a.gated.iter().zip(&b.gated).chain(a.raw.iter().zip(&b.raw));
        for (p, q) in pairs {
            let rel = f64::from((p - q).norm() / scale);
            c.worst_relative = c.worst_relative.max(rel);
            ok &= rel <= tolerance;
        }
        ok &= (a.echo_db.is_nan() && b.echo_db.is_nan()) || (a.echo_db - b.echo_db).abs() <= 0.01;
    }
    if !ok {
        c.problems.push(format!(
            "cut {} bin {} ({} sweeps, flags {}) against cut {} bin {} ({} sweeps, flags {})",
            x.cut,
            x.bin,
            x.sweeps,
            BinFlags(x.flags).0,
            y.cut,
            y.bin,
            y.sweeps,
            BinFlags(y.flags).0
        ));
    }
    ok
}

/// Compares the cut-bin records of two preview streams.
pub fn compare(a: &[u8], b: &[u8], tolerance: f64) -> CutComparison {
    let (ra, rb) = (cut_records(a), cut_records(b));
    let mut c = CutComparison {
        records: (ra.len(), rb.len()),
        ..CutComparison::default()
    };
    if ra.len() != rb.len() {
        c.problems
            .push(format!("{} cut-bin records against {}", ra.len(), rb.len()));
    }
    for (x, y) in ra.iter().zip(&rb) {
        if same(x, y, tolerance, &mut c) {
            c.matched += 1;
        }
    }
    c.cuts = rb.iter().map(|r| r.cut).collect();
    c.cuts.dedup();
    c.problems.truncate(20);
    c
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_model_capture_replays_into_two_cuts_of_two_traces() {
        let cap = model_capture(EchoMode::EveryBin).unwrap();
        let r = replay(&cap).unwrap();
        assert_eq!(r.pump.traces_out_of_turn, 0);
        assert_eq!(r.counters.cuts_started, 2);
        let recs = cut_records(&r.preview);
        // 21 bins per cut.
        assert_eq!(recs.iter().filter(|x| x.cut == 0).count(), 21);
        assert_eq!(recs.iter().filter(|x| x.cut == 1).count(), 21);
        assert!(recs
            .iter()
            .all(|x| x.traces.len() == 2 && x.indices.len() == 8));
        let c = compare(&r.preview, &r.preview, 0.0);
        assert_eq!((c.matched, c.cuts.clone()), (42, vec![0, 1]));
        // A changed value is found.
        let mut other = recs.clone();
        other[5].traces[1].gated[0] *= 1.01;
        let mut bytes = Vec::new();
        for (i, x) in other.iter().enumerate() {
            let _ = sweepgate::wire::preview::write_frame(
                &mut bytes,
                &PreviewRecord::Cut(x.clone()),
                i as u16,
            );
        }
        let c = compare(&bytes, &r.preview, 1e-5);
        assert_eq!(c.matched, 41);
    }

    #[test]
    fn a_capture_of_another_trace_count_or_cut_short_is_refused_by_place() {
        let mut cap = model_capture(EchoMode::Never).unwrap();
        // Three traces per sweep in the header: the board loop takes two.
        let mut three = cap.clone();
        three[26] = 3;
        let e = format!("{:#}", replay(&three).unwrap_err());
        assert!(e.contains("TraceCount"), "{e}");
        // Cut short inside an answer: the entry is named by its byte.
        cap.truncate(CUT_HEADER_LEN + 5_000);
        let e = format!("{:#}", replay(&cap).unwrap_err());
        assert!(e.contains("Truncated") && e.contains("at_byte"), "{e}");
        // A bad cut layout (step 0 with two cuts) is refused in the header.
        let mut bad = model_capture(EchoMode::Never).unwrap();
        bad[12..16].copy_from_slice(&0f32.to_le_bytes());
        let e = format!("{:#}", replay(&bad).unwrap_err());
        assert!(e.contains("StepNotPositive"), "{e}");
    }
}
