//! Host side of sweepgate: room scenarios, the room simulator and scan recordings.
//!
//! The binary `sweepgate` (src/main.rs) is a thin command-line front end over these
//! modules.
#![forbid(unsafe_code)]
#![warn(missing_docs)]

pub mod physics;
pub mod preview;
pub mod record;
pub mod replay;
pub mod report;
pub mod scenario;
pub mod simulate;
pub mod view;
