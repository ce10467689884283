//! Decimal numbers without the general parser: a check that a token is a number and how
//! large it can be ([`vouched`]), and the exact value of the common short ones
//! ([`simple_decimal`]); anything else is left to Rust's `f64` parser.

use super::lanes::{not_digits, word_at};

/// A number passed over has magnitude below 10^this: far inside single precision
/// (3.4e38) as a real or imaginary part, as a magnitude, and (being finite) as an angle.
pub(super) const VALUE_DIGITS: i64 = 37;

/// A dB level passed over has magnitude below 10^this (100 dB: 10^(±5) as a magnitude).
pub(super) const DB_LEVEL_DIGITS: i64 = 2;

/// The mantissa of a token, `[+-]digits[.digits]`, read up to the first byte that is not
/// part of it.
struct Mantissa {
    negative: bool,
    /// The digits as an integer (exact up to 19 digits; wrapped beyond, then not used).
    m: u64,
    /// All digits.
    digits: usize,
    /// Where the integer digits start (after any sign).
    int_start: usize,
    /// Integer digits.
    int_digits: usize,
    /// Digits after the point.
    fraction: i64,
    /// Where the mantissa ends.
    end: usize,
}

/// How many ASCII digits `text` starts with: eight at a time while it has eight bytes.
#[inline(always)]
fn digit_count(text: &[u8]) -> usize {
    let mut n = 0;
    while let Some(w) = word_at(text, n) {
        let stops = not_digits(w);
        if stops != 0 {
            return n + stops.trailing_zeros() as usize / 8;
        }
        n += 8;
    }
    n + text[n..].iter().take_while(|b| b.is_ascii_digit()).count()
}

/// The value of eight ASCII digits in a word (the first, most significant, in lane 0);
/// a lane holding 0 counts as the digit 0. Three multiplications join neighbours: pairs,
/// then fours, then the eight (the way of the `fast_float` parsers, Lemire 2021).
#[inline]
fn eight_digits(w: u64) -> u64 {
    let w = ((w & 0x0f0f_0f0f_0f0f_0f0f).wrapping_mul(2561)) >> 8;
    let w = ((w & 0x00ff_00ff_00ff_00ff).wrapping_mul(6_553_601)) >> 16;
    ((w & 0x0000_ffff_0000_ffff).wrapping_mul(42_949_672_960_001)) >> 32
}

/// 10^0 … 10^7.
const TENS: [u64; 8] = [1, 10, 100, 1_000, 10_000, 100_000, 1_000_000, 10_000_000];

/// The ASCII digits `text` starts with, measured and read in one pass: how many, and `m`
/// followed by them (wrapping beyond 19 digits, as the caller then does not use it). Eight
/// at a time while the text has eight bytes: a word of digits joins `m` whole; in the word
/// where the run stops, its digits are shifted to the word's last lanes (the lanes before
/// them zero) and joined; the last few bytes of the text one at a time.
#[inline(always)]
fn digit_run(text: &[u8], mut m: u64) -> (usize, u64) {
    let mut n = 0;
    while let Some(w) = word_at(text, n) {
        let stops = not_digits(w);
        if stops == 0 {
            m = m.wrapping_mul(100_000_000).wrapping_add(eight_digits(w));
            n += 8;
            continue;
        }
        let k = stops.trailing_zeros() as usize / 8;
        if k == 0 {
            return (n, m);
        }
        let rest = eight_digits(w << (8 * (8 - k)));
        return (n + k, m.wrapping_mul(TENS[k]).wrapping_add(rest));
    }
    for &b in &text[n..] {
        if !b.is_ascii_digit() {
            break;
        }
        m = m.wrapping_mul(10).wrapping_add(u64::from(b - b'0'));
        n += 1;
    }
    (n, m)
}

/// The integer digits, then (after a point) the fraction's, each run measured a word at a
/// time; their value only when `VALUE` (a bound needs none).
#[inline(always)]
fn mantissa<const VALUE: bool>(tok: &[u8]) -> Mantissa {
    let negative = tok.first() == Some(&b'-');
    let sign = usize::from(matches!(tok.first(), Some(b'+' | b'-')));
    // A value's digits are read as they are measured; a bound needs only their count.
    let run = |text: &[u8], m: u64| {
        if VALUE {
            digit_run(text, m)
        } else {
            (digit_count(text), 0)
        }
    };
    let (int_digits, m) = run(&tok[sign..], 0);
    let int_end = sign + int_digits;
    let (fraction, m, end) = if tok.get(int_end) == Some(&b'.') {
        let (n, m) = run(&tok[int_end + 1..], m);
        (n, m, int_end + 1 + n)
    } else {
        (0, m, int_end)
    };
    Mantissa {
        negative,
        m,
        digits: int_digits + fraction,
        int_start: sign,
        int_digits,
        fraction: fraction as i64,
        end,
    }
}

impl Mantissa {
    /// Integer digits after any leading zeros: |mantissa| < 10^this.
    fn lead(&self, tok: &[u8]) -> i64 {
        let int = &tok[self.int_start..self.int_start + self.int_digits];
        int.iter().skip_while(|&&b| b == b'0').count() as i64
    }
}

/// The exponent `e[+-]digits` at `i` (0 when there is none; its size held at 2^40) and
/// where the token's number ends; `None` for an `e` without digits.
#[inline(always)]
fn exponent(tok: &[u8], mut i: usize) -> Option<(i64, usize)> {
    if !matches!(tok.get(i), Some(b'e' | b'E')) {
        return Some((0, i));
    }
    i += 1;
    let negative = tok.get(i) == Some(&b'-');
    i += usize::from(matches!(tok.get(i), Some(b'+' | b'-')));
    let (first, mut x) = (i, 0i64);
    while let Some(&b) = tok.get(i).filter(|b| b.is_ascii_digit()) {
        x = (x * 10 + i64::from(b - b'0')).min(1 << 40);
        i += 1;
    }
    if i == first {
        return None;
    }
    Some((if negative { -x } else { x }, i))
}

/// Whether Rust's `f64` parser surely reads the token as a plain decimal number
/// (`[+-]digits[.digits][e[+-]digits]`, at least one digit before the exponent) of magnitude
/// below 10^`limit`: the number may then be passed over. Anything else is left to the exact
/// parser.
pub(super) fn vouched(tok: &[u8], limit: i64) -> bool {
    whole(tok, vouched_prefix(tok, limit).map(|end| ((), end))).is_some()
}

/// [`vouched`] for the number at the start of `text`: where it stops (the caller checks what
/// follows it). Its power of ten is the integer digits after any leading zeros plus the
/// exponent (|value| < 10^that); the integer digits with their zeros bound that from above,
/// so the zeros are counted only when that bound is over `limit`.
#[inline(always)]
pub(super) fn vouched_prefix(text: &[u8], limit: i64) -> Option<usize> {
    let m = mantissa::<false>(text);
    if m.digits == 0 {
        return None;
    }
    let (e, end) = exponent(text, m.end)?;
    (m.int_digits as i64 + e <= limit || m.lead(text) + e <= limit).then_some(end)
}

/// A prefix's answer when the prefix is the whole token.
fn whole<T>(tok: &[u8], prefix: Option<(T, usize)>) -> Option<T> {
    prefix.and_then(|(x, end)| (end == tok.len()).then_some(x))
}

/// 10^0 … 10^22: every one exactly an `f64`.
const POWERS_OF_TEN: [f64; 23] = [
    1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16,
    1e17, 1e18, 1e19, 1e20, 1e21, 1e22,
];

/// The value of a plain decimal token (`[+-]digits[.digits][e[+-]digits]`) of at most 19
/// digits whose digits make an integer m ≤ 2^53 and whose power of ten e is within ±22;
/// `None` for anything else. Exact: m and 10^|e| are both exactly `f64`s, and one IEEE
/// multiplication or division rounds correctly, so the result is the correctly rounded
/// value, which is what Rust's parser gives too (the fast path of Clinger, 1990, "How to
/// read floating point numbers accurately").
pub(super) fn simple_decimal(tok: &[u8]) -> Option<f64> {
    whole(tok, simple_decimal_prefix(tok))
}

/// [`simple_decimal`] of the number at the start of `text`, and where that number stops.
#[inline(always)]
pub(super) fn simple_decimal_prefix(text: &[u8]) -> Option<(f64, usize)> {
    let m = mantissa::<true>(text);
    if m.digits == 0 || m.digits > 19 || m.m > 1 << 53 {
        return None;
    }
    let (e, end) = exponent(text, m.end)?;
    let x = m.m as f64;
    let v = match e - m.fraction {
        0 => x,
        p @ 1..=22 => x * POWERS_OF_TEN[p as usize],
        p @ -22..=-1 => x / POWERS_OF_TEN[(-p) as usize],
        _ => return None,
    };
    Some((if m.negative { -v } else { v }, end))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Every string of up to `len` characters over `alphabet`.
    fn strings(alphabet: &[u8], len: usize) -> Vec<Vec<u8>> {
        let mut all = vec![Vec::new()];
        let mut last = vec![Vec::new()];
        for _ in 0..len {
            let next: Vec<Vec<u8>> = last
                .iter()
                .flat_map(|s: &Vec<u8>| {
                    alphabet.iter().map(move |&c| {
                        let mut t = s.clone();
                        t.push(c);
                        t
                    })
                })
                .collect();
            all.extend(next.iter().cloned());
            last = next;
        }
        all
    }

    #[test]
    fn digit_runs_read_a_word_at_a_time_equal_a_byte_at_a_time() {
        // Reference: the byte loop, digit by digit. Runs of 0..40 digits between other
        // bytes (each byte next to the digits in ASCII, and bytes past ASCII), at every
        // offset from a word's start to the text's end.
        let around = [b'/', b':', b'.', b' ', b'e', 0x80, 0xb0, 0xff, 0x00];
        let mut state = 0x0123_4567_89ab_cdefu64;
        for round in 0..20_000 {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            let (lead, run, tail) = (round % 9, (state % 41) as usize, (state >> 8) as usize % 10);
            let mut text: Vec<u8> = (0..lead).map(|k| around[k % around.len()]).collect();
            let digits = (0..run).map(|k| b'0' + ((state >> (k % 60)) % 10) as u8);
            text.extend(digits);
            text.extend((0..tail).map(|k| around[(k + round) % around.len()]));
            let count = digit_count(&text[lead..]);
            let want = text[lead..]
                .iter()
                .take_while(|b| b.is_ascii_digit())
                .count();
            assert_eq!(count, want, "{text:?}");
            let (n, value) = digit_run(&text[lead..], 7);
            assert_eq!(n, want, "{text:?}");
            // Wrapping alike beyond 19 digits (the same sum modulo 2^64).
            let want = text[lead..lead + n].iter().fold(7u64, |v, &b| {
                v.wrapping_mul(10).wrapping_add(u64::from(b - b'0'))
            });
            assert_eq!(value, want, "{text:?}");
        }
    }

    /// The power B of a plain decimal token with |value| < 10^B, written from its definition
    /// with string methods (no code of this module): `[+-]int[.frac][e[+-]exp]` with a digit
    /// in `int` or `frac`, B = the digits of `int` after its leading zeros, plus `exp` (held
    /// at 2^40, as the reader holds it).
    fn bound_by_definition(tok: &str) -> Option<i64> {
        let digits = |t: &str| t.bytes().all(|b| b.is_ascii_digit());
        let body = tok.strip_prefix(['+', '-']).unwrap_or(tok);
        let (mantissa, exp) = match body.split_once(['e', 'E']) {
            Some((m, x)) => (m, Some(x)),
            None => (body, None),
        };
        let (int, frac) = mantissa.split_once('.').unwrap_or((mantissa, ""));
        if !digits(int) || !digits(frac) || int.len() + frac.len() == 0 {
            return None;
        }
        let e = match exp {
            None => 0,
            Some(x) => {
                let negative = x.starts_with('-');
                let x = x.strip_prefix(['+', '-']).unwrap_or(x);
                if x.is_empty() || !digits(x) {
                    return None;
                }
                let v = x
                    .bytes()
                    .fold(0i64, |v, b| (v * 10 + i64::from(b - b'0')).min(1 << 40));
                if negative {
                    -v
                } else {
                    v
                }
            }
        };
        Some(int.trim_start_matches('0').len() as i64 + e)
    }

    #[test]
    fn the_vouch_is_the_bound_of_its_definition_held_to_the_limit() {
        // Reference: `bound_by_definition` above, on every string of up to 6 characters of
        // number syntax, whole and followed by a space, for the limits used (2 for dB
        // levels, 37) and those near the digit counts.
        for s in strings(b"+-.eE019", 6) {
            let text = std::str::from_utf8(&s).unwrap();
            let mut spaced = s.clone();
            spaced.push(b' ');
            for limit in [-2, -1, 0, 1, 2, 3, 5, 37] {
                let want = bound_by_definition(text).is_some_and(|b| b <= limit);
                assert_eq!(vouched(&s, limit), want, "{text:?} {limit}");
                // The prefix reading stops after a number the definition vouches for; it
                // reaches the space exactly when the whole string is one.
                let stops = vouched_prefix(&spaced, limit);
                if let Some(end) = stops {
                    let head = &text[..end];
                    let ok = bound_by_definition(head).is_some_and(|b| b <= limit);
                    assert!(ok, "{text:?} {limit}: stops after {head:?}");
                }
                assert_eq!(stops == Some(s.len()), want, "{text:?} {limit}");
            }
        }
    }

    #[test]
    fn a_vouched_token_is_what_rusts_parser_reads_and_within_its_limit() {
        // Reference: Rust's own `str::parse::<f64>`. Every string of up to 6 characters of
        // number syntax: where the byte loop vouches for one, the parser must read it,
        // finite and no larger than 10^limit, at both limits the reader uses.
        let mut vouched_for = 0;
        for s in strings(b"+-.eE019", 6) {
            let text = std::str::from_utf8(&s).unwrap();
            for limit in [DB_LEVEL_DIGITS, VALUE_DIGITS] {
                if !vouched(&s, limit) {
                    continue;
                }
                vouched_for += 1;
                let x: f64 = text
                    .parse()
                    .unwrap_or_else(|e| panic!("{text:?} vouched for but refused: {e}"));
                assert!(x.is_finite(), "{text:?}");
                assert!(
                    x.abs() <= 10f64.powi(limit as i32),
                    "{text:?}: {x} > 1e{limit}"
                );
            }
        }
        assert!(vouched_for > 10_000, "{vouched_for}");
    }

    #[test]
    fn the_bound_follows_the_digits_and_the_exponent() {
        // Reference: the bounds worked out by hand. A token with bound B is vouched for at
        // the limit B and not at B - 1; the others at no limit.
        for (tok, bound) in [
            ("0", Some(0)),
            ("-0.000123", Some(0)),
            ("123.4", Some(3)),
            ("00012", Some(2)),
            ("1e37", Some(38)),
            ("9.99E+36", Some(37)),
            (".5e-3", Some(-3)),
            ("5.", Some(1)),
            ("1e400", Some(401)),
            ("1e99999999999999999999", Some(1 + (1 << 40))),
            ("inf", None),
            ("NaN", None),
            ("1e", None),
            ("e5", None),
            (".", None),
            ("-", None),
            ("1.2.3", None),
            ("0x10", None),
            ("1,5", None),
            ("", None),
        ] {
            let t = tok.as_bytes();
            match bound {
                Some(b) => assert!(vouched(t, b) && !vouched(t, b - 1), "{tok}"),
                None => assert!(!vouched(t, 1 << 50), "{tok}"),
            }
        }
    }

    #[test]
    fn simple_decimals_are_what_rusts_parser_reads_bit_for_bit() {
        // Reference: Rust's own `str::parse::<f64>` (correctly rounded). Every short
        // string of number syntax, then many numbers written as files write them.
        let mut answered = 0;
        for s in strings(b"-.e059", 6) {
            if let Some(x) = simple_decimal(&s) {
                let text = std::str::from_utf8(&s).unwrap();
                let want: f64 = text.parse().unwrap();
                assert_eq!(x.to_bits(), want.to_bits(), "{text:?}");
                answered += 1;
            }
        }
        assert!(answered > 1000, "{answered}");
        let mut state = 0x1234_5678_9abc_def0u64;
        let mut fast = 0;
        for k in 0..200_000 {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            let x = f64::from_bits(state >> 2) % 1e6 * if k % 2 == 0 { 1.0 } else { -1e-7 };
            let text = match k % 5 {
                0 => format!("{x:.9e}"),
                1 => format!("{x:.6}"),
                2 => format!("{x:E}"),
                3 => format!("{:.17}", x / 1e3),
                _ => format!("{x:+.3e}"),
            };
            let want: f64 = text.parse().unwrap();
            if let Some(got) = simple_decimal(text.as_bytes()) {
                assert_eq!(got.to_bits(), want.to_bits(), "{text}");
                fast += 1;
            }
        }
        assert!(fast > 50_000, "{fast}");
        // Signs, zeros and the limits of the fast path.
        for t in [
            "-0",
            "+0.0",
            "-0e5",
            "9007199254740992",
            "9007199254740993",
            "1e22",
            "1e23",
            "1e-22",
            "1e-23",
            "0.1234567890123456789",
            "12345678901234567890",
        ] {
            let want: f64 = t.parse().unwrap();
            if let Some(got) = simple_decimal(t.as_bytes()) {
                assert_eq!(got.to_bits(), want.to_bits(), "{t}");
            }
        }
        assert_eq!(
            simple_decimal(b"-0").map(f64::to_bits),
            Some((-0.0f64).to_bits())
        );
        assert_eq!(simple_decimal(b"9007199254740993"), None);
        assert_eq!(simple_decimal(b"1e23"), None);
        assert_eq!(simple_decimal(b"inf"), None);
    }
}
