//! Pattern metrics and gain by substitution against textbook patterns generated here.

use sweepgate::metrics::{
    absolute_gain_dbi, gain_by_substitution_dbi, pattern_metrics, pattern_to_dbi, Coverage,
};

const FLOOR_DB: f64 = -300.0;

fn db20(field: f64) -> f64 {
    (20.0 * field.abs().log10()).max(FLOOR_DB)
}

/// Angles `start`, `start + step`, … for `count` samples.
fn angles(start_deg: f64, step_deg: f64, count: usize) -> Vec<f64> {
    (0..count)
        .map(|i| start_deg + step_deg * i as f64)
        .collect()
}

/// Broadside uniform line source of length L (in wavelengths), θ from broadside:
/// E = sin(u)/u, u = π·(L/λ)·sin θ (Balanis, Antenna Theory, line source).
fn line_source(l_wl: f64, theta_deg: f64) -> f64 {
    let u = std::f64::consts::PI * l_wl * theta_deg.to_radians().sin();
    if u.abs() < 1e-12 {
        1.0
    } else {
        u.sin() / u
    }
}

/// N-element uniform broadside array, spacing λ/2: AF = sin(Nψ/2)/(N·sin(ψ/2)), ψ = π·sin θ
/// (Balanis, Antenna Theory, uniform linear array).
fn uniform_array(n: usize, theta_deg: f64) -> f64 {
    let psi = std::f64::consts::PI * theta_deg.to_radians().sin();
    let den = n as f64 * (psi / 2.0).sin();
    if den.abs() < 1e-12 {
        1.0
    } else {
        (n as f64 * psi / 2.0).sin() / den
    }
}

#[test]
fn uniform_line_source_hpbw_and_first_sidelobe() {
    // Balanis, Antenna Theory (see shared REFERENCES): HPBW = 0.8859·λ/L rad = 50.76°·λ/L
    // (large-L form; computed), first sidelobe −13.26 dB. Sampled every 0.1° over ±90°.
    let a = angles(-90.0, 0.1, 1801);
    for l_wl in [3.0, 5.0, 10.0, 20.0] {
        let lv: Vec<f64> = a.iter().map(|&t| db20(line_source(l_wl, t))).collect();
        let m = pattern_metrics(&a, &lv, Coverage::Sector).unwrap();
        let hpbw = m.beam_3db.unwrap().width_deg();
        let want = 50.76 / l_wl;
        assert!(
            (hpbw - want).abs() < 0.01 * want,
            "L/λ {l_wl}: HPBW {hpbw} want {want}"
        );
        for side in [m.first_sidelobe_lower, m.first_sidelobe_upper] {
            let sl = side.unwrap().level_db;
            assert!((sl + 13.26).abs() < 0.1, "L/λ {l_wl}: sidelobe {sl}");
        }
        let hs = m.highest_sidelobe.unwrap().level_db;
        assert!((hs + 13.26).abs() < 0.1, "L/λ {l_wl}: highest {hs}");
        // First nulls at u = π: sin θ = λ/L (Balanis, line source nulls).
        let null = (1.0 / l_wl).asin().to_degrees();
        assert!((m.first_null_upper_deg.unwrap() - null).abs() <= 0.1);
        assert!((m.first_null_lower_deg.unwrap() + null).abs() <= 0.1);
        assert!(m.squint_deg.unwrap().abs() < 1e-6);
        println!("line source L/λ {l_wl}: HPBW {hpbw:.4}° (50.76·λ/L {want:.4}°), first sidelobe {:.3} dB", m.first_sidelobe_upper.unwrap().level_db);
    }
}

#[test]
fn uniform_array_first_sidelobes() {
    // Computed values in shared REFERENCES (uniform array factor, Balanis):
    // N = 4 −11.30 dB, 8 −12.80, 16 −13.15, 32 −13.23.
    let a = angles(-90.0, 0.1, 1801);
    for (n, want) in [(4, -11.30), (8, -12.80), (16, -13.15), (32, -13.23)] {
        let lv: Vec<f64> = a.iter().map(|&t| db20(uniform_array(n, t))).collect();
        let m = pattern_metrics(&a, &lv, Coverage::Sector).unwrap();
        for side in [m.first_sidelobe_lower, m.first_sidelobe_upper] {
            let sl = side.unwrap().level_db;
            assert!((sl - want).abs() < 0.05, "N {n}: sidelobe {sl} want {want}");
        }
        println!(
            "array N {n}: first sidelobe {:.3} dB (reference {want})",
            m.first_sidelobe_upper.unwrap().level_db
        );
    }
}

#[test]
fn half_wave_dipole_hpbw_full_circle() {
    // Balanis, Antenna Theory: half-wave dipole E = cos(π/2·cos θ)/sin θ, HPBW 78.08°.
    // Here φ = 90° − θ from broadside, so E = cos(π/2·sin φ)/cos φ; full circle, 0.1° steps.
    // Two equal main lobes (0° and 180°): the one at boresight is chosen.
    let a = angles(-180.0, 0.1, 3600);
    let lv: Vec<f64> = a
        .iter()
        .map(|&p| {
            let p = p.to_radians();
            let c = p.cos();
            if c.abs() < 1e-9 {
                FLOOR_DB
            } else {
                db20((std::f64::consts::FRAC_PI_2 * p.sin()).cos() / c)
            }
        })
        .collect();
    let m = pattern_metrics(&a, &lv, Coverage::FullCircle).unwrap();
    assert!(m.peak_angle_deg.abs() < 1e-6, "{}", m.peak_angle_deg);
    let hpbw = m.beam_3db.unwrap().width_deg();
    assert!((hpbw - 78.08).abs() < 0.05, "HPBW {hpbw}");
    // Nulls along the wire axis, ±90° from broadside (Balanis).
    assert!((m.first_null_upper_deg.unwrap() - 90.0).abs() < 0.11);
    assert!((m.first_null_lower_deg.unwrap() + 90.0).abs() < 0.11);
    // Front and back lobes equal: front-to-back 0 dB (symmetry of the dipole pattern).
    assert!(m.front_to_back_db.unwrap().abs() < 1e-6);
    println!("half-wave dipole: HPBW {hpbw:.4}° (reference 78.08°)");
}

#[test]
fn cos_n_hpbw() {
    // cos^n power pattern: HPBW = 2·acos(0.5^(1/n)); n = 2 → 90°, 4 → 65.53°, 10 → 42.17°
    // (computed, shared REFERENCES).
    let a = angles(-90.0, 0.1, 1801);
    for (n, table) in [(2.0f64, 90.0), (4.0, 65.53), (10.0, 42.17)] {
        let lv: Vec<f64> = a
            .iter()
            .map(|&t| (10.0 * t.to_radians().cos().max(0.0).powf(n).log10()).max(-100.0))
            .collect();
        let m = pattern_metrics(&a, &lv, Coverage::Sector).unwrap();
        let hpbw = m.beam_3db.unwrap().width_deg();
        let formula = 2.0 * 0.5f64.powf(1.0 / n).acos().to_degrees();
        assert!((formula - table).abs() < 0.005, "n {n}: formula {formula}");
        assert!(
            (hpbw - formula).abs() < 0.01 * formula,
            "n {n}: HPBW {hpbw}"
        );
        // −10 dB beam: cos^n θ = 0.1 → θ = acos(0.1^(1/n)) (same formula at −10 dB).
        let bw10 = 2.0 * 0.1f64.powf(1.0 / n).acos().to_degrees();
        assert!((m.beam_10db.unwrap().width_deg() - bw10).abs() < 0.01 * bw10);
        println!("cos^{n}: HPBW {hpbw:.4}° (formula {formula:.4}°)");
    }
}

#[test]
fn front_to_back_and_squint_of_a_designed_cardioid() {
    // Designed case (common practice, no source): E = (1 + a·cos(φ − 10°))/(1 + a), a = 0.5:
    // peak 0 dB at 10°, back (190°) level (1 − a)/(1 + a), so F/B = 20·log10(3) = 9.542 dB;
    // symmetric about 10°, so the −3 dB beam centre (squint) is 10°; the level never drops
    // 10 dB, so there is no −10 dB beam.
    let a_coef = 0.5;
    let a = angles(-180.0, 1.0, 360);
    let lv: Vec<f64> = a
        .iter()
        .map(|&p| db20((1.0 + a_coef * (p - 10.0).to_radians().cos()) / (1.0 + a_coef)))
        .collect();
    let m = pattern_metrics(&a, &lv, Coverage::FullCircle).unwrap();
    let want_fb = 20.0 * ((1.0 + a_coef) / (1.0 - a_coef)).log10();
    assert!((want_fb - 9.542).abs() < 0.001);
    assert!((m.front_to_back_db.unwrap() - want_fb).abs() < 1e-6);
    assert!((m.squint_deg.unwrap() - 10.0).abs() < 1e-6);
    assert!((m.peak_angle_deg - 10.0).abs() < 1e-6);
    assert!(m.peak_db.abs() < 1e-9);
    assert_eq!(m.beam_10db, None);
    // Same cut given as 0…359°: the same figures, squint still +10°.
    let a2 = angles(0.0, 1.0, 360);
    let lv2: Vec<f64> = a2
        .iter()
        .map(|&p| db20((1.0 + a_coef * (p - 10.0).to_radians().cos()) / (1.0 + a_coef)))
        .collect();
    let m2 = pattern_metrics(&a2, &lv2, Coverage::FullCircle).unwrap();
    assert!((m2.front_to_back_db.unwrap() - want_fb).abs() < 1e-6);
    assert!((m2.squint_deg.unwrap() - 10.0).abs() < 1e-6);
    println!(
        "cardioid: F/B {:.4} dB (designed {want_fb:.4})",
        m.front_to_back_db.unwrap()
    );
}

#[test]
fn front_to_back_with_interpolated_back() {
    // Designed case (common practice, no source): peak at 0.5°, 1° sampling from −179.5°,
    // so the back angle 180.5° falls midway between samples on a linear-in-dB slope: a
    // triangle lobe −φ/10 dB, back at −18 dB: F/B 18 dB.
    let a = angles(-179.5, 1.0, 360);
    let lv: Vec<f64> = a
        .iter()
        .map(|&p: &f64| -sweepgate::metrics::wrap_deg(p - 0.5).abs() / 10.0)
        .collect();
    let m = pattern_metrics(&a, &lv, Coverage::FullCircle).unwrap();
    assert!((m.peak_angle_deg - 0.5).abs() < 1e-9);
    assert!((m.front_to_back_db.unwrap() - 18.0).abs() < 1e-9);
}

/// Friis: Pr/Pt = Gt·Gr·(λ/4πR)² (Friis transmission formula, shared REFERENCES), in dB.
fn friis_received_dbm(pt_dbm: f64, gt_dbi: f64, gr_dbi: f64, f_hz: f64, r_m: f64) -> f64 {
    let lambda = 299_792_458.0 / f_hz;
    let lin = 10f64.powf(gt_dbi / 10.0)
        * 10f64.powf(gr_dbi / 10.0)
        * (lambda / (4.0 * std::f64::consts::PI * r_m)).powi(2);
    pt_dbm + 10.0 * lin.log10()
}

#[test]
fn friis_helper_matches_itu_free_space_loss() {
    // ITU-R P.525: 1 GHz over 1 km between isotropic antennas: 92.448 dB basic loss.
    let loss = -friis_received_dbm(0.0, 0.0, 0.0, 1e9, 1000.0);
    assert!((loss - 92.448).abs() < 0.001, "{loss}");
}

#[test]
fn gain_by_substitution_reproduces_known_gain() {
    // G_AUT = G_ref + P_AUT − P_ref (common practice, no source), checked in a range set-up
    // computed with Friis where the AUT's true gain is known. The reference horn's table is
    // linear in frequency, so interpolation is exact and the test isolates the transfer.
    let table_hz = [8e9, 9e9, 10e9, 11e9, 12e9];
    let table_dbi: Vec<f64> = table_hz
        .iter()
        .map(|f| 14.0 + 0.8 * (f - 8e9) / 1e9)
        .collect();
    let (r_m, probe_dbi, pt_dbm, system_db) = (5.0, 10.0, 0.0, -3.7);
    for (f_hz, aut_true_dbi) in [(9.7e9, 12.34), (10e9, 6.5), (11.25e9, 21.0)] {
        let g_ref_true = 14.0 + 0.8 * (f_hz - 8e9) / 1e9;
        let p_ref = friis_received_dbm(pt_dbm, probe_dbi, g_ref_true, f_hz, r_m) + system_db;
        let p_aut = friis_received_dbm(pt_dbm, probe_dbi, aut_true_dbi, f_hz, r_m) + system_db;
        let g = absolute_gain_dbi(&table_hz, &table_dbi, f_hz, p_aut, p_ref).unwrap();
        assert!(
            (g - aut_true_dbi).abs() < 0.05,
            "{f_hz}: {g} want {aut_true_dbi}"
        );
        assert!((gain_by_substitution_dbi(g_ref_true, p_aut, p_ref) - aut_true_dbi).abs() < 0.05);
        println!("substitution at {f_hz} Hz: {g:.6} dBi (true {aut_true_dbi})");
    }
}

#[test]
fn pattern_to_dbi_gives_absolute_peak_gain() {
    // A measured cut of an AUT with true peak gain 17.2 dBi and a cos^4 power pattern,
    // received through Friis (shared REFERENCES) at 10 GHz over 4 m; after substitution the
    // metrics' peak is the true gain (common practice, no source) within 0.05 dB.
    let (f_hz, r_m, probe_dbi, g_ref) = (10e9, 4.0, 8.0, 15.0);
    let p_ref = friis_received_dbm(0.0, probe_dbi, g_ref, f_hz, r_m);
    let a = angles(-90.0, 0.5, 361);
    let mut lv: Vec<f64> = a
        .iter()
        .map(|&t| {
            let shape_db = (40.0 * t.to_radians().cos().max(1e-6).log10()).max(-100.0);
            friis_received_dbm(0.0, probe_dbi, 17.2 + shape_db, f_hz, r_m)
        })
        .collect();
    pattern_to_dbi(&mut lv, g_ref, p_ref).unwrap();
    let m = pattern_metrics(&a, &lv, Coverage::Sector).unwrap();
    assert!((m.peak_db - 17.2).abs() < 0.05, "{}", m.peak_db);
}
