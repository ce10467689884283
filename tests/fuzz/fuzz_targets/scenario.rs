//! Fuzz the scenario reader (`sweepgate_host::model::scenario::Scenario::from_toml`) with
//! arbitrary text (invalid UTF-8 read lossily). Checks that nothing panics; that a scenario
//! that parses validates again, has a usable grid, and survives writing back to TOML and
//! reading again unchanged; and that an error, with its causes, is one line.
#![no_main]

use libfuzzer_sys::fuzz_target;
use sweepgate_host::model::scenario::Scenario;

fuzz_target!(|data: &[u8]| {
    let text = String::from_utf8_lossy(data);
    match Scenario::from_toml(&text) {
        Ok(s) => {
            s.validate()
                .expect("a scenario that parsed validates again");
            let grid = s.grid().expect("a valid scenario has a grid");
            assert_eq!(grid.points(), s.sweep.points);
            let again = toml::to_string(&s).expect("a scenario writes as TOML");
            let back = Scenario::from_toml(&again).expect("a written scenario reads back");
            assert_eq!(back, s);
        }
        Err(e) => {
            let s = format!("{e:#}");
            assert!(!s.contains('\n'), "multi-line message: {s}");
        }
    }
});
