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
