//! Files, parse and emit only: recordings, Touchstone, manifests, gain tables.

pub mod gain_table;
pub mod manifest;
pub mod recording;
pub mod touchstone;
