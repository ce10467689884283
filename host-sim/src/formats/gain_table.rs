//! Gain by substitution on the host: a reference antenna's gain table (CSV) and the
//! conversion of a measured pattern cut into absolute gain in dBi.
//!
//! The reference antenna (known gain) is measured in the same set-up as the AUT (same range,
//! probe, cables, VNA settings, gate); then G_AUT(θ) = G_ref + P_AUT(θ) − P_ref, all in dB
//! (gain transfer; common practice, no source). The arithmetic is the core's
//! [`sweepgate::metrics::absolute_gain_dbi`] and [`sweepgate::metrics::pattern_to_dbi`];
//! this module reads the table and takes S21 values or levels in dB.
//!
//! Gain table file: UTF-8 CSV, a header line `frequency_hz,gain_dbi`, then one row per
//! frequency, strictly increasing; blank lines and lines starting with `#` are skipped. Gains
//! are interpolated linearly in dB between rows and never extrapolated.
//!
//! ```
//! use sweepgate_host::formats::gain_table::{pattern_gain_dbi, GainTable};
//! let table = GainTable::parse("frequency_hz,gain_dbi\n8e9,15.0\n12e9,17.0\n", "horn.csv").unwrap();
//! // Reference measured at −40 dB, the AUT's cut at −43…−37 dB: the AUT is 3 dB below to 3 dB
//! // above the reference's 16 dBi at 10 GHz.
//! let g = pattern_gain_dbi(&table, 10e9, &[-43.0, -37.0], -40.0).unwrap();
//! assert!((g[0] - 13.0).abs() < 1e-12 && (g[1] - 19.0).abs() < 1e-12);
//! ```

use std::fmt;
use std::path::Path;

use num_complex::Complex64;
use sweepgate::error::GainError;
use sweepgate::metrics::{absolute_gain_dbi, interpolate_gain_dbi, pattern_to_dbi};

use crate::units::db;

/// The header line a gain table must start with.
pub const GAIN_TABLE_HEADER: &str = "frequency_hz,gain_dbi";

/// Why a gain table could not be read, naming the file and (when there is one) the line.
#[derive(Debug, Clone, PartialEq)]
pub struct GainTableError {
    /// The file (or whatever origin the caller named).
    pub file: String,
    /// 1-based line number; `None` for the file as a whole.
    pub line: Option<usize>,
    /// What is wrong.
    pub reason: String,
}

impl fmt::Display for GainTableError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self.line {
            Some(l) => write!(f, "{}: line {l}: {}", self.file, self.reason),
            None => write!(f, "{}: {}", self.file, self.reason),
        }
    }
}

impl std::error::Error for GainTableError {}

/// A reference antenna's gain against frequency.
#[derive(Debug, Clone, PartialEq)]
pub struct GainTable {
    /// Frequencies, Hz, strictly increasing.
    pub frequencies_hz: Vec<f64>,
    /// Gains, dBi, one per frequency.
    pub gains_dbi: Vec<f64>,
}

impl GainTable {
    /// Parses CSV text; `origin` names it in errors.
    pub fn parse(text: &str, origin: &str) -> Result<Self, GainTableError> {
        let err = |line: Option<usize>, reason: String| GainTableError {
            file: origin.to_string(),
            line,
            reason,
        };
        let text = text.strip_prefix('\u{feff}').unwrap_or(text);
        let mut header_seen = false;
        let mut table = GainTable {
            frequencies_hz: Vec::new(),
            gains_dbi: Vec::new(),
        };
        for (i, raw) in text.lines().enumerate() {
            let n = Some(i + 1);
            let line = raw.trim();
            if line.is_empty() || line.starts_with('#') {
                continue;
            }
            let fields: Vec<&str> = line.split(',').map(str::trim).collect();
            if !header_seen {
                if fields != ["frequency_hz", "gain_dbi"] {
                    return Err(err(
                        n,
                        format!(
                            "expected the header `{GAIN_TABLE_HEADER}`, found `{}`",
                            crate::quote::clipped(line)
                        ),
                    ));
                }
                header_seen = true;
                continue;
            }
            let [f, g] = fields.as_slice() else {
                return Err(err(
                    n,
                    format!(
                        "expected two fields (frequency_hz, gain_dbi), found {}",
                        fields.len()
                    ),
                ));
            };
            let number = |v: &str, what: &str| {
                v.parse::<f64>()
                    .ok()
                    .filter(|x| x.is_finite())
                    .ok_or_else(|| {
                        let v = crate::quote::clipped(v);
                        err(n, format!("{what} `{v}` is not a finite number"))
                    })
            };
            let f_hz = number(f, "frequency_hz")?;
            let g_dbi = number(g, "gain_dbi")?;
            if f_hz <= 0.0 {
                return Err(err(n, format!("frequency_hz {f_hz} must be above 0")));
            }
            if let Some(&prev) = table.frequencies_hz.last() {
                if f_hz <= prev {
                    return Err(err(
                        n,
                        format!("frequency_hz {f_hz} must be above the previous row's {prev}"),
                    ));
                }
            }
            table.frequencies_hz.push(f_hz);
            table.gains_dbi.push(g_dbi);
        }
        if !header_seen {
            return Err(err(
                None,
                format!("empty: expected the header `{GAIN_TABLE_HEADER}`"),
            ));
        }
        if table.frequencies_hz.is_empty() {
            return Err(err(None, "no rows after the header".into()));
        }
        Ok(table)
    }

    /// Reads a CSV file.
    pub fn load(path: &Path) -> Result<Self, GainTableError> {
        let origin = path.display().to_string();
        let text = std::fs::read_to_string(path).map_err(|e| GainTableError {
            file: origin.clone(),
            line: None,
            reason: format!("cannot be read: {e}"),
        })?;
        Self::parse(&text, &origin)
    }

    /// Gain at `frequency_hz`, interpolated in dB; refused outside the table.
    pub fn gain_dbi(&self, frequency_hz: f64) -> Result<f64, GainError> {
        interpolate_gain_dbi(&self.frequencies_hz, &self.gains_dbi, frequency_hz)
    }
}

/// Absolute gain in dBi of a measured pattern cut `cut_db` (|S21| in dB, any common
/// reference) at `frequency_hz`, given the reference antenna's level `reference_db`
/// measured in the same set-up and its gain table.
pub fn pattern_gain_dbi(
    table: &GainTable,
    frequency_hz: f64,
    cut_db: &[f64],
    reference_db: f64,
) -> Result<Vec<f64>, GainError> {
    // Checks the table, the frequency and the reference level once.
    let offset = absolute_gain_dbi(
        &table.frequencies_hz,
        &table.gains_dbi,
        frequency_hz,
        0.0,
        reference_db,
    )?;
    let mut out = cut_db.to_vec();
    pattern_to_dbi(&mut out, offset, 0.0)?;
    Ok(out)
}

/// [`pattern_gain_dbi`] from complex S21: the cut and the reference measurement, each
/// converted by [`crate::units::db`].
pub fn pattern_gain_dbi_from_s21(
    table: &GainTable,
    frequency_hz: f64,
    cut: &[Complex64],
    reference: Complex64,
) -> Result<Vec<f64>, GainError> {
    let cut_db: Vec<f64> = cut.iter().map(|c| db(*c)).collect();
    pattern_gain_dbi(table, frequency_hz, &cut_db, db(reference))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn substitution_adds_the_reference_offset() {
        let t = GainTable::parse("frequency_hz,gain_dbi\n1e9,10\n2e9,12\n", "t").unwrap();
        // Linear in dB: 11 dBi at 1.5 GHz; the AUT 2 dB above the reference → 13 dBi.
        let g = pattern_gain_dbi(&t, 1.5e9, &[-18.0], -20.0).unwrap();
        assert!((g[0] - 13.0).abs() < 1e-12);
        assert_eq!(
            pattern_gain_dbi(&t, 3e9, &[-18.0], -20.0),
            Err(GainError::OutsideTable)
        );
        assert_eq!(
            pattern_gain_dbi(&t, 1.5e9, &[f64::NAN], -20.0),
            Err(GainError::NonFiniteInput)
        );
        // The cut and the reference in dB through the one conversion (`units::db`).
        assert_eq!(db(Complex64::new(0.0, 0.0)), crate::units::FLOOR_DB);
        assert!((db(Complex64::new(0.0, 0.1)) + 20.0).abs() < 1e-12);
        let from_s21 = pattern_gain_dbi_from_s21(
            &t,
            1.5e9,
            &[Complex64::new(0.0, 10f64.powf(-18.0 / 20.0))],
            Complex64::new(0.1, 0.0),
        )
        .unwrap();
        assert!((from_s21[0] - 13.0).abs() < 1e-9, "{from_s21:?}");
    }
}
