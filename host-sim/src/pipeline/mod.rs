//! The one set-up (grid, options, settings and plan → gate, FFT size, bins, frequencies),
//! the engine and its dispatch over FFT sizes, streaming a recording through it, offline
//! gating of saved sweeps, truth, simulation runs, the demo and link captures.

pub mod capture;
pub mod data_gate;
pub mod demo;
pub mod engine;
pub mod manifest_bins;
pub mod options;
pub mod plan;
pub mod process;
pub mod replay;
pub mod self_error;
pub mod setup;
pub mod simulate;
pub mod stream;
pub mod summary;
pub mod transform;
pub mod web_feed;
