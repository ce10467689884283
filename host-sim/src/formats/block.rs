//! One IEEE 488.2 definite-length block in a file (as an instrument sends it for a trace
//! query), decoded with the core's [`BlockDecoder`]; and the words naming a block's value
//! format and byte order (`real32`, `swapped`, …) used on the command line.

use std::path::Path;

use anyhow::Context;
use num_complex::Complex32;
use sweepgate::wire::block::{BlockConfig, BlockDecoder, ByteOrder, DecodeEvent, Format};

/// Parses a format word (`real32`, `real64`).
pub fn parse_format(s: &str) -> anyhow::Result<Format> {
    match s.to_ascii_lowercase().replace([',', ' '], "").as_str() {
        "real32" => Ok(Format::Real32),
        "real64" => Ok(Format::Real64),
        _ => anyhow::bail!("unknown format {s:?} (real32 or real64)"),
    }
}

/// Parses a byte order word (`normal`, `swapped`).
pub fn parse_order(s: &str) -> anyhow::Result<ByteOrder> {
    match s.to_ascii_lowercase().as_str() {
        "normal" | "norm" => Ok(ByteOrder::Normal),
        "swapped" | "swap" => Ok(ByteOrder::Swapped),
        _ => anyhow::bail!("unknown byte order {s:?} (normal or swapped)"),
    }
}

/// Decodes one block with the core's [`BlockDecoder`]. A rejected block keeps the core's
/// error as its cause.
pub fn decode_block(bytes: &[u8], cfg: BlockConfig) -> anyhow::Result<Vec<Complex32>> {
    let mut dec = BlockDecoder::new(cfg);
    let mut buf = vec![Complex32::new(0.0, 0.0); cfg.points()];
    let mut rest = bytes;
    loop {
        let fed = dec.feed(rest, &mut buf);
        rest = rest.get(fed.consumed..).unwrap_or(&[]);
        match fed.event {
            Some(DecodeEvent::Sweep { .. }) => return Ok(buf),
            Some(DecodeEvent::Rejected(e)) => {
                return Err(anyhow::Error::new(e).context("block rejected"))
            }
            None if rest.is_empty() => {
                if let Some(e) = dec.finish() {
                    return Err(anyhow::Error::new(e).context("block rejected"));
                }
                anyhow::bail!("no block in the input");
            }
            None => {}
        }
    }
}

/// Reads the file at `path` and decodes the one block it holds: `points` complex values
/// in the format and byte order named by `format` and `byte_order` (see [`parse_format`],
/// [`parse_order`]). Errors name the file.
pub fn read_block_file(
    path: &Path,
    points: usize,
    format: &str,
    byte_order: &str,
) -> anyhow::Result<Vec<Complex32>> {
    let bytes = std::fs::read(path).with_context(|| format!("reading {}", path.display()))?;
    let cfg = BlockConfig::new(points, parse_format(format)?, parse_order(byte_order)?)?;
    decode_block(&bytes, cfg).with_context(|| format!("in {}", path.display()))
}

/// The values as one line of JSON, `{"re": [...], "im": [...]}`, with the exact f32 values.
pub fn values_json(values: &[Complex32]) -> String {
    serde_json::json!({
        "re": values.iter().map(|c| c.re).collect::<Vec<_>>(),
        "im": values.iter().map(|c| c.im).collect::<Vec<_>>(),
    })
    .to_string()
}

#[cfg(test)]
mod tests {
    use super::*;
    use sweepgate::wire::block;

    #[test]
    fn words_name_formats_and_orders() {
        assert_eq!(parse_format("REAL,32").unwrap(), Format::Real32);
        assert_eq!(parse_format("real64").unwrap(), Format::Real64);
        assert!(parse_format("real16").is_err());
        assert_eq!(parse_order("SWAP").unwrap(), ByteOrder::Swapped);
        assert!(parse_order("middle").is_err());
    }

    #[test]
    fn a_block_round_trips_and_a_short_one_keeps_its_cause() {
        let v = [Complex32::new(1.5, -2.0), Complex32::new(0.25, 8.0)];
        let mut buf = vec![0u8; 64];
        let n = block::emit(Format::Real32, ByteOrder::Swapped, &v, &mut buf).unwrap();
        let cfg = BlockConfig::new(2, Format::Real32, ByteOrder::Swapped).unwrap();
        assert_eq!(decode_block(&buf[..n], cfg).unwrap(), v);
        let j: serde_json::Value = serde_json::from_str(&values_json(&v)).unwrap();
        assert_eq!(j["re"], serde_json::json!([1.5, 0.25]));
        assert_eq!(j["im"], serde_json::json!([-2.0, 8.0]));
        let e = decode_block(&buf[..n - 4], cfg).unwrap_err();
        assert!(e.to_string().starts_with("block rejected"), "{e:#}");
        assert!(e.chain().count() >= 2, "{e:#}");
    }
}
