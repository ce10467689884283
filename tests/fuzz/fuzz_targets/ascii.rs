//! Fuzz the ASCII number decoder: the first bytes choose the point count, buffer size and
//! chunk split; the rest is the stream. Checks that nothing panics, that `feed` always
//! makes progress, and that every byte and event is counted.
#![no_main]

use libfuzzer_sys::fuzz_target;
use sweepgate::wire::ascii::{AsciiConfig, AsciiDecoder};
use sweepgate::wire::block::DecodeEvent;
use sweepgate::Complex32;

fuzz_target!(|data: &[u8]| {
    let [a, b, c, stream @ ..] = data else { return };
    let points = 1 + (*b as usize % 8);
    let cap = *c as usize % 10;
    let Ok(config) = AsciiConfig::new(points) else {
        return;
    };
    let mut dec = AsciiDecoder::new(config);
    let mut buf = [Complex32::new(0.0, 0.0); 10];
    let buf = &mut buf[..cap];
    let mut seed = u32::from(*a) | 1;
    let (mut sweeps, mut rejected, mut total) = (0u32, 0u32, 0u64);
    let mut rest = stream;
    while !rest.is_empty() {
        seed = seed.wrapping_mul(1_103_515_245).wrapping_add(12_345);
        let len = (1 + (seed >> 16) as usize % 16).min(rest.len());
        let mut chunk = &rest[..len];
        rest = &rest[len..];
        loop {
            let fed = dec.feed(chunk, buf);
            total += fed.consumed as u64;
            chunk = &chunk[fed.consumed..];
            match fed.event {
                Some(DecodeEvent::Sweep { points: p }) => {
                    assert!(fed.consumed > 0);
                    assert_eq!(p, points);
                    assert!(buf[..p]
                        .iter()
                        .all(|v| v.re.is_finite() && v.im.is_finite()));
                    sweeps += 1;
                }
                Some(DecodeEvent::Rejected(_)) => {
                    assert!(fed.consumed > 0);
                    rejected += 1;
                }
                None => {
                    assert!(chunk.is_empty());
                    break;
                }
            }
        }
        let k = dec.counters();
        assert_eq!(
            total,
            k.bytes_accepted + k.bytes_skipped + dec.bytes_pending()
        );
    }
    if dec.finish().is_some() {
        rejected += 1;
    }
    let k = dec.counters();
    assert_eq!(dec.bytes_pending(), 0);
    assert_eq!(total, stream.len() as u64);
    assert_eq!(total, k.bytes_accepted + k.bytes_skipped);
    assert_eq!(k.accepted, sweeps);
    assert_eq!(k.rejected(), rejected);
});
