//! Data lines: network records (a frequency and its matrix, over as many lines as they
//! take), version 2.0 reference numbers, and skipped noise data.

use num_complex::Complex64;

use super::{parse_number, ports_from_name, Parser, Section};
use crate::formats::touchstone::{
    MatrixFormat, TouchstoneError, TouchstoneErrorKind, TwoPortOrder, MAX_PORTS,
};

impl Parser<'_> {
    pub(super) fn reference_numbers(&mut self, content: &str) -> Result<(), TouchstoneError> {
        let n = self.ports.unwrap_or(0);
        let line = self.line;
        for tok in content.split_whitespace() {
            let r = parse_number(tok).map_err(|k| self.err(k))?;
            if r <= 0.0 {
                return Err(self.err(TouchstoneErrorKind::BadReference(r)));
            }
            let have = self.reference.as_ref().map_or(0, Vec::len);
            if have >= n {
                return Err(self.err_at(
                    Some(line),
                    TouchstoneErrorKind::RecordLength {
                        expected: n,
                        found: have + 1,
                        last_line: 0,
                    },
                ));
            }
            self.reference.get_or_insert_with(Vec::new).push(r);
        }
        if self.reference.as_ref().map_or(0, Vec::len) == n {
            self.reference_pending = false;
        }
        Ok(())
    }

    pub(super) fn ports_now(&mut self) -> Result<usize, TouchstoneError> {
        if let Some(n) = self.ports {
            return Ok(n);
        }
        let n = ports_from_name(self.name)
            .ok_or_else(|| self.err_at(None, TouchstoneErrorKind::UnknownExtension))?;
        if n == 0 {
            return Err(self.err_at(None, TouchstoneErrorKind::UnknownExtension));
        }
        if n > MAX_PORTS {
            return Err(self.err_at(None, TouchstoneErrorKind::TooManyPorts(n)));
        }
        self.ports = Some(n);
        Ok(n)
    }

    pub(super) fn record_len(&self, n: usize) -> usize {
        let pairs = match self.matrix_format.unwrap_or(MatrixFormat::Full) {
            MatrixFormat::Full => n * n,
            MatrixFormat::Lower | MatrixFormat::Upper => n * (n + 1) / 2,
        };
        1 + 2 * pairs
    }

    pub(super) fn numbers(&mut self, content: &str) -> Result<(), TouchstoneError> {
        if self.is_v2() {
            if self.reference_pending {
                return self.reference_numbers(content);
            }
            match self.section {
                Section::Network => {}
                Section::Noise => {
                    self.noise_numbers += content.split_whitespace().count();
                    return Ok(());
                }
                _ => return Err(self.err(TouchstoneErrorKind::NumbersOutsideData)),
            }
        } else {
            if self.section == Section::Noise {
                self.noise_numbers += content.split_whitespace().count();
                return Ok(());
            }
            self.section = Section::Network;
        }
        let n = self.ports_now()?;
        let need = self.record_len(n);
        if self.record.is_empty() {
            self.record_start = self.line;
            // Version 1.1 2-port noise data follows the network data and starts at a
            // frequency not above the last network frequency.
            // A line of another length going back is a descending network record, refused
            // below as not increasing.
            if !self.is_v2() && n == 2 && content.split_whitespace().count() == 5 {
                if let (Some(first), Some(&last_hz)) = (
                    content.split_whitespace().next(),
                    self.frequencies_hz.last(),
                ) {
                    let f = parse_number(first).map_err(|k| self.err(k))?;
                    if f * self.unit().hz() <= last_hz {
                        self.section = Section::Noise;
                        self.noise_numbers += content.split_whitespace().count();
                        return Ok(());
                    }
                }
            }
        }
        for tok in content.split_whitespace() {
            let x = parse_number(tok).map_err(|k| self.err(k))?;
            self.record.push(x);
        }
        self.check_record_length(need)?;
        if self.record.len() == need {
            self.complete_record(n)?;
        }
        Ok(())
    }

    /// Refuses an open record holding more than the `need` numbers of one record.
    pub(super) fn check_record_length(&self, need: usize) -> Result<(), TouchstoneError> {
        if self.record.len() > need {
            return Err(self.err_at(
                Some(self.record_start),
                TouchstoneErrorKind::RecordLength {
                    expected: need,
                    found: self.record.len(),
                    last_line: if self.line != self.record_start {
                        self.line
                    } else {
                        0
                    },
                },
            ));
        }
        Ok(())
    }

    pub(super) fn complete_record(&mut self, n: usize) -> Result<(), TouchstoneError> {
        let f_hz = self.record_frequency_hz()?;
        let fmt = self.format();
        let vals: Vec<Complex64> = self.record[1..]
            .chunks_exact(2)
            .map(|p| fmt.to_complex(p[0], p[1]))
            .collect();
        if let Some((k, v)) = vals.iter().enumerate().find(|(_, v)| !within_single(**v)) {
            return Err(self.beyond_single(k, *v));
        }
        let base = self.data.len();
        self.data.resize(base + n * n, Complex64::new(0.0, 0.0));
        let order = self.two_port_order.unwrap_or(TwoPortOrder::Order21_12);
        let matrix_format = self.matrix_format.unwrap_or(MatrixFormat::Full);
        fill_matrix(&mut self.data[base..], n, &vals, matrix_format, order);
        self.frequencies_hz.push(f_hz);
        self.record.clear();
        Ok(())
    }

    /// The error for value `k` (0-based) of the record being beyond single precision.
    pub(super) fn beyond_single(&self, k: usize, v: Complex64) -> TouchstoneError {
        self.err_at(
            Some(self.record_start),
            TouchstoneErrorKind::BeyondSinglePrecision {
                value: k + 1,
                re: v.re,
                im: v.im,
            },
        )
    }

    /// The complete record's frequency in Hz, checked: not negative, above the one before,
    /// and not past `[Number of Frequencies]`.
    #[inline(always)]
    pub(super) fn record_frequency_hz(&self) -> Result<f64, TouchstoneError> {
        let at = Some(self.record_start);
        let f_hz = self.record[0] * self.unit().hz();
        if f_hz < 0.0 {
            return Err(self.err_at(at, TouchstoneErrorKind::NegativeFrequency(f_hz)));
        }
        if let Some(&prev) = self.frequencies_hz.last() {
            if f_hz <= prev {
                return Err(self.err_at(
                    at,
                    TouchstoneErrorKind::NotIncreasing {
                        previous_hz: prev,
                        found_hz: f_hz,
                    },
                ));
            }
        }
        if let Some(declared) = self.frequencies_declared {
            if self.frequencies_hz.len() >= declared {
                return Err(self.err_at(
                    at,
                    TouchstoneErrorKind::FrequencyCountMismatch {
                        declared,
                        found: declared + 1,
                    },
                ));
            }
        }
        Ok(f_hz)
    }

    pub(super) fn end_record(&self) -> Result<(), TouchstoneError> {
        if self.record.is_empty() {
            return Ok(());
        }
        let n = self.ports.unwrap_or(1);
        Err(self.err_at(
            Some(self.record_start),
            TouchstoneErrorKind::RecordLength {
                expected: self.record_len(n),
                found: self.record.len(),
                last_line: 0,
            },
        ))
    }
}

/// Whether both parts of a value are within the single-precision range the gate works in
/// (false for anything not finite).
pub(super) fn within_single(v: Complex64) -> bool {
    let single = f64::from(f32::MAX);
    v.re.abs() <= single && v.im.abs() <= single
}

/// Writes the `n`×`n` matrix `m` (row by row) from the values of one record as the file
/// lays them out: every element (2-port in `order`), or one triangle of a symmetric matrix.
pub(super) fn fill_matrix(
    m: &mut [Complex64],
    n: usize,
    vals: &[Complex64],
    matrix_format: MatrixFormat,
    order: TwoPortOrder,
) {
    let zero = Complex64::new(0.0, 0.0);
    match matrix_format {
        MatrixFormat::Full if n == 2 => {
            let (s12, s21) = match order {
                TwoPortOrder::Order21_12 => (vals[2], vals[1]),
                TwoPortOrder::Order12_21 => (vals[1], vals[2]),
            };
            m.copy_from_slice(&[vals[0], s12, s21, vals[3]]);
        }
        MatrixFormat::Full => m.copy_from_slice(vals),
        MatrixFormat::Lower | MatrixFormat::Upper => {
            let mut it = vals.iter();
            for i in 0..n {
                let columns = if matrix_format == MatrixFormat::Lower {
                    0..i + 1
                } else {
                    i..n
                };
                for j in columns {
                    let v = *it.next().unwrap_or(&zero);
                    m[i * n + j] = v;
                    m[j * n + i] = v;
                }
            }
        }
    }
}
