//! Byte-stream decoders and encoders: IEEE 488.2 blocks, ASCII numbers, preview records,
//! link captures.

pub mod ascii;
pub mod block;
pub mod capture;
pub mod cut_capture;
pub mod cut_record;
pub mod impulse;
pub mod preview;
