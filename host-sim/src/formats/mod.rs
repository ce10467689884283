//! Files, parse and emit only: recordings, Touchstone, manifests, gain tables, IEEE 488.2
//! block files.

pub mod block;
pub mod gain_table;
pub mod manifest;
pub mod recording;
pub mod touchstone;
