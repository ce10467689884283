//! The simulator's room with polarisation: a floor given by its material reflects the two
//! polarisations with the Fresnel coefficients of the ray's incidence angle; scenarios
//! without a material or a polarisation keep the constant reflection.

use std::f64::consts::PI;

use sweepgate::plan::SPEED_OF_LIGHT_M_S;
use sweepgate_host::model::geometry::PathKind;
use sweepgate_host::model::room::Room;
use sweepgate_host::model::scenario::{Material, Scenario};

/// Isotropic antennas 4 m apart, both 1 m above a floor of ε' = 4: the floor bounce meets
/// it at atan(4 / 2) = 63.43°, the Brewster angle atan(√4) (Hecht, Optics, 4th ed.,
/// §4.6.2): a vertically polarised floor echo vanishes; a horizontal one reflects with
/// Γ_TE = (1 − ε)/(1 + ε) = −0.6 there (at θ_B, cos θ = 1/√(1+ε), √(ε − sin²θ) =
/// ε/√(1+ε), so (c − w)/(c + w) = (1 − ε)/(1 + ε); derived here).
fn brewster_room(probe_deg: f64, material: bool) -> Scenario {
    let mut s = Scenario::from_toml(include_str!("../scenarios/demo-lab.toml")).unwrap();
    s.aut = Default::default();
    s.probe = Default::default();
    s.range.aut_height_m = 1.0;
    s.range.probe_height_m = 1.0;
    s.planes.truncate(1);
    s.planes[0].reflection = -0.3;
    s.planes[0].material = material.then_some(Material {
        relative_permittivity: 4.0,
        conductivity_s_m: 0.0,
    });
    s.scatterers.clear();
    s.simulation.second_order = false;
    s.simulation.aut_polarisation_deg = Some(probe_deg);
    s.simulation.probe_polarisation_deg = Some(probe_deg);
    s.validate().unwrap();
    s
}

/// The floor bounce relative to the direct path, with the spreading (R / L) removed.
fn floor_over_direct(s: &Scenario) -> num_complex::Complex64 {
    let room = Room::new(s);
    let f = 10e9;
    let paths = room.paths();
    let floor = paths
        .iter()
        .find(|p| p.kind == PathKind::Bounce { plane: 0 })
        .unwrap();
    let ratio = room.path_response(floor, f, 0.0) / room.path_response(&paths[0], f, 0.0);
    let (r, l) = (paths[0].length_m, floor.length_m);
    let delay = 2.0 * PI * f * (l - r) / SPEED_OF_LIGHT_M_S;
    ratio * (l / r) * num_complex::Complex64::from_polar(1.0, delay)
}

#[test]
fn a_dielectric_floor_at_brewster_incidence_hides_the_vertical_echo() {
    let h = floor_over_direct(&brewster_room(0.0, true));
    let v = floor_over_direct(&brewster_room(90.0, true));
    assert!(
        (h.re + 0.6).abs() < 1e-9 && h.im.abs() < 1e-9,
        "horizontal {h}"
    );
    assert!(v.norm() < 1e-9, "vertical {v}");
    // A floor given by its constant keeps that constant for both polarisations (Γ_TE = Γ,
    // Γ_TM = −Γ: the same physical reflection, up to the TM reference's sign).
    let h = floor_over_direct(&brewster_room(0.0, false));
    let v = floor_over_direct(&brewster_room(90.0, false));
    assert!((h.re + 0.3).abs() < 1e-9, "{h}");
    assert!((v.norm() - 0.3).abs() < 1e-9, "{v}");
}

#[test]
fn a_scenario_without_polarisation_is_unchanged_and_cross_polar_probe_sees_nothing_direct() {
    let mut s = brewster_room(0.0, false);
    s.simulation.aut_polarisation_deg = None;
    s.simulation.probe_polarisation_deg = None;
    let plain = Room::new(&s);
    assert!(!plain.is_polarised());
    let f = 9e9;
    // Unpolarised: the floor path carries the constant Γ = −0.3.
    let paths = plain.paths();
    let ratio = plain.path_response(&paths[1], f, 0.0) / plain.path_response(&paths[0], f, 0.0);
    assert!((ratio.norm() * paths[1].length_m / paths[0].length_m - 0.3).abs() < 1e-12);
    // Co-polar probe on boresight: coupling 1, so the direct path is today's value.
    let co = Room::new(&s).with_probe_polarisation_deg(&s, 0.0);
    let d0 = plain.path_response(&paths[0], f, 0.0);
    assert!((co.path_response(&co.paths()[0], f, 0.0) - d0).norm() < 1e-15);
    // Cross-polar probe: the direct path of a horizontally polarised AUT is zero, and at
    // 30° of turntable the horizontal AUT vector still lies across the vertical probe.
    let cross = Room::new(&s).with_probe_polarisation_deg(&s, 90.0);
    assert!(cross.path_response(&cross.paths()[0], f, 0.0).norm() < 1e-15);
    assert!(cross.path_response(&cross.paths()[0], f, 30.0).norm() < 1e-15);
    // A probe at 45° sees the horizontal AUT at cos 45°.
    let tilted = Room::new(&s).with_probe_polarisation_deg(&s, 45.0);
    let t = tilted.path_response(&tilted.paths()[0], f, 0.0);
    assert!((t.norm() / d0.norm() - 0.5f64.sqrt()).abs() < 1e-12);
}
