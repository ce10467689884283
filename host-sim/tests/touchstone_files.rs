//! The Touchstone reader on small files written to disk: what a user's saved sweeps look
//! like (Windows line ends, legacy code-page comments, both versions), and errors that name
//! the file and line.

use std::path::PathBuf;

use num_complex::Complex64;
use sweepgate_host::formats::touchstone::{
    Parameter, Spacing, Touchstone, TouchstoneErrorKind, Version,
};

struct Dir(PathBuf);

impl Dir {
    fn new(tag: &str) -> Self {
        let p =
            std::env::temp_dir().join(format!("sweepgate-touchstone-{tag}-{}", std::process::id()));
        std::fs::create_dir_all(&p).unwrap();
        Self(p)
    }
    fn write(&self, name: &str, bytes: &[u8]) -> PathBuf {
        let p = self.0.join(name);
        std::fs::write(&p, bytes).unwrap();
        p
    }
}

impl Drop for Dir {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.0);
    }
}

#[test]
fn crlf_and_latin1_comments() {
    let d = Dir::new("crlf");
    // "! 50 \xD8 line" holds a Latin-1 byte (Ø) that is not UTF-8.
    let mut bytes = b"! 50 \xD8 line\r\n# kHz S DB R 50\r\n".to_vec();
    bytes.extend_from_slice(
        b"100 -6.0206 0 0 90 0 90 -6.0206 0\r\n200 -6.0206 0 0 -90 0 -90 -6.0206 0\r\n",
    );
    let p = d.write("line.s2p", &bytes);
    let t = Touchstone::read(&p).unwrap();
    assert_eq!(t.version(), Version::V1_1);
    assert_eq!(t.frequencies_hz(), &[100e3, 200e3]);
    // 0 dB at +90° is j (definition of the decibel and of polar form).
    let s21 = t.parameter(Parameter::S21).unwrap();
    assert!((s21[0] - Complex64::new(0.0, 1.0)).norm() < 1e-12);
    assert!((s21[1] - Complex64::new(0.0, -1.0)).norm() < 1e-12);
    // −6.0206 dB is a magnitude of one half (20·log10(0.5) = −6.0206).
    let s11 = t.parameter(Parameter::S11).unwrap();
    assert!((s11[0].norm() - 0.5).abs() < 1e-5);
}

#[test]
fn version_2_file_on_disk() {
    let d = Dir::new("v2");
    let text = "[Version] 2.0\n# GHz S MA R 50\n[Number of Ports] 2\n\
                [Two-Port Data Order] 12_21\n[Number of Frequencies] 3\n\
                [Reference] 50 50\n[Network Data]\n\
                1 0.1 0 0.2 10 0.8 20 0.1 0\n\
                2 0.1 0 0.2 10 0.8 30 0.1 0\n\
                3 0.1 0 0.2 10 0.8 40 0.1 0\n[End]\n";
    let p = d.write("antenna.ts", text.as_bytes());
    let t = Touchstone::read(&p).unwrap();
    assert_eq!(t.version(), Version::V2_0);
    let sweep = t.to_sweep(Parameter::S21, Spacing::RequireUniform).unwrap();
    assert_eq!(sweep.grid.start_hz(), 1e9);
    assert_eq!(sweep.grid.step_hz(), 1e9);
    let w = sweep.values[2];
    assert!((w.norm() - 0.8).abs() < 1e-6);
    assert!((w.arg().to_degrees() - 40.0).abs() < 1e-4);
}

#[test]
fn errors_name_the_path_and_line() {
    let d = Dir::new("errors");
    let p = d.write(
        "file.s2p",
        b"! saved sweep\n# MHz S RI\n100 1 0 0 0 0 0 1 0\n101 1 0 0 0 0 0 1\n",
    );
    let e = Touchstone::read(&p).unwrap_err();
    assert_eq!(e.line, Some(4));
    assert_eq!(
        e.to_string(),
        format!("{}:4: expected 9 numbers, found 8", p.display())
    );
    let missing = d.0.join("nothere.s1p");
    let e = Touchstone::read(&missing).unwrap_err();
    assert!(matches!(e.kind, TouchstoneErrorKind::Io(_)));
    assert!(e
        .to_string()
        .starts_with(&format!("{}: cannot read", missing.display())));
}

#[test]
fn non_uniform_file_from_disk() {
    let d = Dir::new("gap");
    let p = d.write("gap.s1p", b"# MHz S RI\n1 1 0\n2 1 0\n4 1 0\n5 1 0\n");
    let t = Touchstone::read(&p).unwrap();
    let e = t
        .to_sweep(Parameter::S11, Spacing::RequireUniform)
        .unwrap_err();
    let msg = e.to_string();
    assert!(msg.starts_with(&p.display().to_string()), "{msg}");
    assert!(
        msg.contains("not uniformly spaced") && msg.contains("0.1 % of the step"),
        "{msg}"
    );
    let r = t.to_sweep(Parameter::S11, Spacing::Resample).unwrap();
    assert!(r.warning.unwrap().contains("resampled"));
    // A constant response stays constant under linear interpolation.
    assert!(r
        .values
        .iter()
        .all(|v| (v.re - 1.0).abs() < 1e-6 && v.im == 0.0));
}
