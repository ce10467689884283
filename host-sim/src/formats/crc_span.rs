//! CRC-32 of any stretch of a byte slice in constant time, after one pass over the slice.
//!
//! The recording reader uses this while it searches damaged bytes for the next good record:
//! every candidate record claims a length, and checking each claim by hashing its bytes
//! would reread the same bytes once per candidate (quadratic time on a file crafted with
//! many record markers claiming long lengths). Instead one pass keeps the CRC register at
//! every [`STEP`]-th byte, and the CRC of a stretch is put together from the registers at
//! its two ends.
//!
//! The algebra (the one zlib's `crc32_combine` rests on): the CRC register is updated by a
//! map that is linear over GF(2) in the register and the data. Let `S(p)` be the register
//! after bytes `0..p` starting from zero, and `Z_n` the map "feed `n` zero bytes". Then the
//! register after bytes `a..b` from a start value `r` is `Z_{b−a}(r) ⊕ S(b) ⊕ Z_{b−a}(S(a))`,
//! so the IEEE CRC-32 of `a..b` (start `!0`, final inversion) is
//! `!(S(b) ⊕ Z_{b−a}(!S(a)))`. `Z_n` is applied as a product of the precomputed maps
//! `Z_{2^k}` for the bits of `n`, each held as four 256-entry tables.

use std::sync::OnceLock;

/// Registers are kept at every `STEP`-th byte: memory is a sixteenth of the slice, and a
/// stretch costs at most `2 × (STEP − 1)` bytes of table steps plus one `Z_n`.
pub const STEP: usize = 64;

/// CRC-32 (IEEE 802.3, reflected polynomial 0xEDB88320) byte table.
const TABLE: [u32; 256] = byte_table();

const fn byte_table() -> [u32; 256] {
    let mut t = [0u32; 256];
    let mut i = 0;
    while i < 256 {
        let mut c = i as u32;
        let mut k = 0;
        while k < 8 {
            c = if c & 1 != 0 {
                0xEDB8_8320 ^ (c >> 1)
            } else {
                c >> 1
            };
            k += 1;
        }
        t[i] = c;
        i += 1;
    }
    t
}

/// A linear map on the 32-bit register, as four byte tables.
type Map = [[u32; 256]; 4];

fn apply(m: &Map, v: u32) -> u32 {
    m[0][(v & 0xFF) as usize]
        ^ m[1][((v >> 8) & 0xFF) as usize]
        ^ m[2][((v >> 16) & 0xFF) as usize]
        ^ m[3][(v >> 24) as usize]
}

/// `Z_{2^k}` for k = 0…31.
fn zero_maps() -> &'static [Map] {
    static MAPS: OnceLock<Vec<Map>> = OnceLock::new();
    MAPS.get_or_init(|| {
        let one_zero = |v: u32| TABLE[(v & 0xFF) as usize] ^ (v >> 8);
        let mut maps: Vec<Map> = Vec::with_capacity(32);
        let mut m = [[0u32; 256]; 4];
        for (j, row) in m.iter_mut().enumerate() {
            for (b, slot) in row.iter_mut().enumerate() {
                *slot = one_zero((b as u32) << (8 * j));
            }
        }
        maps.push(m);
        for _ in 1..32 {
            let prev = maps.last().copied().unwrap_or(m);
            let mut next = [[0u32; 256]; 4];
            for (j, row) in next.iter_mut().enumerate() {
                for (b, slot) in row.iter_mut().enumerate() {
                    *slot = apply(&prev, apply(&prev, (b as u32) << (8 * j)));
                }
            }
            maps.push(next);
        }
        maps
    })
}

/// Feeds `n` zero bytes to the register `v` (without the bytes).
fn zeros(mut v: u32, n: u64) -> u32 {
    let maps = zero_maps();
    let mut n = n;
    let mut k = 0;
    while n != 0 {
        if n & 1 != 0 {
            v = apply(&maps[k], v);
        }
        n >>= 1;
        k += 1;
    }
    v
}

/// Feeds `bytes` to the register `r` one byte at a time.
fn feed(mut r: u32, bytes: &[u8]) -> u32 {
    for &b in bytes {
        r = TABLE[((r ^ u32::from(b)) & 0xFF) as usize] ^ (r >> 8);
    }
    r
}

/// The registers of one slice at every [`STEP`]-th byte.
#[derive(Debug, Clone)]
pub struct CrcSpans {
    marks: Vec<u32>,
}

impl CrcSpans {
    /// One pass over `bytes`.
    pub fn new(bytes: &[u8]) -> Self {
        let mut marks = Vec::with_capacity(bytes.len() / STEP + 1);
        let mut r = 0u32;
        marks.push(r);
        for chunk in bytes.chunks_exact(STEP) {
            // crc32fast keeps the inverted register; start it at r and read r back.
            let mut h = crc32fast::Hasher::new_with_initial(!r);
            h.update(chunk);
            r = !h.finalize();
            marks.push(r);
        }
        Self { marks }
    }

    /// Register after `bytes[..p]` from zero (`bytes` is the slice given to [`Self::new`]).
    fn register(&self, bytes: &[u8], p: usize) -> u32 {
        let i = p / STEP;
        feed(self.marks[i], &bytes[i * STEP..p])
    }

    /// IEEE CRC-32 of `bytes[a..b]` (`a ≤ b ≤ bytes.len()`, `bytes` the slice given to
    /// [`Self::new`]); equal to `crc32fast::hash(&bytes[a..b])`.
    pub fn crc(&self, bytes: &[u8], a: usize, b: usize) -> u32 {
        let sa = self.register(bytes, a);
        let sb = self.register(bytes, b);
        !(sb ^ zeros(!sa, (b - a) as u64))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// splitmix64 (common practice, no source).
    fn bytes(n: usize, seed: u64) -> Vec<u8> {
        let mut s = seed;
        (0..n)
            .map(|_| {
                s = s.wrapping_add(0x9E37_79B9_7F4A_7C15);
                let mut z = s;
                z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
                z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
                (z ^ (z >> 31)) as u8
            })
            .collect()
    }

    #[test]
    fn the_byte_table_is_the_ieee_one() {
        // CRC-32/ISO-HDLC check value of "123456789" (Catalogue of parametrised CRC
        // algorithms).
        assert_eq!(!feed(!0, b"123456789"), 0xCBF4_3926);
    }

    #[test]
    fn every_stretch_equals_crc32fast() {
        // crc32fast as the independent reference, on every stretch of a short slice and on
        // random stretches of a long one.
        let b = bytes(300, 1);
        let s = CrcSpans::new(&b);
        for a in 0..=b.len() {
            for e in a..=b.len() {
                assert_eq!(s.crc(&b, a, e), crc32fast::hash(&b[a..e]), "{a}..{e}");
            }
        }
        let b = bytes(1 << 20, 2);
        let s = CrcSpans::new(&b);
        let r = bytes(4000, 3);
        for w in r.chunks_exact(8) {
            let x = u32::from_le_bytes([w[0], w[1], w[2], w[3]]) as usize % (b.len() + 1);
            let y = u32::from_le_bytes([w[4], w[5], w[6], w[7]]) as usize % (b.len() + 1);
            let (a, e) = (x.min(y), x.max(y));
            assert_eq!(s.crc(&b, a, e), crc32fast::hash(&b[a..e]), "{a}..{e}");
        }
    }

    #[test]
    fn zero_bytes_by_maps_equal_feeding_them() {
        for n in [0u64, 1, 2, 3, 63, 64, 1000, 65_537] {
            let v = 0x1234_5678;
            assert_eq!(zeros(v, n), feed(v, &vec![0u8; n as usize]), "n = {n}");
        }
    }
}
