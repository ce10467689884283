//! Fuzz the Touchstone reader
//! (`sweepgate_host::formats::touchstone::Touchstone::parse_str`) with arbitrary text
//! (invalid UTF-8 is read lossily, as a file would be refused). Checks that nothing panics,
//! that a file that parses has as many matrices as frequencies, each of ports² values, that
//! its frequencies increase, that the error message is one line, and that the output is
//! bounded by the input; and that the readers from bytes (`parse_bytes`, and `parse_sweeps`
//! of the default parameter) give what `parse_str` (and `to_sweep`) give.
#![no_main]

use libfuzzer_sys::fuzz_target;
use sweepgate_host::formats::touchstone::{Parameter, Spacing, Touchstone};

fuzz_target!(|data: &[u8]| {
    let [name_byte, text @ ..] = data else { return };
    let bytes = text;
    let text = String::from_utf8_lossy(text);
    let name = format!("f.s{}p", 1 + name_byte % 4);
    let full = Touchstone::parse_str(&text, &name);
    same(&Touchstone::parse_bytes(bytes, &name), &full);
    let sweeps = full.clone().and_then(|t| {
        t.to_sweep(Parameter::default_for(t.ports()), Spacing::Resample)
            .map(|s| vec![s])
    });
    same(
        &Touchstone::parse_sweeps(bytes, &name, None, Spacing::Resample),
        &sweeps,
    );
    match full {
        Ok(t) => {
            let n = t.frequencies_hz().len();
            let p = t.ports();
            assert!(p >= 1);
            assert!(n <= text.len());
            for i in 0..n {
                let m = t.matrix(i).expect("one matrix per frequency");
                assert_eq!(m.len(), p * p);
            }
            assert!(t.matrix(n).is_none());
            assert!(t.frequencies_hz().windows(2).all(|w| w[0] < w[1]));
            assert!(t
                .frequencies_hz()
                .iter()
                .all(|f| f.is_finite() && *f >= 0.0));
        }
        Err(e) => {
            let s = e.to_string();
            assert!(!s.contains('\n'), "multi-line message: {s}");
        }
    }
});

/// Equal, or printed alike: an error may hold a NaN (an infinite dB level at an angle of 0
/// gives inf·0 in its imaginary part), which `==` never finds equal to itself.
fn same<T: PartialEq + std::fmt::Debug>(a: &T, b: &T) {
    if a != b {
        assert_eq!(format!("{a:?}"), format!("{b:?}"));
    }
}
