//! Files, parse and emit only: recordings, Touchstone, manifests, gain tables, IEEE 488.2
//! block files, NumPy arrays; and the safe reading and writing of files (`files`).

pub mod block;
mod crc_span;
pub mod files;
pub mod gain_table;
pub mod manifest;
pub mod manifest_traces;
pub mod npy;
pub mod rcs_calibration;
pub mod rcs_capture;
pub mod rcs_record;
pub mod recording;
pub mod touchstone;
pub mod traces;
