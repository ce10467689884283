//! The hostile-input matrix of part B: each case is one hostile input at a boundary (the
//! instrument's program messages, the command line's outputs, options and inputs), with its
//! expected outcome, run under a deadline; the number of cases is printed. Expected SCPI
//! errors: SCPI-1999 Volume 2, chapter 21 (from memory), as documented in
//! `link/instrument.rs`.

use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};
use std::sync::mpsc;
use std::time::Duration;

use sweepgate_host::link::instrument::{Instrument, MAX_ANSWER_BYTES};

/// Runs `f` on a thread and fails when it takes longer than `secs` or panics.
fn within<T: Send + 'static>(secs: u64, name: &str, f: impl FnOnce() -> T + Send + 'static) -> T {
    let (tx, rx) = mpsc::channel();
    std::thread::spawn(move || {
        let _ = tx.send(f());
    });
    rx.recv_timeout(Duration::from_secs(secs))
        .unwrap_or_else(|e| panic!("case {name}: no result within {secs} s ({e})"))
}

/// One program message line and what it must do: its answer (`None`: no answer) and the
/// error codes it queues, in order.
struct Case {
    name: String,
    line: Vec<u8>,
    answer: Option<String>,
    errors: Vec<i32>,
}

fn case(
    name: impl Into<String>,
    line: impl Into<Vec<u8>>,
    answer: Option<&str>,
    errors: &[i32],
) -> Case {
    Case {
        name: name.into(),
        line: line.into(),
        answer: answer.map(str::to_owned),
        errors: errors.to_vec(),
    }
}

fn instrument_cases() -> Vec<Case> {
    let mut v = vec![
        case("bad utf-8", vec![0xff, 0xfe, b'?'], None, &[-102]),
        case("nul bytes", vec![0u8; 100], None, &[-102]),
        case("only separators", ";;;;;;", None, &[]),
        case("colon alone", ":", None, &[-102]),
        case("double colon", "FREQ::STAR 1e9", None, &[-102]),
        case("star alone", "*", None, &[-113]),
        case("query mark alone", "?", None, &[-102]),
        case("unknown common", "*XYZ?", None, &[-113]),
        case("idn with parameter", "*IDN? 1", None, &[-108]),
        case("ese missing value", "*ESE", None, &[-109]),
        case("ese too big", "*ESE 256", None, &[-222]),
        case("ese negative", "*ESE -1", None, &[-104]),
        case("ese two values", "*ESE 1,2", None, &[-108]),
        case("ese text", "*ESE abc", None, &[-104]),
        case("points zero", "SWE:POIN 0", None, &[-222]),
        case("points one", "SWE:POIN 1", None, &[-222]),
        case("points too many", "SWE:POIN 10002", None, &[-222]),
        case("points huge", "SWE:POIN 1e300", None, &[-222]),
        case("points inf", "SWE:POIN inf", None, &[-104]),
        case("points nan", "SWE:POIN nan", None, &[-104]),
        case("points fraction", "SWE:POIN 100.5", None, &[-104]),
        case("points negative", "SWE:POIN -5", None, &[-222]),
        case("points missing", "SWE:POIN", None, &[-109]),
        case("start below range", "FREQ:STAR 1", None, &[-222]),
        case("start above range", "FREQ:STAR 1e12", None, &[-222]),
        case("start negative", "FREQ:STAR -8e9", None, &[-222]),
        case("start inf", "FREQ:STAR inf", None, &[-104]),
        case("start nan", "FREQ:STAR NaN", None, &[-104]),
        case("start 1e308 GHz", "FREQ:STAR 1e308GHZ", None, &[-222]),
        case("start bad suffix", "FREQ:STAR 8THZ", None, &[-131]),
        case("start above stop", "FREQ:STAR 13e9", None, &[-221]),
        case("stop below start", "FREQ:STOP 7e9", None, &[-221]),
        case("format bad length", "FORM REAL,16", None, &[-224]),
        case("format ascii digits", "FORM ASC,18", None, &[-222]),
        case("format text length", "FORM REAL,x", None, &[-104]),
        case("format three params", "FORM REAL,32,1", None, &[-108]),
        case("format unknown", "FORM BIN", None, &[-224]),
        case("border unknown", "FORM:BORD SIDEWAYS", None, &[-224]),
        case("init query", "INIT?", None, &[-113]),
        case("init parameter", "INIT 5", None, &[-108]),
        case("trace before init", "TRAC?", None, &[-230]),
        case("trace two names", "TRAC? a,b", None, &[-108]),
        case("trace as command", "TRAC", None, &[-113]),
        case("error query parameter", "SYST:ERR? 1", None, &[-108]),
        case("header with space inside", "FR EQ:STAR?", None, &[-113]),
        case("header symbols", "FREQ:ST@R?", None, &[-102]),
        case("tab separated", "SWE:POIN?\t", Some("201"), &[]),
        case("carriage return", "*OPC?\r", Some("1"), &[]),
        case(
            "mixed good and bad",
            "*OPC?;NOPE;*OPC?",
            Some("1;1"),
            &[-113],
        ),
        case(
            "eleven errors overflow the queue",
            "A;B;C;D;E;F;G;H;I;J;K",
            None,
            &[-113, -113, -113, -113, -113, -113, -113, -113, -113, -350],
        ),
    ];
    // Long but legal lines, just under the line limit (the in-process handler takes any
    // length; the server's limit is checked over TCP below).
    for n in [1usize, 10, 100, 1000, 5000] {
        let line = vec!["*OPC?"; n].join(";");
        let want = vec!["1"; n].join(";");
        v.push(Case {
            name: format!("{n} queries in a line"),
            line: line.into_bytes(),
            answer: Some(want),
            errors: vec![],
        });
    }
    for n in [1usize, 100, 10_000] {
        v.push(case(
            format!("token of {n} letters"),
            "X".repeat(n),
            None,
            &[-113],
        ));
        v.push(case(
            format!("number of {n} digits"),
            format!("SWE:POIN {}", "9".repeat(n)),
            None,
            match n {
                1 => &[],
                100 => &[-222],
                _ => &[-104],
            },
        ));
        v.push(case(
            format!("{n} commas"),
            format!("FORM {}", ",".repeat(n)),
            None,
            &[if n == 1 { -104 } else { -108 }],
        ));
    }
    for b in [0x00u8, 0x01, 0x7f, 0x80, 0xc0, 0xff] {
        v.push(case(
            format!("byte {b:#04x} in a header"),
            vec![b'*', b'I', b, b'N', b'?'],
            None,
            &[if b >= 0x80 { -102 } else { -113 }],
        ));
    }
    v
}

fn error_codes(i: &Instrument) -> Vec<i32> {
    i.errors().map(|e| e.code).collect()
}

#[test]
fn instrument_program_messages() {
    let cases = instrument_cases();
    let n = cases.len();
    let mut wrong = Vec::new();
    for c in cases {
        let name = c.name.clone();
        let bad = within(30, &name, move || {
            let mut inst = Instrument::builtin(None).unwrap();
            let got = inst.handle_line(&c.line);
            let want = c.answer.map(|a| format!("{a}\n").into_bytes());
            let codes = error_codes(&inst);
            // The instrument still answers after it.
            let after = inst.handle_line(b"*OPC?");
            (got != want || codes != c.errors || after != Some(b"1\n".to_vec())).then(|| {
                format!(
                    "case {}: answer {:?}, errors {codes:?}",
                    c.name,
                    got.map(|g| String::from_utf8_lossy(&g[..g.len().min(60)]).into_owned())
                )
            })
        });
        wrong.extend(bad);
    }
    assert!(wrong.is_empty(), "{wrong:#?}");
    println!("hostile matrix: {n} instrument program-message cases passed");
    assert!(n >= 70);
}

#[test]
fn answers_past_the_bound_are_refused_with_too_much_data() {
    within(120, "answer bound", || {
        let mut inst = Instrument::builtin(None).unwrap();
        assert_eq!(inst.handle_line(b"SWE:POIN 10001;FORM ASC,17;INIT"), None);
        let one = inst.handle_line(b"TRAC?").unwrap();
        let fit = MAX_ANSWER_BYTES / (one.len() + 1);
        let line = vec!["TRAC?"; fit + 3].join(";");
        let got = inst.handle_line(line.as_bytes()).unwrap();
        assert!(got.len() <= MAX_ANSWER_BYTES, "{} bytes", got.len());
        let codes = error_codes(&inst);
        assert!(
            !codes.is_empty() && codes.iter().all(|&c| c == -223),
            "{codes:?}"
        );
        println!("hostile matrix: {fit} traces fit in one answer; the rest got -223");
    });
}

fn bin() -> Command {
    let mut c = Command::new(env!("CARGO_BIN_EXE_sweepgate"));
    c.stdin(Stdio::null());
    c
}

fn temp(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("sweepgate-hm-{name}-{}", std::process::id()));
    std::fs::remove_dir_all(&d).ok();
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn scenario_file() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios/demo-lab.toml")
}

/// Runs the binary under a 120 s deadline.
fn run(name: &str, mut c: Command) -> Output {
    within(120, name, move || c.output().unwrap())
}

fn assert_refused(name: &str, out: &Output, words: &[&str]) {
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(!out.status.success(), "case {name}: exit 0; stderr {err}");
    assert!(!err.contains("panicked"), "case {name}: {err}");
    for w in words {
        assert!(err.contains(w), "case {name}: {w:?} not in {err}");
    }
    assert!(
        err.len() < 4096,
        "case {name}: message of {} bytes",
        err.len()
    );
}

#[test]
fn command_line_outputs_options_and_inputs() {
    let d = temp("cli");
    let scen = d.join("scenario.toml");
    std::fs::copy(scenario_file(), &scen).unwrap();
    let scen_bytes = std::fs::read(&scen).unwrap();
    let rec = d.join("scan.rec");
    let out = run("simulate", {
        let mut c = bin();
        c.args(["simulate", "--scenario"])
            .arg(&scen)
            .arg("--out")
            .arg(&rec);
        c
    });
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let rec_bytes = std::fs::read(&rec).unwrap();
    let mut count = 0;

    // Outputs that are inputs, through several spellings of the same file.
    let same_scen = d.join(".").join("scenario.toml");
    let linked = d.join("link.toml");
    std::fs::hard_link(&scen, &linked).unwrap();
    for (name, path) in [
        ("plain", &scen),
        ("dot", &same_scen),
        ("hard link", &linked),
    ] {
        let out = run(name, {
            let mut c = bin();
            c.args(["simulate", "--scenario"])
                .arg(&scen)
                .arg("--out")
                .arg(path);
            c
        });
        assert_refused(name, &out, &["is the input file"]);
        assert_eq!(
            std::fs::read(&scen).unwrap(),
            scen_bytes,
            "case {name}: scenario changed"
        );
        count += 1;
    }
    let same_rec = d.join(".").join("scan.rec");
    for (name, path) in [("record plain", &rec), ("record dot", &same_rec)] {
        let out = run(name, {
            let mut c = bin();
            c.args(["replay", "--as-fast-as-possible", "--no-preview"])
                .arg(&rec)
                .arg("--record")
                .arg(path);
            c
        });
        assert_refused(name, &out, &["--record", "is the input file"]);
        assert_eq!(
            std::fs::read(&rec).unwrap(),
            rec_bytes,
            "case {name}: recording changed"
        );
        count += 1;
    }
    // A report folder that is a file is found before the replay.
    let file_as_dir = d.join("not-a-folder");
    std::fs::write(&file_as_dir, b"keep").unwrap();
    let out = run("report folder is a file", {
        let mut c = bin();
        c.args(["replay", "--as-fast-as-possible", "--no-preview"])
            .arg(&rec)
            .arg("--out")
            .arg(&file_as_dir);
        c
    });
    assert_refused(
        "report folder is a file",
        &out,
        &["not-a-folder", "is not a folder"],
    );
    assert_eq!(std::fs::read(&file_as_dir).unwrap(), b"keep");
    count += 1;

    // --speed outside its range.
    for s in ["1e-30", "0", "-1", "NaN", "inf", "1e7", "0.0009"] {
        let out = run(s, {
            let mut c = bin();
            c.args(["replay", "--no-preview", &format!("--speed={s}")])
                .arg(&rec);
            c
        });
        assert_refused(s, &out, &["--speed"]);
        count += 1;
    }

    // view: a folder, an empty file, zeros, garbage.
    let out = run("view folder", {
        let mut c = bin();
        c.args(["view", "--no-preview", "--from"]).arg(&d);
        c
    });
    assert_refused("view folder", &out, &["is a directory"]);
    count += 1;
    for (name, bytes) in [
        ("empty", Vec::new()),
        ("zeros", vec![0u8; 8 << 20]),
        (
            "garbage",
            (0..8u32 << 20)
                .map(|i| (i.wrapping_mul(2_654_435_761) >> 13) as u8)
                .collect(),
        ),
        ("text", b"hello\n".repeat(100_000)),
    ] {
        let f = d.join(format!("{name}.bin"));
        std::fs::write(&f, &bytes).unwrap();
        let out = run(name, {
            let mut c = bin();
            c.args(["view", "--no-preview", "--from"]).arg(&f);
            c
        });
        assert_refused(name, &out, &["no preview record", &bytes.len().to_string()]);
        count += 1;
    }

    // The instrument: --dump refused on a non-loopback bind (before it listens); bad limits.
    for bind in ["0.0.0.0", "::", "192.0.2.1"] {
        let out = run(bind, {
            let mut c = bin();
            c.args(["instrument", "--port", "0", "--bind", bind, "--dump"])
                .arg(d.join("dump"));
            c
        });
        assert_refused(bind, &out, &["--dump", "loopback"]);
        assert!(
            !d.join("dump").exists(),
            "case {bind}: the dump folder was made"
        );
        count += 1;
    }
    for (flag, v) in [
        ("--max-clients", "0"),
        ("--max-clients", "5000"),
        ("--idle-timeout-s", "0"),
        ("--session-limit-s", "0"),
        ("--idle-timeout-s", "-1"),
    ] {
        let out = run(flag, {
            let mut c = bin();
            c.args(["instrument", "--port", "0", &format!("{flag}={v}")]);
            c
        });
        assert_refused(flag, &out, &[flag]);
        count += 1;
    }
    println!("hostile matrix: {count} command-line cases passed");
    std::fs::remove_dir_all(&d).ok();
}
