//! The reader against hand-written files: every option, keyword and error.

use sweepgate::error::GridError;
use sweepgate::Complex32;

use super::parser::ports_from_name;
use super::*;

fn parse(text: &str, name: &str) -> Touchstone {
    Touchstone::parse_str(text, name).unwrap()
}

fn kind(text: &str, name: &str) -> (Option<usize>, TouchstoneErrorKind) {
    let e = Touchstone::parse_str(text, name).unwrap_err();
    (e.line, e.kind)
}

fn close(a: Complex64, b: Complex64) -> bool {
    (a - b).norm() <= 1e-12 * (1.0 + b.norm())
}

#[test]
fn parameter_names_parse() {
    assert_eq!("S21".parse(), Ok(Parameter::S21));
    assert_eq!("s11".parse(), Ok(Parameter::S11));
    assert_eq!(" S12 ".parse(), Ok(Parameter::S12));
    assert_eq!("S22".parse(), Ok(Parameter::S22));
    assert_eq!("S3,1".parse(), Ok(Parameter::new(3, 1)));
    assert_eq!("S10_12".parse(), Ok(Parameter::new(10, 12)));
    for bad in ["S", "S0", "S01", "S2", "S123", "Z21", "21", "S+1,2", "Sé1"] {
        assert!(bad.parse::<Parameter>().is_err(), "{bad}");
    }
    assert_eq!(Parameter::S21.to_string(), "S21");
    assert_eq!(Parameter::new(10, 1).to_string(), "S10,1");
    assert_eq!(Parameter::default_for(1), Parameter::S11);
    assert_eq!(Parameter::default_for(2), Parameter::S21);
}

#[test]
fn ports_from_extension() {
    assert_eq!(ports_from_name("a.s1p"), Some(1));
    assert_eq!(ports_from_name("dir/b.S2P"), Some(2));
    assert_eq!(ports_from_name("c.s12p"), Some(12));
    assert_eq!(ports_from_name("c.ts"), None);
    assert_eq!(ports_from_name("c.sp"), None);
    assert_eq!(ports_from_name("s2p"), None);
}

#[test]
fn defaults_without_option_line() {
    // Touchstone 1.1: no option line means GHz, S, MA, R 50.
    let t = parse("1 0.5 90\n2 0.5 180\n", "x.s1p");
    assert_eq!(t.unit(), FrequencyUnit::GHz);
    assert_eq!(t.kind(), ParameterKind::S);
    assert_eq!(t.format(), DataFormat::Ma);
    assert_eq!(t.reference_ohm(), &[50.0]);
    assert_eq!(t.frequencies_hz(), &[1e9, 2e9]);
    let s = t.parameter(Parameter::S11).unwrap();
    assert!(close(s[0], Complex64::new(0.0, 0.5)));
    assert!(close(s[1], Complex64::new(-0.5, 0.0)));
}

#[test]
fn empty_option_line_means_defaults() {
    let t = parse("#\n1 1 0\n", "x.s1p");
    assert_eq!(t.format(), DataFormat::Ma);
    assert_eq!(t.unit(), FrequencyUnit::GHz);
}

#[test]
fn option_fields_any_order_any_case() {
    for line in [
        "# MHz S RI R 75",
        "# R 75 RI S MHz",
        "#ri mhz r 75 s",
        "#  s  R  75.0  MhZ  Ri  ",
        "# RI MHz R 75",
    ] {
        let t = parse(&format!("{line}\n10 0.25 -0.5\n"), "x.s1p");
        assert_eq!(t.unit(), FrequencyUnit::MHz, "{line}");
        assert_eq!(t.format(), DataFormat::Ri, "{line}");
        assert_eq!(t.kind(), ParameterKind::S, "{line}");
        assert_eq!(t.reference_ohm(), &[75.0], "{line}");
        assert_eq!(t.frequencies_hz(), &[10e6]);
        let s = t.parameter(Parameter::S11).unwrap();
        assert_eq!(s[0], Complex64::new(0.25, -0.5));
    }
}

#[test]
fn every_unit() {
    for (u, hz) in [("Hz", 1.0), ("kHz", 1e3), ("MHz", 1e6), ("GHz", 1e9)] {
        let t = parse(&format!("# {u} RI\n2.5 1 0\n"), "x.s1p");
        assert_eq!(t.frequencies_hz(), &[2.5 * hz], "{u}");
    }
}

#[test]
fn every_kind() {
    for (k, want) in [
        ("S", ParameterKind::S),
        ("Y", ParameterKind::Y),
        ("Z", ParameterKind::Z),
        ("H", ParameterKind::H),
        ("G", ParameterKind::G),
    ] {
        let t = parse(&format!("# {k} RI\n1 1 0 0 0 0 0 1 0\n"), "x.s2p");
        assert_eq!(t.kind(), want);
    }
}

#[test]
fn every_format() {
    // RI: the pair as is. MA: 2∠30°. DB: 20·log10(2) = 6.0206 dB at −45°.
    let r = parse("# RI\n1 0.3 -0.4\n", "x.s1p");
    assert_eq!(
        r.parameter(Parameter::S11).unwrap()[0],
        Complex64::new(0.3, -0.4)
    );
    let m = parse("# MA\n1 2 30\n", "x.s1p");
    let want = Complex64::new(
        2.0 * 30f64.to_radians().cos(),
        2.0 * 30f64.to_radians().sin(),
    );
    assert!(close(m.parameter(Parameter::S11).unwrap()[0], want));
    let db = 20.0 * 2f64.log10();
    let d = parse(&format!("# dB\n1 {db} -45\n"), "x.s1p");
    let v = d.parameter(Parameter::S11).unwrap()[0];
    assert!((v.norm() - 2.0).abs() < 1e-12);
    assert!((v.arg().to_degrees() + 45.0).abs() < 1e-12);
    // −20 dB is a magnitude of 0.1 (definition of the decibel for a field quantity).
    let d = parse("# DB\n1 -20 180\n", "x.s1p");
    assert!(close(
        d.parameter(Parameter::S11).unwrap()[0],
        Complex64::new(-0.1, 0.0)
    ));
}

#[test]
fn two_port_columns_are_s11_s21_s12_s22() {
    let t = parse("# GHz S RI\n1 11 0 21 0 12 0 22 0\n", "x.s2p");
    let m = t.matrix(0).unwrap();
    assert_eq!(
        m.iter().map(|c| c.re).collect::<Vec<_>>(),
        vec![11.0, 12.0, 21.0, 22.0]
    );
    assert_eq!(t.parameter(Parameter::S21).unwrap()[0].re, 21.0);
    assert_eq!(t.parameter(Parameter::S12).unwrap()[0].re, 12.0);
    assert_eq!(t.parameter(Parameter::S22).unwrap()[0].re, 22.0);
    assert!(t.matrix(1).is_none());
}

#[test]
fn comments_anywhere() {
    let text = "! header comment\n\
                ! another\n\
                # MHz S RI R 50 ! trailing on the option line\n\
                !\n\
                1 0.1 0.2 ! trailing on data\n   ! indented comment\n\
                2 0.3 0.4!no space\n\
                \n\
                3 0.5 0.6\n\
                ! closing comment";
    let t = parse(text, "x.s1p");
    assert_eq!(t.frequencies_hz(), &[1e6, 2e6, 3e6]);
    assert_eq!(
        t.parameter(Parameter::S11).unwrap()[1],
        Complex64::new(0.3, 0.4)
    );
}

#[test]
fn records_continue_over_lines() {
    let text = "# Hz S RI\n\
                1 11 0 21 0\n   12 0\n22 0\n\
                2\n11 1 21 1 12 1 22 1\n\
                3 11 2 ! comment in the middle\n\n21 2 12 2 22 2\n";
    let t = parse(text, "x.s2p");
    assert_eq!(t.frequencies_hz(), &[1.0, 2.0, 3.0]);
    assert_eq!(
        t.parameter(Parameter::S21).unwrap()[2],
        Complex64::new(21.0, 2.0)
    );
    assert_eq!(
        t.parameter(Parameter::S12).unwrap()[0],
        Complex64::new(12.0, 0.0)
    );
}

#[test]
fn three_port_row_major_over_lines() {
    // Version 1.1 writes each matrix row on its own line(s).
    let text = "# Hz S RI\n\
                1 11 0 12 0 13 0\n  21 0 22 0 23 0\n  31 0 32 0 33 0\n\
                2 11 1 12 1 13 1\n  21 1 22 1 23 1\n  31 1 32 1 33 1\n";
    let t = parse(text, "x.s3p");
    assert_eq!(t.ports(), 3);
    assert_eq!(
        t.parameter(Parameter::new(3, 2)).unwrap()[1],
        Complex64::new(32.0, 1.0)
    );
    assert_eq!(
        t.parameter(Parameter::new(1, 3)).unwrap()[0],
        Complex64::new(13.0, 0.0)
    );
    let e = t.parameter(Parameter::new(4, 1)).unwrap_err();
    assert!(matches!(
        e.kind,
        TouchstoneErrorKind::PortOutOfRange { ports: 3, .. }
    ));
}

#[test]
fn v1_noise_data_is_skipped() {
    let text = "# GHz S MA R 50\n\
                1 0.1 0 0.9 0 0.01 0 0.2 0\n\
                2 0.1 0 0.8 0 0.01 0 0.2 0\n\
                3 0.1 0 0.7 0 0.01 0 0.2 0\n\
                ! noise parameters\n\
                1 0.8 0.3 45 0.2\n\
                2 0.9 0.3 50 0.2\n";
    let t = parse(text, "amp.s2p");
    assert_eq!(t.frequencies_hz(), &[1e9, 2e9, 3e9]);
    assert_eq!(t.noise_records(), 2);
}

#[test]
fn v1_noise_may_start_at_the_last_frequency() {
    let text = "1 0.1 0 0.9 0 0.01 0 0.2 0\n2 0.1 0 0.8 0 0.01 0 0.2 0\n2 0.8 0.3 45 0.2\n";
    let t = parse(text, "amp.s2p");
    assert_eq!(t.frequencies_hz().len(), 2);
    assert_eq!(t.noise_records(), 1);
}

#[test]
fn one_port_going_down_is_an_error() {
    let (line, k) = kind("1 0.1 0\n2 0.1 0\n1.5 0.1 0\n", "x.s1p");
    assert_eq!(line, Some(3));
    assert!(matches!(k, TouchstoneErrorKind::NotIncreasing { .. }));
}

#[test]
fn later_v1_option_lines_before_data_are_ignored() {
    let t = parse("# MHz RI\n# GHz MA\n1 1 0\n", "x.s1p");
    assert_eq!(t.unit(), FrequencyUnit::MHz);
}

const V2: &str = "! a version 2.0 file\n\
    [Version] 2.0\n\
    # MHz S RI R 50\n\
    [Number of Ports] 2 ! trailing comment on a keyword\n\
    [Two-Port Data Order] 12_21\n\
    [Number of Frequencies] 2\n\
    [Number of Noise Frequencies] 1\n\
    [Reference] 50 75\n\
    [Matrix Format] Full\n\
    [Begin Information]\n\
    anything here 1 2 3 [not a keyword]\n\
    [End Information]\n\
    [Network Data]\n\
    100 11 0 12 0 21 0 22 0\n\
    200 11 1\n 12 1 21 1 22 1\n\
    [Noise Data]\n\
    100 0.8 0.3 45 0.2\n\
    [End]\n\
    text after the end is ignored\n";

#[test]
fn v2_keywords() {
    let t = parse(V2, "x.ts");
    assert_eq!(t.version(), Version::V2_0);
    assert_eq!(t.ports(), 2);
    assert_eq!(t.reference_ohm(), &[50.0, 75.0]);
    assert_eq!(t.frequencies_hz(), &[100e6, 200e6]);
    // 12_21: the second pair is S12.
    assert_eq!(t.parameter(Parameter::S12).unwrap()[0].re, 12.0);
    assert_eq!(
        t.parameter(Parameter::S21).unwrap()[1],
        Complex64::new(21.0, 1.0)
    );
    assert_eq!(t.noise_records(), 1);
}

#[test]
fn v2_order_21_12_and_case_insensitive_keywords() {
    let text = V2
        .replace(
            "[Two-Port Data Order] 12_21",
            "[two-port  data ORDER] 21_12",
        )
        .replace("[Network Data]", "[NETWORK DATA]");
    let t = parse(&text, "x.s2p");
    assert_eq!(t.parameter(Parameter::S21).unwrap()[0].re, 12.0);
    assert_eq!(t.parameter(Parameter::S12).unwrap()[0].re, 21.0);
}

#[test]
fn v2_reference_over_lines_and_lower_upper_matrix() {
    let text = "[Version] 2.0\n# Hz S RI\n[Number of Ports] 3\n[Number of Frequencies] 1\n\
                [Reference]\n50\n60 70\n[Matrix Format] Lower\n[Network Data]\n\
                1 11 0\n21 0 22 0\n31 0 32 0 33 0\n[End]\n";
    let t = parse(text, "x.ts");
    assert_eq!(t.reference_ohm(), &[50.0, 60.0, 70.0]);
    assert_eq!(t.parameter(Parameter::new(1, 3)).unwrap()[0].re, 31.0);
    assert_eq!(t.parameter(Parameter::new(3, 1)).unwrap()[0].re, 31.0);
    let up = text.replace("Lower", "Upper").replace(
        "1 11 0\n21 0 22 0\n31 0 32 0 33 0",
        "1 11 0 12 0 13 0\n22 0 23 0\n33 0",
    );
    let t = parse(&up, "x.ts");
    assert_eq!(t.parameter(Parameter::new(3, 2)).unwrap()[0].re, 23.0);
    assert_eq!(t.parameter(Parameter::new(1, 3)).unwrap()[0].re, 13.0);
}

#[test]
fn v2_one_port_without_reference_uses_option_r() {
    let text = "[Version] 2.0\n# GHz S DB R 25\n[Number of Ports] 1\n\
                [Number of Frequencies] 2\n[Network Data]\n1 0 0\n2 -6 90\n[End]\n";
    let t = parse(text, "x.ts");
    assert_eq!(t.reference_ohm(), &[25.0]);
    assert_eq!(t.frequencies_hz(), &[1e9, 2e9]);
}

#[test]
fn option_line_errors() {
    let e = |s: &str| kind(&format!("{s}\n1 1 0\n"), "x.s1p").1;
    assert_eq!(
        e("# GHz XX"),
        TouchstoneErrorKind::UnknownOption("XX".into())
    );
    assert_eq!(e("# GHz R"), TouchstoneErrorKind::MissingReference);
    assert_eq!(e("# R abc"), TouchstoneErrorKind::BadNumber("abc".into()));
    assert_eq!(e("# R -5"), TouchstoneErrorKind::BadReference(-5.0));
    assert_eq!(
        e("# GHz MHz"),
        TouchstoneErrorKind::DuplicateOption("frequency unit".into())
    );
    assert_eq!(
        e("# S Z"),
        TouchstoneErrorKind::DuplicateOption("parameter kind".into())
    );
    assert_eq!(
        e("# RI MA"),
        TouchstoneErrorKind::DuplicateOption("data format".into())
    );
    assert_eq!(
        e("# R 50 R 75"),
        TouchstoneErrorKind::DuplicateOption("reference resistance".into())
    );
    let (line, k) = kind("1 1 0\n# MHz\n", "x.s1p");
    assert_eq!(
        (line, k),
        (Some(2), TouchstoneErrorKind::OptionLineAfterData)
    );
}

#[test]
fn record_length_errors_name_the_line() {
    let text = "! c\n# RI\n1 1 0 0 0 0 0 1 0\n2 1 0 0 0 0 0 1\n";
    let e = Touchstone::parse_str(text, "file.s2p").unwrap_err();
    assert_eq!(e.to_string(), "file.s2p:4: expected 9 numbers, found 8");
    let text = "# RI\n1 1 0 0 0 0 0 1\n2 1 0 0 0 0 0 1 0\n";
    let e = Touchstone::parse_str(text, "file.s2p").unwrap_err();
    assert_eq!(
        e.to_string(),
        "file.s2p:2: expected 9 numbers, found 17 (record ends at line 3)"
    );
    let (line, k) = kind("# RI\n1 1 0 5\n", "x.s1p");
    assert_eq!(line, Some(2));
    assert_eq!(
        k,
        TouchstoneErrorKind::RecordLength {
            expected: 3,
            found: 4,
            last_line: 0
        }
    );
}

#[test]
fn number_errors() {
    assert_eq!(
        kind("# RI\n1 0.5 x\n", "x.s1p"),
        (Some(2), TouchstoneErrorKind::BadNumber("x".into()))
    );
    assert_eq!(
        kind("# RI\n1 nan 0\n", "x.s1p"),
        (Some(2), TouchstoneErrorKind::NonFiniteNumber("nan".into()))
    );
    assert_eq!(
        kind("# RI\n1 inf 0\n", "x.s1p").1,
        TouchstoneErrorKind::NonFiniteNumber("inf".into())
    );
    assert_eq!(
        kind("# RI\n1,0 5 0\n", "x.s1p").1,
        TouchstoneErrorKind::BadNumber("1,0".into())
    );
    assert!(matches!(
        kind("# RI\n-1 1 0\n", "x.s1p"),
        (Some(2), TouchstoneErrorKind::NegativeFrequency(_))
    ));
    assert!(matches!(
        kind("# RI\n1 1 0\n1 1 0\n", "x.s1p"),
        (Some(3), TouchstoneErrorKind::NotIncreasing { .. })
    ));
}

#[test]
fn file_level_errors() {
    assert_eq!(
        kind("1 1 0\n", "x.txt"),
        (None, TouchstoneErrorKind::UnknownExtension)
    );
    assert_eq!(
        kind("1 1 0\n", "x.s0p"),
        (None, TouchstoneErrorKind::UnknownExtension)
    );
    assert_eq!(
        kind("! only\n# RI\n", "x.s1p"),
        (None, TouchstoneErrorKind::NoData)
    );
    assert_eq!(
        kind("1 1 0\n", "x.s65p"),
        (None, TouchstoneErrorKind::TooManyPorts(65))
    );
    let e = Touchstone::parse_str("", "empty.s1p").unwrap_err();
    assert_eq!(e.to_string(), "empty.s1p: no network data");
}

#[test]
fn keyword_errors() {
    let v2 = |s: &str| kind(s, "x.ts");
    assert!(matches!(
        kind("[Number of Ports] 1\n", "x.s1p"),
        (Some(1), TouchstoneErrorKind::UnknownKeyword(_))
    ));
    assert_eq!(
        v2("[Version] 3.0\n"),
        (
            Some(1),
            TouchstoneErrorKind::UnsupportedVersion("3.0".into())
        )
    );
    assert_eq!(
        v2("# GHz\n[Version] 2.0\n"),
        (Some(2), TouchstoneErrorKind::VersionNotFirst)
    );
    let head = "[Version] 2.0\n# GHz S RI\n";
    assert_eq!(
        v2(&format!("{head}[Bogus] 1\n")),
        (Some(3), TouchstoneErrorKind::UnknownKeyword("Bogus".into()))
    );
    assert_eq!(
        v2(&format!("{head}# MHz\n")),
        (Some(3), TouchstoneErrorKind::DuplicateOptionLine)
    );
    assert_eq!(
        v2(&format!("{head}[Number of Ports] 1\n[Number of Ports] 1\n")),
        (
            Some(4),
            TouchstoneErrorKind::DuplicateKeyword("Number of Ports".into())
        )
    );
    assert!(matches!(
        v2(&format!("{head}[Number of Ports] two\n")),
        (Some(3), TouchstoneErrorKind::BadKeywordValue { .. })
    ));
    assert!(matches!(
        v2(&format!(
            "{head}[Number of Ports] 2\n[Two-Port Data Order] 11_22\n"
        )),
        (Some(4), TouchstoneErrorKind::BadKeywordValue { .. })
    ));
    assert!(matches!(
        v2(&format!("{head}[Matrix Format] Diagonal\n")),
        (Some(3), TouchstoneErrorKind::BadKeywordValue { .. })
    ));
    assert_eq!(
        v2(&format!("{head}[Number of Ports] 99\n")),
        (Some(3), TouchstoneErrorKind::TooManyPorts(99))
    );
    assert_eq!(
        v2(&format!("{head}[Mixed-Mode Order] D2,1 C2,1\n")),
        (Some(3), TouchstoneErrorKind::MixedModeUnsupported)
    );
    assert_eq!(
        v2(&format!("{head}[Reference] 50\n")),
        (
            Some(3),
            TouchstoneErrorKind::MissingKeyword("[Number of Ports]")
        )
    );
    assert_eq!(
        v2(&format!(
            "{head}[Number of Ports] 2\n[Number of Frequencies] 1\n[Network Data]\n"
        )),
        (
            Some(5),
            TouchstoneErrorKind::MissingKeyword("[Two-Port Data Order]")
        )
    );
    assert_eq!(
        v2(&format!("{head}[Number of Ports] 1\n[Network Data]\n")),
        (
            Some(4),
            TouchstoneErrorKind::MissingKeyword("[Number of Frequencies]")
        )
    );
    assert_eq!(
        v2(&format!("{head}[Number of Ports] 1\n1 1 0\n")),
        (Some(4), TouchstoneErrorKind::NumbersOutsideData)
    );
    assert_eq!(
        v2(&format!(
            "{head}[Number of Ports] 1\n[Number of Frequencies] 1\n"
        )),
        (None, TouchstoneErrorKind::MissingKeyword("[Network Data]"))
    );
    assert_eq!(
        v2("[Version] 2.0\n[Number of Ports] 1\n[Number of Frequencies] 1\n[Network Data]\n"),
        (
            Some(4),
            TouchstoneErrorKind::MissingKeyword("option line (#)")
        )
    );
    let one = format!("{head}[Number of Ports] 1\n[Number of Frequencies] 2\n[Network Data]\n");
    assert_eq!(
        v2(&format!("{one}1 1 0\n[End]\n")),
        (
            None,
            TouchstoneErrorKind::FrequencyCountMismatch {
                declared: 2,
                found: 1
            }
        )
    );
    assert_eq!(
        v2(&format!("{one}1 1 0\n2 1 0\n3 1 0\n")),
        (
            Some(8),
            TouchstoneErrorKind::FrequencyCountMismatch {
                declared: 2,
                found: 3
            }
        )
    );
    assert_eq!(
        v2(&format!("{one}1 1 0\n2 1 0\n[Noise Data]\n")),
        (Some(8), TouchstoneErrorKind::NoiseDataNotTwoPort)
    );
    assert!(matches!(
        v2(&format!("{one}1 1\n[End]\n")),
        (
            Some(6),
            TouchstoneErrorKind::RecordLength {
                expected: 3,
                found: 2,
                ..
            }
        )
    ));
    assert!(matches!(
        v2(&format!(
            "{head}[Number of Ports] 2\n[Reference] 50 60 70\n"
        )),
        (
            Some(4),
            TouchstoneErrorKind::RecordLength {
                expected: 2,
                found: 3,
                ..
            }
        )
    ));
}

fn uniform_1port(freqs: &[f64]) -> String {
    let mut s = String::from("# Hz S RI\n");
    for (k, f) in freqs.iter().enumerate() {
        s.push_str(&format!("{f} {} {}\n", k as f64, -(k as f64)));
    }
    s
}

#[test]
fn uniform_file_becomes_a_grid() {
    let t = parse(&uniform_1port(&[1e6, 2e6, 3e6, 4e6]), "x.s1p");
    let g = t.to_sweep(Parameter::S11, Spacing::RequireUniform).unwrap();
    assert_eq!(g.grid.points(), 4);
    assert_eq!(g.grid.start_hz(), 1e6);
    assert_eq!(g.grid.step_hz(), 1e6);
    assert_eq!(g.values[3], Complex32::new(3.0, -3.0));
    assert!(g.warning.is_none());
    // Within tolerance: 0.05 % of a step off.
    let t = parse(&uniform_1port(&[1e6, 2.0005e6, 3e6, 4e6]), "x.s1p");
    assert!(t.to_sweep(Parameter::S11, Spacing::RequireUniform).is_ok());
}

#[test]
fn non_uniform_file_is_refused_or_resampled() {
    let t = parse(&uniform_1port(&[0.0, 1.0, 3.0, 4.0]), "x.s1p");
    let e = t
        .to_sweep(Parameter::S11, Spacing::RequireUniform)
        .unwrap_err();
    assert_eq!(e.line, None);
    match e.kind {
        TouchstoneErrorKind::NotUniform {
            index,
            deviation_hz,
            tolerance_hz,
            step_hz,
        } => {
            // Uniform grid 0, 4/3, 8/3, 4: point 1 is 1/3 Hz off.
            assert!(index == 1 || index == 2);
            assert!((deviation_hz - 1.0 / 3.0).abs() < 1e-12);
            assert!((step_hz - 4.0 / 3.0).abs() < 1e-12);
            assert!((tolerance_hz - 4.0 / 3.0 * 1e-3).abs() < 1e-15);
        }
        k => panic!("{k:?}"),
    }
    assert!(e.to_string().contains("not uniformly spaced"));
    assert!(e.to_string().contains("tolerance"));
    let r = t.to_sweep(Parameter::S11, Spacing::Resample).unwrap();
    assert!(r.warning.as_deref().unwrap().contains("resampled"));
    assert_eq!(r.grid.points(), 4);
    // S11 = k − jk at f = 0, 1, 3, 4 (k = 0..3): at 4/3 Hz linear interpolation between
    // (1, 1−1j) and (3, 2−2j) gives 1 + 1/6; at 8/3 it gives 1 + 5/6.
    let want = [0.0, 1.0 + 1.0 / 6.0, 1.0 + 5.0 / 6.0, 3.0];
    for (v, w) in r.values.iter().zip(want) {
        assert!((v.re - w as f32).abs() < 1e-6 && (v.im + w as f32).abs() < 1e-6);
    }
}

#[test]
fn sweep_needs_s_parameters_and_two_points() {
    let t = parse("# Z RI\n1 1 0\n2 1 0\n", "x.s1p");
    assert_eq!(
        t.to_sweep(Parameter::S11, Spacing::RequireUniform)
            .unwrap_err()
            .kind,
        TouchstoneErrorKind::NotScattering(ParameterKind::Z)
    );
    let t = parse("# RI\n1 1 0\n", "x.s1p");
    assert_eq!(
        t.to_sweep(Parameter::S11, Spacing::RequireUniform)
            .unwrap_err()
            .kind,
        TouchstoneErrorKind::Grid(GridError::TooFewPoints)
    );
    let t = parse("# RI\n1 1 0\n2 1 0\n", "x.s1p");
    assert!(matches!(
        t.to_sweep(Parameter::S21, Spacing::RequireUniform)
            .unwrap_err()
            .kind,
        TouchstoneErrorKind::PortOutOfRange { ports: 1, .. }
    ));
}
