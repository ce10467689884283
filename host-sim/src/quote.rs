//! Quoting what a file or a user gave in a message without echoing all of it: a token of
//! 50 MB in a hostile file must not become a 50 MB error line. Quoted text is cut to
//! [`MAX_QUOTED_CHARS`] characters followed by `…`. A leaf: it imports only the limits.
//!
//! ```
//! use sweepgate_host::quote::{clip_quotes, clipped};
//! assert_eq!(clipped("abc"), "abc");
//! assert_eq!(clipped(&"x".repeat(1000)), format!("{}…", "x".repeat(40)));
//! let msg = format!("unknown variant `{}`, expected `step`", "y".repeat(500));
//! assert_eq!(clip_quotes(&msg), format!("unknown variant `{}…`, expected `step`", "y".repeat(40)));
//! ```

pub use crate::limits::MAX_QUOTED_CHARS;

/// `text` cut to its first [`MAX_QUOTED_CHARS`] characters and `…` when longer.
pub fn clipped(text: &str) -> String {
    match text.char_indices().nth(MAX_QUOTED_CHARS) {
        Some((end, _)) => format!("{}…", &text[..end]),
        None => text.to_owned(),
    }
}

/// `message` with every backtick-quoted part (`like this`) [`clipped`], and an unclosed
/// quote's tail too; the rest is kept as it is.
pub fn clip_quotes(message: &str) -> String {
    let mut out = String::with_capacity(message.len().min(1024));
    let mut parts = message.split('`');
    if let Some(first) = parts.next() {
        out.push_str(first);
    }
    for (i, part) in parts.enumerate() {
        out.push('`');
        if i % 2 == 0 {
            out.push_str(&clipped(part));
        } else {
            out.push_str(part);
        }
    }
    out
}
