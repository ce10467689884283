//! Eight bytes a step: a word's bytes as lanes (byte k of the text in lane k,
//! little-endian), a lane marked by its top bit. Shared by the line scan (`bytes.rs`) and the
//! digit runs (`decimal.rs`).

/// One byte in each of the eight lanes of a word.
pub(super) const LANES: u64 = 0x0101_0101_0101_0101;
/// The top bit of each lane: the masks mark a byte there.
pub(super) const TOPS: u64 = LANES * 0x80;

/// The eight bytes at `at`, when the text has them.
#[inline]
pub(super) fn word_at(text: &[u8], at: usize) -> Option<u64> {
    let w = text.get(at..)?.first_chunk::<8>()?;
    Some(u64::from_le_bytes(*w))
}

/// The lanes of `x` (bytes below 0x80) equal to `c`. No lane carries into the next: each
/// lane of `t` is at most 0x7f, so `t + 0x7f` stays below 0x100 and has its top bit set
/// exactly when `t` is not zero.
#[inline]
pub(super) fn lanes_equal(x: u64, c: u8) -> u64 {
    let t = x ^ (LANES * u64::from(c));
    !(t + LANES * 0x7f) & TOPS
}

/// The lanes of `w` that are not an ASCII digit. `t` is 0..=9 exactly in a digit's lane;
/// its low seven bits plus 0x76 reach the top bit from 10 on (and no lane carries: at most
/// 0x7f + 0x76 < 0x100), and a lane with its top bit set is no digit.
#[inline]
pub(super) fn not_digits(w: u64) -> u64 {
    let t = w ^ (LANES * u64::from(b'0'));
    (((t & !TOPS) + LANES * 0x76) | t) & TOPS
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lane_masks_equal_the_byte_tests() {
        // Reference: `u8::is_ascii_digit` and `==`, byte by byte. Every byte value in every
        // lane, beside neighbours of every kind (no lane may carry into the next).
        for b in 0..=255u8 {
            for lane in 0..8 {
                for fill in [0u8, b'0', b'9', 0x7f, 0x80, 0xff] {
                    let mut bytes = [fill; 8];
                    bytes[lane] = b;
                    let w = u64::from_le_bytes(bytes);
                    let at = |m: u64, k: usize| m >> (8 * k + 7) & 1 == 1;
                    for k in 0..8 {
                        assert_eq!(
                            at(not_digits(w), k),
                            !bytes[k].is_ascii_digit(),
                            "{bytes:?}"
                        );
                        if bytes[k] < 0x80 {
                            let x = w & !TOPS;
                            assert_eq!(at(lanes_equal(x, b'!'), k), bytes[k] == b'!', "{bytes:?}");
                        }
                    }
                }
            }
        }
    }
}
