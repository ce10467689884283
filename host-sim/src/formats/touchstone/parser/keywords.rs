//! Version 2.0 keywords (`[Version]`, `[Number of Ports]`, `[Reference]`, `[Network Data]`,
//! …): each sets one field of the reader once, or moves it to another section.

use super::{Parser, Section};
use crate::formats::touchstone::{
    MatrixFormat, TouchstoneError, TouchstoneErrorKind, TwoPortOrder, Version, MAX_PORTS,
};
use crate::quote::clipped;

/// A keyword line: the keyword as written (for messages) and its lower-cased value.
struct Keyword {
    display: String,
    value: String,
}

impl Parser<'_> {
    /// One keyword line.
    pub(super) fn keyword(&mut self, content: &str) -> Result<(), TouchstoneError> {
        let (name, value) = keyword_name(content);
        if name == "version" {
            return self.version_keyword(&value);
        }
        if !self.is_v2() {
            return Err(self.err(TouchstoneErrorKind::UnknownKeyword(format!(
                "{} (keywords need [Version] 2.0 on the first line)",
                keyword_display(content)
            ))));
        }
        self.end_record()?;
        if self.reference_pending {
            return Err(self.err(TouchstoneErrorKind::RecordLength {
                expected: self.ports.unwrap_or(0),
                found: self.reference.as_ref().map_or(0, Vec::len),
                last_line: 0,
            }));
        }
        let k = Keyword {
            display: keyword_display(content),
            value,
        };
        match name.as_str() {
            "number of ports" => self.number_of_ports(&k),
            "two-port data order" => self.two_port_data_order(&k),
            "number of frequencies" => self.number_of_frequencies(&k),
            "number of noise frequencies" => self.number_of_noise_frequencies(&k),
            "reference" => self.reference_keyword(&k),
            "matrix format" => self.matrix_format_keyword(&k),
            "mixed-mode order" => Err(self.err(TouchstoneErrorKind::MixedModeUnsupported)),
            "begin information" => {
                self.section = Section::Information;
                Ok(())
            }
            "network data" => self.network_data(&k),
            "noise data" => self.noise_data(),
            "end" => {
                self.section = Section::Ended;
                Ok(())
            }
            _ => Err(self.err(TouchstoneErrorKind::UnknownKeyword(k.display))),
        }
    }

    fn version_keyword(&mut self, value: &str) -> Result<(), TouchstoneError> {
        if self.seen_content {
            return Err(self.err(TouchstoneErrorKind::VersionNotFirst));
        }
        match value {
            "2.0" | "2.1" => {
                self.version = Some(Version::V2_0);
                Ok(())
            }
            v => Err(self.err(TouchstoneErrorKind::UnsupportedVersion(clipped(v)))),
        }
    }

    fn bad_value(&self, k: &Keyword) -> TouchstoneError {
        self.err(TouchstoneErrorKind::BadKeywordValue {
            keyword: clipped(&k.display),
            value: clipped(&k.value),
        })
    }

    fn duplicate(&self, k: &Keyword) -> TouchstoneError {
        self.err(TouchstoneErrorKind::DuplicateKeyword(clipped(&k.display)))
    }

    /// The keyword's value as a count.
    fn count(&self, k: &Keyword) -> Result<usize, TouchstoneError> {
        k.value.parse().map_err(|_| self.bad_value(k))
    }

    fn number_of_ports(&mut self, k: &Keyword) -> Result<(), TouchstoneError> {
        if self.ports.is_some() {
            return Err(self.duplicate(k));
        }
        let n = self.count(k)?;
        if n == 0 {
            return Err(self.bad_value(k));
        }
        if n > MAX_PORTS {
            return Err(self.err(TouchstoneErrorKind::TooManyPorts(n)));
        }
        self.ports = Some(n);
        Ok(())
    }

    fn two_port_data_order(&mut self, k: &Keyword) -> Result<(), TouchstoneError> {
        if self.two_port_order.is_some() {
            return Err(self.duplicate(k));
        }
        self.two_port_order = Some(match k.value.as_str() {
            "12_21" => TwoPortOrder::Order12_21,
            "21_12" => TwoPortOrder::Order21_12,
            _ => return Err(self.bad_value(k)),
        });
        Ok(())
    }

    fn number_of_frequencies(&mut self, k: &Keyword) -> Result<(), TouchstoneError> {
        if self.frequencies_declared.is_some() {
            return Err(self.duplicate(k));
        }
        let n = self.count(k)?;
        if n == 0 {
            return Err(self.bad_value(k));
        }
        self.frequencies_declared = Some(n);
        Ok(())
    }

    fn number_of_noise_frequencies(&mut self, k: &Keyword) -> Result<(), TouchstoneError> {
        if self.noise_declared.is_some() {
            return Err(self.duplicate(k));
        }
        self.noise_declared = Some(self.count(k)?);
        Ok(())
    }

    /// `[Reference]`: one impedance per port, on this line and the following ones.
    fn reference_keyword(&mut self, k: &Keyword) -> Result<(), TouchstoneError> {
        if self.reference.is_some() {
            return Err(self.duplicate(k));
        }
        let Some(n) = self.ports else {
            return Err(self.err(TouchstoneErrorKind::MissingKeyword("[Number of Ports]")));
        };
        self.reference = Some(Vec::with_capacity(n));
        self.reference_pending = true;
        if !k.value.is_empty() {
            self.reference_numbers(&k.value)?;
        }
        Ok(())
    }

    fn matrix_format_keyword(&mut self, k: &Keyword) -> Result<(), TouchstoneError> {
        if self.matrix_format.is_some() {
            return Err(self.duplicate(k));
        }
        self.matrix_format = Some(match k.value.as_str() {
            "full" => MatrixFormat::Full,
            "lower" => MatrixFormat::Lower,
            "upper" => MatrixFormat::Upper,
            _ => return Err(self.bad_value(k)),
        });
        Ok(())
    }

    /// `[Network Data]`: the keywords a record needs must all have come before it.
    fn network_data(&mut self, k: &Keyword) -> Result<(), TouchstoneError> {
        let missing = |s: &Self, what| s.err(TouchstoneErrorKind::MissingKeyword(what));
        if self.seen_network_keyword {
            return Err(self.duplicate(k));
        }
        if self.ports.is_none() {
            return Err(missing(self, "[Number of Ports]"));
        }
        if self.ports == Some(2) && self.two_port_order.is_none() {
            return Err(missing(self, "[Two-Port Data Order]"));
        }
        if self.frequencies_declared.is_none() {
            return Err(missing(self, "[Number of Frequencies]"));
        }
        if self.options.is_none() {
            return Err(missing(self, "option line (#)"));
        }
        self.seen_network_keyword = true;
        self.section = Section::Network;
        Ok(())
    }

    fn noise_data(&mut self) -> Result<(), TouchstoneError> {
        if self.ports != Some(2) {
            return Err(self.err(TouchstoneErrorKind::NoiseDataNotTwoPort));
        }
        if self.noise_declared.is_none() {
            return Err(self.err(TouchstoneErrorKind::MissingKeyword(
                "[Number of Noise Frequencies]",
            )));
        }
        self.section = Section::Noise;
        Ok(())
    }
}

/// Lower-cased keyword name with single spaces, and the lower-cased value after `]`.
pub(super) fn keyword_name(content: &str) -> (String, String) {
    let inner = content.strip_prefix('[').unwrap_or(content);
    let (name, value) = inner.split_once(']').unwrap_or((inner, ""));
    let name = name
        .split_whitespace()
        .collect::<Vec<_>>()
        .join(" ")
        .to_ascii_lowercase();
    (name, value.trim().to_ascii_lowercase())
}

/// The keyword as written, for messages.
fn keyword_display(content: &str) -> String {
    let inner = content.strip_prefix('[').unwrap_or(content);
    clipped(inner.split_once(']').map_or(inner, |(n, _)| n).trim())
}
