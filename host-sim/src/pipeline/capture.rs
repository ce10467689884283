//! Link captures on the host: turn a recording into the byte stream a board receives
//! ([`sweepgate::wire::capture`]), replay a capture through the core's board loop
//! ([`sweepgate::pump`]) as the board runs it, and compare two preview streams.
//!
//! The firmware in `examples/firmware-m4` replays the same capture on an emulated
//! Cortex-M4F with the same [`Pump::replay`]; comparing its preview records with
//! [`replay`]'s shows that the board computes what the host computes.

use crate::formats::recording::Record;
use crate::pipeline::setup::Setup;
use anyhow::{bail, Context};
use sweepgate::bins::BinFlags;
use sweepgate::fft::{Fft, FftSize};
use sweepgate::pump::Pump;
use sweepgate::scan::{EchoMode, ScanCounters};
use sweepgate::wire::block::{emit, ByteOrder, Format};
use sweepgate::wire::capture::{CaptureHeader, Entry, HEADER_LEN, MAX_ENTRY_LEN, MAX_PATTERN};
use sweepgate::wire::preview::{BinRecord, Decoder, ImpulseRecord, PreviewRecord as Preview};
use sweepgate::Complex32;

/// FFT size of the board build (`examples/firmware-m4`); the host replays a capture with
/// the smallest of its FFT sizes that holds the capture's points ([`FftSize::for_points`]),
/// which is this one for every capture the board can take (K ≤ 1024).
pub const BOARD_M: usize = 1024;
/// Pattern frequencies of the board build.
pub const F: usize = 8;
/// Bins of the board build.
pub const B: usize = 361;

/// Capture settings from the one set-up of the recording ([`crate::pipeline::setup`]): the
/// same gate, pattern frequencies and bin layout as `replay` and `process` use, so the board
/// gates a capture exactly as the host gates its recording.
pub fn header_for(setup: &Setup, echo: EchoMode) -> anyhow::Result<CaptureHeader> {
    let n = setup.indices.len();
    if n == 0 || n > MAX_PATTERN {
        bail!("a capture needs 1 to {MAX_PATTERN} pattern frequencies, the set-up has {n}");
    }
    if usize::from(setup.layout.count()) > B {
        bail!(
            "the board holds {B} bins; the set-up's layout has {}",
            setup.layout.count()
        );
    }
    let mut pattern = [0u16; MAX_PATTERN];
    for (p, &i) in pattern.iter_mut().zip(&setup.indices) {
        *p = u16::try_from(i).context("pattern frequency index")?;
    }
    Ok(CaptureHeader {
        gate: setup.gate,
        layout: setup.layout,
        pattern,
        pattern_count: n as u8,
        format: Format::Real32,
        order: ByteOrder::Normal,
        echo,
    })
}

/// Writes the capture of `records` (positions and sweeps in their order) with `header`.
/// Sweeps become IEEE 488.2 blocks exactly as an instrument would send them.
pub fn write(records: &[Record], header: &CaptureHeader) -> anyhow::Result<Vec<u8>> {
    let mut head_bytes = [0u8; HEADER_LEN];
    header.emit(&mut head_bytes);
    let mut out = head_bytes.to_vec();
    let mut head = [0u8; MAX_ENTRY_LEN];
    let mut block = Vec::new();
    for r in records {
        match r {
            Record::Position {
                t_us, angle_deg, ..
            } => {
                let n = Entry::Angle {
                    t_us: *t_us,
                    angle_deg: *angle_deg as f32,
                }
                .emit(&mut head);
                out.extend_from_slice(&head[..n]);
            }
            Record::Sweep {
                start_us,
                end_us,
                s21,
                ..
            } => {
                block.resize(s21.len() * header.format.sample_bytes() + 16, 0);
                let len = emit(header.format, header.order, s21, &mut block)
                    .context("encoding a sweep")?;
                let n = Entry::Sweep {
                    start_us: *start_us,
                    end_us: *end_us,
                    len: len as u32,
                }
                .emit(&mut head);
                out.extend_from_slice(&head[..n]);
                out.extend_from_slice(&block[..len]);
            }
            _ => {}
        }
    }
    let n = Entry::End.emit(&mut head);
    out.extend_from_slice(&head[..n]);
    Ok(out)
}

/// What a replay of a capture produced.
pub struct Replayed {
    /// Preview frames, as the board would send them.
    pub preview: Vec<u8>,
    /// Scan engine counters at the end.
    pub counters: ScanCounters,
    /// Sweeps the block decoder delivered.
    pub decoded: u32,
    /// Blocks the decoder rejected.
    pub rejected_blocks: u32,
    /// The FFT size the capture was gated with.
    pub fft_size: usize,
}

/// Replays a capture through the core's board loop ([`Pump::replay`]: the block decoder
/// fed [`sweepgate::pump::REPLAY_CHUNK`] bytes at a time, the scan engine, a preview frame
/// per closed bin) with `F` pattern frequencies and `B` bins as on the board, and the
/// smallest FFT size that holds the capture's points.
pub fn replay(capture: &[u8]) -> anyhow::Result<Replayed> {
    let head: &[u8; HEADER_LEN] = capture
        .get(..HEADER_LEN)
        .and_then(|h| h.try_into().ok())
        .context("capture shorter than its header")?;
    let points = CaptureHeader::parse(head)
        .context("capture header")?
        .gate
        .grid
        .points();
    let size = FftSize::for_points(points).with_context(|| {
        format!(
            "{points} points per sweep: more than the largest FFT ({})",
            FftSize::largest()
        )
    })?;
    sweepgate::with_fft_size!(size, M => replay_with::<M>(capture))
}

fn replay_with<const M: usize>(capture: &[u8]) -> anyhow::Result<Replayed>
where
    [Complex32; M]: Fft,
{
    let mut pump: Box<Pump<M, F, B>> = Box::new(Pump::unconfigured());
    let mut preview = Vec::new();
    let mut reader = capture;
    pump.replay(&mut reader, &mut preview, None, &mut ())
        .context("replaying the capture")?;
    Ok(Replayed {
        preview,
        counters: pump.scan().counters(),
        decoded: pump.counters().sweeps_decoded,
        rejected_blocks: pump.decoder().map_or(0, |d| d.counters().rejected()),
        fft_size: M,
    })
}

/// Largest difference of two angle offsets ([`FreqValue::angle_offset_deg`]) that
/// [`compare`] accepts, degrees.
///
/// [`FreqValue::angle_offset_deg`]: sweepgate::wire::preview::FreqValue::angle_offset_deg
pub const ANGLE_TOLERANCE_DEG: f32 = 1e-4;

/// How two preview streams compare.
#[derive(Debug)]
pub struct Comparison {
    /// Bin records in each stream.
    pub bins: (usize, usize),
    /// Records whose bin, sweep count and flags match and whose values agree.
    pub matched: usize,
    /// Largest relative difference of any raw or gated value.
    pub worst_relative: f64,
    /// Bin records with [`BinFlags::ECHO_IN_GATE`] in each stream (the flags themselves
    /// are compared record by record).
    pub echo_in_gate: (usize, usize),
    /// Largest |angle offset| of any value in the second stream, degrees (0 when every
    /// sweep was taken still).
    pub largest_offset_deg: f32,
    /// Impulse-response records in each stream.
    pub impulses: (usize, usize),
    /// Of those, pairs with the same bin and levels within one 0.5 dB step.
    pub impulses_matched: usize,
    /// One line per disagreement (at most 20).
    pub problems: Vec<String>,
}

/// Compares the impulse-response records of two streams pairwise: the same bins, delays
/// and levels within one step (the board's and the host's f32 arithmetic may round a
/// level to the neighbouring step).
fn compare_impulses(a: &[ImpulseRecord], b: &[ImpulseRecord], c: &mut Comparison) {
    c.impulses = (a.len(), b.len());
    if a.len() != b.len() {
        c.problems.push(format!(
            "{} impulse-response records against {}",
            a.len(),
            b.len()
        ));
    }
    for (x, y) in a.iter().zip(b) {
        let levels_ok = x.levels.len() == y.levels.len()
            && x.levels
                .iter()
                .zip(&y.levels)
                .all(|(p, q)| p.abs_diff(*q) <= 1);
        let ok = x.bin == y.bin
            && (x.first_ns - y.first_ns).abs() <= 1e-3
            && (x.step_ns - y.step_ns).abs() <= 1e-4
            && (x.peak_db - y.peak_db).abs() <= 0.01
            && levels_ok;
        if ok {
            c.impulses_matched += 1;
        } else {
            c.problems.push(format!(
                "impulse response of bin {} against bin {}",
                x.bin, y.bin
            ));
        }
    }
}

/// Decodes two preview streams and compares them record by record: the same bins, in the
/// same order, with the same sweep counts and flags, values within `tolerance` relative (to
/// the larger magnitude of the record's values) and angle offsets within
/// [`ANGLE_TOLERANCE_DEG`].
pub fn compare(a: &[u8], b: &[u8], tolerance: f64) -> Comparison {
    let decode = |bytes: &[u8]| {
        let mut d: Decoder<F, 512> = Decoder::new();
        let (mut out, mut imp) = (Vec::new(), Vec::new());
        d.feed(bytes, |_, r| match r {
            Preview::Bin(b) => out.push(b),
            Preview::Impulse(i) => imp.push(i),
            // Cut records have their own comparison (cut_capture.rs).
            Preview::Status(_) | Preview::Cut(_) => {}
        });
        (out, imp)
    };
    let ((ra, ia), (rb, ib)) = (decode(a), decode(b));
    let flagged = |r: &[BinRecord<F>]| {
        r.iter()
            .filter(|x| x.flags & BinFlags::ECHO_IN_GATE != 0)
            .count()
    };
    let mut c = Comparison {
        bins: (ra.len(), rb.len()),
        matched: 0,
        worst_relative: 0.0,
        echo_in_gate: (flagged(&ra), flagged(&rb)),
        largest_offset_deg: rb
            .iter()
            .flat_map(|x| x.values.iter().map(|v| v.angle_offset_deg.abs()))
            .fold(0.0, f32::max),
        impulses: (0, 0),
        impulses_matched: 0,
        problems: Vec::new(),
    };
    compare_impulses(&ia, &ib, &mut c);
    if ra.len() != rb.len() {
        c.problems
            .push(format!("{} bin records against {}", ra.len(), rb.len()));
    }
    for (x, y) in ra.iter().zip(&rb) {
        let mut ok = x.bin == y.bin && x.sweeps == y.sweeps && x.flags == y.flags;
        if !ok {
            c.problems.push(format!(
                "bin {} ({} sweeps, flags {:#x}) against bin {} ({} sweeps, flags {:#x})",
                x.bin, x.sweeps, x.flags, y.bin, y.sweeps, y.flags
            ));
        }
        let echo_ok =
            (x.echo_db.is_nan() && y.echo_db.is_nan()) || (x.echo_db - y.echo_db).abs() <= 0.01;
        if !echo_ok {
            ok = false;
            c.problems.push(format!(
                "bin {}: echo level {} dB against {} dB",
                x.bin, x.echo_db, y.echo_db
            ));
        }
        ok &= compare_values(x, y, tolerance, &mut c);
        if ok {
            c.matched += 1;
        }
    }
    c.problems.truncate(20);
    c
}

/// Compares the values of two bin records (angle offsets within [`ANGLE_TOLERANCE_DEG`],
/// raw and gated values within `tolerance` relative to the larger magnitude of `x`'s
/// values), noting the worst relative difference and each disagreement in `c`.
fn compare_values(x: &BinRecord<F>, y: &BinRecord<F>, tolerance: f64, c: &mut Comparison) -> bool {
    let mut ok = true;
    let scale = x
        .values
        .iter()
        .flat_map(|v| [v.raw.norm(), v.gated.norm()])
        .fold(0f32, f32::max)
        .max(f32::MIN_POSITIVE) as f64;
    for (u, v) in x.values.iter().zip(&y.values) {
        if (u.angle_offset_deg - v.angle_offset_deg).abs() > ANGLE_TOLERANCE_DEG
            || u.angle_offset_deg.is_nan() != v.angle_offset_deg.is_nan()
        {
            ok = false;
            c.problems.push(format!(
                "bin {}: angle offset {} deg against {} deg at grid index {}",
                x.bin, u.angle_offset_deg, v.angle_offset_deg, u.index
            ));
        }
        for (p, q) in [(u.raw, v.raw), (u.gated, v.gated)] {
            let rel = (p - q).norm() as f64 / scale;
            c.worst_relative = c.worst_relative.max(rel);
            if rel.is_nan() || rel > tolerance {
                ok = false;
                if c.problems.len() < 20 {
                    c.problems.push(format!(
                        "bin {}: {p} against {q} (relative {rel:.2e})",
                        x.bin
                    ));
                }
            }
        }
    }
    ok
}

#[cfg(test)]
mod tests {
    use super::*;
    use sweepgate::wire::preview::{encode_frame, FreqValue, MAX_FRAME};

    /// A preview stream of `n` bin records, every `flag_every`-th with the echo-in-gate flag.
    fn stream(n: u16, flag_every: u16) -> Vec<u8> {
        let mut out = Vec::new();
        for bin in 0..n {
            let mut values = heapless::Vec::new();
            let v = Complex32::new(1.0 + f32::from(bin), -0.5);
            values
                .push(FreqValue {
                    index: 3,
                    raw: v,
                    gated: v * 0.5,
                    angle_offset_deg: 0.01 * f32::from(bin),
                })
                .unwrap();
            let rec = Preview::Bin(BinRecord::<F> {
                bin,
                flags: if bin % flag_every == 0 {
                    BinFlags::ECHO_IN_GATE
                } else {
                    0
                },
                sweeps: 2,
                nominal_deg: f32::from(bin),
                mean_deg: f32::from(bin),
                max_smear_deg: 0.1,
                echo_db: -30.0,
                values,
            });
            let mut frame = [0u8; MAX_FRAME];
            let len = encode_frame(&rec, bin, &mut frame).unwrap();
            out.extend_from_slice(&frame[..len]);
        }
        out
    }

    #[test]
    fn flags_are_compared_and_counted() {
        // Equal streams: every record matches; 4 of 10 records (0, 3, 6, 9) are flagged.
        let a = stream(10, 3);
        let same = compare(&a, &a, 1e-5);
        assert_eq!(same.matched, 10, "{:?}", same.problems);
        assert_eq!(same.echo_in_gate, (4, 4));
        assert_eq!(same.largest_offset_deg, 0.01 * 9.0); // bin 9's offset
                                                         // The same values with the flag on every other record (0, 2, 4, 6, 8) instead: the
                                                         // records whose flags differ (2, 3, 4, 8, 9) fail.
        let b = stream(10, 2);
        let differ = compare(&a, &b, 1e-5);
        assert_eq!(differ.echo_in_gate, (4, 5));
        let mismatched = (0..10u16).filter(|i| (i % 3 == 0) != (i % 2 == 0)).count();
        assert_eq!(differ.matched, 10 - mismatched, "{:?}", differ.problems);
        assert!(mismatched > 0);
    }
}
