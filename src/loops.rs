//! The per-point loops of the hot paths, on slices and not generic.
//!
//! The scan engine, the gate and the board loop are generic over their sizes (`M`, `F`,
//! bins), so their code is compiled in the crate that names the sizes — a board's firmware,
//! built for size. A function that is neither generic nor `#[inline]` is compiled here,
//! with this crate's own optimisation, whatever the crate that calls it; so the loops that
//! run once per point of every sweep or bin live here, and the generic code around them
//! stays small. Each is `#[inline(never)]`: a board built for size then keeps one copy.

use crate::Complex32;

// The loops written for the Cortex-M4F's FPU (load-multiple, multiply-accumulate), where a
// board opts in: each does whole steps of a few points and returns how many it did, and the
// Rust loops here do the rest, so the results are the same bit for bit.
#[cfg(all(feature = "fpu-loops", target_arch = "arm", target_abi = "eabihf"))]
use sweepgate_fpu_loops as fpu;

/// Without the FPU loops: every function does no point, and the Rust loops do them all.
#[cfg(not(all(feature = "fpu-loops", target_arch = "arm", target_abi = "eabihf")))]
mod fpu {
    use crate::Complex32;

    pub(super) fn window(_: &mut [Complex32], _: &[f32], _: f32) -> usize {
        0
    }
    pub(super) fn add(_: &mut [Complex32], _: &[Complex32]) -> usize {
        0
    }
    #[inline(always)]
    pub(super) fn real32_copy(_: &[u8], _: &mut [Complex32], _: bool, _: u32) -> Option<u32> {
        None
    }
    pub(super) fn dots_1(
        _: &[Complex32],
        _: &[f32],
        _: &[Complex32],
        _: &mut [f32; 2],
        _: bool,
    ) -> usize {
        0
    }
    pub(super) fn dots_2(
        _: &[Complex32],
        _: &[f32],
        _: [&[Complex32]; 2],
        _: &mut [[f32; 2]; 2],
        _: bool,
    ) -> usize {
        0
    }
    pub(super) fn dots_4(
        _: &[Complex32],
        _: &[f32],
        _: [&[Complex32]; 4],
        _: &mut [[f32; 2]; 4],
        _: bool,
    ) -> usize {
        0
    }
}

/// `buf[n] *= scale·band[n]` over the shorter of the two (step 1 of the gate's chain).
#[inline(never)]
pub(crate) fn window(buf: &mut [Complex32], band: &[f32], scale: f32) {
    let n = buf.len().min(band.len());
    let done = fpu::window(&mut buf[..n], &band[..n], scale);
    let (buf, band) = (&mut buf[done..n], &band[done..n]);
    // Eight points a step, written out (a build for size does not unroll loops).
    let mut vs = buf.chunks_exact_mut(8);
    let mut ws = band.chunks_exact(8);
    for (v, w) in (&mut vs).zip(&mut ws) {
        for i in 0..8 {
            let s = w[i] * scale;
            v[i].re *= s;
            v[i].im *= s;
        }
    }
    for (v, &w) in vs.into_remainder().iter_mut().zip(ws.remainder()) {
        let s = w * scale;
        v.re *= s;
        v.im *= s;
    }
}

/// The block decoder's copy of whole REAL,32 samples where a board has it written for its
/// core (`fpu-loops`): every sample of `dst` from the start of `src`, and `any` ORed with
/// their words; `None` elsewhere (and when `src` is too short), and the decoder's Rust loop
/// does it. Inlined, unlike the loops here: it runs once per chunk of a block, where a call
/// is a sizeable share.
#[inline(always)]
pub(crate) fn real32_copy(
    src: &[u8],
    dst: &mut [Complex32],
    big_endian: bool,
    any: u32,
) -> Option<u32> {
    fpu::real32_copy(src, dst, big_endian, any)
}

/// `sum[n] += points[n]` over the shorter of the two (a sweep into the open bin).
#[inline(never)]
pub(crate) fn add(sum: &mut [Complex32], points: &[Complex32]) {
    let n = sum.len().min(points.len());
    let done = fpu::add(&mut sum[..n], &points[..n]);
    let (sum, points) = (&mut sum[done..n], &points[done..n]);
    // Four points a step, written out (a build for size does not unroll loops).
    let mut ss = sum.chunks_exact_mut(4);
    let mut ps = points.chunks_exact(4);
    for (s, p) in (&mut ss).zip(&mut ps) {
        for i in 0..4 {
            s[i] += p[i];
        }
    }
    for (s, p) in ss.into_remainder().iter_mut().zip(ps.remainder()) {
        *s += *p;
    }
}

/// Whether every value is finite (neither NaN nor infinite), real and imaginary part.
#[inline(never)]
pub(crate) fn all_finite(points: &[Complex32]) -> bool {
    points.iter().all(|p| p.re.is_finite() && p.im.is_finite())
}

/// Step 3 with the echo level: `buf[m] *= gate[m]` in place; returns (energy where the
/// gate is 0, total energy). Each sum is kept in four partial sums (point m in sum m mod 4),
/// joined as (s0 + s1) + (s2 + s3): four independent additions a step instead of one chain
/// in which each waits for the last (a host's compiler puts part of it in vector registers).
/// Every target adds in this same order, so a board's levels equal the host's bit for bit.
#[inline(never)]
pub(crate) fn gate_and_measure(buf: &mut [Complex32], gate: &[f32]) -> (f32, f32) {
    let n = buf.len().min(gate.len());
    let (buf, gate) = (&mut buf[..n], &gate[..n]);
    let (mut outside, mut total) = ([0.0f32; 4], [0.0f32; 4]);
    let mut hs = buf.chunks_exact_mut(4);
    let mut gs = gate.chunks_exact(4);
    for (h, g) in (&mut hs).zip(&mut gs) {
        for i in 0..4 {
            let e = h[i].norm_sqr();
            total[i] += e;
            // Adding 0 leaves a sum of energies (never negative) as it is.
            outside[i] += if g[i] == 0.0 { e } else { 0.0 };
            h[i] *= g[i];
        }
    }
    for (i, (h, &g)) in hs
        .into_remainder()
        .iter_mut()
        .zip(gs.remainder())
        .enumerate()
    {
        let e = h.norm_sqr();
        total[i] += e;
        outside[i] += if g == 0.0 { e } else { 0.0 };
        *h *= g;
    }
    let join = |s: [f32; 4]| (s[0] + s[1]) + (s[2] + s[3]);
    (join(outside), join(total))
}

/// Step 5 in place: `buf[k] *= factor[k]` for k below `points` (and `factor`'s length), 0
/// beyond.
#[inline(never)]
pub(crate) fn renormalize(buf: &mut [Complex32], factor: &[Complex32], points: usize) {
    let n = points.min(factor.len()).min(buf.len());
    let (kept, rest) = buf.split_at_mut(n);
    for (o, &r) in kept.iter_mut().zip(&factor[..n]) {
        *o *= r;
    }
    rest.fill(Complex32::new(0.0, 0.0));
}

/// One complex multiply-accumulate into `a` = [re, im]: a += (xr + j·xi)·g, each product
/// accumulated on its own (re += xr·gr, re −= xi·gi, im += xr·gi, im += xi·gr), so that a
/// target with a multiply-accumulate instruction spends one on each.
#[inline(always)]
fn mac(a: &mut [f32; 2], xr: f32, xi: f32, g: Complex32) {
    a[0] += xr * g.re;
    a[0] -= xi * g.im;
    a[1] += xr * g.im;
    a[1] += xi * g.re;
}

/// x\[i\] of a sweep, times the band window w\[i\] when `WINDOW`.
#[inline(always)]
fn point<const WINDOW: bool>(x: Complex32, w: f32) -> (f32, f32) {
    if WINDOW {
        (x.re * w, x.im * w)
    } else {
        (x.re, x.im)
    }
}

/// The kernel path's dot products over one run of the sweep (see `Gate::kernel_dots`):
/// adds Σ x\[n\]·g\[n\] into `acc` for one frequency (with `window`, x\[n\]·w\[n\] in place
/// of x\[n\]). Nothing is added unless `run` and `ws` are at least as long as `xs`. The sums
/// run point by point in order, so the result does not depend on how the loop is cut.
#[inline(never)]
pub(crate) fn dots_1(
    xs: &[Complex32],
    ws: &[f32],
    run: &[Complex32],
    acc: &mut [f32; 2],
    window: bool,
) {
    let n = xs.len();
    let (Some(run), Some(ws)) = (run.get(..n), ws.get(..n)) else {
        return;
    };
    let done = fpu::dots_1(xs, ws, run, acc, window);
    let (xs, ws, run) = (&xs[done..], &ws[done..], &run[done..]);
    if window {
        dots_1_as::<true>(xs, ws, run, acc);
    } else {
        dots_1_as::<false>(xs, ws, run, acc);
    }
}

#[inline(always)]
fn dots_1_as<const WINDOW: bool>(
    xs: &[Complex32],
    ws: &[f32],
    run: &[Complex32],
    acc: &mut [f32; 2],
) {
    let n = xs.len();
    let (Some(run), Some(ws)) = (run.get(..n), ws.get(..n)) else {
        return;
    };
    let mut a = *acc;
    // Eight points a step, written out (a build for size does not unroll loops).
    let (x8, g8, w8) = (xs.chunks_exact(8), run.chunks_exact(8), ws.chunks_exact(8));
    let tail = x8
        .remainder()
        .iter()
        .zip(g8.remainder())
        .zip(w8.remainder());
    for ((x, g), w) in x8.zip(g8).zip(w8) {
        for i in 0..8 {
            let (xr, xi) = point::<WINDOW>(x[i], w[i]);
            mac(&mut a, xr, xi, g[i]);
        }
    }
    for ((x, g), w) in tail {
        let (xr, xi) = point::<WINDOW>(*x, *w);
        mac(&mut a, xr, xi, *g);
    }
    *acc = a;
}

/// [`dots_1`] for two frequencies at once, the sweep loaded once for both.
#[inline(never)]
pub(crate) fn dots_2(
    xs: &[Complex32],
    ws: &[f32],
    runs: &[&[Complex32]; 2],
    acc: &mut [[f32; 2]; 2],
    window: bool,
) {
    let n = xs.len();
    let (Some(r0), Some(r1), Some(ws)) = (runs[0].get(..n), runs[1].get(..n), ws.get(..n)) else {
        return;
    };
    let done = fpu::dots_2(xs, ws, [r0, r1], acc, window);
    let (xs, ws, runs) = (&xs[done..], &ws[done..], &[&r0[done..], &r1[done..]]);
    if window {
        dots_2_as::<true>(xs, ws, runs, acc);
    } else {
        dots_2_as::<false>(xs, ws, runs, acc);
    }
}

#[inline(always)]
fn dots_2_as<const WINDOW: bool>(
    xs: &[Complex32],
    ws: &[f32],
    runs: &[&[Complex32]; 2],
    acc: &mut [[f32; 2]; 2],
) {
    let n = xs.len();
    let (Some(r0), Some(r1), Some(ws)) = (runs[0].get(..n), runs[1].get(..n), ws.get(..n)) else {
        return;
    };
    let [mut a0, mut a1] = *acc;
    let (x2, g0, g1, w2) = (
        xs.chunks_exact(2),
        r0.chunks_exact(2),
        r1.chunks_exact(2),
        ws.chunks_exact(2),
    );
    let tail = (
        x2.remainder(),
        g0.remainder(),
        g1.remainder(),
        w2.remainder(),
    );
    for (((x, g0), g1), w) in x2.zip(g0).zip(g1).zip(w2) {
        for i in 0..2 {
            let (xr, xi) = point::<WINDOW>(x[i], w[i]);
            mac(&mut a0, xr, xi, g0[i]);
            mac(&mut a1, xr, xi, g1[i]);
        }
    }
    for (((x, g0), g1), w) in tail.0.iter().zip(tail.1).zip(tail.2).zip(tail.3) {
        let (xr, xi) = point::<WINDOW>(*x, *w);
        mac(&mut a0, xr, xi, *g0);
        mac(&mut a1, xr, xi, *g1);
    }
    *acc = [a0, a1];
}

/// [`dots_1`] for four frequencies at once, the sweep loaded once for all four (their
/// sums take 8 of the FPU's 32 single-precision registers).
#[inline(never)]
pub(crate) fn dots_4(
    xs: &[Complex32],
    ws: &[f32],
    runs: &[&[Complex32]; 4],
    acc: &mut [[f32; 2]; 4],
    window: bool,
) {
    let n = xs.len();
    let (Some(ws), true) = (ws.get(..n), runs.iter().all(|r| r.len() >= n)) else {
        return;
    };
    let runs = runs.map(|r| &r[..n]);
    let done = fpu::dots_4(xs, ws, runs, acc, window);
    let (xs, ws, runs) = (&xs[done..], &ws[done..], &runs.map(|r| &r[done..]));
    if window {
        dots_4_as::<true>(xs, ws, runs, acc);
    } else {
        dots_4_as::<false>(xs, ws, runs, acc);
    }
}

#[inline(always)]
fn dots_4_as<const WINDOW: bool>(
    xs: &[Complex32],
    ws: &[f32],
    runs: &[&[Complex32]; 4],
    acc: &mut [[f32; 2]; 4],
) {
    let n = xs.len();
    let (Some(r0), Some(r1), Some(r2), Some(r3), Some(ws)) = (
        runs[0].get(..n),
        runs[1].get(..n),
        runs[2].get(..n),
        runs[3].get(..n),
        ws.get(..n),
    ) else {
        return;
    };
    let mut a = *acc;
    let gs = [r0, r1, r2, r3];
    // Four points a step (each run's loads then come in fours).
    let quads = xs
        .chunks_exact(4)
        .zip(r0.chunks_exact(4))
        .zip(r1.chunks_exact(4))
        .zip(r2.chunks_exact(4))
        .zip(r3.chunks_exact(4))
        .zip(ws.chunks_exact(4));
    for (((((x, g0), g1), g2), g3), w) in quads {
        for i in 0..4 {
            let (xr, xi) = point::<WINDOW>(x[i], w[i]);
            mac(&mut a[0], xr, xi, g0[i]);
            mac(&mut a[1], xr, xi, g1[i]);
            mac(&mut a[2], xr, xi, g2[i]);
            mac(&mut a[3], xr, xi, g3[i]);
        }
    }
    for i in n - n % 4..n {
        tail_point::<4, WINDOW>(xs, ws, &gs, &mut a, i);
    }
    *acc = a;
}

/// The sums of point `i` alone (the points a loop of several a step leaves over).
#[inline(always)]
fn tail_point<const F: usize, const WINDOW: bool>(
    xs: &[Complex32],
    ws: &[f32],
    gs: &[&[Complex32]; F],
    a: &mut [[f32; 2]; F],
    i: usize,
) {
    if let (Some(x), Some(w)) = (xs.get(i), ws.get(i)) {
        let (xr, xi) = point::<WINDOW>(*x, *w);
        for (af, g) in a.iter_mut().zip(gs) {
            if let Some(g) = g.get(i) {
                mac(af, xr, xi, *g);
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Points from a fixed xorshift sequence, about unit size, with a sign each way.
    fn points(n: usize, seed: u64) -> ([Complex32; 40], [f32; 40]) {
        let mut state = seed;
        let mut next = || {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            (state >> 40) as f32 / (1u64 << 24) as f32 * 2.0 - 1.0
        };
        let mut h = [Complex32::new(0.0, 0.0); 40];
        let mut g = [0.0f32; 40];
        for k in 0..n {
            h[k] = Complex32::new(next(), next());
            // A third of the gate zero, as outside a gate span.
            g[k] = if k % 3 == 0 { 0.0 } else { next().abs() };
        }
        (h, g)
    }

    #[test]
    fn gate_and_measure_gates_each_point_and_sums_the_energies() {
        // Reference: the definition, point by point, the sums in f64 (the f32 partial sums
        // may differ from it by rounding only: a few ulps of the total).
        for n in 0..40 {
            let (h, g) = points(n, 0x9e37_79b9_7f4a_7c15 + n as u64);
            let mut buf = h;
            let (outside, total) = gate_and_measure(&mut buf[..n], &g[..n]);
            let (mut want_out, mut want_total) = (0.0f64, 0.0f64);
            for k in 0..n {
                let e = f64::from(h[k].re).powi(2) + f64::from(h[k].im).powi(2);
                want_total += e;
                if g[k] == 0.0 {
                    want_out += e;
                }
                assert_eq!(buf[k], h[k] * g[k], "n {n} point {k}");
            }
            assert!(
                (f64::from(total) - want_total).abs() <= 1e-6 * want_total,
                "n {n}"
            );
            assert!(
                (f64::from(outside) - want_out).abs() <= 1e-6 * want_total,
                "n {n}"
            );
        }
        // A gate shorter than the buffer: the points past it are left alone.
        let (h, g) = points(10, 7);
        let mut buf = h;
        gate_and_measure(&mut buf[..10], &g[..6]);
        assert_eq!(&buf[6..10], &h[6..10]);
    }

    #[test]
    fn renormalize_scales_the_points_kept_and_zeroes_the_rest() {
        // Reference: the definition, point by point.
        let (h, _) = points(40, 3);
        let (f, _) = points(40, 5);
        for (len, points_kept, factors) in [(40, 30, 40), (40, 40, 40), (40, 30, 20), (16, 30, 40)]
        {
            let mut buf = h;
            renormalize(&mut buf[..len], &f[..factors], points_kept);
            for k in 0..len {
                let want = if k < points_kept && k < factors {
                    h[k] * f[k]
                } else {
                    Complex32::new(0.0, 0.0)
                };
                assert_eq!(
                    buf[k], want,
                    "len {len} points {points_kept} factors {factors} k {k}"
                );
            }
        }
    }
}
