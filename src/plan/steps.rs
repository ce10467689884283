//! The planner's steps, in the order [`plan`](super::plan) runs them: far field, echoes,
//! longest path and aliasing, frequency step, gate, rotation, ring-down. Each step that can
//! find a problem pushes its [`Finding`]s in that order.

use core::f64::consts::PI;

use heapless::Vec;

use super::{
    double_bounces, Echo, FarFieldCheck, Finding, GateAdvice, PathSource, PlanInput, MAX_ECHOES,
    MAX_FINDINGS, RING_DOWN_FACTOR, SPEED_OF_LIGHT_M_S,
};
use crate::error::PlanError;
use crate::window::MAX_KAISER_BETA;

/// The findings list as the steps fill it.
pub(super) type Findings = Vec<Finding, MAX_FINDINGS>;

pub(super) fn push(findings: &mut Findings, f: Finding) -> Result<(), PlanError> {
    findings.push(f).map_err(|_| PlanError::FindingsFull)
}

/// Largest Kaiser β whose main lobe (in units of 1/B) is at most `width`, or `None` when
/// even the rectangular window (width 2) is wider.
fn kaiser_beta_for_mainlobe(width: f64) -> Option<f32> {
    if width.is_nan() || width < 2.0 {
        return None;
    }
    let x = 0.5 * PI * width;
    let beta = libm::sqrt((x * x - PI * PI).max(0.0));
    Some((beta as f32).min(MAX_KAISER_BETA))
}

/// Far-field conditions at the lowest and the highest frequency, with a finding for each
/// condition the range misses (2D²/λ checked at the top, where it is largest; 10·λ at the
/// bottom; 10·D once).
pub(super) fn far_field(
    input: &PlanInput<'_>,
    findings: &mut Findings,
) -> Result<(FarFieldCheck, FarFieldCheck), PlanError> {
    let d = input.aut_size_m;
    let range_m = input.aut.distance_m(&input.probe);
    let low = FarFieldCheck::at(input.grid.start_hz(), d, range_m);
    let high = FarFieldCheck::at(input.grid.stop_hz(), d, range_m);
    if range_m < high.rayleigh_m {
        push(
            findings,
            Finding::BelowFarField {
                range_m,
                far_field_m: high.rayleigh_m,
            },
        )?;
    }
    if range_m < high.size_m {
        push(
            findings,
            Finding::NotFarFromAntenna {
                range_m,
                needed_m: high.size_m,
            },
        )?;
    }
    if range_m < low.wavelengths_m {
        push(
            findings,
            Finding::TooFewWavelengths {
                range_m,
                needed_m: low.wavelengths_m,
                frequency_hz: low.frequency_hz,
            },
        )?;
    }
    Ok((low, high))
}

/// Every single-bounce echo (planes in input order), then every scatterer echo.
pub(super) fn echoes(
    input: &PlanInput<'_>,
    range_m: f64,
) -> Result<Vec<Echo, MAX_ECHOES>, PlanError> {
    let c = SPEED_OF_LIGHT_M_S;
    let mut echoes: Vec<Echo, MAX_ECHOES> = Vec::new();
    let mut add_echo = |source, path_m: f64, reflection, bounce_point| {
        echoes
            .push(Echo {
                source,
                path_m,
                delay_s: input.cable_delay_s + path_m / c,
                excess_delay_s: (path_m - range_m) / c,
                reflection,
                bounce_point,
            })
            .map_err(|_| PlanError::FindingsFull)
    };
    for (i, p) in input.planes.iter().enumerate() {
        add_echo(
            PathSource::Plane { index: i as u32 },
            p.bounce_path_m(&input.aut, &input.probe),
            p.reflection,
            p.bounce_point(&input.aut, &input.probe),
        )?;
    }
    for (i, s) in input.scatterers.iter().enumerate() {
        add_echo(
            PathSource::Scatterer { index: i as u32 },
            input.aut.distance_m(&s.position) + s.position.distance_m(&input.probe),
            s.reflection,
            None,
        )?;
    }
    Ok(echoes)
}

/// Index of the earliest echo (the first of equal ones).
pub(super) fn first_echo(echoes: &[Echo]) -> Option<usize> {
    let mut first_echo: Option<usize> = None;
    for (i, e) in echoes.iter().enumerate() {
        let earlier = match first_echo.and_then(|j| echoes.get(j)) {
            Some(f) => e.excess_delay_s < f.excess_delay_s,
            None => true,
        };
        if earlier {
            first_echo = Some(i);
        }
    }
    first_echo
}

/// The longest plausible path and its source: the direct path, every echo, every
/// second-order bounce between two planes (counted whether or not it can exist, a bound
/// on the safe side), and the configured longest path.
pub(super) fn longest_path(
    input: &PlanInput<'_>,
    range_m: f64,
    echoes: &[Echo],
) -> (f64, PathSource) {
    let mut longest_path_m = range_m;
    let mut longest_source = PathSource::Direct;
    let mut consider = |path_m: f64, source| {
        if path_m > longest_path_m {
            longest_path_m = path_m;
            longest_source = source;
        }
    };
    for e in echoes {
        consider(e.path_m, e.source);
    }
    for d in double_bounces(input.planes, &input.aut, &input.probe) {
        consider(
            d.path_m,
            PathSource::SecondOrder {
                first: d.first,
                second: d.second,
            },
        );
    }
    if let Some(l) = input.longest_path_m {
        consider(l, PathSource::Configured);
    }
    (longest_path_m, longest_source)
}

/// Pushes an `Aliased` finding for every path arriving at or beyond `alias_free_s`: the
/// direct path, the echoes, and the longest path when it is none of those. Returns whether
/// every path is alias-free.
pub(super) fn aliasing(
    direct_delay_s: f64,
    echoes: &[Echo],
    longest: (f64, PathSource),
    alias_free_s: f64,
    findings: &mut Findings,
) -> Result<bool, PlanError> {
    let (longest_delay_s, longest_source) = longest;
    let longest_is_echo = matches!(
        longest_source,
        PathSource::Direct | PathSource::Plane { .. } | PathSource::Scatterer { .. }
    );
    let direct = core::iter::once((PathSource::Direct, direct_delay_s));
    let echo_delays = echoes.iter().map(|e| (e.source, e.delay_s));
    let longest = (!longest_is_echo).then_some((longest_source, longest_delay_s));
    let mut all_alias_free = true;
    for (source, delay_s) in direct.chain(echo_delays).chain(longest) {
        if delay_s >= alias_free_s {
            all_alias_free = false;
            push(
                findings,
                Finding::Aliased {
                    source,
                    delay_s,
                    alias_free_s,
                },
            )?;
        }
    }
    Ok(all_alias_free)
}

/// The largest step keeping the longest path plus half a main lobe alias-free, and the
/// fewest points over the band with it; a `StepTooCoarse` finding when the sweep's step
/// is larger.
pub(super) fn step_limit(
    input: &PlanInput<'_>,
    longest_delay_s: f64,
    mainlobe_s: f64,
    findings: &mut Findings,
) -> Result<(f64, u32), PlanError> {
    let grid = &input.grid;
    let max_step_hz = 1.0 / (longest_delay_s + 0.5 * mainlobe_s);
    let min_points_f = libm::ceil(grid.span_hz() / max_step_hz - 1e-9) + 1.0;
    let min_points = if min_points_f >= u32::MAX as f64 {
        u32::MAX
    } else {
        min_points_f.max(2.0) as u32
    };
    if grid.step_hz() > max_step_hz {
        push(
            findings,
            Finding::StepTooCoarse {
                step_hz: grid.step_hz(),
                max_step_hz,
                min_points,
            },
        )?;
    }
    Ok((max_step_hz, min_points))
}

/// The recommended gate and the bandwidth needed to separate the first echo, with the
/// finding that explains a missing gate.
pub(super) fn gate_advice(
    input: &PlanInput<'_>,
    first: Option<&Echo>,
    direct_delay_s: f64,
    mainlobe_s: f64,
    findings: &mut Findings,
) -> Result<(Option<GateAdvice>, Option<f64>), PlanError> {
    let Some(first) = first else {
        push(findings, Finding::NoEchoes)?;
        return Ok((None, None));
    };
    let bandwidth_hz = input.grid.span_hz();
    let width = input.band_window.mainlobe_width();
    let alias_free_s = input.grid.alias_free_s();
    let excess = first.excess_delay_s;
    let needed = if excess > 0.0 {
        width / excess
    } else {
        f64::INFINITY
    };
    if excess < mainlobe_s {
        let not_separable = Finding::NotSeparable {
            excess_delay_s: excess,
            mainlobe_s,
            bandwidth_needed_hz: needed,
            kaiser_beta_that_separates: kaiser_beta_for_mainlobe(excess * bandwidth_hz),
        };
        push(findings, not_separable)?;
        return Ok((None, Some(needed)));
    }
    let span_s = 2.0 * (excess - 0.5 * mainlobe_s);
    if span_s >= alias_free_s {
        let beyond = Finding::GateBeyondAliasFree {
            span_s,
            alias_free_s,
        };
        push(findings, beyond)?;
        return Ok((None, Some(needed)));
    }
    let gate = GateAdvice {
        center_s: direct_delay_s,
        span_s,
        band_window: input.band_window,
    };
    Ok((Some(gate), Some(needed)))
}

/// The fastest rotation keeping the smear under half a bin, with a finding when the
/// planned speed is faster.
pub(super) fn rotation(input: &PlanInput<'_>, findings: &mut Findings) -> Result<f64, PlanError> {
    let max_rotation_deg_s = 0.5 * input.bin_step_deg / input.sweep_duration_s;
    if let Some(w) = input.rotation_deg_s {
        if w > max_rotation_deg_s {
            push(
                findings,
                Finding::RotationTooFast {
                    rotation_deg_s: w,
                    max_rotation_deg_s,
                },
            )?;
        }
    }
    Ok(max_rotation_deg_s)
}

/// The AUT's estimated ring-down when its fractional bandwidth is known, with a finding
/// when the gate closes before it.
pub(super) fn ring_down(
    input: &PlanInput<'_>,
    gate: Option<&GateAdvice>,
    findings: &mut Findings,
) -> Result<Option<f64>, PlanError> {
    let grid = &input.grid;
    let ring_down_s = input.aut_fractional_bandwidth.map(|fbw| {
        let f_centre = 0.5 * (grid.start_hz() + grid.stop_hz());
        RING_DOWN_FACTOR / (fbw * f_centre)
    });
    if let (Some(ring_down_s), Some(g)) = (ring_down_s, gate) {
        let gate_after_direct_s = 0.5 * g.span_s;
        if gate_after_direct_s < ring_down_s {
            push(
                findings,
                Finding::GateShorterThanRingDown {
                    gate_after_direct_s,
                    ring_down_s,
                },
            )?;
        }
    }
    Ok(ring_down_s)
}
