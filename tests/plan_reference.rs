//! The planner against hand computations.

use sweepgate::grid::Grid;
use sweepgate::plan::{
    plan, Axis, Finding, PathSource, PlanInput, Plane, Point, Scatterer, RING_DOWN_FACTOR,
    SPEED_OF_LIGHT_M_S,
};
use sweepgate::window::WindowKind;

const C: f64 = SPEED_OF_LIGHT_M_S;

fn plane(axis: Axis, position_m: f64) -> Plane {
    Plane {
        axis,
        position_m,
        reflection: -0.5,
    }
}

/// AUT at (0, 0, h), probe at (r, 0, h), Kaiser β = 6 band window, 1° bins, 50 ms sweeps.
fn input<'a>(grid: Grid, r: f64, h: f64, planes: &'a [Plane]) -> PlanInput<'a> {
    PlanInput {
        grid,
        aut_size_m: 0.1,
        aut: Point::new(0.0, 0.0, h),
        probe: Point::new(r, 0.0, h),
        planes,
        scatterers: &[],
        band_window: WindowKind::Kaiser { beta: 6.0 },
        bin_step_deg: 1.0,
        sweep_duration_s: 0.05,
        cable_delay_s: 0.0,
        aut_fractional_bandwidth: None,
        longest_path_m: None,
        rotation_deg_s: None,
    }
}

fn wide_band() -> Grid {
    Grid::from_start_stop(2e9, 18e9, 801).unwrap()
}

#[test]
fn far_field_distance_examples() {
    // Federal Standard 1037C / IEEE Std 149: far field beyond 2D²/λ. Computed (shared
    // REFERENCES): D = 0.3 m at 10 GHz → 6.004 m; D = 1 m at 10 GHz → 66.71 m.
    let grid = Grid::from_start_stop(8e9, 10e9, 201).unwrap();
    let mut inp = input(grid, 5.0, 1.5, &[]);
    for (d, want) in [(0.3, 6.004), (1.0, 66.71)] {
        inp.aut_size_m = d;
        let p = plan(&inp).unwrap();
        assert!(
            (p.far_field_m - want).abs() < 0.005,
            "D {d}: {}",
            p.far_field_m
        );
        assert!(!p.meets_far_field);
        assert!(p.findings.iter().any(|f| matches!(
            f,
            Finding::BelowFarField { range_m, far_field_m }
                if (*range_m - 5.0).abs() < 1e-12 && (*far_field_m - want).abs() < 0.005
        )));
    }
    inp.aut_size_m = 0.2; // 2·0.04/0.02998 = 2.67 m < 5 m
    let p = plan(&inp).unwrap();
    assert!(p.meets_far_field);
    assert!(!p
        .findings
        .iter()
        .any(|f| matches!(f, Finding::BelowFarField { .. })));
}

#[test]
fn far_field_checks_every_condition_at_both_band_edges() {
    // Balanis, Antenna Theory, 4th ed., §2.2.4: R ≥ 2D²/λ, R ≫ D, R ≫ λ; "≫" read as a
    // factor 10 (common practice, no source). D = 0.1 m at R = 1 m, 300…400 MHz:
    // 2D²/λ = 0.02…0.027 m and 10·D = 1 m are met, but λ = 0.999 m at 300 MHz needs
    // 10·λ = 9.99 m: not far field, although 2D²/λ alone says it is.
    let grid = Grid::from_start_stop(300e6, 400e6, 101).unwrap();
    let inp = input(grid, 1.0, 1.5, &[]);
    let p = plan(&inp).unwrap();
    let lam_lo = C / 300e6;
    assert!((p.far_field_low.wavelength_m - lam_lo).abs() < 1e-12);
    assert!((p.far_field_low.wavelengths_m - 10.0 * lam_lo).abs() < 1e-9);
    assert!((p.far_field_high.rayleigh_m - 2.0 * 0.01 / (C / 400e6)).abs() < 1e-12);
    assert!((p.far_field_high.size_m - 1.0).abs() < 1e-12);
    assert!(p.range_m >= p.far_field_m, "2D²/λ alone is met");
    assert!(!p.far_field_low.met && !p.far_field_high.met);
    assert!(!p.meets_far_field);
    assert!(p.findings.iter().any(|f| matches!(
        f,
        Finding::TooFewWavelengths { needed_m, frequency_hz, .. }
            if (*needed_m - 10.0 * lam_lo).abs() < 1e-9 && *frequency_hz == 300e6
    )));
    assert!(!p.findings.iter().any(|f| matches!(
        f,
        Finding::BelowFarField { .. } | Finding::NotFarFromAntenna { .. }
    )));

    // R ≫ D missed: D = 0.5 m, R = 4 m, 100…101 MHz (λ ≈ 2.97 m): 2D²/λ ≈ 0.17 m met,
    // 10·D = 5 m missed (10·λ = 29.98 m is missed too).
    let grid = Grid::from_start_stop(100e6, 101e6, 11).unwrap();
    let mut inp = input(grid, 4.0, 1.5, &[]);
    inp.aut_size_m = 0.5;
    let p = plan(&inp).unwrap();
    assert!(p.findings.iter().any(|f| matches!(
        f,
        Finding::NotFarFromAntenna { needed_m, .. } if (*needed_m - 5.0).abs() < 1e-12
    )));

    // Met at 8…10 GHz, D = 0.2 m, R = 5 m: 2.67 m, 2 m, 0.37 m all below 5 m.
    let grid = Grid::from_start_stop(8e9, 10e9, 201).unwrap();
    let mut inp = input(grid, 5.0, 1.5, &[]);
    inp.aut_size_m = 0.2;
    let p = plan(&inp).unwrap();
    assert!(p.far_field_low.met && p.far_field_high.met && p.meets_far_field);
    assert!((p.far_field_high.needed_m() - 2.0 * 0.04 / (C / 10e9)).abs() < 1e-12);
}

#[test]
fn echo_delays_match_image_method_closed_forms() {
    // Image method, AUT and probe at equal height h, range R (common practice, no source):
    // floor z = 0: (√(R² + (2h)²) − R)/c; side wall at y = w: (√(R² + (2w)²) − R)/c;
    // ceiling at z = H: (√(R² + (2(H − h))²) − R)/c; back wall at x = −b behind the AUT:
    // 2b/c; point scatterer S: (|AUT − S| + |S − probe| − R)/c.
    let (r, h, w, ceil, b, cable) = (7.0, 1.6, 2.5, 4.0, 1.2, 3e-9);
    let planes = [
        plane(Axis::Z, 0.0),
        plane(Axis::Y, w),
        plane(Axis::Z, ceil),
        plane(Axis::X, -b),
    ];
    let scat = [Scatterer {
        position: Point::new(3.5, -2.0, 1.6),
        reflection: 0.2,
    }];
    let mut inp = input(wide_band(), r, h, &planes);
    inp.scatterers = &scat;
    inp.cable_delay_s = cable;
    let p = plan(&inp).unwrap();
    let want = [
        ((r * r + 4.0 * h * h).sqrt() - r) / C,
        ((r * r + 4.0 * w * w).sqrt() - r) / C,
        ((r * r + 4.0 * (ceil - h) * (ceil - h)).sqrt() - r) / C,
        2.0 * b / C,
        (2.0 * (3.5f64 * 3.5 + 4.0).sqrt() - r) / C,
    ];
    assert_eq!(p.echoes.len(), want.len());
    for (e, want) in p.echoes.iter().zip(want) {
        assert!(
            (e.excess_delay_s - want).abs() < 1e-15,
            "{:?}: {} want {want}",
            e.source,
            e.excess_delay_s
        );
        // Delay from the VNA's time zero includes the cable offset.
        assert!((e.delay_s - (cable + r / C + want)).abs() < 1e-15);
    }
    assert!((p.direct_delay_s - (cable + r / C)).abs() < 1e-15);
    // Floor bounce point midway (equal heights).
    let fp = p.echoes[0].bounce_point.unwrap();
    assert!((fp.x_m - r / 2.0).abs() < 1e-12 && fp.z_m.abs() < 1e-12);
    // The earliest echo is the one with the smallest excess delay.
    let first = p.first_echo.unwrap();
    let min = want.iter().cloned().fold(f64::INFINITY, f64::min);
    assert!((p.echoes[first].excess_delay_s - min).abs() < 1e-18);
}

#[test]
fn gate_centres_on_direct_path_and_closes_half_a_main_lobe_before_first_echo() {
    // 2–18 GHz, Kaiser β = 6: main lobe 4.31/B (computed from the Kaiser window transform,
    // shared REFERENCES), B = 16 GHz; floor echo of R = 6 m, h = 1.5 m.
    let floor = [plane(Axis::Z, 0.0)];
    let mut inp = input(wide_band(), 6.0, 1.5, &floor);
    inp.cable_delay_s = 2e-9;
    let p = plan(&inp).unwrap();
    let w = p.mainlobe_s;
    assert!((w * 16e9 - 4.31).abs() < 0.005);
    assert!((p.resolution_s - 62.5e-12).abs() < 1e-18); // 1/B (Richards, shared REFERENCES)
    let excess = ((36.0f64 + 9.0).sqrt() - 6.0) / C;
    let g = p.gate.unwrap();
    assert!((g.center_s - (2e-9 + 6.0 / C)).abs() < 1e-18);
    assert!((g.stop_s() - (p.echoes[0].delay_s - w / 2.0)).abs() < 1e-18);
    assert!((g.span_s - 2.0 * (excess - w / 2.0)).abs() < 1e-18);
    assert_eq!(g.band_window, inp.band_window);
    assert!(p.all_alias_free);
    assert!(!p
        .findings
        .iter()
        .any(|f| matches!(f, Finding::NotSeparable { .. } | Finding::Aliased { .. })));
}

#[test]
fn echo_inside_main_lobe_is_not_separable() {
    // Same room, 2–3 GHz: B = 1 GHz, Kaiser β = 6 main lobe 4.31 ns > floor excess 2.36 ns.
    let floor = [plane(Axis::Z, 0.0)];
    let narrow = Grid::from_start_stop(2e9, 3e9, 201).unwrap();
    let inp = input(narrow, 6.0, 1.5, &floor);
    let p = plan(&inp).unwrap();
    let excess = ((36.0f64 + 9.0).sqrt() - 6.0) / C;
    assert!(p.gate.is_none());
    let width = inp.band_window.mainlobe_width();
    let (needed, beta) = p
        .findings
        .iter()
        .find_map(|f| match *f {
            Finding::NotSeparable {
                excess_delay_s,
                mainlobe_s,
                bandwidth_needed_hz,
                kaiser_beta_that_separates,
            } => {
                assert!((excess_delay_s - excess).abs() < 1e-18);
                assert!((mainlobe_s - width / 1e9).abs() < 1e-18);
                Some((bandwidth_needed_hz, kaiser_beta_that_separates))
            }
            _ => None,
        })
        .expect("not separable");
    // Hand computation: the window needs mainlobe_width/excess of bandwidth.
    assert!((needed - width / excess).abs() < 1.0);
    assert_eq!(p.bandwidth_needed_hz, Some(needed));
    // Kaiser main lobe (2/π)·√(β²+π²)/B = excess → β = π·√((excess·B/2)² − 1).
    let want_beta = std::f64::consts::PI * ((excess * 1e9 / 2.0).powi(2) - 1.0).sqrt();
    let beta = beta.expect("a Kaiser β separates it");
    assert!((beta as f64 - want_beta).abs() < 1e-4, "{beta} {want_beta}");
    // Widening the band to what was asked for (plus 1 %) separates it.
    let wider = Grid::from_start_stop(2e9, 2e9 + 1.01 * needed, 201).unwrap();
    let p2 = plan(&input(wider, 6.0, 1.5, &floor)).unwrap();
    assert!(p2.gate.is_some());
    // So does the suggested window, slightly less tapered.
    let mut inp3 = input(narrow, 6.0, 1.5, &floor);
    inp3.band_window = WindowKind::Kaiser { beta: beta * 0.99 };
    assert!(plan(&inp3).unwrap().gate.is_some());
}

#[test]
fn echo_beyond_one_over_step_is_aliased() {
    // 2–18 GHz in 161 points: Δf = 100 MHz, alias-free range 1/Δf = 10 ns (Richards,
    // stepped-frequency waveforms). R = 2 m (6.67 ns); back wall 1 m behind the AUT: echo
    // path 4 m = 13.34 ns > 10 ns, so it wraps to 3.34 ns.
    let wall = [plane(Axis::X, -1.0)];
    let coarse = Grid::from_start_stop(2e9, 18e9, 161).unwrap();
    let p = plan(&input(coarse, 2.0, 1.5, &wall)).unwrap();
    assert!(!p.all_alias_free);
    assert!((p.alias_free_s - 10e-9).abs() < 1e-18);
    let aliased = p.findings.iter().find_map(|f| match *f {
        Finding::Aliased {
            source, delay_s, ..
        } => Some((source, delay_s)),
        _ => None,
    });
    let (source, delay) = aliased.expect("aliased");
    assert_eq!(source, PathSource::Plane { index: 0 });
    assert!((delay - 4.0 / C).abs() < 1e-18);
    // Hand computation of the largest step: 1/(longest delay + half the main lobe).
    let max_step = 1.0 / (4.0 / C + p.mainlobe_s / 2.0);
    assert!((p.max_step_hz - max_step).abs() < 1e-3);
    let min_points = ((16e9 / max_step).ceil() + 1.0) as u32;
    assert_eq!(p.min_points, min_points);
    assert!(p.findings.iter().any(|f| matches!(
        f,
        Finding::StepTooCoarse { min_points: m, .. } if *m == min_points
    )));
    // With that many points nothing is aliased and the step is fine.
    let fine = Grid::from_start_stop(2e9, 18e9, min_points as usize).unwrap();
    let p2 = plan(&input(fine, 2.0, 1.5, &wall)).unwrap();
    assert!(p2.all_alias_free);
    assert!(!p2
        .findings
        .iter()
        .any(|f| matches!(f, Finding::Aliased { .. } | Finding::StepTooCoarse { .. })));
}

#[test]
fn longest_plausible_path_includes_second_order_and_configured() {
    // Floor (z = 0) and ceiling (z = H): the floor–ceiling double bounce has path
    // √(R² + (2H)²) for equal heights (image method, common practice, no source).
    let (r, h, ceil) = (6.0, 1.5, 3.0);
    let planes = [plane(Axis::Z, 0.0), plane(Axis::Z, ceil)];
    let mut inp = input(wide_band(), r, h, &planes);
    let p = plan(&inp).unwrap();
    let want = (r * r + 4.0 * ceil * ceil).sqrt();
    assert!(
        (p.longest_path_m - want).abs() < 1e-12,
        "{}",
        p.longest_path_m
    );
    assert!(matches!(p.longest_source, PathSource::SecondOrder { .. }));
    // 2–18 GHz / 801 points: 50 ns ≈ 14.99 m; a configured 20 m path is aliased.
    inp.longest_path_m = Some(20.0);
    let p = plan(&inp).unwrap();
    assert_eq!(p.longest_source, PathSource::Configured);
    assert!(!p.all_alias_free);
    assert!(p.findings.iter().any(|f| matches!(
        f,
        Finding::Aliased {
            source: PathSource::Configured,
            ..
        }
    )));
}

#[test]
fn rotation_limit_and_ring_down_warning() {
    // Half a bin per sweep (common practice, no source): 1° bins, 50 ms → 10 deg/s.
    let floor = [plane(Axis::Z, 0.0)];
    let mut inp = input(wide_band(), 6.0, 1.5, &floor);
    inp.rotation_deg_s = Some(12.0);
    let p = plan(&inp).unwrap();
    assert!((p.max_rotation_deg_s - 10.0).abs() < 1e-12);
    assert!(p.findings.iter().any(|f| matches!(
        f,
        Finding::RotationTooFast { rotation_deg_s, max_rotation_deg_s }
            if *rotation_deg_s == 12.0 && (*max_rotation_deg_s - 10.0).abs() < 1e-12
    )));
    inp.rotation_deg_s = Some(9.0);
    assert!(!plan(&inp)
        .unwrap()
        .findings
        .iter()
        .any(|f| matches!(f, Finding::RotationTooFast { .. })));

    // Ring-down ≈ ln(100)/π / (FBW·f_centre) (single-resonance estimate, common practice,
    // no source): FBW 5 % at the 10 GHz band centre → 2.93 ns, longer than the 2.09 ns the
    // gate leaves after the direct path.
    inp.aut_fractional_bandwidth = Some(0.05);
    let p = plan(&inp).unwrap();
    let ring = RING_DOWN_FACTOR / (0.05 * 10e9);
    assert!((RING_DOWN_FACTOR - 100f64.ln() / std::f64::consts::PI).abs() < 1e-15);
    assert_eq!(p.ring_down_s, Some(ring));
    let half = p.gate.unwrap().span_s / 2.0;
    assert!(half < ring);
    assert!(p.findings.iter().any(|f| matches!(
        f,
        Finding::GateShorterThanRingDown { gate_after_direct_s, ring_down_s }
            if *gate_after_direct_s == half && *ring_down_s == ring
    )));
    // A wideband AUT (FBW 100 %) rings down in 0.15 ns: no warning.
    inp.aut_fractional_bandwidth = Some(1.0);
    assert!(!plan(&inp)
        .unwrap()
        .findings
        .iter()
        .any(|f| matches!(f, Finding::GateShorterThanRingDown { .. })));
}

#[test]
fn every_finding_reads_as_one_sentence() {
    let planes = [plane(Axis::Z, 0.0), plane(Axis::X, -3.0)];
    let coarse = Grid::from_start_stop(2e9, 3e9, 11).unwrap();
    let mut inp = input(coarse, 2.0, 0.3, &planes);
    inp.aut_size_m = 2.0;
    inp.rotation_deg_s = Some(100.0);
    inp.longest_path_m = Some(100.0);
    let p = plan(&inp).unwrap();
    assert!(p.findings.len() >= 4, "{:?}", p.findings);
    for f in &p.findings {
        let s = f.to_string();
        assert!(s.ends_with('.') && !s.contains('\n'), "{s}");
        assert!(s.starts_with(|c: char| c.is_ascii_uppercase()), "{s}");
        assert_eq!(s.matches(". ").count(), 0, "more than one sentence: {s}");
        println!("{s}");
    }
}
