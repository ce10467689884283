//! Live I/O: the SCPI client and acquisition, the simulated instrument server, preview
//! sources, the positioner's sample lines and clock fit, the positioner drive and the
//! simulated turntable.

pub mod acquire;
pub mod acquire_rcs;
pub mod acquire_web;
pub mod clock;
pub mod drive;
pub mod instrument;
pub mod lines;
pub mod rcs_source;
#[cfg(unix)]
pub mod serial;
pub mod turntable;
pub mod view;
