//! Writing one transmission parameter as a version 1.1 two-port file.
//!
//! The file is `# Hz S RI R 50` with one line per frequency, `f S11 S21 S12 S22` in real and
//! imaginary parts (the version 1.1 two-port column order). Only S21 is known: S11, S12 and
//! S22 are written as 0 and the comment lines say so. Numbers are written in the shortest
//! form that reads back to the same `f64`, so a reader gets the values exactly.

use std::fmt::Write as _;

use num_complex::Complex64;

/// The text of a two-port file holding `s21` at `frequencies_hz` (the other three
/// parameters 0); `comments` become `!` lines at the top.
pub fn s21_two_port_text(comments: &[String], frequencies_hz: &[f64], s21: &[Complex64]) -> String {
    let mut s = String::new();
    for c in comments {
        for line in c.lines() {
            let _ = writeln!(s, "! {line}");
        }
    }
    s.push_str("! only S21 is measured: S11, S12 and S22 are written as 0\n");
    s.push_str("# Hz S RI R 50\n");
    for (f, v) in frequencies_hz.iter().zip(s21) {
        let _ = writeln!(s, "{f:e} 0 0 {:e} {:e} 0 0 0 0", v.re, v.im);
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::formats::touchstone::{Parameter, Spacing, Touchstone};

    #[test]
    fn our_reader_gets_the_values_back_exactly() {
        let f: Vec<f64> = (0..5).map(|k| 8e9 + 12.5e6 * k as f64).collect();
        let v: Vec<Complex64> = (0..5)
            .map(|k| Complex64::new(0.1 * k as f64 - 0.2, 1.0 / (3.0 + k as f64)))
            .collect();
        let text = s21_two_port_text(&["a gated sweep\nat 10°".into()], &f, &v);
        assert!(text.starts_with("! a gated sweep\n! at 10°\n"));
        let ts = Touchstone::parse_str(&text, "x.s2p").unwrap();
        assert_eq!(ts.ports(), 2);
        assert_eq!(ts.frequencies_hz(), f.as_slice());
        for (k, want) in v.iter().enumerate() {
            let m = ts.matrix(k).unwrap();
            // Row order S11, S12, S21, S22.
            assert_eq!(m[2], *want);
            assert_eq!(m[0], Complex64::new(0.0, 0.0));
        }
        let sweep = ts
            .to_sweep(Parameter::S21, Spacing::RequireUniform)
            .unwrap();
        assert_eq!(sweep.grid.points(), 5);
    }
}
