//! Command-line option values shared by several commands (`plan`, `process`, `replay`).
//!
//! Band window spelling (lower case, no spaces):
//!
//! | text | window |
//! |---|---|
//! | `kaiser:B` | Kaiser, β = B (0…50); `kaiser` alone is β = 6 |
//! | `kaiser-sidelobe:DB` | Kaiser with β for a peak sidelobe DB below the main lobe (Kaiser & Schafer 1980) |
//! | `tukey:A` | Tukey, α = A (0…1); `tukey` alone is α = 0.5 |
//! | `hann` | Hann |
//! | `hamming` | Hamming |
//! | `blackman-harris` | 4-term Blackman-Harris |
//! | `rectangular` | no taper |
//!
//! ```
//! use sweepgate::window::WindowKind;
//! use sweepgate_host::pipeline::options::{format_window, parse_window};
//! assert_eq!(parse_window("kaiser:6"), Ok(WindowKind::Kaiser { beta: 6.0 }));
//! assert_eq!(format_window(&WindowKind::Tukey { alpha: 0.25 }), "tukey:0.25");
//! assert!(parse_window("kaiser:99").is_err());
//! ```

use sweepgate::window::WindowKind;

/// Kaiser β when `kaiser` is given without a value.
pub const DEFAULT_KAISER_BETA: f32 = 6.0;
/// Tukey α when `tukey` is given without a value.
pub const DEFAULT_TUKEY_ALPHA: f32 = 0.5;
/// The band window every command (`plan`, `replay`, `process`, `demo`) uses when none is
/// given: a Kaiser window for 50 dB sidelobes (β = 6.851 by Kaiser & Schafer 1980), so that
/// the gate `plan` recommends is the gate the other commands apply.
pub fn default_band_window() -> WindowKind {
    WindowKind::kaiser_for_sidelobe_db(50.0)
}

/// What `parse_window` accepts, for error messages and `--help`.
pub const WINDOW_SPELLINGS: &str =
    "kaiser:BETA, kaiser-sidelobe:DB, tukey:ALPHA, hann, hamming, blackman-harris, rectangular";

/// Parses a band or gate window from its command-line spelling (see the module table).
/// The error is one sentence naming what was wrong.
pub fn parse_window(text: &str) -> Result<WindowKind, String> {
    let t = text.trim().to_ascii_lowercase();
    let (name, value) = match t.split_once(':') {
        Some((n, v)) => (n.trim(), Some(v.trim())),
        None => (t.as_str(), None),
    };
    let number = |v: &str, what: &str| -> Result<f32, String> {
        v.parse::<f32>()
            .ok()
            .filter(|x| x.is_finite())
            .ok_or_else(|| format!("window `{text}`: {what} `{v}` is not a number"))
    };
    let kind = match (name, value) {
        ("kaiser", None) => WindowKind::Kaiser {
            beta: DEFAULT_KAISER_BETA,
        },
        ("kaiser", Some(v)) => WindowKind::Kaiser {
            beta: number(v, "beta")?,
        },
        ("kaiser-sidelobe", Some(v)) => {
            WindowKind::kaiser_for_sidelobe_db(f64::from(number(v, "sidelobe level")?))
        }
        ("kaiser-sidelobe", None) => {
            return Err(format!(
                "window `{text}`: give the sidelobe level in dB, e.g. kaiser-sidelobe:50"
            ));
        }
        ("tukey", None) => WindowKind::Tukey {
            alpha: DEFAULT_TUKEY_ALPHA,
        },
        ("tukey", Some(v)) => WindowKind::Tukey {
            alpha: number(v, "alpha")?,
        },
        ("hann", None) => WindowKind::Hann,
        ("hamming", None) => WindowKind::Hamming,
        ("blackman-harris", None) => WindowKind::BlackmanHarris,
        ("rectangular", None) => WindowKind::Rectangular,
        ("hann" | "hamming" | "blackman-harris" | "rectangular", Some(_)) => {
            return Err(format!("window `{text}`: `{name}` takes no value"));
        }
        _ => {
            return Err(format!(
                "window `{text}` is not known; use one of {WINDOW_SPELLINGS}"
            ))
        }
    };
    kind.validate()
        .map_err(|e| format!("window `{text}`: {e}"))?;
    Ok(kind)
}

/// The spelling [`parse_window`] reads back to the same window.
pub fn format_window(kind: &WindowKind) -> String {
    match *kind {
        WindowKind::Kaiser { beta } => format!("kaiser:{beta}"),
        WindowKind::Tukey { alpha } => format!("tukey:{alpha}"),
        WindowKind::Hann => "hann".into(),
        WindowKind::Hamming => "hamming".into(),
        WindowKind::BlackmanHarris => "blackman-harris".into(),
        WindowKind::Rectangular => "rectangular".into(),
    }
}

/// Describes a window in words, for tables and summaries.
pub fn describe_window(w: &WindowKind) -> String {
    match w {
        WindowKind::Rectangular => "rectangular".into(),
        WindowKind::Kaiser { beta } => format!("Kaiser β = {beta:.3}"),
        WindowKind::Tukey { alpha } => format!("Tukey α = {alpha:.2}"),
        WindowKind::Hann => "Hann".into(),
        WindowKind::Hamming => "Hamming".into(),
        WindowKind::BlackmanHarris => "Blackman-Harris (4 term)".into(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_spelling_round_trips() {
        for k in [
            WindowKind::Kaiser { beta: 6.0 },
            WindowKind::Kaiser { beta: 0.0 },
            WindowKind::Kaiser { beta: 12.5 },
            WindowKind::Tukey { alpha: 0.5 },
            WindowKind::Tukey { alpha: 1.0 },
            WindowKind::Hann,
            WindowKind::Hamming,
            WindowKind::BlackmanHarris,
            WindowKind::Rectangular,
        ] {
            assert_eq!(parse_window(&format_window(&k)), Ok(k));
        }
        assert_eq!(
            parse_window(" Kaiser "),
            Ok(WindowKind::Kaiser {
                beta: DEFAULT_KAISER_BETA
            })
        );
        assert_eq!(
            parse_window("tukey"),
            Ok(WindowKind::Tukey {
                alpha: DEFAULT_TUKEY_ALPHA
            })
        );
    }

    #[test]
    fn bad_spellings_are_refused_with_a_reason() {
        for (text, says) in [
            ("kaiser:99", "beta"),
            ("kaiser:-1", "beta"),
            ("kaiser:x", "not a number"),
            ("kaiser:nan", "not a number"),
            ("tukey:1.5", "alpha"),
            ("hann:2", "takes no value"),
            ("triangle", "not known"),
            ("", "not known"),
        ] {
            let e = parse_window(text).unwrap_err();
            assert!(e.contains(says), "{text}: {e}");
        }
    }
}
