//! The gate's own error at the pattern frequencies and the band-edge mark
//! (`settings.gate_self_error` in `summary.json`).

use sweepgate::gate::GateConfig;
use sweepgate::grid::Grid;
use sweepgate::window::WindowKind;
use sweepgate_host::pipeline::self_error::self_errors;

fn config(span_s: f64) -> GateConfig {
    GateConfig {
        grid: Grid::from_start_stop(8e9, 12e9, 801).unwrap(),
        band_window: WindowKind::kaiser_for_sidelobe_db(50.0),
        center_s: 20e-9,
        span_s,
        shape: WindowKind::Tukey { alpha: 0.3 },
        renormalize: true,
    }
}

#[test]
fn at_the_gate_center_the_gate_returns_the_direct_response() {
    // Renormalization divides by the gated response of an ideal impulse at the center
    // (Dunsmore, "Gating effects in time domain transforms", ARFTG): zero error but for
    // f32 rounding.
    let e = self_errors(&config(2e-9), &[0, 400, 800], &[]).unwrap();
    for x in &e {
        assert!(x.self_error_db < 1e-3, "{x:?}");
    }
}

#[test]
fn off_center_the_error_grows_and_a_wider_gate_shrinks_it() {
    // A direct path 0.4 ns from the center of a 1.5 ns gate sits in the gate's taper and
    // beyond its flat part; with a 6 ns gate the same delay is well inside the flat part.
    let narrow = self_errors(&config(1.5e-9), &[400], &[20.4e-9]).unwrap();
    let wide = self_errors(&config(6e-9), &[400], &[20.4e-9]).unwrap();
    eprintln!(
        "0.4 ns off center: {:.4} dB with a 1.5 ns gate, {:.5} dB with a 6 ns gate",
        narrow[0].self_error_db, wide[0].self_error_db
    );
    assert!(narrow[0].self_error_db > 0.05, "{:?}", narrow[0]);
    assert!(wide[0].self_error_db < 0.05, "{:?}", wide[0]);
}

#[test]
fn frequencies_within_half_the_gate_kernel_of_a_band_end_are_marked() {
    let cfg = config(2e-9);
    // Half the kernel's null-to-null width: the gate shape's main lobe over the span.
    let half_hz = 0.5 * cfg.shape.mainlobe_width() / cfg.span_s;
    let g = cfg.grid;
    let inside = g.nearest_index(8e9 + half_hz + 20e6).unwrap();
    let edge = g.nearest_index(8e9 + half_hz - 20e6).unwrap();
    let e = self_errors(&cfg, &[0, edge, inside, 400, 800], &[]).unwrap();
    let marks: Vec<bool> = e.iter().map(|x| x.near_band_edge).collect();
    assert_eq!(marks, [true, true, false, false, true], "{e:?}");
}
