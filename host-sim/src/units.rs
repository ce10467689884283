//! Units shared by the files the program writes and the reports people read: the one
//! conversion of a complex value to dB.
//!
//! It lives at the crate root, beside the folders rather than in one of them, because both
//! `formats/` (gain tables) and `output/` (the report) use it and `formats/` (files, parse
//! and emit only) does not import `output/`. It imports nothing of the crate.

use num_complex::Complex64;

/// The lowest level any dB figure takes, dB: a zero (or not-a-number) magnitude has no
/// dB value, so it is written as this floor. 300 dB below |S21| = 1 is far under any
/// instrument's noise floor, so a floored value never passes for a measured one.
pub const FLOOR_DB: f64 = -300.0;

/// 20·log10|z| in dB, never below [`FLOOR_DB`] (zero and NaN magnitudes give the floor).
///
/// ```
/// use num_complex::Complex64;
/// use sweepgate_host::units::{db, FLOOR_DB};
/// assert!((db(Complex64::new(0.0, 0.1)) + 20.0).abs() < 1e-12);
/// assert_eq!(db(Complex64::new(0.0, 0.0)), FLOOR_DB);
/// assert_eq!(db(Complex64::new(f64::NAN, 0.0)), FLOOR_DB);
/// ```
pub fn db(z: Complex64) -> f64 {
    (20.0 * z.norm().log10()).max(FLOOR_DB)
}
