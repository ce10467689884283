//! The reader: one pass over the lines, each a keyword (`keywords.rs`), the option line
//! (`option_line.rs`) or numbers (`data.rs`), collected into a [`Touchstone`].

mod bytes;
mod data;
mod decimal;
mod keywords;
mod lanes;
mod one_line;
mod option_line;
mod pick;

use std::path::Path;

use num_complex::Complex64;

use super::{
    DataFormat, FrequencyUnit, MatrixFormat, ParameterKind, Touchstone, TouchstoneError,
    TouchstoneErrorKind, TwoPortOrder, Version,
};
use keywords::keyword_name;

use crate::quote::clipped;

/// Port count from a `.s<N>p` extension.
pub(super) fn ports_from_name(name: &str) -> Option<usize> {
    let ext = Path::new(name).extension()?.to_str()?.to_ascii_lowercase();
    let digits = ext.strip_prefix('s')?.strip_suffix('p')?;
    if digits.is_empty() || !digits.bytes().all(|c| c.is_ascii_digit()) {
        return None;
    }
    digits.parse().ok()
}

/// A finite number, or the error naming the token.
fn parse_number(tok: &str) -> Result<f64, TouchstoneErrorKind> {
    match tok.parse::<f64>() {
        Ok(x) if x.is_finite() => Ok(x),
        // Rust also accepts `inf`, `nan`, `infinity`: refuse them as not finite.
        Ok(_) => Err(TouchstoneErrorKind::NonFiniteNumber(clipped(tok))),
        Err(_) => Err(TouchstoneErrorKind::BadNumber(clipped(tok))),
    }
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Section {
    /// Before `[Network Data]` (version 2.0) or the data (version 1.1).
    Header,
    /// Inside `[Begin Information]` … `[End Information]`.
    Information,
    /// Network data.
    Network,
    /// Noise data (skipped).
    Noise,
    /// After `[End]`: ignored.
    Ended,
}

pub(super) struct Options {
    unit: Option<FrequencyUnit>,
    kind: Option<ParameterKind>,
    format: Option<DataFormat>,
    reference_ohm: Option<f64>,
}

pub(super) struct Parser<'a> {
    name: &'a str,
    line: usize,
    version: Option<Version>,
    seen_content: bool,
    options: Option<Options>,
    ports: Option<usize>,
    two_port_order: Option<TwoPortOrder>,
    frequencies_declared: Option<usize>,
    noise_declared: Option<usize>,
    matrix_format: Option<MatrixFormat>,
    reference: Option<Vec<f64>>,
    reference_pending: bool,
    section: Section,
    seen_network_keyword: bool,
    record: Vec<f64>,
    record_start: usize,
    frequencies_hz: Vec<f64>,
    data: Vec<Complex64>,
    noise_numbers: usize,
    /// The parameters to keep, when only some are wanted (`pick.rs`); `None`: all.
    pick: Option<pick::Pick>,
    /// Where each number of the open record lies in the file's bytes (`bytes.rs`; empty
    /// for lines read as text).
    spans: Vec<(usize, usize)>,
    /// Set while records come one whole record a plain line (`one_line.rs`).
    one_line: Option<one_line::OneLine>,
}

impl<'a> Parser<'a> {
    pub(super) fn new(name: &'a str) -> Self {
        Self {
            name,
            line: 0,
            version: None,
            seen_content: false,
            options: None,
            ports: None,
            two_port_order: None,
            frequencies_declared: None,
            noise_declared: None,
            matrix_format: None,
            reference: None,
            reference_pending: false,
            section: Section::Header,
            seen_network_keyword: false,
            record: Vec::new(),
            record_start: 0,
            frequencies_hz: Vec::new(),
            data: Vec::new(),
            noise_numbers: 0,
            pick: None,
            spans: Vec::new(),
            one_line: None,
        }
    }

    fn err(&self, kind: TouchstoneErrorKind) -> TouchstoneError {
        self.err_at(Some(self.line), kind)
    }

    fn err_at(&self, line: Option<usize>, kind: TouchstoneErrorKind) -> TouchstoneError {
        TouchstoneError {
            file: self.name.to_string(),
            line,
            kind,
        }
    }

    /// Reads the whole text: each line is a keyword, the option line or numbers.
    pub(super) fn run(mut self, text: &str) -> Result<Touchstone, TouchstoneError> {
        let text = text.strip_prefix('\u{feff}').unwrap_or(text);
        for (i, raw) in text.lines().enumerate() {
            self.line = i + 1;
            let content = raw.split('!').next().unwrap_or("").trim();
            if self.skips(content) {
                continue;
            }
            self.line_content(content, Self::numbers)?;
        }
        self.line += 1;
        self.finish()
    }

    /// Whether a line's content (comment cut, trimmed) is passed over: empty, after
    /// `[End]`, or inside `[Begin Information]` (whose end it looks for).
    fn skips(&mut self, content: &str) -> bool {
        if content.is_empty() || self.section == Section::Ended {
            return true;
        }
        if self.section == Section::Information {
            if content.starts_with('[') && keyword_name(content).0 == "end information" {
                self.section = Section::Header;
            }
            return true;
        }
        false
    }

    /// One line's content that is not passed over: a keyword, the option line, or numbers
    /// (given to `numbers`).
    fn line_content(
        &mut self,
        content: &str,
        numbers: impl FnOnce(&mut Self, &str) -> Result<(), TouchstoneError>,
    ) -> Result<(), TouchstoneError> {
        if content.starts_with('[') {
            self.keyword(content)?;
        } else if let Some(rest) = content.strip_prefix('#') {
            self.option_line(rest)?;
        } else {
            numbers(self, content)?;
        }
        self.seen_content = true;
        Ok(())
    }

    fn is_v2(&self) -> bool {
        self.version == Some(Version::V2_0)
    }

    fn unit(&self) -> FrequencyUnit {
        self.options
            .as_ref()
            .and_then(|o| o.unit)
            .unwrap_or(FrequencyUnit::GHz)
    }

    fn format(&self) -> DataFormat {
        self.options
            .as_ref()
            .and_then(|o| o.format)
            .unwrap_or(DataFormat::Ma)
    }

    /// The checks at the end of the file, before anything is handed out.
    pub(super) fn check_end(&self) -> Result<(), TouchstoneError> {
        self.end_record()?;
        if self.reference_pending {
            return Err(self.err_at(
                None,
                TouchstoneErrorKind::RecordLength {
                    expected: self.ports.unwrap_or(0),
                    found: self.reference.as_ref().map_or(0, Vec::len),
                    last_line: 0,
                },
            ));
        }
        if self.is_v2() && self.options.is_none() {
            return Err(self.err_at(None, TouchstoneErrorKind::MissingKeyword("option line (#)")));
        }
        if self.is_v2() && !self.seen_network_keyword {
            return Err(self.err_at(None, TouchstoneErrorKind::MissingKeyword("[Network Data]")));
        }
        if self.frequencies_hz.is_empty() {
            return Err(self.err_at(None, TouchstoneErrorKind::NoData));
        }
        if let Some(declared) = self.frequencies_declared {
            if declared != self.frequencies_hz.len() {
                return Err(self.err_at(
                    None,
                    TouchstoneErrorKind::FrequencyCountMismatch {
                        declared,
                        found: self.frequencies_hz.len(),
                    },
                ));
            }
        }
        Ok(())
    }

    /// The file read, after [`Parser::check_end`].
    pub(super) fn finish(self) -> Result<Touchstone, TouchstoneError> {
        self.check_end()?;
        let ports = self.ports.unwrap_or(1);
        let opt_r = self
            .options
            .as_ref()
            .and_then(|o| o.reference_ohm)
            .unwrap_or(50.0);
        let reference_ohm = self.reference.clone().unwrap_or_else(|| vec![opt_r; ports]);
        let noise_records = if self.noise_numbers > 0 {
            // A noise record is five numbers: f, NFmin, |Γopt|, ∠Γopt, Rn.
            self.noise_numbers.div_ceil(5)
        } else {
            0
        };
        Ok(Touchstone {
            name: self.name.to_string(),
            version: self.version.unwrap_or(Version::V1_1),
            ports,
            unit: self.unit(),
            kind: self
                .options
                .as_ref()
                .and_then(|o| o.kind)
                .unwrap_or(ParameterKind::S),
            format: self.format(),
            reference_ohm,
            frequencies_hz: self.frequencies_hz,
            data: self.data,
            noise_records,
        })
    }
}
