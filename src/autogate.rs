//! A gate chosen from the data: the impulse responses of every angle, summarised as they
//! come, say where the direct path is, how its delay moves with angle, and where the
//! nearest echo that matters lies; the gate keeps the whole direct response and closes
//! before that echo, or says that no gate can.
//!
//! # Two passes, no map
//!
//! The first pass finds the **reference**: the strongest arrival over all angles
//! ([`strongest_arrival`]), the direct path on the main beam. The second looks at every
//! band-windowed impulse response h\[m\] again ([`look`]) and adds what it says to a
//! [`Survey`] of R angle regions. Nothing per angle is kept: a board can survey the first
//! bins of a scan in a few hundred bytes (given a reference, e.g. its boresight sweep).
//!
//! # One impulse response ([`look`])
//!
//! 1. **Arrivals**: the local maxima of |h|². Those weaker than the strongest by more than
//!    the band window's peak sidelobe level plus 3 dB ([`peak_sidelobe_db`]) cannot be told
//!    from its sidelobes and are dropped.
//! 2. **Direct path**: within the swing window (the reference ± [`SurveyConfig::max_swing_s`]
//!    ± half a main lobe), the earliest arrival within [`SurveyConfig::direct_floor_db`] of
//!    the window's strongest. Every reflected path is longer than the direct one (triangle
//!    inequality), so at back angles, where an echo may be the strongest arrival, the
//!    earliest one near the reference is still the direct path. The **extent** of the
//!    direct response runs to the last such arrival in the window (off the main beam, the
//!    parts of a large antenna lie at different distances).
//! 3. **Its delay and shape**: the delay τ of one impulse that fits h best over the direct
//!    main lobe (least squares; golden-section search within ±1 sample of the peak), with
//!    the template T(m) = Σₙ w\[n\]·e^(j2π·n·(m/M − Δf·τ)) (the inverse transform of a
//!    band-windowed delay). Then the fit with two templates, the impulse's amplitude
//!    constant and linear over the band (uₙᵏ·w\[n\], k = 0, 1, uₙ = n/(K−1) − ½): an
//!    antenna's gain tilt over the band is absorbed; what is left, Σ|h − fit|² over Σ|h|²
//!    across the main lobe, is large only when an echo lies inside the direct main lobe,
//!    where no gate can reach it.
//! 4. **Nearest echoes that matter**, after the direct path and before it (a late echo
//!    wrapped round the alias-free range): beyond the direct main lobe where the direct
//!    path is within [`SurveyConfig::merged_direct_db`] of the reference, beyond the swing
//!    window elsewhere; at least [`SurveyConfig::echo_floor_db`] relative to the direct
//!    path and [`SurveyConfig::noise_floor_db`] relative to the reference; standing that
//!    much above the two-template fit of the direct response at its delay; and with no
//!    partner of like level as far on the other side (a ripple of the direct response over
//!    the band gives such pairs, Wheeler's paired echoes).
//!
//! # The summary ([`Survey`])
//!
//! Each region keeps the strongest direct level, the extent of the direct responses within
//! [`SurveyConfig::weak_direct_db`] of the reference, the nearest echo either side (its
//! delay, its delay from its own angle's direct path, its level relative to that direct
//! path, its angle) and the worst fit residual where the direct path is within
//! [`SurveyConfig::merged_direct_db`] of the reference.
//!
//! # The choice ([`Survey::choose`])
//!
//! With L half the band window's null-to-null main lobe (mainlobe_width / ((K − 1)·Δf) / 2)
//! and the direct delays [d_lo, d_hi] over all regions:
//!
//! - center c = (d_lo + d_hi)/2;
//! - the gate must hold [d_lo − L, d_hi + L] (the direct main lobe over its whole delay
//!   swing) and stay clear of each echo's main lobe: the room on the limiting side is
//!   e − L − c after, c − e − L before; the margin is that room less d_hi − c + L;
//! - half span = min(room, d_hi − c + L·(1 + [`SurveyConfig::extra_lobes`])), at most a
//!   quarter of the alias-free range: as wide as the echoes allow, which keeps the gate's
//!   own error on the direct response small, and no wider than needed when none is near;
//! - **unseparable** when the margin is negative (needed bandwidth: the one whose main
//!   lobe fits between d_hi and e, mainlobe_width/(e − d_hi)) or when the fit residual says
//!   an echo sits inside the direct main lobe (needed bandwidth estimated from where the
//!   residual peaks). The least-bad gate then keeps the direct peak and closes halfway to
//!   the echo, or just past the direct main lobe when the echo is inside it.

use crate::error::AutogateError;
use crate::fft::Fft;
use crate::gate::Gate;
use crate::grid::Grid;
use crate::window::WindowKind;
use crate::Complex32;

/// Thresholds of the survey (the defaults are [`SurveyConfig::DEFAULT`]).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct SurveyConfig {
    /// How far the direct path may move from the reference delay, s (an antenna under test
    /// off the turntable axis by r moves it by up to r/c).
    pub max_swing_s: f32,
    /// Within the swing window, the direct path is the earliest arrival at least this
    /// strong relative to the window's strongest, dB (negative).
    pub direct_floor_db: f32,
    /// An echo matters when it is at least this strong relative to its angle's direct path,
    /// dB (−40 dB moves a gated value by at most ±0.09 dB).
    pub echo_floor_db: f32,
    /// A fit residual at least this high (dB of the main lobe's energy) means an echo
    /// inside the direct main lobe.
    pub merged_floor_db: f32,
    /// The fit residual counts only where the direct path is within this of the strongest
    /// direct path, dB (negative): off the main beam an antenna's response changes over the
    /// band and no longer looks like one impulse.
    pub merged_direct_db: f32,
    /// Direct paths further below the strongest direct path of the scan (dB, negative) do
    /// not set the direct delay range (near a pattern null the direct response is spread
    /// over the band's changes and its peak is no delay).
    pub weak_direct_db: f32,
    /// Echoes further below the strongest direct path of the scan (dB, negative) do not
    /// matter: they change no pattern level worth measuring.
    pub noise_floor_db: f32,
    /// Half main lobes kept beyond the direct main lobe when no echo limits the gate.
    pub extra_lobes: f32,
}

impl SurveyConfig {
    /// 1 ns swing, −20 dB direct floor, −40 dB echo floor, −20 dB merged floor within
    /// 10 dB of the strongest direct path, −20 dB weak direct, −55 dB noise floor, eight
    /// extra half main lobes.
    pub const DEFAULT: SurveyConfig = SurveyConfig {
        max_swing_s: 1e-9,
        direct_floor_db: -20.0,
        echo_floor_db: -40.0,
        merged_floor_db: -20.0,
        merged_direct_db: -10.0,
        weak_direct_db: -20.0,
        noise_floor_db: -55.0,
        extra_lobes: 8.0,
    };

    fn check(&self) -> Result<(), AutogateError> {
        let all = [
            self.direct_floor_db,
            self.echo_floor_db,
            self.merged_floor_db,
            self.merged_direct_db,
            self.weak_direct_db,
            self.noise_floor_db,
        ];
        if all.iter().any(|v| !v.is_finite() || *v >= 0.0) {
            return Err(AutogateError::Threshold);
        }
        let positive = |v: f32| v.is_finite() && v >= 0.0;
        if !positive(self.extra_lobes) || !positive(self.max_swing_s) {
            return Err(AutogateError::Threshold);
        }
        Ok(())
    }
}

/// What one impulse response says (see the module notes).
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Look {
    /// Delay of the direct path, s, taken within half the alias-free range of the
    /// reference (so it may lie below 0 or beyond the alias-free range).
    pub direct_s: f32,
    /// Level of the direct path, dB (of |h|², any reference).
    pub direct_db: f32,
    /// First and last arrival of the direct response within the swing window, s (one
    /// arrival on the main beam; off it, the parts of an antenna at different distances).
    pub extent_s: (f32, f32),
    /// Nearest echo that matters after the direct path: delay beyond it (s, > 0) and level
    /// relative to it (dB).
    pub after: Option<(f32, f32)>,
    /// Nearest echo that matters before the direct path (a late echo wrapped around the
    /// alias-free range): delay beyond the direct path (s, < 0) and relative level (dB).
    pub before: Option<(f32, f32)>,
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
    // The window's samples once (the same for every ν).
    let mut ws = [0.0f64; SAMPLES];
    for (n, w) in ws.iter_mut().enumerate() {
        *w = kind.at((n as f64 + 0.5) / SAMPLES as f64);
    }
    let mag = |nu: f64| {
        let (mut re, mut im) = (0.0f64, 0.0f64);
        for (n, &w) in ws.iter().enumerate() {
            let x = (n as f64 + 0.5) / SAMPLES as f64;
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

/// Σₙ w\[n\]·e^(j2π·n·x), x in turns: the phasor of each term by one complex
/// multiplication from an earlier one, in f64 (its rounding after the 1601 steps of the
/// longest band is about 1e-13, far below the f32 sum's), four interleaved runs so that the
/// multiplications do not wait on each other (a sine and cosine per term cost several times
/// as much, and this sum is most of the survey's work).
fn template(band: &[f32], x_turns: f64) -> Complex32 {
    let (z, step4) = four_phasors(x_turns);
    let mut z = z;
    let mut acc = [Complex32::new(0.0, 0.0); 4];
    let mut quads = band.chunks_exact(4);
    for w in &mut quads {
        for k in 0..4 {
            acc[k] += Complex32::new(w[k] * z[k].re as f32, w[k] * z[k].im as f32);
            z[k] *= step4;
        }
    }
    for (k, &w) in quads.remainder().iter().enumerate() {
        acc[k] += Complex32::new(w * z[k].re as f32, w * z[k].im as f32);
    }
    (acc[0] + acc[1]) + (acc[2] + acc[3])
}

/// e^(j2π·k·x) for k = 0..3, and e^(j2π·4x): the starts and the step of [`template`]'s four
/// runs.
fn four_phasors(x_turns: f64) -> ([num_complex::Complex64; 4], num_complex::Complex64) {
    let one = num_complex::Complex64::new(1.0, 0.0);
    let s1 = unit_turns(x_turns);
    let s2 = s1 * s1;
    ([one, s1, s2, s2 * s1], s2 * s2)
}

/// e^(j2π·x), x in turns (the fraction of a turn only, so that a large x keeps its
/// precision).
fn unit_turns(x_turns: f64) -> num_complex::Complex64 {
    let a = 2.0 * core::f64::consts::PI * (x_turns - libm::floor(x_turns));
    num_complex::Complex64::new(libm::cos(a), libm::sin(a))
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

/// The strongest sample of an impulse response from [`Gate::impulse_response`]: its delay
/// (s, parabolic between samples) and level (dB). The first pass of a survey: the
/// strongest over all angles is the direct path at the main beam, the reference for
/// [`look`]. `None` when the response is all zero.
pub fn strongest_arrival<const M: usize>(gate: &Gate<M>, h: &[Complex32; M]) -> Option<(f32, f32)>
where
    [Complex32; M]: Fft,
{
    let e = |m: usize| h[m % M].norm_sqr();
    let mut best = (0usize, 0.0f32);
    for m in 0..M {
        if e(m) > best.1 {
            best = (m, e(m));
        }
    }
    if best.1 <= 0.0 || !best.1.is_finite() {
        return None;
    }
    let m = best.0;
    let t = (m as f64 + parabolic(e(m + M - 1), e(m), e(m + 1))) * gate.grid().time_step_s(M);
    Some((t as f32, power_db(best.1)))
}

/// Looks at one impulse response from [`Gate::impulse_response`] of `gate` (see the module
/// notes), the direct path searched within [`SurveyConfig::max_swing_s`] plus half a main
/// lobe of the reference's delay; `reference` is the first pass's [`strongest_arrival`]
/// over the scan (delay s, level dB); `sidelobe_db` is [`peak_sidelobe_db`] of the gate's
/// band window. `None` when the response is all zero or shows nothing near the reference.
pub fn look<const M: usize>(
    gate: &Gate<M>,
    h: &[Complex32; M],
    sidelobe_db: f32,
    cfg: &SurveyConfig,
    reference: (f32, f32),
) -> Option<Look>
where
    [Complex32; M]: Fft,
{
    let r = Response { h };
    let strongest = (0..M).map(|m| r.e(m)).fold(0.0f32, f32::max);
    if strongest <= 0.0 || !strongest.is_finite() {
        return None;
    }
    let grid = gate.grid();
    let dt = grid.time_step_s(M);
    let lobe = half_lobe_s(grid, gate.config().band_window);
    let half = (lobe / dt) as usize + 1;
    let mask = strongest * libm::powf(10.0, 0.1 * (sidelobe_db + 3.0).min(-3.0));
    let w = (((f64::from(cfg.max_swing_s) + lobe) / dt) as usize + 1).min(M / 2 - 1);
    let d = r.direct(f64::from(reference.0) / dt, w, mask, cfg.direct_floor_db)?;
    let fit = fit_direct(gate, h, d.p, half);
    let direct_e = fit.peak_e.max(r.e(d.p));
    let direct_samples = d.first + fit.offset;
    let noise = libm::powf(10.0, 0.1 * (reference.1 + cfg.noise_floor_db));
    let echo_floor = (direct_e * libm::powf(10.0, 0.1 * cfg.echo_floor_db))
        .max(mask)
        .max(noise);
    // Where the direct path is strong (near the main beam) an arrival beyond the main lobe
    // is an echo; elsewhere only one beyond the swing window is (see `extent_s`).
    let strong = direct_e >= libm::powf(10.0, 0.1 * (reference.1 + cfg.merged_direct_db));
    let starts = if strong {
        (half, half)
    } else {
        (half.max(2 * w + 1 - d.jp), half.max(d.jp + 1))
    };
    let band = &gate.band_window()[..gate.points().min(M)];
    let (after, before) = r.nearest_echoes(band, &fit, d.p, starts, echo_floor);
    let to_db = |(t, e): (f64, f32)| ((t * dt) as f32, power_db(e / direct_e));
    Some(Look {
        direct_s: (direct_samples * dt) as f32,
        extent_s: (
            (direct_samples * dt) as f32,
            (d.last.max(direct_samples) * dt) as f32,
        ),
        direct_db: power_db(direct_e),
        after: after.map(to_db),
        before: before.map(to_db),
        residual_db: fit.residual_db,
        residual_excess_s: (fit.residual_offset_samples * dt) as f32,
    })
}

/// An arrival: its distance from the fitted direct path (samples, signed) and its |h|².
type Arrival = Option<(f64, f32)>;

/// An impulse response, read circularly.
struct Response<'a, const M: usize> {
    h: &'a [Complex32; M],
}

/// The direct path within the swing window.
struct Direct {
    /// Its sample.
    p: usize,
    /// Its place in the window.
    jp: usize,
    /// Its sample, unwrapped next to the reference.
    first: f64,
    /// The last arrival of the direct response in the window, unwrapped samples.
    last: f64,
}

impl<const M: usize> Response<'_, M> {
    fn e(&self, m: usize) -> f32 {
        self.h[m % M].norm_sqr()
    }

    fn is_max(&self, m: usize) -> bool {
        let (p, n, v) = (self.e(m + M - 1), self.e(m + 1), self.e(m));
        v > 0.0 && v >= p && v >= n && (v > p || v > n)
    }

    /// Offset of the peak at `m` between samples (parabolic).
    fn vertex(&self, m: usize) -> f64 {
        parabolic(self.e(m + M - 1), self.e(m), self.e(m + 1))
    }

    /// The earliest arrival within `floor_db` of the strongest in the window of ±`w`
    /// samples around `r` (samples), not below `mask`; and the last such arrival.
    fn direct(&self, r: f64, w: usize, mask: f32, floor_db: f32) -> Option<Direct> {
        let r0 = (libm::floor(r) as i64).rem_euclid(M as i64) as usize;
        let at = |j: usize| (r0 + M - w + j) % M;
        let top = (0..=2 * w)
            .map(at)
            .filter(|&m| self.is_max(m))
            .map(|m| self.e(m))
            .fold(0.0f32, f32::max);
        let floor = (top * libm::powf(10.0, 0.1 * floor_db)).max(mask);
        let in_direct = |j: usize| self.is_max(at(j)) && self.e(at(j)) >= floor;
        let jp = (0..=2 * w).find(|&j| in_direct(j))?;
        let jq = (0..=2 * w).rev().find(|&j| in_direct(j))?;
        // Unwrapped: the window starts at r0 − w.
        let base = libm::floor(r) - w as f64;
        let last = if jq > jp {
            base + jq as f64 + self.vertex(at(jq))
        } else {
            f64::NEG_INFINITY
        };
        Some(Direct {
            p: at(jp),
            jp,
            first: base + jp as f64,
            last,
        })
    }

    /// The nearest echo after and before the direct path at `p` (see the module notes):
    /// its distance from the fitted direct path in samples (signed) and its |h|².
    fn nearest_echoes(
        &self,
        band: &[f32],
        fit: &Fit,
        p: usize,
        (start_after, start_before): (usize, usize),
        floor: f32,
    ) -> (Arrival, Arrival) {
        // What stands above the two-template fit of the direct response there.
        let above_model = |m: usize, o: f64| {
            let t = template2(band, (o - fit.offset) / M as f64).map(c64);
            let model = fit.c[0] * t[0] + fit.c[1] * t[1];
            (c64(self.h[m % M]) - model).norm_sqr() >= f64::from(floor)
        };
        // A partner of like level (within 6 dB) as far on the other side.
        let paired = |m: usize, mirror: usize| {
            (0..3).map(|k| (mirror + M + k - 1) % M).any(|q| {
                let r = self.e(q) / self.e(m);
                self.is_max(q) && (0.25..=4.0).contains(&r)
            })
        };
        let candidate = |m: usize, mirror: usize, o: f64| {
            self.is_max(m) && self.e(m) >= floor && !paired(m, mirror) && above_model(m, o)
        };
        let (mut after, mut before) = (None, None);
        for d in start_after.min(start_before)..M / 2 {
            let (ma, mb) = ((p + d) % M, (p + M - d) % M);
            if after.is_none() && d >= start_after && candidate(ma, mb, d as f64) {
                after = Some((d as f64 + self.vertex(ma) - fit.offset, self.e(ma)));
            }
            if before.is_none() && d >= start_before && candidate(mb, ma, -(d as f64)) {
                before = Some((-(d as f64) + self.vertex(mb) - fit.offset, self.e(mb)));
            }
            if after.is_some() && before.is_some() {
                break;
            }
        }
        (after, before)
    }
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
    /// Offset of the fitted impulse from the peak sample, samples.
    offset: f64,
    /// The two templates' amplitudes.
    c: [num_complex::Complex64; 2],
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
    let s = golden_max(gain, -1.0, 1.0, 22);
    let (num, den) = score(s);
    let a = if den > 0.0 { num / den } else { num };
    // The residual from two templates (the impulse with its amplitude constant and
    // linear over the band): a tilt of the direct response over the band (an antenna's gain
    // growing with frequency) is absorbed, an echo half a ripple's cycle or more away is not.
    let basis = |j: usize| template2(band, (j as f64 - half as f64 - s) / M as f64);
    let mut g = [[num_complex::Complex64::new(0.0, 0.0); 2]; 2];
    let mut b = [num_complex::Complex64::new(0.0, 0.0); 2];
    let mut total = 0.0f64;
    for j in 0..span {
        let v = c64(h[at(j)]);
        let t = basis(j).map(c64);
        total += v.norm_sqr();
        for k in 0..2 {
            b[k] += t[k].conj() * v;
            for l in 0..2 {
                g[k][l] += t[k].conj() * t[l];
            }
        }
    }
    let c = solve2(g, b);
    let mut worst = (half, 0.0f64);
    let mut left = 0.0f64;
    for j in 0..span {
        let t = basis(j).map(c64);
        let fit = c[0] * t[0] + c[1] * t[1];
        let d = (c64(h[at(j)]) - fit).norm_sqr();
        left += d;
        if d > worst.1 {
            worst = (j, d);
        }
    }
    Fit {
        offset: s,
        c,
        peak_e: (a * template(band, 0.0)).norm_sqr(),
        residual_db: if total > 0.0 {
            power_db((left / total) as f32)
        } else {
            -200.0
        },
        residual_offset_samples: libm::fabs(worst.0 as f64 - half as f64 - s).max(1.0),
    }
}

/// The argument in [lo, hi] where `f` (unimodal there) is largest, by `steps` of
/// golden-section search.
fn golden_max(f: impl Fn(f64) -> f32, lo: f64, hi: f64, steps: usize) -> f64 {
    let r = 0.618_034f64;
    let (mut lo, mut hi) = (lo, hi);
    let (mut x1, mut x2) = (hi - r * (hi - lo), lo + r * (hi - lo));
    let (mut g1, mut g2) = (f(x1), f(x2));
    for _ in 0..steps {
        if g1 < g2 {
            lo = x1;
            (x1, g1) = (x2, g2);
            x2 = lo + r * (hi - lo);
            g2 = f(x2);
        } else {
            hi = x2;
            (x2, g2) = (x1, g1);
            x1 = hi - r * (hi - lo);
            g1 = f(x1);
        }
    }
    0.5 * (lo + hi)
}

fn c64(z: Complex32) -> num_complex::Complex64 {
    num_complex::Complex64::new(f64::from(z.re), f64::from(z.im))
}

/// Σₙ w\[n\]·uₙᵏ·e^(j2π·n·x) for k = 0, 1, with uₙ = n/(K − 1) − ½.
fn template2(band: &[f32], x_turns: f64) -> [Complex32; 2] {
    let mut acc = [Complex32::new(0.0, 0.0); 2];
    let step = unit_turns(x_turns);
    let mut p = num_complex::Complex64::new(1.0, 0.0);
    let k1 = band.len().saturating_sub(1).max(1) as f32;
    for (n, &w) in band.iter().enumerate() {
        let z = Complex32::new(w * p.re as f32, w * p.im as f32);
        let u = n as f32 / k1 - 0.5;
        acc[0] += z;
        acc[1] += z * u;
        p *= step;
    }
    acc
}

/// Solves the 2×2 Hermitian system g·c = b; a singular one falls back to the first
/// template alone.
fn solve2(
    g: [[num_complex::Complex64; 2]; 2],
    b: [num_complex::Complex64; 2],
) -> [num_complex::Complex64; 2] {
    let zero = num_complex::Complex64::new(0.0, 0.0);
    let det = g[0][0] * g[1][1] - g[0][1] * g[1][0];
    let scale = g[0][0].norm() * g[1][1].norm();
    if det.norm() > 1e-9 * scale {
        return [
            (b[0] * g[1][1] - g[0][1] * b[1]) / det,
            (g[0][0] * b[1] - g[1][0] * b[0]) / det,
        ];
    }
    if g[0][0].norm() > 0.0 {
        [b[0] / g[0][0], zero]
    } else {
        [zero, zero]
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
    /// Nearest echo that matters after the direct path, if any.
    pub after: Option<Echo>,
    /// Nearest echo that matters before the direct path (wrapped), if any.
    pub before: Option<Echo>,
    /// Worst fit residual where the direct path is strong: dB, angle (degrees), residual
    /// excess delay (s).
    pub residual: (f32, f32, f32),
}

/// An echo found in the data.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Echo {
    /// Its delay, s, unwrapped next to its angle's direct path (below 0 or beyond the
    /// alias-free range for a wrapped echo near the ends).
    pub delay_s: f32,
    /// Its delay beyond its angle's direct path, s (negative: before it, wrapped).
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
        after: None,
        before: None,
        residual: (-200.0, 0.0, 0.0),
    };
}

/// The running summary of a scan's impulse responses in `R` angle regions (see the
/// module notes).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Survey<const R: usize> {
    cfg: SurveyConfig,
    regions: [Region; R],
    reference_db: f32,
}

/// Why no gate can separate the direct path from an echo.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Unseparable {
    /// The nearest echo comes within the direct main lobe's end plus its own half main
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
    /// Gate center, s, within the alias-free range.
    pub center_s: f64,
    /// Gate span, s.
    pub span_s: f64,
    /// Earliest direct delay, s.
    pub direct_lo_s: f64,
    /// Latest direct delay, s.
    pub direct_hi_s: f64,
    /// Half the band window's main lobe, s.
    pub half_lobe_s: f64,
    /// The echo that limits the gate: the nearest that matters over all regions.
    pub echo: Option<Echo>,
    /// Room between the gate's need and that echo's main lobe, s: (e − L) − (d_hi + L)
    /// after, (d_lo − L) − (e + L) before; `None` without an echo.
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
            reference_db: f32::NEG_INFINITY,
        })
    }

    /// Sets the level of the strongest direct path of the scan (dB, the first pass's
    /// [`strongest_arrival`]); without it, the strongest direct path seen so far. The fit
    /// residual counts only where the direct path is within
    /// [`SurveyConfig::merged_direct_db`] of it.
    pub fn set_reference_db(&mut self, level_db: f32) {
        if level_db.is_finite() {
            self.reference_db = level_db;
        }
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
        let cfg = self.cfg;
        self.reference_db = self.reference_db.max(l.direct_db);
        let reference_db = self.reference_db;
        let Some(r) = self.regions.get_mut(i) else {
            return;
        };
        r.looks = r.looks.saturating_add(1);
        // The direct range (and the fit residual) come from angles whose direct path is
        // within the weak-direct (merged-direct) distance of the strongest of the scan.
        r.direct_db = r.direct_db.max(l.direct_db);
        if l.direct_db >= reference_db + cfg.weak_direct_db {
            r.direct_lo_s = r.direct_lo_s.min(l.extent_s.0);
            r.direct_hi_s = r.direct_hi_s.max(l.extent_s.1);
        }
        let echo = |(x, rel): (f32, f32)| Echo {
            delay_s: l.direct_s + x,
            excess_s: x,
            relative_db: rel,
            angle_deg,
        };
        if let Some(x) = l.after {
            if r.after.is_none_or(|e| x.0 < e.excess_s) {
                r.after = Some(echo(x));
            }
        }
        if let Some(x) = l.before {
            if r.before.is_none_or(|e| x.0 > e.excess_s) {
                r.before = Some(echo(x));
            }
        }
        let strong = l.direct_db >= reference_db + cfg.merged_direct_db;
        if strong && l.residual_db > r.residual.0 {
            r.residual = (l.residual_db, angle_deg, l.residual_excess_s);
        }
    }

    /// The worst fit residual, when it says an echo sits inside the direct main lobe.
    fn merged(&self, band_window: WindowKind) -> Option<Unseparable> {
        let (residual_db, angle_deg, excess_s) = self
            .regions
            .iter()
            .filter(|r| r.looks > 0)
            .map(|r| r.residual)
            .max_by(|a, b| a.0.total_cmp(&b.0))?;
        (residual_db >= self.cfg.merged_floor_db).then(|| Unseparable::Merged {
            residual_db,
            angle_deg,
            needed_bandwidth_hz: needed_bandwidth(band_window, f64::from(excess_s)),
        })
    }

    /// Chooses the gate (see the module notes) for a sweep on `grid` with `band_window`,
    /// gated on an `fft_size`-point transform.
    pub fn choose(
        &self,
        grid: &Grid,
        band_window: WindowKind,
        fft_size: usize,
    ) -> Result<Choice, AutogateError> {
        let seen = || self.regions.iter().filter(|r| r.looks > 0);
        let strongest = seen()
            .map(|r| r.direct_db)
            .fold(f32::NEG_INFINITY, f32::max);
        if !strongest.is_finite() {
            return Err(AutogateError::NothingSeen);
        }
        let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
        for r in seen() {
            lo = lo.min(f64::from(r.direct_lo_s));
            hi = hi.max(f64::from(r.direct_hi_s));
        }
        if !(lo.is_finite() && hi.is_finite()) {
            return Err(AutogateError::NothingSeen);
        }
        let l = half_lobe_s(grid, band_window);
        let c = 0.5 * (lo + hi);
        // Room either side of the center before each echo's main lobe; the tighter one
        // limits the (symmetric) gate.
        let after = seen()
            .filter_map(|r| r.after)
            .map(|e| (e, f64::from(e.delay_s) - l - c, f64::from(e.delay_s) - hi))
            .min_by(|a, b| a.1.total_cmp(&b.1));
        let before = seen()
            .filter_map(|r| r.before)
            .map(|e| (e, c - f64::from(e.delay_s) - l, lo - f64::from(e.delay_s)))
            .min_by(|a, b| a.1.total_cmp(&b.1));
        let limit = match (after, before) {
            (Some(a), Some(b)) => Some(if a.1 <= b.1 { a } else { b }),
            (a, b) => a.or(b),
        };
        let need = hi - c + l;
        let roomy_half = need + l * f64::from(self.cfg.extra_lobes);
        let mut unseparable = None;
        let (mut half, margin) = match limit {
            Some((_, room, _)) if room >= need => (room.min(roomy_half), Some(room - need)),
            Some((_, room, gap)) => {
                unseparable = Some(Unseparable::TooClose {
                    needed_bandwidth_hz: needed_bandwidth(band_window, gap),
                });
                // Keep the direct peak, close halfway to the echo.
                ((room + l - (hi - c)) * 0.5 + (hi - c), Some(room - need))
            }
            None => (roomy_half, None),
        };
        if let Some(m) = self.merged(band_window) {
            // Keep the direct main lobe, no more: what lies in it cannot be gated away.
            half = half.min(need);
            unseparable = Some(m);
        }
        let dt = grid.time_step_s(fft_size.max(1));
        let half = half.min(0.25 * grid.alias_free_s()).max(2.0 * dt);
        let a = grid.alias_free_s();
        Ok(Choice {
            center_s: (c - a * libm::floor(c / a)).clamp(0.0, a * (1.0 - 1e-9)),
            span_s: 2.0 * half,
            direct_lo_s: lo,
            direct_hi_s: hi,
            half_lobe_s: l,
            echo: limit.map(|x| x.0),
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

    /// The templates against their sums written out term by term in f64 (each phasor by
    /// its own cosine and sine; the definition, no shortcut): within 2e-6 of the largest
    /// term sum for bands of 1 to 1601 points and x from −3 to 3 turns.
    #[test]
    fn templates_equal_their_sums_term_by_term() {
        for k in [1usize, 2, 3, 5, 201, 802, 1601] {
            let mut store = [0.0f32; 1601];
            let band = &mut store[..k];
            let last = k.saturating_sub(1).max(1) as f64;
            for (n, w) in band.iter_mut().enumerate() {
                *w = WindowKind::Kaiser { beta: 6.0 }.at(n as f64 / last) as f32;
            }
            let band = &*band;
            let norm: f64 = band.iter().map(|&w| f64::from(w)).sum();
            for x in [-3.0, -0.37, -0.001, 0.0, 1e-4, 0.013, 0.25, 0.5, 2.9] {
                let (mut re, mut im, mut re1, mut im1) = (0.0f64, 0.0, 0.0, 0.0);
                for (n, &w) in band.iter().enumerate() {
                    let a = 2.0 * core::f64::consts::PI * n as f64 * x;
                    let u = n as f64 / (k.saturating_sub(1).max(1)) as f64 - 0.5;
                    re += f64::from(w) * libm::cos(a);
                    im += f64::from(w) * libm::sin(a);
                    re1 += f64::from(w) * u * libm::cos(a);
                    im1 += f64::from(w) * u * libm::sin(a);
                }
                let t = template(band, x);
                let [t0, t1] = template2(band, x);
                let close = |z: Complex32, r: f64, i: f64| {
                    libm::hypot(f64::from(z.re) - r, f64::from(z.im) - i) <= 2e-6 * norm
                };
                assert!(close(t, re, im), "K {k}, x {x}: {t} vs {re} {im}");
                assert!(close(t0, re, im), "K {k}, x {x}: {t0}");
                assert!(close(t1, re1, im1), "K {k}, x {x}: {t1} vs {re1} {im1}");
            }
        }
    }

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
            let reference = strongest_arrival(&g, &h).unwrap();
            let l = look(&g, &h, sl, &SurveyConfig::DEFAULT, reference).unwrap();
            assert!(
                (f64::from(l.direct_s) - t).abs() < 2e-12,
                "{t}: {}",
                l.direct_s
            );
            assert!(l.residual_db < -40.0, "{}", l.residual_db);
            assert!(l.after.is_none() && l.before.is_none());
        }
    }

    #[test]
    fn a_weak_direct_path_before_a_strong_echo_is_still_the_direct_path() {
        let g = gate();
        let sl = peak_sidelobe_db(g.config().band_window);
        let h = response(&g, &[(10e-9, 0.1), (16e-9, 1.0)]);
        let reference = strongest_arrival(&g, &response(&g, &[(10e-9, 1.0)])).unwrap();
        let l = look(&g, &h, sl, &SurveyConfig::DEFAULT, reference).unwrap();
        assert!((f64::from(l.direct_s) - 10e-9).abs() < 5e-12);
        let (t, rel) = l.after.unwrap();
        assert!((f64::from(t) - 6e-9).abs() < 0.1e-9);
        assert!((rel - 20.0).abs() < 0.5, "{rel}");
    }

    #[test]
    fn the_gate_closes_before_the_earliest_echo_of_any_region() {
        let g = gate();
        let sl = peak_sidelobe_db(g.config().band_window);
        let mut s = Survey::<12>::new(SurveyConfig::DEFAULT).unwrap();
        let reference = strongest_arrival(&g, &response(&g, &[(10.1e-9, 1.0)])).unwrap();
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
            s.add(
                a,
                &look(&g, &h, sl, &SurveyConfig::DEFAULT, reference).unwrap(),
            );
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
        assert!(e.excess_s > 0.0);
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
        let reference = strongest_arrival(&g, &h).unwrap();
        s.add(
            0.0,
            &look(&g, &h, sl, &SurveyConfig::DEFAULT, reference).unwrap(),
        );
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
        let reference = strongest_arrival(&g, &h).unwrap();
        s.add(
            0.0,
            &look(&g, &h, sl, &SurveyConfig::DEFAULT, reference).unwrap(),
        );
        let c = s.choose(&grid(), g.config().band_window, M).unwrap();
        assert!(c.unseparable.is_some(), "{c:?}");
        assert!(c.margin_s.is_some_and(|m| m < 0.0), "{c:?}");
    }

    #[test]
    fn a_late_echo_wrapped_round_the_alias_free_range_limits_the_gate_from_before() {
        // Δf = 5 MHz: alias-free range 200 ns. An echo 196 ns after the direct path at 10 ns
        // lands at 6 ns, 4 ns before it.
        let g = gate();
        let sl = peak_sidelobe_db(g.config().band_window);
        let h = response(&g, &[(10e-9, 1.0), (206e-9, 0.3)]);
        let reference = strongest_arrival(&g, &h).unwrap();
        let l = look(&g, &h, sl, &SurveyConfig::DEFAULT, reference).unwrap();
        let (t, _) = l.before.unwrap();
        assert!((f64::from(t) + 4e-9).abs() < 0.05e-9, "{t}");
        assert!(l.after.is_none());
        let mut s = Survey::<4>::new(SurveyConfig::DEFAULT).unwrap();
        s.add(0.0, &l);
        let c = s.choose(&grid(), g.config().band_window, M).unwrap();
        assert!(
            c.center_s - 0.5 * c.span_s >= 6e-9 + c.half_lobe_s - 1e-12,
            "{c:?}"
        );
        assert!(c.unseparable.is_none());
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
