//! Live I/O: the SCPI client and acquisition, the simulated instrument server, preview
//! sources.

pub mod acquire;
pub mod instrument;
pub mod view;
