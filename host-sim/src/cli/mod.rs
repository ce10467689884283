//! One thin file per subcommand: its arguments and one call into the library. Nothing in
//! the library imports this folder; only `main.rs` does.

pub mod acquire;
pub mod demo;
pub mod gate;
pub mod instrument;
pub mod plan;
pub mod plan_rcs;
pub mod positioner;
pub mod process;
pub mod rcs;
pub mod read_block;
pub mod replay;
pub mod simulate;
pub mod simulate_rcs;
pub mod view;
