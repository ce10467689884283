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
//!
//! Files: `geometry.rs` (points, planes, scatterers and the image-method paths the host's
//! room simulator shares), `finding.rs` (path sources and findings with their sentences),
//! `steps.rs` (the planner's steps in the order it runs them), and here the input, the
//! result and [`plan`] itself.

mod finding;
mod geometry;
mod steps;

pub use finding::{Finding, PathSource};
pub use geometry::{
    double_bounces, scatterer_echo_per_m, Axis, DoubleBounce, Plane, Point, Scatterer,
    SPEED_OF_LIGHT_M_S,
};

use crate::error::PlanError;
use crate::grid::Grid;
use crate::window::WindowKind;
use heapless::Vec;

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

/// The factor read into "≫" in the far-field conditions R ≫ D and R ≫ λ: R ≥ 10·D and
/// R ≥ 10·λ. The three conditions (R ≥ 2D²/λ, R ≫ D, R ≫ λ) are those of C. A. Balanis,
/// *Antenna Theory*, 4th ed., §2.2.4 (and IEEE Std 149 for 2D²/λ); the factor 10 for "≫" is
/// common practice, no source.
pub const FAR_FIELD_MUCH_GREATER: f64 = 10.0;

/// The far-field conditions at one frequency.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct FarFieldCheck {
    /// The frequency checked.
    pub frequency_hz: f64,
    /// Its wavelength.
    pub wavelength_m: f64,
    /// 2D²/λ (phase error ≤ π/8 across the aperture).
    pub rayleigh_m: f64,
    /// [`FAR_FIELD_MUCH_GREATER`]·D (R ≫ D: amplitude and angle errors of the near terms).
    pub size_m: f64,
    /// [`FAR_FIELD_MUCH_GREATER`]·λ (R ≫ λ: reactive near field gone).
    pub wavelengths_m: f64,
    /// Whether the range meets all three.
    pub met: bool,
}

impl FarFieldCheck {
    /// The three conditions for an antenna of largest dimension `aut_size_m` at `range_m`.
    pub fn at(frequency_hz: f64, aut_size_m: f64, range_m: f64) -> Self {
        let wavelength_m = SPEED_OF_LIGHT_M_S / frequency_hz;
        let rayleigh_m = 2.0 * aut_size_m * aut_size_m / wavelength_m;
        let size_m = FAR_FIELD_MUCH_GREATER * aut_size_m;
        let wavelengths_m = FAR_FIELD_MUCH_GREATER * wavelength_m;
        Self {
            frequency_hz,
            wavelength_m,
            rayleigh_m,
            size_m,
            wavelengths_m,
            met: range_m >= rayleigh_m && range_m >= size_m && range_m >= wavelengths_m,
        }
    }

    /// The largest of the three distances: the range this frequency needs.
    pub fn needed_m(&self) -> f64 {
        self.rayleigh_m.max(self.size_m).max(self.wavelengths_m)
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
    /// Whether the range meets every far-field condition ([`FarFieldCheck`]) at both the
    /// lowest and the highest frequency.
    pub meets_far_field: bool,
    /// The far-field conditions at the lowest frequency (where R ≫ λ is hardest).
    pub far_field_low: FarFieldCheck,
    /// The far-field conditions at the highest frequency (where R ≥ 2D²/λ is hardest).
    pub far_field_high: FarFieldCheck,
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
/// - far field: range ≥ 2D²/λ, range ≥ 10·D and range ≥ 10·λ, each at the lowest and the
///   highest frequency ([`FarFieldCheck`], [`FAR_FIELD_MUCH_GREATER`]);
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
    let mut findings = steps::Findings::new();
    let (far_field_low, far_field_high) = steps::far_field(input, &mut findings)?;
    let range_m = input.aut.distance_m(&input.probe);
    let top_wavelength_m = far_field_high.wavelength_m;
    let far_field_m = far_field_high.rayleigh_m;
    let meets_far_field = far_field_low.met && far_field_high.met;

    let direct_delay_s = input.cable_delay_s + range_m / c;
    let echoes = steps::echoes(input, range_m)?;
    let first_echo = steps::first_echo(&echoes);

    let bandwidth_hz = grid.span_hz();
    let resolution_s = 1.0 / bandwidth_hz;
    let mainlobe_s = input.band_window.mainlobe_width() / bandwidth_hz;

    let alias_free_s = grid.alias_free_s();
    let (longest_path_m, longest_source) = steps::longest_path(input, range_m, &echoes);
    let longest_delay_s = input.cable_delay_s + longest_path_m / c;
    let all_alias_free = steps::aliasing(
        direct_delay_s,
        &echoes,
        (longest_delay_s, longest_source),
        alias_free_s,
        &mut findings,
    )?;
    let (max_step_hz, min_points) =
        steps::step_limit(input, longest_delay_s, mainlobe_s, &mut findings)?;

    let first = first_echo.and_then(|i| echoes.get(i));
    let (gate, bandwidth_needed_hz) =
        steps::gate_advice(input, first, direct_delay_s, mainlobe_s, &mut findings)?;
    let max_rotation_deg_s = steps::rotation(input, &mut findings)?;
    let ring_down_s = steps::ring_down(input, gate.as_ref(), &mut findings)?;

    Ok(Plan {
        top_wavelength_m,
        far_field_m,
        range_m,
        meets_far_field,
        far_field_low,
        far_field_high,
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
