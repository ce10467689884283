//! `sweepgate read-block FILE --points K [--format real32|real64] [--byte-order
//! normal|swapped]`: decodes one IEEE 488.2 block from a file with the core decoder
//! ([`crate::formats::block`]) and prints its values as JSON, `{"re": [...], "im": [...]}`.

use std::path::PathBuf;

use crate::formats::block::{read_block_file, values_json};

/// Options of `sweepgate read-block`.
#[derive(clap::Args, Debug)]
pub struct ReadBlockArgs {
    /// File holding one IEEE 488.2 block.
    pub file: PathBuf,
    /// Value format: real32 or real64.
    #[arg(long, default_value = "real32")]
    pub format: String,
    /// Byte order: normal (big-endian) or swapped (little-endian).
    #[arg(long, default_value = "normal")]
    pub byte_order: String,
    /// Complex points the block must hold.
    #[arg(long)]
    pub points: usize,
}

/// Runs the command.
pub fn run(args: ReadBlockArgs) -> anyhow::Result<()> {
    let values = read_block_file(&args.file, args.points, &args.format, &args.byte_order)?;
    println!("{}", values_json(&values));
    Ok(())
}
