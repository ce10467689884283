//! Host side of sweepgate: room scenarios, the room simulator and scan recordings.
//!
//! The binary `sweepgate` (src/main.rs) is a thin command-line front end over these
//! modules.
#![forbid(unsafe_code)]
#![warn(missing_docs)]

pub mod cli;
pub mod formats;
pub mod limits;
pub mod link;
pub mod model;
pub mod output;
pub mod phase_times;
pub mod pipeline;
pub mod quote;
pub mod resident;
pub mod threads;
pub mod units;
pub mod web;
