//! What the user chooses, and how it is spelled: the gate and pattern options every gating
//! command shares (`replay`, `process`, `acquire`, `demo`; `plan` reads the band window),
//! the window spellings, the frequency lists, and the defaults. This is the one parser of
//! these values; [`crate::pipeline::setup`] turns the choices into a gate.
//!
//! # Defaults
//!
//! Documented here once and used by every command:
//!
//! - band window: a Kaiser window for 50 dB sidelobes ([`default_band_window`], β = 6.851 by
//!   Kaiser & Schafer 1980), unless the scenario's `[plan] band_window` names another; so
//!   the gate `plan` recommends is the gate the other commands apply;
//! - gate shape: a Tukey window, α = 0.3 ([`DEFAULT_GATE_SHAPE`]), with the gate's edge
//!   renormalization on.
//!
//! # Window spelling
//!
//! Lower case, no spaces; a window with a parameter must be given its value:
//!
//! | text | window |
//! |---|---|
//! | `kaiser:B` | Kaiser, β = B (0…50) |
//! | `kaiser-sidelobe:DB` | Kaiser with β for a peak sidelobe DB below the main lobe (Kaiser & Schafer 1980) |
//! | `tukey:A` | Tukey, α = A (0…1) |
//! | `hann` | Hann |
//! | `hamming` | Hamming |
//! | `blackman-harris` | 4-term Blackman-Harris |
//! | `rectangular` | no taper |
//!
//! `kaiser` or `tukey` alone is refused with a message giving the spelling with a value.
//!
//! ```
//! use sweepgate::window::WindowKind;
//! use sweepgate_host::pipeline::options::{format_window, parse_window};
//! assert_eq!(parse_window("kaiser:6"), Ok(WindowKind::Kaiser { beta: 6.0 }));
//! assert_eq!(format_window(&WindowKind::Tukey { alpha: 0.25 }), "tukey:0.25");
//! assert!(parse_window("kaiser:99").is_err());
//! assert!(parse_window("kaiser").unwrap_err().contains("kaiser-sidelobe:50"));
//! ```

use anyhow::Context;
use sweepgate::window::WindowKind;

/// The gate shape every command uses when none is given: Tukey, α = 0.3.
pub const DEFAULT_GATE_SHAPE: WindowKind = WindowKind::Tukey { alpha: 0.3 };

/// The band window every command uses when none is given (and the scenario names none): a
/// Kaiser window for 50 dB sidelobes (β = 6.851 by Kaiser & Schafer 1980).
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
        ("kaiser", None) => {
            return Err(format!(
                "window `{text}`: give β, e.g. kaiser:6, or a sidelobe level, e.g. kaiser-sidelobe:50 (the default band window)"
            ));
        }
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
        ("tukey", None) => {
            return Err(format!(
                "window `{text}`: give α, e.g. tukey:0.3 (the default gate shape)"
            ));
        }
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

/// The report folder when none is given: `<input stem>-report/` next to the input.
pub fn default_report_dir(input: &std::path::Path) -> std::path::PathBuf {
    let stem = input
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "recording".into());
    input.with_file_name(format!("{stem}-report"))
}

/// Parses a comma-separated list of frequencies in Hz (each finite and positive).
pub fn parse_frequencies(text: &str) -> Result<Vec<f64>, String> {
    let mut v = Vec::new();
    for part in text.split(',') {
        let p = part.trim();
        let f: f64 = p
            .parse()
            .map_err(|_| format!("frequency `{p}` in `{text}` is not a number"))?;
        if !(f.is_finite() && f > 0.0) {
            return Err(format!(
                "frequency `{p}` in `{text}` is not a positive frequency"
            ));
        }
        v.push(f);
    }
    Ok(v)
}

/// Where a choice came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Origin {
    /// A command-line option.
    CommandLine,
    /// A settings file (`sweepgate process --settings`).
    SettingsFile,
    /// The RCS calibration a recording carries (recording kind 9, `rcs
    /// --calibrated-recording`).
    RcsRecord,
    /// An RCS calibration file (`rcs --save-calibration`, `acquire --rcs-calibration`).
    RcsFile,
}

impl Origin {
    /// In words, as `summary.json` writes it.
    pub fn text(self) -> &'static str {
        match self {
            Origin::CommandLine => "command line",
            Origin::SettingsFile => "settings file",
            Origin::RcsRecord => "the recording's RCS calibration",
            Origin::RcsFile => "the RCS calibration file",
        }
    }

    /// Who set a value: `--option` or `` `key` in the settings file ``.
    pub fn by(self, option: &str) -> String {
        match self {
            Origin::CommandLine => format!("--{option}"),
            Origin::SettingsFile => format!("`{}` in the settings file", option.replace('-', "_")),
            Origin::RcsRecord => format!("the {option} of the recording's RCS calibration"),
            Origin::RcsFile => format!("the {option} of the RCS calibration file"),
        }
    }
}

/// What the user chose, parsed; `None` everywhere takes the documented defaults (see the
/// module notes) and the automatic gate.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Choices {
    /// Gate center, ns from the VNA's time zero, and where it came from.
    pub center_ns: Option<(f64, Origin)>,
    /// Gate span (full width), ns, and where it came from.
    pub span_ns: Option<(f64, Origin)>,
    /// Band window.
    pub band_window: Option<WindowKind>,
    /// Gate shape.
    pub gate_shape: Option<WindowKind>,
    /// Pattern frequencies, Hz (each taken at its nearest grid point).
    pub frequencies_hz: Option<Vec<f64>>,
    /// Angle bin width, degrees.
    pub bin_width_deg: Option<f64>,
}

/// The gate and pattern options every gating command takes, as the user spelled them on
/// the command line (`--gate-center-ns`, `--gate-span-ns`, `--band-window`, `--gate-shape`,
/// `--frequencies-hz`).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct GateOptions {
    /// `--gate-center-ns`.
    pub gate_center_ns: Option<f64>,
    /// `--gate-span-ns`.
    pub gate_span_ns: Option<f64>,
    /// `--band-window`, a window spelling.
    pub band_window: Option<String>,
    /// `--gate-shape`, a window spelling.
    pub gate_shape: Option<String>,
    /// `--frequencies-hz`, a comma-separated list.
    pub frequencies_hz: Option<String>,
}

impl GateOptions {
    /// Parses the options; an error names the option.
    pub fn choices(&self) -> anyhow::Result<Choices> {
        let o = Origin::CommandLine;
        Ok(Choices {
            center_ns: self.gate_center_ns.map(|v| (v, o)),
            span_ns: self.gate_span_ns.map(|v| (v, o)),
            band_window: window_option(&self.band_window, "--band-window")?,
            gate_shape: window_option(&self.gate_shape, "--gate-shape")?,
            frequencies_hz: match &self.frequencies_hz {
                Some(t) => Some(
                    parse_frequencies(t)
                        .map_err(anyhow::Error::msg)
                        .context("--frequencies-hz")?,
                ),
                None => None,
            },
            bin_width_deg: None,
        })
    }
}

/// Parses an optional window spelling; the error is put in the context of `what` (an
/// option or a settings key).
pub fn window_option(text: &Option<String>, what: &str) -> anyhow::Result<Option<WindowKind>> {
    match text {
        Some(t) => Ok(Some(
            parse_window(t)
                .map_err(anyhow::Error::msg)
                .with_context(|| what.to_string())?,
        )),
        None => Ok(None),
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
            parse_window(" Kaiser:6 "),
            Ok(WindowKind::Kaiser { beta: 6.0 })
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
            (" Kaiser ", "kaiser:6"),
            ("kaiser", "kaiser-sidelobe:50"),
            ("tukey", "tukey:0.3"),
            ("kaiser-sidelobe", "sidelobe level"),
            ("triangle", "not known"),
            ("", "not known"),
        ] {
            let e = parse_window(text).unwrap_err();
            assert!(e.contains(says), "{text}: {e}");
        }
    }
}
