//! The host's fixed sizes, defined once: what the scan engine holds, the FFT sizes it is
//! built for, and the preview frame buffer. Every command, the preview screen and the live
//! acquisition use these; this module imports nothing of the crate, so any folder may use
//! it without an import cycle.
//!
//! ```
//! use sweepgate_host::limits::{FFT_SIZES, MAX_POINTS};
//! assert_eq!(FFT_SIZES.last(), Some(&MAX_POINTS));
//! ```

use sweepgate::wire::preview::{BIN_FIXED_LEN, BIN_PER_FREQ_LEN, CRC_LEN, HEADER_LEN, STATUS_LEN};

/// Pattern frequencies the engine gates per bin, a preview record carries and the screen
/// shows (further requested frequencies are left out with a remark).
pub const MAX_FREQUENCIES: usize = 8;

/// Angle bins the engine holds (0.1° bins over a full turn).
pub const MAX_BINS: usize = 3600;

/// FFT sizes the host engine is built for, smallest first; a sweep of K points uses the
/// smallest that holds K.
pub const FFT_SIZES: [usize; 3] = [1024, 2048, 4096];

/// Most points per sweep the host can gate (the largest FFT size).
pub const MAX_POINTS: usize = FFT_SIZES[FFT_SIZES.len() - 1];

/// Bytes of a preview frame buffer, for encoding and for the screen's decoder.
pub const MAX_FRAME_BYTES: usize = 1024;

/// The longest preview frame with [`MAX_FREQUENCIES`]: header, the longer of a bin and a
/// status body, CRC, COBS overhead (one byte per 254 and one more) and the delimiter.
pub const LONGEST_FRAME_BYTES: usize = {
    let bin = BIN_FIXED_LEN + BIN_PER_FREQ_LEN * MAX_FREQUENCIES;
    let body = if bin > STATUS_LEN { bin } else { STATUS_LEN };
    let payload = HEADER_LEN + body + CRC_LEN;
    payload + payload / 254 + 2
};

const _: () = assert!(MAX_FRAME_BYTES >= LONGEST_FRAME_BYTES);

/// Most sweeps a scenario may ask for (a guard against a typo running for hours); also
/// the most sweeps a step-and-stop scan takes at one step.
pub const MAX_SWEEPS: usize = 200_000;

/// Narrowest angle bin, degrees: the engine keeps angles in f32, whose spacing near the
/// largest scan span (3600°, ten turns) is 2.4e-4°, so a bin must be several of those
/// wide to be told from its neighbour.
pub const MIN_BIN_WIDTH_DEG: f64 = 1e-3;

/// Widest angle bin, degrees: one bin per turn.
pub const MAX_BIN_WIDTH_DEG: f64 = 360.0;

/// Shortest interval between positioner samples, s: 10 kHz, above what a turntable's
/// encoder link reports; each sample is one record, so this bounds the recording too.
pub const MIN_SAMPLE_INTERVAL_S: f64 = 1e-4;

/// Longest interval between positioner samples, s: a turntable read less often than every
/// 10 s gives too few samples to place a sweep.
pub const MAX_SAMPLE_INTERVAL_S: f64 = 10.0;

/// Longest settle time after a step, s (an hour: a positioner that takes longer is broken).
pub const MAX_SETTLE_S: f64 = 3600.0;

/// Longest simulated scan, s (a day), from the first sample to the end of the motion.
pub const MAX_SCAN_S: f64 = 86_400.0;

/// Most positioner samples a simulated scan writes (scan time / sample interval): about
/// 50 MB of records and 80 MB held while they are made.
pub const MAX_POSITION_SAMPLES: usize = 2_000_000;

/// Slowest turntable speed, degrees per second (a degree a minute and a half; slower,
/// and a scan of any span takes longer than [`MAX_SCAN_S`] anyway).
pub const MIN_SPEED_DEG_S: f64 = 1e-2;

/// Fastest turntable speed, degrees per second (ten turns a second).
pub const MAX_SPEED_DEG_S: f64 = 3600.0;

/// Longest wait between two records of a paced replay, s of wall time: a longer gap in
/// record time (a pause, a far-future timestamp) is cut to this, with a warning.
pub const MAX_PACED_WAIT_S: f64 = 5.0;

/// Longest paced replay, s of wall time (two hours): slower paces are refused before the
/// replay starts (`--as-fast-as-possible` has no limit).
pub const MAX_PACED_REPLAY_S: f64 = 7200.0;

/// Lowest gated level of a gain-by-substitution reference, dB: a reference measured below
/// this (an all-zero file, a disconnected cable) would give an absurd gain (a zero reference
/// at the −300 dB floor turns a 10 dBi horn into 310 dBi), so it is refused.
pub const MIN_REFERENCE_DB: f64 = -200.0;

/// Most characters of a file's or a user's text quoted in a message (then `…`).
pub const MAX_QUOTED_CHARS: usize = 40;

// Acquisition (`sweepgate acquire`): every input from the instrument and the positioner is
// bounded by these; the profile may lower or raise the ones it names, within the bounds.

/// Longest answer line read from the instrument, bytes (block answers are bounded by the
/// decoder's point count instead).
pub const MAX_ANSWER_LINE_BYTES: usize = 1 << 20;

/// Longest positioner line, bytes; a longer line is read to its newline, thrown away and
/// counted.
pub const MAX_POSITIONER_LINE_BYTES: usize = 256;

/// Default depth of the queue of positioner samples waiting for the acquisition loop (the
/// profile's `positioner_queue`); a sample arriving when it is full is dropped and counted.
pub const DEFAULT_POSITIONER_QUEUE: usize = 4096;

/// Largest `positioner_queue` a profile may ask for.
pub const MAX_POSITIONER_QUEUE: usize = 1 << 20;

/// Longest wait any acquisition option may ask for (answer timeout, linger, backoff,
/// settling), s.
pub const MAX_WAIT_S: f64 = 3600.0;

/// Default of the profile's `max_dropped_in_row`: sweeps dropped one after another
/// (non-finite values) before the scan stops.
pub const DEFAULT_MAX_DROPPED_IN_ROW: u32 = 8;

/// Default of the profile's `max_resyncs_in_row`: times in a row one sweep is taken again
/// because an answer was out of step before the scan stops.
pub const DEFAULT_MAX_RESYNCS_IN_ROW: u32 = 4;

/// Most worker threads `process --threads` may ask for: each has an 8 MiB stack and its own
/// FFT buffers, and more threads than cores gain nothing.
pub const MAX_THREADS: usize = 256;

/// Most threads a set of output files (a report folder) is written and synced on at once:
/// they wait on the disk, not the processor, and a journaling file system commits the
/// syncs that wait together once.
pub const MAX_SYNC_THREADS: usize = 16;

/// Largest manifest (`process --manifest`) read, bytes: a row is some 50 bytes, so this is
/// about two million rows (a full sphere at 0.25° × 0.25° is one million). A larger file is
/// refused before it is read.
pub const MAX_MANIFEST_BYTES: u64 = 128 << 20;

/// Largest Touchstone file read, bytes. A sweep the engine gates has at most [`MAX_POINTS`]
/// points; at that many, a file of 8 ports (a record of 129 numbers of up to about 25 bytes)
/// is about 13 MiB, so this leaves room for many more ports. A larger file is refused before
/// a byte of it is read, so each thread reading files holds at most this much of one.
pub const MAX_TOUCHSTONE_BYTES: u64 = 256 << 20;

/// A scan of cuts from a manifest whose raw traces would take more than this (rows ×
/// traces × points × 8 bytes, the points from the first file) is processed in bounded memory
/// (`pipeline::cuts_bounded`; `process --bounded-memory` asks for it at any size): the
/// whole path holds these traces and a trace's gated spectra at once, about twice this.
pub const BOUNDED_ABOVE_BYTES: u64 = 256 << 20;
