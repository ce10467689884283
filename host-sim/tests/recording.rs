//! Recordings survive truncation and damage: every intact record is read back, and the
//! reader says where and why it stopped.

use sweepgate_host::formats::recording::{recover, Fault, Record, Stop, FILE_HEADER_LEN};
use sweepgate_host::model::scenario::Scenario;
use sweepgate_host::model::simulator::Noise;
use sweepgate_host::pipeline::simulate::simulate_to;

/// A short, small simulated recording (demo lab, ±3°, 21 points).
fn small_recording() -> Vec<u8> {
    let mut s = Scenario::from_toml(include_str!("../scenarios/demo-lab.toml")).unwrap();
    s.sweep.points = 21;
    s.positioner.start_deg = -3.0;
    s.positioner.stop_deg = 3.0;
    s.pattern.frequencies_hz = vec![10e9];
    s.validate().unwrap();
    simulate_to(&s, None, 5, Vec::new(), false).unwrap().0
}

/// Offsets where each record starts, plus the file length.
fn boundaries(bytes: &[u8]) -> Vec<usize> {
    let all = recover(bytes);
    assert_eq!(all.stop, Stop::Complete);
    assert!(all.damage.is_empty());
    let mut b: Vec<usize> = all.records.iter().map(|(o, _)| *o as usize).collect();
    b.push(bytes.len());
    b
}

#[test]
fn a_complete_recording_reads_back_whole() {
    let bytes = small_recording();
    let r = recover(&bytes);
    assert_eq!(r.stop, Stop::Complete);
    assert_eq!(r.stop_offset as usize, bytes.len());
    let h = r.header().unwrap();
    assert_eq!(h.grid.points, 21);
    assert_eq!(h.sweep_format, "complex-f32-le");
    let sweeps = r
        .records
        .iter()
        .filter(|(_, x)| matches!(x, Record::Sweep { .. }))
        .count();
    let positions = r
        .records
        .iter()
        .filter(|(_, x)| matches!(x, Record::Position { .. }))
        .count();
    let truths = r
        .records
        .iter()
        .filter(|(_, x)| matches!(x, Record::Truth { .. }))
        .count();
    assert!(sweeps > 5 && positions > 5 && truths == 6);
    match &r.records.last().unwrap().1 {
        Record::End {
            sweeps: s,
            positions: p,
            truths: t,
        } => {
            assert_eq!(
                (*s as usize, *p as usize, *t as usize),
                (sweeps, positions, truths)
            );
        }
        other => panic!("last record {other:?}"),
    }
    // Records are in time order: no sweep ends before a position written after it.
    let mut last_t = 0;
    for (_, rec) in &r.records {
        match rec {
            Record::Sweep {
                end_us,
                start_us,
                s21,
                ..
            } => {
                assert!(*end_us >= last_t && end_us > start_us && s21.len() == 21);
                last_t = *end_us;
            }
            Record::Position { t_us, .. } => {
                assert!(*t_us >= last_t.saturating_sub(1_000));
            }
            _ => {}
        }
    }
}

#[test]
fn cut_at_every_record_boundary() {
    let bytes = small_recording();
    let b = boundaries(&bytes);
    let full = recover(&bytes);
    for (n, &cut) in b.iter().enumerate() {
        let r = recover(&bytes[..cut]);
        assert_eq!(r.records.len(), n, "cut at {cut}");
        assert_eq!(r.records[..], full.records[..n]);
        assert_eq!(r.stop_offset as usize, cut);
        let want = if cut == bytes.len() {
            Stop::Complete
        } else {
            Stop::EndOfData
        };
        assert_eq!(r.stop, want, "cut at {cut}");
        assert!(r.damage.is_empty());
    }
}

#[test]
fn cut_at_random_offsets() {
    let bytes = small_recording();
    let b = boundaries(&bytes);
    let full = recover(&bytes);
    let mut rng = Noise::new(11);
    for _ in 0..300 {
        let cut = (rng.next_u64() % bytes.len() as u64) as usize;
        let r = recover(&bytes[..cut]);
        if cut < FILE_HEADER_LEN {
            assert!(matches!(r.stop, Stop::BadFileHeader(_)));
            assert!(r.records.is_empty());
            continue;
        }
        // The last intact record is the last one ending at or before the cut.
        let intact = b.iter().skip(1).filter(|&&end| end <= cut).count();
        assert_eq!(r.records.len(), intact, "cut at {cut}");
        assert_eq!(r.records[..], full.records[..intact]);
        assert_eq!(r.stop_offset as usize, b[intact]);
        if b.contains(&cut) {
            assert_eq!(r.stop, Stop::EndOfData);
        } else {
            assert!(
                matches!(r.stop, Stop::Fault(Fault::Truncated { .. })),
                "{:?}",
                r.stop
            );
            assert!(r.describe_stop().contains(&format!("byte {}", b[intact])));
        }
    }
}

#[test]
fn a_flipped_byte_is_caught_and_the_rest_recovered() {
    let bytes = small_recording();
    let b = boundaries(&bytes);
    let full = recover(&bytes);
    // Pick a sweep record and a position record in the middle and flip every one of
    // their bytes in turn.
    let pick = |want_sweep: bool| {
        full.records
            .iter()
            .enumerate()
            .skip(full.records.len() / 2)
            .find(|(_, (_, r))| matches!(r, Record::Sweep { .. }) == want_sweep)
            .unwrap()
            .0
    };
    for i in [pick(true), pick(false)] {
        for at in b[i]..b[i + 1] {
            let mut damaged = bytes.clone();
            damaged[at] ^= 0x10;
            let r = recover(&damaged);
            assert_eq!(r.damage.len(), 1, "flip at {at}");
            assert_eq!(r.damage[0].offset as usize, b[i]);
            assert_eq!(r.damage[0].skipped as usize, b[i + 1] - b[i]);
            let mut want = full.records.clone();
            want.remove(i);
            assert_eq!(r.records, want, "flip at {at}");
            assert_eq!(r.stop, Stop::Complete);
        }
    }
    // A flip in the payload is a CRC mismatch.
    let mut damaged = bytes.clone();
    damaged[b[5] + 20] ^= 0x01;
    let r = recover(&damaged);
    assert!(
        matches!(r.damage[0].fault, Fault::BadCrc { .. }),
        "{:?}",
        r.damage
    );
    // Damage in the last record (the end record): everything before it, and the reader
    // says where it stopped.
    let mut damaged = bytes.clone();
    let last = damaged.len() - 6;
    damaged[last] ^= 0xFF;
    let r = recover(&damaged);
    assert_eq!(r.records.len(), full.records.len() - 1);
    assert_eq!(r.stop_offset as usize, b[b.len() - 2]);
    assert!(
        matches!(r.stop, Stop::Fault(Fault::BadCrc { .. })),
        "{:?}",
        r.stop
    );
}
