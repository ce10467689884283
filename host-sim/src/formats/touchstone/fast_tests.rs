//! The fast reader ([`Touchstone::parse_bytes`], [`Touchstone::parse_sweeps`]) against the
//! full reader it must equal bit for bit: [`Touchstone::parse_str`] on the lossy text, then
//! [`Touchstone::to_sweep`] of each parameter. Reference: the full reader (`parser/data.rs`,
//! unchanged in what it computes), on generated files of every format, unit, port count
//! 1…4 and layout, with comments, records over several lines, noise data, CRLF, a BOM,
//! bytes past ASCII, and on thousands of damaged copies of them (errors must match too).

use super::*;

/// A small deterministic generator (xorshift64*), so failures repeat.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_f491_4f6c_dd1d)
    }
    fn below(&mut self, n: usize) -> usize {
        (self.next() % n as u64) as usize
    }
    fn unit(&mut self) -> f64 {
        (self.next() >> 11) as f64 / (1u64 << 53) as f64
    }
}

/// A number written in one of the ways files write them.
fn number(rng: &mut Rng, x: f64) -> String {
    match rng.below(7) {
        0 => format!("{x:e}"),
        1 => format!("{x:.9}"),
        2 => format!("{x:+.6E}"),
        3 => format!("{x}"),
        4 => format!("{:.3}", x * 1e3).trim_end_matches('0').to_string() + "e-3",
        5 => format!("{x:.12e}"),
        _ => format!("{x:.4}"),
    }
}

/// One generated file: its text and name.
struct Made {
    text: String,
    name: String,
}

/// The option line and keywords of a file (version 1.1 or 2.0 at random); returns the count
/// of values in a record.
fn header(rng: &mut Rng, ports: usize, points: usize, out: &mut String) -> usize {
    let unit = ["Hz", "kHz", "MHz", "GHz"][rng.below(4)];
    let format = ["RI", "MA", "DB"][rng.below(3)];
    let v2 = rng.below(3) == 0;
    let mut pairs = ports * ports;
    if rng.below(2) == 0 {
        out.push_str("! made for the fast reader's test, \u{b0} and \u{3a9} in a comment\n");
    }
    if v2 {
        out.push_str("[Version] 2.0\n");
    }
    out.push_str(&format!("# {unit} S {format} R 50\n"));
    if v2 {
        out.push_str(&format!("[Number of Ports] {ports}\n"));
        out.push_str(&format!("[Number of Frequencies] {points}\n"));
        if ports == 2 {
            let order = ["12_21", "21_12"][rng.below(2)];
            out.push_str(&format!("[Two-Port Data Order] {order}\n"));
        }
        if ports > 1 && rng.below(2) == 0 {
            let m = ["Lower", "Upper", "Full"][rng.below(3)];
            out.push_str(&format!("[Matrix Format] {m}\n"));
            if m != "Full" {
                pairs = ports * (ports + 1) / 2;
            }
        }
        if rng.below(2) == 0 {
            out.push_str("[Reference]");
            for _ in 0..ports {
                out.push_str(if rng.below(2) == 0 { " 50\n" } else { " 75" });
            }
            out.push('\n');
        }
        out.push_str("[Network Data]\n");
    }
    pairs
}

/// A valid file of `ports` ports (noise data, comments, continuation lines at random).
fn make(rng: &mut Rng, ports: usize) -> Made {
    let mut text = String::new();
    let points = 2 + rng.below(12);
    let pairs = header(rng, ports, points, &mut text);
    let v2 = text.contains("[Version]");
    let db = text.contains(" DB ");
    // One whole record a line half of the time (the reader's one-line path), else any split.
    let per_line = if rng.below(2) == 0 {
        2 * pairs + 1
    } else {
        1 + rng.below(2 * pairs + 1)
    };
    let (f0, df) = (1.0 + rng.below(5) as f64, 0.25);
    for k in 0..points {
        let mut nums = vec![number(rng, f0 + df * k as f64)];
        for _ in 0..pairs {
            let a = if db {
                -40.0 * rng.unit()
            } else {
                rng.unit() - 0.3
            };
            nums.push(number(rng, a));
            let angle = 360.0 * rng.unit() - 180.0;
            nums.push(number(rng, angle));
        }
        for (i, chunk) in nums.chunks(per_line).enumerate() {
            let sep = ["  ", "\t", " "][rng.below(3)];
            text.push_str(&chunk.join(sep));
            if i == 0 && rng.below(4) == 0 {
                text.push_str(" ! record\u{e9} comment");
            }
            text.push_str(if rng.below(5) == 0 { "\r\n" } else { "\n" });
        }
    }
    if ports == 2 && !v2 && rng.below(3) == 0 {
        text.push_str("! noise\n1 2.5 0.5 30 0.2\n2 2.6 0.4 31 0.2\n");
    }
    if v2 {
        text.push_str("[End]\n");
    }
    let name = format!("made.s{ports}p");
    Made { text, name }
}

/// The parameter lists asked of a file of `ports` ports.
fn asks(ports: usize) -> Vec<Option<Vec<Parameter>>> {
    let mut all = vec![None, Some(vec![Parameter::S21]), Some(vec![])];
    let p = ports as u8;
    all.push(Some(vec![Parameter::new(p, 1), Parameter::new(1, p)]));
    all.push(Some(vec![
        Parameter::new(p, p),
        Parameter::S11,
        Parameter::new(p, 1),
    ]));
    all.push(Some(vec![Parameter::new(p + 1, 1)]));
    all
}

/// The full reader's answers, the fast reader's, compared (errors included).
fn same(bytes: &[u8], name: &str) {
    let text = String::from_utf8_lossy(bytes);
    let full = Touchstone::parse_str(&text, name);
    let fast = Touchstone::parse_bytes(bytes, name);
    assert!(
        alike(&fast, &full),
        "parse_bytes, {name}:\n{text}\n{fast:?}\n{full:?}"
    );
    let ports = full.as_ref().map_or(2, Touchstone::ports);
    for ask in asks(ports) {
        for spacing in [Spacing::RequireUniform, Spacing::Resample] {
            let want = full.clone().and_then(|ts| {
                let list = ask
                    .clone()
                    .unwrap_or_else(|| vec![Parameter::default_for(ts.ports())]);
                list.iter().map(|&p| ts.to_sweep(p, spacing)).collect()
            });
            let got = Touchstone::parse_sweeps(bytes, name, ask.as_deref(), spacing);
            assert!(
                alike(&got, &want),
                "parse_sweeps {ask:?}, {name}:\n{text}\n{got:?}\n{want:?}"
            );
        }
    }
}

/// Equal, or printed alike: an error may hold a NaN (an infinite dB level at an angle of 0
/// gives inf·0 in its imaginary part), which `==` never finds equal to itself.
fn alike<T: PartialEq + std::fmt::Debug>(a: &T, b: &T) -> bool {
    a == b || format!("{a:?}") == format!("{b:?}")
}

#[test]
fn an_error_holding_a_nan_reads_the_same_fast() {
    // Found by the fuzz target `touchstone`: a record over several lines whose dB level,
    // 820215 dB, is infinite as a magnitude, at an angle of 0: both readers refuse it on line
    // 7 with the value (inf, NaN), said as an overflow.
    let file = b"# GHz S DB R 50\n1 -2.5 .108\n! 0.5\n2\n\t86\n.2\n\t8\t820215\n.0";
    let e = Touchstone::parse_bytes(file, "f.s1p").unwrap_err();
    assert_eq!(e.line, Some(7));
    // Said as an overflow, not as the parts (inf, NaN) it computed to.
    let text = e.to_string();
    assert!(
        text.contains("value 1 of the record overflows double precision"),
        "{e}"
    );
    assert!(!text.contains("NaN") && !text.contains("inf"), "{e}");
    same(file, "f.s1p");
}

#[test]
fn generated_files_read_the_same_fast() {
    let mut rng = Rng(0x5eed_0019);
    let (mut read, mut why) = (0, Vec::new());
    for round in 0..400 {
        let made = make(&mut rng, 1 + round % 4);
        let mut bytes = made.text.clone().into_bytes();
        if round % 7 == 0 {
            bytes.splice(0..0, *b"\xEF\xBB\xBF");
        }
        same(&bytes, &made.name);
        match Touchstone::parse_bytes(&bytes, &made.name) {
            Ok(_) => read += 1,
            Err(e) => why.push(e.to_string()),
        }
    }
    // The generator makes valid files: every one must read.
    assert_eq!(read, 400, "{why:?}");
}

/// Bytes and strings that damage a file in the ways that matter to the reader.
const DAMAGE: [&[u8]; 22] = [
    b"!",
    b"\n",
    b" ",
    b"\t",
    b"e",
    b"9",
    b"-",
    b".",
    b"x",
    b"\xC2\xA0",
    b"\xFF",
    b"[",
    b"#",
    b"1e400",
    b"1e39",
    b"999",
    b"inf",
    b"nan",
    b"1e37",
    b"0.5 7",
    b"\r",
    b"\x0b",
];

#[test]
fn damaged_files_fail_or_read_the_same_fast() {
    let mut rng = Rng(0xdead_beef_0019);
    for round in 0..3000 {
        let made = make(&mut rng, 1 + round % 4);
        let mut bytes = made.text.into_bytes();
        for _ in 0..1 + rng.below(3) {
            let at = rng.below(bytes.len() + 1);
            let d = DAMAGE[rng.below(DAMAGE.len())];
            match rng.below(3) {
                0 => {
                    bytes.splice(at..at, d.iter().copied());
                }
                1 if at < bytes.len() => {
                    bytes.splice(at..at + 1, d.iter().copied());
                }
                _ if at < bytes.len() => {
                    bytes.remove(at);
                }
                _ => {}
            }
        }
        same(&bytes, &made.name);
    }
}

#[test]
fn values_beyond_single_precision_are_refused_the_same_fast() {
    // Values passed over by the fast reader but beyond single precision after their
    // format's conversion: a large real part, a large magnitude whose angle decides, a dB
    // level past 770 dB, and a tiny one.
    for (line, name) in [
        (
            "# Hz S RI\n1 0 0 5e38 0 1 1 0 0\n2 0 0 1 1 1 1 0 0\n",
            "a.s2p",
        ),
        (
            "# Hz S MA\n1 0 0 1 0 1e39 90 0 0\n2 0 0 1 1 1 1 0 0\n",
            "a.s2p",
        ),
        (
            "# Hz S MA\n1 4e38 89.99 1 0 1 0 0 0\n2 0 0 1 1 1 1 0 0\n",
            "a.s2p",
        ),
        (
            "# Hz S MA\n1 4e38 90 1 0 1 0 0 0\n2 0 0 1 1 1 1 0 0\n",
            "a.s2p",
        ),
        (
            "# Hz S DB\n1 800 0 1 0 1 0 0 0\n2 0 0 1 1 1 1 0 0\n",
            "a.s2p",
        ),
        (
            "# Hz S DB\n1 -900 0 1 0 1 0 0 0\n2 0 0 1 1 1 1 0 0\n",
            "a.s2p",
        ),
        (
            "# Hz S DB\n1 99 0 1 0 1 0 0 0\n2 0 0 1 1 1 1 0 0\n",
            "a.s2p",
        ),
        (
            "# Hz S RI\n1 0 0 1 0 1 1e-400 0 0\n2 0 0 1 1 1 1 0 0\n",
            "a.s2p",
        ),
        (
            "# Hz S RI\n1 0 0 1 0 1 1 0 1e308\n2 0 0 1 1 1 1 0 0\n",
            "a.s2p",
        ),
        (
            "# Hz S RI\n1 0 0 1 0 1 1 0 1e309\n2 0 0 1 1 1 1 0 0\n",
            "a.s2p",
        ),
    ] {
        same(line.as_bytes(), name);
    }
    let big = Touchstone::parse_sweeps(
        b"# Hz S RI\n1 5e38 0 1 0 1 1 0 0\n2 0 0 1 1 1 1 0 0\n",
        "a.s2p",
        None,
        Spacing::RequireUniform,
    )
    .unwrap_err();
    assert_eq!(
        (big.line, big.to_string().contains("value 1")),
        (Some(2), true)
    );
}

#[test]
fn a_file_read_fast_names_its_path_in_errors() {
    let dir = std::env::temp_dir().join(format!("sweepgate-fast-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join("bad.s2p");
    std::fs::write(&path, "# Hz S RI\n1 0 0 1 0 1 1 0 0\n2 0 0 1 x 1 1 0 0\n").unwrap();
    let e = Touchstone::read_sweeps(&path, None, Spacing::RequireUniform).unwrap_err();
    assert_eq!(e.line, Some(3));
    assert_eq!(
        e.to_string(),
        format!("{}:3: `x` is not a number", path.display())
    );
    assert_eq!(Touchstone::read(&path).unwrap_err(), e);
    let missing = dir.join("missing.s2p");
    let e = Touchstone::read_sweeps(&missing, None, Spacing::RequireUniform).unwrap_err();
    assert_eq!(Touchstone::read(&missing).unwrap_err(), e);
    // A file over the cap is refused before it is read (a sparse file: no disk is used).
    let huge = dir.join("huge.s2p");
    let cap = crate::limits::MAX_TOUCHSTONE_BYTES;
    std::fs::File::create(&huge)
        .unwrap()
        .set_len(cap + 1)
        .unwrap();
    let e = Touchstone::read_sweeps(&huge, None, Spacing::RequireUniform).unwrap_err();
    assert_eq!(
        e.to_string(),
        format!(
            "{}: cannot read: {} bytes, over the 256 MiB limit for a Touchstone file; it was \
             not read",
            huge.display(),
            cap + 1
        )
    );
    assert_eq!(Touchstone::read(&huge).unwrap_err(), e);
    // A folder, named once.
    let e = Touchstone::read(&dir).unwrap_err();
    assert_eq!(
        e.to_string(),
        format!(
            "{}: cannot read: a folder, not a Touchstone file",
            dir.display()
        )
    );
    std::fs::remove_dir_all(&dir).unwrap();
}
