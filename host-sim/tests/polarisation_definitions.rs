//! Ludwig's definitions of co- and cross-polarisation against Ludwig (1973), the fields
//! built here from the dipole moments (vector formulas, no code of the product's antenna
//! models): A. C. Ludwig, "The definition of cross polarization", IEEE Trans. Antennas
//! Propag. AP-21, 1973.

use num_complex::Complex64;
use sweepgate_host::model::coords::{co_cross, unit_vectors, Definition, Reference};

type V = [f64; 3];

fn dot(a: V, b: V) -> f64 {
    a[0] * b[0] + a[1] * b[1] + a[2] * b[2]
}

fn cross(a: V, b: V) -> V {
    [
        a[1] * b[2] - a[2] * b[1],
        a[2] * b[0] - a[0] * b[2],
        a[0] * b[1] - a[1] * b[0],
    ]
}

/// Far field (E_θ, E_φ) of a short electric dipole of moment `p` (common factors dropped):
/// E ∝ −r̂ × (r̂ × p) = p − (p·r̂) r̂, the part of p across the direction.
fn electric_dipole(p: V, theta_deg: f64, phi_deg: f64) -> (f64, f64) {
    let (_, t, f) = unit_vectors(theta_deg, phi_deg);
    (dot(p, t), dot(p, f))
}

/// Far field of a short magnetic dipole of moment `m` in the same units (free-space
/// impedance folded in): E ∝ −r̂ × m.
fn magnetic_dipole(m: V, theta_deg: f64, phi_deg: f64) -> (f64, f64) {
    let (r, t, f) = unit_vectors(theta_deg, phi_deg);
    let e = cross(m, r);
    (dot(e, t), dot(e, f))
}

fn c(x: f64) -> Complex64 {
    Complex64::new(x, 0.0)
}

#[test]
fn a_huygens_source_has_no_ludwig_3_cross_polar_component() {
    // Ludwig (1973): crossed electric (x) and magnetic (y) dipoles of equal strength
    // radiate E = (1 + cos θ)(cos φ θ̂ − sin φ φ̂), which is exactly the third
    // definition's reference vector: no cross-polar component in any direction.
    let mut checked = 0;
    let mut first_max = 0.0f64;
    for ti in 0..=36 {
        let t = ti as f64 * 5.0;
        for pi in 0..72 {
            let p = pi as f64 * 5.0;
            let (et1, ep1) = electric_dipole([1.0, 0.0, 0.0], t, p);
            let (et2, ep2) = magnetic_dipole([0.0, 1.0, 0.0], t, p);
            let (et, ep) = (c(et1 + et2), c(ep1 + ep2));
            let (co, x) = co_cross(Definition::Third, Reference::X, t, p, et, ep);
            assert!(x.norm() < 1e-12, "cross {x} at θ={t} φ={p}");
            // The co-polar part is the whole field, (1 + cos θ) in magnitude.
            let want = 1.0 + t.to_radians().cos();
            assert!((co.norm() - want).abs() < 1e-12, "co {co} at θ={t} φ={p}");
            // Under the first definition the same source shows cross-polarisation off the
            // principal planes (Ludwig's point).
            let (_, x1) = co_cross(Definition::First, Reference::X, t, p, et, ep);
            first_max = first_max.max(x1.norm());
            checked += 1;
        }
    }
    assert_eq!(checked, 37 * 72);
    assert!(first_max > 0.1, "first definition cross peak {first_max}");
}

#[test]
fn a_short_dipole_splits_in_the_45_degree_cut_as_the_closed_form() {
    // Derivation (from the definitions, written here): a short electric dipole along x
    // radiates E = cos θ cos φ θ̂ − sin φ φ̂. Ludwig 3 for an x reference takes
    //   co    = cos φ E_θ − sin φ E_φ = cos θ cos² φ + sin² φ
    //   cross = sin φ E_θ + cos φ E_φ = −sin φ cos φ (1 − cos θ)
    // so in the φ = 45° cut co = (1 + cos θ)/2, cross = −(1 − cos θ)/2, and the
    // cross-to-co ratio is −tan²(θ/2) (derived here from Ludwig's definition 3).
    for ti in 0..=180 {
        let t = ti as f64;
        let (et, ep) = electric_dipole([1.0, 0.0, 0.0], t, 45.0);
        let (co, x) = co_cross(Definition::Third, Reference::X, t, 45.0, c(et), c(ep));
        let ct = t.to_radians().cos();
        assert!(
            (co.re - (1.0 + ct) / 2.0).abs() < 1e-12,
            "co at θ={t}: {co}"
        );
        assert!(
            (x.re - (-(1.0 - ct) / 2.0)).abs() < 1e-12,
            "cross at θ={t}: {x}"
        );
        assert!(co.im.abs() < 1e-15 && x.im.abs() < 1e-15);
        if t < 179.0 {
            let ratio = x.re / co.re;
            let want = -(t.to_radians() / 2.0).tan().powi(2);
            assert!((ratio - want).abs() < 1e-9 * (1.0 + want.abs()), "θ={t}");
        }
        // The other cut through the same plane, φ = 225°, gives the same split.
        let (et, ep) = electric_dipole([1.0, 0.0, 0.0], t, 225.0);
        let (co2, x2) = co_cross(Definition::Third, Reference::X, t, 225.0, c(et), c(ep));
        assert!((co2 - co).norm() < 1e-12 && (x2 - x).norm() < 1e-12);
    }
}

#[test]
fn the_second_definition_on_elevation_over_azimuth_is_the_dipole_frame() {
    // Ludwig (1973), definition 2: the reference field is that of an electric dipole along
    // the reference direction, so an x dipole is all co-polar on an elevation-over-azimuth
    // positioner, while the third definition sees cross-polarisation off the principal
    // planes (previous test).
    for &(t, p) in &[(30.0, 45.0), (60.0, 120.0), (80.0, 200.0), (45.0, 315.0)] {
        let (et, ep) = electric_dipole([1.0, 0.0, 0.0], t, p);
        let (co, x) = co_cross(
            Definition::SecondElevationOverAzimuth,
            Reference::X,
            t,
            p,
            c(et),
            c(ep),
        );
        assert!(x.norm() < 1e-12, "cross {x} at ({t}, {p})");
        assert!((co.norm() - et.hypot(ep)).abs() < 1e-12);
        let (_, x3) = co_cross(Definition::Third, Reference::X, t, p, c(et), c(ep));
        assert!(x3.norm() > 1e-3);
    }
}
