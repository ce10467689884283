//! `sweepgate demo`: a built-in two-path example run through the core's gate.
//!
//! The room is our own invention: a bench range in a machine-shop bay, a 10 GHz slot-array
//! AUT and a probe horn 5.2 m apart, both 1.25 m over a bare concrete floor. The direct path
//! and the single floor bounce (image method) are summed at each swept frequency; the table
//! shows what the gate does to the ripple that the echo puts on the response.
//!
//! Then the main job on the built-in scenario `scenarios/demo-lab.toml` (embedded, so the
//! demo runs from any directory): a full turn is simulated to `./sweepgate-demo/demo.rec`,
//! replayed through the scan engine with the live preview at an accelerated pace (a progress
//! line without a terminal), and the report is written to `./sweepgate-demo/`.

use crate::model::scenario::Scenario;
use crate::output::report;
use crate::pipeline::{replay, simulate};
use anyhow::Context;
use std::f64::consts::PI;
use std::path::PathBuf;
use sweepgate::gate::{Gate, GateConfig};
use sweepgate::grid::Grid;
use sweepgate::plan::{Axis, Plane, Point, SPEED_OF_LIGHT_M_S};
use sweepgate::window::WindowKind;
use sweepgate::Complex32;

/// FFT size of the demo.
const M: usize = 1024;

/// Options of `sweepgate demo`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Floor reflection coefficient (field, −1…1).
    #[arg(long, default_value_t = -0.6, allow_negative_numbers = true)]
    pub floor_reflection: f64,
    /// Gate span in nanoseconds (default: close halfway to the floor echo).
    #[arg(long, allow_negative_numbers = true)]
    pub gate_span_ns: Option<f64>,
    /// Folder for the demo recording and report.
    #[arg(long, default_value = "sweepgate-demo")]
    pub out: PathBuf,
    /// Replay pace (times the recorded speed).
    #[arg(long, default_value_t = 8.0, conflicts_with = "as_fast_as_possible")]
    pub speed: f64,
    /// Replay without waiting.
    #[arg(long)]
    pub as_fast_as_possible: bool,
    /// No full-screen preview (a progress line instead).
    #[arg(long)]
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
    /// Gate centre (direct path delay), s.
    pub center_s: f64,
    /// Gate span, s.
    pub span_s: f64,
    /// Floor echo delay after the direct path, s.
    pub excess_delay_s: f64,
    /// Echo amplitude relative to the direct path.
    pub echo_ratio: f64,
    /// The band window.
    pub band_window: WindowKind,
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
    /// Echo level from the impulse response, dB.
    pub echo_level_db: f32,
}

/// Runs the two-path example through the gate.
pub fn compute(floor_reflection: f64, gate_span_ns: Option<f64>) -> anyhow::Result<Outcome> {
    let grid = Grid::from_start_stop(8.0e9, 12.0e9, 801).context("demo sweep grid")?;
    let aut = Point::new(0.0, 0.0, 1.25);
    let probe = Point::new(5.2, 0.0, 1.25);
    let floor = Plane {
        axis: Axis::Z,
        position_m: 0.0,
        reflection: floor_reflection,
    };
    let direct_m = aut.distance_m(&probe);
    let bounce_m = floor.bounce_path_m(&aut, &probe);
    let center_s = direct_m / SPEED_OF_LIGHT_M_S;
    let excess_delay_s = (bounce_m - direct_m) / SPEED_OF_LIGHT_M_S;
    // Spherical spreading: amplitude falls as 1/path length.
    let echo_ratio = floor_reflection * direct_m / bounce_m;

    let band_window = crate::pipeline::options::default_band_window();
    let mainlobe_s = band_window.mainlobe_width() / grid.span_hz();
    let span_s = gate_span_ns.map_or(excess_delay_s, |ns| ns * 1e-9);
    let cfg = GateConfig {
        grid,
        band_window,
        center_s,
        span_s,
        shape: WindowKind::Kaiser { beta: 4.0 },
        renormalize: true,
    };
    let gate = Gate::<M>::new(&cfg).map_err(|e| anyhow::anyhow!("demo gate: {e}"))?;

    let k = grid.points();
    let mut raw = [Complex32::new(0.0, 0.0); M];
    let mut truth = vec![Complex32::new(0.0, 0.0); k];
    for n in 0..k {
        let f = grid.frequency_hz(n);
        let lambda = SPEED_OF_LIGHT_M_S / f;
        // Friis factor λ/(4πR) and phase e^(−j2πfR/c) per path, isotropic antennas.
        let path = |len: f64, gain: f64| {
            let a = gain * lambda / (4.0 * PI * len);
            let ph = -2.0 * PI * f * len / SPEED_OF_LIGHT_M_S;
            Complex32::new((a * ph.cos()) as f32, (a * ph.sin()) as f32)
        };
        truth[n] = path(direct_m, 1.0);
        raw[n] = truth[n] + path(bounce_m, floor_reflection);
    }
    let mut gated = [Complex32::new(0.0, 0.0); M];
    let echo_level_db = gate.apply(&raw, &mut gated);

    // Everything is measured relative to the direct path alone, so the 1/f spreading common
    // to both paths drops out and what is left is the echo's doing.
    let central = k / 10..k - k / 10;
    let rel_db: Vec<(f64, f64)> = central
        .clone()
        .map(|n| {
            let db = |z: Complex32| 20.0 * ((z / truth[n]).norm() as f64).log10();
            (db(raw[n]), db(gated[n]))
        })
        .collect();
    let spread = |f: fn(&(f64, f64)) -> f64| {
        let v: Vec<f64> = rel_db.iter().map(f).collect();
        let max = v.iter().cloned().fold(f64::MIN, f64::max);
        let min = v.iter().cloned().fold(f64::MAX, f64::min);
        (max - min, max.abs().max(min.abs()))
    };
    let (ripple_raw_db, error_raw_db) = spread(|p| p.0);
    let (ripple_gated_db, error_gated_db) = spread(|p| p.1);
    Ok(Outcome {
        grid,
        center_s,
        span_s,
        excess_delay_s,
        echo_ratio,
        band_window,
        mainlobe_s,
        ripple_raw_db,
        ripple_gated_db,
        error_raw_db,
        error_gated_db,
        echo_level_db,
    })
}

/// Runs the demo and prints its table.
pub fn run(args: Args) -> anyhow::Result<()> {
    let o = compute(args.floor_reflection, args.gate_span_ns)?;
    let g = &o.grid;
    println!("sweepgate demo: two-path bench range (direct path + one floor bounce)");
    println!("  AUT and probe 5.2 m apart, both 1.25 m over a concrete floor");
    println!("  (floor reflection {:+.2})", args.floor_reflection);
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
    println!("  time step, M = {M}  {:.1} ps", g.time_step_s(M) * 1e12);
    let beta = match o.band_window {
        WindowKind::Kaiser { beta } => beta,
        _ => f32::NAN,
    };
    println!(
        "  band window          Kaiser β = {beta:.3} (50 dB sidelobes), main lobe {:.3} ns",
        o.mainlobe_s * 1e9
    );
    println!("  direct path          {:.3} ns", o.center_s * 1e9);
    println!(
        "  floor echo           +{:.3} ns, amplitude {:.3} of direct",
        o.excess_delay_s * 1e9,
        o.echo_ratio.abs()
    );
    println!(
        "  gate                 centre {:.3} ns, span {:.3} ns, Kaiser β = 4, renormalized",
        o.center_s * 1e9,
        o.span_s * 1e9
    );
    println!();
    println!("  over the central 80 % of the band   raw       gated");
    println!(
        "  ripple from the echo (dB)          {:>6.3}    {:>6.3}",
        o.ripple_raw_db, o.ripple_gated_db
    );
    println!(
        "  worst error vs direct path (dB)    {:>6.3}    {:>6.3}",
        o.error_raw_db, o.error_gated_db
    );
    println!(
        "  echo level in impulse response     {:>6.1} dB",
        o.echo_level_db
    );
    let expect = 20.0 * ((1.0 + o.echo_ratio.abs()) / (1.0 - o.echo_ratio.abs())).log10();
    println!("  (closed form 20·log10((1+a)/(1−a)) for the raw ripple: {expect:.3} dB)");
    println!();
    println!("{CAUTION}");
    println!();
    main_job(&args)
}

/// Simulates the built-in scenario, replays it with the preview and writes the report.
fn main_job(args: &Args) -> anyhow::Result<()> {
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
    let mut ra = replay::Args::fast(&rec);
    ra.as_fast_as_possible = args.as_fast_as_possible;
    ra.speed = args.speed;
    ra.no_preview = args.no_preview;
    ra.out = Some(args.out.clone());
    let (o, dir) = replay::replay_file(&ra)?;
    let g = &o.setup.gate;
    println!(
        "  replayed: {} bins closed from {} sweeps; gate centre {:.3} ns, span {:.3} ns",
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
