//! What the tests of independent models share (the rooms, the sphere and the RCS range,
//! written in numpy/scipy for the tests alone): a Python with numpy and scipy, and their CSV
//! output read back.
//!
//! `SWEEPGATE_ROOMS_PYTHON` when set (CI's venv, which installs numpy and scipy), else
//! `python3` when it imports both, else the venv under the target folder (`rooms-venv`),
//! made or completed with numpy and scipy from PyPI. When none works the test fails with a
//! message; it never skips.

// Each test file takes what it needs of this module.
#![allow(dead_code)]

use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::process::Command;

/// The target folder: `CARGO_TARGET_DIR`, else the workspace's `target/`.
fn target_dir() -> PathBuf {
    std::env::var_os("CARGO_TARGET_DIR")
        .map(PathBuf::from)
        .unwrap_or_else(|| Path::new(env!("CARGO_MANIFEST_DIR")).join("../target"))
}

fn imports_scipy(python: &Path) -> bool {
    Command::new(python)
        .args(["-c", "import numpy, scipy.special"])
        .output()
        .is_ok_and(|o| o.status.success())
}

/// A Python that imports numpy and scipy (see the module notes).
pub fn python() -> PathBuf {
    if let Some(p) = std::env::var_os("SWEEPGATE_ROOMS_PYTHON") {
        let p = PathBuf::from(p);
        assert!(
            imports_scipy(&p),
            "SWEEPGATE_ROOMS_PYTHON={} does not import numpy and scipy",
            p.display()
        );
        return p;
    }
    let system = PathBuf::from("python3");
    if imports_scipy(&system) {
        return system;
    }
    let venv = target_dir().join("rooms-venv");
    let python = venv.join("bin/python");
    if imports_scipy(&python) {
        return python;
    }
    let made = python.exists()
        || Command::new("python3")
            .args(["-m", "venv"])
            .arg(&venv)
            .status()
            .is_ok_and(|s| s.success());
    let pip = made
        && Command::new(venv.join("bin/pip"))
            .args(["install", "-q", "numpy", "scipy"])
            .status()
            .is_ok_and(|s| s.success());
    assert!(
        pip && imports_scipy(&python),
        "no Python with numpy and scipy: python3 does not import them and making {} (python3 -m venv, pip install numpy scipy) failed; set SWEEPGATE_ROOMS_PYTHON to a python that imports both",
        venv.display()
    );
    python
}

/// Runs `script` (under tests/rcs/) with `args`; its standard output, or a failure naming it.
pub fn run(script: &str, args: &[String]) -> String {
    let path = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/rcs")
        .join(script);
    let out = Command::new(python())
        .arg(&path)
        .args(args)
        .output()
        .unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    assert!(
        out.status.success(),
        "{} failed: {}",
        path.display(),
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout).expect("utf-8 output")
}

/// A CSV file with a header row, as rows of column name → text.
pub fn read_csv(path: &Path) -> Vec<HashMap<String, String>> {
    let text = std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let mut lines = text.lines();
    let header: Vec<String> = lines
        .next()
        .unwrap()
        .split(',')
        .map(str::to_string)
        .collect();
    lines
        .filter(|l| !l.is_empty())
        .map(|l| {
            header
                .iter()
                .cloned()
                .zip(l.split(',').map(str::to_string))
                .collect()
        })
        .collect()
}

/// A number from a CSV row.
pub fn num(row: &HashMap<String, String>, key: &str) -> f64 {
    row[key].parse().unwrap()
}
