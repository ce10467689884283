//! The option line `# <unit> <parameter> <format> R <n>`: fields in any order, any case,
//! each optional.

use super::{parse_number, Options, Parser};
use crate::formats::touchstone::{
    DataFormat, FrequencyUnit, ParameterKind, TouchstoneError, TouchstoneErrorKind,
};

impl Parser<'_> {
    pub(super) fn option_line(&mut self, rest: &str) -> Result<(), TouchstoneError> {
        if self.options.is_some() {
            if self.is_v2() {
                return Err(self.err(TouchstoneErrorKind::DuplicateOptionLine));
            }
            // Version 1.1: only the first option line counts; later ones are ignored.
            if self.frequencies_hz.is_empty() && self.record.is_empty() {
                return Ok(());
            }
        }
        if !self.is_v2() && (!self.frequencies_hz.is_empty() || !self.record.is_empty()) {
            return Err(self.err(TouchstoneErrorKind::OptionLineAfterData));
        }
        let mut o = Options {
            unit: None,
            kind: None,
            format: None,
            reference_ohm: None,
        };
        let mut toks = rest.split_whitespace();
        while let Some(tok) = toks.next() {
            let lower = tok.to_ascii_lowercase();
            let dup = |what: &str| self.err(TouchstoneErrorKind::DuplicateOption(what.to_string()));
            let unit = match lower.as_str() {
                "hz" => Some(FrequencyUnit::Hz),
                "khz" => Some(FrequencyUnit::KHz),
                "mhz" => Some(FrequencyUnit::MHz),
                "ghz" => Some(FrequencyUnit::GHz),
                _ => None,
            };
            let kind = match lower.as_str() {
                "s" => Some(ParameterKind::S),
                "y" => Some(ParameterKind::Y),
                "z" => Some(ParameterKind::Z),
                "h" => Some(ParameterKind::H),
                "g" => Some(ParameterKind::G),
                _ => None,
            };
            let format = match lower.as_str() {
                "ri" => Some(DataFormat::Ri),
                "ma" => Some(DataFormat::Ma),
                "db" => Some(DataFormat::Db),
                _ => None,
            };
            if let Some(u) = unit {
                if o.unit.replace(u).is_some() {
                    return Err(dup("frequency unit"));
                }
            } else if let Some(k) = kind {
                if o.kind.replace(k).is_some() {
                    return Err(dup("parameter kind"));
                }
            } else if let Some(f) = format {
                if o.format.replace(f).is_some() {
                    return Err(dup("data format"));
                }
            } else if lower == "r" {
                let Some(v) = toks.next() else {
                    return Err(self.err(TouchstoneErrorKind::MissingReference));
                };
                let r = parse_number(v).map_err(|k| self.err(k))?;
                if r <= 0.0 {
                    return Err(self.err(TouchstoneErrorKind::BadReference(r)));
                }
                if o.reference_ohm.replace(r).is_some() {
                    return Err(dup("reference resistance"));
                }
            } else {
                return Err(
                    self.err(TouchstoneErrorKind::UnknownOption(crate::quote::clipped(
                        tok,
                    ))),
                );
            }
        }
        self.options = Some(o);
        Ok(())
    }
}
