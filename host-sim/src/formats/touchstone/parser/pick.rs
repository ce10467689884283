//! Numbers read from a file's bytes (`bytes.rs`), and the reading of only some parameters.
//!
//! With every parameter wanted, each number is parsed exactly as [`Parser::numbers`] parses
//! it. When only some parameters are wanted (S21 of a 2-port file, the co- and cross-polar
//! traces of an n-port one), the numbers of the other values are still counted and checked
//! but not converted: a byte loop ([`decimal_bound`]) makes sure such a token is a number
//! Rust's parser reads, finite and small enough that its value cannot be beyond single
//! precision in the file's format. Any token it cannot vouch for is parsed exactly on its
//! line, so a malformed or infinite number is refused with the same error, on the same
//! line, as by the full reader; and at the end of each record every value holding such a
//! token is converted and checked as the full reader checks it (its partner parsed again
//! from the file when it was passed over). The values kept are converted exactly as the
//! full reader converts them, so the sweeps are the same bit for bit.

use num_complex::Complex64;

use super::bytes::{token_text, Line};
use super::data::{fill_matrix, within_single};
use super::{parse_number, Parser, Section};
use crate::formats::touchstone::{
    DataFormat, MatrixFormat, Parameter, ParameterKind, TouchstoneError, TouchstoneErrorKind,
    TwoPortOrder,
};

/// A number passed over has magnitude below 10^this: far inside single precision
/// (3.4e38) as a real or imaginary part, as a magnitude, and (being finite) as an angle.
const VALUE_DIGITS: i64 = 37;

/// A dB level passed over has magnitude below 10^this (100 dB: 10^(±5) as a magnitude).
const DB_LEVEL_DIGITS: i64 = 2;

/// For a token that Rust's `f64` parser surely reads as a plain decimal number
/// (`[+-]digits[.digits][e[+-]digits]`, at least one digit before the exponent), a power
/// `B` with |value| < 10^B; `None` for anything else, which is left to the exact parser.
pub(super) fn decimal_bound(tok: &[u8]) -> Option<i64> {
    let mut i = usize::from(matches!(tok.first(), Some(b'+' | b'-')));
    let (mut digits, mut lead) = (0usize, 0i64);
    while let Some(&b) = tok.get(i).filter(|b| b.is_ascii_digit()) {
        // Integer digits after any leading zeros.
        if lead > 0 || b != b'0' {
            lead += 1;
        }
        digits += 1;
        i += 1;
    }
    if tok.get(i) == Some(&b'.') {
        i += 1;
        while tok.get(i).is_some_and(u8::is_ascii_digit) {
            digits += 1;
            i += 1;
        }
    }
    if digits == 0 {
        return None;
    }
    let mut exponent = 0i64;
    if matches!(tok.get(i), Some(b'e' | b'E')) {
        i += 1;
        let negative = tok.get(i) == Some(&b'-');
        if matches!(tok.get(i), Some(b'+' | b'-')) {
            i += 1;
        }
        let first = i;
        while let Some(&b) = tok.get(i).filter(|b| b.is_ascii_digit()) {
            exponent = (exponent * 10 + i64::from(b - b'0')).min(1 << 40);
            i += 1;
        }
        if i == first {
            return None;
        }
        if negative {
            exponent = -exponent;
        }
    }
    (i == tok.len()).then_some(lead + exponent)
}

/// Which parameters to keep, and what one record of the file holds of them.
pub(super) struct Pick {
    /// The parameters asked for (`None`: S21 of a file of two or more ports, S11 of one).
    asked: Option<Vec<Parameter>>,
    /// Set at the first record (again if the layout of records changes).
    plan: Option<Plan>,
    /// Each parameter's values so far (empty for one the file's ports do not have).
    columns: Vec<Vec<Complex64>>,
}

/// Where each kept parameter lies in a record.
struct Plan {
    layout: (MatrixFormat, TwoPortOrder),
    parameters: Vec<Parameter>,
    /// The value (0-based, in the record's order) each parameter is, when the file has it.
    from: Vec<Option<usize>>,
    /// Whether each value of a record is kept.
    needed: Vec<bool>,
}

/// Only some parameters of a file, at every frequency: what [`Parser::finish_picked`] gives.
pub(in crate::formats::touchstone) struct Picked {
    pub(in crate::formats::touchstone) kind: ParameterKind,
    pub(in crate::formats::touchstone) ports: usize,
    pub(in crate::formats::touchstone) frequencies_hz: Vec<f64>,
    pub(in crate::formats::touchstone) parameters: Vec<Parameter>,
    pub(in crate::formats::touchstone) columns: Vec<Vec<Complex64>>,
}

/// The value (0-based, in the record's order) that each element of an `n`×`n` matrix
/// (row by row) comes from, as `fill_matrix` lays a record out.
fn value_of_element(n: usize, pairs: usize, layout: (MatrixFormat, TwoPortOrder)) -> Vec<usize> {
    let vals: Vec<Complex64> = (0..pairs).map(|k| Complex64::new(k as f64, 0.0)).collect();
    let mut m = vec![Complex64::new(0.0, 0.0); n * n];
    fill_matrix(&mut m, n, &vals, layout.0, layout.1);
    m.iter().map(|c| c.re as usize).collect()
}

impl<'a> Parser<'a> {
    /// A reader keeping only `parameters` (`None`: the usual one for the port count).
    pub(in crate::formats::touchstone) fn picking(
        name: &'a str,
        parameters: Option<&[Parameter]>,
    ) -> Self {
        let mut p = Self::new(name);
        p.pick = Some(Pick {
            asked: parameters.map(<[Parameter]>::to_vec),
            plan: None,
            columns: Vec::new(),
        });
        p
    }

    /// The parameters kept, after the checks at the end of the file.
    pub(in crate::formats::touchstone) fn finish_picked(self) -> Result<Picked, TouchstoneError> {
        self.check_end()?;
        let ports = self.ports.unwrap_or(1);
        let kind = self
            .options
            .as_ref()
            .and_then(|o| o.kind)
            .unwrap_or(ParameterKind::S);
        let (parameters, columns) = match self.pick {
            Some(Pick {
                plan: Some(plan),
                columns,
                ..
            }) => (plan.parameters, columns),
            Some(Pick { asked, .. }) => {
                let p = asked.unwrap_or_else(|| vec![Parameter::default_for(ports)]);
                let c = vec![Vec::new(); p.len()];
                (p, c)
            }
            None => (Vec::new(), Vec::new()),
        };
        Ok(Picked {
            kind,
            ports,
            frequencies_hz: self.frequencies_hz,
            parameters,
            columns,
        })
    }

    /// The numbers of one line: [`Parser::numbers`] on tokens already split.
    pub(super) fn numbers_of(&mut self, file: &[u8], line: &Line) -> Result<(), TouchstoneError> {
        if self.is_v2() {
            if self.reference_pending {
                let content = match (line.tokens.first(), line.tokens.last()) {
                    (Some(&(a, _)), Some(&(_, b))) => &line.text[a..b],
                    _ => &[],
                };
                return self.reference_numbers(&token_text(content));
            }
            match self.section {
                Section::Network => {}
                Section::Noise => {
                    self.noise_numbers += line.tokens.len();
                    return Ok(());
                }
                _ => return Err(self.err(TouchstoneErrorKind::NumbersOutsideData)),
            }
        } else {
            if self.section == Section::Noise {
                self.noise_numbers += line.tokens.len();
                return Ok(());
            }
            self.section = Section::Network;
        }
        let n = self.ports_now()?;
        let need = self.record_len(n);
        if self.record.is_empty() {
            self.record_start = self.line;
            if self.starts_noise(line, n)? {
                return Ok(());
            }
            self.plan_record(n);
        }
        self.take_numbers(line, need)?;
        self.check_record_length(need)?;
        if self.record.len() == need {
            if self.pick.is_some() {
                self.complete_picked(file)?;
            } else {
                self.complete_record(n)?;
            }
        }
        Ok(())
    }

    /// Version 1.1 2-port noise data, as [`Parser::numbers`] recognises it.
    fn starts_noise(&mut self, line: &Line, n: usize) -> Result<bool, TouchstoneError> {
        if self.is_v2() || n != 2 || line.tokens.len() != 5 {
            return Ok(false);
        }
        if let (Some(&(a, b)), Some(&last_hz)) = (line.tokens.first(), self.frequencies_hz.last()) {
            let f = self.number(&line.text[a..b])?;
            if f * self.unit().hz() <= last_hz {
                self.section = Section::Noise;
                self.noise_numbers += line.tokens.len();
                return Ok(true);
            }
        }
        Ok(false)
    }

    /// A token parsed exactly, or the error naming it on this line.
    fn number(&self, tok: &[u8]) -> Result<f64, TouchstoneError> {
        parse_number(&token_text(tok)).map_err(|k| self.err(k))
    }

    /// Whether the number at `index` of a record of `need` numbers is kept.
    fn wanted(&self, index: usize, need: usize) -> bool {
        match self.pick.as_ref().and_then(|p| p.plan.as_ref()) {
            None => true,
            Some(plan) => index == 0 || (index < need && plan.needed[(index - 1) / 2]),
        }
    }

    /// Adds a line's numbers to the open record: each parsed, or (not kept, from the file,
    /// and vouched for by [`decimal_bound`]) counted as NaN with its place in the file.
    fn take_numbers(&mut self, line: &Line, need: usize) -> Result<(), TouchstoneError> {
        let db = self.format() == DataFormat::Db;
        for &(a, b) in line.tokens {
            let tok = &line.text[a..b];
            let index = self.record.len();
            let x = if line.from_file && !self.wanted(index, need) {
                let limit = if db && index % 2 == 1 {
                    DB_LEVEL_DIGITS
                } else {
                    VALUE_DIGITS
                };
                match decimal_bound(tok) {
                    Some(bound) if bound <= limit => f64::NAN,
                    _ => self.number(tok)?,
                }
            } else {
                self.number(tok)?
            };
            self.record.push(x);
            if self.pick.is_some() {
                self.spans.push((a, b));
            }
        }
        Ok(())
    }

    /// Makes the plan of the record about to start, unless the one made holds.
    fn plan_record(&mut self, n: usize) {
        let layout = (
            self.matrix_format.unwrap_or(MatrixFormat::Full),
            self.two_port_order.unwrap_or(TwoPortOrder::Order21_12),
        );
        let pairs = (self.record_len(n) - 1) / 2;
        let Some(pick) = self.pick.as_mut() else {
            return;
        };
        if pick.plan.as_ref().is_some_and(|p| p.layout == layout) {
            return;
        }
        let parameters = pick
            .asked
            .clone()
            .unwrap_or_else(|| vec![Parameter::default_for(n)]);
        let element = value_of_element(n, pairs, layout);
        let from: Vec<Option<usize>> = parameters
            .iter()
            .map(|p| {
                let (o, i) = (usize::from(p.out_port), usize::from(p.in_port));
                let inside = o >= 1 && i >= 1 && o <= n && i <= n;
                inside.then(|| element[(o - 1) * n + (i - 1)])
            })
            .collect();
        let mut needed = vec![false; pairs];
        for &k in from.iter().flatten() {
            needed[k] = true;
        }
        if pick.columns.is_empty() {
            pick.columns = vec![Vec::new(); parameters.len()];
        }
        pick.plan = Some(Plan {
            layout,
            parameters,
            from,
            needed,
        });
    }

    /// The number at `index` of the open record, parsed again from the file when it was
    /// passed over.
    fn exact(&self, file: &[u8], index: usize) -> Result<f64, TouchstoneError> {
        let x = self.record[index];
        if !x.is_nan() {
            return Ok(x);
        }
        let at = Some(self.record_start);
        let tok = self
            .spans
            .get(index)
            .and_then(|&(a, b)| file.get(a..b))
            .unwrap_or_default();
        parse_number(&token_text(tok)).map_err(|k| self.err_at(at, k))
    }

    /// A complete record when only some parameters are kept: the checks of
    /// [`Parser::complete_record`] (every value that was parsed, or holds a number that
    /// was, converted and checked), then the kept values.
    fn complete_picked(&mut self, file: &[u8]) -> Result<(), TouchstoneError> {
        let f_hz = self.record_frequency_hz()?;
        let fmt = self.format();
        for k in 0..(self.record.len() - 1) / 2 {
            let (i, j) = (1 + 2 * k, 2 + 2 * k);
            if self.record[i].is_nan() && self.record[j].is_nan() {
                continue;
            }
            let v = fmt.to_complex(self.exact(file, i)?, self.exact(file, j)?);
            if !within_single(v) {
                return Err(self.beyond_single(k, v));
            }
        }
        if let Some(Pick {
            plan: Some(plan),
            columns,
            ..
        }) = self.pick.as_mut()
        {
            for (column, from) in columns.iter_mut().zip(&plan.from) {
                if let Some(k) = *from {
                    column.push(fmt.to_complex(self.record[1 + 2 * k], self.record[2 + 2 * k]));
                }
            }
        }
        self.frequencies_hz.push(f_hz);
        self.record.clear();
        self.spans.clear();
        Ok(())
    }
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
    fn a_vouched_token_is_what_rusts_parser_reads_and_within_its_bound() {
        // Reference: Rust's own `str::parse::<f64>`. Every string of up to 6 characters of
        // number syntax: where the byte loop vouches for one, the parser must read it, and
        // with a bound a number may be passed over at (up to 37), finite and no larger than
        // 10^bound.
        let mut vouched = 0;
        for s in strings(b"+-.eE019", 6) {
            let text = std::str::from_utf8(&s).unwrap();
            let Some(bound) = decimal_bound(&s) else {
                continue;
            };
            vouched += 1;
            let x: f64 = text
                .parse()
                .unwrap_or_else(|e| panic!("{text:?} vouched for but refused: {e}"));
            if bound <= VALUE_DIGITS {
                assert!(x.is_finite(), "{text:?}");
                assert!(
                    x.abs() <= 10f64.powi(bound as i32),
                    "{text:?}: {x} > 1e{bound}"
                );
            }
        }
        assert!(vouched > 10_000, "{vouched}");
    }

    #[test]
    fn the_bound_follows_the_digits_and_the_exponent() {
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
            assert_eq!(decimal_bound(tok.as_bytes()), bound, "{tok}");
        }
    }
}
