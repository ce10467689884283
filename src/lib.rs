//! sweepgate core: time-domain gating of swept S21 data for antenna pattern scans.
//!
//! `no_std`, no heap, no `unsafe`. The caller owns clocks, buffers and I/O; this crate
//! only computes and decodes. See `DEVELOPERS.md` for the module map.
#![no_std]
#![forbid(unsafe_code)]
#![warn(missing_docs)]
#![cfg_attr(not(test), warn(clippy::unwrap_used, clippy::expect_used))]

pub mod autogate;
pub mod bins;
pub mod cut_pump;
pub mod cuts;
pub mod error;
pub mod fft;
pub mod gate;
pub mod grid;
mod loops;
pub mod metrics;
pub mod plan;
pub mod pump;
pub mod rcs;
pub mod scan;
pub mod track;
pub mod window;
pub mod wire;

pub use num_complex::Complex32;
