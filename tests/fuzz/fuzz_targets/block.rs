//! Fuzz the IEEE 488.2 block decoder: the first bytes choose the configuration, buffer
//! size and chunk split; the rest is the stream. Checks that nothing panics, that
//! `feed` always makes progress, and that every byte and event is counted.
#![no_main]

use libfuzzer_sys::fuzz_target;
use sweepgate::wire::block::{BlockConfig, BlockDecoder, ByteOrder, DecodeEvent, Format};
use sweepgate::Complex32;

fuzz_target!(|data: &[u8]| {
    let [a, b, c, stream @ ..] = data else { return };
    let format = if a & 1 == 0 {
        Format::Real32
    } else {
        Format::Real64
    };
    let order = if a & 2 == 0 {
        ByteOrder::Normal
    } else {
        ByteOrder::Swapped
    };
    let points = 1 + (*b as usize % 8);
    let cap = *c as usize % 10;
    let Ok(config) = BlockConfig::new(points, format, order) else {
        return;
    };
    let mut dec = BlockDecoder::new(config);
    let mut buf = [Complex32::new(0.0, 0.0); 10];
    let buf = &mut buf[..cap];
    // Chunk lengths 1..=16 from the top bits of the first byte and the data itself.
    let mut seed = u32::from(a >> 2) | 1;
    let (mut sweeps, mut rejected, mut total) = (0u32, 0u32, 0u64);
    let mut rest = stream;
    while !rest.is_empty() {
        seed = seed.wrapping_mul(1_103_515_245).wrapping_add(12_345);
        let len = (1 + (seed >> 16) as usize % 16).min(rest.len());
        let mut chunk = &rest[..len];
        rest = &rest[len..];
        let mut idle_calls = 0;
        loop {
            let fed = dec.feed(chunk, buf);
            total += fed.consumed as u64;
            chunk = &chunk[fed.consumed..];
            idle_calls = if fed.consumed == 0 { idle_calls + 1 } else { 0 };
            assert!(idle_calls < 2, "feed made no progress twice");
            match fed.event {
                Some(DecodeEvent::Sweep { points: p }) => {
                    assert_eq!(p, points);
                    assert!(buf[..p]
                        .iter()
                        .all(|v| v.re.is_finite() && v.im.is_finite()));
                    sweeps += 1;
                }
                Some(DecodeEvent::Rejected(_)) => rejected += 1,
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
