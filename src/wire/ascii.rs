//! Comma-separated ASCII numbers from the VNA link.
//!
//! With `FORMat:DATA ASCii` a VNA answers a data query with one line of decimal numbers,
//! `re,im,re,im,…` and a newline. [`AsciiDecoder`] takes that line in chunks of any size
//! and writes points straight into the caller's sweep buffer, with the same discipline as
//! the block decoder: a validated config, typed rejections, every byte counted, memory
//! bounded by the buffer and a [`MAX_TOKEN_BYTES`] token buffer.
//!
//! A number is an optional sign, digits with an optional decimal point, and an optional
//! exponent (`-1.5E-03`, `+2`, `.5`, `7.`); spaces and tabs may surround it, and a `\r`
//! before the newline is ignored. Lines holding only white space are skipped. After a
//! rejection the rest of the line is skipped and decoding resumes after the newline.
//! `INF`/`NAN` spellings and the SCPI codes ±9.9E37 and 9.91E37 are rejected as
//! non-finite.

use super::block::{usable_f32, DecodeEvent, Feed, StreamDecoder};
use crate::error::{AsciiError, WireConfigError};
use crate::grid::Grid;
use crate::Complex32;

/// Longest number token accepted, in bytes.
pub const MAX_TOKEN_BYTES: usize = 48;

/// What the ASCII decoder expects, validated once: the point count K.
///
/// ```
/// use sweepgate::wire::ascii::AsciiConfig;
/// assert_eq!(AsciiConfig::new(201).unwrap().points(), 201);
/// assert!(AsciiConfig::new(70_000).is_err());
/// ```
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct AsciiConfig {
    points: u16,
}

impl AsciiConfig {
    /// A configuration expecting `points` complex points per line.
    pub fn new(points: usize) -> Result<Self, WireConfigError> {
        if points == 0 {
            return Err(WireConfigError::NoPoints);
        }
        let points = u16::try_from(points).map_err(|_| WireConfigError::TooManyPoints)?;
        Ok(Self { points })
    }

    /// A configuration expecting the grid's point count.
    pub fn for_grid(grid: &Grid) -> Self {
        Self {
            points: u16::try_from(grid.points()).unwrap_or(u16::MAX),
        }
    }

    /// Expected points per line, K.
    pub fn points(&self) -> usize {
        self.points as usize
    }
}

/// Every byte and line the ASCII decoder saw, by outcome.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct AsciiCounters {
    /// Lines decoded into the buffer.
    pub accepted: u32,
    /// Rejected: [`AsciiError::MalformedNumber`].
    pub malformed_number: u32,
    /// Rejected: [`AsciiError::TokenTooLong`].
    pub token_too_long: u32,
    /// Rejected: [`AsciiError::OddCount`].
    pub odd_count: u32,
    /// Rejected: [`AsciiError::PointCount`].
    pub point_count: u32,
    /// Rejected: [`AsciiError::Overflow`].
    pub overflow: u32,
    /// Rejected: [`AsciiError::Truncated`].
    pub truncated: u32,
    /// Rejected: [`AsciiError::NonFinite`].
    pub non_finite: u32,
    /// Bytes of accepted lines, newline included.
    pub bytes_accepted: u64,
    /// Bytes outside accepted lines: blank lines and rejected lines.
    pub bytes_skipped: u64,
}

impl AsciiCounters {
    /// Lines rejected, all reasons.
    pub fn rejected(&self) -> u32 {
        self.malformed_number
            .saturating_add(self.token_too_long)
            .saturating_add(self.odd_count)
            .saturating_add(self.point_count)
            .saturating_add(self.overflow)
            .saturating_add(self.truncated)
            .saturating_add(self.non_finite)
    }
}

/// Streaming, sans-IO decoder of comma-separated ASCII sweeps into a sweep buffer.
///
/// As with [`crate::wire::block::BlockDecoder`], pass the same buffer for every chunk of
/// a line; it holds a sweep only once [`DecodeEvent::Sweep`] is reported.
///
/// ```
/// use sweepgate::Complex32;
/// use sweepgate::wire::ascii::{AsciiConfig, AsciiDecoder};
/// use sweepgate::wire::block::DecodeEvent;
/// let mut dec = AsciiDecoder::new(AsciiConfig::new(2).unwrap());
/// let mut buf = [Complex32::new(0.0, 0.0); 2];
/// assert_eq!(dec.feed(b"1.5E-1, -2,+3", &mut buf).event, None);
/// let fed = dec.feed(b"e0,4.\r\n", &mut buf);
/// assert_eq!(fed.event, Some(DecodeEvent::Sweep { points: 2 }));
/// assert_eq!(buf, [Complex32::new(0.15, -2.0), Complex32::new(3.0, 4.0)]);
/// ```
#[derive(Debug, Clone)]
pub struct AsciiDecoder {
    config: AsciiConfig,
    token: [u8; MAX_TOKEN_BYTES],
    token_len: u8,
    /// White space followed the token: only a separator may come next.
    token_closed: bool,
    /// The line has held something other than white space.
    line_started: bool,
    /// After a rejection: skipping to the newline.
    discard: bool,
    values: u32,
    re: f32,
    pending: u64,
    counters: AsciiCounters,
}

impl AsciiDecoder {
    /// A decoder waiting for the first line.
    pub fn new(config: AsciiConfig) -> Self {
        Self {
            config,
            token: [0; MAX_TOKEN_BYTES],
            token_len: 0,
            token_closed: false,
            line_started: false,
            discard: false,
            values: 0,
            re: 0.0,
            pending: 0,
            counters: AsciiCounters::default(),
        }
    }

    /// The configuration.
    pub fn config(&self) -> &AsciiConfig {
        &self.config
    }

    /// What the decoder has seen so far.
    pub fn counters(&self) -> &AsciiCounters {
        &self.counters
    }

    /// Bytes of the line in progress, not yet accepted or rejected.
    pub fn bytes_pending(&self) -> u64 {
        self.pending
    }

    /// Drop any line in progress (counted as skipped) and wait for a new one.
    pub fn reset(&mut self) {
        self.skip_pending();
        self.new_line();
    }

    /// End of stream: a line in progress is rejected as [`AsciiError::Truncated`].
    pub fn finish(&mut self) -> Option<AsciiError> {
        let err = if !self.discard && (self.line_started || self.token_len > 0) {
            self.count(AsciiError::Truncated);
            Some(AsciiError::Truncated)
        } else {
            None
        };
        self.skip_pending();
        self.new_line();
        err
    }

    /// Decode from `chunk` into `out`; stops early at the first event.
    pub fn feed(&mut self, chunk: &[u8], out: &mut [Complex32]) -> Feed<AsciiError> {
        for (i, &b) in chunk.iter().enumerate() {
            if let Some(event) = self.step(b, out) {
                return Feed {
                    consumed: i + 1,
                    event: Some(event),
                };
            }
        }
        Feed {
            consumed: chunk.len(),
            event: None,
        }
    }

    fn new_line(&mut self) {
        self.token_len = 0;
        self.token_closed = false;
        self.line_started = false;
        self.discard = false;
        self.values = 0;
    }

    fn skip_pending(&mut self) {
        self.counters.bytes_skipped = self.counters.bytes_skipped.saturating_add(self.pending);
        self.pending = 0;
    }

    fn count(&mut self, e: AsciiError) {
        let c = &mut self.counters;
        let n = match e {
            AsciiError::MalformedNumber { .. } => &mut c.malformed_number,
            AsciiError::TokenTooLong { .. } => &mut c.token_too_long,
            AsciiError::OddCount { .. } => &mut c.odd_count,
            AsciiError::PointCount { .. } => &mut c.point_count,
            AsciiError::Overflow { .. } => &mut c.overflow,
            AsciiError::Truncated => &mut c.truncated,
            AsciiError::NonFinite { .. } => &mut c.non_finite,
        };
        *n = n.saturating_add(1);
    }

    /// Reject the line; `at_end` when the newline has already been consumed.
    fn reject(&mut self, e: AsciiError, at_end: bool) -> DecodeEvent<AsciiError> {
        self.count(e);
        self.skip_pending();
        self.new_line();
        self.discard = !at_end;
        DecodeEvent::Rejected(e)
    }

    fn step(&mut self, b: u8, out: &mut [Complex32]) -> Option<DecodeEvent<AsciiError>> {
        if self.discard {
            self.counters.bytes_skipped = self.counters.bytes_skipped.saturating_add(1);
            if b == b'\n' {
                self.new_line();
            }
            return None;
        }
        self.pending += 1;
        match b {
            b'\n' => self.end_line(out),
            b',' => {
                self.line_started = true;
                self.end_token(out).err().map(|e| self.reject(e, false))
            }
            b' ' | b'\t' | b'\r' => {
                if self.token_len > 0 {
                    self.token_closed = true;
                }
                None
            }
            _ => {
                self.line_started = true;
                if self.token_closed {
                    let e = AsciiError::MalformedNumber { index: self.values };
                    return Some(self.reject(e, false));
                }
                match self.token.get_mut(self.token_len as usize) {
                    Some(slot) => {
                        *slot = b;
                        self.token_len += 1;
                        None
                    }
                    None => {
                        let e = AsciiError::TokenTooLong { index: self.values };
                        Some(self.reject(e, false))
                    }
                }
            }
        }
    }

    fn end_line(&mut self, out: &mut [Complex32]) -> Option<DecodeEvent<AsciiError>> {
        if !self.line_started && self.token_len == 0 {
            // A blank line: nothing to report, counted as skipped.
            self.skip_pending();
            self.new_line();
            return None;
        }
        if let Err(e) = self.end_token(out) {
            return Some(self.reject(e, true));
        }
        let values = self.values;
        if values % 2 != 0 {
            return Some(self.reject(AsciiError::OddCount { values }, true));
        }
        let expected = self.config.points as u32;
        if values / 2 != expected {
            let e = AsciiError::PointCount {
                expected,
                found: values / 2,
            };
            return Some(self.reject(e, true));
        }
        self.counters.accepted = self.counters.accepted.saturating_add(1);
        self.counters.bytes_accepted = self.counters.bytes_accepted.saturating_add(self.pending);
        self.pending = 0;
        self.new_line();
        Some(DecodeEvent::Sweep {
            points: expected as usize,
        })
    }

    /// Parse the token as the next value and store it.
    fn end_token(&mut self, out: &mut [Complex32]) -> Result<(), AsciiError> {
        let index = self.values;
        let text = self
            .token
            .get(..self.token_len as usize)
            .and_then(|t| core::str::from_utf8(t).ok())
            .filter(|t| is_decimal(t.as_bytes()));
        let v: f32 = match text.map(str::parse) {
            Some(Ok(v)) => v,
            _ if starts_non_finite(&self.token, self.token_len) => {
                return Err(AsciiError::NonFinite { index })
            }
            _ => return Err(AsciiError::MalformedNumber { index }),
        };
        if !usable_f32(v) {
            return Err(AsciiError::NonFinite { index });
        }
        self.token_len = 0;
        self.token_closed = false;
        let point = (index / 2) as usize;
        if point >= out.len() {
            return Err(AsciiError::Overflow {
                capacity: u32::try_from(out.len()).unwrap_or(u32::MAX),
            });
        }
        if index % 2 == 0 {
            self.re = v;
        } else if let Some(slot) = out.get_mut(point) {
            *slot = Complex32::new(self.re, v);
        }
        self.values = index.saturating_add(1);
        Ok(())
    }
}

/// Optional sign, digits with at most one point (at least one digit), optional exponent
/// `e`/`E`, optional sign, at least one digit. Stricter than `str::parse`, which also
/// takes `inf`, `nan` and `infinity`.
fn is_decimal(t: &[u8]) -> bool {
    let mut i = 0;
    let at = |i: usize| t.get(i).copied();
    if matches!(at(i), Some(b'+' | b'-')) {
        i += 1;
    }
    let mut mantissa_digits = 0;
    while matches!(at(i), Some(b'0'..=b'9')) {
        i += 1;
        mantissa_digits += 1;
    }
    if at(i) == Some(b'.') {
        i += 1;
        while matches!(at(i), Some(b'0'..=b'9')) {
            i += 1;
            mantissa_digits += 1;
        }
    }
    if mantissa_digits == 0 {
        return false;
    }
    if matches!(at(i), Some(b'e' | b'E')) {
        i += 1;
        if matches!(at(i), Some(b'+' | b'-')) {
            i += 1;
        }
        let mut exp_digits = 0;
        while matches!(at(i), Some(b'0'..=b'9')) {
            i += 1;
            exp_digits += 1;
        }
        if exp_digits == 0 {
            return false;
        }
    }
    i == t.len()
}

/// `INF`, `INFINITY`, `NAN` with an optional sign (any case): a non-finite value rather
/// than a malformed one.
fn starts_non_finite(token: &[u8], len: u8) -> bool {
    let t = token.get(..len as usize).unwrap_or(&[]);
    let t = match t.first() {
        Some(b'+' | b'-') => t.get(1..).unwrap_or(&[]),
        _ => t,
    };
    t.eq_ignore_ascii_case(b"inf")
        || t.eq_ignore_ascii_case(b"infinity")
        || t.eq_ignore_ascii_case(b"nan")
}

impl StreamDecoder for AsciiDecoder {
    type Error = AsciiError;
    fn feed(&mut self, chunk: &[u8], out: &mut [Complex32]) -> Feed<AsciiError> {
        AsciiDecoder::feed(self, chunk, out)
    }
    fn finish(&mut self) -> Option<AsciiError> {
        AsciiDecoder::finish(self)
    }
}

#[cfg(test)]
mod tests {
    extern crate std;
    use super::*;
    use std::vec::Vec;

    const Z: Complex32 = Complex32::new(0.0, 0.0);

    fn c(re: f32, im: f32) -> Complex32 {
        Complex32::new(re, im)
    }

    #[derive(Debug, PartialEq)]
    enum Seen {
        Sweep(Vec<Complex32>),
        Rejected(AsciiError),
    }

    fn run(k: usize, cap: usize, chunks: &[&[u8]]) -> (Vec<Seen>, AsciiCounters) {
        let mut dec = AsciiDecoder::new(AsciiConfig::new(k).unwrap());
        let mut buf = std::vec![Z; cap];
        let mut seen = Vec::new();
        let mut total = 0u64;
        for chunk in chunks {
            let mut rest: &[u8] = chunk;
            loop {
                let fed = dec.feed(rest, &mut buf);
                total += fed.consumed as u64;
                rest = &rest[fed.consumed..];
                match fed.event {
                    Some(DecodeEvent::Sweep { points }) => {
                        seen.push(Seen::Sweep(buf[..points].to_vec()))
                    }
                    Some(DecodeEvent::Rejected(e)) => seen.push(Seen::Rejected(e)),
                    None => {
                        assert!(rest.is_empty());
                        break;
                    }
                }
                let k = dec.counters();
                assert_eq!(
                    total,
                    k.bytes_accepted + k.bytes_skipped + dec.bytes_pending()
                );
            }
        }
        if let Some(e) = dec.finish() {
            seen.push(Seen::Rejected(e));
        }
        let k = *dec.counters();
        assert_eq!(dec.bytes_pending(), 0);
        assert_eq!(total, k.bytes_accepted + k.bytes_skipped);
        let sweeps = seen.iter().filter(|s| matches!(s, Seen::Sweep(_))).count();
        assert_eq!(sweeps as u32, k.accepted);
        assert_eq!((seen.len() - sweeps) as u32, k.rejected());
        (seen, k)
    }

    fn one(k: usize, cap: usize, line: &[u8]) -> Vec<Seen> {
        run(k, cap, &[line]).0
    }

    #[test]
    fn config_validation() {
        assert_eq!(AsciiConfig::new(0), Err(WireConfigError::NoPoints));
        assert_eq!(
            AsciiConfig::new(65_536),
            Err(WireConfigError::TooManyPoints)
        );
    }

    #[test]
    fn number_forms() {
        let line = b" +1.5 ,-2.5E+01,\t.5,7.,1e-3 , -0 ,6.02e23,-1E-10\r\n";
        assert_eq!(
            one(4, 4, line),
            [Seen::Sweep(std::vec![
                c(1.5, -25.0),
                c(0.5, 7.0),
                c(1e-3, -0.0),
                c(6.02e23, -1e-10)
            ])]
        );
    }

    #[test]
    fn blank_lines_are_skipped_silently() {
        let (seen, k) = run(1, 1, &[b"\n \r\n1,2\n\n"]);
        assert_eq!(seen, [Seen::Sweep(std::vec![c(1.0, 2.0)])]);
        assert_eq!(k.bytes_skipped, 5);
        assert_eq!(k.bytes_accepted, 4);
    }

    #[test]
    fn malformed_numbers() {
        for bad in [
            &b"1,x\n"[..],
            b"1,,\n",
            b"1,2,\n",
            b",1\n",
            b"1 2\n",
            b"1.2.3,4\n",
            b"1e,2\n",
            b"--1,2\n",
            b"0x10,2\n",
            b"1,2;\n",
            b".,1\n",
            b"1,\xff\n",
        ] {
            let seen = one(1, 1, bad);
            assert!(
                matches!(
                    seen[..],
                    [Seen::Rejected(AsciiError::MalformedNumber { .. })]
                ),
                "{bad:?}: {seen:?}"
            );
        }
        assert_eq!(
            one(1, 1, b"1,x\n"),
            [Seen::Rejected(AsciiError::MalformedNumber { index: 1 })]
        );
    }

    #[test]
    fn token_too_long() {
        let mut line = b"1.".to_vec();
        line.extend(std::vec![b'0'; MAX_TOKEN_BYTES - 2]);
        line.extend(b",2\n");
        // Exactly MAX_TOKEN_BYTES bytes is fine.
        assert!(matches!(one(1, 1, &line)[..], [Seen::Sweep(_)]));
        let mut line = std::vec![b'1'; MAX_TOKEN_BYTES + 1];
        line.extend(b",2\n");
        assert_eq!(
            one(1, 1, &line),
            [Seen::Rejected(AsciiError::TokenTooLong { index: 0 })]
        );
    }

    #[test]
    fn odd_count_point_count_overflow() {
        assert_eq!(
            one(1, 2, b"1,2,3\n"),
            [Seen::Rejected(AsciiError::OddCount { values: 3 })]
        );
        assert_eq!(
            one(1, 2, b"1,2,3,4\n"),
            [Seen::Rejected(AsciiError::PointCount {
                expected: 1,
                found: 2
            })]
        );
        assert_eq!(
            one(2, 2, b"1,2\n"),
            [Seen::Rejected(AsciiError::PointCount {
                expected: 2,
                found: 1
            })]
        );
        let (seen, k) = run(1, 1, &[b"1,2,3,4,5,6\n7,8\n"]);
        assert_eq!(
            seen,
            [
                Seen::Rejected(AsciiError::Overflow { capacity: 1 }),
                Seen::Sweep(std::vec![c(7.0, 8.0)])
            ]
        );
        assert_eq!(k.overflow, 1);
    }

    #[test]
    fn truncated() {
        for cut in [&b"1"[..], b"1,", b"1,2", b" 1 "] {
            assert_eq!(
                one(1, 1, cut),
                [Seen::Rejected(AsciiError::Truncated)],
                "{cut:?}"
            );
        }
        // Only white space pending at the end: nothing to report.
        assert_eq!(one(1, 1, b"  "), []);
    }

    #[test]
    fn non_finite() {
        for bad in [
            &b"1,inf\n"[..],
            b"1,-Infinity\n",
            b"1,NaN\n",
            b"1,1e39\n",
            b"1,9.91E37\n",
            b"1,-9.9E+37\n",
        ] {
            assert_eq!(
                one(1, 1, bad),
                [Seen::Rejected(AsciiError::NonFinite { index: 1 })],
                "{bad:?}"
            );
        }
    }

    #[test]
    fn resync_at_next_newline() {
        let (seen, k) = run(2, 2, &[b"#41608\x00\x01,garbage\n1,2,3,4\n"]);
        assert_eq!(
            seen,
            [
                Seen::Rejected(AsciiError::MalformedNumber { index: 0 }),
                Seen::Sweep(std::vec![c(1.0, 2.0), c(3.0, 4.0)])
            ]
        );
        assert_eq!(k.bytes_skipped, 17);
        assert_eq!(k.bytes_accepted, 8);
    }

    #[test]
    fn every_split_matches_one_chunk() {
        let stream: &[u8] =
            b"\n1.25e-1,-2,3,4\nx\n1,2,3\n 5 , 6 ,7,8\r\n1,nan,3,4\n1,2,3,4,5,6\n9,9,9,9,9";
        let whole = run(2, 2, &[stream]);
        assert_eq!(whole.0.len(), 7);
        assert_eq!(whole.1.accepted, 2);
        for i in 0..=stream.len() {
            let (a, b) = stream.split_at(i);
            assert_eq!(run(2, 2, &[a, b]), whole, "split at {i}");
        }
        let bytes: Vec<&[u8]> = stream.chunks(1).collect();
        assert_eq!(run(2, 2, &bytes), whole);
    }

    #[test]
    fn display_texts_are_distinct() {
        let all = [
            AsciiError::MalformedNumber { index: 0 },
            AsciiError::TokenTooLong { index: 0 },
            AsciiError::OddCount { values: 1 },
            AsciiError::PointCount {
                expected: 1,
                found: 2,
            },
            AsciiError::Overflow { capacity: 1 },
            AsciiError::Truncated,
            AsciiError::NonFinite { index: 0 },
        ];
        let texts: Vec<std::string::String> = all.iter().map(|e| std::format!("{e}")).collect();
        for (i, a) in texts.iter().enumerate() {
            for b in &texts[i + 1..] {
                assert_ne!(a, b);
            }
        }
    }

    mod props {
        use super::*;
        use proptest::prelude::*;

        proptest! {
            #![proptest_config(ProptestConfig::with_cases(256))]

            /// Arbitrary bytes (biased to number-like ones) never panic, every byte and
            /// event is counted, and chunking does not change the outcome.
            #[test]
            fn arbitrary_bytes(data in proptest::collection::vec(
                                   prop_oneof![any::<u8>(), proptest::sample::select(b"0123456789.,eE+- \n".to_vec())],
                                   0..400),
                               cut in 0usize..400, k in 1usize..4, cap in 0usize..5) {
                let cut = cut.min(data.len());
                let (a, b) = data.split_at(cut);
                prop_assert_eq!(run(k, cap, &[a, b]), run(k, cap, &[&data]));
            }

            /// Finite f32 values printed with `{:e}` or `{}` read back exactly.
            #[test]
            fn printed_values_read_back(v in proptest::collection::vec(-1e30f32..1e30, 2..=2)) {
                let line = std::format!("{:e},{}\n", v[0], v[1]);
                prop_assert_eq!(one(1, 1, line.as_bytes()), [Seen::Sweep(std::vec![c(v[0], v[1])])]);
            }
        }
    }
}
