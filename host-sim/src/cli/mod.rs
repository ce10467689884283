//! One thin file per subcommand: its arguments and one call into the library. Nothing in
//! the library imports this folder; only `main.rs` does.

pub mod demo;
pub mod instrument;
pub mod plan;
pub mod read_block;
