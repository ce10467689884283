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
//! `!(S(b) ⊕ Z_{b−a}(!S(a)))`. In the reflected bit order of this CRC, `Z_n` is the product
//! with `x^(8n)` modulo the CRC polynomial; `x^(8n)` comes from two tables of 4096 powers
//! (the low and high 12 bits of `n`), so `Z_n` costs two carry-less products of 32 steps.

use std::sync::OnceLock;

/// Registers are kept at every `STEP`-th byte: memory is an eighth of the slice, and a
/// stretch costs at most `2 × (STEP − 1)` bytes of hashing plus `Z_n`.
pub const STEP: usize = 32;

/// The CRC-32 polynomial (IEEE 802.3), reflected.
const POLY: u32 = 0xEDB8_8320;

/// CRC-32 (IEEE 802.3, reflected polynomial) byte table.
static TABLE: [u32; 256] = byte_table();

/// Tables for four bytes at a time ("slicing-by-4"): `SLICE[k][b]` is byte `b` followed by
/// `k` zero bytes.
static SLICE: [[u32; 256]; 4] = {
    let mut t = [[0u32; 256]; 4];
    t[0] = byte_table();
    let mut k = 1;
    while k < 4 {
        let mut b = 0;
        while b < 256 {
            let v = t[k - 1][b];
            t[k][b] = t[0][(v & 0xFF) as usize] ^ (v >> 8);
            b += 1;
        }
        k += 1;
    }
    t
};

const fn byte_table() -> [u32; 256] {
    let mut t = [0u32; 256];
    let mut i = 0;
    while i < 256 {
        let mut c = i as u32;
        let mut k = 0;
        while k < 8 {
            c = if c & 1 != 0 { POLY ^ (c >> 1) } else { c >> 1 };
            k += 1;
        }
        t[i] = c;
        i += 1;
    }
    t
}

/// `v · x` modulo the polynomial (reflected order: `x^0` is the top bit).
const fn times_x(v: u32) -> u32 {
    (v >> 1) ^ (POLY & (v & 1).wrapping_neg())
}

/// `j · x^4` for the low four bits `j`: with it, `p · x^4 = (p >> 4) ⊕ X4[p & 15]`.
static X4: [u32; 16] = {
    let mut t = [0u32; 16];
    let mut j = 0;
    while j < 16 {
        t[j] = times_x(times_x(times_x(times_x(j as u32))));
        j += 1;
    }
    t
};

/// `a · b` modulo the polynomial, both in the reflected order where `x^0` is the top bit
/// (the product zlib's `multmodp` computes), four bits of `a` at a time by Horner's rule
/// from its highest power down.
fn mul(a: u32, b: u32) -> u32 {
    // Multiples of b by the sixteen polynomials of degree < 4; nibble bit 0 is x^3.
    let x1 = times_x(b);
    let x2 = times_x(x1);
    let x3 = times_x(x2);
    let (x13, x12, x23) = (x1 ^ x3, x1 ^ x2, x2 ^ x3);
    let x123 = x12 ^ x3;
    let t = [
        0,
        x3,
        x2,
        x23,
        x1,
        x13,
        x12,
        x123,
        b,
        b ^ x3,
        b ^ x2,
        b ^ x23,
        b ^ x1,
        b ^ x13,
        b ^ x12,
        b ^ x123,
    ];
    let mut p = 0u32;
    let mut shift = 0;
    while shift < 32 {
        p = (p >> 4) ^ X4[(p & 15) as usize] ^ t[((a >> shift) & 15) as usize];
        shift += 4;
    }
    p
}

/// Bits of `n` per table.
const DIGIT: u32 = 12;

/// `x^(8·d·4096^level)` for d = 0…4095, level 0 and 1, and the step to the next level.
fn powers() -> &'static [[u32; 1 << DIGIT]; 2] {
    static POWERS: OnceLock<Box<[[u32; 1 << DIGIT]; 2]>> = OnceLock::new();
    POWERS.get_or_init(|| {
        let mut t = Box::new([[0u32; 1 << DIGIT]; 2]);
        // x^8 is one zero byte fed to the register x^0 (the top bit).
        let mut unit = TABLE[0] ^ ((1u32 << 31) >> 8);
        for level in t.iter_mut() {
            let mut acc = 1u32 << 31;
            for slot in level.iter_mut() {
                *slot = acc;
                acc = mul(acc, unit);
            }
            unit = acc; // x^(8·4096^(level+1))
        }
        t
    })
}

/// Feeds `n` zero bytes to the register `v` (without the bytes).
fn zeros(mut v: u32, mut n: u64) -> u32 {
    let p = powers();
    let mask = (1u64 << DIGIT) - 1;
    // Beyond two digits (n ≥ 2^24), whole blocks of 4096^2 bytes first.
    let block = mul(p[1][(1 << DIGIT) - 1], p[1][1]);
    while n >> (2 * DIGIT) != 0 {
        v = mul(block, v);
        n -= 1 << (2 * DIGIT);
    }
    let (lo, hi) = ((n & mask) as usize, (n >> DIGIT) as usize);
    if lo != 0 {
        v = mul(p[0][lo], v);
    }
    if hi != 0 {
        v = mul(p[1][hi], v);
    }
    v
}

/// Feeds `bytes` to the register `r`.
pub fn feed(r: u32, bytes: &[u8]) -> u32 {
    if bytes.len() >= 64 {
        // crc32fast keeps the inverted register.
        let mut h = crc32fast::Hasher::new_with_initial(!r);
        h.update(bytes);
        return !h.finalize();
    }
    // Slice patterns rather than iterator adaptors: this runs for every candidate record,
    // also in unoptimized test builds, where adaptors cost several times more.
    let mut r = r;
    let mut rest = bytes;
    while let [a, b, c, d, tail @ ..] = rest {
        r ^= u32::from_le_bytes([*a, *b, *c, *d]);
        r = SLICE[3][(r & 0xFF) as usize]
            ^ SLICE[2][((r >> 8) & 0xFF) as usize]
            ^ SLICE[1][((r >> 16) & 0xFF) as usize]
            ^ SLICE[0][(r >> 24) as usize];
        rest = tail;
    }
    for &b in rest {
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
            r = feed(r, chunk);
            marks.push(r);
        }
        Self { marks }
    }

    /// Register after `bytes[..p]` from zero (`bytes` is the slice given to [`Self::new`]).
    pub fn register(&self, bytes: &[u8], p: usize) -> u32 {
        let i = p / STEP;
        feed(self.marks[i], &bytes[i * STEP..p])
    }

    /// IEEE CRC-32 of `bytes[a..b]` (`a ≤ b ≤ bytes.len()`, `bytes` the slice given to
    /// [`Self::new`]); equal to `crc32fast::hash(&bytes[a..b])`.
    pub fn crc(&self, bytes: &[u8], a: usize, b: usize) -> u32 {
        crc_between(self.register(bytes, a), self.register(bytes, b), b - a)
    }
}

/// IEEE CRC-32 of the `n` bytes between two offsets whose registers (from zero, see
/// [`CrcSpans::register`]) are `sa` and `sb`.
pub fn crc_between(sa: u32, sb: u32, n: usize) -> u32 {
    !(sb ^ zeros(!sa, n as u64))
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
    fn feeding_by_words_equals_crc32fast() {
        let b = bytes(200, 5);
        for n in 0..b.len() {
            assert_eq!(!feed(!0, &b[..n]), crc32fast::hash(&b[..n]), "{n} bytes");
        }
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

    /// The product bit by bit, as zlib's `multmodp` does it.
    fn mul_bitwise(a: u32, mut b: u32) -> u32 {
        let mut p = 0;
        let mut m = 1u32 << 31;
        while m != 0 {
            if a & m != 0 {
                p ^= b;
            }
            m >>= 1;
            b = times_x(b);
        }
        p
    }

    #[test]
    fn the_product_by_nibbles_equals_the_bitwise_one() {
        let r = bytes(8000, 4);
        for w in r.chunks_exact(8) {
            let a = u32::from_le_bytes([w[0], w[1], w[2], w[3]]);
            let b = u32::from_le_bytes([w[4], w[5], w[6], w[7]]);
            assert_eq!(mul(a, b), mul_bitwise(a, b), "{a:08x} · {b:08x}");
        }
        // x^0 is the unit.
        assert_eq!(mul(1 << 31, 0x1234_5678), 0x1234_5678);
    }

    #[test]
    fn zero_bytes_beyond_two_digits_compose() {
        // 2^24 + 5 zero bytes = 2^24 then 5 (Z is a power of one map, so it composes).
        let v = 0x9ABC_DEF0;
        assert_eq!(zeros(v, (1 << 24) + 5), zeros(zeros(v, 1 << 24), 5));
        assert_eq!(zeros(v, 1 << 24), zeros(zeros(v, 1 << 23), 1 << 23));
        assert_eq!(zeros(v, 3 << 24), zeros(zeros(v, 1 << 25), 1 << 24));
    }

    #[test]
    fn zero_bytes_by_powers_equal_feeding_them() {
        for n in [
            0u64, 1, 2, 3, 63, 64, 1000, 4095, 4096, 4097, 65_537, 5_000_000,
        ] {
            let v = 0x1234_5678;
            assert_eq!(zeros(v, n), feed(v, &vec![0u8; n as usize]), "n = {n}");
        }
    }
}
