//! Radar cross section on the turntable: background subtraction, the down-range gate around
//! the target zone, and calibration against a reference target.
//!
//! The chain for one sweep (S11 of one antenna, or S21 between two antennas beside each
//! other), all of it linear:
//!
//! 1. subtract the background, the same range measured with the zone empty (mount in
//!    place): the coupling between the antennas, the mount and the room cancel as vectors
//!    ([`Background`], [`subtract`]);
//! 2. gate around the target zone: centre at the zone's two-way delay, span the zone's
//!    two-way extent plus the band window's main lobe ([`Zone::gate`]), refused when the
//!    coupling or the mount echo would fall inside ([`RcsError::EchoInGate`]); the gate
//!    itself is [`crate::gate::Gate`];
//! 3. calibrate: the reference target (a sphere, say) measured through the same chain,
//!    m_ref(f), against its known complex amplitude A_ref(f) (σ = |A|², in m) gives the
//!    range's factor C(f) = A_ref(f) / m_ref(f) ([`Calibration`]); a target's calibrated
//!    amplitude is C(f)·m(f) and its RCS |C·m|² m², in dBsm 10·log10 ([`dbsm`]).
//!
//! ```
//! use sweepgate::rcs::{dbsm, Calibration};
//! use sweepgate::Complex32;
//!
//! // A sphere of 0.1 m² measured as 0.02∠30° (after background and gate); a target as 0.04.
//! let known = [Complex32::new(0.1f32.sqrt(), 0.0)];
//! let measured = [Complex32::from_polar(0.02, 0.5236)];
//! let cal = Calibration::<1>::from_reference(&measured, &known).unwrap();
//! let mut target = [Complex32::from_polar(0.04, 0.5236)];
//! cal.apply(&mut target).unwrap();
//! assert!((dbsm(target[0]) - 10.0 * 0.4f32.log10()).abs() < 1e-4);
//! ```

use crate::error::{EchoKind, RcsError};
use crate::gate::GateConfig;
use crate::grid::Grid;
use crate::plan::SPEED_OF_LIGHT_M_S;
use crate::window::WindowKind;
use crate::Complex32;

/// dBsm printed for an amplitude of zero (or one that is not finite).
pub const DBSM_FLOOR: f32 = -200.0;

/// A reference measurement this far below its own peak (amplitude ratio, −80 dB) at a
/// frequency is refused by [`Calibration::from_reference`].
pub const REFERENCE_FLOOR: f32 = 1e-4;

/// RCS in dBsm of a calibrated amplitude `a` (m): 10·log10(|a|²), [`DBSM_FLOOR`] for zero.
pub fn dbsm(a: Complex32) -> f32 {
    let p = a.norm_sqr();
    if p > 0.0 && p.is_finite() {
        (10.0 * libm::log10f(p)).max(DBSM_FLOOR)
    } else {
        DBSM_FLOOR
    }
}

/// Where the target zone lies, seen from the antennas.
///
/// ```
/// use sweepgate::gate::GateConfig;
/// use sweepgate::grid::Grid;
/// use sweepgate::rcs::Zone;
/// use sweepgate::window::WindowKind;
///
/// // Zone 0.6 m across, 5 m away, the antennas 0.3 m apart, 2 ns of cable.
/// let zone = Zone { time_zero_s: 2e-9, distance_m: 5.0, size_m: 0.6, separation_m: 0.3 };
/// let grid = Grid::from_start_stop(8e9, 12e9, 401).unwrap();
/// // Coupling at 2 ns + 0.3 m/c, the mount 0.5 m behind the zone centre.
/// let echoes = [2e-9 + 0.3 / 299_792_458.0, zone.delay_s() + 1.0 / 299_792_458.0];
/// let cfg = zone
///     .gate(grid, WindowKind::kaiser_for_sidelobe_db(50.0), WindowKind::Tukey { alpha: 0.2 }, &echoes)
///     .unwrap();
/// assert!((cfg.center_s - zone.delay_s()).abs() < 1e-15);
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Zone {
    /// Delay from the VNA's time zero to the antennas' reference point (cables, feeds), s.
    pub time_zero_s: f64,
    /// Distance from the midpoint between the antennas to the zone centre, m.
    pub distance_m: f64,
    /// Diameter of the zone (the sphere the target turns inside), m.
    pub size_m: f64,
    /// Distance between the transmit and receive antennas, m (0 for one antenna, S11).
    pub separation_m: f64,
}

impl Zone {
    fn check(&self) -> Result<(), RcsError> {
        let pos = |v: f64| v.is_finite() && v > 0.0;
        let non_neg = |v: f64| v.is_finite() && v >= 0.0;
        if pos(self.distance_m)
            && pos(self.size_m)
            && non_neg(self.time_zero_s)
            && non_neg(self.separation_m)
        {
            Ok(())
        } else {
            Err(RcsError::ZoneNotPositive)
        }
    }

    /// Delay of the zone centre: time zero plus the path out and back,
    /// 2·√(R² + (s/2)²)/c for antennas s apart (2R/c for one antenna).
    pub fn delay_s(&self) -> f64 {
        let half = self.separation_m / 2.0;
        let one_way = libm::sqrt(self.distance_m * self.distance_m + half * half);
        self.time_zero_s + 2.0 * one_way / SPEED_OF_LIGHT_M_S
    }

    /// The gate around the zone: centred on [`Zone::delay_s`], spanning the zone's two-way
    /// extent 2·size/c plus the band window's main lobe (null to null) so that a scatterer
    /// at the zone's edge keeps its whole main lobe inside; renormalized. Each delay in
    /// `echoes_s` (coupling first, then the mount, then others) must lie outside the gate
    /// by at least half the main lobe, else [`RcsError::EchoInGate`] names it.
    pub fn gate(
        &self,
        grid: Grid,
        band_window: WindowKind,
        shape: WindowKind,
        echoes_s: &[f64],
    ) -> Result<GateConfig, RcsError> {
        self.check()?;
        band_window
            .validate()
            .map_err(|e| RcsError::Gate(crate::error::GateError::BandWindow(e)))?;
        let lobe_s = band_window.mainlobe_width() * grid.resolution_s();
        let span_s = 2.0 * self.size_m / SPEED_OF_LIGHT_M_S + lobe_s;
        let center_s = self.delay_s();
        for (i, &t) in echoes_s.iter().enumerate() {
            if !t.is_finite() {
                return Err(RcsError::ZoneNotPositive);
            }
            if libm::fabs(t - center_s) < span_s / 2.0 + lobe_s / 2.0 {
                return Err(RcsError::EchoInGate(match i {
                    0 => EchoKind::Coupling,
                    1 => EchoKind::Mount,
                    n => EchoKind::Other(n.min(255) as u8),
                }));
            }
        }
        let cfg = GateConfig {
            grid,
            band_window,
            center_s,
            span_s,
            shape,
            renormalize: true,
        };
        Ok(cfg)
    }
}

/// What a planned RCS set-up gives: the far-field condition for the zone, the down-range
/// resolution, the zone's gate and its distance from the coupling and the mount, and the
/// sweep those need. Every delay in s, every distance in m.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct RcsPlan {
    /// Far-field distance of the zone at the top frequency, 2D²/λ (Federal Standard 1037C;
    /// IEEE Std 149), D the zone's size.
    pub far_field_m: f64,
    /// The zone's distance is at least [`RcsPlan::far_field_m`].
    pub in_far_field: bool,
    /// Down-range resolution of the band, c/(2B) (Mensa, *High Resolution Radar
    /// Cross-Section Imaging*).
    pub down_range_resolution_m: f64,
    /// Gate centre, s.
    pub gate_center_s: f64,
    /// Gate span, s.
    pub gate_span_s: f64,
    /// Time from the coupling's arrival to the gate's opening, less half the band window's
    /// main lobe; below zero the coupling reaches into the gate.
    pub coupling_clearance_s: f64,
    /// Time from the gate's closing to the mount's echo, less half the main lobe (`None`
    /// without a mount echo); below zero the mount reaches into the gate.
    pub mount_clearance_s: Option<f64>,
    /// Bandwidth at which the band window's main lobe just fits between the zone's edge and
    /// the nearer of the coupling and the mount, Hz: the least bandwidth that separates them.
    pub bandwidth_needed_hz: f64,
    /// Alias-free range of the sweep, 1/Δf.
    pub alias_free_s: f64,
    /// Points of the same band whose alias-free range holds the gate's end and the mount
    /// echo with a fifth to spare.
    pub points_needed: u32,
}

/// Plans an RCS set-up (see [`RcsPlan`]); `mount_delay_s` is the mount's strongest echo.
///
/// ```
/// use sweepgate::grid::Grid;
/// use sweepgate::rcs::{plan, Zone};
/// use sweepgate::window::WindowKind;
/// let zone = Zone { time_zero_s: 0.0, distance_m: 10.0, size_m: 0.5, separation_m: 0.0 };
/// let grid = Grid::from_start_stop(8e9, 12e9, 401).unwrap();
/// let p = plan(&zone, &grid, WindowKind::Hann, None).unwrap();
/// // 2·0.5²/λ at 12 GHz = 20.0 m: 10 m is too near for the whole zone.
/// assert!((p.far_field_m - 20.01).abs() < 0.01 && !p.in_far_field);
/// ```
pub fn plan(
    zone: &Zone,
    grid: &Grid,
    band_window: WindowKind,
    mount_delay_s: Option<f64>,
) -> Result<RcsPlan, RcsError> {
    zone.check()?;
    if mount_delay_s.is_some_and(|t| !t.is_finite()) {
        return Err(RcsError::ZoneNotPositive);
    }
    let c = SPEED_OF_LIGHT_M_S;
    let bandwidth_hz = grid.step_hz() * grid.points() as f64;
    let lobe_factor = band_window.mainlobe_width();
    let lobe_s = lobe_factor / bandwidth_hz;
    let center = zone.delay_s();
    let span = 2.0 * zone.size_m / c + lobe_s;
    let coupling = zone.time_zero_s + zone.separation_m / c;
    let coupling_clearance_s = (center - span / 2.0) - coupling - lobe_s / 2.0;
    let mount_clearance_s = mount_delay_s.map(|t| t - (center + span / 2.0) - lobe_s / 2.0);
    // The echo check holds when the gap between the zone's edge and the echo is at least
    // one main lobe, lobe_factor/B.
    let edge = zone.size_m / c;
    let gap = match mount_delay_s {
        Some(t) => libm::fmin(center - coupling, t - center),
        None => center - coupling,
    } - edge;
    let bandwidth_needed_hz = if gap > 0.0 {
        lobe_factor / gap
    } else {
        f64::INFINITY
    };
    let latest = match mount_delay_s {
        Some(t) => libm::fmax(t, center + span / 2.0),
        None => center + span / 2.0,
    };
    let step_needed = 1.0 / (1.2 * latest);
    let points_needed = libm::ceil(bandwidth_hz / step_needed).min(u32::MAX as f64) as u32;
    let lambda_top = c / grid.stop_hz();
    let far_field_m = 2.0 * zone.size_m * zone.size_m / lambda_top;
    Ok(RcsPlan {
        far_field_m,
        in_far_field: zone.distance_m >= far_field_m,
        down_range_resolution_m: c / (2.0 * bandwidth_hz),
        gate_center_s: center,
        gate_span_s: span,
        coupling_clearance_s,
        mount_clearance_s,
        bandwidth_needed_hz,
        alias_free_s: grid.alias_free_s(),
        points_needed: points_needed.max(2),
    })
}

fn first_non_finite(values: &[Complex32]) -> Option<usize> {
    values
        .iter()
        .position(|v| !(v.re.is_finite() && v.im.is_finite()))
}

fn same_length(expected: usize, given: usize) -> Result<(), RcsError> {
    if expected == given {
        Ok(())
    } else {
        Err(RcsError::LengthMismatch {
            expected: expected as u32,
            given: given as u32,
        })
    }
}

/// Vector subtraction of a background sweep: `sweep[n] −= background[n]`. The lengths
/// must match.
pub fn subtract(sweep: &mut [Complex32], background: &[Complex32]) -> Result<(), RcsError> {
    same_length(background.len(), sweep.len())?;
    for (s, b) in sweep.iter_mut().zip(background) {
        *s -= *b;
    }
    Ok(())
}

/// One stored background sweep of up to `K` points (the board keeps one; the host keeps
/// one per angle).
#[derive(Debug, Clone, PartialEq)]
pub struct Background<const K: usize> {
    sweep: [Complex32; K],
    points: usize,
}

impl<const K: usize> Default for Background<K> {
    fn default() -> Self {
        Self::empty()
    }
}

impl<const K: usize> Background<K> {
    /// No background yet: [`Background::subtract_from`] refuses until one is stored.
    pub const fn empty() -> Self {
        Self {
            sweep: [Complex32::new(0.0, 0.0); K],
            points: 0,
        }
    }

    /// Stores `sweep` (up to K points, every value finite), replacing any earlier one. On an
    /// error the earlier background is kept.
    pub fn store(&mut self, sweep: &[Complex32]) -> Result<(), RcsError> {
        if sweep.len() > K {
            return Err(RcsError::TooManyPoints {
                points: sweep.len() as u32,
                capacity: K as u32,
            });
        }
        if let Some(i) = first_non_finite(sweep) {
            return Err(RcsError::NonFinite { index: i as u32 });
        }
        self.sweep[..sweep.len()].copy_from_slice(sweep);
        self.points = sweep.len();
        Ok(())
    }

    /// Points of the stored background (0 when none).
    pub fn points(&self) -> usize {
        self.points
    }

    /// The stored background.
    pub fn sweep(&self) -> &[Complex32] {
        &self.sweep[..self.points]
    }

    /// Subtracts the stored background from `sweep` (same length).
    pub fn subtract_from(&self, sweep: &mut [Complex32]) -> Result<(), RcsError> {
        if self.points == 0 {
            return Err(RcsError::NoBackground);
        }
        subtract(sweep, self.sweep())
    }
}

/// The range's per-frequency complex calibration factor, for up to `N` frequencies (the
/// pattern frequencies on the board, a whole sweep on the host).
#[derive(Debug, Clone, PartialEq)]
pub struct Calibration<const N: usize> {
    factor: [Complex32; N],
    len: usize,
}

impl<const N: usize> Calibration<N> {
    /// C(f) = known(f) / reference(f): `reference` is the reference target's measurement
    /// after background subtraction and the zone's gate, `known` its complex amplitude in
    /// m (σ = |known|²) at the same frequencies. Refuses a reference that is not finite or
    /// more than 80 dB ([`REFERENCE_FLOOR`]) below its own peak at some frequency.
    pub fn from_reference(reference: &[Complex32], known: &[Complex32]) -> Result<Self, RcsError> {
        same_length(reference.len(), known.len())?;
        if reference.len() > N {
            return Err(RcsError::TooManyPoints {
                points: reference.len() as u32,
                capacity: N as u32,
            });
        }
        if let Some(i) = first_non_finite(reference).or_else(|| first_non_finite(known)) {
            return Err(RcsError::NonFinite { index: i as u32 });
        }
        let peak = reference.iter().map(|v| v.norm()).fold(0.0f32, f32::max);
        let mut factor = [Complex32::new(0.0, 0.0); N];
        for (i, (f, (m, k))) in factor
            .iter_mut()
            .zip(reference.iter().zip(known))
            .enumerate()
        {
            let size = m.norm();
            if !(size > 0.0 && size >= REFERENCE_FLOOR * peak) {
                return Err(RcsError::ReferenceTooWeak { index: i as u32 });
            }
            *f = *k / *m;
        }
        Ok(Self {
            factor,
            len: reference.len(),
        })
    }

    /// The factors, one per frequency.
    pub fn factor(&self) -> &[Complex32] {
        &self.factor[..self.len]
    }

    /// Calibrates `values` in place (same frequencies as the reference): each becomes the
    /// target's complex amplitude in m.
    pub fn apply(&self, values: &mut [Complex32]) -> Result<(), RcsError> {
        same_length(self.len, values.len())?;
        for (v, f) in values.iter_mut().zip(self.factor()) {
            *v *= *f;
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::gate::Gate;

    const C: f64 = SPEED_OF_LIGHT_M_S;

    fn phasor(f_hz: f64, delay_s: f64, amp: f64) -> Complex32 {
        let ph = -2.0 * core::f64::consts::PI * f_hz * delay_s;
        Complex32::new((amp * libm::cos(ph)) as f32, (amp * libm::sin(ph)) as f32)
    }

    #[test]
    fn delay_is_the_two_way_path() {
        // One antenna: 2R/c. Two antennas s apart: 2·√(R² + (s/2)²)/c (plane geometry).
        let z = Zone {
            time_zero_s: 1e-9,
            distance_m: 4.0,
            size_m: 0.5,
            separation_m: 0.0,
        };
        assert!((z.delay_s() - (1e-9 + 8.0 / C)).abs() < 1e-18);
        let z2 = Zone {
            separation_m: 6.0,
            ..z
        };
        assert!((z2.delay_s() - (1e-9 + 10.0 / C)).abs() < 1e-18); // 3-4-5 triangle
    }

    #[test]
    fn echoes_inside_the_gate_are_refused() {
        let grid = Grid::from_start_stop(8e9, 12e9, 401).unwrap();
        let z = Zone {
            time_zero_s: 0.0,
            distance_m: 3.0,
            size_m: 0.4,
            separation_m: 0.0,
        };
        let band = WindowKind::kaiser_for_sidelobe_db(50.0);
        let shape = WindowKind::Tukey { alpha: 0.2 };
        let t = z.delay_s();
        // Coupling at 1 ns, mount 0.15 m behind the centre (inside a 0.4 m zone).
        let mount = t + 0.3 / C;
        assert_eq!(
            z.gate(grid, band, shape, &[1e-9, mount]),
            Err(RcsError::EchoInGate(EchoKind::Mount))
        );
        assert_eq!(
            z.gate(grid, band, shape, &[t, t + 5e-9]),
            Err(RcsError::EchoInGate(EchoKind::Coupling))
        );
        // Mount 0.6 m behind: outside the 0.2 m half-zone plus the 6.85/(2·4 GHz) margin.
        let cfg = z.gate(grid, band, shape, &[1e-9, t + 1.2 / C]).unwrap();
        let lobe = band.mainlobe_width() / 4e9 * 400.0 / 401.0;
        assert!((cfg.span_s - (0.8 / C + lobe)).abs() < 1e-15);
        let bad = Zone {
            size_m: f64::NAN,
            ..z
        };
        assert_eq!(
            bad.gate(grid, band, shape, &[]),
            Err(RcsError::ZoneNotPositive)
        );
    }

    /// Coupling, a mount echo and a target: subtracting the background and gating the
    /// zone leaves the target alone; calibration against a reference point of known
    /// amplitude gives its amplitude back (closed form: a point scatterer at delay τ is
    /// A·e^(−j2πfτ)).
    #[test]
    fn background_gate_and_calibration_recover_a_point() {
        const M: usize = 1024;
        let grid = Grid::from_start_stop(8e9, 12e9, 401).unwrap();
        let z = Zone {
            time_zero_s: 2e-9,
            distance_m: 3.0,
            size_m: 0.4,
            separation_m: 0.2,
        };
        let (t_c, t_m) = (2e-9 + 0.2 / C, z.delay_s() + 1.0 / C);
        let cfg = z
            .gate(
                grid,
                WindowKind::kaiser_for_sidelobe_db(60.0),
                WindowKind::Tukey { alpha: 0.3 },
                &[t_c, t_m],
            )
            .unwrap();
        let gate = Gate::<M>::new(&cfg).unwrap();
        let sweep = |amp: f64| {
            let mut s = [Complex32::new(0.0, 0.0); M];
            for (n, v) in s.iter_mut().take(401).enumerate() {
                let f = grid.frequency_hz(n);
                *v = phasor(f, t_c, 0.1) + phasor(f, t_m, 0.01) + phasor(f, z.delay_s(), amp);
            }
            s
        };
        let mut bg = Background::<M>::empty();
        assert_eq!(
            bg.subtract_from(&mut [Complex32::new(0.0, 0.0); 3]),
            Err(RcsError::NoBackground)
        );
        bg.store(&sweep(0.0)).unwrap();
        let measure = |amp: f64| {
            let mut s = sweep(amp);
            bg.subtract_from(&mut s).unwrap();
            let mut out = [Complex32::new(0.0, 0.0); M];
            gate.apply(&s, &mut out);
            out
        };
        // The reference: amplitude 1e-3 in the measurement for a known 0.5 m (0.25 m²).
        let reference = measure(1e-3);
        let idx = [100usize, 200, 300];
        let known = [Complex32::new(0.5, 0.0); 3];
        let cal = Calibration::<3>::from_reference(&idx.map(|i| reference[i]), &known).unwrap();
        let target = measure(4e-4);
        let mut v = idx.map(|i| target[i]);
        cal.apply(&mut v).unwrap();
        // 0.5·0.4 = 0.2 m → σ 0.04 m², −13.98 dBsm.
        for x in v {
            assert!(
                (dbsm(x) - 10.0 * libm::log10f(0.04)).abs() < 0.01,
                "{}",
                dbsm(x)
            );
        }
    }

    #[test]
    fn plan_figures_follow_their_formulas() {
        // Computed from the formulas (Federal Standard 1037C far field; c/(2B) down-range
        // resolution, Mensa): zone 0.3 m at 6 m, 2–18 GHz, 801 points.
        let zone = Zone {
            time_zero_s: 1e-9,
            distance_m: 6.0,
            size_m: 0.3,
            separation_m: 0.2,
        };
        let grid = Grid::from_start_stop(2e9, 18e9, 801).unwrap();
        let mount = zone.delay_s() + 1.0 / C; // 0.5 m behind the centre
        let p = plan(&zone, &grid, WindowKind::Hann, Some(mount)).unwrap();
        // 2D²/λ = 2·0.09/(c/18 GHz) = 10.81 m: 6 m is too near.
        assert!((p.far_field_m - 10.807).abs() < 1e-3 && !p.in_far_field);
        let b = 20e6 * 801.0;
        assert!((p.down_range_resolution_m - C / (2.0 * b)).abs() < 1e-12);
        // Hann main lobe 4/B; the mount 0.5 m behind the centre, the zone's edge 0.15 m:
        // clearance (0.5 − 0.15)·2/c − 4/B = 2.085 ns; bandwidth for one lobe in the gap
        // 4/((0.35·2)/c) = 1.713 GHz.
        let clearance = p.mount_clearance_s.unwrap();
        assert!(
            (clearance - (0.7 / C - 4.0 / b)).abs() < 1e-15,
            "{clearance}"
        );
        assert!(
            (p.bandwidth_needed_hz - 1.7131e9).abs() < 1e6,
            "{}",
            p.bandwidth_needed_hz
        );
        assert!(p.coupling_clearance_s > 30e-9);
        // Alias-free 1/Δf = 50 ns against the mount at 44.4 ns with a fifth to spare: more
        // points needed (853).
        assert!((p.alias_free_s - 50e-9).abs() < 1e-15);
        let latest = mount * 1.2;
        assert_eq!(p.points_needed, libm::ceil(b * latest) as u32);
        assert!(p.points_needed > 801);
        // A zone that swallows the mount: negative clearance.
        let wide = Zone {
            size_m: 1.2,
            ..zone
        };
        let q = plan(&wide, &grid, WindowKind::Hann, Some(mount)).unwrap();
        assert!(q.mount_clearance_s.unwrap() < 0.0);
        assert!(q.bandwidth_needed_hz.is_infinite());
    }

    #[test]
    fn refusals() {
        let mut bg = Background::<4>::empty();
        let nan = [Complex32::new(f32::NAN, 0.0)];
        assert_eq!(bg.store(&nan), Err(RcsError::NonFinite { index: 0 }));
        assert_eq!(
            bg.store(&[Complex32::new(1.0, 0.0); 5]),
            Err(RcsError::TooManyPoints {
                points: 5,
                capacity: 4
            })
        );
        bg.store(&[Complex32::new(1.0, 0.0); 2]).unwrap();
        assert_eq!(
            bg.subtract_from(&mut [Complex32::new(0.0, 0.0); 3]),
            Err(RcsError::LengthMismatch {
                expected: 2,
                given: 3
            })
        );
        let weak = [Complex32::new(1.0, 0.0), Complex32::new(1e-6, 0.0)];
        let known = [Complex32::new(1.0, 0.0); 2];
        assert_eq!(
            Calibration::<2>::from_reference(&weak, &known),
            Err(RcsError::ReferenceTooWeak { index: 1 })
        );
        assert_eq!(dbsm(Complex32::new(0.0, 0.0)), DBSM_FLOOR);
    }
}
