//! Byte-stream decoders and encoders: IEEE 488.2 blocks, ASCII numbers, preview records.

pub mod ascii;
pub mod block;
pub mod preview;
