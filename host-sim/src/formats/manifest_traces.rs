//! Several traces from the files of a manifest: e.g. S21 (the co-polar port of a
//! dual-polarised probe) and S31 (its cross-polar port) from each 3-port file, each on the
//! common grid. Each file is read once; every trace of a file shares its frequencies.
//!
//! ```
//! use sweepgate_host::formats::manifest::Manifest;
//! use sweepgate_host::formats::touchstone::{Parameter, Spacing};
//! let dir = std::env::temp_dir().join(format!("sweepgate-traces-doc-{}", std::process::id()));
//! std::fs::create_dir_all(&dir).unwrap();
//! // 3-port files: S21 = 0.5, S31 = 0.05.
//! let row = |f: u32| format!("{f} 0 0 0 0 0 0 0.5 0 0 0 0 0 0.05 0 0 0 0 0\n");
//! std::fs::write(dir.join("a.s3p"), format!("# MHz S RI\n{}{}", row(1), row(2))).unwrap();
//! std::fs::write(dir.join("b.s3p"), format!("# MHz S RI\n{}{}", row(1), row(2))).unwrap();
//! std::fs::write(dir.join("scan.csv"), "theta_deg,phi_deg,file\n0,0,a.s3p\n0,90,b.s3p\n").unwrap();
//! let m = Manifest::read(&dir.join("scan.csv")).unwrap();
//! let p = |s: &str| s.parse::<Parameter>().unwrap();
//! let scan = m.load_traces_on(&[p("S21"), p("S31")], Spacing::RequireUniform, 1).unwrap();
//! assert_eq!(scan.sweeps[1].phi_deg, 90.0);
//! assert_eq!(scan.sweeps[1].traces[1][0].re, 0.05);
//! std::fs::remove_dir_all(&dir).unwrap();
//! ```

use std::path::PathBuf;

use sweepgate::grid::Grid;
use sweepgate::Complex32;

use crate::formats::manifest::{
    same_grid, GridMismatch, Manifest, ManifestError, ManifestErrorKind, ManifestRow,
};
use crate::formats::touchstone::{GateSweep, Parameter, Spacing, Touchstone, TouchstoneError};

/// One file's traces.
#[derive(Debug, Clone, PartialEq)]
pub struct TraceSweep {
    /// The angle along the cut (the manifest's `theta_deg`, or `angle_deg`).
    pub theta_deg: f64,
    /// The cut (the manifest's `phi_deg`; 0 in a manifest of one axis).
    pub phi_deg: f64,
    /// One sweep per requested parameter, in the order asked, on the common grid.
    pub traces: Vec<Vec<Complex32>>,
    /// The file.
    pub file: PathBuf,
}

/// Every file's traces on the common grid, in manifest order.
#[derive(Debug, Clone, PartialEq)]
pub struct TracesScan {
    /// The common grid.
    pub grid: Grid,
    /// The parameters, in trace order.
    pub parameters: Vec<Parameter>,
    /// One per row.
    pub sweeps: Vec<TraceSweep>,
    /// Warnings (files that were resampled).
    pub warnings: Vec<String>,
}

/// Reads one file and takes each parameter from it.
fn read_traces(
    row: &ManifestRow,
    parameters: &[Parameter],
    spacing: Spacing,
) -> Result<Vec<GateSweep>, TouchstoneError> {
    Touchstone::read_sweeps(&row.file, Some(parameters), spacing)
}

impl Manifest {
    /// Reads every file once and takes each of `parameters` from it (e.g. S21 and S31 of
    /// 3-port files), on up to `threads` threads; the result and the first error (in the
    /// manifest's order) are the same for any number. All files must share one grid, as
    /// for [`Manifest::load`].
    pub fn load_traces_on(
        &self,
        parameters: &[Parameter],
        spacing: Spacing,
        threads: usize,
    ) -> Result<TracesScan, ManifestError> {
        let err = |line: Option<usize>, kind| ManifestError {
            file: self.name().to_string(),
            line,
            kind,
        };
        let read = crate::threads::map_blocks(
            self.rows(),
            threads,
            8,
            || (),
            |_, rows| {
                rows.iter()
                    .map(|row| read_traces(row, parameters, spacing))
                    .collect()
            },
        );
        let mut first: Option<(Grid, PathBuf)> = None;
        let mut sweeps = Vec::with_capacity(self.rows().len());
        let mut warnings = Vec::new();
        for (row, got) in self.rows().iter().zip(read) {
            let at = Some(row.line);
            let got = got.map_err(|e| err(at, ManifestErrorKind::Touchstone(Box::new(e))))?;
            let mut traces = Vec::with_capacity(got.len());
            for s in got {
                let (g, f) = first.get_or_insert_with(|| (s.grid, row.file.clone()));
                if !same_grid(g, &s.grid) {
                    let parts = |g: &Grid| (g.start_hz(), g.step_hz(), g.points());
                    let m = GridMismatch {
                        file: row.file.clone(),
                        grid: parts(&s.grid),
                        first_file: f.clone(),
                        first_grid: parts(g),
                    };
                    return Err(err(at, ManifestErrorKind::DifferentGrid(Box::new(m))));
                }
                warnings.extend(s.warning);
                traces.push(s.values);
            }
            sweeps.push(TraceSweep {
                theta_deg: row.angle_deg,
                phi_deg: row.phi_deg.unwrap_or(0.0),
                traces,
                file: row.file.clone(),
            });
        }
        let Some((grid, _)) = first else {
            return Err(err(None, ManifestErrorKind::NoRows));
        };
        Ok(TracesScan {
            grid,
            parameters: parameters.to_vec(),
            sweeps,
            warnings,
        })
    }
}
