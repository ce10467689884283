//! Live I/O: the SCPI client and acquisition, the simulated instrument server, preview
//! sources, the positioner's sample lines and clock fit.

pub mod acquire;
pub mod clock;
pub mod instrument;
pub mod lines;
pub mod view;
