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

/// Worst |raw − truth| and |gated − truth| (dB, each cut normalized to its peak) where the
/// truth is within 25 dB of its peak, at the pattern frequencies in the central 80 %.
fn simulate_and_gate(s: &Scenario) -> (f64, f64) {
    use std::sync::atomic::AtomicBool;
    use sweepgate_host::formats::recording::recover_file;
    use sweepgate_host::pipeline::replay::{replay_records, Options};
    use sweepgate_host::pipeline::simulate::simulate_to_file;
    use sweepgate_host::units::db;

    let dir = tempfile::tempdir().unwrap();
    let rec = dir.path().join("scan.rec");
    simulate_to_file(s, None, s.simulation.seed, &rec, false).unwrap();
    let recovered = recover_file(&rec).unwrap();
    let stop = AtomicBool::new(false);
    let o = replay_records(
        &recovered,
        &Options::fast(&rec),
        &mut Vec::new(),
        None,
        &stop,
    )
    .unwrap();
    let r = &o.report;
    let span = s.sweep.stop_hz - s.sweep.start_hz;
    let (mut raw_worst, mut gated_worst) = (0.0f64, 0.0f64);
    for (fi, &f) in r.frequencies_hz.iter().enumerate() {
        if f < s.sweep.start_hz + 0.1 * span || f > s.sweep.stop_hz - 0.1 * span {
            continue;
        }
        let level = |pick: &dyn Fn(usize) -> f64| -> Vec<f64> {
            let v: Vec<f64> = (0..r.bins.len()).map(pick).collect();
            let peak = v.iter().copied().fold(f64::MIN, f64::max);
            v.iter().map(|x| x - peak).collect()
        };
        let truth = level(&|i| db(r.bins[i].values[fi].truth.unwrap()));
        let gated = level(&|i| db(r.bins[i].values[fi].gated));
        let raw = level(&|i| db(r.bins[i].values[fi].raw));
        for i in 0..truth.len() {
            if truth[i] >= -25.0 {
                raw_worst = raw_worst.max((raw[i] - truth[i]).abs());
                gated_worst = gated_worst.max((gated[i] - truth[i]).abs());
            }
        }
    }
    (raw_worst, gated_worst)
}

#[test]
fn a_ground_of_asphalt_echoes_horizontal_polarisation_more_and_gating_removes_both() {
    // The shipped outdoor range (12 m between 4 m towers) with its ground given as a
    // material (ε' = 5, σ = 0.005 S/m, an asphalt-like value; common practice, no source):
    // the ground bounce meets it atan(12/8) = 56.3° from the normal, below the Brewster
    // angle atan √5 = 65.9°, where |Γ_TM| is small (0.14) and |Γ_TE| is not (0.58), so the
    // horizontal scan's raw pattern is spoiled more than the vertical one; the gate removes
    // both.
    let base = Scenario::from_toml(include_str!("../scenarios/outdoor-ground.toml")).unwrap();
    let mut figures = Vec::new();
    for deg in [0.0, 90.0] {
        let mut s = base.clone();
        s.planes[0].material = Some(Material {
            relative_permittivity: 5.0,
            conductivity_s_m: 0.005,
        });
        s.simulation.aut_polarisation_deg = Some(deg);
        s.simulation.probe_polarisation_deg = Some(deg);
        s.validate().unwrap();
        let (raw, gated) = simulate_and_gate(&s);
        eprintln!("polarisation {deg}°: raw worst {raw:.3} dB, gated worst {gated:.3} dB (truth ≥ −25 dB)");
        assert!(gated < 1.0, "{deg}°: gated worst {gated} dB");
        figures.push(raw);
    }
    assert!(figures[0] > 3.0, "horizontal raw worst {} dB", figures[0]);
    assert!(
        figures[0] > 2.0 * figures[1],
        "raw worst H {} dB, V {} dB",
        figures[0],
        figures[1]
    );
}
