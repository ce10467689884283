//! The scan engine on the host, at any of its FFT sizes.
//!
//! - [`Engine`]: the core's [`Scan`] built from a [`Setup`], fed in the order a board sees
//!   its inputs: angle samples at once, and each sweep held until the positioner has
//!   reported at or past the sweep's end, so that the sweep's angle is interpolated rather
//!   than extrapolated. `replay`, `process` and the live engine of `acquire` all feed the
//!   same records through it, so they close the same bins with the same values. It keeps
//!   the closed bins for the report, counts warnings by their wording
//!   ([`warning_text`]), and sums the raw sweeps of the bin at 0° for the impulse view.
//!   Asked to ([`Engine::keep_bands`]), it also keeps every bin's whole band for the
//!   exports: the bin's sweeps summed as the core sums them, gated with the engine's own
//!   gate as the core gates a closed bin, so the values at the pattern frequencies are the
//!   bin's values bit for bit.

use std::collections::{BTreeMap, VecDeque};

use anyhow::Context;
use sweepgate::bins::BinLayout;
use sweepgate::fft::Fft;
use sweepgate::gate::{Gate, GateConfig};
use sweepgate::scan::{BinResult, Event, Events, Scan, ScanCounters, Warning};
use sweepgate::wire::preview::{ImpulseRecord, StatusRecord};
use sweepgate::Complex32;

use crate::limits::{MAX_BINS, MAX_FREQUENCIES};
use crate::output::export::{BandRow, Bands};
use crate::output::report::{ImpulseView, ReportBin, ReportValue};
use crate::pipeline::setup::Setup;
use crate::pipeline::transform::{self, c64, impulse_view, FftJob, HostFft};

/// A closed bin as a report bin (truth not yet known).
pub fn report_bin<const F: usize>(r: &BinResult<F>, frequencies: usize) -> ReportBin {
    let values = (0..frequencies.min(F))
        .map(|j| ReportValue {
            raw: c64(r.raw[j]),
            gated: c64(r.gated[j]),
            truth: None,
            angle_offset_deg: f64::from(r.angle_offset_deg[j]),
        })
        .collect();
    ReportBin {
        angle_deg: f64::from(r.nominal_deg),
        mean_deg: f64::from(r.mean_deg),
        sweeps: r.sweeps,
        flags: r.flags.0,
        echo_db: r.echo_db.map(f64::from),
        values,
    }
}

/// An engine warning in words, as every command prints and writes it.
pub fn warning_text(w: &Warning) -> String {
    match w {
        Warning::SweepRejected(r) => format!("sweep refused: {r}"),
        Warning::AngleRejected(r) => format!("angle sample refused: {r}"),
        Warning::TakenWhileMoving => "sweep taken while moving".into(),
        Warning::Extrapolated => "sweep angle extrapolated".into(),
        Warning::TrackerResynced => "tracker resynchronised".into(),
        Warning::Stalled => "positioner stalled".into(),
    }
}

/// Sweeps gated one by one on the FFT path (window, inverse FFT, time gate, FFT,
/// renormalization), as the engine gates a bin holding one sweep.
#[derive(Debug, Clone)]
pub struct GatedSweeps {
    /// Each sweep's gated spectrum at its K grid points.
    pub spectra: Vec<Vec<Complex32>>,
    /// Each sweep's echo level (energy outside the gate), dB.
    pub echo_db: Vec<f32>,
    /// The impulse view of the sweep asked for.
    pub impulse: Option<ImpulseView>,
}

/// Gates `sweeps` with `cfg` at the FFT size of its grid on every core; with `impulse_of` =
/// (index, angle), also the impulse view of that sweep. See [`gate_sweeps_on`].
pub fn gate_sweeps(
    cfg: &GateConfig,
    sweeps: &[&[Complex32]],
    impulse_of: Option<(usize, f64)>,
) -> anyhow::Result<GatedSweeps> {
    gate_sweeps_on(cfg, sweeps, impulse_of, crate::threads::available())
}

/// Sweeps a thread gates in one batch ([`Gate::apply_many_using`]).
const BATCH: usize = 16;

/// [`gate_sweeps`] on up to `threads` threads, each gating batches of [`BATCH`] sweeps with
/// its own [`HostFft`]. Every sweep is gated alone whatever the batch it falls in, so the
/// results are the same bit for bit for any number of threads.
pub fn gate_sweeps_on(
    cfg: &GateConfig,
    sweeps: &[&[Complex32]],
    impulse_of: Option<(usize, f64)>,
    threads: usize,
) -> anyhow::Result<GatedSweeps> {
    transform::run(
        transform::fft_size(cfg.grid.points())?,
        GateEach {
            cfg,
            sweeps,
            impulse_of,
            threads,
        },
    )
}

struct GateEach<'a> {
    cfg: &'a GateConfig,
    sweeps: &'a [&'a [Complex32]],
    impulse_of: Option<(usize, f64)>,
    threads: usize,
}

impl FftJob for GateEach<'_> {
    type Output = anyhow::Result<GatedSweeps>;
    fn run<const M: usize>(self) -> Self::Output
    where
        [Complex32; M]: Fft,
    {
        let gate = Box::new(Gate::<M>::new(self.cfg).context("gate")?);
        let k = self.cfg.grid.points().min(M);
        let zero = Complex32::new(0.0, 0.0);
        let init = || (HostFft::<M>::new(), vec![[zero; M]; BATCH]);
        let gated = crate::threads::map_blocks(
            self.sweeps,
            self.threads,
            BATCH,
            init,
            |(fft, bufs), block| {
                let bufs = &mut bufs[..block.len()];
                for (b, s) in bufs.iter_mut().zip(block) {
                    b.fill(zero);
                    for (d, v) in b.iter_mut().zip(s.iter()) {
                        *d = *v;
                    }
                }
                let mut echo_db = [0.0f32; BATCH];
                gate.apply_many_using(fft, bufs, &mut echo_db);
                bufs.iter()
                    .zip(echo_db)
                    .map(|(b, e)| (b[..k].to_vec(), e))
                    .collect()
            },
        );
        let (spectra, echo_db) = gated.into_iter().unzip();
        let mut g = GatedSweeps {
            spectra,
            echo_db,
            impulse: None,
        };
        if let Some((i, angle_deg)) = self.impulse_of {
            if let Some(s) = self.sweeps.get(i) {
                g.impulse = Some(impulse_view(&gate, s, angle_deg, 1));
            }
        }
        Ok(g)
    }
}

/// The engine the host runs.
type HostScan<const M: usize> = Scan<M, MAX_FREQUENCIES, MAX_BINS>;

/// The scan engine with its FFT size out of the type.
trait AnyScan {
    fn push_angle(&mut self, t_us: u64, angle_deg: f32) -> Events<MAX_FREQUENCIES>;
    fn push_sweep(
        &mut self,
        start_us: u64,
        end_us: u64,
        s21: &[Complex32],
    ) -> Events<MAX_FREQUENCIES>;
    fn finish(&mut self) -> Events<MAX_FREQUENCIES>;
    fn status(&self) -> StatusRecord;
    fn counters(&self) -> ScanCounters;
    fn angle_at(&self, t_us: u64) -> Option<f32>;
    fn impulse(&self, sweep: &[Complex32], angle_deg: f64, sweeps: u32) -> ImpulseView;
    fn gate_band(&self, sum: &[Complex32], inv_count: f32) -> Vec<Complex32>;
    fn take_impulse(&mut self) -> Option<ImpulseRecord>;
}

impl<const M: usize> AnyScan for HostScan<M>
where
    [Complex32; M]: Fft,
{
    fn push_angle(&mut self, t_us: u64, angle_deg: f32) -> Events<MAX_FREQUENCIES> {
        Scan::push_angle(self, t_us, angle_deg)
    }
    fn push_sweep(
        &mut self,
        start_us: u64,
        end_us: u64,
        s21: &[Complex32],
    ) -> Events<MAX_FREQUENCIES> {
        Scan::push_sweep(self, start_us, end_us, s21)
    }
    fn finish(&mut self) -> Events<MAX_FREQUENCIES> {
        Scan::finish(self)
    }
    fn status(&self) -> StatusRecord {
        Scan::status(self)
    }
    fn counters(&self) -> ScanCounters {
        Scan::counters(self)
    }
    fn angle_at(&self, t_us: u64) -> Option<f32> {
        self.tracker().angle_at(t_us).ok().map(|a| a.angle_deg)
    }
    fn impulse(&self, sweep: &[Complex32], angle_deg: f64, sweeps: u32) -> ImpulseView {
        impulse_view(self.gate(), sweep, angle_deg, sweeps)
    }
    fn gate_band(&self, sum: &[Complex32], inv_count: f32) -> Vec<Complex32> {
        // As the core gates a closed bin with its echo level: the M-point sum, in place.
        let mut buf: Box<[Complex32; M]> = Box::new([Complex32::new(0.0, 0.0); M]);
        for (b, v) in buf.iter_mut().zip(sum) {
            *b = *v;
        }
        self.gate().apply_in_place(&mut buf, inv_count);
        buf[..sum.len().min(M)].to_vec()
    }
    fn take_impulse(&mut self) -> Option<ImpulseRecord> {
        Scan::take_impulse(self).cloned()
    }
}

/// Impulse-response records waiting to be sent; older ones are dropped past this many.
const MAX_PENDING_IMPULSES: usize = 256;

/// Builds the engine of a set-up at its FFT size.
struct Build<'a>(&'a Setup);

impl FftJob for Build<'_> {
    type Output = anyhow::Result<Box<dyn AnyScan>>;
    fn run<const M: usize>(self) -> Self::Output
    where
        [Complex32; M]: Fft,
    {
        let s = self.0;
        let first = s.indices.first().copied().unwrap_or(0);
        let mut idx = [first; MAX_FREQUENCIES];
        for (slot, &i) in idx.iter_mut().zip(&s.indices) {
            *slot = i;
        }
        let scan = HostScan::<M>::new(&s.gate, idx, s.scan_config()).context("scan engine")?;
        Ok(Box::new(scan))
    }
}

/// A sweep waiting for the positioner to pass its end.
struct Waiting {
    start_us: u64,
    end_us: u64,
    s21: Vec<Complex32>,
}

/// The raw sweeps of the bin at 0°, summed until that bin closes.
struct Boresight {
    bin: Option<u16>,
    sum: Vec<Complex32>,
    sweeps: u32,
    done: bool,
}

/// The whole band of every bin, kept for the exports: the open bin's sum of sweeps and the
/// closed bins' rows (a revisited bin holds its latest result, as the report does).
struct BandKeeper {
    open: Option<(u16, Vec<Complex32>, u32)>,
    closed: BTreeMap<u16, BandRow>,
}

/// The core's scan engine at the set-up's FFT size, fed as a board feeds it (see the module
/// notes), keeping the closed bins and the warnings.
pub struct Engine {
    scan: Box<dyn AnyScan>,
    layout: BinLayout,
    frequencies: usize,
    points: usize,
    waiting: VecDeque<Waiting>,
    bins: BTreeMap<u16, ReportBin>,
    warnings: BTreeMap<String, u32>,
    boresight: Boresight,
    grid: sweepgate::grid::Grid,
    bands: Option<BandKeeper>,
    impulses: VecDeque<ImpulseRecord>,
}

impl Engine {
    /// Builds the engine of `setup` (gate, pattern frequencies, bins, scan mode).
    pub fn new(setup: &Setup) -> anyhow::Result<Self> {
        let scan = transform::run(setup.fft_size, Build(setup))?;
        let points = setup.grid.points();
        Ok(Self {
            scan,
            layout: setup.layout,
            frequencies: setup.indices.len().min(MAX_FREQUENCIES),
            points,
            waiting: VecDeque::new(),
            bins: BTreeMap::new(),
            warnings: BTreeMap::new(),
            boresight: Boresight {
                bin: setup.layout.index_of(0.0),
                sum: vec![Complex32::new(0.0, 0.0); points],
                sweeps: 0,
                done: false,
            },
            grid: setup.grid,
            bands: None,
            impulses: VecDeque::new(),
        })
    }

    /// Keeps every bin's whole band from now on, for [`Engine::bands`].
    pub fn keep_bands(&mut self) {
        self.bands.get_or_insert(BandKeeper {
            open: None,
            closed: BTreeMap::new(),
        });
    }

    /// Every closed bin's whole band (raw average and gated), if [`Engine::keep_bands`]
    /// was called.
    pub fn bands(&self) -> Option<Bands> {
        let k = self.bands.as_ref()?;
        Some(Bands {
            grid: self.grid,
            rows: k.closed.values().cloned().collect(),
        })
    }

    /// An angle sample: pushed at once, then every waiting sweep that ended by `t_us`.
    /// Returns the engine's events in order.
    pub fn angle(&mut self, t_us: u64, angle_deg: f64) -> Vec<Event<MAX_FREQUENCIES>> {
        let mut out = Vec::new();
        let ev = self.scan.push_angle(t_us, angle_deg as f32);
        self.take(ev, &mut out);
        while self.waiting.front().is_some_and(|w| w.end_us <= t_us) {
            if let Some(w) = self.waiting.pop_front() {
                self.push_now(&w, &mut out);
            }
        }
        out
    }

    /// A sweep: held until an angle sample at or after its end arrives (or the end).
    pub fn sweep(&mut self, start_us: u64, end_us: u64, s21: &[Complex32]) {
        self.waiting.push_back(Waiting {
            start_us,
            end_us,
            s21: s21.to_vec(),
        });
    }

    /// Ends the scan: the waiting sweeps go in first (unless `drop_waiting`, for a scan
    /// stopped by the user), then the open bin closes.
    pub fn finish(&mut self, drop_waiting: bool) -> Vec<Event<MAX_FREQUENCIES>> {
        let mut out = Vec::new();
        if drop_waiting {
            self.waiting.clear();
        }
        while let Some(w) = self.waiting.pop_front() {
            self.push_now(&w, &mut out);
        }
        let ev = self.scan.finish();
        self.take(ev, &mut out);
        out
    }

    /// The engine's status record.
    pub fn status(&self) -> StatusRecord {
        self.scan.status()
    }

    /// The engine's counters.
    pub fn counters(&self) -> ScanCounters {
        self.scan.counters()
    }

    /// The closed bins by index (a revisited bin holds its latest result).
    pub fn bins(&self) -> &BTreeMap<u16, ReportBin> {
        &self.bins
    }

    /// Warnings so far, counted by their wording.
    pub fn warnings(&self) -> &BTreeMap<String, u32> {
        &self.warnings
    }

    /// The impulse response of the average raw sweep of the bin at 0°, if any sweep went
    /// into it.
    pub fn impulse(&self) -> Option<ImpulseView> {
        let b = &self.boresight;
        let bin = b.bin?;
        if b.sweeps == 0 {
            return None;
        }
        let inv = 1.0 / b.sweeps as f32;
        let mean: Vec<Complex32> = b.sum.iter().map(|s| *s * inv).collect();
        let angle_deg = f64::from(self.layout.nominal_deg(bin));
        Some(self.scan.impulse(&mean, angle_deg, b.sweeps))
    }

    fn push_now(&mut self, w: &Waiting, out: &mut Vec<Event<MAX_FREQUENCIES>>) {
        let before = self.scan.counters().sweeps_binned;
        let ev = self.scan.push_sweep(w.start_us, w.end_us, &w.s21);
        let binned = self.scan.counters().sweeps_binned > before;
        if binned {
            self.add_to_boresight(w);
        }
        self.take(ev, out);
        if binned {
            self.add_to_band(w);
        }
    }

    /// Adds a binned sweep to the open bin's band sum, in the bin the core chose (the
    /// angle at the sweep's middle); after the events, so a bin the sweep closed is done.
    fn add_to_band(&mut self, w: &Waiting) {
        let Some(k) = self.bands.as_mut() else {
            return;
        };
        let mid = w.start_us + (w.end_us - w.start_us) / 2;
        let Some(index) = self
            .scan
            .angle_at(mid)
            .and_then(|a| self.layout.index_of(a))
        else {
            return;
        };
        match &mut k.open {
            Some((i, sum, n)) if *i == index => {
                for (s, v) in sum.iter_mut().zip(&w.s21) {
                    *s += *v;
                }
                *n += 1;
            }
            open => *open = Some((index, w.s21.clone(), 1)),
        }
    }

    /// A closed bin's whole band from its kept sum, when the sum holds the bin's sweeps.
    fn close_band(&mut self, r: &BinResult<MAX_FREQUENCIES>) {
        let Some(k) = self.bands.as_mut() else {
            return;
        };
        let Some((index, sum, n)) = k.open.take() else {
            return;
        };
        if index != r.index || n != r.sweeps {
            return;
        }
        let inv = 1.0 / n.max(1) as f32;
        let row = BandRow {
            angle_deg: f64::from(r.nominal_deg),
            raw: sum.iter().map(|s| *s * inv).collect(),
            gated: self.scan.gate_band(&sum, inv),
        };
        k.closed.insert(r.index, row);
    }

    fn add_to_boresight(&mut self, w: &Waiting) {
        let b = &mut self.boresight;
        if b.done || b.bin.is_none() || w.s21.len() != self.points {
            return;
        }
        let mid = w.start_us + (w.end_us - w.start_us) / 2;
        let Some(a) = self.scan.angle_at(mid) else {
            return;
        };
        if self.layout.index_of(a) == b.bin {
            for (s, v) in b.sum.iter_mut().zip(&w.s21) {
                *s += *v;
            }
            b.sweeps += 1;
        }
    }

    fn take(&mut self, ev: Events<MAX_FREQUENCIES>, out: &mut Vec<Event<MAX_FREQUENCIES>>) {
        for e in ev {
            match &e {
                Event::BinClosed(r) => {
                    self.bins.insert(r.index, report_bin(r, self.frequencies));
                    self.close_band(r);
                    let b = &mut self.boresight;
                    if b.sweeps > 0 && b.bin == Some(r.index) {
                        b.done = true;
                    }
                }
                Event::Warning(w) => *self.warnings.entry(warning_text(w)).or_insert(0) += 1,
                Event::Finished(_) => {}
            }
            out.push(e);
        }
        if let Some(r) = self.scan.take_impulse() {
            if self.impulses.len() >= MAX_PENDING_IMPULSES {
                self.impulses.pop_front();
            }
            self.impulses.push_back(r);
        }
    }

    /// The impulse-response records of the bins closed since the last call (the engine
    /// keeps one closed bin in [`sweepgate::scan::IMPULSE_EVERY_DEFAULT`]).
    pub fn take_impulses(&mut self) -> Vec<ImpulseRecord> {
        self.impulses.drain(..).collect()
    }
}
