//! Files, parse and emit only: recordings, Touchstone, manifests, gain tables, and the safe
//! reading and writing of files (`files`).

mod crc_span;
pub mod files;
pub mod gain_table;
pub mod manifest;
pub mod recording;
pub mod touchstone;
