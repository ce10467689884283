//! Fresnel TE/TM reflection coefficients (model::fresnel) against textbook values and
//! closed forms, each source named beside its check.

use num_complex::Complex64;
use sweepgate_host::model::fresnel::{brewster_deg, coefficients, Medium};

fn glass() -> Medium {
    Medium {
        relative_permittivity: 2.25,
        conductivity_s_m: 0.0,
    }
}

#[test]
fn air_to_glass_matches_hecht() {
    // Hecht, Optics, 4th ed., §4.6.2: air to glass (n_t = 1.5), normal incidence
    // r = (n_i − n_t)/(n_i + n_t) = −0.2, a reflectance of 4 %; Brewster's angle
    // θ_p = tan⁻¹(n_t/n_i) = 56.3°, where r_∥ vanishes.
    let (te, tm) = glass().reflection(3e9, 0.0);
    assert!((te - Complex64::new(-0.2, 0.0)).norm() < 1e-12);
    assert!((te.norm_sqr() - 0.04).abs() < 1e-12);
    assert!((tm.norm() - 0.2).abs() < 1e-12);
    let b = brewster_deg(2.25);
    assert!((b - 56.31).abs() < 0.01, "{b}");
    let (te_b, tm_b) = glass().reflection(3e9, b);
    assert!(tm_b.norm() < 1e-12, "{tm_b}");
    assert!(te_b.norm() > 0.3);
    // Normal incidence in general: (1 − √ε)/(1 + √ε) (Balanis, Advanced Engineering
    // Electromagnetics, 2nd ed., ch. 5, normal incidence on a lossless dielectric).
    for eps in [1.5, 4.0, 9.0, 81.0] {
        let (te, _) = coefficients(Complex64::new(eps, 0.0), 0.0);
        let want = (1.0 - f64::sqrt(eps)) / (1.0 + f64::sqrt(eps));
        assert!((te.re - want).abs() < 1e-12 && te.im.abs() < 1e-12);
    }
}

#[test]
fn oblique_incidence_matches_the_impedance_form_with_snells_law() {
    // Balanis, Advanced Engineering Electromagnetics, 2nd ed., ch. 5: with the
    // transmission angle from Snell's law (√ε·sin θ_t = sin θ_i) and η = η₀/√ε,
    //   Γ_⊥ = (η₂ cos θ_i − η₁ cos θ_t)/(η₂ cos θ_i + η₁ cos θ_t)
    //   Γ_∥ = (η₂ cos θ_t − η₁ cos θ_i)/(η₂ cos θ_t + η₁ cos θ_i)
    // Balanis's Γ_∥ refers the reflected parallel field to the opposite reference
    // direction from ours (k̂ × ŝ on both rays), so Γ_TM = −Γ_∥.
    for eps in [2.25f64, 4.0, 10.0] {
        for inc in [10.0f64, 30.0, 45.0, 70.0, 89.0] {
            let ti = inc.to_radians();
            let tt = (ti.sin() / eps.sqrt()).asin();
            let (n1, n2) = (1.0, 1.0 / eps.sqrt());
            let perp = (n2 * ti.cos() - n1 * tt.cos()) / (n2 * ti.cos() + n1 * tt.cos());
            let par = (n2 * tt.cos() - n1 * ti.cos()) / (n2 * tt.cos() + n1 * ti.cos());
            let (te, tm) = coefficients(Complex64::new(eps, 0.0), inc);
            assert!((te.re - perp).abs() < 1e-12, "ε {eps} θ {inc}");
            assert!((tm.re + par).abs() < 1e-12, "ε {eps} θ {inc}");
            // Lossless: the transmitted power makes up the rest (Hecht §4.6.3,
            // R + T = 1 with T = (n_t cos θ_t / n_i cos θ_i)·|t|², t_⊥ = 1 + r_⊥).
            let t_perp = 1.0 + te.re;
            let t_ratio = eps.sqrt() * tt.cos() / ti.cos();
            assert!((te.norm_sqr() + t_ratio * t_perp * t_perp - 1.0).abs() < 1e-12);
        }
    }
}

#[test]
fn glass_to_air_reflects_totally_beyond_the_critical_angle() {
    // Hecht, Optics, 4th ed., §4.7: glass (n = 1.5) to air, critical angle
    // sin⁻¹(1/1.5) = 41.8°; beyond it |r_⊥| = |r_∥| = 1.
    let eps = Complex64::new(1.0 / 2.25, 0.0);
    for inc in [42.0, 50.0, 70.0, 89.0] {
        let (te, tm) = coefficients(eps, inc);
        assert!((te.norm() - 1.0).abs() < 1e-12 && (tm.norm() - 1.0).abs() < 1e-12);
    }
    let (te, _) = coefficients(eps, 41.0);
    assert!(te.norm() < 1.0);
}

#[test]
fn a_lossy_ground_reflects_the_two_polarisations_differently() {
    // Complex permittivity ε' − jσ/(ωε₀) (Balanis, Advanced Engineering
    // Electromagnetics, 2nd ed., ch. 2): concrete-like ε' = 5, σ = 0.1 S/m at 1 GHz gives
    // an imaginary part −0.1/(2π·1e9·8.854e-12) = −1.797.
    let ground = Medium {
        relative_permittivity: 5.0,
        conductivity_s_m: 0.1,
    };
    let eps = ground.complex_permittivity(1e9);
    assert!((eps.im + 1.7975).abs() < 1e-3, "{eps}");
    // Grazing: both tend to the same −1 physical reflection; near the pseudo-Brewster
    // angle TM dips while TE stays large.
    let (te, tm) = ground.reflection(1e9, 89.9);
    assert!(
        (te + 1.0).norm() < 0.02 && (tm + 1.0).norm() < 0.02,
        "{te} {tm}"
    );
    let dip = (0..90)
        .map(|d| ground.reflection(1e9, d as f64).1.norm())
        .fold(f64::INFINITY, f64::min);
    let (te60, _) = ground.reflection(1e9, 66.0);
    assert!(
        dip < 0.2 && te60.norm() > 0.6,
        "TM dip {dip}, TE {}",
        te60.norm()
    );
}
