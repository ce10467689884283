//! A whole record on one plain line, read in one pass.
//!
//! Most files of one or two ports hold one record a line, in plain ASCII: numbers parted by
//! spaces or tabs, no comment. Once the general reader (`bytes.rs`, `pick.rs`) has read such
//! a line as a whole record, with only some parameters kept, the next lines are tried here
//! first: each number is read where it starts, with no scan for tokens before it (the
//! number's own byte loop finds where it ends), kept values are converted as the general
//! reader converts them and the others are vouched for by the same bound. A line that is
//! anything else — fewer or more numbers, a comment, a byte past ASCII, a separator other
//! than space, tab or carriage return, a number the bound cannot vouch for or the exact
//! parser refuses — is left untouched to the general reader, which reads it (and reports
//! any error) as before. So the two give the same sweeps, bit for bit, and the same errors.
//! Anything the general reader reads on a line of its own (a keyword, the option line, a
//! comment line) ends this, until it has read a whole record on one line again.

use super::bytes::is_space;
use super::decimal::{simple_decimal_prefix, vouched_prefix};
use super::pick::{exact_number, take_of, Take};
use super::Parser;
use crate::formats::touchstone::{DataFormat, TouchstoneError};

/// The records of one line each that the reader is in the middle of: what it does with
/// each number of a record.
pub(super) struct OneLine {
    takes: Vec<Take>,
    /// The pairs kept: bit k for pair k (0-based, in the record's order).
    kept: u64,
}

/// The most pairs a record read here may have (one bit each in [`OneLine::kept`]).
const MAX_PAIRS: usize = 64;

impl OneLine {
    /// For records of `need` numbers of which the pairs `needed` are kept, in a dB file or
    /// not: the general reader's rule ([`take_of`]) for each number. `None` for records of
    /// more than [`MAX_PAIRS`] pairs, which are left to the general reader.
    pub(super) fn new(need: usize, needed: &[bool], db: bool) -> Option<Self> {
        let pairs = need.saturating_sub(1) / 2;
        if pairs > MAX_PAIRS {
            return None;
        }
        let takes = (0..need)
            .map(|index| take_of(index, need, Some(needed), db))
            .collect();
        let kept = (0..pairs)
            .filter(|&k| take_of(1 + 2 * k, need, Some(needed), db) == Take::Value)
            .fold(0, |bits, k| bits | 1 << k);
        Some(Self { takes, kept })
    }
}

/// Whether `b` parts numbers here (other whitespace is left to the general reader).
fn parts(b: u8) -> bool {
    matches!(b, b' ' | b'\t' | b'\r')
}

/// Whether a number may end before `at`: a part, the line's end or the file's.
#[inline(always)]
fn ends_at(bytes: &[u8], at: usize) -> bool {
    bytes.get(at).is_none_or(|&b| parts(b) || b == b'\n')
}

/// The first byte at or after `i` that does not part numbers.
#[inline(always)]
fn skip_parts(bytes: &[u8], mut i: usize) -> usize {
    while bytes.get(i).is_some_and(|&b| parts(b)) {
        i += 1;
    }
    i
}

/// The number at `i` converted exactly, and where it ends; `None` when it is not a token
/// of its own or the exact parser refuses it.
#[inline(always)]
fn value_at(bytes: &[u8], i: usize) -> Option<(f64, usize)> {
    let rest = bytes.get(i..)?;
    if let Some((x, len)) = simple_decimal_prefix(rest) {
        return ends_at(bytes, i + len).then_some((x, i + len));
    }
    let len = rest
        .iter()
        .position(|&b| parts(b) || b == b'\n')
        .unwrap_or(rest.len());
    let tok = &rest[..len];
    if len == 0
        || tok
            .iter()
            .any(|&b| b == b'!' || !b.is_ascii() || is_space(b))
    {
        return None;
    }
    exact_number(tok).ok().map(|x| (x, i + len))
}

/// The number at `i` vouched for within `limit`, and where it ends.
#[inline(always)]
fn bound_at(bytes: &[u8], i: usize, limit: i64) -> Option<usize> {
    let len = vouched_prefix(bytes.get(i..)?, limit)?;
    ends_at(bytes, i + len).then_some(i + len)
}

impl Parser<'_> {
    /// The plan for lines that each hold one whole record of `need` numbers.
    pub(super) fn one_line_plan(&self, need: usize) -> Option<OneLine> {
        let db = self.format() == DataFormat::Db;
        OneLine::new(need, self.kept_pairs()?, db)
    }

    /// Reads the line at `start` when it is one whole record of plain numbers: returns
    /// where the line ends, or `None` (nothing changed) to leave it to the general reader.
    /// An error is one of the record's checks, as the general reader makes them.
    pub(super) fn one_line_record(
        &mut self,
        bytes: &[u8],
        start: usize,
    ) -> Result<Option<usize>, TouchstoneError> {
        let Some(one) = self.one_line.as_ref() else {
            return Ok(None);
        };
        debug_assert!(self.record.is_empty() && self.spans.is_empty());
        let record = &mut self.record;
        let mut i = start;
        for &take in &one.takes {
            i = skip_parts(bytes, i);
            let read = match take {
                Take::Value => value_at(bytes, i),
                Take::Bound(limit) => bound_at(bytes, i, limit).map(|end| (f64::NAN, end)),
            };
            let Some((x, end)) = read else {
                record.clear();
                return Ok(None);
            };
            record.push(x);
            i = end;
        }
        let kept = one.kept;
        i = skip_parts(bytes, i);
        if !matches!(bytes.get(i), None | Some(b'\n')) {
            self.record.clear();
            return Ok(None);
        }
        self.record_start = self.line;
        // Every pair not kept was passed over (both numbers vouched for), so only the kept
        // pairs are checked, as `complete_picked` would check them.
        self.complete_kept(kept)?;
        self.seen_content = true;
        Ok(Some(i))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    use super::super::decimal::{DB_LEVEL_DIGITS, VALUE_DIGITS};

    #[test]
    fn takes_follow_the_kept_pairs_and_the_format() {
        // Reference: the layout of a 2-port record (frequency, then four pairs; in a dB
        // file each pair's first number a level, its second an angle), written out by hand.
        let one = OneLine::new(9, &[false, true, false, false], true).unwrap();
        use Take::*;
        let b = Bound(VALUE_DIGITS);
        let db = Bound(DB_LEVEL_DIGITS);
        assert_eq!(one.takes, [Value, db, b, Value, Value, db, b, db, b]);
        assert_eq!(one.kept, 0b10);
        let one = OneLine::new(3, &[true], false).unwrap();
        assert_eq!(one.takes, [Value, Value, Value]);
        assert_eq!(one.kept, 0b1);
        // 64 pairs fit the mask (pair 63 kept: its top bit); 65 are left to the general reader.
        let mut needed = vec![false; 64];
        needed[63] = true;
        assert_eq!(OneLine::new(129, &needed, false).unwrap().kept, 1 << 63);
        assert!(OneLine::new(131, &[false; 65], false).is_none());
    }

    #[test]
    fn a_number_must_be_a_token_of_its_own() {
        // Reference: the values written in the text (Rust's parser reads the literals).
        let b = b"1.5 2e3\t-7\r\n8x 9!";
        assert_eq!(value_at(b, 0), Some((1.5, 3)));
        assert_eq!(value_at(b, 4), Some((2000.0, 7)));
        assert_eq!(value_at(b, 8), Some((-7.0, 10)));
        assert_eq!(value_at(b, 12), None);
        assert_eq!(value_at(b, 15), None);
        assert_eq!(bound_at(b, 4, 37), Some(7));
        assert_eq!(bound_at(b, 4, 3), None);
        assert_eq!(bound_at(b, 12, 37), None);
        // Long numbers go to the exact parser, still as whole tokens.
        let b = b"0.12345678901234567890123 1";
        assert_eq!(value_at(b, 0), Some((0.123_456_789_012_345_68, 25)));
        assert_eq!(value_at(b"1e999 ", 0), None);
        assert_eq!(value_at(b"nan ", 0), None);
        assert_eq!(value_at(b"", 0), None);
    }
}
