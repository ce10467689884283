//! A gate chosen from the data: the impulse responses of every angle, summarised as they
//! come, say where the direct path is, how its delay moves with angle, and where the
//! earliest echo that matters lies; the gate keeps the whole direct response and closes
//! before that echo, or says that no gate can.
//!
//! # One impulse response ([`look`])
//!
//! The band-windowed impulse response h\[m\] of one sweep (from [`Gate::impulse_response`]):
//!
//! 1. **Arrivals**: the local maxima of |h|². Those weaker than the strongest by more than
//!    the band window's peak sidelobe level plus 3 dB ([`peak_sidelobe_db`]) are dropped:
//!    they cannot be told from the sidelobes of the strongest arrival.
//! 2. **Direct path**: the earliest arrival within [`SurveyConfig::direct_floor_db`] of the
//!    strongest. Every reflected path is longer than the direct one (triangle inequality),
//!    so the direct path is the earliest arrival whenever it can be seen at all; at back
//!    angles, where the antenna under test sends little toward the probe, an echo is often
//!    the strongest arrival and the earliest one is still the direct path.
//! 3. **Its delay and shape**: the delay τ and complex amplitude a of one impulse that fit
//!    h best over the direct main lobe (least squares; τ by golden-section search within
//!    ±1 sample of the peak). The template of an impulse at τ is
//!    T(m) = Σₙ w\[n\]·e^(j2π·n·(m/M − Δf·τ)) (the inverse transform of a band-windowed
//!    delay). What the fit leaves, Σ|h − a·T|² over Σ|h|² across the main lobe, is small for
//!    one impulse and large when an echo lies inside the direct main lobe, where no gate can
//!    reach it.
//! 4. **Earliest echo that matters**: the earliest arrival after the direct path whose
//!    level relative to the direct path is at least [`SurveyConfig::echo_floor_db`].
//!
//! # The summary ([`Survey`])
//!
//! R angle regions of 360/R degrees each keep: the strongest direct level, the earliest and
//! latest direct delay, the earliest echo (its delay, its delay beyond its own angle's
//! direct path, its level relative to that direct path, its angle) and the worst fit
//! residual. Nothing per angle is kept, so a board can survey the first bins of a scan in a
//! few hundred bytes.
//!
//! # The choice ([`Survey::choose`])
//!
//! With L half the band window's null-to-null main lobe (mainlobe_width / ((K − 1)·Δf) / 2)
//! and the direct delays [d_lo, d_hi] of the regions whose direct level is within
//! [`SurveyConfig::weak_direct_db`] of the strongest:
//!
//! - center c = (d_lo + d_hi)/2;
//! - the gate must hold [d_lo − L, d_hi + L] (the direct main lobe over its whole delay
//!   swing) and close by e − L, where e is the earliest echo's delay (before the echo's main
//!   lobe begins); the margin is (e − L) − (d_hi + L);
//! - span = 2·min(e − L − c, d_hi − c + L·(1 + [`SurveyConfig::extra_lobes`])), at most half
//!   the alias-free range: as wide as the echo allows, which keeps the gate's own error on
//!   the direct response small, and no wider than needed when no echo is near;
//! - **unseparable** when the margin is negative (needed bandwidth: the one whose main
//!   lobe fits twice between d_hi and e, mainlobe_width/(e − d_hi)) or when the fit
//!   residual says an echo sits inside the direct main lobe (needed bandwidth estimated
//!   from where the residual peaks). The least-bad gate then keeps the direct peak and
//!   closes halfway to the echo (or just past the direct main lobe when the echo is inside
//!   it).

use crate::error::AutogateError;
use crate::fft::Fft;
use crate::gate::Gate;
use crate::grid::Grid;
use crate::window::{cos_sin_turns, WindowKind};
use crate::Complex32;

/// Thresholds of the survey (the defaults are [`SurveyConfig::DEFAULT`]).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SurveyConfig {
    /// The direct path is the earliest arrival at least this strong relative to the
    /// strongest arrival of its impulse response, dB (negative).
    pub direct_floor_db: f32,
    /// An echo matters when it is at least this strong relative to its angle's direct path,
    /// dB (−40 dB moves a gated value by at most ±0.09 dB).
    pub echo_floor_db: f32,
    /// A fit residual at least this high (dB of the main lobe's energy) means an echo
    /// inside the direct main lobe.
    pub merged_floor_db: f32,
    /// Regions whose strongest direct level is further below the strongest of all (dB,
    /// negative) do not set the direct delay range.
    pub weak_direct_db: f32,
    /// Half main lobes kept beyond the direct main lobe when no echo limits the gate.
    pub extra_lobes: f32,
}

impl SurveyConfig {
    /// −30 dB direct floor, −40 dB echo floor, −20 dB merged floor, −30 dB weak direct,
    /// eight extra half main lobes.
    pub const DEFAULT: SurveyConfig = SurveyConfig {
        direct_floor_db: -30.0,
        echo_floor_db: -40.0,
        merged_floor_db: -20.0,
        weak_direct_db: -30.0,
        extra_lobes: 8.0,
    };

    fn check(&self) -> Result<(), AutogateError> {
        let all = [
            self.direct_floor_db,
            self.echo_floor_db,
            self.merged_floor_db,
            self.weak_direct_db,
        ];
        if all.iter().any(|v| !v.is_finite() || *v >= 0.0) {
            return Err(AutogateError::Threshold);
        }
        if !self.extra_lobes.is_finite() || self.extra_lobes < 0.0 {
            return Err(AutogateError::Threshold);
        }
        Ok(())
    }
}

/// What one impulse response says (see the module notes).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Look {
    /// Delay of the direct path, s.
    pub direct_s: f32,
    /// Level of the direct path, dB (of |h|², any reference).
    pub direct_db: f32,
    /// Earliest echo that matters: its delay (s) and level relative to the direct path (dB).
    pub echo: Option<(f32, f32)>,
    /// Fit residual over the direct main lobe, dB of its energy.
    pub residual_db: f32,
    /// Delay from the direct path to where the residual peaks, s (an estimate of a merged
    /// echo's excess delay).
    pub residual_excess_s: f32,
}

/// The peak sidelobe level of a window, dB relative to its main lobe (negative), from its
/// continuous transform beyond the first null (set-up only).
pub fn peak_sidelobe_db(kind: WindowKind) -> f32 {
    const SAMPLES: usize = 256;
    let mag = |nu: f64| {
        let (mut re, mut im) = (0.0f64, 0.0f64);
        for n in 0..SAMPLES {
            let x = (n as f64 + 0.5) / SAMPLES as f64;
            let w = kind.at(x);
            re += w * libm::cos(2.0 * core::f64::consts::PI * nu * x);
            im -= w * libm::sin(2.0 * core::f64::consts::PI * nu * x);
        }
        libm::sqrt(re * re + im * im)
    };
    let peak = mag(0.0);
    let mut nu = 0.5 * kind.mainlobe_width();
    let mut worst = 0.0f64;
    while nu < 12.0 {
        worst = worst.max(mag(nu));
        nu += 0.01;
    }
    if peak <= 0.0 || worst <= 0.0 {
        return -200.0;
    }
    (20.0 * libm::log10(worst / peak)) as f32
}

/// Σₙ w\[n\]·e^(j2π·n·x), x in turns, by 64-bit phase steps.
fn template(band: &[f32], x_turns: f64) -> Complex32 {
    let step = ((x_turns - libm::floor(x_turns)) * 18_446_744_073_709_551_616.0) as u64;
    let mut acc = Complex32::new(0.0, 0.0);
    let mut turns = 0u64;
    for &w in band {
        let (c, s) = cos_sin_turns((turns >> 32) as u32);
        acc += Complex32::new(w * c, w * s);
        turns = turns.wrapping_add(step);
    }
    acc
}

fn power_db(e: f32) -> f32 {
    if e > 0.0 {
        10.0 * libm::log10f(e)
    } else {
        -200.0
    }
}

/// Half of the band window's null-to-null main lobe, s.
pub fn half_lobe_s(grid: &Grid, band_window: WindowKind) -> f64 {
    let b = grid.step_hz() * grid.points().saturating_sub(1).max(1) as f64;
    0.5 * band_window.mainlobe_width() / b
}

/// Looks at one impulse response from [`Gate::impulse_response`] of `gate` (see the module
/// notes); `sidelobe_db` is [`peak_sidelobe_db`] of the gate's band window. `None` when the
/// response is all zero.
pub fn look<const M: usize>(
    gate: &Gate<M>,
    h: &[Complex32; M],
    sidelobe_db: f32,
    cfg: &SurveyConfig,
) -> Option<Look>
where
    [Complex32; M]: Fft,
{
    let e = |m: usize| h[m % M].norm_sqr();
    let is_max = |m: usize| {
        let (p, n) = (e(m + M - 1), e(m + 1));
        let v = e(m);
        v > 0.0 && v >= p && v >= n && (v > p || v > n)
    };
    let mut strongest = 0.0f32;
    for m in 0..M {
        strongest = strongest.max(e(m));
    }
    if strongest <= 0.0 || !strongest.is_finite() {
        return None;
    }
    let mask = strongest * libm::powf(10.0, 0.1 * (sidelobe_db + 3.0).min(-3.0));
    let direct_floor = strongest * libm::powf(10.0, 0.1 * cfg.direct_floor_db);
    let p = (0..M).find(|&m| is_max(m) && e(m) >= direct_floor.max(mask))?;
    let grid = gate.grid();
    let dt = grid.time_step_s(M);
    let half = (half_lobe_s(grid, gate.config().band_window) / dt) as usize + 1;
    let fit = fit_direct(gate, h, p, half);
    let direct_e = fit.peak_e.max(e(p));
    let echo_floor = direct_e * libm::powf(10.0, 0.1 * cfg.echo_floor_db);
    // The earliest arrival after the direct main lobe that matters; arrivals inside the
    // main lobe are the fit residual's business.
    let echo = (p + half..M)
        .find(|&m| is_max(m) && e(m) >= echo_floor.max(mask))
        .map(|m| {
            let t = (m as f64 + parabolic(e(m + M - 1), e(m), e(m + 1))) * dt;
            (t as f32, power_db(e(m) / direct_e))
        });
    Some(Look {
        direct_s: (fit.tau_samples * dt) as f32,
        direct_db: power_db(direct_e),
        echo,
        residual_db: fit.residual_db,
        residual_excess_s: (fit.residual_offset_samples * dt) as f32,
    })
}

/// Offset of a parabola's vertex through three equally spaced values, in samples (±½).
fn parabolic(a: f32, b: f32, c: f32) -> f64 {
    let d = a - 2.0 * b + c;
    if d >= 0.0 {
        return 0.0;
    }
    f64::from((0.5 * (a - c) / d).clamp(-0.5, 0.5))
}

struct Fit {
    tau_samples: f64,
    peak_e: f32,
    residual_db: f32,
    residual_offset_samples: f64,
}

/// The single impulse that fits h best over samples p ± `half` (see the module notes).
fn fit_direct<const M: usize>(gate: &Gate<M>, h: &[Complex32; M], p: usize, half: usize) -> Fit
where
    [Complex32; M]: Fft,
{
    let band = &gate.band_window()[..gate.points().min(M)];
    let span = 2 * half + 1;
    let at = |j: usize| (p + M - half + j) % M;
    // Sample offset of j relative to p is j − half; an impulse at p + s samples.
    let t = |j: usize, s: f64| template(band, (j as f64 - half as f64 - s) / M as f64);
    let score = |s: f64| {
        let (mut num, mut den) = (Complex32::new(0.0, 0.0), 0.0f32);
        for j in 0..span {
            let tj = t(j, s);
            num += tj.conj() * h[at(j)];
            den += tj.norm_sqr();
        }
        (num, den)
    };
    let gain = |s: f64| {
        let (num, den) = score(s);
        if den > 0.0 {
            num.norm_sqr() / den
        } else {
            0.0
        }
    };
    // Golden-section search for the largest captured energy (least residual).
    let r = 0.618_034f64;
    let (mut lo, mut hi) = (-1.0f64, 1.0f64);
    let (mut x1, mut x2) = (hi - r * (hi - lo), lo + r * (hi - lo));
    let (mut g1, mut g2) = (gain(x1), gain(x2));
    for _ in 0..22 {
        if g1 < g2 {
            lo = x1;
            (x1, g1) = (x2, g2);
            x2 = lo + r * (hi - lo);
            g2 = gain(x2);
        } else {
            hi = x2;
            (x2, g2) = (x1, g1);
            x1 = hi - r * (hi - lo);
            g1 = gain(x1);
        }
    }
    let s = 0.5 * (lo + hi);
    let (num, den) = score(s);
    let a = if den > 0.0 { num / den } else { num };
    let (mut total, mut left, mut worst) = (0.0f32, 0.0f32, (0usize, -1.0f32));
    for j in 0..span {
        let v = h[at(j)];
        let d = (v - a * t(j, s)).norm_sqr();
        total += v.norm_sqr();
        left += d;
        if d > worst.1 {
            worst = (j, d);
        }
    }
    let tau = p as f64 + s;
    Fit {
        tau_samples: tau,
        peak_e: (a * template(band, 0.0)).norm_sqr(),
        residual_db: if total > 0.0 {
            power_db(left / total)
        } else {
            -200.0
        },
        residual_offset_samples: libm::fabs(worst.0 as f64 - half as f64 - s).max(1.0),
    }
}

/// One angle region's summary.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Region {
    /// Impulse responses looked at.
    pub looks: u16,
    /// Strongest direct level, dB.
    pub direct_db: f32,
    /// Earliest direct delay, s.
    pub direct_lo_s: f32,
    /// Latest direct delay, s.
    pub direct_hi_s: f32,
    /// Earliest echo that matters, if any.
    pub echo: Option<Echo>,
    /// Worst fit residual, dB, with its angle (degrees) and residual excess delay (s).
    pub residual: (f32, f32, f32),
}

/// An echo found in the data.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Echo {
    /// Its delay, s.
    pub delay_s: f32,
    /// Its delay beyond its angle's direct path, s.
    pub excess_s: f32,
    /// Its level relative to its angle's direct path, dB.
    pub relative_db: f32,
    /// The angle it was seen at, degrees.
    pub angle_deg: f32,
}

impl Region {
    const EMPTY: Region = Region {
        looks: 0,
        direct_db: -200.0,
        direct_lo_s: f32::INFINITY,
        direct_hi_s: f32::NEG_INFINITY,
        echo: None,
        residual: (-200.0, 0.0, 0.0),
    };
}

/// The running summary of a scan's impulse responses in `R` angle regions (see the
/// module notes).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Survey<const R: usize> {
    cfg: SurveyConfig,
    regions: [Region; R],
}

/// Why no gate can separate the direct path from an echo.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Unseparable {
    /// The earliest echo comes before the direct main lobe's end plus its own half main
    /// lobe.
    TooClose {
        /// Bandwidth whose main lobe would separate them, Hz.
        needed_bandwidth_hz: f64,
    },
    /// An echo sits inside the direct main lobe (the fit residual).
    Merged {
        /// Worst fit residual, dB.
        residual_db: f32,
        /// The angle it was seen at, degrees.
        angle_deg: f32,
        /// Bandwidth that would resolve it, estimated from where the residual peaks, Hz.
        needed_bandwidth_hz: f64,
    },
}

/// The gate chosen from the data.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Choice {
    /// Gate center, s.
    pub center_s: f64,
    /// Gate span, s.
    pub span_s: f64,
    /// Earliest direct delay, s.
    pub direct_lo_s: f64,
    /// Latest direct delay, s.
    pub direct_hi_s: f64,
    /// Half the band window's main lobe, s.
    pub half_lobe_s: f64,
    /// The earliest echo that matters over all regions.
    pub echo: Option<Echo>,
    /// (e − L) − (d_hi + L), s; `None` without an echo.
    pub margin_s: Option<f64>,
    /// Set when no gate can separate them.
    pub unseparable: Option<Unseparable>,
}

impl<const R: usize> Survey<R> {
    /// An empty survey.
    pub fn new(cfg: SurveyConfig) -> Result<Self, AutogateError> {
        cfg.check()?;
        if R == 0 || R > 360 {
            return Err(AutogateError::Regions);
        }
        Ok(Self {
            cfg,
            regions: [Region::EMPTY; R],
        })
    }

    /// The thresholds.
    pub fn config(&self) -> &SurveyConfig {
        &self.cfg
    }

    /// The regions; region i holds angles [i·360/R, (i+1)·360/R) after wrapping to [0, 360).
    pub fn regions(&self) -> &[Region; R] {
        &self.regions
    }

    /// Adds one impulse response's look at `angle_deg` (a non-finite angle goes to region 0).
    pub fn add(&mut self, angle_deg: f32, l: &Look) {
        let a = if angle_deg.is_finite() {
            angle_deg - 360.0 * libm::floorf(angle_deg / 360.0)
        } else {
            0.0
        };
        let i = ((a / 360.0 * R as f32) as usize).min(R - 1);
        let Some(r) = self.regions.get_mut(i) else {
            return;
        };
        r.looks = r.looks.saturating_add(1);
        // The direct range comes from angles whose direct path is within the weak-direct
        // distance of the region's strongest so far (those seen before a much stronger one
        // are dropped when all of them have become weak).
        if l.direct_db > r.direct_db {
            if r.direct_db < l.direct_db + self.cfg.weak_direct_db {
                // Every earlier contributor is now weak: start the range again.
                r.direct_lo_s = f32::INFINITY;
                r.direct_hi_s = f32::NEG_INFINITY;
            }
            r.direct_db = l.direct_db;
        }
        if l.direct_db >= r.direct_db + self.cfg.weak_direct_db {
            r.direct_lo_s = r.direct_lo_s.min(l.direct_s);
            r.direct_hi_s = r.direct_hi_s.max(l.direct_s);
        }
        if let Some((t, rel)) = l.echo {
            if r.echo.is_none_or(|e| t < e.delay_s) {
                r.echo = Some(Echo {
                    delay_s: t,
                    excess_s: t - l.direct_s,
                    relative_db: rel,
                    angle_deg,
                });
            }
        }
        if l.residual_db > r.residual.0 {
            r.residual = (l.residual_db, angle_deg, l.residual_excess_s);
        }
    }

    /// Chooses the gate (see the module notes) for a sweep on `grid` with `band_window`,
    /// gated on an `fft_size`-point transform.
    pub fn choose(
        &self,
        grid: &Grid,
        band_window: WindowKind,
        fft_size: usize,
    ) -> Result<Choice, AutogateError> {
        let strongest = self
            .regions
            .iter()
            .filter(|r| r.looks > 0)
            .map(|r| r.direct_db)
            .fold(f32::NEG_INFINITY, f32::max);
        if !strongest.is_finite() {
            return Err(AutogateError::NothingSeen);
        }
        let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
        for r in self.regions.iter().filter(|r| r.looks > 0) {
            if r.direct_db >= strongest + self.cfg.weak_direct_db {
                lo = lo.min(f64::from(r.direct_lo_s));
                hi = hi.max(f64::from(r.direct_hi_s));
            }
        }
        if !(lo.is_finite() && hi.is_finite()) {
            return Err(AutogateError::NothingSeen);
        }
        let l = half_lobe_s(grid, band_window);
        let echo = self
            .regions
            .iter()
            .filter_map(|r| r.echo)
            .min_by(|a, b| a.delay_s.total_cmp(&b.delay_s));
        let merged = self
            .regions
            .iter()
            .filter(|r| r.looks > 0)
            .map(|r| r.residual)
            .max_by(|a, b| a.0.total_cmp(&b.0));
        let c = 0.5 * (lo + hi);
        let dt = grid.time_step_s(fft_size.max(1));
        let max_half = 0.25 * grid.alias_free_s();
        let roomy_half = hi - c + l * (1.0 + f64::from(self.cfg.extra_lobes));
        let mut unseparable = None;
        let (half, margin) = match echo {
            Some(e) => {
                let e_s = f64::from(e.delay_s);
                let margin = (e_s - l) - (hi + l);
                if margin >= 0.0 {
                    ((e_s - l - c).min(roomy_half), Some(margin))
                } else {
                    let gap = e_s - hi;
                    unseparable = Some(Unseparable::TooClose {
                        needed_bandwidth_hz: needed_bandwidth(band_window, gap),
                    });
                    (0.5 * (hi + e_s) - c, Some(margin))
                }
            }
            None => (roomy_half, None),
        };
        let mut half = half;
        if let Some((res_db, angle_deg, excess_s)) = merged {
            if res_db >= self.cfg.merged_floor_db {
                // Keep the direct main lobe, no more: what lies in it cannot be gated away.
                half = half.min(hi - c + l);
                unseparable = Some(Unseparable::Merged {
                    residual_db: res_db,
                    angle_deg,
                    needed_bandwidth_hz: needed_bandwidth(band_window, f64::from(excess_s)),
                });
            }
        }
        let half = half.min(max_half).max(2.0 * dt);
        Ok(Choice {
            center_s: c.clamp(0.0, grid.alias_free_s() * (1.0 - 1e-9)),
            span_s: 2.0 * half,
            direct_lo_s: lo,
            direct_hi_s: hi,
            half_lobe_s: l,
            echo,
            margin_s: margin,
            unseparable,
        })
    }
}

/// The bandwidth whose band-window main lobe (null to null) equals `gap_s`, Hz.
fn needed_bandwidth(band_window: WindowKind, gap_s: f64) -> f64 {
    if gap_s > 0.0 {
        band_window.mainlobe_width() / gap_s
    } else {
        f64::INFINITY
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::gate::GateConfig;

    const M: usize = 1024;

    fn grid() -> Grid {
        Grid::from_start_stop(8e9, 12e9, 801).unwrap()
    }

    fn gate() -> Gate<M> {
        Gate::new(&GateConfig {
            grid: grid(),
            band_window: WindowKind::kaiser_for_sidelobe_db(50.0),
            center_s: 0.0,
            span_s: 50e-9,
            shape: WindowKind::Rectangular,
            renormalize: false,
        })
        .unwrap()
    }

    /// Impulse response of paths (delay s, amplitude) through the gate's band window.
    fn response(g: &Gate<M>, paths: &[(f64, f32)]) -> [Complex32; M] {
        let mut raw = [Complex32::new(0.0, 0.0); M];
        for (n, v) in raw.iter_mut().take(801).enumerate() {
            for &(t, a) in paths {
                let ph = -2.0 * core::f64::consts::PI * grid().frequency_hz(n) * t;
                *v += Complex32::new(ph.cos() as f32, ph.sin() as f32) * a;
            }
        }
        let mut h = [Complex32::new(0.0, 0.0); M];
        g.impulse_response(&raw, &mut h);
        h
    }

    #[test]
    fn sidelobes_of_known_windows() {
        // Harris 1978, table 1: rectangular −13.3 dB, Hann −31.5 dB.
        assert!((peak_sidelobe_db(WindowKind::Rectangular) + 13.3).abs() < 0.3);
        assert!((peak_sidelobe_db(WindowKind::Hann) + 31.5).abs() < 0.3);
        // Kaiser designed for 50 dB (Kaiser's formula): within a dB.
        let k = peak_sidelobe_db(WindowKind::kaiser_for_sidelobe_db(50.0));
        assert!((k + 50.0).abs() < 1.0, "{k}");
    }

    #[test]
    fn one_impulse_is_found_where_it_is_with_a_small_residual() {
        let g = gate();
        let sl = peak_sidelobe_db(g.config().band_window);
        for t in [10.0e-9, 10.07e-9, 23.33e-9] {
            let h = response(&g, &[(t, 1.0)]);
            let l = look(&g, &h, sl, &SurveyConfig::DEFAULT).unwrap();
            assert!(
                (f64::from(l.direct_s) - t).abs() < 2e-12,
                "{t}: {}",
                l.direct_s
            );
            assert!(l.residual_db < -40.0, "{}", l.residual_db);
            assert!(l.echo.is_none());
        }
    }

    #[test]
    fn a_weak_direct_path_before_a_strong_echo_is_still_the_direct_path() {
        let g = gate();
        let sl = peak_sidelobe_db(g.config().band_window);
        let h = response(&g, &[(10e-9, 0.1), (16e-9, 1.0)]);
        let l = look(&g, &h, sl, &SurveyConfig::DEFAULT).unwrap();
        assert!((f64::from(l.direct_s) - 10e-9).abs() < 5e-12);
        let (t, rel) = l.echo.unwrap();
        assert!((f64::from(t) - 16e-9).abs() < 0.1e-9);
        assert!((rel - 20.0).abs() < 0.5, "{rel}");
    }

    #[test]
    fn the_gate_closes_before_the_earliest_echo_of_any_region() {
        let g = gate();
        let sl = peak_sidelobe_db(g.config().band_window);
        let mut s = Survey::<12>::new(SurveyConfig::DEFAULT).unwrap();
        for i in 0..36 {
            let a = i as f32 * 10.0;
            // The direct delay swings by ±0.1 ns; an echo 6 ns late at the back only.
            let d = 10e-9 + 0.1e-9 * (a.to_radians() as f64).cos();
            let back = [(d, 0.03), (d + 4e-9, 0.3), (d + 9e-9, 0.5)];
            let front = [(d, 1.0), (d + 9e-9, 0.05), (d + 9e-9, 0.0)];
            let paths = if (150.0..=210.0).contains(&a) {
                back
            } else {
                front
            };
            let h = response(&g, &paths);
            s.add(a, &look(&g, &h, sl, &SurveyConfig::DEFAULT).unwrap());
        }
        let c = s.choose(&grid(), g.config().band_window, M).unwrap();
        // The back regions' direct path is 30 dB down: the range comes from 140° and 220°.
        let lo = 10e-9 + 0.1e-9 * 140f64.to_radians().cos();
        assert!((c.direct_lo_s - lo).abs() < 0.01e-9, "{}", c.direct_lo_s);
        assert!(
            (c.direct_hi_s - 10.1e-9).abs() < 0.01e-9,
            "{}",
            c.direct_hi_s
        );
        let e = c.echo.unwrap();
        assert!((180.0 - e.angle_deg).abs() <= 30.0);
        assert!((f64::from(e.excess_s) - 4e-9).abs() < 0.1e-9);
        let end = c.center_s + 0.5 * c.span_s;
        assert!(end <= f64::from(e.delay_s) - c.half_lobe_s + 1e-12);
        assert!(c.center_s - 0.5 * c.span_s <= c.direct_lo_s - c.half_lobe_s);
        assert!(c.unseparable.is_none());
    }

    #[test]
    fn an_echo_inside_the_main_lobe_is_unseparable() {
        let g = gate();
        let sl = peak_sidelobe_db(g.config().band_window);
        let mut s = Survey::<4>::new(SurveyConfig::DEFAULT).unwrap();
        let h = response(&g, &[(10e-9, 1.0), (10.3e-9, -0.7)]);
        s.add(0.0, &look(&g, &h, sl, &SurveyConfig::DEFAULT).unwrap());
        let c = s.choose(&grid(), g.config().band_window, M).unwrap();
        let Some(Unseparable::Merged {
            needed_bandwidth_hz,
            ..
        }) = c.unseparable
        else {
            panic!("{c:?}");
        };
        assert!(needed_bandwidth_hz > 4e9, "{needed_bandwidth_hz}");
    }

    #[test]
    fn an_echo_just_past_the_main_lobe_is_too_close() {
        let g = gate();
        let sl = peak_sidelobe_db(g.config().band_window);
        let mut s = Survey::<4>::new(SurveyConfig::DEFAULT).unwrap();
        // Main lobe ≈ 0.88 ns null to null at 4 GHz; an echo 0.7 ns late.
        let h = response(&g, &[(10e-9, 1.0), (10.7e-9, 0.5)]);
        s.add(0.0, &look(&g, &h, sl, &SurveyConfig::DEFAULT).unwrap());
        let c = s.choose(&grid(), g.config().band_window, M).unwrap();
        assert!(c.unseparable.is_some(), "{c:?}");
        assert!(c.margin_s.is_some_and(|m| m < 0.0) || c.echo.is_none());
    }

    #[test]
    fn nothing_seen_is_an_error() {
        let s = Survey::<4>::new(SurveyConfig::DEFAULT).unwrap();
        assert_eq!(
            s.choose(&grid(), WindowKind::Hann, M),
            Err(AutogateError::NothingSeen)
        );
        let bad = SurveyConfig {
            echo_floor_db: f32::NAN,
            ..SurveyConfig::DEFAULT
        };
        assert_eq!(Survey::<4>::new(bad), Err(AutogateError::Threshold));
        assert_eq!(
            Survey::<0>::new(SurveyConfig::DEFAULT),
            Err(AutogateError::Regions)
        );
    }
}
