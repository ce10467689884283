//! Memory of the scan engine for the sizes of the issue: M = 1024, F = 8, B = 361.

use sweepgate::scan::Scan;

#[test]
fn scan_1024_8_361_fits_64_kib() {
    let n = core::mem::size_of::<Scan<1024, 8, 361>>();
    println!("size_of::<Scan<1024, 8, 361>>() = {n} bytes");
    // Budget from the issue: the engine must fit 64 KiB with no heap (project requirement).
    assert!(n <= 64 * 1024, "{n}");
    // The gate (24 KiB for M = 1024, documented in gate.rs), the bin sum and the echo
    // scratch (8 KiB each) are the bulk; anything much beyond them is a regression.
    assert!(n >= 40 * 1024, "{n}");
}
