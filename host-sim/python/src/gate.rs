//! `sweepgate.Gate`: the core's [`Gate`] over sweeps held in numpy arrays.
//!
//! A gate is built once from the sweep frequencies and the gate settings (the core validates
//! them, as it does for every command) and then applied to N × K arrays of sweeps: the FFT
//! path (whole gated spectrum and echo level), the kernel path (gated values at chosen grid
//! points) and the windowed impulse response. The FFT path runs on the host's FFT (rustfft,
//! `sweepgate_host::pipeline::transform::HostFft`, as `process` gates; within 1e-5 of the
//! core's microfft); the impulse response on the core's, as the report's impulse view. The
//! rows are split over threads, each with its own scratch buffers and FFT, and the GIL is
//! released while they run.

use anyhow::{anyhow, bail, Context};
use numpy::ndarray::Array2;
use numpy::{IntoPyArray, PyArray1, PyArray2, PyReadonlyArray1, PyReadonlyArray2};
use pyo3::prelude::*;
use sweepgate::fft::Fft;
use sweepgate::gate::{Gate, GateConfig, Kernels};
use sweepgate::grid::Grid;
use sweepgate::window::WindowKind;
use sweepgate::Complex32;
use sweepgate_host::formats::touchstone::UNIFORM_TOLERANCE_OF_STEP;
use sweepgate_host::pipeline::options::DEFAULT_GATE_SHAPE as GATE_SHAPE;
use sweepgate_host::pipeline::options::{default_band_window, format_window, parse_window};
use sweepgate_host::pipeline::transform::fft_size as fft_size_for;
use sweepgate_host::pipeline::transform::HostFft;

use crate::to_py_err;

const ZERO: Complex32 = Complex32::new(0.0, 0.0);

/// FFT sizes the core is built with (`fft-4096`, its default feature set).
pub const FFT_SIZES: [usize; 7] = [64, 128, 256, 512, 1024, 2048, 4096];

/// A gate of any FFT size, working on rows of K points.
trait AnyGate: Send + Sync {
    fn fft_size(&self) -> usize;
    fn config(&self) -> &GateConfig;
    fn gate_window(&self) -> Vec<f32>;
    fn band_window(&self) -> Vec<f32>;
    /// FFT path on each row of `rows`: gated row into `out`, echo level into `echo_db`.
    fn apply_rows(&self, rows: &[Complex32], out: &mut [Complex32], echo_db: &mut [f32]);
    /// Kernel path: the gated value at each of `indices` (all below K) for each row.
    fn kernel_rows(&self, rows: &[Complex32], indices: &[usize], out: &mut [Complex32]);
    /// Windowed, zero-padded impulse response (M samples) of each row.
    fn impulse_rows(&self, rows: &[Complex32], out: &mut [Complex32]);
}

struct SizedGate<const M: usize>(Box<Gate<M>>)
where
    [Complex32; M]: Fft;

impl<const M: usize> SizedGate<M>
where
    [Complex32; M]: Fft,
{
    fn load(&self, row: &[Complex32], buf: &mut [Complex32; M]) {
        buf[..row.len()].copy_from_slice(row);
        buf[row.len()..].fill(ZERO);
    }
}

impl<const M: usize> AnyGate for SizedGate<M>
where
    [Complex32; M]: Fft,
{
    fn fft_size(&self) -> usize {
        M
    }

    fn config(&self) -> &GateConfig {
        self.0.config()
    }

    fn gate_window(&self) -> Vec<f32> {
        self.0.gate_window().to_vec()
    }

    fn band_window(&self) -> Vec<f32> {
        self.0.band_window()[..self.0.points()].to_vec()
    }

    fn apply_rows(&self, rows: &[Complex32], out: &mut [Complex32], echo_db: &mut [f32]) {
        let k = self.0.points();
        let mut raw = Box::new([ZERO; M]);
        let mut gated = Box::new([ZERO; M]);
        // The host's FFT (rustfft, as `process` gates), one per thread.
        let mut fft = HostFft::<M>::new();
        for ((row, o), e) in rows.chunks(k).zip(out.chunks_mut(k)).zip(echo_db) {
            self.load(row, &mut raw);
            *e = self.0.apply_using(&mut fft, &raw, &mut gated);
            o.copy_from_slice(&gated[..k]);
        }
    }

    fn kernel_rows(&self, rows: &[Complex32], indices: &[usize], out: &mut [Complex32]) {
        let k = self.0.points();
        // Indices were checked against K when the call was accepted; an index the core
        // refuses here would give 0, never a wrong value.
        let kernels: Vec<Option<Kernels<M, 1>>> =
            indices.iter().map(|&i| self.0.kernels([i]).ok()).collect();
        // One frequency: the band window on the fly; more: window once, then the dot
        // products (the core's advice, src/gate.rs).
        let prewindow = kernels.len() > 1;
        let mut buf = Box::new([ZERO; M]);
        let mut one = [ZERO; 1];
        for (row, o) in rows.chunks(k).zip(out.chunks_mut(indices.len().max(1))) {
            self.load(row, &mut buf);
            if prewindow {
                self.0.window(&mut buf, 1.0);
            }
            for (v, kern) in o.iter_mut().zip(&kernels) {
                *v = match kern {
                    Some(kern) if prewindow => {
                        self.0.apply_kernels_windowed(kern, &buf, &mut one);
                        one[0]
                    }
                    Some(kern) => {
                        self.0.apply_kernels(kern, &buf, &mut one);
                        one[0]
                    }
                    None => ZERO,
                };
            }
        }
    }

    fn impulse_rows(&self, rows: &[Complex32], out: &mut [Complex32]) {
        let k = self.0.points();
        let mut raw = Box::new([ZERO; M]);
        let mut h = Box::new([ZERO; M]);
        // The core's FFT, as the report's impulse view (`transform::impulse_view`) takes it:
        // `process`'s impulse and this one are the same numbers.
        for (row, o) in rows.chunks(k).zip(out.chunks_mut(M)) {
            self.load(row, &mut raw);
            self.0.impulse_response(&raw, &mut h);
            o.copy_from_slice(&h[..]);
        }
    }
}

fn sized<const M: usize>(cfg: &GateConfig) -> anyhow::Result<Box<dyn AnyGate>>
where
    [Complex32; M]: Fft,
{
    let gate = Gate::<M>::new(cfg).map_err(|e| anyhow!("gate: {e}"))?;
    Ok(Box::new(SizedGate::<M>(Box::new(gate))))
}

fn build(cfg: &GateConfig, fft_size: usize) -> anyhow::Result<Box<dyn AnyGate>> {
    match fft_size {
        64 => sized::<64>(cfg),
        128 => sized::<128>(cfg),
        256 => sized::<256>(cfg),
        512 => sized::<512>(cfg),
        1024 => sized::<1024>(cfg),
        2048 => sized::<2048>(cfg),
        4096 => sized::<4096>(cfg),
        other => bail!(
            "fft_size {other} is not one of {}",
            FFT_SIZES.map(|m| m.to_string()).join(", ")
        ),
    }
}

/// The uniform grid through the first and last of a list of frequencies, refused (naming
/// the farthest point) when a point lies farther from it than the Touchstone reader allows
/// ([`UNIFORM_TOLERANCE_OF_STEP`] of a step).
pub fn grid_from_frequencies(f: &[f64]) -> anyhow::Result<Grid> {
    if let Some((i, v)) = f.iter().enumerate().find(|(_, v)| !v.is_finite()) {
        bail!("frequencies_hz: point {i} is not finite ({v})");
    }
    let (first, last) = match (f.first(), f.last()) {
        (Some(a), Some(b)) if f.len() >= 2 => (*a, *b),
        _ => bail!(
            "frequencies_hz: {} frequencies; a sweep needs at least 2",
            f.len()
        ),
    };
    let grid = Grid::from_start_stop(first, last, f.len())
        .map_err(|e| anyhow!("frequencies_hz: not a usable grid: {e}"))?;
    let tolerance_hz = UNIFORM_TOLERANCE_OF_STEP * grid.step_hz();
    let (mut worst, mut worst_off) = (0usize, 0.0f64);
    for (i, &v) in f.iter().enumerate() {
        let off = (v - grid.frequency_hz(i)).abs();
        if off > worst_off {
            (worst, worst_off) = (i, off);
        }
    }
    if worst_off > tolerance_hz {
        bail!(
            "frequencies_hz: not evenly spaced: point {worst} ({} Hz) is {worst_off} Hz off the even grid of step {} Hz (tolerance {tolerance_hz} Hz)",
            f[worst],
            grid.step_hz()
        );
    }
    Ok(grid)
}

/// A window from its command-line spelling, or `default` when none is given.
fn window(text: Option<&str>, what: &str, default: WindowKind) -> anyhow::Result<WindowKind> {
    match text {
        Some(t) => parse_window(t).map_err(|e| anyhow!("{what}: {e}")),
        None => Ok(default),
    }
}

/// Sweeps as a row-major copy, K points per row, every value finite.
pub fn rows_of(
    sweeps: &PyReadonlyArray2<'_, Complex32>,
    k: usize,
) -> anyhow::Result<Vec<Complex32>> {
    let a = sweeps.as_array();
    let (n, cols) = a.dim();
    if cols != k {
        bail!("sweeps: {n} × {cols} array, but frequencies_hz has {k} points: each row must be one sweep of {k} points");
    }
    let rows: Vec<Complex32> = a.iter().copied().collect();
    if let Some(at) = rows
        .iter()
        .position(|z| !(z.re.is_finite() && z.im.is_finite()))
    {
        bail!(
            "sweeps: row {}, point {} is not finite ({}{:+}j)",
            at / k,
            at % k,
            rows[at].re,
            rows[at].im
        );
    }
    Ok(rows)
}

/// Runs `f` on contiguous blocks of rows on up to `threads` threads. `f` gets the block's
/// input rows (`in_width` values each), its output rows (`out_width` values each) and its
/// slice of `per_row`.
fn split_rows<F>(
    threads: usize,
    input: &[Complex32],
    in_width: usize,
    out: &mut [Complex32],
    out_width: usize,
    per_row: &mut [f32],
    f: F,
) where
    F: Fn(&[Complex32], &mut [Complex32], &mut [f32]) + Sync,
{
    let n = per_row.len();
    let threads = threads.clamp(1, n.max(1));
    if threads == 1 {
        f(input, out, per_row);
        return;
    }
    let per = n.div_ceil(threads);
    std::thread::scope(|s| {
        let blocks = input
            .chunks(per * in_width)
            .zip(out.chunks_mut((per * out_width).max(1)))
            .zip(per_row.chunks_mut(per));
        for ((i, o), e) in blocks {
            let f = &f;
            s.spawn(move || f(i, o, e));
        }
    });
}

fn threads_or_all(threads: Option<usize>) -> anyhow::Result<usize> {
    match threads {
        Some(0) => bail!("threads: 0; give at least 1 (or None for every core)"),
        Some(t) => Ok(t),
        None => Ok(std::thread::available_parallelism().map_or(1, |n| n.get())),
    }
}

/// Gated sweeps (N × K) and their echo levels (N).
type Applied<'py> = (Bound<'py, PyArray2<Complex32>>, Bound<'py, PyArray1<f32>>);

/// A time gate, validated once by the core, applied to N × K arrays of sweeps.
///
/// Built from the K sweep frequencies (evenly spaced, Hz), the gate centre and span
/// (seconds from the VNA's time zero), the band window and gate shape in the command
/// line's spellings (`kaiser:B`, `kaiser-sidelobe:DB`, `tukey:A`, `hann`, `hamming`,
/// `blackman-harris`, `rectangular`; defaults as the commands: Kaiser for 50 dB sidelobes and
/// `tukey:0.3`), edge renormalization, and the FFT size (default: the smallest of 1024, 2048,
/// 4096 that holds K, as the commands choose).
#[pyclass(frozen, name = "Gate", module = "sweepgate._native")]
pub struct PyGate {
    inner: Box<dyn AnyGate>,
}

impl PyGate {
    fn checked_rows(&self, sweeps: &PyReadonlyArray2<'_, Complex32>) -> PyResult<Vec<Complex32>> {
        rows_of(sweeps, self.inner.config().grid.points()).map_err(to_py_err)
    }
}

#[pymethods]
impl PyGate {
    #[new]
    #[allow(clippy::too_many_arguments)]
    #[pyo3(signature = (frequencies_hz, *, center_s, span_s, band_window=None, shape=None, renormalize=true, fft_size=None))]
    fn new(
        py: Python<'_>,
        frequencies_hz: PyReadonlyArray1<'_, f64>,
        center_s: f64,
        span_s: f64,
        band_window: Option<&str>,
        shape: Option<&str>,
        renormalize: bool,
        fft_size: Option<usize>,
    ) -> PyResult<Self> {
        let f: Vec<f64> = frequencies_hz.as_array().iter().copied().collect();
        let build_gate = || -> anyhow::Result<Box<dyn AnyGate>> {
            let grid = grid_from_frequencies(&f)?;
            let cfg = GateConfig {
                grid,
                band_window: window(band_window, "band_window", default_band_window())?,
                center_s,
                span_s,
                shape: window(shape, "shape", GATE_SHAPE)?,
                renormalize,
            };
            let m = match fft_size {
                Some(m) => m,
                None => fft_size_for(grid.points())?.points(),
            };
            build(&cfg, m)
        };
        let inner = py.detach(build_gate).map_err(to_py_err)?;
        Ok(Self { inner })
    }

    /// FFT path on every row: returns the gated sweeps (N × K, complex64, renormalized if
    /// the gate is) and each row's echo level in dB (energy outside the gate span over the
    /// total energy of the impulse response).
    #[pyo3(signature = (sweeps, *, threads=None))]
    fn apply<'py>(
        &self,
        py: Python<'py>,
        sweeps: PyReadonlyArray2<'py, Complex32>,
        threads: Option<usize>,
    ) -> PyResult<Applied<'py>> {
        let rows = self.checked_rows(&sweeps)?;
        let threads = threads_or_all(threads).map_err(to_py_err)?;
        let k = self.inner.config().grid.points();
        let n = rows.len() / k;
        let gate = &*self.inner;
        let (out, echo) = py.detach(|| {
            let mut out = vec![ZERO; n * k];
            let mut echo = vec![0.0f32; n];
            split_rows(threads, &rows, k, &mut out, k, &mut echo, |i, o, e| {
                gate.apply_rows(i, o, e)
            });
            (out, echo)
        });
        Ok((array2(py, n, k, out)?, echo.into_pyarray(py)))
    }

    /// Kernel path on every row: the gated value at each grid index in `indices` (each
    /// below K), one K-point dot product each (N × len(indices), complex64). Equals the FFT
    /// path at those points to about 1e-4 of the largest value.
    #[pyo3(signature = (sweeps, indices, *, threads=None))]
    fn apply_at<'py>(
        &self,
        py: Python<'py>,
        sweeps: PyReadonlyArray2<'py, Complex32>,
        indices: Vec<usize>,
        threads: Option<usize>,
    ) -> PyResult<Bound<'py, PyArray2<Complex32>>> {
        let k = self.inner.config().grid.points();
        if let Some(bad) = indices.iter().find(|&&i| i >= k) {
            return Err(to_py_err(anyhow!(
                "indices: grid index {bad} is not below the sweep's {k} points"
            )));
        }
        let rows = self.checked_rows(&sweeps)?;
        let threads = threads_or_all(threads).map_err(to_py_err)?;
        let n = rows.len() / k;
        let fcount = indices.len();
        let gate = &*self.inner;
        let out = py.detach(|| {
            let mut out = vec![ZERO; n * fcount];
            let mut unused = vec![0.0f32; n];
            split_rows(
                threads,
                &rows,
                k,
                &mut out,
                fcount,
                &mut unused,
                |i, o, _| gate.kernel_rows(i, &indices, o),
            );
            out
        });
        array2(py, n, fcount, out)
    }

    /// The windowed, zero-padded impulse response of every row (N × M, complex64); sample m
    /// lies at `time_s[m]`.
    #[pyo3(signature = (sweeps, *, threads=None))]
    fn impulse_response<'py>(
        &self,
        py: Python<'py>,
        sweeps: PyReadonlyArray2<'py, Complex32>,
        threads: Option<usize>,
    ) -> PyResult<Bound<'py, PyArray2<Complex32>>> {
        let rows = self.checked_rows(&sweeps)?;
        let threads = threads_or_all(threads).map_err(to_py_err)?;
        let k = self.inner.config().grid.points();
        let m = self.inner.fft_size();
        let n = rows.len() / k;
        let gate = &*self.inner;
        let out = py.detach(|| {
            let mut out = vec![ZERO; n * m];
            let mut unused = vec![0.0f32; n];
            split_rows(threads, &rows, k, &mut out, m, &mut unused, |i, o, _| {
                gate.impulse_rows(i, o)
            });
            out
        });
        array2(py, n, m, out)
    }

    /// The grid index nearest `frequency_hz` (refused beyond half a step outside the grid).
    fn nearest_index(&self, frequency_hz: f64) -> PyResult<usize> {
        let g = self.inner.config().grid;
        g.nearest_index(frequency_hz)
            .with_context(|| {
                format!(
                    "frequency {frequency_hz} Hz is not on or near the grid ({} Hz to {} Hz)",
                    g.start_hz(),
                    g.stop_hz()
                )
            })
            .map_err(to_py_err)
    }

    /// FFT size M.
    #[getter]
    fn fft_size(&self) -> usize {
        self.inner.fft_size()
    }

    /// Points per sweep, K.
    #[getter]
    fn points(&self) -> usize {
        self.inner.config().grid.points()
    }

    /// Gate centre, s.
    #[getter]
    fn center_s(&self) -> f64 {
        self.inner.config().center_s
    }

    /// Gate span (full width), s.
    #[getter]
    fn span_s(&self) -> f64 {
        self.inner.config().span_s
    }

    /// The band window's spelling (reads back to the same window).
    #[getter]
    fn band_window(&self) -> String {
        format_window(&self.inner.config().band_window)
    }

    /// The gate shape's spelling.
    #[getter]
    fn shape(&self) -> String {
        format_window(&self.inner.config().shape)
    }

    /// Whether the gated spectrum is renormalized at the band edges.
    #[getter]
    fn renormalize(&self) -> bool {
        self.inner.config().renormalize
    }

    /// The grid's frequencies, Hz (K).
    #[getter]
    fn frequencies_hz<'py>(&self, py: Python<'py>) -> Bound<'py, PyArray1<f64>> {
        let g = self.inner.config().grid;
        (0..g.points())
            .map(|i| g.frequency_hz(i))
            .collect::<Vec<_>>()
            .into_pyarray(py)
    }

    /// Time of each impulse-response sample, s (M): m/(M·Δf).
    #[getter]
    fn time_s<'py>(&self, py: Python<'py>) -> Bound<'py, PyArray1<f64>> {
        let g = self.inner.config().grid;
        let m = self.inner.fft_size();
        (0..m)
            .map(|i| g.time_s(m, i))
            .collect::<Vec<_>>()
            .into_pyarray(py)
    }

    /// The time gate at each impulse-response sample (M, 0…1).
    #[getter]
    fn gate_window<'py>(&self, py: Python<'py>) -> Bound<'py, PyArray1<f32>> {
        self.inner.gate_window().into_pyarray(py)
    }

    /// The band window over the K swept points.
    #[getter]
    fn band_window_values<'py>(&self, py: Python<'py>) -> Bound<'py, PyArray1<f32>> {
        self.inner.band_window().into_pyarray(py)
    }

    /// Alias-free range 1/Δf, s.
    #[getter]
    fn alias_free_s(&self) -> f64 {
        self.inner.config().grid.alias_free_s()
    }

    /// Time step of the impulse response 1/(M·Δf), s.
    #[getter]
    fn time_step_s(&self) -> f64 {
        self.inner.config().grid.time_step_s(self.inner.fft_size())
    }

    fn __repr__(&self) -> String {
        let c = self.inner.config();
        format!(
            "Gate(points={}, start_hz={}, step_hz={}, center_s={:e}, span_s={:e}, band_window='{}', shape='{}', renormalize={}, fft_size={})",
            c.grid.points(),
            c.grid.start_hz(),
            c.grid.step_hz(),
            c.center_s,
            c.span_s,
            format_window(&c.band_window),
            format_window(&c.shape),
            if c.renormalize { "True" } else { "False" },
            self.inner.fft_size()
        )
    }
}

fn array2<T: numpy::Element>(
    py: Python<'_>,
    rows: usize,
    cols: usize,
    values: Vec<T>,
) -> PyResult<Bound<'_, PyArray2<T>>> {
    let a = Array2::from_shape_vec((rows, cols), values)
        .map_err(|e| to_py_err(anyhow!("shaping the result: {e}")))?;
    Ok(a.into_pyarray(py))
}

/// Checks a window spelling as the command line does and returns its canonical spelling.
#[pyfunction]
fn parse_window_spelling(text: &str) -> PyResult<String> {
    parse_window(text)
        .map(|w| format_window(&w))
        .map_err(|e| to_py_err(anyhow!(e)))
}

/// The default band window and gate shape of every command, spelled.
#[pyfunction]
fn default_windows() -> (String, String) {
    (
        format_window(&default_band_window()),
        format_window(&GATE_SHAPE),
    )
}

pub fn register(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_class::<PyGate>()?;
    m.add_function(wrap_pyfunction!(parse_window_spelling, m)?)?;
    m.add_function(wrap_pyfunction!(default_windows, m)?)?;
    m.add("FFT_SIZES", FFT_SIZES.to_vec())?;
    Ok(())
}
