//! The board loop, sans-IO: link bytes and positioner samples in, preview frames out.
//!
//! [`Pump<M, F, B, H>`](Pump) owns the scan engine [`Scan<M, F, B, H>`](Scan), an IEEE 488.2
//! [`BlockDecoder`] and the one `M`-point sweep buffer the decoder fills. The caller hands
//! it what arrives, in any chunks:
//!
//! - positioner samples ([`Pump::push_angle`], [`Pump::push_counts`]);
//! - the VNA's answer bytes for a sweep, with the sweep's start and end times
//!   ([`Pump::feed`]): each complete block goes straight into the engine;
//! - the end of the scan ([`Pump::finish`]).
//!
//! Every bin the engine closes goes out at once as a preview frame (a bin record, COBS and
//! CRC-32, [`crate::wire::preview`]) to the caller's [`embedded_io::Write`], numbered from 0;
//! [`Pump::send_status`] sends a status record when the caller wants one. Warnings are
//! counted by the engine and travel in the status record. Nothing is allocated; the work per
//! call is bounded by the bytes given and one gated bin per sweep.
//!
//! The firmware (`examples/firmware-m4`) and the host's capture tooling
//! (`sweepgate_host::pipeline::capture`) both run this loop, and [`Pump::replay`] drives it
//! from a link capture ([`crate::wire::capture`]) read through an [`embedded_io::Read`], so
//! that the board and the host compute the same preview records from the same bytes.
//!
//! # Building it in place
//!
//! [`Pump::unconfigured`] is `const`, so a board keeps the pump (34 KiB of engine and 8 KiB
//! of sweep buffer for `Pump<1024, 8, 361>`) in a `static` and [`Pump::configure`]s it where
//! it lies: the stack never holds a copy.
//!
//! ```
//! use sweepgate::{gate::GateConfig, grid::Grid, window::WindowKind, Complex32};
//! use sweepgate::bins::BinLayout;
//! use sweepgate::pump::{Pump, PumpConfig};
//! use sweepgate::scan::ScanConfig;
//! use sweepgate::wire::block::{emit, ByteOrder, Format};
//! use sweepgate::wire::preview::{Decoder, PreviewRecord};
//!
//! let grid = Grid::from_start_stop(2e9, 18e9, 201).unwrap();
//! let gate = GateConfig { grid, band_window: WindowKind::Kaiser { beta: 6.0 },
//!     center_s: 10e-9, span_s: 4e-9, shape: WindowKind::Tukey { alpha: 0.5 },
//!     renormalize: true };
//! let cfg = PumpConfig {
//!     gate,
//!     pattern_indices: [100],
//!     scan: ScanConfig::new(BinLayout::full_circle(0.0, 1.0).unwrap()),
//!     format: Format::Real32,
//!     order: ByteOrder::Normal,
//! };
//! let mut pump: Box<Pump<256, 1, 360>> = Box::new(Pump::unconfigured());
//! pump.configure(&cfg).unwrap();
//!
//! // One sweep as the VNA sends it, an IEEE 488.2 block of REAL,32 pairs.
//! let mut block = [0u8; 201 * 8 + 16];
//! let n = emit(Format::Real32, ByteOrder::Normal, &[Complex32::new(1.0, 0.0); 201], &mut block)
//!     .unwrap();
//! let mut preview = Vec::new();
//! // 10 deg/s; one 20 ms sweep every 50 ms, its answer arriving in 64-byte pieces.
//! for i in 0..40u64 {
//!     let t = i * 50_000;
//!     pump.push_angle(t, i as f32 * 0.5, &mut preview).unwrap();
//!     if i > 0 {
//!         for piece in block[..n].chunks(64) {
//!             pump.feed(piece, t - 30_000, t - 10_000, &mut preview).unwrap();
//!         }
//!     }
//! }
//! pump.finish(&mut preview).unwrap();
//! assert_eq!(pump.counters().sweeps_decoded, 39);
//!
//! let mut bins = 0;
//! Decoder::<1, 512>::new().feed(&preview, |_, r| bins += matches!(r, PreviewRecord::Bin(_)) as u32);
//! assert_eq!(bins, pump.counters().frames_sent);
//! assert!(bins >= 19);
//! ```

use embedded_io::{Read, ReadExactError, Write};

use crate::error::{CaptureError, PumpError, ReplayError, ScanConfigError};
use crate::fft::Fft;
use crate::gate::GateConfig;
use crate::scan::{EchoMode, Event, Events, Scan, ScanConfig, IMPULSE_EVERY_DEFAULT};
use crate::wire::block::{BlockConfig, BlockDecoder, ByteOrder, DecodeEvent as BlockEvent, Format};
use crate::wire::capture::{CaptureHeader, Entry, HEADER_LEN, MAX_ENTRY_LEN};
use crate::wire::preview::{write_frame, PreviewRecord, WriteFrameError};
use crate::Complex32;

/// Bytes of a sweep's answer [`Pump::replay`] hands the decoder at a time (one DMA
/// half-buffer of a board, say).
pub const REPLAY_CHUNK: usize = 64;

/// What the board loop is to do, before validation by [`Pump::configure`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PumpConfig<const F: usize> {
    /// Grid and gate; the block decoder expects the grid's K points per block.
    pub gate: GateConfig,
    /// Grid indices of the `F` pattern frequencies in each bin record.
    pub pattern_indices: [usize; F],
    /// Scan engine settings.
    pub scan: ScanConfig,
    /// Number format of the VNA's blocks.
    pub format: Format,
    /// Byte order of the VNA's blocks.
    pub order: ByteOrder,
}

impl<const F: usize> PumpConfig<F> {
    /// The settings a link capture names: its gate, layout, pattern frequencies (the last
    /// one repeated up to `F`), block format and echo mode; the engine's other settings are
    /// [`ScanConfig::new`]'s.
    pub fn from_capture(h: &CaptureHeader) -> Self {
        let mut scan = ScanConfig::new(h.layout);
        scan.echo = h.echo;
        scan.impulse_every = IMPULSE_EVERY_DEFAULT;
        Self {
            gate: h.gate,
            pattern_indices: h.pattern_indices::<F>(),
            scan,
            format: h.format,
            order: h.order,
        }
    }
}

/// What the pump itself counts (the engine and the decoder keep their own counters).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct PumpCounters {
    /// Sweeps the block decoder completed and handed to the engine.
    pub sweeps_decoded: u32,
    /// Preview frames written (bin, status and impulse-response records).
    pub frames_sent: u32,
    /// Of those, impulse-response records.
    pub impulses_sent: u32,
}

/// One step of the board loop, as reported to a [`Meter`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Step {
    /// One call of the block decoder on part of a chunk.
    Decode,
    /// One decoded sweep pushed into the engine; `closed` when that closed (and gated) a
    /// bin.
    Sweep {
        /// A bin was closed by this sweep.
        closed: bool,
    },
}

/// Watches the loop's steps, e.g. to count the work of each on a board. [`Meter::start`]
/// comes right before a step and [`Meter::stop`] right after it (before any preview frame
/// is written). `()` watches nothing.
pub trait Meter {
    /// A step begins.
    fn start(&mut self);
    /// The step that began last has ended.
    fn stop(&mut self, step: Step);
}

impl Meter for () {
    #[inline(always)]
    fn start(&mut self) {}
    #[inline(always)]
    fn stop(&mut self, _: Step) {}
}

/// The board loop. See the [module docs](self).
pub struct Pump<const M: usize, const F: usize, const B: usize, const H: usize = 64>
where
    [Complex32; M]: Fft,
{
    scan: Scan<M, F, B, H>,
    /// `None` until configured: the pump's "configured" flag.
    decoder: Option<BlockDecoder>,
    sweep: [Complex32; M],
    seq: u16,
    counters: PumpCounters,
}

impl<const M: usize, const F: usize, const B: usize, const H: usize> Pump<M, F, B, H>
where
    [Complex32; M]: Fft,
{
    /// A pump with no configuration yet; every call but [`Pump::configure`] answers
    /// [`PumpError::NotConfigured`]. `const`, so that a board can keep it in a `static`.
    pub const fn unconfigured() -> Self {
        Self {
            scan: Scan::unconfigured(),
            decoder: None,
            sweep: [Complex32::new(0.0, 0.0); M],
            seq: 0,
            counters: PumpCounters {
                sweeps_decoded: 0,
                frames_sent: 0,
                impulses_sent: 0,
            },
        }
    }

    /// Validates `cfg` and builds the engine in place ([`Scan::configure`]); a new scan
    /// starts: counters zero, frames numbered from 0 again. On an error the pump is left
    /// unconfigured.
    pub fn configure(&mut self, cfg: &PumpConfig<F>) -> Result<(), ScanConfigError> {
        self.decoder = None;
        self.scan
            .configure(&cfg.gate, cfg.pattern_indices, cfg.scan)?;
        // The gate has checked K ≤ M, so every block fits the sweep buffer.
        self.decoder = Some(BlockDecoder::new(BlockConfig::for_grid(
            &cfg.gate.grid,
            cfg.format,
            cfg.order,
        )));
        self.seq = 0;
        self.counters = PumpCounters::default();
        Ok(())
    }

    /// True once [`Pump::configure`] has succeeded.
    pub fn is_configured(&self) -> bool {
        self.decoder.is_some()
    }

    /// The scan engine (its counters, tracker, gate).
    pub fn scan(&self) -> &Scan<M, F, B, H> {
        &self.scan
    }

    /// The block decoder (its counters), once configured.
    pub fn decoder(&self) -> Option<&BlockDecoder> {
        self.decoder.as_ref()
    }

    /// What the pump counted.
    pub fn counters(&self) -> PumpCounters {
        self.counters
    }

    /// Pushes a positioner angle (degrees) read at `t_us`; a bin it closes goes to `out`.
    pub fn push_angle<W: Write>(
        &mut self,
        t_us: u64,
        angle_deg: f32,
        out: &mut W,
    ) -> Result<(), PumpError<W::Error>> {
        self.configured()?;
        let ev = self.scan.push_angle(t_us, angle_deg);
        self.send(ev, out)
    }

    /// Pushes a raw encoder count read at `t_us` (an engine configured with an encoder).
    pub fn push_counts<W: Write>(
        &mut self,
        t_us: u64,
        raw: u32,
        out: &mut W,
    ) -> Result<(), PumpError<W::Error>> {
        self.configured()?;
        let ev = self.scan.push_counts(t_us, raw);
        self.send(ev, out)
    }

    /// Feeds bytes of the VNA's answer for the sweep measured from `start_us` to `end_us`,
    /// in chunks of any size: every block completed is pushed into the engine with those
    /// times, and every bin closed goes to `out`. Returns the sweeps completed by this
    /// chunk. Bad blocks are counted by the decoder, which resynchronises.
    pub fn feed<W: Write>(
        &mut self,
        bytes: &[u8],
        start_us: u64,
        end_us: u64,
        out: &mut W,
    ) -> Result<u32, PumpError<W::Error>> {
        self.feed_metered(bytes, start_us, end_us, out, &mut ())
    }

    /// [`Pump::feed`], reporting each decoder call and each sweep pushed to `meter`.
    pub fn feed_metered<W: Write>(
        &mut self,
        bytes: &[u8],
        start_us: u64,
        end_us: u64,
        out: &mut W,
        meter: &mut impl Meter,
    ) -> Result<u32, PumpError<W::Error>> {
        self.configured()?;
        let mut sweeps = 0;
        let mut rest = bytes;
        while !rest.is_empty() {
            let decoder = self.decoder.as_mut().ok_or(PumpError::NotConfigured)?;
            meter.start();
            let fed = decoder.feed(rest, &mut self.sweep);
            meter.stop(Step::Decode);
            rest = rest.get(fed.consumed..).unwrap_or_default();
            match fed.event {
                Some(BlockEvent::Sweep { points }) => {
                    sweeps += 1;
                    self.counters.sweeps_decoded = self.counters.sweeps_decoded.saturating_add(1);
                    let closed_before = self.scan.counters().bins_closed;
                    meter.start();
                    let ev = self
                        .scan
                        .push_sweep_buffer(start_us, end_us, &self.sweep, points);
                    let closed = self.scan.counters().bins_closed > closed_before;
                    meter.stop(Step::Sweep { closed });
                    self.send(ev, out)?;
                }
                // A rejected block is counted by the decoder; go on with the rest.
                Some(BlockEvent::Rejected(_)) => {}
                // The decoder stops early only at an event; guard against a stall anyway.
                None if fed.consumed == 0 => break,
                None => {}
            }
        }
        Ok(sweeps)
    }

    /// Ends the scan: a block still in progress is counted as truncated, the open bin is
    /// closed (and sent to `out`), and later input is refused by the engine.
    pub fn finish<W: Write>(&mut self, out: &mut W) -> Result<(), PumpError<W::Error>> {
        let decoder = self.decoder.as_mut().ok_or(PumpError::NotConfigured)?;
        let _ = decoder.finish();
        let ev = self.scan.finish();
        self.send(ev, out)
    }

    /// Sends a status record (positioner state and every counter of the engine) to `out`.
    pub fn send_status<W: Write>(&mut self, out: &mut W) -> Result<(), PumpError<W::Error>> {
        self.configured()?;
        let status = self.scan.status();
        self.write(&PreviewRecord::Status(status), out)
    }

    /// Replays a link capture read from `capture`: its header configures the pump (with
    /// `echo` instead of the capture's echo mode when given), then its positioner samples
    /// and sweep answers go through the loop in order, each answer in [`REPLAY_CHUNK`]-byte
    /// pieces as a board receives it, and the capture's end finishes the scan. Preview
    /// frames go to `out`; `meter` watches every step.
    pub fn replay<R: Read, W: Write>(
        &mut self,
        capture: &mut R,
        out: &mut W,
        echo: Option<EchoMode>,
        meter: &mut impl Meter,
    ) -> Result<(), ReplayError<R::Error, W::Error>> {
        let mut at = 0u64;
        let mut head = [0u8; HEADER_LEN];
        read_exact(capture, &mut head, &mut at, 0)?;
        let mut h = CaptureHeader::parse(&head)
            .map_err(|error| ReplayError::Capture { at_byte: 0, error })?;
        if let Some(e) = echo {
            h.echo = e;
        }
        self.configure(&PumpConfig::from_capture(&h))
            .map_err(ReplayError::Config)?;
        loop {
            let entry_at = at;
            let entry = read_entry(capture, &mut at)?;
            match entry {
                Entry::End => break,
                Entry::Angle { t_us, angle_deg } => self.push_angle(t_us, angle_deg, out)?,
                Entry::Sweep {
                    start_us,
                    end_us,
                    len,
                } => {
                    let answer = Answer {
                        start_us,
                        end_us,
                        len,
                        entry_at,
                    };
                    self.replay_answer(capture, &mut at, answer, out, meter)?;
                }
            }
        }
        self.finish(out)?;
        Ok(())
    }

    /// Feeds one sweep's answer from the capture, [`REPLAY_CHUNK`] bytes at a time.
    fn replay_answer<R: Read, W: Write>(
        &mut self,
        capture: &mut R,
        at: &mut u64,
        answer: Answer,
        out: &mut W,
        meter: &mut impl Meter,
    ) -> Result<(), ReplayError<R::Error, W::Error>> {
        let mut left = answer.len as usize;
        let mut chunk = [0u8; REPLAY_CHUNK];
        while left > 0 {
            let n = left.min(REPLAY_CHUNK);
            let piece = &mut chunk[..n];
            read_exact(capture, piece, at, answer.entry_at)?;
            left -= n;
            self.feed_metered(piece, answer.start_us, answer.end_us, out, meter)?;
        }
        Ok(())
    }

    fn configured<E>(&self) -> Result<(), PumpError<E>> {
        if self.is_configured() {
            Ok(())
        } else {
            Err(PumpError::NotConfigured)
        }
    }

    /// Sends every closed bin among `events` as a bin record.
    fn send<W: Write>(
        &mut self,
        events: Events<F>,
        out: &mut W,
    ) -> Result<(), PumpError<W::Error>> {
        for e in events {
            if let Event::BinClosed(r) = e {
                self.write(&PreviewRecord::Bin(r.to_record()), out)?;
            }
        }
        // A push closes at most one bin: its impulse response, when it was due.
        if let Some(r) = self.scan.take_impulse().cloned() {
            self.write(&PreviewRecord::Impulse(r), out)?;
            self.counters.impulses_sent = self.counters.impulses_sent.saturating_add(1);
        }
        Ok(())
    }

    fn write<W: Write>(
        &mut self,
        rec: &PreviewRecord<F>,
        out: &mut W,
    ) -> Result<(), PumpError<W::Error>> {
        write_frame(out, rec, self.seq).map_err(|e| match e {
            WriteFrameError::Emit(e) => PumpError::Emit(e),
            WriteFrameError::Io(e) => PumpError::Write(e),
        })?;
        self.seq = self.seq.wrapping_add(1);
        self.counters.frames_sent = self.counters.frames_sent.saturating_add(1);
        Ok(())
    }
}

/// A sweep entry of a capture: its times, answer length and where the entry starts.
struct Answer {
    start_us: u64,
    end_us: u64,
    len: u32,
    entry_at: u64,
}

/// Reads exactly `buf.len()` bytes, advancing `at`; the end of the capture there is a
/// truncated header or entry starting at `entry_at`.
pub(crate) fn read_exact<R: Read, W>(
    capture: &mut R,
    buf: &mut [u8],
    at: &mut u64,
    entry_at: u64,
) -> Result<(), ReplayError<R::Error, W>> {
    capture.read_exact(buf).map_err(|e| match e {
        ReadExactError::UnexpectedEof => ReplayError::Capture {
            at_byte: entry_at,
            error: CaptureError::Truncated,
        },
        ReadExactError::Other(e) => ReplayError::Read(e),
    })?;
    *at += buf.len() as u64;
    Ok(())
}

/// Reads the kind byte and head of the entry at `at`.
fn read_entry<R: Read, W>(
    capture: &mut R,
    at: &mut u64,
) -> Result<Entry, ReplayError<R::Error, W>> {
    let entry_at = *at;
    let bad = |error| ReplayError::Capture {
        at_byte: entry_at,
        error,
    };
    let mut kind = [0u8; 1];
    read_exact(capture, &mut kind, at, entry_at)?;
    let len = Entry::head_len(kind[0]).map_err(bad)?;
    let mut head = [0u8; MAX_ENTRY_LEN];
    let head = head.get_mut(..len).ok_or(bad(CaptureError::Truncated))?;
    read_exact(capture, head, at, entry_at)?;
    Entry::parse(kind[0], head).map_err(bad)
}

#[cfg(test)]
mod tests {
    extern crate std;

    use super::*;
    use crate::bins::BinLayout;
    use crate::error::SweepReject;
    use crate::grid::Grid;
    use crate::scan::Warning;
    use crate::window::WindowKind;
    use crate::wire::block::emit;
    use crate::wire::capture::MAX_PATTERN;
    use crate::wire::impulse::ImpulseRecord;
    use crate::wire::preview::encode_frame;
    use crate::wire::preview::MAX_FRAME;
    use std::vec::Vec;

    const K: usize = 101;
    type TestPump = Pump<128, 2, 11>;

    fn gate_cfg() -> GateConfig {
        GateConfig {
            grid: Grid::from_start_stop(2e9, 18e9, K).unwrap(),
            band_window: WindowKind::Kaiser { beta: 6.0 },
            center_s: 5e-9,
            span_s: 2e-9,
            shape: WindowKind::Tukey { alpha: 0.5 },
            renormalize: true,
        }
    }

    /// Settings for the tests; `leave_close_us` as in [`ScanConfig`] (a capture replays
    /// with [`ScanConfig::new`]'s 100 ms, and impulse responses at a board's rate).
    fn config_with(echo: EchoMode, leave_close_us: Option<u32>) -> PumpConfig<2> {
        let mut scan = ScanConfig::new(BinLayout::sector(0.0, 10.0, 1.0).unwrap());
        scan.echo = echo;
        scan.leave_close_us = leave_close_us;
        scan.impulse_every = IMPULSE_EVERY_DEFAULT;
        PumpConfig {
            gate: gate_cfg(),
            pattern_indices: [10, 60],
            scan,
            format: Format::Real32,
            order: ByteOrder::Swapped,
        }
    }

    /// Bins close only when a sweep lands in the next one (a `Step::Sweep` that closes), or
    /// at the end.
    fn config(echo: EchoMode) -> PumpConfig<2> {
        config_with(echo, None)
    }

    /// A direct path and an echo whose strength changes from sweep to sweep.
    fn sweep(i: u64) -> [Complex32; K] {
        let grid = gate_cfg().grid;
        core::array::from_fn(|n| {
            let f = grid.frequency_hz(n);
            let z = |a: f64, t: f64| {
                let ph = -2.0 * core::f64::consts::PI * f * t;
                Complex32::new((a * libm::cos(ph)) as f32, (a * libm::sin(ph)) as f32)
            };
            z(1.0, 5e-9) + z(0.1 + 0.05 * i as f64, 8e-9)
        })
    }

    /// What the board sees: (t_us, angle) samples and (start, end, block bytes) sweeps, in
    /// order, with one garbage block the decoder must skip.
    enum Input {
        Angle(u64, f32),
        Sweep(u64, u64, Vec<u8>),
    }

    fn inputs() -> Vec<Input> {
        let mut v = Vec::new();
        for i in 0..14u64 {
            let t = i * 100_000;
            v.push(Input::Angle(t, i as f32 * 0.5));
            if i > 0 {
                let mut block = std::vec![0u8; K * 8 + 16];
                let n = emit(Format::Real32, ByteOrder::Swapped, &sweep(i), &mut block).unwrap();
                block.truncate(n);
                if i == 5 {
                    // A block of the wrong point count first: rejected and counted.
                    let mut bad = std::vec![0u8; 64];
                    let m =
                        emit(Format::Real32, ByteOrder::Swapped, &sweep(i)[..3], &mut bad).unwrap();
                    bad.truncate(m);
                    bad.extend_from_slice(&block);
                    block = bad;
                }
                v.push(Input::Sweep(t - 60_000, t - 40_000, block));
            }
        }
        v
    }

    /// The same scan with the engine fed directly and each closed bin framed by hand: the
    /// model the pump must reproduce byte for byte (no outside source). Also how many sweeps
    /// closed a bin.
    fn reference(cfg: &PumpConfig<2>) -> (Vec<u8>, u32) {
        let mut scan: Scan<128, 2, 11> =
            Scan::new(&cfg.gate, cfg.pattern_indices, cfg.scan).unwrap();
        let mut out = Vec::new();
        let mut seq = 0u16;
        let mut closing_sweeps = 0;
        let mut take = |ev: Events<2>, impulse: Option<ImpulseRecord>| {
            let mut closed = false;
            let mut put = |r: &PreviewRecord<2>| {
                let mut frame = [0u8; MAX_FRAME];
                let n = encode_frame(r, seq, &mut frame).unwrap();
                out.extend_from_slice(&frame[..n]);
                seq += 1;
            };
            for e in ev {
                if let Event::BinClosed(r) = e {
                    put(&PreviewRecord::Bin(r.to_record()));
                    closed = true;
                }
            }
            // The impulse response of the bin just closed, when it was one of every 4.
            if let Some(r) = impulse {
                put(&PreviewRecord::Impulse(r));
            }
            closed
        };
        for input in inputs() {
            match input {
                Input::Angle(t, a) => {
                    let ev = scan.push_angle(t, a);
                    take(ev, scan.take_impulse().cloned());
                }
                Input::Sweep(s, e, _) => {
                    let i = (e + 40_000) / 100_000;
                    let ev = scan.push_sweep(s, e, &sweep(i));
                    if take(ev, scan.take_impulse().cloned()) {
                        closing_sweeps += 1;
                    }
                }
            }
        }
        let ev = scan.finish();
        take(ev, scan.take_impulse().cloned());
        (out, closing_sweeps)
    }

    fn run(pump: &mut TestPump, split: usize) -> Vec<u8> {
        let mut out = Vec::new();
        for input in inputs() {
            match input {
                Input::Angle(t, a) => pump.push_angle(t, a, &mut out).unwrap(),
                Input::Sweep(s, e, bytes) => {
                    for piece in bytes.chunks(split) {
                        pump.feed(piece, s, e, &mut out).unwrap();
                    }
                }
            }
        }
        pump.finish(&mut out).unwrap();
        out
    }

    #[test]
    fn every_chunk_split_gives_the_reference_frames() {
        for echo in [EchoMode::Never, EchoMode::EveryBin] {
            let (want, closing_sweeps) = reference(&config(echo));
            assert!(want.len() > 200, "{}", want.len());
            assert!(closing_sweeps >= 5, "{closing_sweeps}");
            let mut pump: std::boxed::Box<TestPump> = std::boxed::Box::new(Pump::unconfigured());
            for split in [1, 2, 7, 8, 63, 64, 65, 1000, usize::MAX] {
                // Configuring again starts a new scan in the same storage.
                pump.configure(&config(echo)).unwrap();
                assert_eq!(run(&mut pump, split), want, "split {split}, {echo:?}");
                let k = pump.scan().counters();
                assert_eq!(pump.counters().sweeps_decoded, 13);
                assert_eq!(k.sweeps_pushed, 13);
                // A frame per closed bin, and an impulse response for one bin in 4 when the
                // FFT path runs.
                let c = pump.counters();
                assert_eq!(k.bins_closed + c.impulses_sent, c.frames_sent);
                let every = u32::from(IMPULSE_EVERY_DEFAULT);
                let impulses = match echo {
                    EchoMode::Never => 0,
                    EchoMode::EveryBin => k.bins_closed.div_ceil(every),
                };
                assert_eq!(c.impulses_sent, impulses);
                let d = pump.decoder().unwrap().counters();
                assert_eq!((d.accepted, d.rejected()), (13, 1));
            }
            // The meter sees every sweep, and which ones closed a bin.
            pump.configure(&config(echo)).unwrap();
            let mut tally = Tally::default();
            let mut out = Vec::new();
            for input in inputs() {
                match input {
                    Input::Angle(t, a) => pump.push_angle(t, a, &mut out).unwrap(),
                    Input::Sweep(s, e, bytes) => {
                        pump.feed_metered(&bytes, s, e, &mut out, &mut tally)
                            .unwrap();
                    }
                }
            }
            assert_eq!(
                (tally.adds, tally.closes),
                (13 - closing_sweeps, closing_sweeps)
            );
            // At least one decoder call per block (13 sweeps and the rejected one); the
            // decoder may stop before a block's trailing newline.
            assert!(tally.decodes >= 14, "{}", tally.decodes);
        }
    }

    #[test]
    fn nothing_runs_before_configure_or_after_a_refused_one() {
        let mut pump: std::boxed::Box<TestPump> = std::boxed::Box::new(Pump::unconfigured());
        let mut out = Vec::new();
        assert!(!pump.is_configured());
        assert_eq!(
            pump.push_angle(0, 1.0, &mut out),
            Err(PumpError::NotConfigured)
        );
        assert_eq!(
            pump.feed(b"#0", 0, 1, &mut out),
            Err(PumpError::NotConfigured)
        );
        assert_eq!(
            pump.feed(b"", 0, 1, &mut out),
            Err(PumpError::NotConfigured)
        );
        assert_eq!(pump.finish(&mut out), Err(PumpError::NotConfigured));
        assert_eq!(pump.send_status(&mut out), Err(PumpError::NotConfigured));
        assert!(out.is_empty());
        // The engine inside counts what reaches it unconfigured.
        let mut scan: Scan<128, 2, 11> = Scan::unconfigured();
        let ev = scan.push_sweep(0, 1, &sweep(0));
        assert_eq!(
            ev.first(),
            Some(&Event::Warning(Warning::SweepRejected(
                SweepReject::NotConfigured
            )))
        );
        let c = scan.counters();
        assert_eq!(c.sweeps_rejected_for(SweepReject::NotConfigured), 1);
        assert_eq!(c.sweeps_binned + c.sweeps_rejected(), c.sweeps_pushed);
        scan.push_angle(0, 1.0);
        assert_eq!(scan.counters().angles_unconfigured, 1);
        assert_eq!(scan.counters().angles_rejected(), 1);

        pump.configure(&config(EchoMode::Never)).unwrap();
        let mut bad = config(EchoMode::Never);
        bad.pattern_indices = [10, K]; // beyond the grid
        assert!(matches!(
            pump.configure(&bad),
            Err(ScanConfigError::Gate(_))
        ));
        assert!(!pump.is_configured() && !pump.scan().is_configured());
        assert_eq!(
            pump.push_angle(0, 1.0, &mut out),
            Err(PumpError::NotConfigured)
        );
    }

    #[test]
    fn a_full_output_stops_the_loop_with_its_error() {
        let mut pump: std::boxed::Box<TestPump> = std::boxed::Box::new(Pump::unconfigured());
        pump.configure(&config(EchoMode::Never)).unwrap();
        let mut room = [0u8; 10];
        let mut out: &mut [u8] = &mut room;
        assert_eq!(
            pump.send_status(&mut out),
            Err(PumpError::Write(embedded_io::SliceWriteError::Full))
        );
        assert_eq!(pump.counters().frames_sent, 0);
        let mut big = [0u8; MAX_FRAME];
        let mut out: &mut [u8] = &mut big;
        pump.send_status(&mut out).unwrap();
        assert_eq!(pump.counters().frames_sent, 1);
    }

    /// The capture of `inputs()` with `header`, as `sweepgate-host` writes it.
    fn capture_bytes(echo: EchoMode) -> Vec<u8> {
        let cfg = config_with(echo, Some(100_000));
        let mut pattern = [0u16; MAX_PATTERN];
        pattern[0] = 10;
        pattern[1] = 60;
        let header = CaptureHeader {
            gate: cfg.gate,
            layout: cfg.scan.layout,
            pattern,
            pattern_count: 2,
            format: cfg.format,
            order: cfg.order,
            echo,
        };
        let mut head = [0u8; HEADER_LEN];
        header.emit(&mut head);
        let mut v = head.to_vec();
        let mut e = [0u8; MAX_ENTRY_LEN];
        for input in inputs() {
            match input {
                Input::Angle(t_us, angle_deg) => {
                    let n = Entry::Angle { t_us, angle_deg }.emit(&mut e);
                    v.extend_from_slice(&e[..n]);
                }
                Input::Sweep(start_us, end_us, bytes) => {
                    let len = bytes.len() as u32;
                    let n = Entry::Sweep {
                        start_us,
                        end_us,
                        len,
                    }
                    .emit(&mut e);
                    v.extend_from_slice(&e[..n]);
                    v.extend_from_slice(&bytes);
                }
            }
        }
        let n = Entry::End.emit(&mut e);
        v.extend_from_slice(&e[..n]);
        v
    }

    /// Counts the steps it is shown, checking that starts and stops pair up.
    #[derive(Default)]
    struct Tally {
        open: bool,
        decodes: u32,
        adds: u32,
        closes: u32,
    }

    impl Meter for Tally {
        fn start(&mut self) {
            assert!(!self.open);
            self.open = true;
        }
        fn stop(&mut self, step: Step) {
            assert!(self.open);
            self.open = false;
            match step {
                Step::Decode => self.decodes += 1,
                Step::Sweep { closed: false } => self.adds += 1,
                Step::Sweep { closed: true } => self.closes += 1,
            }
        }
    }

    #[test]
    fn replaying_a_capture_gives_the_reference_frames() {
        for (echo, other) in [
            (EchoMode::Never, EchoMode::EveryBin),
            (EchoMode::EveryBin, EchoMode::Never),
        ] {
            let bytes = capture_bytes(echo);
            let mut pump: std::boxed::Box<TestPump> = std::boxed::Box::new(Pump::unconfigured());
            let mut out = Vec::new();
            let mut tally = Tally::default();
            pump.replay(&mut &bytes[..], &mut out, None, &mut tally)
                .unwrap();
            let (want, closing_sweeps) = reference(&config_with(echo, Some(100_000)));
            assert_eq!(out, want);
            assert_eq!(
                (tally.adds, tally.closes),
                (13 - closing_sweeps, closing_sweeps)
            );
            // At least one decoder call per 64-byte piece.
            let pieces: usize = inputs()
                .iter()
                .map(|i| match i {
                    Input::Sweep(_, _, b) => b.len().div_ceil(REPLAY_CHUNK),
                    Input::Angle(..) => 0,
                })
                .sum();
            assert!(tally.decodes as usize >= pieces);
            // The echo mode can be overridden.
            let mut out = Vec::new();
            pump.replay(&mut &bytes[..], &mut out, Some(other), &mut ())
                .unwrap();
            assert_eq!(out, reference(&config_with(other, Some(100_000))).0);
        }
    }

    #[test]
    fn a_damaged_capture_names_the_entry() {
        let bytes = capture_bytes(EchoMode::Never);
        let mut pump: std::boxed::Box<TestPump> = std::boxed::Box::new(Pump::unconfigured());
        let mut out = Vec::new();
        // Entries: angle at byte 84 (13 bytes), angle at 97, sweep at 110 (21 + answer).
        // Cut inside the first entry.
        let r = pump.replay(&mut &bytes[..90], &mut out, None, &mut ());
        assert_eq!(
            r,
            Err(ReplayError::Capture {
                at_byte: HEADER_LEN as u64,
                error: CaptureError::Truncated
            })
        );
        // Cut inside the header.
        let r = pump.replay(&mut &bytes[..40], &mut out, None, &mut ());
        assert_eq!(
            r,
            Err(ReplayError::Capture {
                at_byte: 0,
                error: CaptureError::Truncated
            })
        );
        // An unknown entry kind where the second entry starts.
        let mut bad = bytes.clone();
        bad[HEADER_LEN + 13] = 9;
        let r = pump.replay(&mut &bad[..], &mut out, None, &mut ());
        assert_eq!(
            r,
            Err(ReplayError::Capture {
                at_byte: HEADER_LEN as u64 + 13,
                error: CaptureError::UnknownEntry(9)
            })
        );
        // A sweep answer cut short: the sweep entry is named.
        let r = pump.replay(
            &mut &bytes[..HEADER_LEN + 26 + 21 + 100],
            &mut out,
            None,
            &mut (),
        );
        assert_eq!(
            r,
            Err(ReplayError::Capture {
                at_byte: HEADER_LEN as u64 + 26,
                error: CaptureError::Truncated
            })
        );
        // Bad settings in an intact header.
        let mut bad = bytes.clone();
        bad[..8].copy_from_slice(b"NOTALINK");
        let r = pump.replay(&mut &bad[..], &mut out, None, &mut ());
        assert_eq!(
            r,
            Err(ReplayError::Capture {
                at_byte: 0,
                error: CaptureError::BadMagic
            })
        );
    }
}
