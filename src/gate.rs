//! Time gating of a swept S21 with edge renormalization, evaluated two ways.
//!
//! The chain, for a sweep of K points zero-padded to an M-point transform:
//!
//! 1. multiply by the band window w\[n\] (n < K), pad with zeros to M;
//! 2. inverse FFT → impulse response h\[m\] at times m/(M·Δf), m < M, covering the
//!    alias-free range 1/Δf (responses later than that wrap around);
//! 3. multiply by the time gate g\[m\] (a window of the chosen shape spanning the gate, placed
//!    circularly around the gate centre, zero outside);
//! 4. forward FFT → gated spectrum Y\[k\], k < K;
//! 5. edge renormalization: Y\[k\] / r\[k\], where r\[k\] = Yᵤ\[k\] / u\[k\] is the gated
//!    response Yᵤ of an ideal impulse at the gate centre (u\[n\] = e^(−j2π·n·Δf·t_c)) through
//!    the same chain. An impulse at the gate centre therefore comes back exactly as it went in,
//!    and the ≈ −6 dB droop at the band ends (half of the gate's frequency kernel falls
//!    outside the band) is undone (Dunsmore, "Gating effects in time domain transforms",
//!    ARFTG).
//!
//! **FFT path** ([`Gate::apply`]): the chain as written; gives the whole gated spectrum, the
//! impulse response for display and the echo level.
//!
//! **Kernel path** ([`Gate::apply_kernels`]): the chain is one linear map, and its row for
//! frequency k is `w[n]·G[(k − n) mod M] / r[k]`, where G = FFT(g)/M is the gate's frequency
//! kernel. All rows share G and w, so the gate stores one M-point kernel however many pattern
//! frequencies are previewed; each gated value is then one K-point dot product.
//!
//! Gating is linear: gating a sum of sweeps equals summing the gated sweeps, so a bin of
//! several sweeps is averaged first and gated once.

use crate::error::GateError;
use crate::fft::Fft;
use crate::grid::Grid;
use crate::window::WindowKind;
use crate::Complex32;
use core::f64::consts::PI;

/// Echo level reported when the impulse response holds no energy outside the gate (or none
/// at all), in dB.
pub const ECHO_FLOOR_DB: f32 = -200.0;

/// A second peak inside the gate at least this high relative to the direct peak (dB), and
/// more than half the band window's main lobe away from it, is an echo inside the gate
/// (common practice, no source: well above any band window's sidelobes used here, −31 dB
/// and lower, and below any echo that moves the gated level by more than ±0.9 dB).
pub const ECHO_IN_GATE_THRESHOLD_DB: f32 = -20.0;

/// What one impulse response says about the gate: where the direct path is, how strong the
/// strongest echo outside the gate is, and whether a second peak sits inside the gate.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct GateCheck {
    /// Sample of the strongest response inside the gate (taken as the direct path).
    pub direct_index: u16,
    /// Strongest local maximum outside the gate over the direct peak, in dB (power); may be
    /// above 0 dB when an echo is stronger than the direct path; [`ECHO_FLOOR_DB`] when
    /// nothing lies outside.
    pub echo_to_direct_db: f32,
    /// Energy outside the gate over the total energy, in dB (at most 0 dB).
    pub energy_outside_db: f32,
    /// The strongest sample of the whole response lies inside the gate.
    pub direct_in_gate: bool,
    /// A second peak inside the gate above [`ECHO_IN_GATE_THRESHOLD_DB`].
    pub echo_in_gate: bool,
}

/// Smallest magnitude of the renormalization reference r\[k\] accepted (−80 dB).
pub const RENORM_FLOOR: f32 = 1e-4;

/// What a gate is to do, before validation.
///
/// ```
/// use sweepgate::gate::{Gate, GateConfig};
/// use sweepgate::grid::Grid;
/// use sweepgate::window::WindowKind;
/// use sweepgate::Complex32;
///
/// let grid = Grid::from_start_stop(8e9, 12e9, 801).unwrap(); // Δf = 5 MHz, 200 ns alias-free
/// let cfg = GateConfig {
///     grid,
///     band_window: WindowKind::kaiser_for_sidelobe_db(50.0),
///     center_s: 20e-9,
///     span_s: 4e-9,
///     shape: WindowKind::Tukey { alpha: 0.5 },
///     renormalize: true,
/// };
/// let gate = Gate::<1024>::new(&cfg).unwrap();
///
/// // A response arriving exactly at the gate centre passes unchanged.
/// let mut raw = [Complex32::new(0.0, 0.0); 1024];
/// for (n, v) in raw.iter_mut().take(801).enumerate() {
///     let phase = -2.0 * core::f64::consts::PI * grid.frequency_hz(n) * 20e-9;
///     *v = Complex32::new(phase.cos() as f32, phase.sin() as f32);
/// }
/// let mut out = [Complex32::new(0.0, 0.0); 1024];
/// let echo_db = gate.apply(&raw, &mut out);
/// assert!((out[400] - raw[400]).norm() < 1e-4);
/// assert!(echo_db < -40.0);
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct GateConfig {
    /// The sweep's frequency grid; K = `grid.points()`.
    pub grid: Grid,
    /// Window over the K swept points, applied before the inverse transform.
    pub band_window: WindowKind,
    /// Gate centre, seconds after the VNA's time zero: 0 ≤ centre < 1/Δf.
    pub center_s: f64,
    /// Gate span (full width), seconds: 0 < span < 1/Δf, and at least two time samples.
    pub span_s: f64,
    /// Shape of the gate across its span.
    pub shape: WindowKind,
    /// Divide by the gated response of an ideal impulse at the gate centre.
    pub renormalize: bool,
}

impl GateConfig {
    /// The configuration of a gate not yet configured (see [`Gate::unconfigured`]).
    const UNSET: GateConfig = GateConfig {
        grid: Grid::UNSET,
        band_window: WindowKind::Rectangular,
        center_s: 0.0,
        span_s: 0.0,
        shape: WindowKind::Rectangular,
        renormalize: false,
    };

    /// Checks everything that does not depend on the FFT size.
    fn check(&self) -> Result<(), GateError> {
        if !self.center_s.is_finite() || !self.span_s.is_finite() {
            return Err(GateError::NonFinite);
        }
        if self.span_s <= 0.0 {
            return Err(GateError::SpanNotPositive);
        }
        let alias_free = self.grid.alias_free_s();
        if self.span_s >= alias_free {
            return Err(GateError::SpanBeyondAliasFree);
        }
        if self.center_s < 0.0 || self.center_s >= alias_free {
            return Err(GateError::CenterOutsideAliasFree);
        }
        self.band_window.validate().map_err(GateError::BandWindow)?;
        self.shape.validate().map_err(GateError::GateShape)?;
        Ok(())
    }
}

/// A validated gate for FFT size `M`, with every window and kernel precomputed.
///
/// Holds 2·M `f32` and 2·M [`Complex32`] (24 KiB for M = 1024). Applying it never fails and
/// never allocates.
pub struct Gate<const M: usize>
where
    [Complex32; M]: Fft,
{
    cfg: GateConfig,
    points: usize,
    band: [f32; M],
    gate: [f32; M],
    kernel: [Complex32; M],
    inv_renorm: [Complex32; M],
}

/// Precomputed kernel-path set-up for `F` pattern frequencies of a `Gate<M>`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Kernels<const M: usize, const F: usize> {
    indices: [u16; F],
    inv_renorm: [Complex32; F],
}

impl<const M: usize, const F: usize> Kernels<M, F> {
    /// Placeholder until [`Gate::kernels`] fills it in (every index 0, factor 0).
    pub(crate) const fn unset() -> Self {
        Self {
            indices: [0; F],
            inv_renorm: [ZERO; F],
        }
    }

    /// The grid indices of the pattern frequencies, in the order given.
    pub fn indices(&self) -> [usize; F] {
        self.indices.map(usize::from)
    }
}

const ZERO: Complex32 = Complex32::new(0.0, 0.0);

impl<const M: usize> Gate<M>
where
    [Complex32; M]: Fft,
{
    /// Validates `cfg` for FFT size `M` and precomputes the windows, the gate kernel and the
    /// renormalization.
    pub fn new(cfg: &GateConfig) -> Result<Self, GateError> {
        let mut g = Self::unconfigured();
        g.configure(cfg)?;
        Ok(g)
    }

    /// A gate with no configuration yet: every table zero, K = 0, so applying it gives
    /// zeros. [`Gate::configure`] makes it usable. Being `const`, it can initialise a
    /// `static`, so that a small board builds its gate in place instead of moving a finished
    /// 24 KiB gate (M = 1024) around its stack.
    ///
    /// ```
    /// use sweepgate::gate::{Gate, GateConfig};
    /// use sweepgate::grid::Grid;
    /// use sweepgate::window::WindowKind;
    ///
    /// let mut gate = Gate::<1024>::unconfigured();
    /// assert_eq!(gate.points(), 0);
    /// let cfg = GateConfig {
    ///     grid: Grid::from_start_stop(8e9, 12e9, 801).unwrap(),
    ///     band_window: WindowKind::Hann,
    ///     center_s: 20e-9,
    ///     span_s: 4e-9,
    ///     shape: WindowKind::Tukey { alpha: 0.5 },
    ///     renormalize: true,
    /// };
    /// gate.configure(&cfg).unwrap();
    /// assert_eq!(gate.points(), 801);
    /// ```
    pub const fn unconfigured() -> Self {
        Self {
            cfg: GateConfig::UNSET,
            points: 0,
            band: [0.0; M],
            gate: [0.0; M],
            kernel: [ZERO; M],
            inv_renorm: [ZERO; M],
        }
    }

    /// Validates `cfg` for FFT size `M` and computes the windows, the gate kernel and the
    /// renormalization in this gate's own storage, replacing any earlier configuration. On
    /// an error the gate is left unconfigured (K = 0: applying it gives zeros).
    pub fn configure(&mut self, cfg: &GateConfig) -> Result<(), GateError> {
        self.cfg = *cfg;
        let built = self.build();
        if built.is_err() {
            self.points = 0;
        }
        built
    }

    /// Validates the stored configuration and computes everything from it, in place.
    fn build(&mut self) -> Result<(), GateError> {
        let cfg = self.cfg;
        cfg.check()?;
        let points = cfg.grid.points();
        if points > M {
            return Err(GateError::PointsExceedFftSize {
                points: points as u32,
                fft_size: M as u32,
            });
        }
        let dt = cfg.grid.time_step_s(M);
        if cfg.span_s < 2.0 * dt {
            return Err(GateError::SpanBelowTimeStep);
        }
        self.points = points;
        let g = self;
        // Every table is written whole: the gate may have held another configuration.
        cfg.band_window.fill(&mut g.band[..points]);
        g.band[points..].fill(0.0);

        // Time gate, placed circularly: Δ is the time from the centre, wrapped into
        // [−T/2, T/2) with T = 1/Δf; the shape spans Δ ∈ [−span/2, +span/2].
        let period = cfg.grid.alias_free_s();
        for (m, v) in g.gate.iter_mut().enumerate() {
            let mut d = m as f64 * dt - cfg.center_s;
            d -= period * libm::floor(d / period + 0.5);
            let x = (d + cfg.span_s / 2.0) / cfg.span_s;
            *v = cfg.shape.at(x) as f32;
        }

        // Frequency kernel G = FFT(g)/M, stored reversed, R[j] = G[(M − j) mod M], so that
        // the kernel path walks both its operands forwards.
        let scale = 1.0 / M as f32;
        for (k, &w) in g.kernel.iter_mut().zip(g.gate.iter()) {
            *k = Complex32::new(w * scale, 0.0);
        }
        g.kernel.forward();
        g.kernel[1..].reverse();

        if !cfg.renormalize {
            g.inv_renorm.fill(Complex32::new(1.0, 0.0));
        } else {
            // Ideal impulse at the gate centre through the same chain, computed in place in
            // the renormalization table (no M-sized temporaries: this runs on small boards).
            // The start-frequency phase is a constant factor and cancels in the ratio.
            let u = |n: usize| unit_phasor_turns(-(n as f64) * cfg.grid.step_hz() * cfg.center_s);
            for (n, v) in g.inv_renorm.iter_mut().enumerate() {
                *v = if n < points { u(n) } else { ZERO };
            }
            run_chain(&g.band, &g.gate, points, &mut g.inv_renorm);
            for (k, v) in g.inv_renorm.iter_mut().enumerate() {
                if k >= points {
                    *v = Complex32::new(1.0, 0.0);
                    continue;
                }
                // r = y/u, so 1/r = u/y.
                let (y, uk) = (*v, u(k));
                if (y * uk.conj()).norm() < RENORM_FLOOR {
                    return Err(GateError::RenormalizationIllConditioned { index: k as u32 });
                }
                *v = uk / y;
            }
        }
        Ok(())
    }

    /// The configuration this gate was built from.
    pub fn config(&self) -> &GateConfig {
        &self.cfg
    }

    /// The sweep's frequency grid.
    pub fn grid(&self) -> &Grid {
        &self.cfg.grid
    }

    /// Points per sweep, K.
    pub fn points(&self) -> usize {
        self.points
    }

    /// Band window values (first K entries meaningful).
    pub fn band_window(&self) -> &[f32; M] {
        &self.band
    }

    /// Time gate values at the impulse-response samples, for display.
    pub fn gate_window(&self) -> &[f32; M] {
        &self.gate
    }

    /// Windowed, zero-padded impulse response of `raw[..K]`: sample m lies at
    /// `grid().time_s(M, m)`.
    pub fn impulse_response(&self, raw: &[Complex32; M], out: &mut [Complex32; M]) {
        for (n, ((o, x), &w)) in out
            .iter_mut()
            .zip(raw.iter())
            .zip(self.band.iter())
            .enumerate()
        {
            *o = if n < self.points { *x * w } else { ZERO };
        }
        out.inverse();
    }

    /// Echo level of an impulse response from [`Gate::impulse_response`]: energy outside the
    /// gate span over the total energy, in dB; [`ECHO_FLOOR_DB`] when either is zero.
    pub fn echo_level_db(&self, impulse_response: &[Complex32; M]) -> f32 {
        let (mut outside, mut total) = (0.0f32, 0.0f32);
        for (h, &g) in impulse_response.iter().zip(self.gate.iter()) {
            let e = h.norm_sqr();
            total += e;
            if g == 0.0 {
                outside += e;
            }
        }
        echo_db(outside, total)
    }

    /// Checks an impulse response from [`Gate::impulse_response`] against this gate (see
    /// [`GateCheck`]). Two passes over M samples; no allocation.
    pub fn check(&self, impulse_response: &[Complex32; M]) -> GateCheck {
        let h = impulse_response;
        let (mut outside, mut total) = (0.0f32, 0.0f32);
        let (mut in_i, mut in_e, mut all_e) = (0usize, -1.0f32, 0.0f32);
        let mut out_peak = 0.0f32;
        for (m, (v, &g)) in h.iter().zip(self.gate.iter()).enumerate() {
            let e = v.norm_sqr();
            total += e;
            all_e = all_e.max(e);
            if g == 0.0 {
                outside += e;
                if self.is_local_max(h, m) {
                    out_peak = out_peak.max(e);
                }
            } else if e > in_e {
                (in_i, in_e) = (m, e);
            }
        }
        // Half the band window's null-to-null main lobe, in samples: w·M/(K − 1) / 2.
        let k1 = self.points.saturating_sub(1).max(1) as f64;
        let half_lobe = (0.5 * self.cfg.band_window.mainlobe_width() * M as f64 / k1) as usize;
        let floor = in_e * libm::powf(10.0, 0.1 * ECHO_IN_GATE_THRESHOLD_DB);
        let mut echo_in_gate = false;
        for (m, &g) in self.gate.iter().enumerate() {
            let d = m.abs_diff(in_i);
            let d = d.min(M - d);
            if g != 0.0 && d > half_lobe && self.is_local_max(h, m) {
                echo_in_gate |= h[m].norm_sqr() >= floor && in_e > 0.0;
            }
        }
        GateCheck {
            direct_index: in_i.min(usize::from(u16::MAX)) as u16,
            echo_to_direct_db: echo_db(out_peak, in_e.max(0.0)),
            energy_outside_db: echo_db(outside, total),
            direct_in_gate: in_e > 0.0 && in_e >= all_e,
            echo_in_gate,
        }
    }

    /// Whether sample `m` of `h` is at least as strong as both circular neighbours and
    /// stronger than one of them.
    fn is_local_max(&self, h: &[Complex32; M], m: usize) -> bool {
        let e = |i: usize| h.get(i % M).map_or(0.0, |v| v.norm_sqr());
        let (prev, here, next) = (e(m + M - 1), e(m), e(m + 1));
        here >= prev && here >= next && (here > prev || here > next)
    }

    /// FFT path: gates `raw[..K]` (entries K.. are ignored), writes the gated spectrum to
    /// `out[..K]` (renormalized if configured; `out[K..]` is zeroed) and returns the echo
    /// level in dB.
    pub fn apply(&self, raw: &[Complex32; M], out: &mut [Complex32; M]) -> f32 {
        self.impulse_response(raw, out);
        self.gate_forward_renormalize(out)
    }

    /// FFT path in place: `buf[..K]` holds the sweep on entry and the gated spectrum on
    /// return (`buf[K..]` zeroed); returns the echo level in dB. `scale` multiplies the input
    /// first (for the 1/count of a sum of sweeps; the echo level, a ratio, does not change).
    /// Needs no second M-point buffer.
    pub fn apply_in_place(&self, buf: &mut [Complex32; M], scale: f32) -> f32 {
        self.window(buf, scale);
        buf.inverse();
        self.gate_forward_renormalize(buf)
    }

    /// [`Gate::apply_in_place`] that also checks the impulse response ([`Gate::check`])
    /// before gating it; the check's `energy_outside_db` is what `apply_in_place` returns.
    pub fn apply_in_place_checked(&self, buf: &mut [Complex32; M], scale: f32) -> GateCheck {
        self.window(buf, scale);
        buf.inverse();
        let check = self.check(buf);
        self.gate_forward_renormalize(buf);
        check
    }

    /// Steps 3–5 on an impulse response: echo level and time gate in one pass, forward FFT,
    /// renormalization; returns the echo level.
    fn gate_forward_renormalize(&self, buf: &mut [Complex32; M]) -> f32 {
        let (mut outside, mut total) = (0.0f32, 0.0f32);
        for (h, &g) in buf.iter_mut().zip(self.gate.iter()) {
            let e = h.norm_sqr();
            total += e;
            if g == 0.0 {
                outside += e;
            }
            *h *= g;
        }
        buf.forward();
        let echo_db = echo_db(outside, total);
        for (k, o) in buf.iter_mut().enumerate() {
            *o = if k < self.points {
                *o * self.inv_renorm[k]
            } else {
                ZERO
            };
        }
        echo_db
    }

    /// Kernel-path set-up for `F` pattern frequencies given as grid indices (each below K).
    pub fn kernels<const F: usize>(&self, indices: [usize; F]) -> Result<Kernels<M, F>, GateError> {
        let mut k = Kernels {
            indices: [0; F],
            inv_renorm: [ZERO; F],
        };
        for (f, &i) in indices.iter().enumerate() {
            if i >= self.points {
                return Err(GateError::FrequencyIndexOutOfRange {
                    index: i.min(u32::MAX as usize) as u32,
                    points: self.points as u32,
                });
            }
            k.indices[f] = i as u16;
            k.inv_renorm[f] = self.inv_renorm[i];
        }
        Ok(k)
    }

    /// Kernel path: the gated value at each pattern frequency of `kernels`, one K-point dot
    /// product each, equal to [`Gate::apply`] at those frequencies. Never fails: an index
    /// that is not below this gate's K (kernels made for another gate) yields 0.
    ///
    /// Applies the band window on the fly; with more than one frequency,
    /// [`Gate::window`] followed by [`Gate::apply_kernels_windowed`] does less work.
    pub fn apply_kernels<const F: usize>(
        &self,
        kernels: &Kernels<M, F>,
        raw: &[Complex32; M],
        out: &mut [Complex32; F],
    ) {
        self.each_kernel(kernels, out, |k| self.kernel_dot_raw(k, raw));
    }

    /// The first step of the chain in place: `buf[n] *= scale·w[n]` for n < K, zero beyond.
    /// `scale` is free to fold in, say, the 1/count of an average of sweeps.
    pub fn window(&self, buf: &mut [Complex32; M], scale: f32) {
        for (n, (v, &w)) in buf.iter_mut().zip(self.band.iter()).enumerate() {
            *v = if n < self.points {
                *v * (w * scale)
            } else {
                ZERO
            };
        }
    }

    /// Kernel path on a sweep already passed through [`Gate::window`] (with scale 1, the
    /// result equals [`Gate::apply_kernels`] on the raw sweep).
    pub fn apply_kernels_windowed<const F: usize>(
        &self,
        kernels: &Kernels<M, F>,
        windowed: &[Complex32; M],
        out: &mut [Complex32; F],
    ) {
        self.each_kernel(kernels, out, |k| self.kernel_dot(k, windowed));
    }

    fn each_kernel<const F: usize>(
        &self,
        kernels: &Kernels<M, F>,
        out: &mut [Complex32; F],
        dot: impl Fn(usize) -> Complex32,
    ) {
        for ((o, &idx), &inv) in out
            .iter_mut()
            .zip(kernels.indices.iter())
            .zip(kernels.inv_renorm.iter())
        {
            let k = idx as usize;
            *o = if k < self.points { dot(k) * inv } else { ZERO };
        }
    }

    /// Σ x[n]·G[(k − n) mod M] over the K windowed samples, for k < K. With the kernel stored
    /// reversed (R[j] = G[−j mod M]) the term is x[n]·R[(n − k) mod M], two forward runs:
    /// n = 0..k meets R[M − k..M], n = k..K meets R[0..K − k].
    fn kernel_dot(&self, k: usize, windowed: &[Complex32]) -> Complex32 {
        let (head, tail) = windowed[..self.points].split_at(k);
        dot(head, &self.kernel[M - k..]) + dot(tail, &self.kernel[..self.points - k])
    }

    /// As [`Gate::kernel_dot`], applying the band window on the fly.
    fn kernel_dot_raw(&self, k: usize, raw: &[Complex32]) -> Complex32 {
        let (head, tail) = raw[..self.points].split_at(k);
        let (wh, wt) = self.band[..self.points].split_at(k);
        dot_windowed(head, wh, &self.kernel[M - k..])
            + dot_windowed(tail, wt, &self.kernel[..self.points - k])
    }
}

/// Σ x[i]·g[i].
#[inline(always)]
fn dot(xs: &[Complex32], gs: &[Complex32]) -> Complex32 {
    let (mut re, mut im) = (0.0f32, 0.0f32);
    for (x, g) in xs.iter().zip(gs.iter()) {
        re += x.re * g.re - x.im * g.im;
        im += x.re * g.im + x.im * g.re;
    }
    Complex32::new(re, im)
}

/// Σ x[i]·w[i]·g[i].
#[inline(always)]
fn dot_windowed(xs: &[Complex32], ws: &[f32], gs: &[Complex32]) -> Complex32 {
    let (mut re, mut im) = (0.0f32, 0.0f32);
    for ((x, &w), g) in xs.iter().zip(ws.iter()).zip(gs.iter()) {
        let (xr, xi) = (x.re * w, x.im * w);
        re += xr * g.re - xi * g.im;
        im += xr * g.im + xi * g.re;
    }
    Complex32::new(re, im)
}

/// Steps 1–2 in place: band window over `buf[..points]`, zeros beyond, inverse FFT.
fn window_and_invert<const M: usize>(band: &[f32; M], points: usize, buf: &mut [Complex32; M])
where
    [Complex32; M]: Fft,
{
    for (n, (v, &w)) in buf.iter_mut().zip(band.iter()).enumerate() {
        *v = if n < points { *v * w } else { ZERO };
    }
    buf.inverse();
}

/// Steps 3–4 in place: time gate, forward FFT.
fn gate_and_return<const M: usize>(gate: &[f32; M], buf: &mut [Complex32; M])
where
    [Complex32; M]: Fft,
{
    for (v, &g) in buf.iter_mut().zip(gate.iter()) {
        *v *= g;
    }
    buf.forward();
}

/// Steps 1–4 in place, without renormalization.
fn run_chain<const M: usize>(
    band: &[f32; M],
    gate: &[f32; M],
    points: usize,
    buf: &mut [Complex32; M],
) where
    [Complex32; M]: Fft,
{
    window_and_invert(band, points, buf);
    gate_and_return(gate, buf);
}

/// 10·log10(part/whole), [`ECHO_FLOOR_DB`] when either is zero. `part` may exceed `whole`
/// (an echo stronger than the direct path); the result is then above 0 dB.
fn echo_db(part: f32, whole: f32) -> f32 {
    if !(part > 0.0 && whole > 0.0) {
        return ECHO_FLOOR_DB;
    }
    (10.0 * libm::log10f(part / whole)).max(ECHO_FLOOR_DB)
}

/// e^(j2π·turns): the whole turns are dropped in f64, the rest (|phase| ≤ π) is evaluated in
/// f32, which is all the precision the stored value has.
fn unit_phasor_turns(turns: f64) -> Complex32 {
    let phase = (2.0 * PI * (turns - libm::round(turns))) as f32;
    Complex32::new(libm::cosf(phase), libm::sinf(phase))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn config() -> GateConfig {
        GateConfig {
            grid: Grid::from_start_stop(8e9, 12e9, 801).unwrap(),
            band_window: WindowKind::Kaiser { beta: 6.0 },
            center_s: 20e-9,
            span_s: 4e-9,
            shape: WindowKind::Kaiser { beta: 4.0 },
            renormalize: true,
        }
    }

    #[test]
    fn gate_window_is_placed_circularly() {
        let mut cfg = config();
        cfg.center_s = 0.0;
        let g = Gate::<1024>::new(&cfg).unwrap();
        let w = g.gate_window();
        // Centre sample is the window peak; both ends of the record hold halves of it.
        assert!((w[0] - 1.0).abs() < 1e-6);
        assert!(w[1] > 0.0 && w[1023] > 0.0);
        assert!((w[1] - w[1023]).abs() < 1e-6);
        assert_eq!(w[512], 0.0);
    }

    #[test]
    fn kernel_index_beyond_points_gives_zero() {
        let g = Gate::<1024>::new(&config()).unwrap();
        let mut big = config();
        big.grid = Grid::new(8e9, 5e6, 1000).unwrap();
        let gb = Gate::<1024>::new(&big).unwrap();
        let k = gb.kernels([999]).unwrap();
        let raw = [Complex32::new(1.0, 0.0); 1024];
        let mut out = [Complex32::new(9.0, 9.0); 1];
        g.apply_kernels(&k, &raw, &mut out);
        assert_eq!(out[0], ZERO);
    }
}
