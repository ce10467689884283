//! Gain by substitution in a simulated set-up: the reference antenna (known gain) and then
//! the AUT are measured on the same range with the room simulator, and the reference's gain
//! table turns the AUT's measured cut into absolute gain.

use std::f64::consts::PI;
use std::path::PathBuf;

use sweepgate::plan::SPEED_OF_LIGHT_M_S as C;
use sweepgate_host::formats::gain_table::{pattern_gain_dbi_from_s21, GainTable};
use sweepgate_host::model::room::Room;
use sweepgate_host::model::scenario::Scenario;

/// The same range and probe, with `aut` (a TOML `[aut]` body) on the turntable.
fn set_up(aut: &str) -> Room {
    let text = format!(
        r#"
name = "substitution range"
[sweep]
start_hz = 8e9
stop_hz = 12e9
points = 5
sweep_duration_s = 0.01
[range]
distance_m = 10.0
aut_height_m = 2.0
probe_height_m = 2.0
[aut]
{aut}
[probe]
kind = "aperture"
width_m = 0.08
height_m = 0.06
width_taper = "cosine"
[positioner]
mode = "continuous"
start_deg = -1.0
stop_deg = 1.0
speed_deg_s = 10.0
acceleration_deg_s2 = 100.0
counts_per_turn = 36000
sample_interval_s = 0.01
"#
    );
    Room::new(&Scenario::from_toml(&text).unwrap())
}

/// Directivity of the power pattern cos^n θ over the front half-space, nothing behind:
/// D₀ = 2(n + 1) (Balanis, Antenna Theory, directivity of cos^n intensity patterns).
fn cos_power_gain_dbi(n: f64) -> f64 {
    10.0 * (2.0 * (n + 1.0)).log10()
}

fn reference_table(tag: &str) -> GainTable {
    // The reference: a cos^10 horn, 13.42 dBi at every frequency; written and read back
    // as a CSV file, as a lab would keep it.
    let g = cos_power_gain_dbi(10.0);
    let csv = format!("frequency_hz,gain_dbi\n8e9,{g}\n10e9,{g}\n12e9,{g}\n");
    let path = std::env::temp_dir().join(format!(
        "sweepgate-ref-gain-{}-{tag}.csv",
        std::process::id()
    ));
    std::fs::write(&path, csv).unwrap();
    let table = GainTable::load(&PathBuf::from(&path)).unwrap();
    std::fs::remove_file(&path).unwrap();
    table
}

#[test]
fn cos_power_aut_gain_is_reproduced_over_a_cut() {
    let table = reference_table("cut");
    let reference = set_up("kind = \"cos_power\"\nn = 10.0");
    let aut = set_up("kind = \"cos_power\"\nn = 4.0");
    let angles: Vec<f64> = (-16..=16).map(|i| i as f64 * 5.0).collect();
    for f in [8e9, 9.5e9, 12e9] {
        let r = reference.response(f, 0.0);
        let cut: Vec<_> = angles.iter().map(|a| aut.response(f, *a)).collect();
        let g = pattern_gain_dbi_from_s21(&table, f, &cut, r).unwrap();
        for (a, got) in angles.iter().zip(&g) {
            // True gain of the cos^4 AUT in the horizontal cut: D₀·cos⁴φ (Balanis, as above).
            let want = cos_power_gain_dbi(4.0) + 10.0 * a.to_radians().cos().powi(4).log10();
            assert!(
                (got - want).abs() < 0.05,
                "{f} Hz, {a}°: {got:.4} dBi vs {want:.4} dBi"
            );
        }
    }
}

#[test]
fn half_wave_dipole_gain_is_reproduced() {
    let table = reference_table("dipole");
    let reference = set_up("kind = \"cos_power\"\nn = 10.0");
    // A dipole half a wavelength long at 10 GHz, horizontal wire, broadside to the probe.
    let f = 10e9;
    let dipole = set_up(&format!(
        "kind = \"dipole\"\nlength_m = {}\naxis = \"y\"",
        C / f / 2.0
    ));
    // The turntable turns about the vertical axis; at angle 0 the wire lies across the
    // range, so the probe is broadside to it.
    let g = pattern_gain_dbi_from_s21(
        &table,
        f,
        &[dipole.response(f, 0.0)],
        reference.response(f, 0.0),
    )
    .unwrap();
    // Half-wave dipole directivity 1.643, 2.15 dBi (Balanis, Antenna Theory, half-wave
    // dipole).
    let want = 10.0 * 1.643f64.log10();
    assert!((g[0] - want).abs() < 0.05, "{:.4} dBi vs {want:.4}", g[0]);
    // And the Friis check the substitution rests on: the reference alone gives
    // |S21| = G_ref·G_probe·λ/(4πR) in field terms (Friis; ITU-R P.525 free-space loss).
    let lambda = C / f;
    let g_ref = 10f64.powf(cos_power_gain_dbi(10.0) / 20.0);
    let g_probe = 10f64.powf(reference.probe().boresight_gain_dbi(f) / 20.0);
    let want_s21 = g_ref * g_probe * lambda / (4.0 * PI * 10.0);
    let got_s21 = reference.response(f, 0.0).norm();
    assert!((20.0 * (got_s21 / want_s21).log10()).abs() < 0.05);
}
