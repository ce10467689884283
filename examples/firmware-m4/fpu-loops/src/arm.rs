//! The loops (see the crate's documentation). Each takes slices, does whole steps of its
//! points over the shortest of them, and returns the points done; nothing is read or
//! written beyond them.
//!
//! Registers: the sums (and the window's scale) are in fixed `s` registers named in the
//! operands (this target does not let the compiler allocate `s` registers to an `asm!`);
//! the other `s` registers a loop uses are declared clobbered, and the pointers and counts
//! are in core registers the compiler chooses.

use core::arch::asm;
use num_complex::Complex32;

/// One complex multiply-accumulate, as the core's `loops::mac` does it: with x = xr + j·xi
/// and g = gr + j·gi, re += xr·gr, re −= xi·gi, im += xr·gi, im += xi·gr, in that order.
#[rustfmt::skip]
macro_rules! mac {
    ($re:literal, $im:literal, $xr:literal, $xi:literal, $gr:literal, $gi:literal) => {
        concat!(
            "vmla.f32 ", $re, ", ", $xr, ", ", $gr, "\n",
            "vmls.f32 ", $re, ", ", $xi, ", ", $gi, "\n",
            "vmla.f32 ", $im, ", ", $xr, ", ", $gi, "\n",
            "vmla.f32 ", $im, ", ", $xi, ", ", $gr, "\n",
        )
    };
}

/// Σ x\[n\]·g\[n\] added into `acc` = \[re, im\] over whole steps of four points, with
/// x\[n\]·w\[n\] in place of x\[n\] when `window`; returns the points done.
#[inline(never)]
pub fn dots_1(
    xs: &[Complex32],
    ws: &[f32],
    g: &[Complex32],
    acc: &mut [f32; 2],
    window: bool,
) -> usize {
    let steps = xs.len().min(ws.len()).min(g.len()) / 4;
    if steps == 0 {
        return 0;
    }
    // SAFETY: each step reads 4 points of `xs` and of `g` (8 floats each) and, with the
    // window, 4 of `ws`; `steps` whole steps lie inside the three slices. The sums are read
    // from and written back to `acc`.
    unsafe {
        if window {
            asm!(
                "vldmia {acc}, {{s0-s1}}",
                "2:",
                "vldmia {x}!, {{s4-s11}}",
                "vldmia {w}!, {{s20-s23}}",
                "vldmia {g}!, {{s12-s19}}",
                "vmul.f32 s4, s4, s20",
                "vmul.f32 s5, s5, s20",
                "vmul.f32 s6, s6, s21",
                "vmul.f32 s7, s7, s21",
                "vmul.f32 s8, s8, s22",
                "vmul.f32 s9, s9, s22",
                "vmul.f32 s10, s10, s23",
                "vmul.f32 s11, s11, s23",
                mac!("s0", "s1", "s4", "s5", "s12", "s13"),
                mac!("s0", "s1", "s6", "s7", "s14", "s15"),
                mac!("s0", "s1", "s8", "s9", "s16", "s17"),
                mac!("s0", "s1", "s10", "s11", "s18", "s19"),
                "subs {n}, {n}, #1",
                "bne 2b",
                "vstmia {acc}, {{s0-s1}}",
                x = inout(reg) xs.as_ptr() => _,
                w = inout(reg) ws.as_ptr() => _,
                g = inout(reg) g.as_ptr() => _,
                n = inout(reg) steps => _,
                acc = in(reg) acc.as_mut_ptr(),
                out("s0") _, out("s1") _,
                out("s4") _, out("s5") _, out("s6") _, out("s7") _,
                out("s8") _, out("s9") _, out("s10") _, out("s11") _,
                out("s12") _, out("s13") _, out("s14") _, out("s15") _,
                out("s16") _, out("s17") _, out("s18") _, out("s19") _,
                out("s20") _, out("s21") _, out("s22") _, out("s23") _,
                options(nostack),
            );
        } else {
            asm!(
                "vldmia {acc}, {{s0-s1}}",
                "2:",
                "vldmia {x}!, {{s4-s11}}",
                "vldmia {g}!, {{s12-s19}}",
                mac!("s0", "s1", "s4", "s5", "s12", "s13"),
                mac!("s0", "s1", "s6", "s7", "s14", "s15"),
                mac!("s0", "s1", "s8", "s9", "s16", "s17"),
                mac!("s0", "s1", "s10", "s11", "s18", "s19"),
                "subs {n}, {n}, #1",
                "bne 2b",
                "vstmia {acc}, {{s0-s1}}",
                x = inout(reg) xs.as_ptr() => _,
                g = inout(reg) g.as_ptr() => _,
                n = inout(reg) steps => _,
                acc = in(reg) acc.as_mut_ptr(),
                out("s0") _, out("s1") _,
                out("s4") _, out("s5") _, out("s6") _, out("s7") _,
                out("s8") _, out("s9") _, out("s10") _, out("s11") _,
                out("s12") _, out("s13") _, out("s14") _, out("s15") _,
                out("s16") _, out("s17") _, out("s18") _, out("s19") _,
                options(nostack),
            );
        }
    }
    4 * steps
}

/// [`dots_1`] for two frequencies at once (runs `g[0]`, `g[1]`, sums `acc[0]`, `acc[1]`),
/// the sweep loaded once for both, over whole steps of two points.
#[inline(never)]
pub fn dots_2(
    xs: &[Complex32],
    ws: &[f32],
    g: [&[Complex32]; 2],
    acc: &mut [[f32; 2]; 2],
    window: bool,
) -> usize {
    let steps = xs.len().min(ws.len()).min(g[0].len()).min(g[1].len()) / 2;
    if steps == 0 {
        return 0;
    }
    // SAFETY: each step reads 2 points of `xs`, `g[0]` and `g[1]` (4 floats each) and, with
    // the window, 2 of `ws`; `steps` whole steps lie inside the slices. The sums are read
    // from and written back to `acc`.
    unsafe {
        if window {
            asm!(
                "vldmia {acc}, {{s0-s3}}",
                "2:",
                "vldmia {x}!, {{s8-s11}}",
                "vldmia {w}!, {{s12-s13}}",
                "vldmia {g0}!, {{s14-s17}}",
                "vldmia {g1}!, {{s18-s21}}",
                "vmul.f32 s8, s8, s12",
                "vmul.f32 s9, s9, s12",
                "vmul.f32 s10, s10, s13",
                "vmul.f32 s11, s11, s13",
                mac!("s0", "s1", "s8", "s9", "s14", "s15"),
                mac!("s2", "s3", "s8", "s9", "s18", "s19"),
                mac!("s0", "s1", "s10", "s11", "s16", "s17"),
                mac!("s2", "s3", "s10", "s11", "s20", "s21"),
                "subs {n}, {n}, #1",
                "bne 2b",
                "vstmia {acc}, {{s0-s3}}",
                x = inout(reg) xs.as_ptr() => _,
                w = inout(reg) ws.as_ptr() => _,
                g0 = inout(reg) g[0].as_ptr() => _,
                g1 = inout(reg) g[1].as_ptr() => _,
                n = inout(reg) steps => _,
                acc = in(reg) acc.as_mut_ptr(),
                out("s0") _, out("s1") _, out("s2") _, out("s3") _,
                out("s8") _, out("s9") _, out("s10") _, out("s11") _,
                out("s12") _, out("s13") _, out("s14") _, out("s15") _,
                out("s16") _, out("s17") _, out("s18") _, out("s19") _,
                out("s20") _, out("s21") _,
                options(nostack),
            );
        } else {
            asm!(
                "vldmia {acc}, {{s0-s3}}",
                "2:",
                "vldmia {x}!, {{s8-s11}}",
                "vldmia {g0}!, {{s14-s17}}",
                "vldmia {g1}!, {{s18-s21}}",
                mac!("s0", "s1", "s8", "s9", "s14", "s15"),
                mac!("s2", "s3", "s8", "s9", "s18", "s19"),
                mac!("s0", "s1", "s10", "s11", "s16", "s17"),
                mac!("s2", "s3", "s10", "s11", "s20", "s21"),
                "subs {n}, {n}, #1",
                "bne 2b",
                "vstmia {acc}, {{s0-s3}}",
                x = inout(reg) xs.as_ptr() => _,
                g0 = inout(reg) g[0].as_ptr() => _,
                g1 = inout(reg) g[1].as_ptr() => _,
                n = inout(reg) steps => _,
                acc = in(reg) acc.as_mut_ptr(),
                out("s0") _, out("s1") _, out("s2") _, out("s3") _,
                out("s8") _, out("s9") _, out("s10") _, out("s11") _,
                out("s14") _, out("s15") _,
                out("s16") _, out("s17") _, out("s18") _, out("s19") _,
                out("s20") _, out("s21") _,
                options(nostack),
            );
        }
    }
    2 * steps
}

/// [`dots_1`] for four frequencies at once (runs `g[f]`, sums `acc[f]`), the sweep loaded
/// once for all four, over whole steps of two points.
#[inline(never)]
pub fn dots_4(
    xs: &[Complex32],
    ws: &[f32],
    g: [&[Complex32]; 4],
    acc: &mut [[f32; 2]; 4],
    window: bool,
) -> usize {
    let shortest = g.iter().fold(xs.len().min(ws.len()), |n, r| n.min(r.len()));
    let steps = shortest / 2;
    if steps == 0 {
        return 0;
    }
    // SAFETY: each step reads 2 points of `xs` and of each run `g[f]` (4 floats each) and,
    // with the window, 2 of `ws`; `steps` whole steps lie inside the slices. The sums are
    // read from and written back to `acc`.
    unsafe {
        if window {
            asm!(
                "vldmia {acc}, {{s0-s7}}",
                "2:",
                "vldmia {x}!, {{s8-s11}}",
                "vldmia {w}!, {{s12-s13}}",
                "vldmia {g0}!, {{s14-s17}}",
                "vldmia {g1}!, {{s18-s21}}",
                "vldmia {g2}!, {{s22-s25}}",
                "vldmia {g3}!, {{s26-s29}}",
                "vmul.f32 s8, s8, s12",
                "vmul.f32 s9, s9, s12",
                "vmul.f32 s10, s10, s13",
                "vmul.f32 s11, s11, s13",
                mac!("s0", "s1", "s8", "s9", "s14", "s15"),
                mac!("s2", "s3", "s8", "s9", "s18", "s19"),
                mac!("s4", "s5", "s8", "s9", "s22", "s23"),
                mac!("s6", "s7", "s8", "s9", "s26", "s27"),
                mac!("s0", "s1", "s10", "s11", "s16", "s17"),
                mac!("s2", "s3", "s10", "s11", "s20", "s21"),
                mac!("s4", "s5", "s10", "s11", "s24", "s25"),
                mac!("s6", "s7", "s10", "s11", "s28", "s29"),
                "subs {n}, {n}, #1",
                "bne 2b",
                "vstmia {acc}, {{s0-s7}}",
                x = inout(reg) xs.as_ptr() => _,
                w = inout(reg) ws.as_ptr() => _,
                g0 = inout(reg) g[0].as_ptr() => _,
                g1 = inout(reg) g[1].as_ptr() => _,
                g2 = inout(reg) g[2].as_ptr() => _,
                g3 = inout(reg) g[3].as_ptr() => _,
                n = inout(reg) steps => _,
                acc = in(reg) acc.as_mut_ptr(),
                out("s0") _, out("s1") _, out("s2") _, out("s3") _,
                out("s4") _, out("s5") _, out("s6") _, out("s7") _,
                out("s8") _, out("s9") _, out("s10") _, out("s11") _,
                out("s12") _, out("s13") _, out("s14") _, out("s15") _,
                out("s16") _, out("s17") _, out("s18") _, out("s19") _,
                out("s20") _, out("s21") _, out("s22") _, out("s23") _,
                out("s24") _, out("s25") _, out("s26") _, out("s27") _,
                out("s28") _, out("s29") _,
                options(nostack),
            );
        } else {
            asm!(
                "vldmia {acc}, {{s0-s7}}",
                "2:",
                "vldmia {x}!, {{s8-s11}}",
                "vldmia {g0}!, {{s14-s17}}",
                "vldmia {g1}!, {{s18-s21}}",
                "vldmia {g2}!, {{s22-s25}}",
                "vldmia {g3}!, {{s26-s29}}",
                mac!("s0", "s1", "s8", "s9", "s14", "s15"),
                mac!("s2", "s3", "s8", "s9", "s18", "s19"),
                mac!("s4", "s5", "s8", "s9", "s22", "s23"),
                mac!("s6", "s7", "s8", "s9", "s26", "s27"),
                mac!("s0", "s1", "s10", "s11", "s16", "s17"),
                mac!("s2", "s3", "s10", "s11", "s20", "s21"),
                mac!("s4", "s5", "s10", "s11", "s24", "s25"),
                mac!("s6", "s7", "s10", "s11", "s28", "s29"),
                "subs {n}, {n}, #1",
                "bne 2b",
                "vstmia {acc}, {{s0-s7}}",
                x = inout(reg) xs.as_ptr() => _,
                g0 = inout(reg) g[0].as_ptr() => _,
                g1 = inout(reg) g[1].as_ptr() => _,
                g2 = inout(reg) g[2].as_ptr() => _,
                g3 = inout(reg) g[3].as_ptr() => _,
                n = inout(reg) steps => _,
                acc = in(reg) acc.as_mut_ptr(),
                out("s0") _, out("s1") _, out("s2") _, out("s3") _,
                out("s4") _, out("s5") _, out("s6") _, out("s7") _,
                out("s8") _, out("s9") _, out("s10") _, out("s11") _,
                out("s14") _, out("s15") _,
                out("s16") _, out("s17") _, out("s18") _, out("s19") _,
                out("s20") _, out("s21") _, out("s22") _, out("s23") _,
                out("s24") _, out("s25") _, out("s26") _, out("s27") _,
                out("s28") _, out("s29") _,
                options(nostack),
            );
        }
    }
    2 * steps
}

/// `buf[n] *= (band[n]·scale)` (the product w·scale first, then re and im by it, as the
/// core's `loops::window` does) over whole steps of four points; returns the points done.
#[inline(never)]
pub fn window(buf: &mut [Complex32], band: &[f32], scale: f32) -> usize {
    let steps = buf.len().min(band.len()) / 4;
    if steps == 0 {
        return 0;
    }
    // SAFETY: each step reads and writes 4 points of `buf` (8 floats, which `buf`'s unique
    // borrow covers) and reads 4 values of `band`; `steps` whole steps lie inside both.
    unsafe {
        asm!(
            "vmov s12, {scale}",
            "2:",
            "vldmia {v}, {{s0-s7}}",
            "vldmia {w}!, {{s8-s11}}",
            "vmul.f32 s8, s8, s12",
            "vmul.f32 s9, s9, s12",
            "vmul.f32 s10, s10, s12",
            "vmul.f32 s11, s11, s12",
            "vmul.f32 s0, s0, s8",
            "vmul.f32 s1, s1, s8",
            "vmul.f32 s2, s2, s9",
            "vmul.f32 s3, s3, s9",
            "vmul.f32 s4, s4, s10",
            "vmul.f32 s5, s5, s10",
            "vmul.f32 s6, s6, s11",
            "vmul.f32 s7, s7, s11",
            "vstmia {v}!, {{s0-s7}}",
            "subs {n}, {n}, #1",
            "bne 2b",
            v = inout(reg) buf.as_mut_ptr() => _,
            w = inout(reg) band.as_ptr() => _,
            n = inout(reg) steps => _,
            scale = in(reg) scale.to_bits(),
            out("s12") _,
            out("s0") _, out("s1") _, out("s2") _, out("s3") _,
            out("s4") _, out("s5") _, out("s6") _, out("s7") _,
            out("s8") _, out("s9") _, out("s10") _, out("s11") _,
            options(nostack),
        );
    }
    4 * steps
}

/// `sum[n] += points[n]` (real with real, imaginary with imaginary) over whole steps of
/// four points; returns the points done.
#[inline(never)]
pub fn add(sum: &mut [Complex32], points: &[Complex32]) -> usize {
    let steps = sum.len().min(points.len()) / 4;
    if steps == 0 {
        return 0;
    }
    // SAFETY: each step reads and writes 4 points of `sum` (which its unique borrow covers)
    // and reads 4 of `points`; `steps` whole steps lie inside both.
    unsafe {
        asm!(
            "2:",
            "vldmia {s}, {{s0-s7}}",
            "vldmia {p}!, {{s8-s15}}",
            "vadd.f32 s0, s0, s8",
            "vadd.f32 s1, s1, s9",
            "vadd.f32 s2, s2, s10",
            "vadd.f32 s3, s3, s11",
            "vadd.f32 s4, s4, s12",
            "vadd.f32 s5, s5, s13",
            "vadd.f32 s6, s6, s14",
            "vadd.f32 s7, s7, s15",
            "vstmia {s}!, {{s0-s7}}",
            "subs {n}, {n}, #1",
            "bne 2b",
            s = inout(reg) sum.as_mut_ptr() => _,
            p = inout(reg) points.as_ptr() => _,
            n = inout(reg) steps => _,
            out("s0") _, out("s1") _, out("s2") _, out("s3") _,
            out("s4") _, out("s5") _, out("s6") _, out("s7") _,
            out("s8") _, out("s9") _, out("s10") _, out("s11") _,
            out("s12") _, out("s13") _, out("s14") _, out("s15") _,
            options(nostack),
        );
    }
    4 * steps
}

/// The copy of [`real32_copy`]: the odd sample first, then two samples a step, with the
/// byte reversal of each word or without it. `{n}` is the sample count; the shift puts its
/// lowest bit in the carry flag and sets the zero flag from the pairs (the loads, reversals,
/// ORs and store of the odd sample leave the flags alone).
macro_rules! copy_samples {
    ($($rev:literal)*) => {
        concat!(
            "lsrs {n}, {n}, #1",
            "\n", "bcc 3f",
            "\n", "ldr r4, [{s}], #4",
            "\n", "ldr r5, [{s}], #4",
            $("\n", $rev, " r4, r4", "\n", $rev, " r5, r5",)*
            "\n", "orr {any}, {any}, r4",
            "\n", "orr {any}, {any}, r5",
            "\n", "stmia {d}!, {{r4, r5}}",
            "\n", "3:",
            "\n", "beq 4f",
            "\n", "2:",
            "\n", "ldr r4, [{s}], #4",
            "\n", "ldr r5, [{s}], #4",
            "\n", "ldr r8, [{s}], #4",
            "\n", "ldr r10, [{s}], #4",
            $("\n", $rev, " r4, r4", "\n", $rev, " r5, r5", "\n", $rev, " r8, r8", "\n", $rev, " r10, r10",)*
            "\n", "orr {any}, {any}, r4",
            "\n", "orr {any}, {any}, r5",
            "\n", "orr {any}, {any}, r8",
            "\n", "orr {any}, {any}, r10",
            "\n", "stmia {d}!, {{r4, r5, r8, r10}}",
            "\n", "subs {n}, {n}, #1",
            "\n", "bne 2b",
            "\n", "4:",
        )
    };
}

/// Every sample of `dst` from the REAL,32 samples at the start of `src` (8 bytes each: the
/// real part's 4, then the imaginary part's), as the core's block decoder copies them: each
/// 4-byte word read as little-endian and byte-reversed when `big_endian` (the instrument's
/// NORMal order). Returns `any` ORed with every word written (the decoder's quick check of
/// the values), or `None`, with nothing written, when `src` is too short. Two samples a
/// step; inlined where it is called, so that the common chunk pays for no call.
#[inline(always)]
pub fn real32_copy(src: &[u8], dst: &mut [Complex32], big_endian: bool, any: u32) -> Option<u32> {
    let n = dst.len();
    if src.len() / 8 < n {
        return None;
    }
    let mut any = any;
    // The copy with the byte reversal or without it.
    macro_rules! copy {
        ($($rev:literal)*) => {
            asm!(
                copy_samples!($($rev)*),
                s = inout(reg) src.as_ptr() => _,
                d = inout(reg) dst.as_mut_ptr() => _,
                n = inout(reg) n => _,
                any = inout(reg) any,
                out("r4") _, out("r5") _, out("r8") _, out("r10") _,
                options(nostack),
            )
        };
    }
    // SAFETY: `n` samples are read from `src` (8n bytes, word loads, which this core allows
    // at any alignment) and written to `dst` (4-byte aligned, as a store-multiple needs);
    // both hold at least that many.
    unsafe {
        if big_endian {
            copy!("rev");
        } else {
            copy!();
        }
    }
    Some(any)
}
