//! `sweepgate demo`: a built-in two-path example run through the core's gate, then the main
//! job on a built-in room.
//!
//! The room is our own invention: a bench range in a machine-shop bay, a 10 GHz slot-array
//! AUT and a probe horn 5.2 m apart, both 1.25 m over a bare concrete floor. The direct path
//! and the single floor bounce (image method) are summed at each swept frequency; the table
//! shows what the gate does to the ripple that the echo puts on the response. The gate is
//! set up as every command sets it up ([`crate::pipeline::setup`]): the default band window
//! and gate shape, centered on the direct path and closing halfway to the floor echo unless
//! `--gate-span-ns` says otherwise.
//!
//! Then the main job on the built-in scenario `scenarios/demo-lab.toml` (embedded, so the
//! demo runs from any directory): a full turn is simulated to `./sweepgate-demo/demo.rec`,
//! replayed through the scan engine with the live preview at an accelerated pace (a progress
//! line without a terminal), and the report is written to `./sweepgate-demo/`.

use std::f64::consts::PI;
use std::path::PathBuf;

use anyhow::Context;
use sweepgate::grid::Grid;
use sweepgate::plan::{Axis, Plane, Point, SPEED_OF_LIGHT_M_S};
use sweepgate::window::WindowKind;
use sweepgate::Complex32;

use crate::model::scenario::Scenario;
use crate::output::report;
use crate::pipeline::engine::gate_sweeps;
use crate::pipeline::options::{describe_window, Choices, GateOptions, Origin};
use crate::pipeline::setup::{self, AutoGate, Automatic};
use crate::pipeline::transform::FftSize;
use crate::pipeline::{replay, simulate};

/// Options of `sweepgate demo`.
#[derive(Debug, Clone)]
pub struct Options {
    /// Floor reflection coefficient (field, −1…1).
    pub floor_reflection: f64,
    /// Gate span in nanoseconds (default: close halfway to the floor echo).
    pub gate_span_ns: Option<f64>,
    /// Folder for the demo recording and report.
    pub out: PathBuf,
    /// Replay pace (times the recorded speed).
    pub speed: f64,
    /// Replay without waiting.
    pub as_fast_as_possible: bool,
    /// No full-screen preview (a progress line instead).
    pub no_preview: bool,
}

/// The built-in demo scenario.
pub const DEMO_SCENARIO: &str = include_str!("../../scenarios/demo-lab.toml");

/// The usual caution, printed once.
pub const CAUTION: &str = "Caution: a transmitting antenna can exceed RF exposure limits near its aperture, and a positioner is moving machinery; follow local regulations and your lab's licensed practice.";

/// Everything the demo measured, for the table and for tests.
#[derive(Debug, Clone)]
pub struct Outcome {
    /// The sweep grid.
    pub grid: Grid,
    /// FFT size.
    pub fft_size: FftSize,
    /// Gate center (direct path delay), s.
    pub center_s: f64,
    /// Gate span, s.
    pub span_s: f64,
    /// Floor echo delay after the direct path, s.
    pub excess_delay_s: f64,
    /// Echo amplitude relative to the direct path.
    pub echo_ratio: f64,
    /// The band window.
    pub band_window: WindowKind,
    /// The gate shape.
    pub gate_shape: WindowKind,
    /// Impulse main-lobe width of the band window, s.
    pub mainlobe_s: f64,
    /// Ripple of |S21| over the central 80 % of the band, dB: raw and gated.
    pub ripple_raw_db: f64,
    /// Ripple after gating.
    pub ripple_gated_db: f64,
    /// Largest error against the direct path alone over the central 80 %, dB: raw and gated.
    pub error_raw_db: f64,
    /// Largest error after gating.
    pub error_gated_db: f64,
    /// Ripple of the gated direct path alone (no echo) over the central 80 %, dB: the
    /// gate's own.
    pub ripple_alone_gated_db: f64,
    /// Largest error of the gated direct path alone against itself ungated, dB.
    pub error_alone_gated_db: f64,
    /// Energy of the impulse response outside the gate over its total energy, dB (an
    /// energy share: never above 0 dB, whatever the echo's own level).
    pub echo_level_db: f32,
}

/// The bench range: the grid, the direct and floor-bounce path lengths (m).
fn bench(floor_reflection: f64) -> anyhow::Result<(Grid, f64, f64)> {
    let grid = Grid::from_start_stop(8.0e9, 12.0e9, 801).context("demo sweep grid")?;
    let aut = Point::new(0.0, 0.0, 1.25);
    let probe = Point::new(5.2, 0.0, 1.25);
    let floor = Plane {
        axis: Axis::Z,
        position_m: 0.0,
        reflection: floor_reflection,
    };
    Ok((
        grid,
        aut.distance_m(&probe),
        floor.bounce_path_m(&aut, &probe),
    ))
}

/// The direct path alone and the direct path plus the floor bounce at each grid point:
/// Friis factor λ/(4πR) and phase e^(−j2πfR/c) per path, isotropic antennas.
fn two_paths(
    grid: &Grid,
    direct_m: f64,
    bounce_m: f64,
    reflection: f64,
) -> (Vec<Complex32>, Vec<Complex32>) {
    let path = |f: f64, len: f64, gain: f64| {
        let lambda = SPEED_OF_LIGHT_M_S / f;
        let a = gain * lambda / (4.0 * PI * len);
        let ph = -2.0 * PI * f * len / SPEED_OF_LIGHT_M_S;
        Complex32::new((a * ph.cos()) as f32, (a * ph.sin()) as f32)
    };
    (0..grid.points())
        .map(|n| {
            let f = grid.frequency_hz(n);
            let truth = path(f, direct_m, 1.0);
            (truth, truth + path(f, bounce_m, reflection))
        })
        .unzip()
}

/// Ripple (max − min) and worst |error| of raw and gated levels relative to the direct path
/// alone over the central 80 % of the band, dB: ((raw ripple, raw error), (gated ripple,
/// gated error)). The 1/f spreading common to both paths drops out; what is left is the
/// echo's doing.
fn spread(truth: &[Complex32], raw: &[Complex32], gated: &[Complex32]) -> ((f64, f64), (f64, f64)) {
    let k = truth.len();
    let db = |z: Complex32, n: usize| 20.0 * ((z / truth[n]).norm() as f64).log10();
    let of = |v: &[Complex32]| {
        let d: Vec<f64> = (k / 10..k - k / 10).map(|n| db(v[n], n)).collect();
        let max = d.iter().cloned().fold(f64::MIN, f64::max);
        let min = d.iter().cloned().fold(f64::MAX, f64::min);
        (max - min, max.abs().max(min.abs()))
    };
    (of(raw), of(gated))
}

/// Runs the two-path example through the gate the set-up gives.
pub fn compute(floor_reflection: f64, gate_span_ns: Option<f64>) -> anyhow::Result<Outcome> {
    let (grid, direct_m, bounce_m) = bench(floor_reflection)?;
    let center_s = direct_m / SPEED_OF_LIGHT_M_S;
    let excess_delay_s = (bounce_m - direct_m) / SPEED_OF_LIGHT_M_S;
    // Spherical spreading: amplitude falls as 1/path length.
    let echo_ratio = floor_reflection * direct_m / bounce_m;
    let choices = Choices {
        span_ns: gate_span_ns.map(|ns| (ns, Origin::CommandLine)),
        ..Choices::default()
    };
    let band_window = setup::band_window(&choices, None)?;
    let auto = Automatic::Fixed(AutoGate {
        center_s,
        span_s: excess_delay_s,
        rule: "center at the direct path, closing halfway to the floor echo".into(),
        source: "the bench geometry",
    });
    let g = setup::gating(grid, &choices, band_window, &[], auto)?;
    let (truth, raw) = two_paths(&grid, direct_m, bounce_m, floor_reflection);
    let gated = gate_sweeps(&g.gate, &[&raw[..], &truth[..]], None).context("demo gate")?;
    let ((ripple_raw_db, error_raw_db), (ripple_gated_db, error_gated_db)) =
        spread(&truth, &raw, &gated.spectra[0]);
    let (_, (ripple_alone_gated_db, error_alone_gated_db)) =
        spread(&truth, &truth, &gated.spectra[1]);
    Ok(Outcome {
        grid,
        fft_size: g.fft_size,
        center_s: g.gate.center_s,
        span_s: g.gate.span_s,
        excess_delay_s,
        echo_ratio,
        band_window,
        gate_shape: g.gate.shape,
        mainlobe_s: band_window.mainlobe_width() / grid.span_hz(),
        ripple_raw_db,
        ripple_gated_db,
        error_raw_db,
        error_gated_db,
        ripple_alone_gated_db,
        error_alone_gated_db,
        echo_level_db: gated.echo_db[0],
    })
}

/// Runs the demo: the two-path table, then the main job.
pub fn run(args: &Options) -> anyhow::Result<()> {
    let o = compute(args.floor_reflection, args.gate_span_ns)?;
    print_table(&o, args.floor_reflection);
    main_job(args)
}

/// Prints the two-path table.
fn print_table(o: &Outcome, floor_reflection: f64) {
    let g = &o.grid;
    println!("sweepgate demo: two-path bench range (direct path + one floor bounce)");
    println!("  AUT and probe 5.2 m apart, both 1.25 m over a concrete floor");
    println!("  (floor reflection {floor_reflection:+.2})");
    println!();
    println!(
        "  sweep                {:.3}–{:.3} GHz, {} points",
        g.start_hz() / 1e9,
        g.stop_hz() / 1e9,
        g.points()
    );
    println!("  frequency step       {:.3} MHz", g.step_hz() / 1e6);
    println!(
        "  alias-free range     {:.2} ns  ({:.2} m of path)",
        g.alias_free_s() * 1e9,
        g.alias_free_s() * SPEED_OF_LIGHT_M_S
    );
    println!("  resolution 1/B       {:.1} ps", g.resolution_s() * 1e12);
    let m = o.fft_size.points();
    println!("  time step, M = {m}  {:.1} ps", g.time_step_s(m) * 1e12);
    println!(
        "  band window          {}, main lobe {:.3} ns",
        describe_window(&o.band_window),
        o.mainlobe_s * 1e9
    );
    println!("  direct path          {:.3} ns", o.center_s * 1e9);
    println!(
        "  floor echo           +{:.3} ns, amplitude {:.3} of direct",
        o.excess_delay_s * 1e9,
        o.echo_ratio.abs()
    );
    println!(
        "  gate                 center {:.3} ns, span {:.3} ns, {}, renormalized",
        o.center_s * 1e9,
        o.span_s * 1e9,
        describe_window(&o.gate_shape)
    );
    println!();
    println!("  over the central 80 % of the band   raw       gated");
    println!(
        "  ripple with the echo (dB)          {:>6.3}    {:>6.3}",
        o.ripple_raw_db, o.ripple_gated_db
    );
    println!(
        "  worst error vs direct path (dB)    {:>6.3}    {:>6.3}",
        o.error_raw_db, o.error_gated_db
    );
    println!(
        "  ripple, direct path alone (dB)      0.000    {:>6.3}   (the gate's own)",
        o.ripple_alone_gated_db
    );
    println!(
        "  error, direct path alone (dB)       0.000    {:>6.3}   (the gate's own)",
        o.error_alone_gated_db
    );
    println!(
        "  energy outside the gate, of total  {:>6.1} dB",
        o.echo_level_db
    );
    let expect = 20.0 * ((1.0 + o.echo_ratio.abs()) / (1.0 - o.echo_ratio.abs())).log10();
    println!("  (closed form 20·log10((1+a)/(1−a)) for the raw ripple: {expect:.3} dB)");
    println!();
    println!("{CAUTION}");
    println!();
}

/// Simulates the built-in scenario, replays it with the preview and writes the report.
fn main_job(args: &Options) -> anyhow::Result<()> {
    let scenario = Scenario::from_toml(DEMO_SCENARIO).context("built-in demo scenario")?;
    println!("sweepgate demo, main job: {}", scenario.name);
    println!("  {}", scenario.description);
    std::fs::create_dir_all(&args.out)
        .with_context(|| format!("creating {}", args.out.display()))?;
    let rec = args.out.join("demo.rec");
    let sum = simulate::simulate_to_file(
        &scenario,
        Some(DEMO_SCENARIO),
        scenario.simulation.seed,
        &rec,
        false,
    )?;
    println!(
        "  simulated {} sweeps and {} positioner samples to {}",
        sum.sweeps,
        sum.positions,
        rec.display()
    );
    let ra = replay::Options {
        as_fast_as_possible: args.as_fast_as_possible,
        speed: args.speed,
        no_preview: args.no_preview,
        out: Some(args.out.clone()),
        gate: GateOptions::default(),
        ..replay::Options::fast(&rec)
    };
    let (o, dir) = replay::replay_file(&ra)?;
    let g = &o.setup.gate;
    println!(
        "  replayed: {} bins closed from {} sweeps; gate center {:.3} ns, span {:.3} ns",
        o.counters.bins_closed,
        o.counters.sweeps_binned,
        g.center_s * 1e9,
        g.span_s * 1e9
    );
    println!("  normalized to peak, against the free-space truth (truth ≥ −25 dB):");
    for fi in 0..o.report.frequencies_hz.len() {
        if let Some(e) = report::truth_errors(&o.report, fi) {
            println!(
                "    {:>7.3} GHz   worst error raw {:>6.2} dB, gated {:>5.2} dB",
                e.frequency_hz / 1e9,
                e.raw_within_25_db,
                e.gated_within_25_db
            );
        }
    }
    println!("  report written to {}/", dir.display());
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn gating_removes_the_floor_echo() {
        let o = compute(-0.6, None).unwrap();
        // Image method over a floor, equal heights h, range R: excess path
        // √(R² + (2h)²) − R (common practice, no source).
        let want = ((5.2f64.powi(2) + 2.5f64.powi(2)).sqrt() - 5.2) / SPEED_OF_LIGHT_M_S;
        assert!((o.excess_delay_s - want).abs() < 1e-15);
        // Two-path closed form 20·log10((1+a)/(1−a)) (common practice, no source); the band
        // samples the ripple's extremes only to within a few hundredths of a dB.
        let a = o.echo_ratio.abs();
        let closed = 20.0 * ((1.0 + a) / (1.0 - a)).log10();
        assert!((o.ripple_raw_db - closed).abs() < 0.1, "{o:?}");
        assert!(o.error_raw_db > 3.0, "{o:?}");
        assert!(o.error_gated_db < 0.5, "{o:?}");
        assert!(o.ripple_gated_db < 0.1 * o.ripple_raw_db, "{o:?}");
        // Echo energy share a²/(1 + a²), within 1 dB of windowing leakage.
        let share = 10.0 * (a * a / (1.0 + a * a)).log10();
        assert!((o.echo_level_db as f64 - share).abs() < 1.0, "{o:?}");
    }

    #[test]
    fn impossible_gate_is_reported() {
        let e = compute(-0.6, Some(0.0)).unwrap_err();
        assert!(
            format!("{e:#}").contains("gate span must be above 0 s"),
            "{e:#}"
        );
    }
}
