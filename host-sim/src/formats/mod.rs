//! Files, parse and emit only: recordings, Touchstone, manifests, gain tables, IEEE 488.2
//! block files, NumPy arrays; and writing a file so that it is whole or absent.

pub mod block;
pub mod gain_table;
pub mod manifest;
pub mod npy;
pub mod recording;
pub mod replace;
pub mod touchstone;
