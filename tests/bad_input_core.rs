//! The bad-input matrix of the core: for each boundary (IEEE 488.2 block stream, ASCII
//! stream, positioner samples and sweeps into the tracker and the scan engine, preview
//! stream, link capture) a table of malformed inputs, each with the typed error or counter
//! it must produce. Every case runs under `catch_unwind`, so a panic fails the case (and is
//! named) instead of ending the table. The expected errors are this crate's own contract
//! (the module docs of each decoder); the IEEE 488.2 block syntax is §8.7.9 of the
//! standard, the SCPI INFinity/NAN codes (9.9E37, 9.91E37) SCPI-1999 Vol. 1 §7.2.1.4.

use std::panic::{catch_unwind, AssertUnwindSafe};

use sweepgate::bins::BinLayout;
use sweepgate::error::{
    AsciiError, BlockError, CaptureError, GridError, SampleReject, SweepReject,
};
use sweepgate::gate::GateConfig;
use sweepgate::grid::Grid;
use sweepgate::scan::{Event, Scan, ScanConfig, Warning};
use sweepgate::track::{CounterWidth, EncoderConfig, Sense, TrackConfig, Tracker};
use sweepgate::window::WindowKind;
use sweepgate::wire::ascii::{AsciiConfig, AsciiDecoder};
use sweepgate::wire::block::{
    BlockConfig, BlockDecoder, ByteOrder, DecodeEvent as WireEvent, Format,
};
use sweepgate::wire::capture::{CaptureHeader, Entry, HEADER_LEN, MAX_PATTERN};
use sweepgate::wire::preview::{crc32, encode_frame, Decoder, PreviewRecord, MAX_FRAME};
use sweepgate::Complex32;

type Case = (&'static str, Box<dyn Fn() -> Result<(), String>>);

fn check(cond: bool, what: impl FnOnce() -> String) -> Result<(), String> {
    if cond {
        Ok(())
    } else {
        Err(what())
    }
}

/// Runs a table; returns how many cases it tried. Panics (after the whole table) listing
/// every case that failed or panicked.
fn run(boundary: &str, table: Vec<Case>) -> usize {
    let mut failed = Vec::new();
    let n = table.len();
    let mut tried = 0;
    for (name, f) in &table {
        tried += 1;
        match catch_unwind(AssertUnwindSafe(f)) {
            Ok(Ok(())) => {}
            Ok(Err(e)) => failed.push(format!("{boundary} / {name}: {e}")),
            Err(_) => failed.push(format!("{boundary} / {name}: PANICKED")),
        }
    }
    assert_eq!(tried, n);
    eprintln!("bad-input matrix (core) {boundary}: {tried} cases");
    println!("bad-input matrix (core) {boundary}: {tried} cases");
    assert!(failed.is_empty(), "{}", failed.join("\n"));
    tried
}

// ---------------------------------------------------------------- IEEE 488.2 blocks

const K: usize = 4;

/// Everything a stream produced: events (Ok(points) or the error), after `finish`.
fn blocks(
    format: Format,
    order: ByteOrder,
    cap: usize,
    stream: &[u8],
) -> (
    Vec<Result<usize, BlockError>>,
    sweepgate::wire::block::BlockCounters,
    Vec<Complex32>,
) {
    let mut dec = BlockDecoder::new(BlockConfig::new(K, format, order).unwrap());
    let mut buf = vec![Complex32::new(0.0, 0.0); cap];
    let mut out = Vec::new();
    let mut last = Vec::new();
    // Fed in 3-byte chunks: the decoders are sans-IO and must not care.
    for chunk in stream.chunks(3) {
        let mut c = chunk;
        loop {
            let fed = dec.feed(c, &mut buf);
            c = &c[fed.consumed..];
            match fed.event {
                Some(WireEvent::Sweep { points }) => {
                    last = buf[..points].to_vec();
                    out.push(Ok(points));
                }
                Some(WireEvent::Rejected(e)) => out.push(Err(e)),
                None => break,
            }
        }
    }
    if let Some(e) = dec.finish() {
        out.push(Err(e));
    }
    let k = *dec.counters();
    assert_eq!(k.bytes_accepted + k.bytes_skipped, stream.len() as u64);
    assert_eq!(k.accepted + k.rejected(), out.len() as u32);
    (out, k, last)
}

fn real32_block(values: &[f32], big_endian: bool) -> Vec<u8> {
    let mut body = Vec::new();
    for v in values {
        body.extend_from_slice(&if big_endian {
            v.to_be_bytes()
        } else {
            v.to_le_bytes()
        });
    }
    let len = body.len().to_string();
    let mut out = format!("#{}{len}", len.len()).into_bytes();
    out.extend_from_slice(&body);
    out.push(b'\n');
    out
}

fn good_values() -> Vec<f32> {
    (0..2 * K).map(|i| i as f32 * 0.25 - 1.0).collect()
}

fn expect_block(
    stream: Vec<u8>,
    want: Vec<Result<usize, BlockError>>,
) -> Box<dyn Fn() -> Result<(), String>> {
    Box::new(move || {
        let (got, _, _) = blocks(Format::Real32, ByteOrder::Normal, K, &stream);
        check(got == want, || format!("got {got:?}, want {want:?}"))
    })
}

fn block_table() -> Vec<Case> {
    let good = real32_block(&good_values(), true);
    let mut nan = good_values();
    nan[3] = f32::NAN;
    let mut inf = good_values();
    inf[4] = f32::INFINITY;
    let mut scpi_nan = good_values();
    scpi_nan[6] = 9.91e37;
    let mut neg_inf = good_values();
    neg_inf[0] = -9.9e37;
    let header_only = |h: &str| h.as_bytes().to_vec();
    let with_body = |h: &str, n: usize| {
        let mut v = h.as_bytes().to_vec();
        v.extend(std::iter::repeat_n(0x3Fu8, n));
        v
    };
    let good2 = good.clone();
    let good3 = good.clone();
    let good4 = good.clone();
    let good5 = good.clone();
    let mut cases: Vec<Case> = vec![
        ("empty stream", expect_block(vec![], vec![])),
        ("a good block", expect_block(good.clone(), vec![Ok(K)])),
        (
            "truncated in the header",
            expect_block(header_only("#23"), vec![Err(BlockError::Truncated)]),
        ),
        (
            "truncated in the body",
            expect_block(
                good[..good.len() - 9].to_vec(),
                vec![Err(BlockError::Truncated)],
            ),
        ),
        (
            "header digit count 0 followed by garbage",
            expect_block(
                header_only("#X12\n"),
                vec![Err(BlockError::HeaderMalformed)],
            ),
        ),
        (
            "non-digit in the length",
            expect_block(
                with_body("#2A2", 32),
                vec![Err(BlockError::HeaderMalformed); 1],
            ),
        ),
        (
            "length not whole samples",
            expect_block(
                with_body("#17", 7),
                vec![Err(BlockError::LengthNotWholeSamples {
                    bytes: 7,
                    sample_bytes: 8,
                })],
            ),
        ),
        (
            "too few points",
            expect_block(
                with_body("#224", 24),
                vec![Err(BlockError::PointCount {
                    expected: K as u32,
                    found: 3,
                })],
            ),
        ),
        (
            "too many points",
            expect_block(
                with_body("#3800", 800),
                vec![Err(BlockError::PointCount {
                    expected: K as u32,
                    found: 100,
                })],
            ),
        ),
        (
            "oversized length (1 GB announced, nothing follows)",
            expect_block(
                header_only("#9999999992"),
                vec![Err(BlockError::PointCount {
                    expected: K as u32,
                    found: 124_999_999,
                })],
            ),
        ),
        (
            "NaN value",
            expect_block(
                real32_block(&nan, true),
                vec![Err(BlockError::NonFinite { index: 1 })],
            ),
        ),
        (
            "infinite value",
            expect_block(
                real32_block(&inf, true),
                vec![Err(BlockError::NonFinite { index: 2 })],
            ),
        ),
        (
            "SCPI NAN code 9.91E37",
            expect_block(
                real32_block(&scpi_nan, true),
                vec![Err(BlockError::NonFinite { index: 3 })],
            ),
        ),
        (
            "SCPI -INFinity code -9.9E37",
            expect_block(
                real32_block(&neg_inf, true),
                vec![Err(BlockError::NonFinite { index: 0 })],
            ),
        ),
        (
            "binary garbage, then a good block (resync)",
            expect_block(
                {
                    let mut v: Vec<u8> = (0u8..=255).filter(|b| *b != b'#').collect();
                    v.extend_from_slice(&good2);
                    v
                },
                vec![Err(BlockError::HeaderMalformed), Ok(K)],
            ),
        ),
        (
            "duplicate blocks (not the decoder's to judge: both accepted)",
            expect_block([good3.clone(), good3.clone()].concat(), vec![Ok(K), Ok(K)]),
        ),
        (
            "UTF-16 text instead of a block",
            expect_block(
                "#14abcd"
                    .encode_utf16()
                    .flat_map(|u| u.to_le_bytes())
                    .collect(),
                vec![Err(BlockError::HeaderMalformed)],
            ),
        ),
        (
            "a bad block then a good one",
            expect_block(
                [with_body("#224", 24), good4.clone()].concat(),
                vec![
                    Err(BlockError::PointCount {
                        expected: K as u32,
                        found: 3,
                    }),
                    Ok(K),
                ],
            ),
        ),
        (
            "indefinite block #0 ended by a line end",
            expect_block(
                {
                    let mut v = b"#0".to_vec();
                    for x in good_values() {
                        v.extend_from_slice(&x.to_be_bytes());
                    }
                    v.push(b'\n');
                    v
                },
                vec![Ok(K)],
            ),
        ),
        (
            "indefinite block #0 cut short by the end of the stream",
            expect_block(
                b"#0\x3f\x80\x00\x00".to_vec(),
                vec![Err(BlockError::Truncated)],
            ),
        ),
    ];
    cases.push((
        "buffer smaller than the block",
        Box::new(move || {
            let (got, _, _) = blocks(Format::Real32, ByteOrder::Normal, 2, &good5);
            let want = vec![Err(BlockError::Overflow { capacity: 2 })];
            check(got == want, || format!("got {got:?}"))
        }),
    ));
    cases.push((
        "wrong byte order giving a NaN pattern",
        Box::new(|| {
            // 0x7FC00000 (a quiet NaN) read with the other byte order.
            let mut vals = good_values();
            vals[2] = f32::from_bits(0x0000_C07F);
            let s = real32_block(&vals, false);
            let mut swapped_nan = vals.clone();
            swapped_nan[2] = f32::NAN;
            let (got, _, _) = blocks(Format::Real32, ByteOrder::Normal, K, &s);
            // Other values read with the wrong order are tiny or huge but finite, except
            // the NaN pattern.
            check(
                matches!(
                    got.as_slice(),
                    [Err(BlockError::NonFinite { .. })] | [Ok(_)]
                ),
                || format!("got {got:?}"),
            )?;
            check(got == vec![Err(BlockError::NonFinite { index: 1 })], || {
                format!("got {got:?}")
            })
        }),
    ));
    cases.push((
        "wrong byte order of ordinary values: accepted, values differ (undetectable)",
        Box::new(|| {
            let s = real32_block(&good_values(), false);
            let (got, k, last) = blocks(Format::Real32, ByteOrder::Normal, K, &s);
            check(got == vec![Ok(K)] && k.accepted == 1, || {
                format!("got {got:?}")
            })?;
            check(last[1].re != good_values()[2], || "values equal".into())
        }),
    ));
    cases.push((
        "REAL,64 value too large for f32",
        Box::new(|| {
            let mut body = Vec::new();
            for i in 0..2 * K {
                let v = if i == 5 { 1e300 } else { 0.5 };
                body.extend_from_slice(&f64::to_be_bytes(v));
            }
            let mut s = b"#264".to_vec();
            s.extend_from_slice(&body);
            let (got, _, _) = blocks(Format::Real64, ByteOrder::Normal, K, &s);
            check(got == vec![Err(BlockError::NonFinite { index: 2 })], || {
                format!("got {got:?}")
            })
        }),
    ));
    cases.push((
        "a million bytes of garbage: bounded, all skipped",
        Box::new(|| {
            let s: Vec<u8> = (0..1_000_000u32)
                .map(|i| (i.wrapping_mul(2_654_435_761) >> 24) as u8)
                .map(|b| if b == b'#' { b'x' } else { b })
                .collect();
            let (got, k, _) = blocks(Format::Real32, ByteOrder::Normal, K, &s);
            check(
                k.accepted == 0 && k.bytes_skipped == s.len() as u64 && !got.is_empty(),
                || format!("{k:?}"),
            )?;
            check(
                got.iter().all(|e| *e == Err(BlockError::HeaderMalformed)),
                || format!("{:?}", &got[..3.min(got.len())]),
            )
        }),
    ));
    cases
}

// ---------------------------------------------------------------- ASCII

fn ascii(cap: usize, stream: &[u8]) -> Vec<Result<usize, AsciiError>> {
    let mut dec = AsciiDecoder::new(AsciiConfig::new(2).unwrap());
    let mut buf = vec![Complex32::new(0.0, 0.0); cap];
    let mut out = Vec::new();
    for chunk in stream.chunks(5) {
        let mut c = chunk;
        loop {
            let fed = dec.feed(c, &mut buf);
            c = &c[fed.consumed..];
            match fed.event {
                Some(WireEvent::Sweep { points }) => {
                    assert!(buf[..points]
                        .iter()
                        .all(|v| v.re.is_finite() && v.im.is_finite()));
                    out.push(Ok(points))
                }
                Some(WireEvent::Rejected(e)) => out.push(Err(e)),
                None => break,
            }
        }
    }
    if let Some(e) = dec.finish() {
        out.push(Err(e));
    }
    let k = dec.counters();
    assert_eq!(k.bytes_accepted + k.bytes_skipped, stream.len() as u64);
    assert_eq!(k.accepted + k.rejected(), out.len() as u32);
    out
}

fn expect_ascii(
    stream: Vec<u8>,
    want: Vec<Result<usize, AsciiError>>,
) -> Box<dyn Fn() -> Result<(), String>> {
    Box::new(move || {
        let got = ascii(2, &stream);
        check(got == want, || format!("got {got:?}, want {want:?}"))
    })
}

fn ascii_table() -> Vec<Case> {
    use AsciiError::*;
    vec![
        ("empty stream", expect_ascii(vec![], vec![])),
        (
            "a good line",
            expect_ascii(b"1,2,3,4\n".to_vec(), vec![Ok(2)]),
        ),
        (
            "CRLF line end",
            expect_ascii(b"1,2,3,4\r\n".to_vec(), vec![Ok(2)]),
        ),
        (
            "truncated line",
            expect_ascii(b"1,2,3".to_vec(), vec![Err(Truncated)]),
        ),
        (
            "odd count",
            expect_ascii(b"1,2,3\n".to_vec(), vec![Err(OddCount { values: 3 })]),
        ),
        (
            "too few points",
            expect_ascii(
                b"1,2\n".to_vec(),
                vec![Err(PointCount {
                    expected: 2,
                    found: 1,
                })],
            ),
        ),
        (
            "too many points for a K-point buffer",
            expect_ascii(
                b"1,2,3,4,5,6\n".to_vec(),
                vec![Err(Overflow { capacity: 2 })],
            ),
        ),
        (
            "too many points for the grid",
            Box::new(|| {
                let got = ascii(8, b"1,2,3,4,5,6\n");
                check(
                    got == vec![Err(PointCount {
                        expected: 2,
                        found: 3,
                    })],
                    || format!("got {got:?}"),
                )
            }),
        ),
        (
            "not a number",
            expect_ascii(
                b"1,x,3,4\n".to_vec(),
                vec![Err(MalformedNumber { index: 1 })],
            ),
        ),
        (
            "empty field",
            expect_ascii(
                b"1,,3,4\n".to_vec(),
                vec![Err(MalformedNumber { index: 1 })],
            ),
        ),
        (
            "NaN",
            expect_ascii(b"1,NaN,3,4\n".to_vec(), vec![Err(NonFinite { index: 1 })]),
        ),
        (
            "inf",
            expect_ascii(b"1,2,inf,4\n".to_vec(), vec![Err(NonFinite { index: 2 })]),
        ),
        (
            "SCPI NAN 9.91E37",
            expect_ascii(
                b"1,2,3,9.91E37\n".to_vec(),
                vec![Err(NonFinite { index: 3 })],
            ),
        ),
        (
            "too large for f32",
            expect_ascii(b"1e39,2,3,4\n".to_vec(), vec![Err(NonFinite { index: 0 })]),
        ),
        (
            "token too long",
            expect_ascii(
                [b"1,".to_vec(), vec![b'1'; 200], b",3,4\n".to_vec()].concat(),
                vec![Err(TokenTooLong { index: 1 })],
            ),
        ),
        (
            "Latin-1 degree sign in a number",
            expect_ascii(
                b"1,2\xB0,3,4\n".to_vec(),
                vec![Err(MalformedNumber { index: 1 })],
            ),
        ),
        (
            // The NUL after the UTF-16 line end starts a line the stream cuts short.
            "UTF-16 text",
            expect_ascii(
                "1,2,3,4\n"
                    .encode_utf16()
                    .flat_map(|u| u.to_le_bytes())
                    .collect(),
                vec![Err(MalformedNumber { index: 0 }), Err(Truncated)],
            ),
        ),
        (
            "binary garbage line, then a good line",
            expect_ascii(
                [vec![0xFF, 0x00, 0x13, 0x80, b'\n'], b"1,2,3,4\n".to_vec()].concat(),
                vec![Err(MalformedNumber { index: 0 }), Ok(2)],
            ),
        ),
        (
            "duplicate lines (both accepted)",
            expect_ascii(b"1,2,3,4\n1,2,3,4\n".to_vec(), vec![Ok(2), Ok(2)]),
        ),
        (
            "buffer smaller than the line",
            Box::new(|| {
                let got = ascii(1, b"1,2,3,4\n");
                check(got == vec![Err(Overflow { capacity: 1 })], || {
                    format!("got {got:?}")
                })
            }),
        ),
    ]
}

// ---------------------------------------------------------------- positioner samples

fn tracker() -> Tracker<16> {
    Tracker::new(TrackConfig::default()).unwrap()
}

fn encoder(width: CounterWidth) -> Tracker<16> {
    Tracker::with_encoder(
        TrackConfig::default(),
        EncoderConfig {
            // A 16-bit counter takes at most 2^15 counts per turn.
            counts_per_rev: 32_000,
            zero_offset_counts: 0,
            sense: Sense::Positive,
            width,
        },
    )
    .unwrap()
}

fn expect_track(
    samples: Vec<(u64, f32)>,
    want: Result<(), SampleReject>,
    counter: fn(&sweepgate::track::TrackCounters) -> u32,
    count: u32,
) -> Box<dyn Fn() -> Result<(), String>> {
    Box::new(move || {
        let mut t = tracker();
        let mut last = Ok(());
        for &(ts, a) in &samples {
            last = t.push_angle(ts, a).map(|_| ());
        }
        let c = *t.counters();
        check(last == want, || format!("last {last:?}, want {want:?}"))?;
        check(counter(&c) == count, || format!("counters {c:?}"))?;
        check(c.accepted + c.rejected() == c.pushed, || format!("{c:?}"))
    })
}

fn track_table() -> Vec<Case> {
    vec![
        (
            "NaN angle",
            expect_track(
                vec![(0, f32::NAN)],
                Err(SampleReject::NonFinite),
                |c| c.non_finite,
                1,
            ),
        ),
        (
            "infinite angle",
            expect_track(
                vec![(0, 0.0), (1000, f32::NEG_INFINITY)],
                Err(SampleReject::NonFinite),
                |c| c.non_finite,
                1,
            ),
        ),
        (
            "timestamp going backwards",
            expect_track(
                vec![(10_000, 1.0), (5_000, 1.0)],
                Err(SampleReject::NonMonotonic),
                |c| c.non_monotonic,
                1,
            ),
        ),
        (
            "repeated timestamp",
            expect_track(
                vec![(10_000, 1.0), (10_000, 1.0)],
                Err(SampleReject::NonMonotonic),
                |c| c.non_monotonic,
                1,
            ),
        ),
        (
            "time at u64::MAX, then anything",
            expect_track(
                vec![(u64::MAX, 1.0), (0, 1.0)],
                Err(SampleReject::NonMonotonic),
                |c| c.non_monotonic,
                1,
            ),
        ),
        (
            // 90 deg/s at most (the default): 20° in 10 ms is a jump.
            "angle jump",
            expect_track(
                vec![(0, 0.0), (10_000, 20.0)],
                Err(SampleReject::Jump),
                |c| c.jump,
                1,
            ),
        ),
        (
            "angle jump repeated 8 times: resync",
            expect_track(
                (0..10)
                    .map(|i| {
                        (
                            i * 10_000,
                            if i == 0 { 0.0 } else { 100.0 + i as f32 * 0.1 },
                        )
                    })
                    .collect(),
                Ok(()),
                |c| c.resyncs,
                1,
            ),
        ),
        (
            "wrapped angle 359.9 → 0.1 is no jump",
            expect_track(vec![(0, 359.9), (10_000, 0.1)], Ok(()), |c| c.jump, 0),
        ),
        (
            "counts pushed to an angle tracker",
            Box::new(|| {
                let mut t = tracker();
                let r = t.push_counts(0, 5);
                check(
                    r == Err(SampleReject::WrongSource) && t.counters().wrong_source == 1,
                    || format!("{r:?}"),
                )
            }),
        ),
        (
            "angle pushed to an encoder tracker",
            Box::new(|| {
                let mut t = encoder(CounterWidth::Bits32);
                let r = t.push_angle(0, 5.0);
                check(r == Err(SampleReject::WrongSource), || format!("{r:?}"))
            }),
        ),
        (
            "encoder count wider than a 16-bit counter",
            Box::new(|| {
                let mut t = encoder(CounterWidth::Bits16);
                let r = t.push_counts(0, 70_000);
                check(
                    r == Err(SampleReject::CountOutOfRange) && t.counters().count_out_of_range == 1,
                    || format!("{r:?}"),
                )
            }),
        ),
        (
            "encoder glitch (a count jump of 10000 = 112.5° in 1 ms)",
            Box::new(|| {
                let mut t = encoder(CounterWidth::Bits32);
                t.push_counts(0, 1000).map_err(|e| format!("{e:?}"))?;
                let r = t.push_counts(1000, 11_000);
                check(r == Err(SampleReject::Jump), || format!("{r:?}"))?;
                // The next good count is accepted again.
                let r = t.push_counts(2000, 1001);
                check(r.is_ok(), || format!("{r:?}"))
            }),
        ),
        (
            "16-bit encoder wrapping 65535 → 0 is no glitch",
            Box::new(|| {
                let mut t = encoder(CounterWidth::Bits16);
                t.push_counts(0, 65_530).map_err(|e| format!("{e:?}"))?;
                let r = t.push_counts(10_000, 4);
                check(r.is_ok() && t.counters().jump == 0, || format!("{r:?}"))
            }),
        ),
    ]
}

// ---------------------------------------------------------------- scan engine sweeps

const SK: usize = 33;

fn scan() -> Scan<64, 1, 36> {
    let grid = Grid::from_start_stop(1e9, 2e9, SK).unwrap();
    let gate = GateConfig {
        grid,
        band_window: WindowKind::Kaiser { beta: 6.0 },
        center_s: 5e-9,
        span_s: 4e-9,
        shape: WindowKind::Tukey { alpha: 0.5 },
        renormalize: true,
    };
    let cfg = ScanConfig::new(BinLayout::sector(-40.0, 40.0, 10.0).unwrap());
    Scan::new(&gate, [16], cfg).unwrap()
}

fn expect_sweep(
    prep: fn(&mut Scan<64, 1, 36>),
    start_us: u64,
    end_us: u64,
    points: Vec<Complex32>,
    want: SweepReject,
) -> Box<dyn Fn() -> Result<(), String>> {
    Box::new(move || {
        let mut s = scan();
        prep(&mut s);
        let ev = s.push_sweep(start_us, end_us, &points);
        let c = s.counters();
        check(
            ev.contains(&Event::Warning(Warning::SweepRejected(want))),
            || format!("events {ev:?}"),
        )?;
        check(s.counters().sweeps_rejected_for(want) == 1, || {
            format!("{c:?}")
        })?;
        check(
            c.sweeps_binned + c.sweeps_rejected() == c.sweeps_pushed,
            || format!("{c:?}"),
        )
    })
}

fn ramp(s: &mut Scan<64, 1, 36>) {
    // 10 deg/s from 0°, a sample every 10 ms for 1 s.
    for i in 0..=100u64 {
        s.push_angle(i * 10_000, i as f32 * 0.1);
    }
}

fn scan_table() -> Vec<Case> {
    let ok = vec![Complex32::new(1.0, 0.0); SK];
    let mut nan = ok.clone();
    nan[7] = Complex32::new(f32::NAN, 0.0);
    let mut inf = ok.clone();
    inf[0] = Complex32::new(0.0, f32::INFINITY);
    vec![
        (
            "sweep before any angle",
            expect_sweep(|_| {}, 0, 1000, ok.clone(), SweepReject::NoAngle),
        ),
        (
            "sweep with too few points",
            expect_sweep(
                ramp,
                900_000,
                920_000,
                ok[..SK - 1].to_vec(),
                SweepReject::WrongPointCount,
            ),
        ),
        (
            "sweep with too many points",
            expect_sweep(
                ramp,
                900_000,
                920_000,
                [ok.clone(), ok.clone()].concat(),
                SweepReject::WrongPointCount,
            ),
        ),
        (
            "empty sweep",
            expect_sweep(ramp, 900_000, 920_000, vec![], SweepReject::WrongPointCount),
        ),
        (
            "NaN in a sweep",
            expect_sweep(ramp, 900_000, 920_000, nan, SweepReject::NonFinite),
        ),
        (
            "Inf in a sweep",
            expect_sweep(ramp, 900_000, 920_000, inf, SweepReject::NonFinite),
        ),
        (
            "sweep ending before it starts",
            expect_sweep(ramp, 920_000, 900_000, ok.clone(), SweepReject::BadTimes),
        ),
        (
            "sweep far after the angle history",
            expect_sweep(
                ramp,
                50_000_000,
                50_020_000,
                ok.clone(),
                SweepReject::OutsideHistory,
            ),
        ),
        (
            "sweep outside the sector",
            expect_sweep(
                |s| {
                    for i in 0..=10u64 {
                        s.push_angle(i * 10_000, 90.0 + i as f32 * 0.1);
                    }
                },
                40_000,
                60_000,
                ok.clone(),
                SweepReject::OutsideLayout,
            ),
        ),
        (
            "sweep after finish",
            expect_sweep(
                |s| {
                    ramp(s);
                    s.finish();
                },
                100_000,
                120_000,
                ok.clone(),
                SweepReject::Finished,
            ),
        ),
        (
            "angle after finish",
            Box::new(|| {
                let mut s = scan();
                s.finish();
                let ev = s.push_angle(0, 1.0);
                check(
                    ev.iter().any(|e| {
                        *e == Event::Warning(Warning::AngleRejected(SampleReject::Finished))
                    }),
                    || format!("{ev:?}"),
                )?;
                let c = s.counters();
                check(
                    c.angles_after_finish == 1
                        && c.angles_accepted + c.angles_rejected() == c.angles_pushed,
                    || format!("{c:?}"),
                )
            }),
        ),
        (
            "duplicate sweep (same times twice): both binned, averaged",
            Box::new(move || {
                let mut s = scan();
                ramp(&mut s);
                let ok = vec![Complex32::new(1.0, 0.0); SK];
                s.push_sweep(900_000, 920_000, &ok);
                s.push_sweep(900_000, 920_000, &ok);
                let ev = s.finish();
                let sweeps: Vec<u32> = ev
                    .iter()
                    .filter_map(|e| match e {
                        Event::BinClosed(r) => Some(r.sweeps),
                        _ => None,
                    })
                    .collect();
                check(sweeps == vec![2] && s.counters().sweeps_binned == 2, || {
                    format!("{ev:?}")
                })
            }),
        ),
        (
            "sweep times at u64::MAX",
            expect_sweep(
                ramp,
                u64::MAX - 1,
                u64::MAX,
                ok.clone(),
                SweepReject::OutsideHistory,
            ),
        ),
    ]
}

// ---------------------------------------------------------------- preview stream

fn status_frame(seq: u16) -> Vec<u8> {
    let s = scan();
    let rec: PreviewRecord<1> = PreviewRecord::Status(s.status());
    let mut buf = [0u8; MAX_FRAME];
    let n = encode_frame(&rec, seq, &mut buf).unwrap();
    buf[..n].to_vec()
}

/// A frame around an arbitrary payload with a correct CRC (COBS by hand).
fn frame_of(payload: &[u8]) -> Vec<u8> {
    let mut p = payload.to_vec();
    p.extend_from_slice(&crc32(payload).to_le_bytes());
    let mut out = vec![0u8; p.len() + p.len() / 254 + 2];
    let n = sweepgate::wire::preview::cobs_encode(&p, &mut out).unwrap();
    out.truncate(n);
    out.push(0);
    out
}

fn preview(stream: &[u8]) -> sweepgate::wire::preview::DecoderCounters {
    let mut d: Decoder<1, MAX_FRAME> = Decoder::new();
    d.feed(stream, |_, _| {});
    let c = *d.counters();
    let delims = stream.iter().filter(|&&b| b == 0).count() as u32;
    assert_eq!(c.good + c.empty + c.damaged(), delims);
    assert_eq!(c.bytes, stream.len() as u32);
    c
}

fn expect_preview(
    stream: Vec<u8>,
    field: fn(&sweepgate::wire::preview::DecoderCounters) -> u32,
    count: u32,
    good: u32,
) -> Box<dyn Fn() -> Result<(), String>> {
    Box::new(move || {
        let c = preview(&stream);
        check(field(&c) == count && c.good == good, || format!("{c:?}"))
    })
}

fn preview_table() -> Vec<Case> {
    let f = status_frame(7);
    let body_of = |f: &[u8]| {
        // Decode the COBS of a frame to get its payload + CRC.
        let mut v = f[..f.len() - 1].to_vec();
        let m = sweepgate::wire::preview::cobs_decode_in_place(&mut v).unwrap();
        v.truncate(m - 4);
        v
    };
    let payload = body_of(&f);
    let mut bad_version = payload.clone();
    bad_version[1] = 9;
    let mut bad_kind = payload.clone();
    bad_kind[0] = 77;
    let mut short_body = payload.clone();
    short_body.truncate(payload.len() - 3);
    let mut flipped = f.clone();
    flipped[10] ^= 0x01;
    if flipped[10] == 0 {
        flipped[10] = 0x55;
    }
    let f2 = f.clone();
    let f3 = f.clone();
    let f4 = f.clone();
    vec![
        ("empty stream", expect_preview(vec![], |c| c.good, 0, 0)),
        (
            "a good status frame",
            expect_preview(f.clone(), |c| c.damaged(), 0, 1),
        ),
        (
            "a flipped bit",
            expect_preview(flipped, |c| c.crc + c.cobs, 1, 0),
        ),
        (
            "truncated frame joined to the next",
            expect_preview(
                [f[..f.len() / 2].to_vec(), f2.clone()].concat(),
                |c| c.damaged(),
                1,
                0,
            ),
        ),
        (
            "truncated frame, delimiter, then a good one",
            expect_preview(
                [f[..f.len() / 2].to_vec(), vec![0], f2].concat(),
                |c| c.damaged(),
                1,
                1,
            ),
        ),
        (
            "oversized frame",
            expect_preview(
                [vec![0x11; 3 * MAX_FRAME], vec![0]].concat(),
                |c| c.too_long,
                1,
                0,
            ),
        ),
        (
            "empty frames",
            expect_preview(vec![0, 0, 0], |c| c.empty, 3, 0),
        ),
        (
            "too short frame",
            expect_preview(vec![2, 1, 0], |c| c.too_short, 1, 0),
        ),
        (
            "unknown version",
            expect_preview(frame_of(&bad_version), |c| c.unknown_version, 1, 0),
        ),
        (
            "unknown kind",
            expect_preview(frame_of(&bad_kind), |c| c.unknown_kind, 1, 0),
        ),
        (
            "wrong body length",
            expect_preview(frame_of(&short_body), |c| c.bad_body, 1, 0),
        ),
        (
            "binary garbage, then a good frame",
            expect_preview(
                [(1u8..=255).collect::<Vec<_>>(), vec![0], f3].concat(),
                |c| c.damaged(),
                1,
                1,
            ),
        ),
        (
            "duplicate frame (same sequence number twice): no frames counted lost",
            expect_preview([f4.clone(), f4.clone()].concat(), |c| c.seq_gaps, 0, 2),
        ),
        (
            "a lost frame: sequence gap of one",
            expect_preview(
                [status_frame(1), status_frame(3)].concat(),
                |c| c.seq_gaps,
                1,
                2,
            ),
        ),
    ]
}

// ---------------------------------------------------------------- link capture

fn good_header() -> [u8; HEADER_LEN] {
    let grid = Grid::from_start_stop(1e9, 2e9, SK).unwrap();
    let h = CaptureHeader {
        gate: GateConfig {
            grid,
            band_window: WindowKind::Kaiser { beta: 6.0 },
            center_s: 5e-9,
            span_s: 4e-9,
            shape: WindowKind::Tukey { alpha: 0.5 },
            renormalize: true,
        },
        layout: BinLayout::full_circle(-180.0, 10.0).unwrap(),
        pattern: [16, 0, 0, 0, 0, 0, 0, 0],
        pattern_count: 1,
        format: Format::Real32,
        order: ByteOrder::Swapped,
        echo: sweepgate::scan::EchoMode::Never,
    };
    let mut out = [0u8; HEADER_LEN];
    h.emit(&mut out);
    out
}

fn expect_header(
    edit: fn(&mut [u8; HEADER_LEN]),
    want: CaptureError,
) -> Box<dyn Fn() -> Result<(), String>> {
    Box::new(move || {
        let mut h = good_header();
        edit(&mut h);
        let got = CaptureHeader::parse(&h);
        check(got.as_ref().err() == Some(&want), || {
            format!("got {got:?}, want {want:?}")
        })
    })
}

fn capture_table() -> Vec<Case> {
    vec![
        (
            "a good header",
            Box::new(|| {
                check(CaptureHeader::parse(&good_header()).is_ok(), || {
                    "refused".into()
                })
            }),
        ),
        (
            "bad magic",
            expect_header(|h| h[0] = b'X', CaptureError::BadMagic),
        ),
        (
            "all zero (empty file padded)",
            expect_header(|h| *h = [0; HEADER_LEN], CaptureError::BadMagic),
        ),
        (
            "NaN grid start",
            expect_header(
                |h| h[8..16].copy_from_slice(&f64::NAN.to_le_bytes()),
                CaptureError::Grid(GridError::NonFinite),
            ),
        ),
        (
            "zero points",
            expect_header(
                |h| h[24..26].copy_from_slice(&0u16.to_le_bytes()),
                CaptureError::Grid(GridError::TooFewPoints),
            ),
        ),
        (
            "unknown window kind",
            expect_header(|h| h[42] = 99, CaptureError::UnknownWindow(99)),
        ),
        (
            "bin count not matching the step",
            expect_header(
                |h| h[61..63].copy_from_slice(&35u16.to_le_bytes()),
                CaptureError::BinCount,
            ),
        ),
        (
            "unknown block format",
            expect_header(|h| h[64] = 7, CaptureError::UnknownFormat(7)),
        ),
        (
            "unknown byte order",
            expect_header(|h| h[65] = 2, CaptureError::UnknownOrder(2)),
        ),
        (
            "no pattern frequency",
            expect_header(|h| h[66] = 0, CaptureError::PatternCount),
        ),
        (
            "too many pattern frequencies",
            expect_header(
                |h| h[66] = MAX_PATTERN as u8 + 1,
                CaptureError::PatternCount,
            ),
        ),
        (
            "pattern index beyond the grid",
            expect_header(
                |h| h[67..69].copy_from_slice(&500u16.to_le_bytes()),
                CaptureError::PatternIndex,
            ),
        ),
        (
            // Found by the `capture` fuzz target: a sector whose bin count rounds past
            // 65535 overflowed the u16 count (a panic in debug builds, 0 bins in release).
            "sector layout with more bins than a u16 counts",
            Box::new(|| {
                let r = BinLayout::sector(-40.0, 40.0, 0.0001);
                check(
                    r == Err(sweepgate::error::LayoutError::TooManyBins {
                        needed: 800_001,
                        capacity: 65535,
                    }),
                    || format!("{r:?}"),
                )?;
                let r = BinLayout::sector(0.0, 65535.0 * 0.005, 0.005);
                check(
                    matches!(r, Err(sweepgate::error::LayoutError::TooManyBins { .. })),
                    || format!("{r:?}"),
                )
            }),
        ),
        (
            "unknown echo mode",
            expect_header(|h| h[83] = 9, CaptureError::UnknownEchoMode(9)),
        ),
        (
            // The header itself stays plausible (8448 points from a subnormal start), so
            // the board's set-up must refuse it: the engine cannot gate 8448 points with
            // a 64-point FFT.
            "header fields in the wrong byte order: refused at engine set-up",
            Box::new(|| {
                let mut h = good_header();
                h[8..16].reverse();
                h[24..26].reverse(); // 33 points read as 8448
                let got = CaptureHeader::parse(&h).map_err(|e| format!("{e:?}"))?;
                check(got.gate.grid.points() == 8448, || format!("{got:?}"))?;
                let cfg = ScanConfig::new(got.layout);
                let r = Scan::<64, 1, 36>::new(&got.gate, [16], cfg).err();
                check(
                    matches!(
                        r,
                        Some(sweepgate::error::ScanConfigError::Gate(
                            sweepgate::error::GateError::PointsExceedFftSize { .. }
                        ))
                    ),
                    || format!("{r:?}"),
                )
            }),
        ),
        (
            "unknown entry kind",
            Box::new(|| {
                check(
                    Entry::head_len(7) == Err(CaptureError::UnknownEntry(7)),
                    || "accepted".into(),
                )
            }),
        ),
        (
            "truncated entry head",
            Box::new(|| {
                check(
                    Entry::parse(2, &[0; 5]) == Err(CaptureError::Truncated),
                    || "accepted".into(),
                )
            }),
        ),
        (
            "capture with garbage entries: the walk stops at the first unknown kind",
            Box::new(|| {
                let mut stream = vec![1u8];
                stream.extend_from_slice(&[0; 12]);
                stream.extend_from_slice(&[0xEE, 1, 2, 3]);
                let mut at = 0;
                let mut n = 0;
                let err = loop {
                    let Some(&k) = stream.get(at) else { break None };
                    match Entry::head_len(k) {
                        Ok(len) => {
                            Entry::parse(k, stream.get(at + 1..at + 1 + len).unwrap_or(&[]))
                                .map_err(|e| format!("{e:?}"))?;
                            at += 1 + len;
                            n += 1;
                        }
                        Err(e) => break Some(e),
                    }
                };
                check(
                    n == 1 && err == Some(CaptureError::UnknownEntry(0xEE)),
                    || format!("{n} {err:?}"),
                )
            }),
        ),
    ]
}

#[test]
fn bad_input_matrix_core() {
    let tables: Vec<(&str, Vec<Case>)> = vec![
        ("IEEE 488.2 block stream", block_table()),
        ("ASCII stream", ascii_table()),
        ("positioner samples", track_table()),
        ("scan engine sweeps", scan_table()),
        ("preview stream", preview_table()),
        ("link capture", capture_table()),
    ];
    let held: usize = tables.iter().map(|(_, t)| t.len()).sum();
    let mut tried = 0;
    for (name, t) in tables {
        tried += run(name, t);
    }
    eprintln!("bad-input matrix (core): {tried} cases");
    println!("bad-input matrix (core): {tried} cases");
    assert_eq!(tried, held);
}
