//! Fuzz the gain table reader (`sweepgate_host::formats::gain_table::GainTable::parse`) with
//! arbitrary text (invalid UTF-8 read lossily). Checks that nothing panics; that a table
//! that parses has one finite gain per frequency, frequencies finite, positive and strictly
//! increasing, no more rows than lines, and gives back each row's gain at its frequency;
//! and that an error is one line naming the file.
#![no_main]

use libfuzzer_sys::fuzz_target;
use sweepgate_host::formats::gain_table::GainTable;

fuzz_target!(|data: &[u8]| {
    let text = String::from_utf8_lossy(data);
    match GainTable::parse(&text, "fuzz.csv") {
        Ok(t) => {
            let (f, g) = (&t.frequencies_hz, &t.gains_dbi);
            assert_eq!(f.len(), g.len());
            // The header takes a line.
            assert!(!f.is_empty() && f.len() < text.lines().count());
            assert!(f.iter().all(|x| x.is_finite() && *x > 0.0));
            assert!(f.windows(2).all(|w| w[0] < w[1]));
            assert!(g.iter().all(|x| x.is_finite()));
            for (fi, gi) in f.iter().zip(g) {
                let got = t
                    .gain_dbi(*fi)
                    .expect("a row's own frequency is inside the table");
                assert!(
                    (got - gi).abs() <= 1e-9 * gi.abs().max(1.0),
                    "{got} vs {gi} at {fi}"
                );
            }
        }
        Err(e) => {
            let s = e.to_string();
            assert!(!s.contains('\n'), "multi-line message: {s}");
            assert!(s.starts_with("fuzz.csv: "), "{s}");
        }
    }
});
