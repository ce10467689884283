//! The one set-up (grid, options, settings and plan → gate, FFT size, bins, frequencies),
//! the engine and its dispatch over FFT sizes, streaming a recording through it, offline
//! gating of saved sweeps, truth, simulation runs, the demo and link captures.

pub mod capture;
pub mod cut_capture;
pub mod cuts;
pub mod cuts_bounded;
pub mod cuts_report;
pub mod cuts_stream;
pub mod data_gate;
pub mod demo;
pub mod engine;
pub mod manifest_bins;
pub mod options;
pub mod plan;
pub mod process;
pub mod rcs;
pub mod rcs_command;
pub mod rcs_image;
pub mod rcs_input;
pub mod rcs_mark;
pub mod rcs_plan;
pub mod rcs_recording;
pub mod rcs_simulate;
pub mod replay;
pub mod replay_rcs;
pub mod self_error;
pub mod setup;
pub mod simulate;
pub mod sphere;
pub mod sphere_report;
pub mod stream;
pub mod summary;
pub mod transform;
pub mod web_feed;
