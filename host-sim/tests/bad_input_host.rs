//! The bad-input matrix of the host: for each boundary (recording file, Touchstone file,
//! manifest, scenario file, plan file, gain table, instrument profile, positioner lines,
//! CLI arguments of the real `sweepgate` binary) a table of malformed inputs — truncated,
//! oversized, wrong counts, NaN/Inf, duplicates, empty files, binary garbage, UTF-16 and
//! Latin-1 text — each with the typed error it must produce, a message on one line naming
//! the file and the line, byte offset or field, and for the binary a non-zero exit status.
//! Every case runs under `catch_unwind`, so a panic fails that case and the table goes on.
//! The expected errors are this program's own contract (module docs of each reader); the
//! Touchstone rules are the Touchstone File Format Specification 2.0 (IBIS Open Forum).

use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::{Path, PathBuf};
use std::process::Command;

use sweepgate_host::formats::gain_table::GainTable;
use sweepgate_host::formats::manifest::{Manifest, ManifestErrorKind};
use sweepgate_host::formats::recording::{recover, Fault, Record, Stop, Writer};
use sweepgate_host::formats::touchstone::{Touchstone, TouchstoneErrorKind as TK};
use sweepgate_host::link::acquire::{parse_angle_line, Profile};
use sweepgate_host::model::scenario::Scenario;
use sweepgate_host::pipeline::plan::parse_plan_source;

type Case = (&'static str, Box<dyn Fn() -> Result<(), String>>);

fn check(cond: bool, what: impl FnOnce() -> String) -> Result<(), String> {
    if cond {
        Ok(())
    } else {
        Err(what())
    }
}

/// A message is one line and names what it must (file, line, offset or field).
fn one_line(msg: &str, names: &[&str]) -> Result<(), String> {
    check(!msg.trim_end().contains('\n'), || {
        format!("message on several lines: {msg:?}")
    })?;
    for n in names {
        check(msg.contains(n), || {
            format!("message {msg:?} does not name {n:?}")
        })?;
    }
    Ok(())
}

fn run(boundary: &str, table: Vec<Case>) -> usize {
    let mut failed = Vec::new();
    let mut tried = 0;
    for (name, f) in &table {
        tried += 1;
        match catch_unwind(AssertUnwindSafe(f)) {
            Ok(Ok(())) => {}
            Ok(Err(e)) => failed.push(format!("{boundary} / {name}: {e}")),
            Err(_) => failed.push(format!("{boundary} / {name}: PANICKED")),
        }
    }
    assert_eq!(tried, table.len());
    eprintln!("bad-input matrix (host) {boundary}: {tried} cases");
    println!("bad-input matrix (host) {boundary}: {tried} cases");
    assert!(failed.is_empty(), "{}", failed.join("\n"));
    tried
}

fn tmp() -> PathBuf {
    let d = std::env::temp_dir().join(format!("sweepgate-bad-input-{}", std::process::id()));
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn write(name: &str, bytes: &[u8]) -> PathBuf {
    let p = tmp().join(name);
    std::fs::write(&p, bytes).unwrap();
    p
}

fn utf16(s: &str) -> Vec<u8> {
    let mut v = vec![0xFF, 0xFE];
    v.extend(s.encode_utf16().flat_map(|u| u.to_le_bytes()));
    v
}

// ---------------------------------------------------------------- recordings

fn recording() -> (Vec<u8>, Vec<u64>) {
    let mut w = Writer::new(Vec::new()).unwrap();
    let mut offs = Vec::new();
    for i in 0..4u32 {
        offs.push(
            w.write(&Record::Sweep {
                index: i,
                start_us: u64::from(i) * 100,
                end_us: u64::from(i) * 100 + 50,
                s21: vec![num_complex::Complex32::new(1.0, -1.0); 3],
            })
            .unwrap(),
        );
    }
    let (b, _) = w.finish().unwrap();
    (b, offs)
}

fn rec_case(
    edit: fn(&mut Vec<u8>, &[u64]),
    want: fn(&sweepgate_host::formats::recording::Recovered, &[u64]) -> bool,
    names: fn(&[u64]) -> Vec<String>,
) -> Box<dyn Fn() -> Result<(), String>> {
    Box::new(move || {
        let (mut b, offs) = recording();
        edit(&mut b, &offs);
        let r = recover(&b);
        check(want(&r, &offs), || {
            format!("recovered {:?} / {:?}", r.stop, r.damage)
        })?;
        let msg = r.describe_stop();
        let n = names(&offs);
        one_line(&msg, &n.iter().map(String::as_str).collect::<Vec<_>>())
    })
}

fn sweeps(r: &sweepgate_host::formats::recording::Recovered) -> usize {
    r.records
        .iter()
        .filter(|(_, x)| matches!(x, Record::Sweep { .. }))
        .count()
}

fn recording_table() -> Vec<Case> {
    vec![
        (
            "empty file",
            rec_case(
                |b, _| b.clear(),
                |r, _| matches!(&r.stop, Stop::BadFileHeader(s) if s.contains("only 0 bytes")),
                |_| vec!["not a recording".into()],
            ),
        ),
        (
            "file shorter than its header",
            rec_case(
                |b, _| b.truncate(5),
                |r, _| matches!(&r.stop, Stop::BadFileHeader(s) if s.contains("only 5 bytes")),
                |_| vec![],
            ),
        ),
        (
            "wrong magic",
            rec_case(
                |b, _| b[0] = b'X',
                |r, _| matches!(&r.stop, Stop::BadFileHeader(s) if s.contains("SWEEPREC")),
                |_| vec![],
            ),
        ),
        (
            "future version",
            rec_case(
                |b, _| b[8] = 2,
                |r, _| matches!(&r.stop, Stop::BadFileHeader(s) if s.contains("version 2")),
                |_| vec![],
            ),
        ),
        (
            "UTF-16 text instead of a recording",
            rec_case(
                |b, _| *b = utf16("SWEEPREC and more text"),
                |r, _| matches!(r.stop, Stop::BadFileHeader(_)),
                |_| vec![],
            ),
        ),
        (
            "cut inside the last record",
            rec_case(
                |b, _| b.truncate(b.len() - 10),
                |r, _| {
                    matches!(r.stop, Stop::Fault(Fault::Truncated { .. }))
                        && sweeps(r) == 4
                        && r.damage.is_empty()
                },
                |_| vec!["stopped at byte".into()],
            ),
        ),
        (
            "cut at a record boundary (no end record)",
            rec_case(
                |b, o| b.truncate(o[3] as usize),
                |r, o| r.stop == Stop::EndOfData && r.stop_offset == o[3] && sweeps(r) == 3,
                |o| vec![format!("byte {}", o[3])],
            ),
        ),
        (
            "flipped byte in a middle record: skipped, the rest recovered",
            rec_case(
                |b, o| b[o[1] as usize + 20] ^= 0x40,
                |r, o| {
                    sweeps(r) == 3
                        && r.damage.len() == 1
                        && r.damage[0].offset == o[1]
                        && matches!(r.damage[0].fault, Fault::BadCrc { .. })
                        && r.stop == Stop::Complete
                },
                |_| vec!["complete".into()],
            ),
        ),
        (
            "oversized length field",
            rec_case(
                |b, o| {
                    b[o[2] as usize + 4..o[2] as usize + 8].copy_from_slice(&u32::MAX.to_le_bytes())
                },
                |r, o| {
                    sweeps(r) == 3
                        && r.damage.first().is_some_and(|d| {
                            d.offset == o[2] && d.fault == Fault::TooLong(u32::MAX)
                        })
                },
                |_| vec![],
            ),
        ),
        (
            "wrong point count inside a sweep record (CRC recomputed)",
            rec_case(
                |b, o| {
                    let at = o[0] as usize;
                    // Point count field: sync 4 + len 4 + kind 1 + index 4 + 2 × u64.
                    b[at + 29..at + 33].copy_from_slice(&7u32.to_le_bytes());
                    let len = u32::from_le_bytes(b[at + 4..at + 8].try_into().unwrap()) as usize;
                    let crc = crc32fast::hash(&b[at + 4..at + 9 + len]);
                    b[at + 9 + len..at + 13 + len].copy_from_slice(&crc.to_le_bytes());
                },
                |r, o| {
                    sweeps(r) == 3 && r.damage.first().is_some_and(|d| {
                        d.offset == o[0]
                            && matches!(&d.fault, Fault::BadPayload(s) if s.contains("7 points"))
                    })
                },
                |_| vec![],
            ),
        ),
        (
            "binary garbage after the file header",
            rec_case(
                |b, _| {
                    b.truncate(12);
                    b.extend((0..4000u32).map(|i| (i.wrapping_mul(2_654_435_761) >> 24) as u8));
                },
                |r, _| {
                    r.records.is_empty() && r.stop_offset == 12 && matches!(r.stop, Stop::Fault(_))
                },
                |_| vec!["byte 12".into()],
            ),
        ),
        (
            "garbage inserted between records",
            rec_case(
                |b, o| {
                    let at = o[2] as usize;
                    b.splice(at..at, [0xA5u8, 0x53, 0x47, 0x52, 1, 2, 3].iter().copied());
                },
                |r, o| {
                    sweeps(r) == 4
                        && r.damage.len() == 1
                        && r.damage[0].offset == o[2]
                        && r.damage[0].skipped == 7
                        && r.stop == Stop::Complete
                },
                |_| vec![],
            ),
        ),
        (
            "duplicate record (the reader keeps both; judging is the replayer's)",
            rec_case(
                |b, o| {
                    let rec = b[o[1] as usize..o[2] as usize].to_vec();
                    let at = o[2] as usize;
                    b.splice(at..at, rec);
                },
                |r, _| sweeps(r) == 5 && r.damage.is_empty() && r.stop == Stop::Complete,
                |_| vec![],
            ),
        ),
        (
            "only the file header",
            rec_case(
                |b, _| b.truncate(12),
                |r, _| r.stop == Stop::EndOfData && r.records.is_empty(),
                |_| vec!["byte 12".into()],
            ),
        ),
    ]
}

// ---------------------------------------------------------------- Touchstone

fn ts(
    text: &str,
    name: &str,
    want: fn(&TK) -> bool,
    line: Option<usize>,
) -> Box<dyn Fn() -> Result<(), String>> {
    let (text, name) = (text.to_owned(), name.to_owned());
    Box::new(move || {
        let e = Touchstone::parse_str(&text, &name)
            .err()
            .ok_or("accepted")?;
        check(want(&e.kind), || format!("kind {:?}", e.kind))?;
        check(e.line == line, || {
            format!("line {:?}, want {line:?}", e.line)
        })?;
        let mut names = vec![name.clone()];
        if let Some(l) = line {
            names.push(format!(":{l}:"));
        }
        one_line(
            &e.to_string(),
            &names.iter().map(String::as_str).collect::<Vec<_>>(),
        )
    })
}

fn ts_file(bytes: Vec<u8>, want: fn(&TK) -> bool) -> Box<dyn Fn() -> Result<(), String>> {
    Box::new(move || {
        let p = write("bad.s1p", &bytes);
        let e = Touchstone::read(&p).err().ok_or("accepted")?;
        check(want(&e.kind), || format!("kind {:?}", e.kind))?;
        one_line(&e.to_string(), &["bad.s1p"])
    })
}

fn touchstone_table() -> Vec<Case> {
    let h = "# GHz S RI R 50\n";
    vec![
        (
            "empty file",
            ts("", "a.s1p", |k| !matches!(k, TK::Io(_)), None),
        ),
        (
            "record too short (truncated)",
            ts(
                &format!("{h}1 0.5 0.1\n2 0.5\n"),
                "a.s1p",
                |k| {
                    matches!(
                        k,
                        TK::RecordLength {
                            expected: 3,
                            found: 2,
                            ..
                        }
                    )
                },
                Some(3),
            ),
        ),
        (
            "a two-port record in a one-port file (wrong count)",
            ts(
                &format!("{h}1 0.5 0.1 0.2 0.3\n"),
                "a.s1p",
                |k| matches!(k, TK::RecordLength { .. }),
                Some(2),
            ),
        ),
        (
            "NaN value",
            ts(
                &format!("{h}1 NaN 0.1\n"),
                "a.s1p",
                |k| matches!(k, TK::NonFiniteNumber(_)),
                Some(2),
            ),
        ),
        (
            "infinite value",
            ts(
                &format!("{h}1 0.5 inf\n"),
                "a.s1p",
                |k| matches!(k, TK::NonFiniteNumber(_)),
                Some(2),
            ),
        ),
        (
            "negative frequency",
            ts(
                &format!("{h}-1 0.5 0.1\n"),
                "a.s1p",
                |k| matches!(k, TK::NegativeFrequency(_)),
                Some(2),
            ),
        ),
        (
            "frequency going backwards",
            ts(
                &format!("{h}2 0.5 0.1\n1 0.5 0.1\n"),
                "a.s1p",
                |k| matches!(k, TK::NotIncreasing { .. }),
                Some(3),
            ),
        ),
        (
            "duplicate frequency",
            ts(
                &format!("{h}1 0.5 0.1\n1 0.5 0.1\n"),
                "a.s1p",
                |k| matches!(k, TK::NotIncreasing { .. }),
                Some(3),
            ),
        ),
        (
            "not a number",
            ts(
                &format!("{h}1 0.5 x\n"),
                "a.s1p",
                |k| matches!(k, TK::BadNumber(_)),
                Some(2),
            ),
        ),
        (
            "unknown option",
            ts(
                "# GHz S QQ R 50\n1 0.5 0.1\n",
                "a.s1p",
                |k| matches!(k, TK::UnknownOption(_)),
                Some(1),
            ),
        ),
        (
            "duplicate option",
            ts(
                "# GHz MHz S RI\n1 0.5 0.1\n",
                "a.s1p",
                |k| matches!(k, TK::DuplicateOption(_)),
                Some(1),
            ),
        ),
        (
            "reference not positive",
            ts(
                "# GHz S RI R -50\n1 0.5 0.1\n",
                "a.s1p",
                |k| matches!(k, TK::BadReference(_)),
                Some(1),
            ),
        ),
        (
            "unknown extension",
            ts(
                &format!("{h}1 0.5 0.1\n"),
                "a.txt",
                |k| matches!(k, TK::UnknownExtension),
                None,
            ),
        ),
        (
            "unsupported version",
            ts(
                "[Version] 3.0\n# GHz S RI R 50\n",
                "a.s1p",
                |k| matches!(k, TK::UnsupportedVersion(_)),
                Some(1),
            ),
        ),
        (
            // Files are read lossily: Latin-1 in a comment is harmless and kept out.
            "Latin-1 in a comment: read",
            Box::new(|| {
                let p = write(
                    "latin1.s1p",
                    b"! mesure \xe0 20\xb0C\n# GHz S RI R 50\n1 0.5 0.1\n",
                );
                let t = Touchstone::read(&p).map_err(|e| e.to_string())?;
                check(t.frequencies_hz() == [1e9], || {
                    format!("{:?}", t.frequencies_hz())
                })
            }),
        ),
        (
            "Latin-1 in a number",
            ts_file(b"# GHz S RI R 50\n1 0.5\xb0 0.1\n".to_vec(), |k| {
                matches!(k, TK::BadNumber(_))
            }),
        ),
        (
            "UTF-16 file",
            ts_file(utf16("# GHz S RI R 50\n1 0.5 0.1\n"), |k| {
                matches!(k, TK::BadNumber(_))
            }),
        ),
        (
            "binary garbage",
            ts_file((0..=255u8).cycle().take(3000).collect(), |k| {
                matches!(k, TK::BadNumber(_))
            }),
        ),
    ]
}

// ---------------------------------------------------------------- manifest

fn manifest(
    text: &str,
    want: fn(&ManifestErrorKind) -> bool,
    line: Option<usize>,
) -> Box<dyn Fn() -> Result<(), String>> {
    let text = text.to_owned();
    Box::new(move || {
        let dir = tmp();
        std::fs::write(
            dir.join("ok.s1p"),
            "# GHz S RI R 50\n1 0.5 0.1\n2 0.5 0.1\n",
        )
        .unwrap();
        let e = Manifest::parse_str(&text, "scan.csv", &dir)
            .err()
            .ok_or("accepted")?;
        check(want(&e.kind), || format!("kind {:?}", e.kind))?;
        check(e.line == line, || format!("line {:?}", e.line))?;
        let mut n = vec!["scan.csv".to_owned()];
        if let Some(l) = line {
            n.push(format!(":{l}:"));
        }
        one_line(
            &e.to_string(),
            &n.iter().map(String::as_str).collect::<Vec<_>>(),
        )
    })
}

fn manifest_table() -> Vec<Case> {
    use ManifestErrorKind as M;
    let h = "angle_deg,file\n";
    vec![
        (
            "empty file",
            manifest("", |k| matches!(k, M::BadHeader(_) | M::NoRows), None),
        ),
        ("header only", manifest(h, |k| matches!(k, M::NoRows), None)),
        (
            "wrong header",
            manifest(
                "angle,name\n0,ok.s1p\n",
                |k| matches!(k, M::BadHeader(_)),
                Some(1),
            ),
        ),
        (
            "missing comma",
            manifest(
                &format!("{h}0 ok.s1p\n"),
                |k| matches!(k, M::MissingFileField),
                Some(2),
            ),
        ),
        (
            "empty file name",
            manifest(
                &format!("{h}0,\n"),
                |k| matches!(k, M::EmptyFileName),
                Some(2),
            ),
        ),
        (
            "unclosed quote",
            manifest(
                &format!("{h}0,\"ok.s1p\n"),
                |k| matches!(k, M::UnclosedQuote),
                Some(2),
            ),
        ),
        (
            "angle not a number",
            manifest(
                &format!("{h}ten,ok.s1p\n"),
                |k| matches!(k, M::BadAngle(_)),
                Some(2),
            ),
        ),
        (
            "NaN angle",
            manifest(
                &format!("{h}NaN,ok.s1p\n"),
                |k| matches!(k, M::NonFiniteAngle(_)),
                Some(2),
            ),
        ),
        (
            "duplicate angle",
            manifest(
                &format!("{h}0,ok.s1p\n0,ok.s1p\n"),
                |k| matches!(k, M::DuplicateAngle { first_line: 2, .. }),
                Some(3),
            ),
        ),
        (
            "missing file",
            manifest(
                &format!("{h}0,gone.s1p\n"),
                |k| matches!(k, M::MissingFile(_)),
                Some(2),
            ),
        ),
    ]
}

// ---------------------------------------------------------------- scenario, plan, gain, profile

fn shipped(name: &str) -> String {
    std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("scenarios")
            .join(name),
    )
    .unwrap()
}

fn scenario_err(
    text: String,
    names: &'static [&'static str],
) -> Box<dyn Fn() -> Result<(), String>> {
    Box::new(move || {
        let e = match Scenario::from_toml(&text)
            .and_then(|s| s.validate().map(|_| s).map_err(Into::into))
        {
            Ok(_) => return Err("accepted".into()),
            Err(e) => format!("{e:#}"),
        };
        one_line(&e, names)
    })
}

fn scenario_table() -> Vec<Case> {
    let s = shipped("demo-lab.toml");
    // Replaces the first line setting `key` (values of the shipped file may change).
    let sub = |key_line: &str, to: &str| {
        let key = key_line.split('=').next().unwrap().trim();
        let mut done = false;
        let out: Vec<String> = s
            .lines()
            .map(|l| {
                let t = l.trim_start();
                if !done && t.starts_with(key) && t[key.len()..].trim_start().starts_with('=') {
                    done = true;
                    to.to_owned()
                } else {
                    l.to_owned()
                }
            })
            .collect();
        assert!(done, "{key}");
        out.join("\n")
    };
    vec![
        (
            "empty file",
            scenario_err(String::new(), &["missing field"]),
        ),
        (
            "zero points",
            scenario_err(sub("points = 201", "points = 0"), &["sweep.points"]),
        ),
        (
            "NaN start",
            scenario_err(
                sub("start_hz = 8.0e9", "start_hz = nan"),
                &["sweep.start_hz"],
            ),
        ),
        (
            "infinite stop",
            scenario_err(sub("stop_hz = 12.0e9", "stop_hz = inf"), &["sweep"]),
        ),
        (
            "stop below start",
            scenario_err(sub("stop_hz = 12.0e9", "stop_hz = 1.0e9"), &["sweep"]),
        ),
        (
            "unknown field",
            scenario_err(sub("points = 201", "points = 201\npointz = 3"), &["pointz"]),
        ),
        (
            "wrong type",
            scenario_err(
                sub("points = 201", "points = \"many\""),
                &["column 10", "many"],
            ),
        ),
        (
            "duplicate key",
            scenario_err(
                sub("points = 201", "points = 201\npoints = 202"),
                &["points"],
            ),
        ),
        (
            "binary garbage",
            scenario_err(
                String::from_utf8_lossy(&(1..=255u8).collect::<Vec<_>>()).into_owned(),
                &[],
            ),
        ),
        (
            "oversized sweep count",
            scenario_err(sub("speed_deg_s = 15.0", "speed_deg_s = 0.0001"), &[]),
        ),
    ]
}

fn plan_table() -> Vec<Case> {
    let p = std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("plans/loading-dock.toml"),
    )
    .unwrap();
    let case =
        |text: String, names: &'static [&'static str]| -> Box<dyn Fn() -> Result<(), String>> {
            Box::new(move || {
                let e = match parse_plan_source(&text, "dock.toml") {
                    Ok(_) => return Err("accepted".into()),
                    Err(e) => format!("{e:#}"),
                };
                one_line(&e, names)
            })
        };
    vec![
        ("empty file", case(String::new(), &["dock.toml"])),
        (
            "not TOML",
            case("[[[ nope".into(), &["dock.toml", "not valid TOML"]),
        ),
        (
            "unknown field",
            case(
                p.replacen("distance_m = 6.0", "distance_m = 6.0\ndistanse_m = 3", 1),
                &["dock.toml", "distanse_m"],
            ),
        ),
        (
            "NaN distance",
            case(
                p.replacen("distance_m = 6.0", "distance_m = nan", 1),
                &["dock.toml"],
            ),
        ),
        (
            "negative points",
            case(
                p.replacen("points = 401", "points = -4", 1),
                &["dock.toml", "line 13", "-4"],
            ),
        ),
        (
            "UTF-16 text (read lossily)",
            case(
                String::from_utf8_lossy(&utf16("name = 'x'")).into_owned(),
                &["dock.toml"],
            ),
        ),
    ]
}

fn gain_table() -> Vec<Case> {
    let case = |text: &'static str, line: Option<usize>| -> Box<dyn Fn() -> Result<(), String>> {
        Box::new(move || {
            let e = GainTable::parse(text, "horn.csv").err().ok_or("accepted")?;
            check(e.line == line, || format!("line {:?}: {e}", e.line))?;
            let mut n = vec!["horn.csv".to_owned()];
            if let Some(l) = line {
                n.push(format!("line {l}"));
            }
            one_line(
                &e.to_string(),
                &n.iter().map(String::as_str).collect::<Vec<_>>(),
            )
        })
    };
    vec![
        ("empty file", case("", None)),
        ("wrong header", case("f,g\n1e9,10\n", Some(1))),
        ("header only", case("frequency_hz,gain_dbi\n", None)),
        (
            "NaN gain",
            case("frequency_hz,gain_dbi\n1e9,NaN\n", Some(2)),
        ),
        (
            "infinite frequency",
            case("frequency_hz,gain_dbi\ninf,10\n", Some(2)),
        ),
        (
            "frequencies going backwards",
            case("frequency_hz,gain_dbi\n2e9,10\n1e9,10\n", Some(3)),
        ),
        (
            "duplicate frequency",
            case("frequency_hz,gain_dbi\n1e9,10\n1e9,11\n", Some(3)),
        ),
        (
            "three columns",
            case("frequency_hz,gain_dbi\n1e9,10,3\n", Some(2)),
        ),
        (
            "not a number",
            case("frequency_hz,gain_dbi\n1e9,ten\n", Some(2)),
        ),
    ]
}

fn profile_table() -> Vec<Case> {
    let base = "name = 'x'\ndata = 'D?'\nformat = 'real32'\n[grid]\nstart_hz = 1e9\nstop_hz = 2e9\npoints = 3\n";
    let case =
        |text: String, names: &'static [&'static str]| -> Box<dyn Fn() -> Result<(), String>> {
            Box::new(move || {
                let e = format!("{:#}", Profile::from_toml(&text).err().ok_or("accepted")?);
                one_line(&e, names)
            })
        };
    let ins = |extra: &str| base.replacen("[grid]", &format!("{extra}\n[grid]"), 1);
    vec![
        ("empty file", case(String::new(), &["missing field"])),
        (
            "unknown format",
            case(base.replace("real32", "real16"), &["real16"]),
        ),
        ("zero timeout", case(ins("timeout_s = 0"), &["timeout_s"])),
        ("NaN timeout", case(ins("timeout_s = nan"), &["timeout_s"])),
        (
            "too many retries",
            case(ins("retries = 1000"), &["retries"]),
        ),
        (
            "negative backoff",
            case(ins("retry_backoff_s = -1"), &["retry_backoff_s"]),
        ),
        ("unknown field", case(ins("tiemout_s = 1"), &["tiemout_s"])),
        (
            "zero counts per turn",
            case(ins("counts_per_turn = 0"), &["counts_per_turn"]),
        ),
        (
            "unknown byte order",
            case(ins("byte_order = 'middle'"), &["middle"]),
        ),
    ]
}

fn positioner_table() -> Vec<Case> {
    let case = |line: &'static str,
                names: &'static [&'static str]|
     -> Box<dyn Fn() -> Result<(), String>> {
        Box::new(move || {
            let e = parse_angle_line(line).err().ok_or("accepted")?;
            one_line(&e, names)
        })
    };
    vec![
        ("NaN angle", case("100 NaN", &["not finite"])),
        ("infinite angle", case("100 inf", &["not finite"])),
        ("negative time", case("-5 10.0", &["t_us"])),
        ("one field (truncated)", case("100", &["expected"])),
        ("three fields", case("100 1 2", &["expected"])),
        (
            "Latin-1 degree sign",
            case("100 10.0\u{b0}", &["angle_deg"]),
        ),
        (
            "UTF-16 line read as bytes",
            case("1\u{0}0\u{0}0\u{0} \u{0}1\u{0}", &[]),
        ),
        (
            "time beyond u64",
            case("99999999999999999999999 1.0", &["t_us"]),
        ),
    ]
}

// ---------------------------------------------------------------- CLI

fn cli(args: Vec<String>, code: i32, names: Vec<String>) -> Box<dyn Fn() -> Result<(), String>> {
    Box::new(move || {
        let o = Command::new(env!("CARGO_BIN_EXE_sweepgate"))
            .args(&args)
            .current_dir(tmp())
            .output()
            .map_err(|e| e.to_string())?;
        let err = String::from_utf8_lossy(&o.stderr);
        check(o.status.code() == Some(code), || {
            format!("exit {:?}, want {code}: {err}", o.status.code())
        })?;
        check(!err.contains("panicked"), || format!("panicked: {err}"))?;
        if code == 1 {
            // Our own errors: one `error:` line naming the file or field.
            let lines: Vec<_> = err.lines().filter(|l| l.starts_with("error:")).collect();
            check(lines.len() == 1, || format!("error lines: {err}"))?;
            one_line(
                lines[0],
                &names.iter().map(String::as_str).collect::<Vec<_>>(),
            )
        } else {
            // Argument errors from clap (exit 2): it names the argument (or prints usage).
            check(err.contains("error:") || err.contains("Usage"), || {
                err.to_string()
            })?;
            for n in &names {
                check(err.contains(n.as_str()), || {
                    format!("{err} does not name {n}")
                })?;
            }
            Ok(())
        }
    })
}

fn s(v: &[&str]) -> Vec<String> {
    v.iter().map(|x| x.to_string()).collect()
}

fn cli_table() -> Vec<Case> {
    let d = tmp();
    let p = |n: &str| d.join(n).display().to_string();
    std::fs::write(d.join("empty.toml"), "").unwrap();
    std::fs::write(d.join("utf16.toml"), utf16("name = 'x'\n")).unwrap();
    std::fs::write(d.join("latin1.toml"), b"name = 'caf\xe9'\n").unwrap();
    std::fs::write(d.join("garbage.bin"), (0..=255u8).collect::<Vec<_>>()).unwrap();
    std::fs::write(d.join("short.blk"), b"#216\x00\x00").unwrap();
    std::fs::write(
        d.join("bad-profile.toml"),
        "name = 'x'\ndata = 'D?'\nformat = 'real16'\n",
    )
    .unwrap();
    let demo = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("scenarios/demo-lab.toml")
        .display()
        .to_string();
    vec![
        ("no arguments", cli(vec![], 2, s(&["Usage"]))),
        (
            "unknown command",
            cli(s(&["frobnicate"]), 2, s(&["frobnicate"])),
        ),
        (
            "simulate without --out",
            cli(s(&["simulate", "--scenario", "x.toml"]), 2, s(&["--out"])),
        ),
        (
            "seed not a number",
            cli(
                s(&["simulate", "--scenario", "x", "--out", "y", "--seed", "-1"]),
                2,
                s(&["'-1'"]),
            ),
        ),
        (
            "scenario missing",
            cli(
                vec![
                    "simulate".into(),
                    "--scenario".into(),
                    p("nope.toml"),
                    "--out".into(),
                    p("o.rec"),
                ],
                1,
                vec![p("nope.toml")],
            ),
        ),
        (
            "scenario empty",
            cli(
                vec![
                    "simulate".into(),
                    "--scenario".into(),
                    p("empty.toml"),
                    "--out".into(),
                    p("o.rec"),
                ],
                1,
                vec![p("empty.toml")],
            ),
        ),
        (
            "scenario UTF-16",
            cli(
                vec![
                    "simulate".into(),
                    "--scenario".into(),
                    p("utf16.toml"),
                    "--out".into(),
                    p("o.rec"),
                ],
                1,
                vec![p("utf16.toml"), "UTF-8".into()],
            ),
        ),
        (
            "scenario Latin-1",
            cli(
                vec![
                    "simulate".into(),
                    "--scenario".into(),
                    p("latin1.toml"),
                    "--out".into(),
                    p("o.rec"),
                ],
                1,
                vec![p("latin1.toml"), "UTF-8".into()],
            ),
        ),
        (
            "scenario binary garbage",
            cli(
                vec![
                    "simulate".into(),
                    "--scenario".into(),
                    p("garbage.bin"),
                    "--out".into(),
                    p("o.rec"),
                ],
                1,
                vec![p("garbage.bin")],
            ),
        ),
        (
            "output directory missing",
            cli(
                vec![
                    "simulate".into(),
                    "--scenario".into(),
                    demo.clone(),
                    "--out".into(),
                    p("no/such/dir/o.rec"),
                ],
                1,
                vec![p("no/such/dir/o.rec")],
            ),
        ),
        (
            "plan of a missing file",
            cli(
                vec!["plan".into(), "--scenario".into(), p("nope.toml")],
                1,
                vec![p("nope.toml")],
            ),
        ),
        (
            "plan of garbage",
            cli(
                vec!["plan".into(), "--scenario".into(), p("garbage.bin")],
                1,
                vec![p("garbage.bin")],
            ),
        ),
        (
            "read-block of a truncated block",
            cli(
                vec![
                    "read-block".into(),
                    p("short.blk"),
                    "--points".into(),
                    "2".into(),
                ],
                1,
                vec![p("short.blk")],
            ),
        ),
        (
            "read-block of garbage",
            cli(
                vec![
                    "read-block".into(),
                    p("garbage.bin"),
                    "--points".into(),
                    "2".into(),
                ],
                1,
                vec![p("garbage.bin")],
            ),
        ),
        (
            "read-block with 0 points",
            cli(
                vec![
                    "read-block".into(),
                    p("short.blk"),
                    "--points".into(),
                    "0".into(),
                ],
                1,
                vec![],
            ),
        ),
        (
            "read-block with an unknown format",
            cli(
                vec![
                    "read-block".into(),
                    p("short.blk"),
                    "--points".into(),
                    "2".into(),
                    "--format".into(),
                    "real16".into(),
                ],
                1,
                vec!["real16".into()],
            ),
        ),
        (
            "acquire with a bad profile",
            cli(
                vec![
                    "acquire".into(),
                    "--profile".into(),
                    p("bad-profile.toml"),
                    "--instrument".into(),
                    "127.0.0.1:1".into(),
                    "--sweeps".into(),
                    "1".into(),
                    "--out".into(),
                    p("a.rec"),
                ],
                1,
                vec!["profile".into(), "real16".into()],
            ),
        ),
        (
            "acquire with an address that is no HOST:PORT",
            cli(
                vec![
                    "acquire".into(),
                    "--instrument".into(),
                    "no port here".into(),
                    "--sweeps".into(),
                    "1".into(),
                    "--out".into(),
                    p("a.rec"),
                ],
                1,
                vec!["no port here".into()],
            ),
        ),
        (
            "acquire without a positioner or --sweeps",
            cli(
                vec![
                    "acquire".into(),
                    "--instrument".into(),
                    "127.0.0.1:1".into(),
                    "--out".into(),
                    p("a.rec"),
                ],
                1,
                vec!["--sweeps".into()],
            ),
        ),
    ]
}

#[test]
fn bad_input_matrix_host() {
    let tables: Vec<(&str, Vec<Case>)> = vec![
        ("recording file", recording_table()),
        ("Touchstone file", touchstone_table()),
        ("manifest", manifest_table()),
        ("scenario file", scenario_table()),
        ("plan file", plan_table()),
        ("gain table", gain_table()),
        ("instrument profile", profile_table()),
        ("positioner lines", positioner_table()),
        ("CLI arguments", cli_table()),
    ];
    let held: usize = tables.iter().map(|(_, t)| t.len()).sum();
    let mut tried = 0;
    for (name, t) in tables {
        tried += run(name, t);
    }
    eprintln!("bad-input matrix (host): {tried} cases");
    println!("bad-input matrix (host): {tried} cases");
    assert_eq!(tried, held);
    std::fs::remove_dir_all(tmp()).ok();
}
