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
