//! Fuzz the instrument profile reader (`sweepgate_host::link::acquire::Profile::from_toml`)
//! with arbitrary text (invalid UTF-8 read lossily). Checks that nothing panics; that a
//! profile that parses keeps the limits its reader promises (timeout above 0, encoder counts
//! per turn above 0, at most 16 retries, a back-off of 0 to 60 s); and that an error, with
//! its causes, is one line.
#![no_main]

use libfuzzer_sys::fuzz_target;
use sweepgate_host::link::acquire::Profile;

fuzz_target!(|data: &[u8]| {
    let text = String::from_utf8_lossy(data);
    match Profile::from_toml(&text) {
        Ok(p) => {
            assert!(p.timeout_s.is_finite() && p.timeout_s > 0.0);
            assert!(p.counts_per_turn > 0);
            assert!(p.retries <= 16);
            assert!((0.0..=60.0).contains(&p.retry_backoff_s));
        }
        Err(e) => {
            let s = format!("{e:#}");
            assert!(!s.contains('\n'), "multi-line message: {s}");
        }
    }
});
