//! Fuzz the link capture reader: header and entries. A header that parses must survive
//! emit → parse unchanged (compared as bytes); every entry head that parses must emit the
//! same bytes back; the walk over entries must stay inside the input; sweep answers are fed
//! through the block decoder the header names, with every byte counted.
#![no_main]

use libfuzzer_sys::fuzz_target;
use sweepgate::wire::block::{BlockConfig, BlockDecoder, DecodeEvent};
use sweepgate::wire::capture::{CaptureHeader, Entry, HEADER_LEN, MAX_ENTRY_LEN};
use sweepgate::Complex32;

fuzz_target!(|data: &[u8]| {
    let Some((head, mut rest)) = data.split_first_chunk::<HEADER_LEN>() else {
        return;
    };
    let Ok(h) = CaptureHeader::parse(head) else {
        return;
    };
    let mut out = [0u8; HEADER_LEN];
    h.emit(&mut out);
    let h2 = CaptureHeader::parse(&out).expect("an emitted header parses");
    let mut out2 = [0u8; HEADER_LEN];
    h2.emit(&mut out2);
    assert_eq!(out, out2);
    let points = h.gate.grid.points();
    let mut dec = BlockConfig::new(points.min(64), h.format, h.order)
        .ok()
        .map(BlockDecoder::new);
    let mut buf = [Complex32::new(0.0, 0.0); 64];
    let mut fed_total = 0u64;
    let mut entries = 0usize;
    while let Some((&kind, tail)) = rest.split_first() {
        let Ok(n) = Entry::head_len(kind) else { break };
        let Some(head) = tail.get(..n) else { break };
        let e = Entry::parse(kind, head).expect("a head of head_len bytes parses");
        let mut em = [0u8; MAX_ENTRY_LEN];
        let m = em.len().min(Entry::emit(&e, &mut em));
        assert_eq!(m, n + 1);
        assert_eq!(em[0], kind);
        assert_eq!(&em[1..m], head);
        rest = &tail[n..];
        entries += 1;
        match e {
            Entry::End => break,
            Entry::Angle { .. } => {}
            Entry::Sweep { len, .. } => {
                let len = (len as usize).min(rest.len());
                let (answer, tail) = rest.split_at(len);
                rest = tail;
                if let Some(d) = &mut dec {
                    let mut chunk = answer;
                    while !chunk.is_empty() {
                        let fed = d.feed(chunk, &mut buf);
                        fed_total += fed.consumed as u64;
                        chunk = &chunk[fed.consumed..];
                        if let Some(DecodeEvent::Sweep { points: p }) = fed.event {
                            assert!(buf[..p]
                                .iter()
                                .all(|v| v.re.is_finite() && v.im.is_finite()));
                        }
                        if fed.consumed == 0 && fed.event.is_none() {
                            break;
                        }
                    }
                    let k = d.counters();
                    assert_eq!(
                        fed_total,
                        k.bytes_accepted + k.bytes_skipped + d.bytes_pending()
                    );
                }
            }
        }
    }
    assert!(entries <= data.len());
});
