//! Hostile input at the edges that are legal in form but absurd in size, and the messages
//! the command line gives for them. Each case runs under a deadline and states its expected
//! outcome beside it; the number of cases is printed. The limits are those of
//! `sweepgate_host::limits` (each defined once there).

use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};
use std::sync::mpsc;
use std::time::{Duration, Instant};

use sweepgate_host::formats::recording::{self as record, Record, SyncPolicy, Writer};
use sweepgate_host::formats::touchstone::Touchstone;
use sweepgate_host::limits::{
    MAX_BINS, MAX_PACED_WAIT_S, MAX_POSITION_SAMPLES, MAX_SETTLE_S, MAX_SWEEPS, MIN_BIN_WIDTH_DEG,
    MIN_SAMPLE_INTERVAL_S,
};
use sweepgate_host::model::scenario::Scenario;

/// Runs `f` on a thread and fails when it takes longer than `secs` or panics.
fn within<T: Send + 'static>(secs: u64, name: &str, f: impl FnOnce() -> T + Send + 'static) -> T {
    let (tx, rx) = mpsc::channel();
    std::thread::spawn(move || {
        let _ = tx.send(f());
    });
    rx.recv_timeout(Duration::from_secs(secs))
        .unwrap_or_else(|e| panic!("case {name}: no result within {secs} s ({e})"))
}

fn bin() -> Command {
    let mut c = Command::new(env!("CARGO_BIN_EXE_sweepgate"));
    c.stdin(Stdio::null());
    c
}

/// Runs the binary under a 120 s deadline.
fn run(name: &str, mut c: Command) -> Output {
    within(120, name, move || c.output().unwrap())
}

fn temp(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("sweepgate-he-{name}-{}", std::process::id()));
    std::fs::remove_dir_all(&d).ok();
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn shipped(name: &str) -> String {
    std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("scenarios")
            .join(name),
    )
    .unwrap()
}

fn assert_refused(name: &str, out: &Output, words: &[&str]) {
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(!out.status.success(), "case {name}: exit 0; stderr {err}");
    assert!(!err.contains("panicked"), "case {name}: {err}");
    for w in words {
        assert!(err.contains(w), "case {name}: {w:?} not in {err}");
    }
}

/// A scenario edit: the case's name, the shipped file, the replacements made in its text
/// (each `from` must occur), and the words the refusal must hold (the field, the value and
/// the range or limit); no words: the edited scenario must be accepted.
struct Edit {
    name: &'static str,
    file: &'static str,
    replace: Vec<(&'static str, String)>,
    words: Vec<String>,
}

fn edit(
    name: &'static str,
    file: &'static str,
    replace: &[(&'static str, &str)],
    words: &[&str],
) -> Edit {
    Edit {
        name,
        file,
        replace: replace.iter().map(|(a, b)| (*a, (*b).to_owned())).collect(),
        words: words.iter().map(|w| (*w).to_owned()).collect(),
    }
}

fn scenario_edits() -> Vec<Edit> {
    let (lab, bay) = ("demo-lab.toml", "workshop-bay.toml");
    let bins = format!("limit {MAX_BINS}");
    let samples = format!("limit {MAX_POSITION_SAMPLES}");
    let sweeps = format!("(limit {MAX_SWEEPS})");
    let per_step = format!("1…{MAX_SWEEPS}");
    let settle = format!("0…{MAX_SETTLE_S}");
    let finest = format!("bin_width_deg = {MIN_BIN_WIDTH_DEG}");
    let fastest = format!("sample_interval_s = {MIN_SAMPLE_INTERVAL_S}");
    let width = "bin_width_deg = 1.0";
    let interval = "sample_interval_s = 0.01";
    // The jitter may not exceed the interval: none where the interval is the shortest.
    let jitter = ("timing_jitter_s = 0.0002", "timing_jitter_s = 0.0");
    vec![
        // Nanodegree bins: refused on the field's range (0.001…360 deg).
        edit(
            "nanodegree bins",
            lab,
            &[(width, "bin_width_deg = 1e-9")],
            &["pattern.bin_width_deg", "1e-9", "0.001…360"],
        ),
        // A bin wider than a turn: refused on the same range.
        edit(
            "bins wider than a turn",
            lab,
            &[(width, "bin_width_deg = 400.0")],
            &["pattern.bin_width_deg", "400", "0.001…360"],
        ),
        // 0.05° over a full turn is 7200 bins, over the engine's 3600.
        edit(
            "more bins than the engine holds",
            lab,
            &[(width, "bin_width_deg = 0.05")],
            &["pattern.bin_width_deg", "7200 bins", &bins],
        ),
        // 0.1° over a full turn is exactly the engine's 3600 bins: accepted.
        edit(
            "bins at the engine's limit",
            lab,
            &[(width, "bin_width_deg = 0.1")],
            &[],
        ),
        // The narrowest bin over a 1° sector: 1000 bins, accepted.
        edit(
            "narrowest bin on a small sector",
            lab,
            &[
                ("start_deg = -180.0", "start_deg = 0.0"),
                ("stop_deg = 180.0", "stop_deg = 1.0"),
                (width, &finest),
            ],
            &[],
        ),
        // Microsecond positioner samples: refused on the field's range (1e-4…10 s).
        edit(
            "microsecond samples",
            lab,
            &[(interval, "sample_interval_s = 1e-6"), jitter],
            &["positioner.sample_interval_s", "1e-6", "0.0001…10"],
        ),
        // A sample every 0.1 ms over a 12-minute scan: 7.2 million samples.
        edit(
            "too many samples over a slow scan",
            lab,
            &[
                ("speed_deg_s = 10.0", "speed_deg_s = 0.5"),
                (interval, &fastest),
                jitter,
            ],
            &["positioner.sample_interval_s", &samples],
        ),
        // The shortest interval over the shipped 40 s scan: 400 000 samples, accepted.
        edit(
            "shortest interval on a short scan",
            lab,
            &[(interval, &fastest), jitter],
            &[],
        ),
        // A sample every 100 s: refused on the field's range.
        edit(
            "samples minutes apart",
            lab,
            &[(interval, "sample_interval_s = 100.0")],
            &["positioner.sample_interval_s", "100", "0.0001…10"],
        ),
        // 1e10 sweeps at each step: refused on the field before any schedule is made.
        edit(
            "1e10 sweeps per step",
            bay,
            &[("sweeps_per_step = 1", "sweeps_per_step = 10000000000")],
            &["positioner.sweeps_per_step", "10000000000", &per_step],
        ),
        // 2000 sweeps at each of 181 steps: over the scan's sweep limit.
        edit(
            "too many sweeps in all",
            bay,
            &[("sweeps_per_step = 1", "sweeps_per_step = 2000")],
            &["positioner", &sweeps],
        ),
        // A settle time of 1e300 s: refused on the field's range (0…3600 s).
        edit(
            "settle of 1e300 s",
            bay,
            &[("settle_s = 0.2", "settle_s = 1e300")],
            &["positioner.settle_s", "1e300", &settle],
        ),
        // 3000 s at each of 181 steps: a scan of six days.
        edit(
            "settles adding up to days",
            bay,
            &[("settle_s = 0.2", "settle_s = 3000.0")],
            &["positioner", "the scan would last", "limit 86400 s"],
        ),
        // A turntable at a millionth of a degree per second: the speed's range.
        edit(
            "a creeping turntable",
            lab,
            &[("speed_deg_s = 10.0", "speed_deg_s = 1e-6")],
            &["positioner.speed_deg_s", "1e-6", "0.01…3600"],
        ),
        // Nanodegree steps: the step angles are capped, and the sweep count refused.
        edit(
            "nanodegree steps",
            bay,
            &[("step_deg = 2.0", "step_deg = 1e-9")],
            &["positioner", &sweeps],
        ),
        // Nanosecond sweeps back to back over a 36 s move: the sweep count refused.
        edit(
            "nanosecond sweeps",
            lab,
            &[
                ("sweep_duration_s = 0.04", "sweep_duration_s = 1e-9"),
                ("sweep_gap_s = 0.005", "sweep_gap_s = 0.0"),
            ],
            &["positioner", &sweeps],
        ),
    ]
}

/// The shipped text with the case's replacements made.
fn edited(e: &Edit) -> String {
    let mut text = shipped(e.file);
    for (from, to) in &e.replace {
        assert!(text.contains(from), "{}: {} lacks {from:?}", e.name, e.file);
        text = text.replacen(from, to, 1);
    }
    text
}

#[test]
fn absurd_scenario_sizes_are_refused_with_field_value_and_range() {
    let mut count = 0;
    for e in scenario_edits() {
        let (name, words) = (e.name, e.words.clone());
        let text = edited(&e);
        // `within` is the deadline: a scenario that made the simulator allocate or loop
        // without bound would miss it.
        let result = within(20, name, move || {
            Scenario::from_toml(&text).map_err(|e| format!("{e:#}"))
        });
        match (result, words.is_empty()) {
            (Ok(_), true) => {}
            (Ok(_), false) => panic!("case {name}: accepted, expected {words:?}"),
            (Err(e), true) => panic!("case {name}: refused, expected accepted: {e}"),
            (Err(e), false) => {
                for w in &words {
                    assert!(e.contains(w.as_str()), "case {name}: {w:?} not in {e}");
                }
                assert!(!e.contains('\n'), "case {name}: {e}");
            }
        }
        count += 1;
    }
    // The command line names the file and the field, and makes no recording.
    let d = temp("scen");
    let scen = d.join("bay.toml");
    let e = edit(
        "simulate",
        "workshop-bay.toml",
        &[("sweeps_per_step = 1", "sweeps_per_step = 10000000000")],
        &[],
    );
    std::fs::write(&scen, edited(&e)).unwrap();
    let out = run("simulate 1e10 sweeps per step", {
        let mut c = bin();
        c.args(["simulate", "--scenario"])
            .arg(&scen)
            .arg("--out")
            .arg(d.join("x.rec"));
        c
    });
    assert_refused(
        "simulate 1e10 sweeps per step",
        &out,
        &["bay.toml", "positioner.sweeps_per_step"],
    );
    assert!(!d.join("x.rec").exists());
    count += 1;
    println!("hostile edges: {count} scenario cases passed");
    std::fs::remove_dir_all(&d).ok();
}

/// A one-port file of `lines` data lines after a `# Hz S <fmt> R 50` option line.
fn s1p(fmt: &str, lines: &[&str]) -> String {
    format!("! hostile\n# Hz S {fmt} R 50\n{}\n", lines.join("\n"))
}

#[test]
fn touchstone_values_beyond_single_precision_are_refused_with_file_and_line() {
    let ok = ["1e9 0.5 0", "2e9 0.5 0"];
    // (case, format, the third data line, refused: words of the message; accepted: none).
    let cases: Vec<(&str, &str, &str, &[&str])> = vec![
        // 1e39 is over f32::MAX (3.4028235e38): refused naming line 5 and the value.
        (
            "RI real part 1e39",
            "RI",
            "3e9 1e39 0",
            &["edge.s1p:5:", "value 1", "1e39"],
        ),
        (
            "RI imaginary part -1e39",
            "RI",
            "3e9 0 -1e39",
            &["edge.s1p:5:", "-1e39"],
        ),
        // 1e300 magnitude, any angle.
        (
            "MA magnitude 1e300",
            "MA",
            "3e9 1e300 45",
            &["edge.s1p:5:", "single-precision"],
        ),
        // 1000 dB is a magnitude of 1e50.
        (
            "dB 1000",
            "DB",
            "3e9 1000 0",
            &["edge.s1p:5:", "single-precision"],
        ),
        // 1e308 dB overflows to infinity in the conversion: refused, not passed on.
        (
            "dB 1e308",
            "DB",
            "3e9 1e308 0",
            &[
                "edge.s1p:5:",
                "value 1",
                "overflows double precision",
                "single-precision",
            ],
        ),
        // 3e38 is inside the range: accepted.
        ("RI 3e38", "RI", "3e9 3e38 0", &[]),
        // A tiny value underflows to 0 in f32, which is no harm: accepted.
        ("RI 1e-300", "RI", "3e9 1e-300 0", &[]),
    ];
    let mut count = 0;
    for (name, fmt, line, words) in cases {
        let text = s1p(fmt, &[ok[0], ok[1], line]);
        let r = within(10, name, move || {
            Touchstone::parse_str(&text, "edge.s1p").map_err(|e| e.to_string())
        });
        match (r, words.is_empty()) {
            (Ok(_), true) => {}
            (Ok(_), false) => panic!("case {name}: accepted"),
            (Err(e), true) => panic!("case {name}: refused: {e}"),
            (Err(e), false) => {
                assert!(e.contains("edge.s1p"), "case {name}: {e}");
                for w in words {
                    assert!(e.contains(w), "case {name}: {w:?} not in {e}");
                }
            }
        }
        count += 1;
    }
    println!("hostile edges: {count} Touchstone range cases passed");
}

/// The grid of the shipped demo-lab scan: 201 points from 8 GHz in 20 MHz steps.
fn lab_frequencies_hz() -> Vec<f64> {
    (0..201).map(|k| 8e9 + 20e6 * k as f64).collect()
}

/// A two-port file over the demo-lab grid with S21 = `a`·e^(−j2πfτ), τ the 4 m range's
/// delay (so that it lies in the scan's gate), and the rest 0.
fn reference_s2p(a: f64) -> String {
    let tau_s = 4.0 / 299_792_458.0;
    let mut t = String::from("# Hz S RI R 50\n");
    for f in lab_frequencies_hz() {
        let ph = -2.0 * std::f64::consts::PI * f * tau_s;
        let (re, im) = (a * ph.cos(), a * ph.sin());
        t.push_str(&format!("{f} 0 0 {re} {im} 0 0 0 0\n"));
    }
    t
}

/// Simulates the shipped demo-lab scan into `dir/scan.rec`.
fn lab_recording(dir: &Path) -> PathBuf {
    let rec = dir.join("scan.rec");
    let out = run("simulate", {
        let mut c = bin();
        c.args(["simulate", "--scenario"])
            .arg(Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios/demo-lab.toml"))
            .arg("--out")
            .arg(&rec);
        c
    });
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    rec
}

#[test]
fn a_degenerate_gain_reference_and_a_hostile_pace_are_handled() {
    let d = temp("ref");
    let rec = lab_recording(&d);
    let table = d.join("gain.csv");
    std::fs::write(&table, "frequency_hz,gain_dbi\n8e9,15\n12e9,15\n").unwrap();
    let mut count = 0;
    // (case, S21 of the reference, refused?). An all-zero reference gates to the -300 dB
    // floor and would make a 15 dBi reference give gains near 300 dBi: refused, naming the
    // file and the limit. A -40 dB reference is a usable one: accepted.
    for (name, s21, refused) in [
        ("all-zero reference", 0.0, true),
        ("usable reference", 0.01, false),
    ] {
        let r = d.join(format!("{}.s2p", name.replace(' ', "-")));
        std::fs::write(&r, reference_s2p(s21)).unwrap();
        let out = run(name, {
            let mut c = bin();
            c.arg("process")
                .arg(&rec)
                .arg("--out")
                .arg(d.join(format!("report-{count}")))
                .arg("--gain-table")
                .arg(&table)
                .arg("--reference")
                .arg(&r);
            c
        });
        if refused {
            assert_refused(name, &out, &[&r.display().to_string(), "below -200 dB"]);
            assert!(!d.join(format!("report-{count}/pattern.csv")).exists());
        } else {
            assert!(
                out.status.success(),
                "case {name}: {}",
                String::from_utf8_lossy(&out.stderr)
            );
            let sum =
                std::fs::read_to_string(d.join(format!("report-{count}/summary.json"))).unwrap();
            let v: serde_json::Value = serde_json::from_str(&sum).unwrap();
            for m in v["metrics_normalized_to_peak"].as_array().unwrap() {
                // G = 15 dBi + P_AUT - (-40 dB): within the range of a real antenna.
                let g = m["absolute_gain"]["peak_gain_dbi"].as_f64().unwrap();
                assert!(g.abs() < 100.0, "case {name}: {g} dBi");
            }
        }
        count += 1;
    }
    count += paced_replays(&d, &rec);
    println!("hostile edges: {count} gain-reference and pace cases passed");
    std::fs::remove_dir_all(&d).ok();
}

/// Rewrites `rec` into `out` with every record time changed by `f(index, time)`.
fn retimed(rec: &Path, out: &Path, f: impl Fn(usize, u64) -> u64) {
    let r = record::recover_file(rec).unwrap();
    let mut w = Writer::create(out, SyncPolicy::default()).unwrap();
    for (i, (_, rec)) in r.records.iter().enumerate() {
        let rec = match rec.clone() {
            Record::Position {
                t_us,
                counts,
                angle_deg,
            } => Record::Position {
                t_us: f(i, t_us),
                counts,
                angle_deg,
            },
            Record::Sweep {
                index,
                start_us,
                end_us,
                s21,
            } => Record::Sweep {
                index,
                start_us: f(i, start_us),
                end_us: f(i, end_us),
                s21,
            },
            other => other,
        };
        w.write(&rec).unwrap();
    }
    w.finish().unwrap();
}

/// Paced replays of hostile timings: each must finish (or be refused) well within its
/// deadline. Returns the cases run.
fn paced_replays(d: &Path, rec: &Path) -> usize {
    let n = record::recover_file(rec).unwrap().records.len();
    // The last positioner sample and sweep ~300 000 years in the future.
    let far = d.join("far.rec");
    retimed(rec, &far, |i, t| if i + 3 >= n { t + (1 << 53) } else { t });
    // Every record a century on: the replay counts from the first record.
    let late = d.join("late.rec");
    retimed(rec, &late, |_, t| t + 3_153_600_000_000_000);
    // (case, recording, --speed, deadline s, refused?, words of the refusal, or of a
    // warning in the report's summary.json).
    type Case<'a> = (&'a str, &'a Path, &'a str, u64, bool, &'a [&'a str]);
    let cases: [Case; 4] = [
        // The 36 s scan at 100x: 0.4 s of waits, then one wait cut to 5 s.
        (
            "far-future timestamp",
            &far,
            "100",
            30,
            false,
            &["waits of the paced replay were cut"],
        ),
        // Starts at once and takes the scan's 0.4 s at 100x.
        ("a century late", &late, "100", 30, false, &[]),
        // 1/1000 of the recorded pace: about 4600 waits cut to 5 s, over two hours: refused
        // before the replay starts.
        (
            "a thousandth of the pace",
            rec,
            "0.001",
            30,
            true,
            &["--speed", "limit 7200 s"],
        ),
        // A far-future timestamp at a slow pace: refused, not slept on.
        (
            "far-future at a slow pace",
            &far,
            "0.002",
            30,
            true,
            &["paced replay would take"],
        ),
    ];
    for (name, r, speed, secs, refused, words) in cases {
        let started = Instant::now();
        let report = d.join(format!("{}-report", name.replace(' ', "-")));
        let out = within(secs, name, {
            let mut c = bin();
            c.args(["replay", "--no-preview", &format!("--speed={speed}")])
                .arg(r)
                .arg("--out")
                .arg(&report);
            move || c.output().unwrap()
        });
        let err = String::from_utf8_lossy(&out.stderr);
        if refused {
            assert_refused(name, &out, words);
        } else {
            assert!(out.status.success(), "case {name}: {err}");
            let sum = std::fs::read_to_string(report.join("summary.json")).unwrap();
            let v: serde_json::Value = serde_json::from_str(&sum).unwrap();
            let warnings = v["warnings"].to_string();
            for w in words {
                assert!(warnings.contains(w), "case {name}: {w:?} not in {warnings}");
            }
        }
        assert!(
            started.elapsed().as_secs_f64() < MAX_PACED_WAIT_S + 20.0,
            "case {name}: {:?}",
            started.elapsed()
        );
    }
    cases.len()
}

/// An 11-point one-port file from 1 GHz in 100 MHz steps with S11 = `v`.
fn good_s1p(v: f64) -> String {
    let lines: Vec<String> = (0..11)
        .map(|k| format!("{} {v} 0", 1e9 + 1e8 * k as f64))
        .collect();
    s1p("RI", &lines.iter().map(String::as_str).collect::<Vec<_>>())
}

/// How often `needle` occurs in `hay`.
fn occurrences(hay: &str, needle: &str) -> usize {
    hay.matches(needle).count()
}

/// One message case: a command, the words its refusal must hold, a word it must hold
/// exactly once (the file it names, the cause), words it must not hold, and the most bytes
/// of standard error.
struct Message {
    name: &'static str,
    args: Vec<std::ffi::OsString>,
    words: Vec<String>,
    once: String,
    never: Vec<&'static str>,
}

fn message(
    name: &'static str,
    args: &[&dyn AsRef<std::ffi::OsStr>],
    words: &[&str],
    once: &str,
    never: &[&'static str],
) -> Message {
    Message {
        name,
        args: args.iter().map(|a| a.as_ref().to_owned()).collect(),
        words: words.iter().map(|w| (*w).to_owned()).collect(),
        once: once.to_owned(),
        never: never.to_vec(),
    }
}

#[test]
fn messages_are_precise_and_single() {
    let d = temp("msg");
    let p = |n: &str| d.join(n);
    let huge = "7".repeat(50 << 20);
    let clip = format!("{}…", "7".repeat(40));
    std::fs::create_dir(p("folder.s1p")).unwrap();
    std::fs::create_dir(p("folder.rec")).unwrap();
    std::fs::write(p("a.s1p"), good_s1p(0.5)).unwrap();
    std::fs::write(p("b.s1p"), good_s1p(0.25)).unwrap();
    std::fs::write(p("bad.s1p"), s1p("RI", &["1e9 0.1 0", "2e9 x 0"])).unwrap();
    std::fs::write(
        p("huge.s1p"),
        s1p("RI", &["1e9 0.1 0", &format!("2e9 {huge}x 0")]),
    )
    .unwrap();
    let row = "0 0 0.1 0 0 0 0 0";
    let desc2: Vec<String> = ["3e9", "2e9", "1e9"]
        .iter()
        .map(|f| format!("{f} {row}"))
        .collect();
    std::fs::write(
        p("desc.s2p"),
        s1p("RI", &desc2.iter().map(String::as_str).collect::<Vec<_>>()),
    )
    .unwrap();
    std::fs::write(
        p("desc.s1p"),
        s1p("RI", &["3e9 0.1 0", "2e9 0.1 0", "1e9 0.1 0"]),
    )
    .unwrap();
    let manifest = |name: &str, rows: &str| {
        std::fs::write(p(name), format!("angle_deg,file\n{rows}")).unwrap();
        p(name)
    };
    let good = manifest("good.csv", "0,a.s1p\n10,b.s1p\n");
    let folder_row = manifest("folder.csv", "0,folder.s1p\n");
    let desc2_m = manifest("desc2.csv", "0,desc.s2p\n");
    let desc1_m = manifest("desc1.csv", "0,desc.s1p\n");
    let bad_m = manifest("bad.csv", "0,bad.s1p\n");
    let huge_m = manifest("huge.csv", "0,huge.s1p\n");
    let huge_angle = manifest("angle.csv", &format!("{huge}x,a.s1p\n"));
    std::fs::write(p("header.csv"), format!("{huge},file\n0,a.s1p\n")).unwrap();
    std::fs::write(p("gain.csv"), "frequency_hz,gain_dbi\n1e9,10\n2e9,10\n").unwrap();
    std::fs::write(
        p("huge-gain.csv"),
        format!("frequency_hz,gain_dbi\n1e9,{huge}x\n"),
    )
    .unwrap();
    std::fs::write(p("settings.toml"), "out = \"r\"\nbogus = [1,\n").unwrap();
    std::fs::write(p("key.toml"), format!("{} = 1\n", "k".repeat(50 << 20))).unwrap();
    let scen = shipped("demo-lab.toml").replacen(
        "mode = \"continuous\"",
        &format!("mode = \"{}\"", "c".repeat(50 << 20)),
        1,
    );
    std::fs::write(p("mode.toml"), scen).unwrap();
    std::fs::write(p("noise.rec"), [0x5au8; 4096]).unwrap();
    let (out, r) = (p("report"), "--out");
    let cases = vec![
        // A folder named in a manifest is a folder, not a missing file.
        message(
            "manifest row is a folder",
            &[&"process", &folder_row, &r, &out],
            &["is a folder, not a file"],
            "folder.s1p",
            &["does not exist"],
        ),
        // A folder given as the recording: said once, with no "reading X:" before it.
        message(
            "recording is a folder",
            &[&"replay", &"--no-preview", &p("folder.rec"), &r, &out],
            &["is a folder, not a recording"],
            "folder.rec",
            &["does not exist"],
        ),
        message(
            "process input is a folder",
            &[&"process", &p("folder.rec"), &r, &out],
            &["is a folder, not a recording"],
            "folder.rec",
            &["does not exist"],
        ),
        // Descending two-port (version 1.1, where a step back may start noise data) and
        // one-port data: said to be descending, not "needs at least 2 points".
        message(
            "descending two-port",
            &[&"process", &desc2_m, &r, &out],
            &["desc.s2p:4:", "frequencies must increase"],
            "not above",
            &["at least 2 points"],
        ),
        message(
            "descending one-port",
            &[&"process", &desc1_m, &r, &out],
            &["desc.s1p:4:", "frequencies must increase"],
            "not above",
            &["at least 2 points"],
        ),
        // A Touchstone error through a manifest, and as the gain reference: printed once.
        message(
            "touchstone error in a manifest",
            &[&"process", &bad_m, &r, &out],
            &["bad.csv:2:", "bad.s1p:4:"],
            "is not a number",
            &[],
        ),
        message(
            "touchstone error as the reference",
            &[
                &"process",
                &good,
                &r,
                &out,
                &"--gain-table",
                &p("gain.csv"),
                &"--reference",
                &p("bad.s1p"),
            ],
            &["bad.s1p:4:"],
            "is not a number",
            &[],
        ),
        // 50 MB tokens: quoted cut to 40 characters and "…".
        message(
            "50 MB number in a Touchstone file",
            &[&"process", &huge_m, &r, &out],
            &[&clip, "huge.s1p:4:"],
            "is not a number",
            &[],
        ),
        message(
            "50 MB angle in a manifest",
            &[&"process", &huge_angle, &r, &out],
            &[&clip, "angle.csv:2:"],
            "is not a number",
            &[],
        ),
        message(
            "50 MB manifest header",
            &[&"process", &"--manifest", &p("header.csv"), &r, &out],
            &[&clip],
            "header is",
            &[],
        ),
        message(
            "50 MB gain in a gain table",
            &[
                &"process",
                &good,
                &r,
                &out,
                &"--gain-table",
                &p("huge-gain.csv"),
                &"--reference",
                &p("a.s1p"),
            ],
            &[&clip, "huge-gain.csv"],
            "is not a finite number",
            &[],
        ),
        message(
            "50 MB key in a settings file",
            &[&"process", &good, &"--settings", &p("key.toml")],
            &[&format!("{}…", "k".repeat(40))],
            "unknown key",
            &[],
        ),
        message(
            "50 MB mode in a scenario",
            &[
                &"simulate",
                &"--scenario",
                &p("mode.toml"),
                &"--out",
                &p("x.rec"),
            ],
            &[&format!("{}…", "c".repeat(40)), "mode.toml"],
            "unknown variant",
            &[],
        ),
        // A TOML syntax error in a settings file: one line with its position.
        message(
            "settings syntax error",
            &[&"process", &good, &"--settings", &p("settings.toml")],
            &["settings.toml", "line 3, column 1"],
            "settings file",
            &[],
        ),
        // Bytes that are no recording: the file named once, with the reason.
        message(
            "not a recording",
            &[&"replay", &"--no-preview", &p("noise.rec"), &r, &out],
            &["no intact recording header"],
            "noise.rec",
            &[],
        ),
        message(
            "not a recording, processed",
            &[&"process", &p("noise.rec"), &r, &out],
            &["no intact recording header"],
            "noise.rec",
            &[],
        ),
    ];
    let mut count = 0;
    for m in cases {
        let out = run(m.name, {
            let mut c = bin();
            c.args(&m.args);
            c
        });
        let words: Vec<&str> = m.words.iter().map(String::as_str).collect();
        assert_refused(m.name, &out, &words);
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(
            occurrences(&err, &m.once),
            1,
            "case {}: {:?} not once in {err}",
            m.name,
            m.once
        );
        for n in &m.never {
            assert!(!err.contains(n), "case {}: {n:?} in {err}", m.name);
        }
        assert_eq!(err.trim_end().lines().count(), 1, "case {}: {err}", m.name);
        assert!(err.len() < 1000, "case {}: {} bytes", m.name, err.len());
        count += 1;
    }
    println!("hostile edges: {count} message cases passed");
    std::fs::remove_dir_all(&d).ok();
}

#[test]
fn a_long_manifest_is_checked_for_repeated_angles_in_linear_time() {
    use sweepgate_host::formats::manifest::{Manifest, ManifestErrorKind};
    let d = temp("long");
    std::fs::write(d.join("a.s1p"), good_s1p(0.5)).unwrap();
    // 300 000 distinct angles, then one repeated: refused naming both lines. A pairwise
    // check makes 4.5e10 comparisons (many minutes); one hash look-up per row takes a few
    // seconds in a debug build. The deadline below only catches the quadratic check: it is
    // not a benchmark, and is wide enough for a loaded machine.
    let n = 300_000usize;
    let mut text = String::from("angle_deg,file\n");
    for i in 0..n {
        text.push_str(&format!("{},a.s1p\n", i as f64 * 0.001));
    }
    text.push_str("-0,a.s1p\n");
    let dir = d.clone();
    let e = within(120, "long manifest", move || {
        Manifest::parse_str(&text, "long.csv", &dir).unwrap_err()
    });
    // −0 repeats the 0 of line 2 (equal angles, whatever the sign of zero).
    assert_eq!(e.line, Some(n + 2));
    assert!(
        matches!(
            e.kind,
            ManifestErrorKind::DuplicateAngle { first_line: 2, .. }
        ),
        "{e}"
    );
    println!("hostile edges: 1 long-manifest case passed");
    std::fs::remove_dir_all(&d).ok();
}

/// Rewrites `rec` into `out` keeping each record as `f` returns it (`None`: dropped).
fn rewritten(rec: &Path, out: &Path, f: impl Fn(&Record) -> Option<Record>) {
    let r = record::recover_file(rec).unwrap();
    let mut w = Writer::create(out, SyncPolicy::default()).unwrap();
    for (_, rec) in &r.records {
        if let Some(rec) = f(rec) {
            w.write(&rec).unwrap();
        }
    }
    w.finish().unwrap();
}

#[test]
fn a_run_that_fills_no_bin_fails_with_the_reason_and_keeps_the_last_report() {
    let d = temp("empty");
    let rec = lab_recording(&d);
    // The report of a good run, which the failed runs below must leave as it is.
    let report = d.join("report");
    let out = run("good replay", {
        let mut c = bin();
        c.args(["replay", "--as-fast-as-possible", "--no-preview"])
            .arg(&rec)
            .arg("--out")
            .arg(&report);
        c
    });
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let listing = |dir: &Path| {
        let mut v: Vec<(String, Vec<u8>)> = std::fs::read_dir(dir)
            .unwrap()
            .map(|e| {
                let e = e.unwrap();
                (
                    e.file_name().to_string_lossy().into_owned(),
                    std::fs::read(e.path()).unwrap(),
                )
            })
            .collect();
        v.sort();
        v
    };
    let before = listing(&report);
    // (case, what is done to the records, the reason the refusal must give).
    let no_angles = d.join("no-angles.rec");
    rewritten(&rec, &no_angles, |r| match r {
        Record::Position { .. } => None,
        r => Some(r.clone()),
    });
    let nan = d.join("nan.rec");
    rewritten(&rec, &nan, |r| match r {
        Record::Sweep {
            index,
            start_us,
            end_us,
            s21,
        } => Some(Record::Sweep {
            index: *index,
            start_us: *start_us,
            end_us: *end_us,
            s21: vec![sweepgate::Complex32::new(f32::NAN, 0.0); s21.len()],
        }),
        r => Some(r.clone()),
    });
    let short = d.join("short.rec");
    rewritten(&rec, &short, |r| match r {
        Record::Sweep {
            index,
            start_us,
            end_us,
            s21,
        } => Some(Record::Sweep {
            index: *index,
            start_us: *start_us,
            end_us: *end_us,
            s21: s21[..s21.len() / 2].to_vec(),
        }),
        r => Some(r.clone()),
    });
    let no_sweeps = d.join("no-sweeps.rec");
    rewritten(&rec, &no_sweeps, |r| match r {
        Record::Sweep { .. } => None,
        r => Some(r.clone()),
    });
    let cases: [(&str, &Path, &str); 4] = [
        // No positioner sample: every sweep refused for want of an angle.
        (
            "no positioner samples",
            &no_angles,
            "no positioner angle yet",
        ),
        // Every sweep holds NaN: refused as not finite.
        ("every sweep NaN", &nan, "not a finite number"),
        // Every sweep half as long as the grid: refused on its point count.
        (
            "every sweep short",
            &short,
            "point count does not match the grid",
        ),
        // Positioner samples and no sweep at all.
        ("no sweeps", &no_sweeps, "holds no sweep"),
    ];
    let mut count = 0;
    for (name, r, reason) in cases {
        for command in ["replay", "process"] {
            let case = format!("{name} ({command})");
            let out = run(&case, {
                let mut c = bin();
                c.arg(command);
                if command == "replay" {
                    c.args(["--as-fast-as-possible", "--no-preview"]);
                }
                c.arg(r).arg("--out").arg(&report);
                c
            });
            assert_refused(&case, &out, &["no bin was filled", reason]);
            assert_eq!(
                listing(&report),
                before,
                "case {case}: the last report changed"
            );
            count += 1;
        }
    }
    println!("hostile edges: {count} empty-run cases passed");
    std::fs::remove_dir_all(&d).ok();
}

#[test]
fn a_recording_header_with_absurd_bins_is_refused_quickly() {
    let d = temp("hdr");
    let rec = lab_recording(&d);
    let mut count = 0;
    // (case, bin width in the header): nanodegree bins would be 3.6e11 bins of a full turn,
    // and a negative width none; both refused by the engine's layout, naming the width,
    // before any sweep is read.
    for (name, width) in [
        ("nanodegree bins in the header", 1e-9),
        ("negative bins in the header", -1.0),
    ] {
        let bad = d.join(format!("{}.rec", name.replace(' ', "-")));
        let set =
            |h: &mut sweepgate_host::formats::recording::Header| h.bin_width_deg = Some(width);
        rewritten(&rec, &bad, |r| match r {
            Record::Header(h) => {
                let mut h = h.clone();
                set(&mut h);
                Some(Record::Header(h))
            }
            Record::HeaderCopy(h) => {
                let mut h = h.clone();
                set(&mut h);
                Some(Record::HeaderCopy(h))
            }
            r => Some(r.clone()),
        });
        for command in ["replay", "process"] {
            let case = format!("{name} ({command})");
            let out = run(&case, {
                let mut c = bin();
                c.arg(command);
                if command == "replay" {
                    c.args(["--as-fast-as-possible", "--no-preview"]);
                }
                c.arg(&bad).arg("--out").arg(d.join("report"));
                c
            });
            assert_refused(&case, &out, &["bin layout", &format!("bins of {width}°")]);
            assert!(!d.join("report/pattern.csv").exists(), "case {case}");
            count += 1;
        }
    }
    println!("hostile edges: {count} header bin-width cases passed");
    std::fs::remove_dir_all(&d).ok();
}

#[test]
fn a_failed_process_leaves_no_empty_report_folder() {
    // `process` checks its report folder (creating it) while it reads the input; when the
    // input then fails, the folder it made is removed again, and one that was there stays.
    let d = temp("no-empty-folder");
    let manifest = d.join("scan.csv");
    std::fs::write(&manifest, "angle_deg,file\n0,missing.s2p\n").unwrap();
    for (case, out, existed) in [
        ("a new folder", d.join("new-report"), false),
        ("a folder that was there", d.join("old-report"), true),
    ] {
        if existed {
            std::fs::create_dir_all(&out).unwrap();
        }
        let o = run(case, {
            let mut c = bin();
            c.args(["process", "--manifest"])
                .arg(&manifest)
                .arg("--out")
                .arg(&out);
            c
        });
        assert_refused(case, &o, &["missing.s2p"]);
        assert_eq!(
            out.exists(),
            existed,
            "{case}: the folder after the failure"
        );
    }
    std::fs::remove_dir_all(&d).ok();
}
