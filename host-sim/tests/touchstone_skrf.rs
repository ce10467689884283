//! Our Touchstone reader against scikit-rf's reading of the files shipped in its data folder
//! (real instrument files). Reference: scikit-rf (`skrf.Network(path)`), BSD licensed, run
//! by `host-sim/tests/skrf_check.sh`, which writes its readings as JSON and then runs this
//! test with `SKRF_JSON_DIR` set:
//!
//! ```text
//! SKRF_JSON_DIR=dir cargo test -p sweepgate-host --test touchstone_skrf -- --ignored --nocapture
//! ```
//!
//! Frequencies and every S-parameter must agree within 1e-9 relative; and on each file the
//! fast reader ([`Touchstone::read_sweeps`], [`Touchstone::parse_bytes`]) must give what the
//! full reader gives, bit for bit.

use std::path::{Path, PathBuf};

use num_complex::Complex64;
use serde::Deserialize;
use sweepgate_host::formats::touchstone::{Parameter, Spacing, Touchstone};

/// Relative agreement required (the acceptance criterion of the Touchstone issue).
const RELATIVE: f64 = 1e-9;

#[derive(Deserialize)]
struct Reading {
    file: PathBuf,
    ports: usize,
    f_hz: Vec<f64>,
    s: Vec<Vec<[f64; 2]>>,
}

#[derive(Deserialize)]
struct Skipped {
    file: PathBuf,
    reason: String,
}

fn agree(a: f64, b: f64) -> bool {
    a == b || (a - b).abs() <= RELATIVE * a.abs().max(b.abs())
}

fn agree_c(a: Complex64, b: Complex64) -> bool {
    a == b || (a - b).norm() <= RELATIVE * a.norm().max(b.norm())
}

/// The fast reader (from the bytes, and only the parameters asked for) against the full
/// one on the same file: the same file and, for the default parameter and for every
/// parameter at once, the same sweeps or the same error, bit for bit.
fn fast_reader_agrees(path: &Path, ts: &Touchstone) -> Result<(), String> {
    let bytes = std::fs::read(path).map_err(|e| e.to_string())?;
    let name = path.display().to_string();
    let full = Touchstone::parse_str(&String::from_utf8_lossy(&bytes), &name);
    if full.as_ref() != Ok(ts) || Touchstone::parse_bytes(&bytes, &name) != full {
        return Err("the reader from bytes differs from the text reader".into());
    }
    let n = ts.ports() as u8;
    let every: Vec<Parameter> = (1..=n)
        .flat_map(|o| (1..=n).map(move |i| Parameter::new(o, i)))
        .collect();
    let default = [Parameter::default_for(ts.ports())];
    for asked in [&default[..], &every[..]] {
        for spacing in [Spacing::RequireUniform, Spacing::Resample] {
            let want: Result<Vec<_>, _> = asked.iter().map(|&p| ts.to_sweep(p, spacing)).collect();
            if Touchstone::read_sweeps(path, Some(asked), spacing) != want {
                return Err(format!(
                    "the fast reader of {} parameter(s) differs from the full reader",
                    asked.len()
                ));
            }
        }
    }
    Ok(())
}

/// Compares one file; `Ok` holds a note for the log.
fn check(reading: &Reading) -> Result<String, String> {
    let ts = Touchstone::read(&reading.file).map_err(|e| e.to_string())?;
    if ts.ports() != reading.ports {
        return Err(format!(
            "{} ports, scikit-rf says {}",
            ts.ports(),
            reading.ports
        ));
    }
    let f = ts.frequencies_hz();
    if f.len() != reading.f_hz.len() || reading.s.len() != reading.f_hz.len() {
        return Err(format!(
            "{} frequencies, scikit-rf has {}",
            f.len(),
            reading.f_hz.len()
        ));
    }
    let mut worst = 0.0f64;
    for (k, (&ours, &theirs)) in f.iter().zip(&reading.f_hz).enumerate() {
        if !agree(ours, theirs) {
            return Err(format!("frequency {k}: {ours} Hz, scikit-rf {theirs} Hz"));
        }
        let m = ts.matrix(k).ok_or("matrix missing")?;
        if m.len() != reading.s[k].len() {
            return Err(format!("frequency {k}: matrix size {}", m.len()));
        }
        for (e, (&a, b)) in m.iter().zip(&reading.s[k]).enumerate() {
            let b = Complex64::new(b[0], b[1]);
            if !agree_c(a, b) {
                let (i, j) = (e / ts.ports() + 1, e % ts.ports() + 1);
                return Err(format!("frequency {k}, S{i}{j}: {a}, scikit-rf {b}"));
            }
            let scale = a.norm().max(b.norm());
            if scale > 0.0 {
                worst = worst.max((a - b).norm() / scale);
            }
        }
    }
    fast_reader_agrees(&reading.file, &ts)?;
    let spacing = match ts.to_sweep(Parameter::default_for(ts.ports()), Spacing::RequireUniform) {
        Ok(_) => "uniform".to_string(),
        Err(e) => format!("not uniform for gating: {}", e.kind),
    };
    Ok(format!(
        "{} ports, {} points, worst relative difference {worst:.1e}; {spacing}",
        ts.ports(),
        f.len()
    ))
}

#[test]
#[ignore = "needs scikit-rf's readings: run host-sim/tests/skrf_check.sh"]
fn touchstone_files_agree_with_scikit_rf() {
    let dir = std::env::var_os("SKRF_JSON_DIR")
        .map(PathBuf::from)
        .expect("set SKRF_JSON_DIR to the folder skrf_check.py wrote");
    let mut readings: Vec<PathBuf> = std::fs::read_dir(&dir)
        .unwrap_or_else(|e| panic!("{}: {e}", dir.display()))
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| {
            p.extension().is_some_and(|x| x == "json")
                && p.file_name().is_some_and(|n| n != "skipped.json")
        })
        .collect();
    readings.sort();
    let name = |p: &Path| {
        p.file_name().map_or_else(
            || p.display().to_string(),
            |n| n.to_string_lossy().into_owned(),
        )
    };
    let skipped_path = dir.join("skipped.json");
    if skipped_path.exists() {
        let text = std::fs::read_to_string(&skipped_path).unwrap();
        let skipped: Vec<Skipped> = serde_json::from_str(&text).unwrap();
        for s in &skipped {
            println!("skipped {}: {}", name(&s.file), s.reason);
        }
    }
    let (mut passed, mut failed) = (0usize, 0usize);
    for path in &readings {
        let text = std::fs::read_to_string(path).unwrap();
        let reading: Reading = match serde_json::from_str(&text) {
            Ok(r) => r,
            Err(e) => {
                println!("FAILED {}: bad reading: {e}", path.display());
                failed += 1;
                continue;
            }
        };
        match check(&reading) {
            Ok(note) => {
                println!("ok {}: {note}", name(&reading.file));
                passed += 1;
            }
            Err(why) => {
                println!("FAILED {}: {why}", name(&reading.file));
                failed += 1;
            }
        }
    }
    println!("skrf check: {passed} passed, {failed} failed");
    assert!(passed > 0, "no file was compared");
    assert_eq!(failed, 0, "files disagree with scikit-rf");
}
