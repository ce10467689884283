//! Recordings of several traces and axes (kind 8, `formats::traces`): written beside the
//! ordinary records, they read back whole, and a reader that knows only the ordinary kinds
//! reads exactly what it read before (the kind 8 records pass through as unknown kinds).

use sweepgate_host::formats::recording::{recover, Record, Stop, Writer};
use sweepgate_host::formats::traces::{Names, Traces, TracesRecord};
use sweepgate_host::model::scenario::Scenario;
use sweepgate_host::pipeline::simulate::simulate_to;

fn small_recording() -> Vec<u8> {
    let mut s = Scenario::from_toml(include_str!("../scenarios/demo-lab.toml")).unwrap();
    s.sweep.points = 21;
    s.positioner.start_deg = -3.0;
    s.positioner.stop_deg = 3.0;
    s.pattern.frequencies_hz = vec![10e9];
    s.validate().unwrap();
    simulate_to(&s, None, 5, Vec::new(), false).unwrap().0
}

/// The ordinary records again, with or without kind 8 records beside them: a second trace
/// of each sweep (its values halved and turned a quarter) and a second axis at each
/// position sample (its time in ms, as a made-up elevation).
fn rewrite(records: &[(u64, Record)], with_traces: bool) -> Vec<u8> {
    let mut w = Writer::new(Vec::new()).unwrap();
    for (_, r) in records {
        if matches!(r, Record::HeaderCopy(_) | Record::End { .. }) {
            continue;
        }
        w.write(r).unwrap();
        if !with_traces {
            continue;
        }
        let extra = match r {
            Record::Header(_) => Some(TracesRecord::Names(Names {
                traces: vec!["S21".into(), "S31".into()],
                axes: vec!["azimuth".into(), "elevation".into()],
            })),
            Record::Sweep { index, s21, .. } => Some(TracesRecord::Traces {
                index: *index,
                traces: vec![s21
                    .iter()
                    .map(|v| v * num_complex::Complex32::new(0.0, 0.5))
                    .collect()],
            }),
            Record::Position { t_us, .. } => Some(TracesRecord::Axes {
                t_us: *t_us,
                angles_deg: vec![*t_us as f64 * 1e-3],
            }),
            _ => None,
        };
        if let Some(e) = extra {
            w.write(&e.to_record()).unwrap();
        }
    }
    w.finish().unwrap().0
}

#[test]
fn kind_8_records_read_back_and_older_readers_see_the_same_scan() {
    let original = recover(&small_recording());
    assert_eq!(original.stop, Stop::Complete);
    let plain = rewrite(&original.records, false);
    let with = rewrite(&original.records, true);
    let (a, b) = (recover(&plain), recover(&with));
    assert_eq!(
        (a.stop.clone(), b.stop.clone()),
        (Stop::Complete, Stop::Complete)
    );
    assert!(b.damage.is_empty());
    let ordinary = |r: &Record| !matches!(r, Record::Unknown { kind: 8, .. });
    let a_recs: Vec<&Record> = a.records.iter().map(|(_, r)| r).collect();
    let b_recs: Vec<&Record> = b
        .records
        .iter()
        .map(|(_, r)| r)
        .filter(|r| ordinary(r))
        .collect();
    assert_eq!(a_recs, b_recs);

    let t = Traces::collect(&b.records);
    assert!(t.faults.is_empty());
    assert_eq!(t.names.as_ref().unwrap().traces, ["S21", "S31"]);
    let sweeps: Vec<(u32, &Vec<num_complex::Complex32>)> = b
        .records
        .iter()
        .filter_map(|(_, r)| match r {
            Record::Sweep { index, s21, .. } => Some((*index, s21)),
            _ => None,
        })
        .collect();
    assert!(sweeps.len() > 10);
    assert_eq!(t.further.len(), sweeps.len());
    for (i, s21) in sweeps {
        let second = &t.further[&i][0];
        assert_eq!(second.len(), s21.len());
        for (x, y) in second.iter().zip(s21) {
            assert_eq!(*x, y * num_complex::Complex32::new(0.0, 0.5));
        }
    }
    let positions = b
        .records
        .iter()
        .filter(|(_, r)| matches!(r, Record::Position { .. }))
        .count();
    assert_eq!(t.axes.len(), positions);
    assert!(t
        .axes
        .iter()
        .all(|(t_us, a)| a == &vec![*t_us as f64 * 1e-3]));
    assert!(Traces::collect(&a.records).is_empty());
}
