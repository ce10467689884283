//! The gate's self-check against sweeps of known impulses: S21 = Σ aᵢ·e^(−j2π·f·tᵢ) is, by
//! the Fourier shift theorem (textbook), an impulse of height aᵢ at delay tᵢ; with each tᵢ
//! on a time sample of the M-point response, the peak heights are exactly the band window's
//! sum times aᵢ, so peak ratios are 20·log10 of amplitude ratios.

use std::f64::consts::PI;
use sweepgate::gate::{Gate, GateConfig, ECHO_FLOOR_DB};
use sweepgate::grid::Grid;
use sweepgate::window::WindowKind;
use sweepgate::Complex32;

const M: usize = 1024;

fn grid() -> Grid {
    Grid::from_start_stop(8e9, 12e9, 801).unwrap() // Δf = 5 MHz
}

/// Time of sample m of the M-point response: m/(M·Δf).
fn t(m: usize) -> f64 {
    m as f64 / (M as f64 * 5e6)
}

fn gate() -> Gate<M> {
    Gate::new(&GateConfig {
        grid: grid(),
        band_window: WindowKind::Kaiser { beta: 6.0 },
        center_s: t(100),
        span_s: 4e-9, // ±10 samples
        shape: WindowKind::Tukey { alpha: 0.5 },
        renormalize: true,
    })
    .unwrap()
}

fn sweep(paths: &[(f64, usize)]) -> [Complex32; M] {
    let g = grid();
    let mut raw = [Complex32::new(0.0, 0.0); M];
    for (n, v) in raw.iter_mut().take(g.points()).enumerate() {
        let f = g.frequency_hz(n);
        let (re, im) = paths.iter().fold((0.0, 0.0), |(re, im), &(a, m)| {
            let ph = -2.0 * PI * f * t(m);
            (re + a * ph.cos(), im + a * ph.sin())
        });
        *v = Complex32::new(re as f32, im as f32);
    }
    raw
}

fn check(paths: &[(f64, usize)]) -> sweepgate::gate::GateCheck {
    let g = gate();
    let mut h = [Complex32::new(0.0, 0.0); M];
    g.impulse_response(&sweep(paths), &mut h);
    g.check(&h)
}

#[test]
fn an_echo_outside_the_gate_reads_as_its_amplitude_ratio() {
    // Echo at half the direct amplitude, 50 samples (9.8 ns) later: 20·log10(0.5) = −6.02 dB.
    let c = check(&[(1.0, 100), (0.5, 150)]);
    assert_eq!(c.direct_index, 100);
    assert!((c.echo_to_direct_db - (-6.0206)).abs() < 0.05, "{c:?}");
    assert!(c.direct_in_gate && !c.echo_in_gate, "{c:?}");
    // The energy fraction is a different figure: 0.25/(1 + 0.25) → −6.99 dB.
    assert!((c.energy_outside_db - (-6.9897)).abs() < 0.1, "{c:?}");
}

#[test]
fn an_echo_stronger_than_the_direct_path_reads_above_zero() {
    // Twice the direct amplitude: +6.02 dB, while the energy fraction can only approach 0 dB
    // (4/5 → −0.97 dB); the strongest sample is outside the gate.
    let c = check(&[(1.0, 100), (2.0, 150)]);
    assert!((c.echo_to_direct_db - 6.0206).abs() < 0.05, "{c:?}");
    assert!(
        c.energy_outside_db < 0.0 && c.energy_outside_db > -1.1,
        "{c:?}"
    );
    assert!(!c.direct_in_gate, "{c:?}");
}

#[test]
fn an_echo_inside_the_gate_is_flagged() {
    // 6 samples (1.17 ns) after the direct path, beyond its half main lobe (Kaiser β = 6:
    // 4.31/B null to null = 2.76 samples each side) and inside the ±10-sample gate.
    let c = check(&[(1.0, 100), (0.5, 106)]);
    assert!(c.echo_in_gate && c.direct_in_gate, "{c:?}");
    // Nothing else outside: the outside peak is the band window's sidelobes only.
    assert!(c.echo_to_direct_db < -40.0, "{c:?}");
    // At −40 dB (below the −20 dB threshold) it is not flagged.
    let c = check(&[(1.0, 100), (0.01, 106)]);
    assert!(!c.echo_in_gate, "{c:?}");
    // A lone direct path: no echo anywhere.
    let c = check(&[(1.0, 100)]);
    assert!(!c.echo_in_gate && c.direct_in_gate, "{c:?}");
    assert!(
        c.echo_to_direct_db < -40.0 && c.echo_to_direct_db >= ECHO_FLOOR_DB,
        "{c:?}"
    );
}
