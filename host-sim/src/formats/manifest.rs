//! Manifests of step-and-stop scans: one Touchstone file per turntable angle.
//!
//! A manifest is a CSV file with the header `angle_deg,file` and one row per sweep:
//!
//! ```text
//! angle_deg,file
//! -10,sweeps/m010.s2p
//! 0,sweeps/p000.s2p
//! 10,"sweeps/p010, second try.s2p"
//! ```
//!
//! A scan of several cuts (a second positioner axis, or the sphere) gives both axes per file
//! with the header `theta_deg,phi_deg,file` ([`HEADER_AXES`]): θ is the angle along the cut
//! and φ the cut (see [`crate::pipeline::cuts`]); a pair may be given once.
//!
//! Paths are relative to the folder of the manifest (absolute paths are kept). Everything
//! after the first comma is the file name, so names holding commas may be written plain or
//! in double quotes (`""` inside quotes is one quote). Blank lines are skipped. Angles must
//! be finite and distinct (as numbers: 0 and 360 are two rows, as a full-circle scan
//! writes them).
//!
//! ```
//! use sweepgate_host::formats::manifest::Manifest;
//! use sweepgate_host::formats::touchstone::Spacing;
//! let dir = std::env::temp_dir().join(format!("sweepgate-manifest-doc-{}", std::process::id()));
//! std::fs::create_dir_all(&dir).unwrap();
//! for (name, s21) in [("a.s2p", "0.5 0"), ("b.s2p", "0.25 0")] {
//!     let text = format!("# MHz S RI\n1 0 0 {s21} 0 0 0 0\n2 0 0 {s21} 0 0 0 0\n");
//!     std::fs::write(dir.join(name), text).unwrap();
//! }
//! std::fs::write(dir.join("scan.csv"), "angle_deg,file\n0,a.s2p\n5,b.s2p\n").unwrap();
//! let m = Manifest::read(&dir.join("scan.csv")).unwrap();
//! assert_eq!(m.rows().len(), 2);
//! let scan = m.load(None, Spacing::RequireUniform).unwrap();
//! assert_eq!(scan.grid.points(), 2);
//! assert_eq!(scan.sweeps[1].angle_deg, 5.0);
//! assert_eq!(scan.sweeps[1].values[0].re, 0.25);
//! std::fs::remove_dir_all(&dir).unwrap();
//! ```

use std::fmt;
use std::path::{Path, PathBuf};

use sweepgate::grid::Grid;
use sweepgate::Complex32;

use crate::formats::touchstone::{
    GateSweep, Parameter, Spacing, Touchstone, TouchstoneError, UNIFORM_TOLERANCE_OF_STEP,
};
use crate::limits::MAX_MANIFEST_BYTES;
use crate::quote::clipped;

/// The header line a manifest starts with.
pub const HEADER: &str = "angle_deg,file";
/// The header line of a manifest of several cuts: both axes per file.
pub const HEADER_AXES: &str = "theta_deg,phi_deg,file";

/// Manifest text for `(angle, file)` rows: the header, then one row per sweep, each angle in
/// the shortest form that reads back to the same `f64`, names with a comma or a quote in
/// double quotes (a quote doubled).
pub fn manifest_text(rows: &[(f64, String)]) -> String {
    let mut s = format!("{HEADER}\n");
    for (angle_deg, file) in rows {
        if file.contains([',', '"']) {
            s.push_str(&format!("{angle_deg},\"{}\"\n", file.replace('"', "\"\"")));
        } else {
            s.push_str(&format!("{angle_deg},{file}\n"));
        }
    }
    s
}

/// One row of a manifest.
#[derive(Debug, Clone, PartialEq)]
pub struct ManifestRow {
    /// 1-based line in the manifest.
    pub line: usize,
    /// Turntable angle of the sweep (θ in a manifest of both axes).
    pub angle_deg: f64,
    /// The second axis (φ, the cut) in a manifest of both axes ([`HEADER_AXES`]).
    pub phi_deg: Option<f64>,
    /// The Touchstone file, resolved against the manifest's folder.
    pub file: PathBuf,
}

/// One sweep of a loaded manifest.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct AngleSweep {
    /// Turntable angle.
    pub angle_deg: f64,
    /// The pattern parameter at each point of the common grid.
    pub values: Vec<Complex32>,
    /// The file it came from.
    pub file: PathBuf,
}

/// All sweeps of a manifest on their common grid, in manifest order.
#[derive(Debug, Clone, PartialEq)]
pub struct ManifestScan {
    /// The grid every file shares.
    pub grid: Grid,
    /// One sweep per row.
    pub sweeps: Vec<AngleSweep>,
    /// Warnings (files that were resampled), for the user.
    pub warnings: Vec<String>,
}

/// Why a manifest was refused.
#[derive(Debug, Clone, PartialEq)]
pub enum ManifestErrorKind {
    /// The manifest could not be read.
    Io(String),
    /// The first line is not `angle_deg,file`.
    BadHeader(String),
    /// A row without a comma.
    MissingFileField,
    /// A row whose file field is empty.
    EmptyFileName,
    /// A quoted file field without its closing quote.
    UnclosedQuote,
    /// An angle that is not a number.
    BadAngle(String),
    /// An angle that is infinite or not a number.
    NonFiniteAngle(String),
    /// A (θ, φ) pair given on an earlier row too (manifests of both axes).
    DuplicatePair {
        /// θ.
        theta_deg: f64,
        /// φ.
        phi_deg: f64,
        /// Line of the earlier row.
        first_line: usize,
    },
    /// An angle given on an earlier row too.
    DuplicateAngle {
        /// The angle.
        angle_deg: f64,
        /// Line of the earlier row.
        first_line: usize,
    },
    /// A file that does not exist.
    MissingFile(PathBuf),
    /// A folder where a file was expected.
    FileIsAFolder(PathBuf),
    /// Something other than a regular file or a folder: a device, a pipe, a socket.
    NotARegularFile(PathBuf),
    /// A header and nothing else.
    NoRows,
    /// A file of the manifest was refused.
    Touchstone(Box<TouchstoneError>),
    /// A file whose grid differs from the first file's.
    DifferentGrid(Box<GridMismatch>),
}

/// Two files of one manifest on different grids.
#[derive(Debug, Clone, PartialEq)]
pub struct GridMismatch {
    /// This file.
    pub file: PathBuf,
    /// Its grid: first frequency, step and point count.
    pub grid: (f64, f64, usize),
    /// The first file.
    pub first_file: PathBuf,
    /// The first file's grid.
    pub first_grid: (f64, f64, usize),
}

impl fmt::Display for ManifestErrorKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Self::Io(e) => write!(f, "cannot read: {e}"),
            Self::BadHeader(h) => write!(
                f,
                "header is `{}`, expected `{HEADER}` or `{HEADER_AXES}`",
                clipped(h)
            ),
            Self::MissingFileField => write!(f, "expected `angle_deg,file`, found no comma"),
            Self::EmptyFileName => write!(f, "empty file name"),
            Self::UnclosedQuote => write!(f, "file name opens a quote it does not close"),
            Self::BadAngle(s) => write!(f, "angle `{}` is not a number", clipped(s)),
            Self::NonFiniteAngle(s) => write!(f, "angle `{}` is not a finite number", clipped(s)),
            Self::DuplicateAngle {
                angle_deg,
                first_line,
            } => write!(f, "angle {angle_deg}° already given on line {first_line}"),
            Self::DuplicatePair {
                theta_deg,
                phi_deg,
                first_line,
            } => write!(
                f,
                "θ {theta_deg}°, φ {phi_deg}° already given on line {first_line}"
            ),
            Self::MissingFile(p) => write!(f, "file {} does not exist", p.display()),
            Self::FileIsAFolder(p) => write!(f, "{} is a folder, not a file", p.display()),
            Self::NotARegularFile(p) => write!(
                f,
                "{} is not a regular file (a device, a pipe or a socket); it was not read",
                p.display()
            ),
            Self::NoRows => write!(f, "no rows after the header"),
            Self::Touchstone(e) => write!(f, "{e}"),
            Self::DifferentGrid(m) => write!(
                f,
                "{} has a different frequency grid ({} Hz + k·{} Hz, {} points) from {} \
                 ({} Hz + k·{} Hz, {} points)",
                m.file.display(),
                m.grid.0,
                m.grid.1,
                m.grid.2,
                m.first_file.display(),
                m.first_grid.0,
                m.first_grid.1,
                m.first_grid.2
            ),
        }
    }
}

/// A refused manifest: which manifest, which line, and why. Displays as
/// `scan.csv:4: angle 10° already given on line 3`.
#[derive(Debug, Clone, PartialEq)]
pub struct ManifestError {
    /// The manifest, as the caller named it.
    pub file: String,
    /// 1-based line of the manifest, when one row is to blame.
    pub line: Option<usize>,
    /// The cause.
    pub kind: ManifestErrorKind,
}

impl fmt::Display for ManifestError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self.line {
            Some(l) => write!(f, "{}:{}: {}", self.file, l, self.kind),
            None => write!(f, "{}: {}", self.file, self.kind),
        }
    }
}

impl std::error::Error for ManifestError {
    /// None: a Touchstone error is already part of this error's message (it names its
    /// file and line), and as a source it would be printed a second time; it stays
    /// available, typed, in [`ManifestError::kind`].
    fn source(&self) -> Option<&(dyn std::error::Error + 'static)> {
        None
    }
}

/// An angle field: a finite number.
fn parse_angle(angle: &str) -> Result<f64, ManifestErrorKind> {
    let angle = angle.trim();
    let angle_deg: f64 = angle
        .parse()
        .map_err(|_| ManifestErrorKind::BadAngle(angle.to_string()))?;
    if !angle_deg.is_finite() {
        return Err(ManifestErrorKind::NonFiniteAngle(angle.to_string()));
    }
    Ok(angle_deg)
}

/// One row's angles (θ, and φ when `axes`) and file name, as written.
fn parse_row(raw: &str, axes: bool) -> Result<(f64, Option<f64>, String), ManifestErrorKind> {
    let (angle, rest) = raw
        .split_once(',')
        .ok_or(ManifestErrorKind::MissingFileField)?;
    let angle_deg = parse_angle(angle)?;
    let (phi_deg, file) = if axes {
        let (phi, file) = rest
            .split_once(',')
            .ok_or(ManifestErrorKind::MissingFileField)?;
        (Some(parse_angle(phi)?), file)
    } else {
        (None, rest)
    };
    let file = unquote(file.trim())?;
    if file.is_empty() {
        return Err(ManifestErrorKind::EmptyFileName);
    }
    Ok((angle_deg, phi_deg, file))
}

/// Whether a header line is [`HEADER_AXES`] (`Some(true)`) or [`HEADER`] (`Some(false)`),
/// spaces around the names allowed; `None` for anything else.
fn header_axes(line: &str) -> Option<bool> {
    let names: Vec<&str> = line.split(',').map(str::trim).collect();
    match names[..] {
        ["theta_deg", "phi_deg", "file"] => Some(true),
        ["angle_deg", "file"] => Some(false),
        _ => None,
    }
}

/// The error of a row whose angles an earlier row (on `first_line`) gave.
fn duplicate(angle_deg: f64, phi_deg: Option<f64>, first_line: usize) -> ManifestErrorKind {
    match phi_deg {
        Some(phi_deg) => ManifestErrorKind::DuplicatePair {
            theta_deg: angle_deg,
            phi_deg,
            first_line,
        },
        None => ManifestErrorKind::DuplicateAngle {
            angle_deg,
            first_line,
        },
    }
}

/// The manifest's text, refused unread when the file is over [`MAX_MANIFEST_BYTES`] (and
/// read no further than that if it grows meanwhile).
fn read_text(path: &Path) -> Result<String, ManifestErrorKind> {
    use std::io::Read;
    let io = |e: std::io::Error| ManifestErrorKind::Io(e.to_string());
    let too_large = || {
        ManifestErrorKind::Io(format!(
            "over the {} MiB limit for a manifest; it was not read",
            MAX_MANIFEST_BYTES >> 20
        ))
    };
    let file = std::fs::File::open(path).map_err(io)?;
    if file.metadata().map_err(io)?.len() > MAX_MANIFEST_BYTES {
        return Err(too_large());
    }
    let mut text = String::new();
    file.take(MAX_MANIFEST_BYTES + 1)
        .read_to_string(&mut text)
        .map_err(io)?;
    if text.len() as u64 > MAX_MANIFEST_BYTES {
        return Err(too_large());
    }
    Ok(text)
}

/// Bytes of a manifest's start [`Manifest::peek_axes`] reads at most.
const PEEK_BYTES: usize = 64 << 10;

/// The key a row's angles are told apart by (−0 counted as 0).
fn angle_key(a: f64) -> u64 {
    if a == 0.0 {
        0
    } else {
        a.to_bits()
    }
}

/// A parsed manifest.
#[derive(Debug, Clone, PartialEq)]
pub struct Manifest {
    name: String,
    rows: Vec<ManifestRow>,
}

/// When a row's file is looked for: as the manifest is read, or by the threads that read
/// the files ([`Manifest::read_and_load_on`]).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Look {
    Now,
    Later,
}

/// Whether `path` is a file: the kind of error a manifest row gets when it is not.
fn look_at(path: &Path) -> Result<(), ManifestErrorKind> {
    // One look at the file system per row (`is_dir` and `is_file` would make two).
    let meta = match std::fs::metadata(path) {
        Ok(meta) => meta,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
            return Err(ManifestErrorKind::MissingFile(path.to_path_buf()));
        }
        // Not "missing": the system could not look (a path through a file, no permission).
        Err(e) => return Err(ManifestErrorKind::Io(format!("{}: {e}", path.display()))),
    };
    if meta.is_dir() {
        return Err(ManifestErrorKind::FileIsAFolder(path.to_path_buf()));
    }
    if !meta.is_file() {
        return Err(ManifestErrorKind::NotARegularFile(path.to_path_buf()));
    }
    Ok(())
}

/// Why one row's file gave no sweep.
enum RowFailed {
    /// Not a file ([`look_at`]).
    Look(ManifestErrorKind),
    /// Refused by the Touchstone reader.
    Read(TouchstoneError),
}

impl Manifest {
    /// Reads a manifest; every file it names must exist.
    pub fn read(path: &Path) -> Result<Self, ManifestError> {
        Self::read_looking(path, Look::Now)
    }

    /// [`Manifest::read`] then [`Manifest::load_on`], the files looked for by the threads
    /// that read them instead of one by one before: the same manifest, sweeps, warnings and
    /// first error (a row error or a missing file in the manifest's order, before any
    /// file's Touchstone error).
    pub fn read_and_load_on(
        path: &Path,
        parameter: Option<Parameter>,
        spacing: Spacing,
        threads: usize,
    ) -> Result<(Self, ManifestScan), ManifestError> {
        let m = Self::read_looking(path, Look::Later)?;
        let scan = m.load_looking(parameter, spacing, threads, Look::Later)?;
        Ok((m, scan))
    }

    fn read_looking(path: &Path, look: Look) -> Result<Self, ManifestError> {
        let name = path.display().to_string();
        let text = read_text(path).map_err(|kind| ManifestError {
            file: name.clone(),
            line: None,
            kind,
        })?;
        let base = path.parent().unwrap_or(Path::new(""));
        Self::parse_looking(&text, &name, base, look)
    }

    /// Parses manifest text named `name` (for errors), resolving files against `base`;
    /// every file must exist.
    pub fn parse_str(text: &str, name: &str, base: &Path) -> Result<Self, ManifestError> {
        Self::parse_looking(text, name, base, Look::Now)
    }

    /// [`Manifest::parse_str`], the files looked for now or later; with `Look::Later` a
    /// row's error is preceded by a missing file on an earlier row, as with `Look::Now`.
    fn parse_looking(
        text: &str,
        name: &str,
        base: &Path,
        look: Look,
    ) -> Result<Self, ManifestError> {
        let err = |line: Option<usize>, kind| ManifestError {
            file: name.to_string(),
            line,
            kind,
        };
        let text = text.strip_prefix('\u{feff}').unwrap_or(text);
        let mut lines = text.lines().enumerate().map(|(i, l)| (i + 1, l));
        let header = lines
            .by_ref()
            .find(|(_, l)| !l.trim().is_empty())
            .ok_or_else(|| err(None, ManifestErrorKind::NoRows))?;
        let Some(axes) = header_axes(header.1) else {
            return Err(err(
                Some(header.0),
                ManifestErrorKind::BadHeader(header.1.trim().to_string()),
            ));
        };
        let mut rows: Vec<ManifestRow> = Vec::new();
        let mut seen: std::collections::HashMap<(u64, u64), usize> =
            std::collections::HashMap::new();
        // With the looks left for later, a row's error yields to an earlier missing file.
        let earlier = |rows: &[ManifestRow], line: usize, kind: ManifestErrorKind| {
            let missing = (look == Look::Later)
                .then(|| {
                    rows.iter()
                        .find_map(|r| Some((r.line, look_at(&r.file).err()?)))
                })
                .flatten();
            match missing {
                Some((l, k)) => err(Some(l), k),
                None => err(Some(line), kind),
            }
        };
        for (line, raw) in lines {
            if raw.trim().is_empty() {
                continue;
            }
            let at = Some(line);
            let (angle_deg, phi_deg, file) =
                parse_row(raw, axes).map_err(|k| earlier(&rows, line, k))?;
            // One look-up per row (a hash of the angles' bits, −0 counted as 0), so a
            // manifest of a million rows is read in linear time.
            let key = (angle_key(angle_deg), phi_deg.map_or(0, angle_key));
            if let Some(&first_line) = seen.get(&key) {
                let kind = duplicate(angle_deg, phi_deg, first_line);
                return Err(earlier(&rows, line, kind));
            }
            seen.insert(key, line);
            let path = base.join(&file);
            if look == Look::Now {
                look_at(&path).map_err(|k| err(at, k))?;
            }
            rows.push(ManifestRow {
                line,
                angle_deg,
                phi_deg,
                file: path,
            });
        }
        if rows.is_empty() {
            return Err(err(None, ManifestErrorKind::NoRows));
        }
        Ok(Self {
            name: name.to_string(),
            rows,
        })
    }

    /// The manifest's name as given.
    pub fn name(&self) -> &str {
        &self.name
    }

    /// The rows, in file order.
    pub fn rows(&self) -> &[ManifestRow] {
        &self.rows
    }

    /// Whether the manifest gives both axes per file ([`HEADER_AXES`]).
    pub fn has_axes(&self) -> bool {
        self.rows.first().is_some_and(|r| r.phi_deg.is_some())
    }

    /// Whether the manifest at `path` gives both axes per file, from its header line alone
    /// (no row is read and no file looked for): what [`Manifest::read`] then
    /// [`Manifest::has_axes`] say of a manifest they accept. A manifest whose header is
    /// not found in its first [`PEEK_BYTES`] bytes, or is neither header, is read whole, so
    /// that the error is [`Manifest::read`]'s.
    pub fn peek_axes(path: &Path) -> Result<bool, ManifestError> {
        use std::io::Read;
        let mut head = Vec::with_capacity(PEEK_BYTES);
        let opened = std::fs::File::open(path)
            .and_then(|f| f.take(PEEK_BYTES as u64).read_to_end(&mut head));
        let text = match &opened {
            Ok(_) => String::from_utf8_lossy(&head),
            Err(_) => return Self::read(path).map(|m| m.has_axes()),
        };
        let text = text.strip_prefix('\u{feff}').unwrap_or(&text);
        // A line is whole when a line break follows it, or the file ended within the bytes.
        let whole = head.len() < PEEK_BYTES;
        let mut lines = text.split_inclusive('\n');
        let header = lines.find(|l| !l.trim().is_empty());
        match header
            .filter(|l| whole || l.ends_with('\n'))
            .and_then(header_axes)
        {
            Some(axes) => Ok(axes),
            None => Self::read(path).map(|m| m.has_axes()),
        }
    }

    /// Reads every file and takes `parameter` from each (default: S21 from files of two or
    /// more ports, S11 from 1-port files) on a uniform grid (see
    /// [`Touchstone::to_sweep`]). All files must share one grid: the same point count, and
    /// first frequency and step within [`UNIFORM_TOLERANCE_OF_STEP`] of a step (over the
    /// whole span) of the first file's.
    pub fn load(
        &self,
        parameter: Option<Parameter>,
        spacing: Spacing,
    ) -> Result<ManifestScan, ManifestError> {
        self.load_on(parameter, spacing, crate::threads::available())
    }

    /// [`Manifest::load`] with the files read on up to `threads` threads; the sweeps, the
    /// warnings and the first error (in the manifest's order) are the same for any number.
    pub fn load_on(
        &self,
        parameter: Option<Parameter>,
        spacing: Spacing,
        threads: usize,
    ) -> Result<ManifestScan, ManifestError> {
        self.load_looking(parameter, spacing, threads, Look::Now)
    }

    /// Each row's file read on up to `threads` threads (looked for first, on the same
    /// thread, with `Look::Later`): the Touchstone reader's result per row, or the first
    /// missing file in the manifest's order.
    fn read_files(
        &self,
        parameter: Option<Parameter>,
        spacing: Spacing,
        threads: usize,
        look: Look,
    ) -> Result<Vec<Result<GateSweep, TouchstoneError>>, ManifestError> {
        let read_one = |row: &ManifestRow| {
            if look == Look::Later {
                look_at(&row.file).map_err(RowFailed::Look)?;
            }
            Touchstone::read_sweep(&row.file, parameter, spacing).map_err(RowFailed::Read)
        };
        let read = crate::threads::map_blocks(
            &self.rows,
            threads,
            8,
            || (),
            |_, rows| rows.iter().map(read_one).collect(),
        );
        self.rows
            .iter()
            .zip(read)
            .map(|(row, r)| match r {
                Ok(s) => Ok(Ok(s)),
                Err(RowFailed::Read(e)) => Ok(Err(e)),
                Err(RowFailed::Look(kind)) => Err(ManifestError {
                    file: self.name.clone(),
                    line: Some(row.line),
                    kind,
                }),
            })
            .collect()
    }

    /// [`Manifest::load_on`]; with `Look::Later` each file is looked for before it is
    /// read, on the reading thread, and the first missing file (in the manifest's order)
    /// is the error before any Touchstone error.
    fn load_looking(
        &self,
        parameter: Option<Parameter>,
        spacing: Spacing,
        threads: usize,
        look: Look,
    ) -> Result<ManifestScan, ManifestError> {
        let err = |row: &ManifestRow, kind| ManifestError {
            file: self.name.clone(),
            line: Some(row.line),
            kind,
        };
        let read = self.read_files(parameter, spacing, threads, look)?;
        let mut first: Option<(Grid, &Path)> = None;
        let mut sweeps = Vec::with_capacity(self.rows.len());
        let mut warnings = Vec::new();
        for (row, s) in self.rows.iter().zip(read) {
            let s = s.map_err(|e| err(row, ManifestErrorKind::Touchstone(Box::new(e))))?;
            match first {
                None => first = Some((s.grid, &row.file)),
                Some((g, f)) => {
                    if !same_grid(&g, &s.grid) {
                        let parts = |g: &Grid| (g.start_hz(), g.step_hz(), g.points());
                        return Err(err(
                            row,
                            ManifestErrorKind::DifferentGrid(Box::new(GridMismatch {
                                file: row.file.clone(),
                                grid: parts(&s.grid),
                                first_file: f.to_path_buf(),
                                first_grid: parts(&g),
                            })),
                        ));
                    }
                }
            }
            if let Some(w) = s.warning {
                warnings.push(w);
            }
            sweeps.push(AngleSweep {
                angle_deg: row.angle_deg,
                values: s.values,
                file: row.file.clone(),
            });
        }
        let Some((grid, _)) = first else {
            return Err(ManifestError {
                file: self.name.clone(),
                line: None,
                kind: ManifestErrorKind::NoRows,
            });
        };
        Ok(ManifestScan {
            grid,
            sweeps,
            warnings,
        })
    }
}

pub(crate) fn same_grid(a: &Grid, b: &Grid) -> bool {
    let tol = UNIFORM_TOLERANCE_OF_STEP * a.step_hz();
    a.points() == b.points()
        && (a.start_hz() - b.start_hz()).abs() <= tol
        && (a.step_hz() - b.step_hz()).abs() * (a.points() - 1) as f64 <= tol
}

/// A file field, with surrounding double quotes removed and `""` turned into `"`.
fn unquote(field: &str) -> Result<String, ManifestErrorKind> {
    let Some(inner) = field.strip_prefix('"') else {
        return Ok(field.to_string());
    };
    let Some(inner) = inner.strip_suffix('"') else {
        return Err(ManifestErrorKind::UnclosedQuote);
    };
    Ok(inner.replace("\"\"", "\""))
}

#[cfg(test)]
mod tests {
    use super::*;

    struct Dir(PathBuf);

    impl Dir {
        fn new(tag: &str) -> Self {
            use std::sync::atomic::{AtomicUsize, Ordering};
            static N: AtomicUsize = AtomicUsize::new(0);
            let p = std::env::temp_dir().join(format!(
                "sweepgate-manifest-{tag}-{}-{}",
                std::process::id(),
                N.fetch_add(1, Ordering::Relaxed)
            ));
            std::fs::create_dir_all(&p).unwrap();
            Self(p)
        }
        fn write(&self, name: &str, text: &str) -> PathBuf {
            let p = self.0.join(name);
            if let Some(d) = p.parent() {
                std::fs::create_dir_all(d).unwrap();
            }
            std::fs::write(&p, text).unwrap();
            p
        }
    }

    impl Drop for Dir {
        fn drop(&mut self) {
            let _ = std::fs::remove_dir_all(&self.0);
        }
    }

    fn s2p(start_mhz: f64, step_mhz: f64, n: usize, s21: f64) -> String {
        let mut t = String::from("# MHz S RI R 50\n");
        for k in 0..n {
            let f = start_mhz + step_mhz * k as f64;
            t.push_str(&format!("{f} 0.1 0 {s21} {k} 0 0 0.1 0\n"));
        }
        t
    }

    fn kind_of(d: &Dir, text: &str) -> (Option<usize>, ManifestErrorKind) {
        let m = d.write("m.csv", text);
        let e = Manifest::read(&m).unwrap_err();
        (e.line, e.kind)
    }

    #[test]
    fn a_manifest_over_the_size_limit_is_refused_unread() {
        // A sparse file one byte over the limit: refused from its size, nothing read.
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("huge.csv");
        let f = std::fs::File::create(&p).unwrap();
        f.set_len(MAX_MANIFEST_BYTES + 1).unwrap();
        let e = Manifest::read(&p).unwrap_err();
        let text = e.to_string();
        assert!(text.contains("huge.csv"), "{text}");
        assert!(text.contains("128 MiB limit for a manifest"), "{text}");
        assert!(!text.contains('\n'), "{text}");
    }

    #[test]
    fn reads_rows_relative_to_the_manifest() {
        let d = Dir::new("rows");
        d.write("sub/a.s2p", &s2p(100.0, 1.0, 4, 0.5));
        d.write("sub/b c.s2p", &s2p(100.0, 1.0, 4, 0.25));
        d.write(
            "sub/ro,1.s1p",
            "# MHz S RI\n100 0.1 0\n101 0.1 0\n102 0.1 0\n103 0.1 0\n",
        );
        let m = d.write(
            "scans/../m.csv",
            "\u{feff} angle_deg , file \n-5,sub/a.s2p\n\n 7.5 ,\"sub/b c.s2p\"\n90,sub/ro,1.s1p\n",
        );
        let m = Manifest::read(&m).unwrap();
        let angles: Vec<f64> = m.rows().iter().map(|r| r.angle_deg).collect();
        assert_eq!(angles, vec![-5.0, 7.5, 90.0]);
        assert_eq!(m.rows()[1].line, 4);
        assert!(m.rows()[2].file.ends_with("sub/ro,1.s1p"));
        let scan = m.load(None, Spacing::RequireUniform).unwrap();
        assert_eq!(scan.grid.points(), 4);
        assert_eq!(scan.sweeps.len(), 3);
        // Default parameter: S21 from 2-port files (second pair), S11 from 1-port files.
        assert_eq!(scan.sweeps[0].values[2], Complex32::new(0.5, 2.0));
        assert_eq!(scan.sweeps[1].values[3], Complex32::new(0.25, 3.0));
        assert_eq!(scan.sweeps[2].values[0], Complex32::new(0.1, 0.0));
        assert!(scan.warnings.is_empty());
        let s11 = m
            .load(Some(Parameter::S11), Spacing::RequireUniform)
            .unwrap();
        assert_eq!(s11.sweeps[0].values[0], Complex32::new(0.1, 0.0));
    }

    #[test]
    fn header_errors() {
        let d = Dir::new("header");
        assert_eq!(kind_of(&d, ""), (None, ManifestErrorKind::NoRows));
        assert_eq!(
            kind_of(&d, "angle_deg,file\n\n"),
            (None, ManifestErrorKind::NoRows)
        );
        assert_eq!(
            kind_of(&d, "angle,file\n0,a.s2p\n"),
            (Some(1), ManifestErrorKind::BadHeader("angle,file".into()))
        );
        assert_eq!(
            kind_of(&d, "\nangle_deg,file,extra\n"),
            (
                Some(2),
                ManifestErrorKind::BadHeader("angle_deg,file,extra".into())
            )
        );
    }

    #[test]
    fn row_errors_name_the_line() {
        let d = Dir::new("rowerr");
        d.write("a.s2p", &s2p(100.0, 1.0, 4, 0.5));
        let h = "angle_deg,file\n0,a.s2p\n";
        assert_eq!(
            kind_of(&d, &format!("{h}5\n")),
            (Some(3), ManifestErrorKind::MissingFileField)
        );
        assert_eq!(
            kind_of(&d, &format!("{h}five,a.s2p\n")),
            (Some(3), ManifestErrorKind::BadAngle("five".into()))
        );
        assert_eq!(
            kind_of(&d, &format!("{h}NaN,a.s2p\n")),
            (Some(3), ManifestErrorKind::NonFiniteAngle("NaN".into()))
        );
        assert_eq!(
            kind_of(&d, &format!("{h}5, \n")),
            (Some(3), ManifestErrorKind::EmptyFileName)
        );
        assert_eq!(
            kind_of(&d, &format!("{h}5,\"a.s2p\n")),
            (Some(3), ManifestErrorKind::UnclosedQuote)
        );
        assert_eq!(
            kind_of(&d, &format!("{h}0.0,a.s2p\n")),
            (
                Some(3),
                ManifestErrorKind::DuplicateAngle {
                    angle_deg: 0.0,
                    first_line: 2
                }
            )
        );
        let (line, k) = kind_of(&d, &format!("{h}5,nothere.s2p\n"));
        assert_eq!(line, Some(3));
        assert!(matches!(k, ManifestErrorKind::MissingFile(p) if p.ends_with("nothere.s2p")));
        // A device is not read (reading /dev/zero would never end; a pipe could wait forever).
        #[cfg(unix)]
        {
            let (line, k) = kind_of(&d, &format!("{h}5,/dev/null\n"));
            assert_eq!(line, Some(3));
            assert_eq!(k, ManifestErrorKind::NotARegularFile("/dev/null".into()));
            // A path through a file is not said to be missing: the system's reason is given.
            let (line, k) = kind_of(&d, &format!("{h}5,a.s2p/x.s2p\n"));
            assert_eq!(line, Some(3));
            assert!(
                matches!(&k, ManifestErrorKind::Io(e) if e.contains("a.s2p/x.s2p: Not a directory")),
                "{k:?}"
            );
        }
        let m = d.write("m.csv", &format!("{h}0,a.s2p\n"));
        let e = Manifest::read(&m).unwrap_err();
        assert!(
            e.to_string()
                .ends_with("m.csv:3: angle 0° already given on line 2"),
            "{e}"
        );
    }

    #[test]
    fn different_grids_are_refused() {
        let d = Dir::new("grids");
        d.write("a.s2p", &s2p(100.0, 1.0, 4, 0.5));
        d.write("b.s2p", &s2p(100.0, 1.0, 5, 0.5));
        d.write("c.s2p", &s2p(100.0, 1.1, 4, 0.5));
        d.write("d.s2p", &s2p(100.5, 1.0, 4, 0.5));
        // Within tolerance: 100 Hz on a 1 MHz step.
        d.write("e.s2p", &s2p(100.0001, 1.0, 4, 0.5));
        for f in ["b", "c", "d"] {
            let m = d.write(
                "m.csv",
                &format!("angle_deg,file\n0,a.s2p\n1,e.s2p\n2,{f}.s2p\n"),
            );
            let e = Manifest::read(&m)
                .unwrap()
                .load(None, Spacing::RequireUniform)
                .unwrap_err();
            assert_eq!(e.line, Some(4), "{f}");
            assert!(matches!(e.kind, ManifestErrorKind::DifferentGrid(_)), "{f}");
            assert!(e.to_string().contains("different frequency grid"));
        }
    }

    #[test]
    fn touchstone_errors_pass_through_with_both_lines() {
        let d = Dir::new("ts");
        d.write("a.s2p", &s2p(100.0, 1.0, 4, 0.5));
        d.write("bad.s2p", "# MHz S RI\n100 1 0 0 0 0 0 1\n");
        d.write(
            "gap.s1p",
            "# MHz S RI\n100 1 0\n101 1 0\n103 1 0\n104 1 0\n",
        );
        let m = d.write("m.csv", "angle_deg,file\n0,a.s2p\n10,bad.s2p\n");
        let e = Manifest::read(&m)
            .unwrap()
            .load(None, Spacing::RequireUniform)
            .unwrap_err();
        assert_eq!(e.line, Some(3));
        let text = e.to_string();
        assert!(
            text.contains("m.csv:3: ") && text.contains("bad.s2p:2: expected 9 numbers, found 8"),
            "{text}"
        );
        let m = d.write("m.csv", "angle_deg,file\n0,gap.s1p\n");
        let man = Manifest::read(&m).unwrap();
        let e = man.load(None, Spacing::RequireUniform).unwrap_err();
        assert!(e.to_string().contains("not uniformly spaced"));
        let scan = man.load(None, Spacing::Resample).unwrap();
        assert_eq!(scan.warnings.len(), 1);
    }

    #[test]
    fn written_manifests_read_back_with_the_same_angles_and_files() {
        let d = Dir::new("text");
        let names = ["a.s2p", "b, second.s2p", "c \"q\".s2p"];
        for n in names {
            std::fs::write(d.0.join(n), "x").unwrap();
        }
        let angles = [-0.1, 1.0 / 3.0, 359.75];
        let rows: Vec<(f64, String)> = angles
            .iter()
            .zip(names)
            .map(|(a, n)| (*a, n.to_string()))
            .collect();
        let text = manifest_text(&rows);
        let m = Manifest::parse_str(&text, "m.csv", &d.0).unwrap();
        for ((a, n), r) in angles.iter().zip(names).zip(m.rows()) {
            assert_eq!(r.angle_deg, *a);
            assert_eq!(r.file, d.0.join(n));
        }
    }

    /// `read` then `load_on`, as one result.
    fn both_steps(m: &Path, threads: usize) -> Result<(Manifest, ManifestScan), ManifestError> {
        let man = Manifest::read(m)?;
        let scan = man.load_on(None, Spacing::RequireUniform, threads)?;
        Ok((man, scan))
    }

    #[test]
    fn looking_for_the_files_on_the_reading_threads_changes_nothing() {
        let d = Dir::new("later");
        for (name, s21) in [("a.s2p", 0.5), ("b.s2p", 0.25), ("c.s2p", 0.125)] {
            d.write(name, &s2p(100.0, 1.0, 4, s21));
        }
        d.write("bad.s2p", "# MHz S RI\n100 1 0 0 0 0 0 1\n");
        std::fs::create_dir_all(d.0.join("folder.s2p")).unwrap();
        let h = "angle_deg,file\n";
        // Each case: (manifest text, the line its first error is on, when refused).
        let cases = [
            (format!("{h}0,a.s2p\n5,b.s2p\n10,c.s2p\n"), None),
            // A missing file before a row's error, and after it.
            (
                format!("{h}0,a.s2p\n5,gone.s2p\n10,c.s2p\nten,b.s2p\n"),
                Some(3),
            ),
            (format!("{h}0,a.s2p\nten,b.s2p\n5,gone.s2p\n"), Some(3)),
            (format!("{h}0,a.s2p\n5,gone.s2p\n0,c.s2p\n"), Some(3)),
            (format!("{h}0,a.s2p\n5,folder.s2p\n5,c.s2p\n"), Some(3)),
            // A missing file after a file the Touchstone reader refuses: the missing one.
            (format!("{h}0,bad.s2p\n5,a.s2p\n10,gone.s2p\n"), Some(4)),
            (format!("{h}0,a.s2p\n5,bad.s2p\n10,folder.s2p\n"), Some(4)),
            (format!("{h}0,a.s2p\n5,bad.s2p\n10,b.s2p\n"), Some(3)),
            (format!("{h}\n"), None),
        ];
        for (text, line) in &cases {
            let m = d.write("m.csv", text);
            for threads in [1, 2, 3] {
                let later = Manifest::read_and_load_on(&m, None, Spacing::RequireUniform, threads);
                let now = both_steps(&m, threads);
                assert_eq!(later, now, "{text:?}, {threads} threads");
                if let Some(line) = line {
                    assert_eq!(later.unwrap_err().line, Some(*line), "{text:?}");
                }
            }
        }
        let m = d.write("m.csv", &cases[0].0);
        let (man, scan) = Manifest::read_and_load_on(&m, None, Spacing::RequireUniform, 2).unwrap();
        assert_eq!(man.rows().len(), 3);
        assert_eq!(scan.sweeps[2].values[1], Complex32::new(0.125, 1.0));
    }

    #[test]
    fn the_header_alone_says_whether_a_manifest_has_both_axes() {
        let d = Dir::new("peek");
        d.write("a.s2p", &s2p(100.0, 1.0, 4, 0.5));
        let cases = [
            ("angle_deg,file\n0,a.s2p\n", Ok(false)),
            (
                "\u{feff}\n  \r\n theta_deg , phi_deg,file\r\n0,0,a.s2p\n",
                Ok(true),
            ),
            ("theta_deg,phi_deg,file\n0,0,a.s2p\n", Ok(true)),
            // Rows are not read: a missing file is found later, when the files are read.
            ("angle_deg,file\n0,gone.s2p\n", Ok(false)),
        ];
        for (text, want) in cases {
            let m = d.write("m.csv", text);
            assert_eq!(Manifest::peek_axes(&m), want, "{text:?}");
            if !text.contains("gone") {
                assert_eq!(Manifest::read(&m).map(|m| m.has_axes()), want, "{text:?}");
            }
        }
        // Neither header, no header, or no file: the error of reading it whole.
        for text in ["angle,file\n0,a.s2p\n", "", "\n\n"] {
            let m = d.write("m.csv", text);
            let e = Manifest::peek_axes(&m).unwrap_err();
            assert_eq!(Some(e), Manifest::read(&m).err(), "{text:?}");
        }
        let gone = d.0.join("none.csv");
        assert_eq!(
            Manifest::peek_axes(&gone).err(),
            Manifest::read(&gone).err()
        );
        // A header line longer than the bytes looked at is read whole too.
        let long = format!("angle_deg,file{}\n0,a.s2p\n", " ".repeat(PEEK_BYTES));
        let m = d.write("m.csv", &long);
        assert_eq!(Manifest::peek_axes(&m), Ok(false));
    }
}
