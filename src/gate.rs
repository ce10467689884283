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
use crate::fft::{Fft, Microfft, Transform};
use crate::grid::Grid;
use crate::loops;
use crate::window::{cos_sin_turns, WindowKind};
use crate::Complex32;

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
    /// Half the band window's null-to-null main lobe, in impulse-response samples (for
    /// [`Gate::check`]), worked out once at set-up.
    half_lobe: usize,
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
            half_lobe: 0,
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
            self.half_lobe = 0;
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
        // Half the band window's null-to-null main lobe, in samples: w·M/(K − 1) / 2.
        let k1 = points.saturating_sub(1).max(1) as f64;
        self.half_lobe = (0.5 * cfg.band_window.mainlobe_width() * M as f64 / k1) as usize;
        let g = self;
        // Every table is written whole: the gate may have held another configuration.
        cfg.band_window.fill(&mut g.band[..points]);
        g.band[points..].fill(0.0);

        fill_gate(&cfg, dt, &mut g.gate);

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
            let u = impulse_phasors(&cfg);
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
                if (y * uk.conj()).norm_sqr() < RENORM_FLOOR * RENORM_FLOOR {
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
        self.impulse_response_using(&mut Microfft, raw, out);
    }

    /// [`Gate::impulse_response`] with the caller's FFT.
    pub fn impulse_response_using<T: Transform<M>>(
        &self,
        fft: &mut T,
        raw: &[Complex32; M],
        out: &mut [Complex32; M],
    ) {
        for (n, ((o, x), &w)) in out
            .iter_mut()
            .zip(raw.iter())
            .zip(self.band.iter())
            .enumerate()
        {
            *o = if n < self.points { *x * w } else { ZERO };
        }
        fft.inverse(out);
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
        let half_lobe = self.half_lobe;
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
        self.apply_using(&mut Microfft, raw, out)
    }

    /// [`Gate::apply`] with the caller's FFT (the host's SIMD one, say); the same chain.
    pub fn apply_using<T: Transform<M>>(
        &self,
        fft: &mut T,
        raw: &[Complex32; M],
        out: &mut [Complex32; M],
    ) -> f32 {
        self.impulse_response_using(fft, raw, out);
        self.gate_forward_renormalize(fft, out)
    }

    /// FFT path over many sweeps at once, each buffer in place as in [`Gate::apply_in_place`]
    /// with scale 1: `bufs[i][..K]` holds a sweep on entry and its gated spectrum on return
    /// (`bufs[i][K..]` zeroed), `echo_db[i]` its echo level. The transforms of all buffers go
    /// to the caller's FFT in one call each way ([`Transform::inverse_many`],
    /// [`Transform::forward_many`]). Buffers beyond `echo_db`'s length are gated too; levels
    /// beyond `bufs`' length are left alone. The results equal `apply_using` on each sweep.
    pub fn apply_many_using<T: Transform<M>>(
        &self,
        fft: &mut T,
        bufs: &mut [[Complex32; M]],
        echo_db: &mut [f32],
    ) {
        for b in bufs.iter_mut() {
            self.window(b, 1.0);
        }
        fft.inverse_many(bufs);
        let mut levels = echo_db.iter_mut();
        for b in bufs.iter_mut() {
            let e = self.gate_and_measure(b);
            if let Some(l) = levels.next() {
                *l = e;
            }
        }
        fft.forward_many(bufs);
        for b in bufs.iter_mut() {
            self.renormalize(b);
        }
    }

    /// FFT path in place: `buf[..K]` holds the sweep on entry and the gated spectrum on
    /// return (`buf[K..]` zeroed); returns the echo level in dB. `scale` multiplies the input
    /// first (for the 1/count of a sum of sweeps; the echo level, a ratio, does not change).
    /// Needs no second M-point buffer.
    pub fn apply_in_place(&self, buf: &mut [Complex32; M], scale: f32) -> f32 {
        self.window(buf, scale);
        buf.inverse();
        self.gate_forward_renormalize(&mut Microfft, buf)
    }

    /// [`Gate::apply_in_place`] that also checks the impulse response ([`Gate::check`])
    /// before gating it; the check's `energy_outside_db` is what `apply_in_place` returns.
    pub fn apply_in_place_checked(&self, buf: &mut [Complex32; M], scale: f32) -> GateCheck {
        self.apply_in_place_checked_then(buf, scale, |_| {})
    }

    /// [`Gate::apply_in_place_checked`] that also shows the impulse response to `look`
    /// before it is gated (the engine samples it for the impulse-response preview record).
    pub fn apply_in_place_checked_then(
        &self,
        buf: &mut [Complex32; M],
        scale: f32,
        look: impl FnOnce(&[Complex32; M]),
    ) -> GateCheck {
        self.window(buf, scale);
        buf.inverse();
        let check = self.check(buf);
        look(buf);
        self.gate_forward_renormalize(&mut Microfft, buf);
        check
    }

    /// Steps 3–5 on an impulse response: echo level and time gate in one pass, forward FFT,
    /// renormalization; returns the echo level.
    fn gate_forward_renormalize<T: Transform<M>>(
        &self,
        fft: &mut T,
        buf: &mut [Complex32; M],
    ) -> f32 {
        let echo_db = self.gate_and_measure(buf);
        fft.forward(buf);
        self.renormalize(buf);
        echo_db
    }

    /// Step 3 with the echo level: time gate in place, energy outside the gate over the
    /// total, in dB.
    fn gate_and_measure(&self, buf: &mut [Complex32; M]) -> f32 {
        let (outside, total) = loops::gate_and_measure(buf, &self.gate);
        echo_db(outside, total)
    }

    /// Step 5 in place: renormalization of `buf[..K]`, zeros beyond.
    fn renormalize(&self, buf: &mut [Complex32; M]) {
        loops::renormalize(buf, &self.inv_renorm, self.points);
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
        *out = self.kernel_dots::<F, true>(kernels, raw);
    }

    /// The first step of the chain in place: `buf[n] *= scale·w[n]` for n < K, zero beyond.
    /// `scale` is free to fold in, say, the 1/count of an average of sweeps.
    pub fn window(&self, buf: &mut [Complex32; M], scale: f32) {
        let (head, tail) = buf.split_at_mut(self.points.min(M));
        loops::window(head, &self.band, scale);
        tail.fill(ZERO);
    }

    /// Kernel path on a sweep already passed through [`Gate::window`] (with scale 1, the
    /// result equals [`Gate::apply_kernels`] on the raw sweep).
    pub fn apply_kernels_windowed<const F: usize>(
        &self,
        kernels: &Kernels<M, F>,
        windowed: &[Complex32; M],
        out: &mut [Complex32; F],
    ) {
        *out = self.kernel_dots::<F, false>(kernels, windowed);
    }

    /// The kernel path's F dot products in one pass over the sweep: gated value f is
    /// Σ x[n]·R[(n − k_f) mod M] (R the reversed kernel, see [`Gate::build`]), times the
    /// renormalization. `WINDOW`: x is the raw sweep and the band window is applied on the
    /// fly; otherwise x is already windowed.
    ///
    /// Every x[n] (and w[n]) is loaded once for all F frequencies. The sweep is cut at the
    /// grid indices k_f, so that in each piece every frequency walks a contiguous run of R
    /// (it wraps from R[M − 1] to R[0] exactly at n = k_f). The inner loop is plain
    /// multiply-accumulate, one product added or subtracted at a time, which the compiler
    /// maps onto the FPU's multiply-accumulate instructions where the target has them.
    #[inline(always)]
    fn kernel_dots<const F: usize, const WINDOW: bool>(
        &self,
        kernels: &Kernels<M, F>,
        x: &[Complex32; M],
    ) -> [Complex32; F] {
        let k_points = self.points.min(M);
        // An index not below this gate's K (kernels made for another gate) gives 0; it is
        // computed as index 0 and dropped at the end.
        let ks = kernels.indices.map(|i| {
            let i = usize::from(i);
            if i < k_points {
                i
            } else {
                0
            }
        });
        let cuts = sorted_cuts(ks);
        let mut acc = [[0.0f32; 2]; F];
        let mut from = 0;
        for to in cuts.into_iter().chain(core::iter::once(k_points)) {
            if to <= from {
                continue;
            }
            let len = to - from;
            // Where each frequency's run of R starts: n − k_f, wrapped into 0..M.
            let runs = ks.map(|k| {
                let start = (from + M - k) % M;
                self.kernel.get(start..start + len).unwrap_or_default()
            });
            let xs = x.get(from..to).unwrap_or_default();
            let ws = self.band.get(from..to).unwrap_or_default();
            accumulate_piece::<F, WINDOW>(xs, ws, &runs, &mut acc);
            from = to;
        }
        let mut out = [ZERO; F];
        for (f, o) in out.iter_mut().enumerate() {
            let i = usize::from(kernels.indices[f]);
            *o = if i < k_points {
                Complex32::new(acc[f][0], acc[f][1]) * kernels.inv_renorm[f]
            } else {
                ZERO
            };
        }
        out
    }
}

/// The cut indices in ascending order (insertion sort: F is small, and it keeps no sorting
/// code of size in a small board's flash).
#[inline(always)]
fn sorted_cuts<const F: usize>(mut cuts: [usize; F]) -> [usize; F] {
    for i in 1..F {
        let mut j = i;
        while j > 0 && cuts[j - 1] > cuts[j] {
            cuts.swap(j - 1, j);
            j -= 1;
        }
    }
    cuts
}

/// One piece of the sweep (between two cuts) into the F sums: four frequencies at a time
/// (four points a step: their sums and the four points take half the FPU's registers),
/// then two, then one.
#[inline(always)]
fn accumulate_piece<const F: usize, const WINDOW: bool>(
    xs: &[Complex32],
    ws: &[f32],
    runs: &[&[Complex32]; F],
    acc: &mut [[f32; 2]; F],
) {
    let mut f = 0;
    while f + 4 <= F {
        let r = [runs[f], runs[f + 1], runs[f + 2], runs[f + 3]];
        let mut a = [acc[f], acc[f + 1], acc[f + 2], acc[f + 3]];
        loops::dots_4(xs, ws, &r, &mut a, WINDOW);
        acc[f..f + 4].copy_from_slice(&a);
        f += 4;
    }
    if f + 2 <= F {
        let mut a = [acc[f], acc[f + 1]];
        loops::dots_2(xs, ws, &[runs[f], runs[f + 1]], &mut a, WINDOW);
        acc[f..f + 2].copy_from_slice(&a);
        f += 2;
    }
    if f < F {
        let mut a = [acc[f]];
        loops::dots_1(xs, ws, runs[f], &mut a[0], WINDOW);
        acc[f] = a[0];
    }
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

/// Samples of the time gate closer than this (in units of the span) to one of its ends
/// are placed by the f64 formula, so that a sample sitting on an end falls on the same
/// side of it as in f64 (where the shape jumps, as Kaiser's and the rectangle's do, that
/// decides between a value and 0). Everywhere else f32 places a sample to within about
/// 1e-7 of the span.
const GATE_END_MARGIN: f32 = 1e-5;

/// The time gate, placed circularly: Δ is the time from the centre, wrapped into
/// [−T/2, T/2) with T = 1/Δf = M·dt; the shape spans Δ ∈ [−span/2, +span/2].
///
/// Positions are worked out in samples: the centre c = t_c/dt splits into a whole number
/// (exact) and a fraction (f32), so that Δ/dt = (m − ⌊c⌋, wrapped) − frac(c) is exact to
/// f32 whatever M, and x = 1/2 + Δ/span, 1 − x = 1/2 − Δ/span follow in f32.
fn fill_gate<const M: usize>(cfg: &GateConfig, dt: f64, gate: &mut [f32; M]) {
    let shape = cfg.shape.shape();
    let c = cfg.center_s / dt;
    let whole = libm::floor(c);
    let frac = (c - whole) as f32;
    let whole = (whole as usize) % M;
    let per_sample = (dt / cfg.span_s) as f32;
    let period = cfg.grid.alias_free_s();
    for (m, v) in gate.iter_mut().enumerate() {
        // Wrapped in whole samples first (j − frac ≥ M/2 ⇔ j > M/2, or j = M/2 with no
        // fraction), so that the f32 difference is between small numbers.
        let j = (m + M - whole) % M;
        let j = if j > M / 2 || (j == M / 2 && frac == 0.0) {
            j as f32 - M as f32
        } else {
            j as f32
        };
        let d = j - frac;
        let (x, rest) = (0.5 + d * per_sample, 0.5 - d * per_sample);
        *v = if x < -GATE_END_MARGIN || rest < -GATE_END_MARGIN {
            0.0
        } else if x < GATE_END_MARGIN || rest < GATE_END_MARGIN {
            // At an end: placed as in f64.
            let mut d = m as f64 * dt - cfg.center_s;
            d -= period * libm::floor(d / period + 0.5);
            let x = (d + cfg.span_s / 2.0) / cfg.span_s;
            shape.at(x as f32, (1.0 - x) as f32)
        } else {
            shape.at(x, rest)
        };
    }
}

/// u\[n\] = e^(−j2π·n·Δf·t_c), the response of an ideal impulse at the gate centre, for
/// n = 0, 1, …: the turns per step q = Δf·t_c are held as a 64-bit fraction of a turn, so
/// that n·q modulo whole turns is an exact integer product (to 2^−64 turns), and only the
/// angle within a turn is turned into a phasor, in f32.
fn impulse_phasors(cfg: &GateConfig) -> impl Fn(usize) -> Complex32 {
    let q = cfg.grid.step_hz() * cfg.center_s;
    // 2^64 · frac(q), rounded down (0 ≤ q < 1 for a valid centre; frac keeps it so).
    let step = ((q - libm::floor(q)) * 18_446_744_073_709_551_616.0) as u64;
    move |n: usize| {
        let turns = (n as u64).wrapping_mul(step);
        let (cos, sin) = cos_sin_turns((turns >> 32) as u32);
        Complex32::new(cos, -sin)
    }
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
    fn phasors_match_f64() {
        // Against libm's f64 sine and cosine (common practice, no source): the quadrant
        // reduction is exact, the series and f32 rounding leave a few 1e-8.
        let mut worst = 0.0f64;
        for i in 0..=100_000u64 {
            let t = (i.wrapping_mul(0x9E37_79B9_7F4A_7C15) >> 32) as u32;
            let angle = 2.0 * core::f64::consts::PI * t as f64 / 4_294_967_296.0;
            let (c, s) = cos_sin_turns(t);
            worst = worst
                .max((c as f64 - libm::cos(angle)).abs())
                .max((s as f64 - libm::sin(angle)).abs());
        }
        assert!(worst < 2e-7, "{worst:e}");
        // u[n] = e^(−j2π·n·Δf·t_c) far along a long sweep, against the f64 product.
        let mut cfg = config();
        cfg.grid = Grid::new(1e9, 1.234_567e6, 65_535).unwrap();
        cfg.center_s = 123.456_789e-9;
        let u = impulse_phasors(&cfg);
        for n in [0usize, 1, 2, 1000, 40_000, 65_534] {
            let turns = -(n as f64) * cfg.grid.step_hz() * cfg.center_s;
            let angle = 2.0 * core::f64::consts::PI * (turns - libm::round(turns));
            let z = u(n);
            let e = (z.re as f64 - libm::cos(angle)).abs() + (z.im as f64 - libm::sin(angle)).abs();
            assert!(e < 3e-7, "n {n}: {e:e}");
        }
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
