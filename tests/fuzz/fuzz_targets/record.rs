//! Fuzz the recording reader (`sweepgate_host::formats::recording::recover`). Checks that
//! nothing panics, that recovered records lie in order inside the input and do not overlap,
//! that every non-header record framed again gives exactly the bytes it was read from, that
//! the skipped stretches and the stop offset lie inside the input, and that the output is
//! bounded by the input (at most one record per 13 bytes).
#![no_main]

use libfuzzer_sys::fuzz_target;
use sweepgate_host::formats::recording::{
    recover, Record, Stop, FILE_HEADER_LEN, FRAME_OVERHEAD, MAGIC,
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
    let mut end = FILE_HEADER_LEN as u64;
    for (off, rec) in &r.records {
        assert!(
            *off >= end,
            "record at {off} overlaps the previous one ending at {end}"
        );
        let frame = rec.frame();
        let stop = off + frame.len() as u64;
        if !matches!(rec, Record::Header(_)) {
            assert_eq!(&bytes[*off as usize..stop as usize], &frame[..]);
        }
        assert!(stop <= len);
        end = stop;
    }
    for d in &r.damage {
        assert!(d.offset + d.skipped <= len);
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
