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

/// The board keeps its whole loop in one `static`: this line stops compiling if the engine or
/// the pump can no longer be built in a `const` context.
static BOARD_LOOP: sweepgate::pump::Pump<1024, 8, 361> = sweepgate::pump::Pump::unconfigured();

#[test]
fn board_loop_is_the_engine_and_one_sweep_buffer() {
    let pump = core::mem::size_of::<sweepgate::pump::Pump<1024, 8, 361>>();
    let scan = core::mem::size_of::<Scan<1024, 8, 361>>();
    println!("size_of::<Pump<1024, 8, 361>>() = {pump} bytes");
    // The engine, the M-point sweep buffer the decoder fills (1024 × 8 bytes) and the
    // decoder's small state; anything more would be a second buffer (project requirement:
    // the board's static RAM is the engine plus one sweep).
    assert!(pump >= scan + 1024 * 8, "{pump}");
    assert!(pump <= scan + 1024 * 8 + 512, "{pump}");
    assert!(!BOARD_LOOP.is_configured());
}

/// A scan of two traces (T = 1 + X, X = 1) over cuts of a second axis, at the sizes above.
#[test]
fn two_trace_cut_scan_is_the_engine_one_more_sum_and_a_second_history() {
    use sweepgate::cuts::CutScan;
    let two = core::mem::size_of::<CutScan<1024, 8, 361, 64, 1>>();
    let one = core::mem::size_of::<Scan<1024, 8, 361>>();
    let tracker = core::mem::size_of::<sweepgate::track::Tracker<64>>();
    println!(
        "size_of::<CutScan<1024, 8, 361, 64, 1>>() = {two} bytes (Scan {one}, Tracker<64> {tracker})"
    );
    // The one-trace engine, one more M-point sum (1024 × 8 bytes), the second axis's tracker
    // and a little state (the cut layout, the second-axis sum, counters): nothing else
    // (project requirement: memory bounded and stated).
    assert!(two >= one + 1024 * 8 + tracker, "{two}");
    assert!(two <= one + 1024 * 8 + tracker + 256, "{two}");
    assert!(two <= 64 * 1024, "{two}");
}
