//! What the planner finds: which path a delay belongs to, and the findings, each of which
//! explains itself in one plain sentence through `Display`.

use core::fmt;

/// Which path a delay belongs to.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum PathSource {
    /// The direct path from AUT to probe.
    Direct,
    /// A single bounce off plane `index` of the input.
    Plane {
        /// Index into [`PlanInput::planes`](super::PlanInput::planes).
        index: u32,
    },
    /// The echo of scatterer `index` of the input.
    Scatterer {
        /// Index into [`PlanInput::scatterers`](super::PlanInput::scatterers).
        index: u32,
    },
    /// A second-order bounce: the probe imaged in plane `second`, then in plane `first`.
    SecondOrder {
        /// Plane nearer the AUT along the path.
        first: u32,
        /// Plane nearer the probe along the path.
        second: u32,
    },
    /// The longest path the user configured ([`PlanInput::longest_path_m`](super::PlanInput::longest_path_m)).
    Configured,
}

impl fmt::Display for PathSource {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::Direct => f.write_str("the direct path"),
            Self::Plane { index } => write!(f, "the echo off plane {index}"),
            Self::Scatterer { index } => write!(f, "the echo of scatterer {index}"),
            Self::SecondOrder { first, second } => {
                write!(f, "the double bounce off planes {first} and {second}")
            }
            Self::Configured => f.write_str("the configured longest path"),
        }
    }
}

/// Something the planner wants the user to know, with its numbers. `Display` gives one plain
/// sentence.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Finding {
    /// The range is shorter than the far-field distance 2D²/λ at the top frequency.
    BelowFarField {
        /// AUT-to-probe distance.
        range_m: f64,
        /// 2D²/λ at the top frequency.
        far_field_m: f64,
    },
    /// The range is not much larger than the antenna (R ≥ 10·D,
    /// [`FAR_FIELD_MUCH_GREATER`](super::FAR_FIELD_MUCH_GREATER)).
    NotFarFromAntenna {
        /// AUT-to-probe distance.
        range_m: f64,
        /// 10·D.
        needed_m: f64,
    },
    /// The range is not many wavelengths at the lowest frequency (R ≥ 10·λ,
    /// [`FAR_FIELD_MUCH_GREATER`](super::FAR_FIELD_MUCH_GREATER)).
    TooFewWavelengths {
        /// AUT-to-probe distance.
        range_m: f64,
        /// 10·λ at the lowest frequency.
        needed_m: f64,
        /// The lowest frequency.
        frequency_hz: f64,
    },
    /// No plane or scatterer was given, so there is no echo to gate out.
    NoEchoes,
    /// The first echo arrives inside the main lobes of the direct path: with this band
    /// window and bandwidth it cannot be gated out.
    NotSeparable {
        /// The first echo's delay after the direct path.
        excess_delay_s: f64,
        /// The band window's null-to-null main-lobe width in time.
        mainlobe_s: f64,
        /// Bandwidth the same window would need to separate it.
        bandwidth_needed_hz: f64,
        /// Largest Kaiser β that would separate it in the current band, if any.
        kaiser_beta_that_separates: Option<f32>,
    },
    /// A path arrives at or beyond the alias-free range 1/Δf and wraps around in delay.
    Aliased {
        /// Which path.
        source: PathSource,
        /// Its delay from the VNA's time zero.
        delay_s: f64,
        /// The alias-free range 1/Δf.
        alias_free_s: f64,
    },
    /// The frequency step is too coarse for the longest plausible path (plus half a main
    /// lobe); the step and point count that would keep it alias-free are given.
    StepTooCoarse {
        /// The step of the sweep.
        step_hz: f64,
        /// The largest step that keeps the longest path alias-free.
        max_step_hz: f64,
        /// The fewest points over the same band that do.
        min_points: u32,
    },
    /// The recommended gate would be as long as the alias-free range or longer.
    GateBeyondAliasFree {
        /// The span the first echo allows.
        span_s: f64,
        /// The alias-free range 1/Δf.
        alias_free_s: f64,
    },
    /// The gate closes before the AUT has rung down: it would cut the antenna's own
    /// response, not just the echoes.
    GateShorterThanRingDown {
        /// Gate time after the direct path (half the span).
        gate_after_direct_s: f64,
        /// Estimated ring-down ([`RING_DOWN_FACTOR`](super::RING_DOWN_FACTOR)).
        ring_down_s: f64,
    },
    /// The planned rotation smears more than half a bin during one sweep.
    RotationTooFast {
        /// The planned speed.
        rotation_deg_s: f64,
        /// The fastest speed keeping smear under half a bin.
        max_rotation_deg_s: f64,
    },
}

impl fmt::Display for Finding {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match *self {
            Self::BelowFarField {
                range_m,
                far_field_m,
            } => write!(
                f,
                "The range of {range_m:.3} m is shorter than the far-field distance 2D²/λ of \
                 {far_field_m:.3} m at the top frequency, so the pattern is measured in the near field."
            ),
            Self::NotFarFromAntenna { range_m, needed_m } => write!(
                f,
                "The range of {range_m:.3} m is not much larger than the antenna: the far field \
                 needs R ≫ D, taken as 10·D = {needed_m:.3} m."
            ),
            Self::TooFewWavelengths {
                range_m,
                needed_m,
                frequency_hz,
            } => write!(
                f,
                "The range of {range_m:.3} m is not many wavelengths at {:.3} MHz: the far \
                 field needs R ≫ λ, taken as 10·λ = {needed_m:.3} m.",
                frequency_hz / 1e6
            ),
            Self::NoEchoes => f.write_str(
                "No reflecting plane or scatterer was given, so there is no echo to gate out.",
            ),
            Self::NotSeparable {
                excess_delay_s,
                mainlobe_s,
                bandwidth_needed_hz,
                kaiser_beta_that_separates,
            } => not_separable(
                f,
                excess_delay_s,
                mainlobe_s,
                bandwidth_needed_hz,
                kaiser_beta_that_separates,
            ),
            Self::Aliased {
                source,
                delay_s,
                alias_free_s,
            } => aliased(f, source, delay_s, alias_free_s),
            Self::StepTooCoarse {
                step_hz,
                max_step_hz,
                min_points,
            } => write!(
                f,
                "The frequency step of {:.4} MHz is too coarse for the longest plausible path; \
                 use at most {:.4} MHz, that is at least {min_points} points over the same band.",
                step_hz * 1e-6,
                max_step_hz * 1e-6
            ),
            Self::GateBeyondAliasFree {
                span_s,
                alias_free_s,
            } => write!(
                f,
                "The gate the first echo allows ({:.3} ns) is not shorter than the alias-free \
                 range of {:.3} ns, so no gate is recommended; use a finer frequency step.",
                span_s * 1e9,
                alias_free_s * 1e9
            ),
            Self::GateShorterThanRingDown {
                gate_after_direct_s,
                ring_down_s,
            } => ring_down(f, gate_after_direct_s, ring_down_s),
            Self::RotationTooFast {
                rotation_deg_s,
                max_rotation_deg_s,
            } => write!(
                f,
                "Turning at {rotation_deg_s:.3} deg/s smears each sweep over more than half a \
                 bin; turn at most {max_rotation_deg_s:.3} deg/s."
            ),
        }
    }
}

fn not_separable(
    f: &mut fmt::Formatter<'_>,
    excess_delay_s: f64,
    mainlobe_s: f64,
    bandwidth_needed_hz: f64,
    kaiser_beta_that_separates: Option<f32>,
) -> fmt::Result {
    write!(
        f,
        "The first echo arrives {:.3} ns after the direct path, inside the {:.3} ns \
         main lobe of this band window, so it cannot be gated out; the same window \
         needs {:.3} GHz of bandwidth",
        excess_delay_s * 1e9,
        mainlobe_s * 1e9,
        bandwidth_needed_hz * 1e-9
    )?;
    match kaiser_beta_that_separates {
        Some(b) => write!(f, ", or use a Kaiser window with β at most {b:.2}."),
        None => f.write_str(", and no window separates it in this band."),
    }
}

fn aliased(
    f: &mut fmt::Formatter<'_>,
    source: PathSource,
    delay_s: f64,
    alias_free_s: f64,
) -> fmt::Result {
    write!(
        f,
        "At {:.3} ns, {source} arrives beyond the alias-free range of {:.3} ns, so it \
         wraps around and lands at {:.3} ns.",
        delay_s * 1e9,
        alias_free_s * 1e9,
        libm::fmod(delay_s, alias_free_s) * 1e9
    )
}

fn ring_down(
    f: &mut fmt::Formatter<'_>,
    gate_after_direct_s: f64,
    ring_down_s: f64,
) -> fmt::Result {
    write!(
        f,
        "The gate closes {:.3} ns after the direct path, before the AUT's estimated \
         ring-down of {:.3} ns, so it would cut the antenna's own response.",
        gate_after_direct_s * 1e9,
        ring_down_s * 1e9
    )
}
