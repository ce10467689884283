//! Fuzz the recording reader (`sweepgate_host::formats::recording::recover`). Checks that
//! nothing panics, that recovered records lie in order inside the input and do not overlap,
//! that every record but the header and its copies (JSON, written back in its own spelling)
//! framed again gives exactly the bytes it was read from, that the skipped stretches lie
//! between the records, in order, and with the stop offset inside the input, that the output
//! is bounded by the input (at most one record per 13 bytes), and that the header comes from
//! where the reader says.
#![no_main]

use libfuzzer_sys::fuzz_target;
use sweepgate_host::formats::recording::{
    recover, HeaderOrigin, Record, Stop, FILE_HEADER_LEN, FRAME_OVERHEAD, MAGIC,
};

fuzz_target!(|data: &[u8]| {
    // Half the inputs get a valid file header so that the reader gets past it.
    let mut bytes = Vec::with_capacity(data.len() + FILE_HEADER_LEN);
    if data.first().is_some_and(|b| b & 1 == 0) {
        bytes.extend_from_slice(MAGIC);
        bytes.extend_from_slice(&[1, 0, 0, 0]);
        bytes.extend_from_slice(&data[1..]);
    } else {
        bytes.extend_from_slice(data);
    }
    let r = recover(&bytes);
    let len = bytes.len() as u64;
    assert!(r.stop_offset <= len);
    assert!(r.records.len() <= bytes.len() / FRAME_OVERHEAD);
    let framed = |o: u64| {
        let o = o as usize;
        let l = u32::from_le_bytes([bytes[o + 4], bytes[o + 5], bytes[o + 6], bytes[o + 7]]);
        FRAME_OVERHEAD as u64 + u64::from(l)
    };
    let mut end = FILE_HEADER_LEN as u64;
    for (off, rec) in &r.records {
        assert!(
            *off >= end,
            "record at {off} overlaps the previous one ending at {end}"
        );
        let stop = off + framed(*off);
        assert!(stop <= len);
        if !matches!(rec, Record::Header(_) | Record::HeaderCopy(_)) {
            assert_eq!(&bytes[*off as usize..stop as usize], &rec.frame()[..]);
        }
        end = stop;
    }
    // Records (their length as framed in the file) and skipped stretches tile the file
    // from its header on, without gaps, up to where reading stopped.
    let mut pieces: Vec<(u64, u64)> = r
        .records
        .iter()
        .map(|(o, _)| (*o, framed(*o)))
        .chain(r.damage.iter().map(|d| (d.offset, d.skipped)))
        .collect();
    pieces.sort_unstable();
    let mut at = FILE_HEADER_LEN as u64;
    for (o, n) in pieces {
        assert!(n > 0 && o == at && o + n <= len, "piece {o}+{n} after {at}");
        at = o + n;
    }
    if !matches!(r.stop, Stop::BadFileHeader(_)) {
        assert_eq!(at, r.stop_offset, "pieces end where reading stopped");
    }
    let header_at = |k: u8| {
        r.records
            .iter()
            .find(|(_, x)| x.kind() == k)
            .map(|(o, _)| *o)
    };
    match r.header_origin() {
        Some(HeaderOrigin::Record(o)) => assert_eq!(Some(o), header_at(1)),
        Some(HeaderOrigin::Copy(o)) => assert!(header_at(1).is_none() && Some(o) == header_at(6)),
        Some(HeaderOrigin::Supplied) => panic!("recover never rebuilds a header"),
        None => assert!(r.header().is_none() && header_at(1).is_none() && header_at(6).is_none()),
    }
    match r.stop {
        Stop::Complete => assert!(matches!(r.records.last(), Some((_, Record::End { .. })))),
        Stop::EndOfData => assert_eq!(r.stop_offset, len),
        Stop::Fault(_) => assert!(r.stop_offset < len),
        Stop::BadFileHeader(_) => assert!(r.records.is_empty()),
    }
    let line = r.describe_stop();
    assert!(!line.contains('\n'));
});
