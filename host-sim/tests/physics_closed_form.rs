//! The room physics against closed forms: a single floor echo by the image method, and
//! the free-space loss of ITU-R P.525.

use std::f64::consts::PI;

use num_complex::Complex64;
use sweepgate::plan::SPEED_OF_LIGHT_M_S as C;
use sweepgate_host::model::geometry::PathKind;
use sweepgate_host::model::room::Room;
use sweepgate_host::model::scenario::Scenario;
use sweepgate_host::model::simulator::Simulator;

/// Isotropic antennas `r_m` apart at height `h_m`, optionally over a floor reflecting
/// `floor` (no noise).
fn range(
    r_m: f64,
    h_m: f64,
    floor: Option<f64>,
    start_hz: f64,
    stop_hz: f64,
    points: usize,
) -> Scenario {
    let planes = floor
        .map(|g| format!("[[planes]]\naxis = \"z\"\nposition_m = 0.0\nreflection = {g}\n"))
        .unwrap_or_default();
    let text = format!(
        r#"
name = "closed form"
[sweep]
start_hz = {start_hz}
stop_hz = {stop_hz}
points = {points}
sweep_duration_s = 0.01
[range]
distance_m = {r_m}
aut_height_m = {h_m}
probe_height_m = {h_m}
{planes}
[aut]
kind = "isotropic"
[positioner]
mode = "continuous"
start_deg = -1.0
stop_deg = 1.0
speed_deg_s = 10.0
acceleration_deg_s2 = 100.0
counts_per_turn = 3600
sample_interval_s = 0.01
"#
    );
    Scenario::from_toml(&text).unwrap()
}

#[test]
fn single_floor_echo_matches_the_image_method() {
    let (r, h, gamma) = (7.0, 1.6, -0.6);
    let s = range(r, h, Some(gamma), 8e9, 12e9, 401);
    let room = Room::new(&s);
    assert_eq!(room.paths().len(), 2);
    let direct = &room.paths()[0];
    let echo = &room.paths()[1];
    assert_eq!(echo.kind, PathKind::Bounce { plane: 0 });

    // Image method, equal heights h over range R: echo path √(R² + (2h)²), excess delay
    // (√(R² + (2h)²) − R)/c; with 1/r spreading and isotropic antennas the echo/direct
    // amplitude ratio is |Γ|·R/√(R² + (2h)²) (common practice, no source).
    let l_echo = (r * r + 4.0 * h * h).sqrt();
    let want_excess_s = (l_echo - r) / C;
    assert!((echo.delay_s() - direct.delay_s() - want_excess_s).abs() < 1e-15);
    let want_ratio = gamma.abs() * r / l_echo;
    for f in [8e9, 9.3e9, 12e9] {
        let ratio =
            room.path_response(echo, f, 0.0).norm() / room.path_response(direct, f, 0.0).norm();
        assert!(
            (ratio - want_ratio).abs() < 1e-12,
            "{ratio} vs {want_ratio}"
        );
        // The whole response is the two-ray sum (λ/4π)(e^(−jkR)/R + Γ·e^(−jkL)/L).
        let k = 2.0 * PI * f / C;
        let lambda = C / f;
        let want = lambda / (4.0 * PI)
            * (Complex64::from_polar(1.0 / r, -k * r)
                + Complex64::from_polar(gamma / l_echo, -k * l_echo));
        assert!((room.response(f, 0.0) - want).norm() < 1e-9 * want.norm());
    }

    // The excess delay measured from the simulated sweep itself: the phase slope of the
    // echo (sweep minus free space) minus that of the free-space part, τ = −dφ/dω.
    let mut sim = Simulator::new(&s, 1);
    let sweep = sim.sweep(0).unwrap();
    let grid = s.grid().unwrap();
    let (mut slope_echo, mut slope_direct) = (0.0, 0.0);
    for k in 0..grid.points() - 1 {
        let (f0, f1) = (grid.frequency_hz(k), grid.frequency_hz(k + 1));
        let v0 = Complex64::new(sweep.s21[k].re.into(), sweep.s21[k].im.into());
        let v1 = Complex64::new(sweep.s21[k + 1].re.into(), sweep.s21[k + 1].im.into());
        let (d0, d1) = (room.free_space(f0, 0.0), room.free_space(f1, 0.0));
        slope_echo += ((v1 - d1) / (v0 - d0)).arg();
        slope_direct += (d1 / d0).arg();
    }
    let n = (grid.points() - 1) as f64;
    let dw = 2.0 * PI * grid.step_hz();
    let excess_s = -(slope_echo - slope_direct) / n / dw;
    // f32 storage of the sweep limits this to a few femtoseconds.
    assert!(
        (excess_s - want_excess_s).abs() < 1e-13,
        "{excess_s} vs {want_excess_s}"
    );
}

#[test]
fn direct_path_matches_itu_r_p525() {
    // ITU-R P.525 free-space basic transmission loss between isotropic antennas:
    // L = 32.4478 + 20·log10 f(MHz) + 20·log10 d(km) dB; 1 GHz over 1 km → 92.448 dB.
    let s = range(1000.0, 10.0, None, 1e9, 1.1e9, 2);
    let room = Room::new(&s);
    let loss_db = -20.0 * room.response(1e9, 0.0).norm().log10();
    assert!((loss_db - 92.448).abs() < 1e-3, "{loss_db}");

    // The same formula at 10 GHz over 5 m (computed): 32.4478 + 80 + 20·log10(0.005).
    let s = range(5.0, 1.5, None, 9e9, 10e9, 11);
    let room = Room::new(&s);
    let want = 32.4478 + 20.0 * 10_000f64.log10() + 20.0 * 0.005f64.log10();
    let loss_db = -20.0 * room.response(10e9, 0.0).norm().log10();
    assert!((loss_db - want).abs() < 1e-3, "{loss_db} vs {want}");
}

#[test]
fn the_truth_is_the_direct_path_of_the_turning_aut() {
    let mut s = Scenario::from_toml(include_str!("../scenarios/demo-lab.toml")).unwrap();
    s.positioner.start_deg = -20.0;
    s.positioner.stop_deg = 20.0;
    s.validate().unwrap();
    let room = Room::new(&s);
    let t = sweepgate_host::model::room::truth(&s, &[10e9], &[0.0, 10.0, -10.0]);
    // A horn at boresight with a probe facing it: the strongest of the three, and the
    // pattern is left-right symmetric.
    assert!(t[0][0].norm() > t[1][0].norm());
    assert!((t[1][0].norm() - t[2][0].norm()).abs() < 1e-12 * t[0][0].norm());
    assert_eq!(t[0][0], room.free_space(10e9, 0.0));
}

#[test]
fn the_shipped_rooms_are_genuinely_reflective() {
    // Normalized to its peak at a pattern frequency, the echo-laden pattern (AUT held at
    // each angle, no noise) differs from the free-space truth by more than 3 dB somewhere
    // the truth is at least −25 dB: the rooms need gating.
    for text in [
        include_str!("../scenarios/demo-lab.toml"),
        include_str!("../scenarios/outdoor-ground.toml"),
        include_str!("../scenarios/workshop-bay.toml"),
    ] {
        let s = Scenario::from_toml(text).unwrap();
        let room = Room::new(&s);
        let f = s.pattern_frequencies_hz()[1];
        let angles: Vec<f64> = (-180..180).map(f64::from).collect();
        let db = |v: Complex64| 20.0 * v.norm().log10();
        let truth: Vec<f64> = angles.iter().map(|a| db(room.free_space(f, *a))).collect();
        let raw: Vec<f64> = angles.iter().map(|a| db(room.response(f, *a))).collect();
        let tp = truth.iter().copied().fold(f64::MIN, f64::max);
        let rp = raw.iter().copied().fold(f64::MIN, f64::max);
        let worst = truth
            .iter()
            .zip(&raw)
            .filter(|(t, _)| **t - tp >= -25.0)
            .map(|(t, r)| ((r - rp) - (t - tp)).abs())
            .fold(0.0, f64::max);
        assert!(worst > 3.0, "{}: worst raw error {worst:.2} dB", s.name);
    }
}
