//! The reader on a file's bytes: the same lines, keywords and numbers as [`Parser::run`] on
//! the bytes read lossily as UTF-8, without converting or copying the file.
//!
//! Each line is scanned once, byte by byte: the scan ends at `\n`, stops looking at a `!`
//! (the rest is a comment) and cuts the content into tokens at ASCII whitespace (the six
//! bytes `char::is_whitespace` calls whitespace). A line holding a byte past ASCII before
//! its comment is read as text, exactly as [`Parser::run`] reads it (lossy UTF-8, Unicode
//! whitespace); so are keyword and option lines. Numbers go to `pick.rs`.

use std::borrow::Cow;

use super::lanes::{lanes_equal, word_at, LANES, TOPS};
use super::{Parser, Section};
use crate::formats::touchstone::TouchstoneError;

/// The numbers of one line, as spans of `text`.
pub(super) struct Line<'t> {
    /// The buffer the spans index.
    pub(super) text: &'t [u8],
    /// Each number's bytes: `text[start..end]`.
    pub(super) tokens: &'t [(usize, usize)],
    /// Whether `text` is the file itself (spans then locate numbers in the file, and numbers
    /// not needed may be passed over; see `pick.rs`).
    pub(super) from_file: bool,
}

/// The whitespace of `str::split_whitespace` and `str::trim` among ASCII bytes.
pub(super) const fn is_space(b: u8) -> bool {
    matches!(b, b'\t' | b'\n' | 0x0b | 0x0c | b'\r' | b' ')
}

/// The byte offset of the next `\n` at or after `from`, or the end of `bytes`.
fn line_end(bytes: &[u8], from: usize) -> usize {
    bytes[from..]
        .iter()
        .position(|&b| b == b'\n')
        .map_or(bytes.len(), |k| from + k)
}

/// One scanned line: its tokens (into `tokens`, offsets into the file), where it ends, and
/// whether its content (before any `!`) holds a byte past ASCII.
struct Scan {
    end: usize,
    ascii: bool,
}

/// What a byte is to the line scan.
const TOKEN: u8 = 0;
const SPACE: u8 = 1;
/// `\n`, `!` or a byte past ASCII: the scan of the content stops there.
const STOP: u8 = 2;

/// [`TOKEN`], [`SPACE`] or [`STOP`] for each byte.
static CLASS: [u8; 256] = {
    let mut t = [TOKEN; 256];
    let mut b = 0usize;
    while b < 256 {
        if b >= 0x80 || b == b'\n' as usize || b == b'!' as usize {
            t[b] = STOP;
        } else if is_space(b as u8) {
            t[b] = SPACE;
        }
        b += 1;
    }
    t
};

/// The eight bytes of `w` (little-endian: byte k in lane k) as two masks: whitespace
/// (`is_space`) and stops (`\n`, `!`, past ASCII), a lane marked by its top bit. A byte
/// past ASCII is a stop whatever its low bits make it; the caller stops at the first stop.
fn classify(w: u64) -> (u64, u64) {
    let past_ascii = w & TOPS;
    let x = w & !TOPS;
    // 0x09..=0x0d: at least 9 and not above 13 (no lane carries: each sum is below 0x100).
    let from_tab = (x + LANES * (0x80 - 0x09)) & TOPS;
    let past_cr = (x + LANES * (0x7f - 0x0d)) & TOPS;
    let space = (from_tab & !past_cr) | lanes_equal(x, b' ');
    let stop = past_ascii | lanes_equal(x, b'\n') | lanes_equal(x, b'!');
    (space, stop)
}

/// Scans the line starting at `start`: pushes the content's tokens (before any `!`) to
/// `tokens` as offsets into `bytes`. Eight bytes a step: the lanes where a token starts or
/// ends are found from masks, with no branch per byte; the last few bytes of the file, one
/// at a time.
fn scan_line(bytes: &[u8], start: usize, tokens: &mut Vec<(usize, usize)>) -> Scan {
    tokens.clear();
    let mut i = start;
    // Where the token being read started, when one runs on past the bytes looked at.
    let mut open: Option<usize> = None;
    let mut stopped = false;
    while let Some(word) = word_at(bytes, i) {
        let (space, stop) = classify(word);
        let first_stop = stop & stop.wrapping_neg();
        // The lanes up to and including the first stop (all when there is none).
        let upto = first_stop | first_stop.wrapping_sub(1);
        let token = !(space | stop) & TOPS;
        let before = (token << 8) | (u64::from(open.is_some()) << 7);
        let mut edges = (token ^ before) & upto;
        while edges != 0 {
            let at = i + edges.trailing_zeros() as usize / 8;
            match open.take() {
                None => open = Some(at),
                Some(s) => tokens.push((s, at)),
            }
            edges &= edges - 1;
        }
        if stop != 0 {
            i += first_stop.trailing_zeros() as usize / 8;
            stopped = true;
            break;
        }
        i += 8;
    }
    if !stopped {
        i = scan_tail(bytes, i, open, tokens);
    }
    match bytes.get(i) {
        None | Some(b'\n') => Scan {
            end: i,
            ascii: true,
        },
        Some(b'!') => Scan {
            end: line_end(bytes, i),
            ascii: true,
        },
        Some(_) => Scan {
            end: line_end(bytes, i),
            ascii: false,
        },
    }
}

/// The scan of a line's last bytes (fewer than eight left in the file), one at a time, a
/// token started at `open` still being read; returns where the scan stopped.
fn scan_tail(
    bytes: &[u8],
    mut i: usize,
    mut open: Option<usize>,
    tokens: &mut Vec<(usize, usize)>,
) -> usize {
    loop {
        let class = bytes.get(i).map_or(STOP, |&b| CLASS[usize::from(b)]);
        if class == TOKEN {
            open.get_or_insert(i);
        } else {
            if let Some(s) = open.take() {
                tokens.push((s, i));
            }
            if class == STOP {
                return i;
            }
        }
        i += 1;
    }
}

/// The tokens of `content` split at Unicode whitespace, as `str::split_whitespace` splits,
/// as byte offsets into `content`.
fn text_tokens(content: &str, tokens: &mut Vec<(usize, usize)>) {
    tokens.clear();
    let mut start = None;
    for (i, c) in content.char_indices() {
        if c.is_whitespace() {
            if let Some(s) = start.take() {
                tokens.push((s, i));
            }
        } else if start.is_none() {
            start = Some(i);
        }
    }
    if let Some(s) = start {
        tokens.push((s, content.len()));
    }
}

impl Parser<'_> {
    /// Reads a whole file given as bytes: the same result and the same errors as
    /// [`Parser::run`] on `String::from_utf8_lossy(bytes)`. Ends with the parser ready for
    /// `finish` (or `finish_picked`).
    pub(in crate::formats::touchstone) fn run_bytes(
        mut self,
        bytes: &[u8],
    ) -> Result<Self, TouchstoneError> {
        let bytes = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(bytes);
        let mut tokens = Vec::with_capacity(64);
        let mut start = 0usize;
        let mut line = 0usize;
        while start < bytes.len() {
            line += 1;
            self.line = line;
            if let Some(end) = self.one_line_record(bytes, start)? {
                start = end + 1;
                continue;
            }
            self.one_line = None;
            let scan = scan_line(bytes, start, &mut tokens);
            if scan.ascii {
                self.ascii_line(bytes, &tokens)?;
            } else {
                self.text_line(bytes, &bytes[start..scan.end])?;
            }
            start = scan.end + 1;
        }
        self.line = line + 1;
        Ok(self)
    }

    /// A line of ASCII content whose tokens are `tokens` (offsets into `bytes`).
    fn ascii_line(
        &mut self,
        bytes: &[u8],
        tokens: &[(usize, usize)],
    ) -> Result<(), TouchstoneError> {
        let (Some(&(first, _)), Some(&(_, last))) = (tokens.first(), tokens.last()) else {
            return Ok(());
        };
        let content = &bytes[first..last];
        let plain = matches!(
            self.section,
            Section::Header | Section::Network | Section::Noise
        );
        if plain && content[0] != b'[' && content[0] != b'#' {
            let line = Line {
                text: bytes,
                tokens,
                from_file: true,
            };
            self.numbers_of(bytes, &line)?;
            self.seen_content = true;
            return Ok(());
        }
        // Keywords, the option line and skipped sections are read as text (ASCII here).
        let text = String::from_utf8_lossy(content);
        self.text_content(bytes, &text)
    }

    /// A line holding bytes past ASCII: read lossily, as [`Parser::run`] reads it.
    fn text_line(&mut self, bytes: &[u8], raw: &[u8]) -> Result<(), TouchstoneError> {
        let text = String::from_utf8_lossy(raw);
        let content = text.split('!').next().unwrap_or("").trim();
        self.text_content(bytes, content)
    }

    /// A line's content as text: passed over, or a keyword, the option line or numbers.
    fn text_content(&mut self, bytes: &[u8], content: &str) -> Result<(), TouchstoneError> {
        if self.skips(content) {
            return Ok(());
        }
        self.line_content(content, |p, c| {
            let mut tokens = Vec::new();
            text_tokens(c, &mut tokens);
            let line = Line {
                text: c.as_bytes(),
                tokens: &tokens,
                from_file: false,
            };
            p.numbers_of(bytes, &line)
        })
    }
}

/// The token as text for the exact parser (valid UTF-8, as every token of an ASCII line
/// is, is borrowed, not copied; anything else is read lossily, as the full reader reads it).
pub(super) fn token_text(tok: &[u8]) -> Cow<'_, str> {
    match std::str::from_utf8(tok) {
        Ok(s) => Cow::Borrowed(s),
        Err(_) => String::from_utf8_lossy(tok),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ascii_whitespace_is_what_char_calls_whitespace() {
        for b in 0u8..128 {
            assert_eq!(is_space(b), char::from(b).is_whitespace(), "byte {b}");
        }
    }

    #[test]
    fn text_tokens_split_as_split_whitespace() {
        for s in [
            "",
            "  ",
            "1 2\t3",
            " a\u{a0}b\u{2003}c ",
            "x\u{fffd}y  z",
            "\u{3000}1\u{3000}",
        ] {
            let mut t = Vec::new();
            text_tokens(s, &mut t);
            let ours: Vec<&str> = t.iter().map(|&(a, b)| &s[a..b]).collect();
            let std: Vec<&str> = s.split_whitespace().collect();
            assert_eq!(ours, std, "{s:?}");
        }
    }

    /// The line scan written plainly from its definition, apart from the scan's own code:
    /// the content ends at the first `\n`, `!` or byte past ASCII; its tokens are the runs
    /// of bytes that are not `is_space` (itself held to `char::is_whitespace` above).
    fn scan_line_by_definition(bytes: &[u8], start: usize) -> (usize, bool, Vec<(usize, usize)>) {
        let rest = &bytes[start..];
        let stop = rest
            .iter()
            .position(|&b| b == b'\n' || b == b'!' || b >= 0x80)
            .map_or(bytes.len(), |k| start + k);
        let mut tokens = Vec::new();
        let mut from = None;
        for (i, &b) in bytes[..stop].iter().enumerate().skip(start) {
            match (is_space(b), from) {
                (false, None) => from = Some(i),
                (true, Some(s)) => {
                    tokens.push((s, i));
                    from = None;
                }
                _ => {}
            }
        }
        tokens.extend(from.map(|s| (s, stop)));
        let end = match bytes.get(stop) {
            None | Some(b'\n') => stop,
            Some(_) => line_end(bytes, stop),
        };
        let ascii = !matches!(bytes.get(stop), Some(&b) if b >= 0x80);
        (end, ascii, tokens)
    }

    #[test]
    fn the_word_scan_equals_the_scan_by_its_definition() {
        // Reference: the scan by its definition above. Random lines over an
        // alphabet of every class (each whitespace byte, stops, a control byte that is
        // neither, bytes past ASCII), from random starting points.
        let alphabet = b" \t\n\r\x0b\x0c!-+.e019a\x01\x1f\x7f\x80\xa0\xc3\xff";
        let mut state = 0x9e37_79b9_7f4a_7c15u64;
        let mut next = || {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            state
        };
        let mut b = Vec::new();
        for _ in 0..200_000 {
            let len = (next() % 48) as usize;
            let line: Vec<u8> = (0..len)
                .map(|_| alphabet[(next() % alphabet.len() as u64) as usize])
                .collect();
            let start = (next() as usize) % (len + 1);
            let got = scan_line(&line, start, &mut b);
            assert_eq!(
                (got.end, got.ascii, b.clone()),
                scan_line_by_definition(&line, start),
                "{line:?} from {start}"
            );
        }
    }

    #[test]
    fn a_line_scan_stops_at_the_comment_and_the_line_end() {
        let b = b" 1 2.5\t-3 ! c d\n4 5";
        let mut t = Vec::new();
        let s = scan_line(b, 0, &mut t);
        assert!(s.ascii);
        assert_eq!(s.end, 15);
        let toks: Vec<&[u8]> = t.iter().map(|&(a, e)| &b[a..e]).collect();
        assert_eq!(toks, [&b"1"[..], b"2.5", b"-3"]);
        let s = scan_line(b, 16, &mut t);
        assert_eq!((s.end, t.len()), (b.len(), 2));
        // A byte past ASCII in a comment does not matter; in the content it does.
        let b = "1 2 ! 3\u{b0}\n".as_bytes();
        assert!(scan_line(b, 0, &mut t).ascii);
        let b = "1\u{a0}2\n3".as_bytes();
        let s = scan_line(b, 0, &mut t);
        assert!(!s.ascii);
        assert_eq!(s.end, 4);
    }
}
