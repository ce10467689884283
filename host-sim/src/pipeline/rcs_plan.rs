//! `sweepgate plan-rcs`: the target zone's size and distance, the antennas and the sweep →
//! the far-field condition for the zone, the down-range resolution, the zone's gate, its
//! clearance from the coupling and the mount, and the bandwidth and points they need
//! ([`sweepgate::rcs::plan`]), as text.

use std::fmt::Write;

use anyhow::Context;
use sweepgate::grid::Grid;
use sweepgate::plan::SPEED_OF_LIGHT_M_S;
use sweepgate::rcs::{plan, Zone};
use sweepgate::window::WindowKind;

use crate::pipeline::options::describe_window;

/// What `plan-rcs` was given.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RcsPlanOptions {
    /// The target zone and the antennas.
    pub zone: Zone,
    /// Distance from the antennas to the mount's strongest echo, m.
    pub mount_distance_m: Option<f64>,
    /// First frequency, Hz.
    pub start_hz: f64,
    /// Last frequency, Hz.
    pub stop_hz: f64,
    /// Points per sweep.
    pub points: usize,
    /// Band window.
    pub band_window: WindowKind,
}

fn yes_no(ok: bool) -> &'static str {
    if ok {
        "yes"
    } else {
        "NO"
    }
}

/// The plan as text, one figure per line, each with its unit and its check.
pub fn plan_text(o: &RcsPlanOptions) -> anyhow::Result<String> {
    let grid = Grid::from_start_stop(o.start_hz, o.stop_hz, o.points).context("the sweep")?;
    let mount_s = o
        .mount_distance_m
        .map(|m| o.zone.time_zero_s + 2.0 * m / SPEED_OF_LIGHT_M_S);
    let p = plan(&o.zone, &grid, o.band_window, mount_s).context("the target zone")?;
    let ns = |s: f64| s * 1e9;
    let mut t = String::new();
    let z = &o.zone;
    let _ = writeln!(
        t,
        "RCS plan: zone {} m across at {} m, antennas {} m apart, time zero {:.3} ns",
        z.size_m,
        z.distance_m,
        z.separation_m,
        ns(z.time_zero_s)
    );
    let _ = writeln!(
        t,
        "sweep: {:.6} to {:.6} GHz, {} points, band window {}",
        o.start_hz / 1e9,
        o.stop_hz / 1e9,
        o.points,
        describe_window(&o.band_window)
    );
    let _ = writeln!(
        t,
        "far field of the zone at the top frequency (2D²/λ): {:.2} m; zone at {} m: {}",
        p.far_field_m,
        z.distance_m,
        yes_no(p.in_far_field)
    );
    let _ = writeln!(
        t,
        "down-range resolution c/(2B): {:.1} mm",
        p.down_range_resolution_m * 1e3
    );
    let _ = writeln!(
        t,
        "gate around the zone: centre {:.3} ns, span {:.3} ns",
        ns(p.gate_center_s),
        ns(p.gate_span_s)
    );
    let _ = writeln!(
        t,
        "coupling clear of the gate by {:.3} ns: {}",
        ns(p.coupling_clearance_s),
        yes_no(p.coupling_clearance_s >= 0.0)
    );
    match p.mount_clearance_s {
        Some(m) => {
            let _ = writeln!(
                t,
                "mount echo clear of the gate by {:.3} ns: {}",
                ns(m),
                yes_no(m >= 0.0)
            );
        }
        None => t.push_str("mount echo: not given (--mount-distance-m), not checked\n"),
    }
    let _ = writeln!(
        t,
        "bandwidth that separates the zone from them: at least {:.3} GHz (have {:.3} GHz): {}",
        p.bandwidth_needed_hz / 1e9,
        grid.step_hz() * o.points as f64 / 1e9,
        yes_no(grid.step_hz() * o.points as f64 >= p.bandwidth_needed_hz)
    );
    let _ = writeln!(t, "alias-free range 1/Δf: {:.3} ns; points to hold the gate and the mount with a fifth to spare: {} (have {}): {}", ns(p.alias_free_s), p.points_needed, o.points, yes_no(o.points as u32 >= p.points_needed));
    t.push_str("Caution: a transmitting antenna can exceed RF exposure limits near its aperture and a positioner is moving machinery: follow local regulations and the lab's licensed practice.\n");
    Ok(t)
}
