//! Memory of the scan engine for the sizes of the issue: M = 1024, F = 8, B = 361.

use sweepgate::scan::Scan;

#[test]
fn scan_1024_8_361_fits_64_kib() {
    let n = core::mem::size_of::<Scan<1024, 8, 361>>();
    println!("size_of::<Scan<1024, 8, 361>>() = {n} bytes");
    // Budget from the issue: the engine must fit 64 KiB with no heap (project requirement).
    assert!(n <= 64 * 1024, "{n}");
    // The gate (24 KiB for M = 1024, documented in gate.rs) and the bin sum (8 KiB, gated
    // in place when the bin closes) are the bulk: a size below them means the figure in the
    // docs no longer describes the engine.
    assert!(n >= 32 * 1024, "{n}");
}
