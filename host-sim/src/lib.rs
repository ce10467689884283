//! Host side of sweepgate: room scenarios, the room simulator and scan recordings.
//!
//! The binary `sweepgate` (src/main.rs) is a thin command-line front end over these
//! modules.
#![forbid(unsafe_code)]
#![warn(missing_docs)]

pub mod acquire;
pub mod capture;
pub mod gain;
pub mod instrument;
pub mod manifest;
pub mod options;
pub mod physics;
pub mod plan_cmd;
pub mod preview;
pub mod process;
pub mod record;
pub mod replay;
pub mod report;
pub mod scenario;
pub mod simulate;
pub mod touchstone;
pub mod view;
