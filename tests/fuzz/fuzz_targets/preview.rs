//! Fuzz the preview record decoder: the input is the byte stream, fed in chunks whose
//! lengths come from the data. Checks that nothing panics, that every delimited frame is
//! counted exactly once (good, empty or damaged), that every byte is counted, and that
//! each good record, encoded again, decodes to a frame with the same bytes.
#![no_main]

use libfuzzer_sys::fuzz_target;
use sweepgate::wire::preview::{encode_frame, Decoder, MAX_FRAME};

fuzz_target!(|data: &[u8]| {
    let [split, stream @ ..] = data else { return };
    let mut dec: Decoder<4, MAX_FRAME> = Decoder::new();
    let mut good = 0u32;
    let mut rest = stream;
    let step = 1 + usize::from(*split);
    while !rest.is_empty() {
        let (chunk, tail) = rest.split_at(step.min(rest.len()));
        rest = tail;
        good += dec.feed(chunk, |seq, rec| {
            let mut frame = [0u8; MAX_FRAME];
            let n = encode_frame(&rec, seq, &mut frame).expect("a decoded record encodes");
            let mut again: Decoder<4, MAX_FRAME> = Decoder::new();
            let mut got = None;
            again.feed(&frame[..n], |s, r| got = Some((s, r)));
            let (s2, r2) = got.expect("a re-encoded record decodes");
            assert_eq!(s2, seq);
            let mut frame2 = [0u8; MAX_FRAME];
            let n2 = encode_frame(&r2, s2, &mut frame2).expect("encodes");
            assert_eq!(&frame[..n], &frame2[..n2]);
        }) as u32;
    }
    let c = dec.counters();
    let delimiters = stream.iter().filter(|&&b| b == 0).count() as u32;
    assert_eq!(c.good, good);
    assert_eq!(c.good + c.empty + c.damaged(), delimiters);
    assert_eq!(c.bytes, stream.len() as u32);
});
