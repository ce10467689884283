//! Numbers read from a file's bytes (`bytes.rs`), and the reading of only some parameters.
//!
//! With every parameter wanted, each number is parsed exactly as [`Parser::numbers`] parses
//! it. When only some parameters are wanted (S21 of a 2-port file, the co- and cross-polar
//! traces of an n-port one), the numbers of the other values are still counted and checked
//! but not converted: a byte loop ([`vouched`]) makes sure such a token is a number
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
use super::decimal::{simple_decimal, vouched, DB_LEVEL_DIGITS, VALUE_DIGITS};
use super::{parse_number, Parser, Section};
use crate::formats::touchstone::{
    DataFormat, MatrixFormat, Parameter, ParameterKind, TouchstoneError, TouchstoneErrorKind,
    TwoPortOrder,
};

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

/// The most records room is made for ahead in each kept column (1 MiB of values): a file
/// whose first lines are short and whose rest is something else reserves no more than this.
const RESERVED_RECORDS: usize = 1 << 16;

/// What the reader does with a number of a record.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) enum Take {
    /// Converted exactly: the frequency and the kept parameters.
    Value,
    /// Passed over when vouched for with a bound no larger than this (else converted).
    Bound(i64),
}

/// The [`Take`] of the number at `index` of a record of `need` numbers whose pairs
/// `needed` are kept (`None`: all), in a dB file or not; a number past `need` is not kept.
pub(super) fn take_of(index: usize, need: usize, needed: Option<&[bool]>, db: bool) -> Take {
    let kept = match needed {
        None => true,
        Some(n) => index == 0 || (index < need && n[(index - 1) / 2]),
    };
    if kept {
        Take::Value
    } else if db && index % 2 == 1 {
        Take::Bound(DB_LEVEL_DIGITS)
    } else {
        Take::Bound(VALUE_DIGITS)
    }
}

/// A token's exact value: the short-decimal path, else Rust's parser (finite only).
pub(super) fn exact_number(tok: &[u8]) -> Result<f64, TouchstoneErrorKind> {
    match simple_decimal(tok) {
        Some(x) => Ok(x),
        None => parse_number(&token_text(tok)),
    }
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
        let whole_record = self.record.is_empty() && line.tokens.len() == need && line.from_file;
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
                if whole_record {
                    self.one_line = self.one_line_plan(need);
                    self.reserve_for_lines(file, line);
                }
            } else {
                self.complete_record(n)?;
            }
        }
        Ok(())
    }

    /// Room in the kept columns for the records the rest of the file holds if every line is
    /// as long as `line` (a whole record), at most [`RESERVED_RECORDS`]: the columns then do
    /// not grow (and copy themselves) step by step.
    fn reserve_for_lines(&mut self, file: &[u8], line: &Line) {
        let (Some(&(a, _)), Some(&(_, b))) = (line.tokens.first(), line.tokens.last()) else {
            return;
        };
        let records = (file.len().saturating_sub(b) / (b - a + 1)).min(RESERVED_RECORDS);
        self.frequencies_hz.reserve(records);
        if let Some(pick) = self.pick.as_mut() {
            for column in &mut pick.columns {
                column.reserve(records);
            }
        }
    }

    /// Which pairs of a record are kept, once the first record's plan is made.
    pub(super) fn kept_pairs(&self) -> Option<&[bool]> {
        Some(&self.pick.as_ref()?.plan.as_ref()?.needed)
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
        exact_number(tok).map_err(|k| self.err(k))
    }

    /// Adds a line's numbers to the open record: each parsed, or (not kept, from the file,
    /// and [`vouched`] for) counted as NaN with its place in the file.
    fn take_numbers(&mut self, line: &Line, need: usize) -> Result<(), TouchstoneError> {
        let db = self.format() == DataFormat::Db;
        // Whether each value of a record is kept (`None`: all are).
        let needed = match self.pick.as_mut().and_then(|p| p.plan.as_mut()) {
            Some(plan) if line.from_file => Some(std::mem::take(&mut plan.needed)),
            _ => None,
        };
        let r = self.take_tokens(line, need, needed.as_deref(), db);
        if let (Some(n), Some(plan)) = (needed, self.pick.as_mut().and_then(|p| p.plan.as_mut())) {
            plan.needed = n;
        }
        r
    }

    /// [`Parser::take_numbers`] with the values kept (`None`: all).
    fn take_tokens(
        &mut self,
        line: &Line,
        need: usize,
        needed: Option<&[bool]>,
        db: bool,
    ) -> Result<(), TouchstoneError> {
        let spans = self.pick.is_some();
        for &(a, b) in line.tokens {
            let tok = &line.text[a..b];
            let x = match take_of(self.record.len(), need, needed, db) {
                Take::Value => self.number(tok)?,
                Take::Bound(limit) if vouched(tok, limit) => f64::NAN,
                Take::Bound(_) => self.number(tok)?,
            };
            self.record.push(x);
            if spans {
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
    #[inline(always)]
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
    pub(super) fn complete_picked(&mut self, file: &[u8]) -> Result<(), TouchstoneError> {
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
        self.keep_record(f_hz, fmt);
        Ok(())
    }

    /// [`Parser::complete_picked`] for a record whose values are all passed over but for the
    /// pairs `kept` (bit k for pair k), which hold exact values: only these are converted
    /// and checked, in the record's order.
    pub(super) fn complete_kept(&mut self, kept: u64) -> Result<(), TouchstoneError> {
        let f_hz = self.record_frequency_hz()?;
        let fmt = self.format();
        let mut bits = kept;
        while bits != 0 {
            let k = bits.trailing_zeros() as usize;
            bits &= bits - 1;
            let v = fmt.to_complex(self.record[1 + 2 * k], self.record[2 + 2 * k]);
            if !within_single(v) {
                return Err(self.beyond_single(k, v));
            }
        }
        self.keep_record(f_hz, fmt);
        Ok(())
    }

    /// The end of a checked record: its kept values to their columns, its frequency kept.
    fn keep_record(&mut self, f_hz: f64, fmt: DataFormat) {
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
    }
}
