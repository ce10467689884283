//! The one set-up (grid, options, settings and plan → gate, FFT size, bins, frequencies),
//! streaming a recording through the engine, offline gating of saved sweeps, truth,
//! simulation runs and link captures.

pub mod capture;
pub mod options;
pub mod plan;
pub mod process;
pub mod replay;
pub mod simulate;
