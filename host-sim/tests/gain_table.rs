//! The reference gain table reader: what it accepts, and errors that name file and line.

use sweepgate::error::GainError;
use sweepgate_host::formats::gain_table::GainTable;

#[test]
fn reads_a_table_with_comments_and_interpolates() {
    let text = "\u{feff}# horn calibration, invented values\n\
                frequency_hz, gain_dbi\r\n\
                \n\
                8.0e9, 15.1\r\n\
                10.0e9,16.3\n\
                # a comment between rows\n\
                12.0e9 ,17.9\n";
    let t = GainTable::parse(text, "horn.csv").unwrap();
    assert_eq!(t.frequencies_hz, vec![8e9, 10e9, 12e9]);
    assert_eq!(t.gains_dbi, vec![15.1, 16.3, 17.9]);
    // Linear in dB between rows (the core's rule): halfway from 10 to 12 GHz.
    assert!((t.gain_dbi(11e9).unwrap() - 17.1).abs() < 1e-12);
    assert!((t.gain_dbi(8e9).unwrap() - 15.1).abs() < 1e-12);
    assert_eq!(t.gain_dbi(7.9e9), Err(GainError::OutsideTable));
    assert_eq!(t.gain_dbi(12.1e9), Err(GainError::OutsideTable));
}

#[test]
fn errors_name_the_file_and_line() {
    let cases = [
        ("", None, "expected the header"),
        ("# only a comment\n", None, "expected the header"),
        ("8e9,15\n", Some(1), "expected the header"),
        (
            "gain_dbi,frequency_hz\n8e9,15\n",
            Some(1),
            "expected the header",
        ),
        ("frequency_hz,gain_dbi\n", None, "no rows"),
        (
            "frequency_hz,gain_dbi\n8e9,15\n9e9\n",
            Some(3),
            "two fields",
        ),
        ("frequency_hz,gain_dbi\n8e9,15,1\n", Some(2), "two fields"),
        (
            "frequency_hz,gain_dbi\n8e9,fifteen\n",
            Some(2),
            "gain_dbi `fifteen`",
        ),
        (
            "frequency_hz,gain_dbi\n8e9,15\n\n9 GHz,16\n",
            Some(4),
            "frequency_hz `9 GHz`",
        ),
        (
            "frequency_hz,gain_dbi\nnan,15\n",
            Some(2),
            "not a finite number",
        ),
        (
            "frequency_hz,gain_dbi\n8e9,inf\n",
            Some(2),
            "not a finite number",
        ),
        ("frequency_hz,gain_dbi\n-8e9,15\n", Some(2), "above 0"),
        (
            "frequency_hz,gain_dbi\n8e9,15\n8e9,16\n",
            Some(3),
            "previous row",
        ),
        (
            "frequency_hz,gain_dbi\n9e9,15\n8e9,16\n",
            Some(3),
            "previous row",
        ),
    ];
    for (text, line, says) in cases {
        let e = GainTable::parse(text, "ref/horn.csv").unwrap_err();
        assert_eq!(e.file, "ref/horn.csv");
        assert_eq!(e.line, line, "{text:?}: {e}");
        let msg = e.to_string();
        assert!(msg.starts_with("ref/horn.csv: "), "{msg}");
        if let Some(l) = line {
            assert!(msg.contains(&format!("line {l}: ")), "{msg}");
        }
        assert!(msg.contains(says), "{text:?}: {msg}");
        assert!(!msg.contains('\n'), "{msg}");
    }
}

#[test]
fn a_missing_file_is_named() {
    let p = std::env::temp_dir().join("sweepgate-no-such-gain-table.csv");
    let e = GainTable::load(&p).unwrap_err();
    assert_eq!(e.line, None);
    let msg = e.to_string();
    assert!(msg.contains("sweepgate-no-such-gain-table.csv"), "{msg}");
    assert!(msg.contains("cannot be read"), "{msg}");
}
