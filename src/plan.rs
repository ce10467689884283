//! Range geometry to path delays, echo arrivals, far-field distance, sweep and gate settings.
//!
//! Geometry convention (shared by the planner and the host's room simulator): the AUT's
//! turntable axis is vertical through the origin, x points from the AUT to the probe
//! (range antenna), y to the left looking from the AUT to the probe, z up from the floor
//! (z = 0). Reflecting planes are axis-aligned; echoes follow the image method.
//!
//! The planner ([`plan`]) takes a [`PlanInput`] (band, AUT size, geometry, window, bin step,
//! sweep duration) and returns a [`Plan`]: every figure it computed plus a list of
//! [`Finding`]s, each of which explains itself in one plain sentence through `Display`.
//! All delays are from the VNA's time zero, so they include the cable delay offset.
//!
//! The planner's output concerns the set-up only. A transmitting AUT or probe can exceed RF
//! exposure limits near its aperture, and the positioner is moving machinery: follow local
//! regulations and the lab's licensed practice.

use crate::error::PlanError;
use crate::grid::Grid;
use crate::window::{WindowKind, MAX_KAISER_BETA};
use core::f64::consts::PI;
use core::fmt;
use heapless::Vec;

/// Speed of light in vacuum, m/s (SI definition, exact).
pub const SPEED_OF_LIGHT_M_S: f64 = 299_792_458.0;

/// A point in the range, metres.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Point {
    /// Towards the probe.
    pub x_m: f64,
    /// To the left, looking from AUT to probe.
    pub y_m: f64,
    /// Up from the floor.
    pub z_m: f64,
}

impl Point {
    /// A point from its coordinates.
    pub const fn new(x_m: f64, y_m: f64, z_m: f64) -> Self {
        Self { x_m, y_m, z_m }
    }

    /// Straight-line distance to `other`.
    pub fn distance_m(&self, other: &Point) -> f64 {
        let (dx, dy, dz) = (
            other.x_m - self.x_m,
            other.y_m - self.y_m,
            other.z_m - self.z_m,
        );
        libm::sqrt(dx * dx + dy * dy + dz * dz)
    }
}

/// The axis a reflecting plane is perpendicular to.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Axis {
    /// A wall across the range (behind the AUT or behind the probe): x = const.
    X,
    /// A side wall: y = const.
    Y,
    /// Floor or ceiling: z = const.
    Z,
}

/// An infinite, axis-aligned reflecting plane.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Plane {
    /// Which coordinate is constant on the plane.
    pub axis: Axis,
    /// Value of that coordinate, metres.
    pub position_m: f64,
    /// Field reflection coefficient (real, −1…1; −1 is a perfect conductor for the
    /// polarization parallel to the plane).
    pub reflection: f64,
}

impl Plane {
    /// Mirror image of `p` in this plane.
    pub fn image_of(&self, p: &Point) -> Point {
        let mut q = *p;
        match self.axis {
            Axis::X => q.x_m = 2.0 * self.position_m - p.x_m,
            Axis::Y => q.y_m = 2.0 * self.position_m - p.y_m,
            Axis::Z => q.z_m = 2.0 * self.position_m - p.z_m,
        }
        q
    }

    /// Length of the single-bounce path from `a` via this plane to `b` (image method):
    /// the distance from `a` to the image of `b`.
    pub fn bounce_path_m(&self, a: &Point, b: &Point) -> f64 {
        a.distance_m(&self.image_of(b))
    }

    /// Where the single-bounce path from `a` to `b` meets the plane, or `None` when both
    /// points are not strictly on the same side of it (no specular bounce exists).
    pub fn bounce_point(&self, a: &Point, b: &Point) -> Option<Point> {
        let c = |p: &Point| match self.axis {
            Axis::X => p.x_m,
            Axis::Y => p.y_m,
            Axis::Z => p.z_m,
        };
        let (da, db) = (c(a) - self.position_m, c(b) - self.position_m);
        if da * db <= 0.0 {
            return None;
        }
        let img = self.image_of(b);
        let t = da / (da + db);
        Some(Point::new(
            a.x_m + t * (img.x_m - a.x_m),
            a.y_m + t * (img.y_m - a.y_m),
            a.z_m + t * (img.z_m - a.z_m),
        ))
    }
}

/// Most reflecting planes the planner takes.
pub const MAX_PLANES: usize = 8;
/// Most point scatterers the planner takes.
pub const MAX_SCATTERERS: usize = 8;
/// Most echoes in a plan: one single bounce per plane plus one per scatterer.
pub const MAX_ECHOES: usize = MAX_PLANES + MAX_SCATTERERS;
/// Capacity of the findings list: room for one aliasing finding per path plus every other
/// kind of finding at once.
pub const MAX_FINDINGS: usize = MAX_ECHOES + 12;

/// Ring-down estimate factor k in t_ring ≈ k / (fractional bandwidth · f_centre).
///
/// Model: the AUT as a single resonance with Q ≈ 1/(fractional bandwidth); its field
/// envelope decays with time constant Q/(π·f), so it falls by 40 dB (a factor 100) after
/// ln(100)·Q/(π·f) ≈ 1.466/(FBW·f). Common practice, no source: a rough estimate for
/// resonant antennas; wideband antennas (horns, spirals) ring down faster than this says
/// only if their fractional bandwidth is given as the true, large value.
pub const RING_DOWN_FACTOR: f64 = 1.465_871_197_758_855_7; // ln(100)/π

/// A point scatterer (mast, fixture, cable tray): its echo path is |AUT − S| + |S − probe|.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Scatterer {
    /// Where it is.
    pub position: Point,
    /// Field reflection coefficient relative to the direct path (used for reporting only).
    pub reflection: f64,
}

/// Which path a delay belongs to.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum PathSource {
    /// The direct path from AUT to probe.
    Direct,
    /// A single bounce off plane `index` of the input.
    Plane {
        /// Index into [`PlanInput::planes`].
        index: u32,
    },
    /// The echo of scatterer `index` of the input.
    Scatterer {
        /// Index into [`PlanInput::scatterers`].
        index: u32,
    },
    /// A second-order bounce: the probe imaged in plane `second`, then in plane `first`.
    SecondOrder {
        /// Plane nearer the AUT along the path.
        first: u32,
        /// Plane nearer the probe along the path.
        second: u32,
    },
    /// The longest path the user configured ([`PlanInput::longest_path_m`]).
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

/// One echo path with its delays.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Echo {
    /// The plane or scatterer that makes it.
    pub source: PathSource,
    /// Path length AUT → reflector → probe.
    pub path_m: f64,
    /// Arrival from the VNA's time zero (includes the cable delay).
    pub delay_s: f64,
    /// Arrival after the direct path.
    pub excess_delay_s: f64,
    /// The reflector's field reflection coefficient as given.
    pub reflection: f64,
    /// Where a plane echo meets its plane (`None` for scatterers).
    pub bounce_point: Option<Point>,
}

/// Everything the planner needs, as plain values a host command can fill from a file.
///
/// ```
/// use sweepgate::grid::Grid;
/// use sweepgate::plan::{plan, Axis, Plane, PlanInput, Point};
/// use sweepgate::window::WindowKind;
/// let floor = [Plane { axis: Axis::Z, position_m: 0.0, reflection: -0.6 }];
/// let input = PlanInput {
///     grid: Grid::from_start_stop(2e9, 18e9, 801).unwrap(),
///     aut_size_m: 0.1,
///     aut: Point::new(0.0, 0.0, 1.5),
///     probe: Point::new(6.0, 0.0, 1.5),
///     planes: &floor,
///     scatterers: &[],
///     band_window: WindowKind::Kaiser { beta: 6.0 },
///     bin_step_deg: 1.0,
///     sweep_duration_s: 0.05,
///     cable_delay_s: 0.0,
///     aut_fractional_bandwidth: None,
///     longest_path_m: None,
///     rotation_deg_s: None,
/// };
/// let p = plan(&input).unwrap();
/// let gate = p.gate.unwrap();
/// assert!((gate.center_s - 6.0 / 299_792_458.0).abs() < 1e-15);
/// assert!((p.max_rotation_deg_s - 10.0).abs() < 1e-12);
/// for finding in &p.findings {
///     let _sentence = format!("{finding}");
/// }
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct PlanInput<'a> {
    /// The sweep: band and points.
    pub grid: Grid,
    /// The AUT's largest dimension D (for the far-field distance 2D²/λ).
    pub aut_size_m: f64,
    /// The AUT's phase centre (on the turntable axis).
    pub aut: Point,
    /// The probe's phase centre.
    pub probe: Point,
    /// Reflecting planes (floor, walls, ceiling), at most [`MAX_PLANES`].
    pub planes: &'a [Plane],
    /// Point scatterers, at most [`MAX_SCATTERERS`].
    pub scatterers: &'a [Scatterer],
    /// The band window applied before the inverse transform.
    pub band_window: WindowKind,
    /// Angle bin step.
    pub bin_step_deg: f64,
    /// Time one sweep takes.
    pub sweep_duration_s: f64,
    /// Delay offset between the VNA's time zero and the antenna ports (cables, adapters),
    /// added to every path delay. 0 when the reference plane is at the antennas.
    pub cable_delay_s: f64,
    /// The AUT's own fractional bandwidth (bandwidth / centre frequency), for the ring-down
    /// check; `None` skips it.
    pub aut_fractional_bandwidth: Option<f64>,
    /// The room's longest plausible path, if known (for the alias-free check); the planner
    /// also considers every echo and every second-order bounce between the planes.
    pub longest_path_m: Option<f64>,
    /// The rotation speed the user plans, if any, checked against the fastest allowed.
    pub rotation_deg_s: Option<f64>,
}

/// A recommended time gate.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct GateAdvice {
    /// Gate centre from the VNA's time zero: the direct-path delay.
    pub center_s: f64,
    /// Gate span (full width): the gate closes half a main lobe before the first echo.
    pub span_s: f64,
    /// The band window the span was computed for.
    pub band_window: WindowKind,
}

impl GateAdvice {
    /// Where the gate opens.
    pub fn start_s(&self) -> f64 {
        self.center_s - 0.5 * self.span_s
    }

    /// Where the gate closes.
    pub fn stop_s(&self) -> f64 {
        self.center_s + 0.5 * self.span_s
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
        /// Estimated ring-down ([`RING_DOWN_FACTOR`]).
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
            Self::NoEchoes => f.write_str(
                "No reflecting plane or scatterer was given, so there is no echo to gate out.",
            ),
            Self::NotSeparable {
                excess_delay_s,
                mainlobe_s,
                bandwidth_needed_hz,
                kaiser_beta_that_separates,
            } => {
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
            Self::Aliased {
                source,
                delay_s,
                alias_free_s,
            } => write!(
                f,
                "At {:.3} ns, {source} arrives beyond the alias-free range of {:.3} ns, so it \
                 wraps around and lands at {:.3} ns.",
                delay_s * 1e9,
                alias_free_s * 1e9,
                libm::fmod(delay_s, alias_free_s) * 1e9
            ),
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
            } => write!(
                f,
                "The gate closes {:.3} ns after the direct path, before the AUT's estimated \
                 ring-down of {:.3} ns, so it would cut the antenna's own response.",
                gate_after_direct_s * 1e9,
                ring_down_s * 1e9
            ),
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

/// The planner's result: every figure, and the findings about them.
#[derive(Debug, Clone, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Plan {
    /// Wavelength at the top frequency.
    pub top_wavelength_m: f64,
    /// Far-field distance 2D²/λ at the top frequency (Federal Standard 1037C; IEEE Std 149).
    pub far_field_m: f64,
    /// AUT-to-probe distance.
    pub range_m: f64,
    /// Whether the range is at least the far-field distance.
    pub meets_far_field: bool,
    /// Direct-path delay from the VNA's time zero (cable delay included).
    pub direct_delay_s: f64,
    /// Every single-bounce and scatterer echo, in input order (planes, then scatterers).
    pub echoes: Vec<Echo, MAX_ECHOES>,
    /// Index into `echoes` of the earliest echo.
    pub first_echo: Option<usize>,
    /// Swept bandwidth B = (K − 1)·Δf.
    pub bandwidth_hz: f64,
    /// Nominal time resolution 1/B.
    pub resolution_s: f64,
    /// Null-to-null main-lobe width with the band window: mainlobe_width()/B.
    pub mainlobe_s: f64,
    /// Alias-free range 1/Δf.
    pub alias_free_s: f64,
    /// Longest plausible path: every echo, every second-order bounce, the configured path.
    pub longest_path_m: f64,
    /// Its delay from the VNA's time zero.
    pub longest_delay_s: f64,
    /// Which path it is.
    pub longest_source: PathSource,
    /// Whether every path (direct, echoes, longest plausible) arrives before 1/Δf.
    pub all_alias_free: bool,
    /// Largest step keeping the longest path plus half a main lobe inside 1/Δf.
    pub max_step_hz: f64,
    /// Fewest points over the same band with a step of at most `max_step_hz`.
    pub min_points: u32,
    /// Recommended gate, when the first echo can be separated.
    pub gate: Option<GateAdvice>,
    /// Bandwidth the band window needs to separate the first echo (main lobe ≤ excess delay).
    pub bandwidth_needed_hz: Option<f64>,
    /// Fastest rotation keeping smear under half a bin for one sweep: 0.5·bin / sweep time.
    pub max_rotation_deg_s: f64,
    /// Estimated AUT ring-down, when its fractional bandwidth was given.
    pub ring_down_s: Option<f64>,
    /// Findings, in the order the checks ran.
    pub findings: Vec<Finding, MAX_FINDINGS>,
}

fn finite_point(p: &Point) -> bool {
    p.x_m.is_finite() && p.y_m.is_finite() && p.z_m.is_finite()
}

fn positive(x: f64) -> bool {
    x.is_finite() && x > 0.0
}

fn push(findings: &mut Vec<Finding, MAX_FINDINGS>, f: Finding) -> Result<(), PlanError> {
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

fn validate(input: &PlanInput<'_>) -> Result<(), PlanError> {
    if !finite_point(&input.aut) || !finite_point(&input.probe) {
        return Err(PlanError::NonFinitePoint);
    }
    if input.aut.distance_m(&input.probe) <= 0.0 {
        return Err(PlanError::AntennasCoincide);
    }
    if !positive(input.aut_size_m) {
        return Err(PlanError::AutSize);
    }
    if !positive(input.bin_step_deg) {
        return Err(PlanError::BinStep);
    }
    if !positive(input.sweep_duration_s) {
        return Err(PlanError::SweepDuration);
    }
    if !(input.cable_delay_s.is_finite() && input.cable_delay_s >= 0.0) {
        return Err(PlanError::CableDelay);
    }
    if let Some(fbw) = input.aut_fractional_bandwidth {
        if !(positive(fbw) && fbw <= 2.0) {
            return Err(PlanError::FractionalBandwidth);
        }
    }
    if let Some(l) = input.longest_path_m {
        if !positive(l) {
            return Err(PlanError::LongestPath);
        }
    }
    if let Some(w) = input.rotation_deg_s {
        if !positive(w) {
            return Err(PlanError::RotationSpeed);
        }
    }
    input
        .band_window
        .validate()
        .map_err(PlanError::BandWindow)?;
    if input.planes.len() > MAX_PLANES {
        return Err(PlanError::TooManyPlanes {
            given: u32::try_from(input.planes.len()).unwrap_or(u32::MAX),
        });
    }
    if input.scatterers.len() > MAX_SCATTERERS {
        return Err(PlanError::TooManyScatterers {
            given: u32::try_from(input.scatterers.len()).unwrap_or(u32::MAX),
        });
    }
    for (i, p) in input.planes.iter().enumerate() {
        let index = i as u32;
        if !p.position_m.is_finite() || !p.reflection.is_finite() {
            return Err(PlanError::NonFinitePlane { index });
        }
        if p.bounce_point(&input.aut, &input.probe).is_none() {
            return Err(PlanError::PlaneBetweenAntennas { index });
        }
    }
    for (i, s) in input.scatterers.iter().enumerate() {
        if !finite_point(&s.position) || !s.reflection.is_finite() {
            return Err(PlanError::NonFiniteScatterer { index: i as u32 });
        }
    }
    Ok(())
}

/// Plans a gated measurement: far field, path delays, resolution, aliasing, gate, rotation
/// speed and ring-down, with a finding for every problem. See [`PlanInput`] for an example.
///
/// Criteria (stated so they can be checked by hand):
/// - far field: range ≥ 2D²/λ at the top frequency;
/// - separable: the first echo's excess delay is at least the band window's null-to-null
///   main lobe w = mainlobe_width()/B, so the gate (centred on the direct path, closing w/2
///   before the first echo) still holds the direct path's whole main lobe; the gate span is
///   then 2·(excess − w/2); otherwise the bandwidth needed is mainlobe_width()/excess;
/// - aliased: a path's delay from the VNA's time zero is at least 1/Δf; the largest step is
///   1/(longest delay + w/2), so the echo's main lobe does not wrap either;
/// - rotation: at most 0.5·bin step / sweep duration;
/// - ring-down: [`RING_DOWN_FACTOR`]/(FBW·f_centre), f_centre the band centre, compared with
///   the gate time after the direct path (half the span).
pub fn plan(input: &PlanInput<'_>) -> Result<Plan, PlanError> {
    validate(input)?;
    let c = SPEED_OF_LIGHT_M_S;
    let grid = &input.grid;
    let mut findings: Vec<Finding, MAX_FINDINGS> = Vec::new();

    // Far field.
    let top_wavelength_m = c / grid.stop_hz();
    let d = input.aut_size_m;
    let far_field_m = 2.0 * d * d / top_wavelength_m;
    let range_m = input.aut.distance_m(&input.probe);
    let meets_far_field = range_m >= far_field_m;
    if !meets_far_field {
        push(
            &mut findings,
            Finding::BelowFarField {
                range_m,
                far_field_m,
            },
        )?;
    }

    // Paths.
    let direct_delay_s = input.cable_delay_s + range_m / c;
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

    // Resolution.
    let bandwidth_hz = grid.span_hz();
    let resolution_s = 1.0 / bandwidth_hz;
    let width = input.band_window.mainlobe_width();
    let mainlobe_s = width / bandwidth_hz;

    // Longest plausible path and aliasing.
    let alias_free_s = grid.alias_free_s();
    let mut longest_path_m = range_m;
    let mut longest_source = PathSource::Direct;
    let mut consider = |path_m: f64, source| {
        if path_m > longest_path_m {
            longest_path_m = path_m;
            longest_source = source;
        }
    };
    for e in echoes.iter() {
        consider(e.path_m, e.source);
    }
    for (i, pi) in input.planes.iter().enumerate() {
        for (j, pj) in input.planes.iter().enumerate() {
            if i != j {
                let image = pi.image_of(&pj.image_of(&input.probe));
                consider(
                    input.aut.distance_m(&image),
                    PathSource::SecondOrder {
                        first: i as u32,
                        second: j as u32,
                    },
                );
            }
        }
    }
    if let Some(l) = input.longest_path_m {
        consider(l, PathSource::Configured);
    }
    let longest_delay_s = input.cable_delay_s + longest_path_m / c;

    let mut all_alias_free = true;
    if direct_delay_s >= alias_free_s {
        all_alias_free = false;
        push(
            &mut findings,
            Finding::Aliased {
                source: PathSource::Direct,
                delay_s: direct_delay_s,
                alias_free_s,
            },
        )?;
    }
    for e in echoes.iter() {
        if e.delay_s >= alias_free_s {
            all_alias_free = false;
            push(
                &mut findings,
                Finding::Aliased {
                    source: e.source,
                    delay_s: e.delay_s,
                    alias_free_s,
                },
            )?;
        }
    }
    let longest_is_echo = matches!(
        longest_source,
        PathSource::Direct | PathSource::Plane { .. } | PathSource::Scatterer { .. }
    );
    if !longest_is_echo && longest_delay_s >= alias_free_s {
        all_alias_free = false;
        push(
            &mut findings,
            Finding::Aliased {
                source: longest_source,
                delay_s: longest_delay_s,
                alias_free_s,
            },
        )?;
    }
    let max_step_hz = 1.0 / (longest_delay_s + 0.5 * mainlobe_s);
    let min_points_f = libm::ceil(bandwidth_hz / max_step_hz - 1e-9) + 1.0;
    let min_points = if min_points_f >= u32::MAX as f64 {
        u32::MAX
    } else {
        min_points_f.max(2.0) as u32
    };
    if grid.step_hz() > max_step_hz {
        push(
            &mut findings,
            Finding::StepTooCoarse {
                step_hz: grid.step_hz(),
                max_step_hz,
                min_points,
            },
        )?;
    }

    // Gate.
    let mut gate = None;
    let mut bandwidth_needed_hz = None;
    match first_echo.and_then(|i| echoes.get(i)) {
        None => push(&mut findings, Finding::NoEchoes)?,
        Some(first) => {
            let excess = first.excess_delay_s;
            let needed = if excess > 0.0 {
                width / excess
            } else {
                f64::INFINITY
            };
            bandwidth_needed_hz = Some(needed);
            if excess < mainlobe_s {
                push(
                    &mut findings,
                    Finding::NotSeparable {
                        excess_delay_s: excess,
                        mainlobe_s,
                        bandwidth_needed_hz: needed,
                        kaiser_beta_that_separates: kaiser_beta_for_mainlobe(excess * bandwidth_hz),
                    },
                )?;
            } else {
                let span_s = 2.0 * (excess - 0.5 * mainlobe_s);
                if span_s >= alias_free_s {
                    push(
                        &mut findings,
                        Finding::GateBeyondAliasFree {
                            span_s,
                            alias_free_s,
                        },
                    )?;
                } else {
                    gate = Some(GateAdvice {
                        center_s: direct_delay_s,
                        span_s,
                        band_window: input.band_window,
                    });
                }
            }
        }
    }

    // Rotation.
    let max_rotation_deg_s = 0.5 * input.bin_step_deg / input.sweep_duration_s;
    if let Some(w) = input.rotation_deg_s {
        if w > max_rotation_deg_s {
            push(
                &mut findings,
                Finding::RotationTooFast {
                    rotation_deg_s: w,
                    max_rotation_deg_s,
                },
            )?;
        }
    }

    // Ring-down.
    let ring_down_s = input.aut_fractional_bandwidth.map(|fbw| {
        let f_centre = 0.5 * (grid.start_hz() + grid.stop_hz());
        RING_DOWN_FACTOR / (fbw * f_centre)
    });
    if let (Some(ring_down_s), Some(g)) = (ring_down_s, gate) {
        let gate_after_direct_s = 0.5 * g.span_s;
        if gate_after_direct_s < ring_down_s {
            push(
                &mut findings,
                Finding::GateShorterThanRingDown {
                    gate_after_direct_s,
                    ring_down_s,
                },
            )?;
        }
    }

    Ok(Plan {
        top_wavelength_m,
        far_field_m,
        range_m,
        meets_far_field,
        direct_delay_s,
        echoes,
        first_echo,
        bandwidth_hz,
        resolution_s,
        mainlobe_s,
        alias_free_s,
        longest_path_m,
        longest_delay_s,
        longest_source,
        all_alias_free,
        max_step_hz,
        min_points,
        gate,
        bandwidth_needed_hz,
        max_rotation_deg_s,
        ring_down_s,
        findings,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn floor_bounce_matches_closed_form() {
        // Image method, equal heights h over range R: path √(R² + (2h)²)
        // (common practice, no source).
        let (r, h) = (7.0, 1.6);
        let floor = Plane {
            axis: Axis::Z,
            position_m: 0.0,
            reflection: -0.5,
        };
        let a = Point::new(0.0, 0.0, h);
        let b = Point::new(r, 0.0, h);
        let want = libm::sqrt(r * r + 4.0 * h * h);
        assert!((floor.bounce_path_m(&a, &b) - want).abs() < 1e-12);
        let p = floor.bounce_point(&a, &b).unwrap();
        assert!((p.x_m - r / 2.0).abs() < 1e-12 && p.z_m.abs() < 1e-12);
        let wall_between = Plane {
            axis: Axis::X,
            position_m: 3.0,
            reflection: 0.3,
        };
        assert_eq!(wall_between.bounce_point(&a, &b), None);
    }

    fn base<'a>(planes: &'a [Plane], scatterers: &'a [Scatterer]) -> PlanInput<'a> {
        PlanInput {
            grid: Grid::from_start_stop(2e9, 18e9, 801).unwrap(),
            aut_size_m: 0.1,
            aut: Point::new(0.0, 0.0, 1.5),
            probe: Point::new(6.0, 0.0, 1.5),
            planes,
            scatterers,
            band_window: WindowKind::Hann,
            bin_step_deg: 1.0,
            sweep_duration_s: 0.05,
            cable_delay_s: 0.0,
            aut_fractional_bandwidth: None,
            longest_path_m: None,
            rotation_deg_s: None,
        }
    }

    #[test]
    fn rejects_each_bad_input() {
        let floor = Plane {
            axis: Axis::Z,
            position_m: 0.0,
            reflection: -0.5,
        };
        let e = |i: PlanInput<'_>| plan(&i).unwrap_err();
        let mut i = base(&[], &[]);
        i.aut.x_m = f64::NAN;
        assert_eq!(e(i), PlanError::NonFinitePoint);
        let mut i = base(&[], &[]);
        i.probe = i.aut;
        assert_eq!(e(i), PlanError::AntennasCoincide);
        let mut i = base(&[], &[]);
        i.aut_size_m = 0.0;
        assert_eq!(e(i), PlanError::AutSize);
        let mut i = base(&[], &[]);
        i.bin_step_deg = -1.0;
        assert_eq!(e(i), PlanError::BinStep);
        let mut i = base(&[], &[]);
        i.sweep_duration_s = f64::INFINITY;
        assert_eq!(e(i), PlanError::SweepDuration);
        let mut i = base(&[], &[]);
        i.cable_delay_s = -1e-9;
        assert_eq!(e(i), PlanError::CableDelay);
        let mut i = base(&[], &[]);
        i.aut_fractional_bandwidth = Some(3.0);
        assert_eq!(e(i), PlanError::FractionalBandwidth);
        let mut i = base(&[], &[]);
        i.longest_path_m = Some(0.0);
        assert_eq!(e(i), PlanError::LongestPath);
        let mut i = base(&[], &[]);
        i.rotation_deg_s = Some(f64::NAN);
        assert_eq!(e(i), PlanError::RotationSpeed);
        let mut i = base(&[], &[]);
        i.band_window = WindowKind::Kaiser { beta: -1.0 };
        assert!(matches!(e(i), PlanError::BandWindow(_)));
        let many = [floor; MAX_PLANES + 1];
        assert_eq!(
            e(base(&many, &[])),
            PlanError::TooManyPlanes {
                given: MAX_PLANES as u32 + 1
            }
        );
        let s = Scatterer {
            position: Point::new(1.0, 1.0, 1.0),
            reflection: 0.1,
        };
        let many_s = [s; MAX_SCATTERERS + 1];
        assert_eq!(
            e(base(&[], &many_s)),
            PlanError::TooManyScatterers {
                given: MAX_SCATTERERS as u32 + 1
            }
        );
        let bad = [
            floor,
            Plane {
                position_m: f64::NAN,
                ..floor
            },
        ];
        assert_eq!(e(base(&bad, &[])), PlanError::NonFinitePlane { index: 1 });
        let between = [Plane {
            axis: Axis::X,
            position_m: 3.0,
            reflection: 0.3,
        }];
        assert_eq!(
            e(base(&between, &[])),
            PlanError::PlaneBetweenAntennas { index: 0 }
        );
        let bad_s = [Scatterer {
            reflection: f64::NAN,
            ..s
        }];
        assert_eq!(
            e(base(&[], &bad_s)),
            PlanError::NonFiniteScatterer { index: 0 }
        );
    }

    #[test]
    fn full_capacity_fits() {
        // Every plane and scatterer at once, all aliased: the findings list still fits.
        let planes: [Plane; MAX_PLANES] = core::array::from_fn(|k| Plane {
            axis: Axis::Y,
            position_m: 1.0 + k as f64,
            reflection: 0.1,
        });
        let s: [Scatterer; MAX_SCATTERERS] = core::array::from_fn(|k| Scatterer {
            position: Point::new(50.0 + k as f64, 3.0, 1.0),
            reflection: 0.1,
        });
        let mut i = base(&planes, &s);
        i.grid = Grid::from_start_stop(2e9, 3e9, 3).unwrap();
        i.cable_delay_s = 1e-6;
        i.rotation_deg_s = Some(1e3);
        i.aut_size_m = 5.0;
        i.longest_path_m = Some(1e4);
        let p = plan(&i).unwrap();
        assert_eq!(p.echoes.len(), MAX_ECHOES);
        assert!(p.findings.len() > MAX_ECHOES);
    }

    #[test]
    fn no_echoes_is_reported() {
        let p = plan(&base(&[], &[])).unwrap();
        assert!(p.gate.is_none() && p.first_echo.is_none());
        assert!(p.findings.contains(&Finding::NoEchoes));
    }
}
