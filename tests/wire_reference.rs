//! The VNA link decoders against published framing and encoding rules.

use sweepgate::error::BlockError;
use sweepgate::grid::Grid;
use sweepgate::wire::ascii::{AsciiConfig, AsciiDecoder};
use sweepgate::wire::block::{emit, BlockConfig, BlockDecoder, ByteOrder, DecodeEvent, Format};
use sweepgate::Complex32;

fn sweep(n: usize) -> Vec<Complex32> {
    (0..n)
        .map(|i| Complex32::new((i as f32 * 0.05).cos(), -(i as f32 * 0.05).sin()))
        .collect()
}

#[test]
fn definite_header_for_201_real32_points() {
    // IEEE 488.2 §8.7.9 definite-length arbitrary block: '#', one non-zero digit n, n digits
    // of byte count; 201 complex REAL,32 points = 1608 bytes -> "#41608" (the example in
    // /work/shared/REFERENCES.md, "Instrument data").
    let data = sweep(201);
    let mut bytes = vec![0u8; 2000];
    let n = emit(Format::Real32, ByteOrder::Normal, &data, &mut bytes).unwrap();
    assert_eq!(&bytes[..6], b"#41608");
    assert_eq!(n, 6 + 1608 + 1);

    let grid = Grid::from_start_stop(1e9, 3e9, 201).unwrap();
    let mut dec = BlockDecoder::new(BlockConfig::for_grid(
        &grid,
        Format::Real32,
        ByteOrder::Normal,
    ));
    let mut buf = [Complex32::new(0.0, 0.0); 256];
    let fed = dec.feed(&bytes[..n], &mut buf);
    assert_eq!(fed.event, Some(DecodeEvent::Sweep { points: 201 }));
    assert_eq!(&buf[..201], &data[..]);
}

#[test]
fn hand_written_header_and_indefinite_form() {
    // IEEE 488.2 §8.7.9: a header built by hand, "#41608" then 1608 bytes of big-endian
    // IEEE 754 singles; and the indefinite form "#0" ... newline (same section).
    let data = sweep(201);
    let mut payload = Vec::new();
    for p in &data {
        // SCPI FORMat:BORDer NORMal = big-endian; complex data interleaved re, im
        // (SCPI-99 FORMat subsystem, as summarised in REFERENCES.md).
        payload.extend(p.re.to_be_bytes());
        payload.extend(p.im.to_be_bytes());
    }
    let mut stream = b"#41608".to_vec();
    stream.extend(&payload);
    stream.push(b'\n');
    stream.extend(b"#0");
    stream.extend(&payload);
    stream.push(b'\n');
    let cfg = BlockConfig::new(201, Format::Real32, ByteOrder::Normal).unwrap();
    let mut dec = BlockDecoder::new(cfg);
    let mut rest = &stream[..];
    for _ in 0..2 {
        let mut buf = [Complex32::new(0.0, 0.0); 201];
        let fed = dec.feed(rest, &mut buf);
        assert_eq!(fed.event, Some(DecodeEvent::Sweep { points: 201 }));
        assert_eq!(&buf[..], &data[..]);
        rest = &rest[fed.consumed..];
    }
    assert!(rest.is_empty());
    assert_eq!(dec.counters().bytes_accepted, stream.len() as u64);
}

#[test]
fn letter_after_hash_is_not_a_header() {
    // IEEE 488.2 §8.7.9: '#' is followed by a non-zero digit (definite form) or '0'
    // (indefinite form); anything else is not a block header.
    let cfg = BlockConfig::new(1, Format::Real32, ByteOrder::Normal).unwrap();
    let mut dec = BlockDecoder::new(cfg);
    let mut buf = [Complex32::new(0.0, 0.0); 1];
    assert_eq!(
        dec.feed(b"#A", &mut buf).event,
        Some(DecodeEvent::Rejected(BlockError::HeaderMalformed))
    );
}

#[test]
fn real64_swapped_one_and_minus_two() {
    // IEEE 754 binary64: 1.0 = 0x3FF0000000000000, -2.0 = 0xC000000000000000 (from memory);
    // SWAPped = little-endian (SCPI FORMat:BORDer).
    let mut stream = b"#216".to_vec();
    stream.extend([0, 0, 0, 0, 0, 0, 0xf0, 0x3f]);
    stream.extend([0, 0, 0, 0, 0, 0, 0, 0xc0]);
    let cfg = BlockConfig::new(1, Format::Real64, ByteOrder::Swapped).unwrap();
    let mut dec = BlockDecoder::new(cfg);
    let mut buf = [Complex32::new(0.0, 0.0); 1];
    assert_eq!(
        dec.feed(&stream, &mut buf).event,
        Some(DecodeEvent::Sweep { points: 1 })
    );
    assert_eq!(buf[0], Complex32::new(1.0, -2.0));
}

#[test]
fn ascii_scpi_nr3_numbers() {
    // SCPI ASCii data: comma-separated decimal numbers in the IEEE 488.2 NR1/NR2/NR3
    // response forms (integer, fixed point, exponent; from memory), newline-terminated.
    let mut dec = AsciiDecoder::new(AsciiConfig::new(2).unwrap());
    let mut buf = [Complex32::new(0.0, 0.0); 2];
    let fed = dec.feed(b"+1.000000000E+00,-2.5E-01,3,-4.0\n", &mut buf);
    assert_eq!(fed.event, Some(DecodeEvent::Sweep { points: 2 }));
    assert_eq!(buf, [Complex32::new(1.0, -0.25), Complex32::new(3.0, -4.0)]);
}
