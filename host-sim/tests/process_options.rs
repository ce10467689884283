//! `sweepgate process`: option parsing, settings files and their errors, input detection.

use std::path::PathBuf;

use sweepgate::window::WindowKind;
use sweepgate_host::formats::touchstone::{Parameter, Spacing};
use sweepgate_host::pipeline::options::{parse_frequencies, Choices, Origin, DEFAULT_GATE_SHAPE};
use sweepgate_host::pipeline::process::{detect, resolve, Input, Options, SettingsFile};
use sweepgate_host::pipeline::setup;

fn args_for(input: &str) -> Options {
    Options {
        manifest: Some(PathBuf::from(input)),
        ..Options::default()
    }
}

#[test]
fn frequency_lists_parse_and_bad_items_are_named() {
    assert_eq!(
        parse_frequencies("6e9, 8.5e9,10000000000"),
        Ok(vec![6e9, 8.5e9, 1e10])
    );
    for (text, says) in [
        ("6e9,,8e9", "``"),
        ("6e9,abc", "`abc`"),
        ("-1e9", "not a positive"),
        ("0", "not a positive"),
        ("inf", "not a positive"),
    ] {
        let e = parse_frequencies(text).unwrap_err();
        assert!(e.contains(says), "{text}: {e}");
    }
}

#[test]
fn settings_file_keys_are_read_and_unknown_keys_refused_by_name() {
    let s = SettingsFile::parse_str(
        "gate_center_ns = 10.5\ngate_span_ns = 3\nfrequencies_hz = [6e9, 8e9]\n\
         band_window = \"hann\"\ngate_shape = \"tukey:0.5\"\nparameter = \"S11\"\nresample = true\nout = \"r\"\n",
        "s.toml",
    )
    .unwrap();
    assert_eq!(s.gate_center_ns, Some(10.5));
    assert_eq!(s.gate_span_ns, Some(3.0));
    assert_eq!(s.frequencies_hz, Some(vec![6e9, 8e9]));
    assert_eq!(s.parameter.as_deref(), Some("S11"));
    assert_eq!(s.resample, Some(true));

    let e = SettingsFile::parse_str("gate_centre_ns = 10\n", "s.toml").unwrap_err();
    let m = format!("{e:#}");
    assert!(m.contains("unknown key `gate_centre_ns`"), "{m}");
    assert!(m.contains("s.toml"), "{m}");
    // A known key of the wrong type names the key too (toml's message).
    let m = format!(
        "{:#}",
        SettingsFile::parse_str("gate_span_ns = \"wide\"\n", "s.toml").unwrap_err()
    );
    assert!(m.contains("gate_span_ns"), "{m}");
    // Not TOML at all.
    assert!(SettingsFile::parse_str("gate_span_ns = = 3\n", "s.toml").is_err());
}

#[test]
fn command_line_overrides_the_settings_file() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("s.toml");
    std::fs::write(
        &path,
        "gate_center_ns = 10.5\ngate_span_ns = 3\nfrequencies_hz = [6e9]\nband_window = \"hann\"\nparameter = \"S12\"\nresample = true\nout = \"rep\"\n",
    )
    .unwrap();
    let mut a = args_for("m.csv");
    a.settings = Some(path.clone());
    let r = resolve(&a).unwrap();
    assert_eq!(r.input, Input::Manifest(PathBuf::from("m.csv")));
    assert_eq!(r.choices.center_ns, Some((10.5, Origin::SettingsFile)));
    assert_eq!(r.choices.span_ns, Some((3.0, Origin::SettingsFile)));
    assert_eq!(r.choices.frequencies_hz, Some(vec![6e9]));
    assert_eq!(r.choices.band_window, Some(WindowKind::Hann));
    assert_eq!(r.parameter, Some(Parameter::S12));
    assert_eq!(r.spacing, Spacing::Resample);
    // `out` in the settings file is relative to the settings file's folder.
    assert_eq!(r.out, dir.path().join("rep"));

    a.gate.gate_center_ns = Some(9.0);
    a.gate.frequencies_hz = Some("7e9,8e9".into());
    a.gate.band_window = Some("kaiser:8".into());
    a.out = Some(PathBuf::from("elsewhere"));
    let r = resolve(&a).unwrap();
    assert_eq!(r.choices.center_ns, Some((9.0, Origin::CommandLine)));
    assert_eq!(r.choices.span_ns, Some((3.0, Origin::SettingsFile)));
    assert_eq!(r.choices.frequencies_hz, Some(vec![7e9, 8e9]));
    assert_eq!(
        r.choices.band_window,
        Some(WindowKind::Kaiser { beta: 8.0 })
    );
    assert_eq!(r.out, PathBuf::from("elsewhere"));
}

#[test]
fn defaults_match_replay() {
    let r = resolve(&args_for("scan.csv")).unwrap();
    // Nothing chosen: the set-up's defaults, the same as replay's: Kaiser for 50 dB
    // sidelobes, Tukey α = 0.3 gate, no gate given.
    assert_eq!(r.choices, Choices::default());
    assert_eq!(
        setup::band_window(&r.choices, None).unwrap(),
        WindowKind::kaiser_for_sidelobe_db(50.0)
    );
    assert_eq!(setup::gate_shape(&r.choices), DEFAULT_GATE_SHAPE);
    assert_eq!(DEFAULT_GATE_SHAPE, WindowKind::Tukey { alpha: 0.3 });
    assert_eq!(r.choices.center_ns, None);
    assert_eq!(r.parameter, None);
    assert_eq!(r.spacing, Spacing::RequireUniform);
    assert_eq!(r.out, PathBuf::from("scan-report"));
}

#[test]
fn bad_values_are_refused_with_the_option_named() {
    let mut a = args_for("m.csv");
    a.gate.band_window = Some("triangle".into());
    assert!(format!("{:#}", resolve(&a).unwrap_err()).contains("--band-window"));
    let mut a = args_for("m.csv");
    a.gate.gate_shape = Some("tukey:2".into());
    assert!(format!("{:#}", resolve(&a).unwrap_err()).contains("--gate-shape"));
    let mut a = args_for("m.csv");
    a.parameter = Some("Z21".into());
    assert!(format!("{:#}", resolve(&a).unwrap_err()).contains("Z21"));
    let mut a = args_for("m.csv");
    a.gate.frequencies_hz = Some("8e9,x".into());
    assert!(format!("{:#}", resolve(&a).unwrap_err()).contains("--frequencies-hz"));
    assert!(
        format!("{:#}", resolve(&Options::default()).unwrap_err()).contains("nothing to process")
    );

    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("s.toml");
    std::fs::write(&path, "band_window = \"kaiser:99\"\n").unwrap();
    let mut a = args_for("m.csv");
    a.settings = Some(path);
    assert!(format!("{:#}", resolve(&a).unwrap_err()).contains("band_window"));
    let mut a = args_for("m.csv");
    a.settings = Some(dir.path().join("missing.toml"));
    assert!(format!("{:#}", resolve(&a).unwrap_err()).contains("missing.toml"));
}

#[test]
fn positional_input_kind_is_detected() {
    let dir = tempfile::tempdir().unwrap();
    let m = dir.path().join("scan.txt");
    std::fs::write(&m, "angle_deg,file\n0,a.s2p\n").unwrap();
    assert_eq!(detect(&m).unwrap(), Input::Manifest(m.clone()));
    let r = dir.path().join("scan.rec");
    std::fs::write(&r, [0u8, 1, 2, 3]).unwrap();
    assert_eq!(detect(&r).unwrap(), Input::Recording(r.clone()));
    let a = Options {
        input: Some(m.clone()),
        ..Options::default()
    };
    assert_eq!(resolve(&a).unwrap().input, Input::Manifest(m));
    assert!(detect(&dir.path().join("none")).is_err());
}
