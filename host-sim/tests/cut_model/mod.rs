//! The model of a scan of cuts the process tests share, written for the tests (not the
//! product's simulator): a polarised antenna under test whose co- and cross-polar patterns
//! are closed forms of (θ, φ), seen by a dual-polarised probe (port 2 co-polar, port 3
//! cross-polar) in a room whose floor and wall send echoes into both ports. Each path is an
//! impulse at its delay (Fourier shift theorem: e^(−j2πfτ)), so the free-space truth of each
//! trace is its direct path alone. Each test crate uses a part of it.
#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::Command;

use num_complex::Complex64;

pub const F0_HZ: f64 = 8e9;
pub const STEP_HZ: f64 = 20e6;
pub const POINTS: usize = 201;
pub const DIRECT_S: f64 = 10e-9;

/// Co-polar amplitude pattern: a raised-cosine beam, a little narrower in the φ = 90° cut.
pub fn co(theta_deg: f64, phi_deg: f64) -> f64 {
    let t = theta_deg.to_radians();
    let p = phi_deg.to_radians();
    (0.5 + 0.5 * t.cos()).powi(2) * (1.0 - 0.2 * p.sin().powi(2)) + 1e-3
}

/// Cross-polar amplitude pattern: a floor of 0.02 (−34 dB) on axis plus a lobe off axis
/// in the 45° cut.
pub fn cross(theta_deg: f64, phi_deg: f64) -> f64 {
    let t = theta_deg.to_radians();
    let p = phi_deg.to_radians();
    0.02 + 0.06 * ((2.0 * p).sin() * t.sin()).abs()
}

/// One path: amplitude `a` at delay `tau` at frequency `f`.
pub fn path(a: f64, tau: f64, f: f64) -> Complex64 {
    Complex64::from_polar(a, -2.0 * std::f64::consts::PI * f * tau)
}

/// S21 and S31 at point `n`: direct paths plus the room's two echoes, seen by both ports
/// at the same delays (one geometry) but with their own polarisation: a wall at 14.5 ns
/// (0.1 co-polar, 0.05 turned into the cross-polar port) and a floor bounce at 16 ns (0.3
/// co-polar, 0.04 cross-polar). The cross-polar echoes are above the cross-polar direct
/// path near boresight.
pub fn s21_s31(theta: f64, phi: f64, n: usize) -> (Complex64, Complex64) {
    let f = F0_HZ + n as f64 * STEP_HZ;
    let s21 = path(co(theta, phi), DIRECT_S, f) + path(0.1, 14.5e-9, f) + path(0.3, 16e-9, f);
    let s31 = path(cross(theta, phi), DIRECT_S, f) + path(0.05, 14.5e-9, f) + path(0.04, 16e-9, f);
    (s21, s31)
}

pub fn s3p(theta: f64, phi: f64) -> String {
    let mut t = String::from("! test model\n# Hz S RI R 50\n");
    for n in 0..POINTS {
        let (a, b) = s21_s31(theta, phi, n);
        let f = F0_HZ + n as f64 * STEP_HZ;
        t.push_str(&format!(
            "{f} 0 0 0 0 0 0\n {:.12e} {:.12e} 0 0 0 0\n {:.12e} {:.12e} 0 0 0 0\n",
            a.re, a.im, b.re, b.im
        ));
    }
    t
}

pub fn scratch(prefix: &str, tag: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("sweepgate-{prefix}-{tag}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// `sweepgate process --co S21 --cross S31`, to which a test adds its options.
pub fn process_cuts() -> Command {
    let mut c = Command::new(env!("CARGO_BIN_EXE_sweepgate"));
    c.args(["process", "--co", "S21", "--cross", "S31"]);
    c
}

/// Runs `cmd` (a `process` writing its report to `out`), which must succeed; returns the
/// report's summary.json and what the run printed on standard error.
pub fn summary_after(cmd: &mut Command, out: &Path) -> (serde_json::Value, String) {
    let st = cmd.output().unwrap();
    let err = String::from_utf8_lossy(&st.stderr).into_owned();
    assert!(st.status.success(), "{err}");
    let text = std::fs::read_to_string(out.join("summary.json")).unwrap();
    (serde_json::from_str(&text).unwrap(), err)
}
