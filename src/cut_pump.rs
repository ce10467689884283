//! The board loop of a scan of cuts, sans-IO: positioner samples of two axes and the VNA's
//! answers for `1 + X` traces per sweep through the IEEE 488.2 block decoder into the engine
//! [`CutScan`], cut-bin preview records (kind 4) out. It replays captures of cuts
//! ([`crate::wire::cut_capture`]) as [`crate::pump::Pump`] replays one-trace captures; the
//! firmware and the host's capture tooling both call it.
//!
//! A sweep's traces arrive one answer after another, in trace order; each is decoded into
//! its own `M`-point buffer, and when the last one completes the sweep goes into the engine
//! with the times of its first. A trace that completes out of turn is counted
//! ([`CutPumpCounters::traces_out_of_turn`]) and the sweep is dropped.
//!
//! Memory: the engine, `1 + X` sweep buffers of `M` points and the decoder's small state.

use embedded_io::{Read, Write};

use crate::cuts::{CutConfig, CutEvent, CutEvents, CutScan};
use crate::error::{CaptureError, CutConfigError, PumpError, ReplayError};
use crate::fft::Fft;
use crate::pump::{read_exact, PumpConfig, REPLAY_CHUNK};
use crate::wire::block::{BlockConfig, BlockDecoder, DecodeEvent as BlockEvent};
use crate::wire::cut_capture::{CutCaptureHeader, CutEntry, CUT_HEADER_LEN, CUT_MAX_ENTRY_LEN};
use crate::wire::preview::{write_frame, PreviewRecord, WriteFrameError};
use crate::Complex32;

/// What the loop itself counts (the engine and the decoder keep their own counters).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct CutPumpCounters {
    /// Traces the block decoder completed.
    pub traces_decoded: u32,
    /// Sweeps with all their traces pushed into the engine.
    pub sweeps_pushed: u32,
    /// Traces completed out of turn (their sweep dropped).
    pub traces_out_of_turn: u32,
    /// Preview frames written.
    pub frames_sent: u32,
}

const ZERO: Complex32 = Complex32::new(0.0, 0.0);

/// The board loop of a scan of cuts. See the [module docs](self).
pub struct CutPump<const M: usize, const F: usize, const B: usize, const H: usize, const X: usize>
where
    [Complex32; M]: Fft,
{
    scan: CutScan<M, F, B, H, X>,
    decoder: Option<BlockDecoder>,
    first: [Complex32; M],
    more: [[Complex32; M]; X],
    /// Points decoded per trace of the current sweep.
    points: [usize; 8],
    /// The trace expected next.
    next: usize,
    seq: u16,
    counters: CutPumpCounters,
}

impl<const M: usize, const F: usize, const B: usize, const H: usize, const X: usize>
    CutPump<M, F, B, H, X>
where
    [Complex32; M]: Fft,
{
    /// A loop with no configuration yet; `const`, so that a board can keep it in a `static`.
    pub const fn unconfigured() -> Self {
        Self {
            scan: CutScan::unconfigured(),
            decoder: None,
            first: [ZERO; M],
            more: [[ZERO; M]; X],
            points: [0; 8],
            next: 0,
            seq: 0,
            counters: CutPumpCounters {
                traces_decoded: 0,
                sweeps_pushed: 0,
                traces_out_of_turn: 0,
                frames_sent: 0,
            },
        }
    }

    /// Validates the settings and builds the engine in place; a new scan starts.
    pub fn configure(
        &mut self,
        cfg: &PumpConfig<F>,
        cuts: &CutConfig,
    ) -> Result<(), CutConfigError> {
        self.decoder = None;
        if 1 + X > self.points.len() {
            return Err(CutConfigError::Count);
        }
        self.scan.configure(&cfg.gate, cfg.pattern_indices, *cuts)?;
        self.decoder = Some(BlockDecoder::new(BlockConfig::for_grid(
            &cfg.gate.grid,
            cfg.format,
            cfg.order,
        )));
        self.next = 0;
        self.seq = 0;
        self.counters = CutPumpCounters::default();
        Ok(())
    }

    /// The engine.
    pub fn scan(&self) -> &CutScan<M, F, B, H, X> {
        &self.scan
    }

    /// The block decoder, once configured.
    pub fn decoder(&self) -> Option<&BlockDecoder> {
        self.decoder.as_ref()
    }

    /// What the loop counted.
    pub fn counters(&self) -> CutPumpCounters {
        self.counters
    }

    /// Pushes a positioner sample of both axes read at `t_us`.
    pub fn push_axes<W: Write>(
        &mut self,
        t_us: u64,
        axis1_deg: f32,
        axis2_deg: f32,
        out: &mut W,
    ) -> Result<(), PumpError<W::Error>> {
        self.decoder.as_ref().ok_or(PumpError::NotConfigured)?;
        let ev = self.scan.push_axes(t_us, axis1_deg, axis2_deg);
        self.send(ev, out)
    }

    /// Feeds bytes of the VNA's answer for trace `trace` (0 first) of the sweep measured
    /// from `start_us` to `end_us`, in chunks of any size. When the last trace of a sweep
    /// completes, the sweep goes into the engine and every bin it closes to `out`.
    pub fn feed<W: Write>(
        &mut self,
        trace: usize,
        bytes: &[u8],
        start_us: u64,
        end_us: u64,
        out: &mut W,
    ) -> Result<(), PumpError<W::Error>> {
        let mut rest = bytes;
        while !rest.is_empty() {
            let decoder = self.decoder.as_mut().ok_or(PumpError::NotConfigured)?;
            let buf = match trace.checked_sub(1) {
                None => &mut self.first,
                Some(j) => match self.more.get_mut(j) {
                    Some(b) => b,
                    // No such trace: its bytes are refused like a stray answer.
                    None => {
                        self.counters.traces_out_of_turn =
                            self.counters.traces_out_of_turn.saturating_add(1);
                        return Ok(());
                    }
                },
            };
            let fed = decoder.feed(rest, buf);
            rest = rest.get(fed.consumed..).unwrap_or_default();
            match fed.event {
                Some(BlockEvent::Sweep { points }) => {
                    self.trace_done(trace, points, start_us, end_us, out)?;
                }
                Some(BlockEvent::Rejected(_)) => {}
                None if fed.consumed == 0 => break,
                None => {}
            }
        }
        Ok(())
    }

    /// One trace decoded: in turn, note it (and push the sweep after the last); out of
    /// turn, count it and start over.
    fn trace_done<W: Write>(
        &mut self,
        trace: usize,
        points: usize,
        start_us: u64,
        end_us: u64,
        out: &mut W,
    ) -> Result<(), PumpError<W::Error>> {
        self.counters.traces_decoded = self.counters.traces_decoded.saturating_add(1);
        if trace != self.next {
            self.counters.traces_out_of_turn = self.counters.traces_out_of_turn.saturating_add(1);
            self.next = 0;
            return Ok(());
        }
        if let Some(p) = self.points.get_mut(trace) {
            *p = points;
        }
        if trace < X {
            self.next = trace + 1;
            return Ok(());
        }
        self.next = 0;
        let k = |t: usize| self.points.get(t).copied().unwrap_or(0).min(M);
        let first = &self.first[..k(0)];
        let more: [&[Complex32]; X] = core::array::from_fn(|j| &self.more[j][..k(j + 1)]);
        let ev = self.scan.push_traces(start_us, end_us, first, more);
        self.counters.sweeps_pushed = self.counters.sweeps_pushed.saturating_add(1);
        self.send(ev, out)
    }

    /// Ends the scan: closes the open bin (sent to `out`).
    pub fn finish<W: Write>(&mut self, out: &mut W) -> Result<(), PumpError<W::Error>> {
        let decoder = self.decoder.as_mut().ok_or(PumpError::NotConfigured)?;
        let _ = decoder.finish();
        let ev = self.scan.finish();
        self.send(ev, out)
    }

    /// Replays a capture of cuts: its header configures the loop, then its samples and
    /// answers go through it in order, each answer in [`REPLAY_CHUNK`]-byte pieces, and its
    /// end finishes the scan. Preview frames go to `out`.
    pub fn replay<R: Read, W: Write>(
        &mut self,
        capture: &mut R,
        out: &mut W,
    ) -> Result<(), ReplayError<R::Error, W::Error>> {
        let mut at = 0u64;
        let mut head = [0u8; CUT_HEADER_LEN];
        read_exact(capture, &mut head, &mut at, 0)?;
        let bad0 = |error| ReplayError::Capture { at_byte: 0, error };
        let h = CutCaptureHeader::parse(&head).map_err(bad0)?;
        if usize::from(h.traces) != 1 + X {
            return Err(bad0(CaptureError::TraceCount {
                capture: h.traces,
                board: (1 + X).min(255) as u8,
            }));
        }
        let pump = PumpConfig::<F>::from_capture(&h.link);
        let mut cuts = CutConfig::new(pump.scan, h.cuts);
        cuts.axis2_track.max_speed_deg_s = h.axis2_max_speed_deg_s;
        self.configure(&pump, &cuts).map_err(|e| match e {
            CutConfigError::Scan(s) => ReplayError::Config(s),
            other => bad0(CaptureError::Cuts(other)),
        })?;
        let (mut times, mut trace) = ((0u64, 0u64), 0usize);
        loop {
            let entry_at = at;
            match read_entry(capture, &mut at)? {
                CutEntry::End => break,
                CutEntry::Axes {
                    t_us,
                    axis1_deg,
                    axis2_deg,
                } => self.push_axes(t_us, axis1_deg, axis2_deg, out)?,
                CutEntry::Sweep {
                    start_us,
                    end_us,
                    len,
                } => {
                    (times, trace) = ((start_us, end_us), 0);
                    self.replay_answer(capture, &mut at, entry_at, len, trace, times, out)?;
                }
                CutEntry::Trace { len } => {
                    trace += 1;
                    self.replay_answer(capture, &mut at, entry_at, len, trace, times, out)?;
                }
            }
        }
        self.finish(out)?;
        Ok(())
    }

    /// Feeds one answer from the capture, [`REPLAY_CHUNK`] bytes at a time.
    #[allow(clippy::too_many_arguments)]
    fn replay_answer<R: Read, W: Write>(
        &mut self,
        capture: &mut R,
        at: &mut u64,
        entry_at: u64,
        len: u32,
        trace: usize,
        (start_us, end_us): (u64, u64),
        out: &mut W,
    ) -> Result<(), ReplayError<R::Error, W::Error>> {
        let mut left = len as usize;
        let mut chunk = [0u8; REPLAY_CHUNK];
        while left > 0 {
            let n = left.min(REPLAY_CHUNK);
            let piece = &mut chunk[..n];
            read_exact(capture, piece, at, entry_at)?;
            left -= n;
            self.feed(trace, piece, start_us, end_us, out)?;
        }
        Ok(())
    }

    /// Sends every closed bin among `events` as a cut-bin record.
    fn send<W: Write>(
        &mut self,
        events: CutEvents<F, X>,
        out: &mut W,
    ) -> Result<(), PumpError<W::Error>> {
        for e in events {
            if let CutEvent::BinClosed(r) = e {
                let rec = PreviewRecord::Cut(r.to_record());
                write_frame(out, &rec, self.seq).map_err(|e| match e {
                    WriteFrameError::Emit(e) => PumpError::Emit(e),
                    WriteFrameError::Io(e) => PumpError::Write(e),
                })?;
                self.seq = self.seq.wrapping_add(1);
                self.counters.frames_sent = self.counters.frames_sent.saturating_add(1);
            }
        }
        Ok(())
    }
}

/// Reads the kind byte and head of the entry at `at`.
fn read_entry<R: Read, W>(
    capture: &mut R,
    at: &mut u64,
) -> Result<CutEntry, ReplayError<R::Error, W>> {
    let entry_at = *at;
    let bad = |error| ReplayError::Capture {
        at_byte: entry_at,
        error,
    };
    let mut kind = [0u8; 1];
    read_exact(capture, &mut kind, at, entry_at)?;
    let len = CutEntry::head_len(kind[0]).map_err(bad)?;
    let mut head = [0u8; CUT_MAX_ENTRY_LEN];
    let head = head.get_mut(..len).ok_or(bad(CaptureError::Truncated))?;
    read_exact(capture, head, at, entry_at)?;
    CutEntry::parse(kind[0], head).map_err(bad)
}
