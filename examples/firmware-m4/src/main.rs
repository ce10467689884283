//! sweepgate on an emulated Cortex-M4F (QEMU `netduinoplus2`, STM32F405, 128 KiB RAM).
//!
//! Two parts. First the gate alone, at M = 256, 1024 and 2048. Then the board's real loop,
//! the core's `sweepgate::pump::Pump<1024, 8, 361>` (IEEE 488.2 block decoder, scan engine
//! `Scan<1024, 8, 361>`, preview frames): a link capture (`capture.bin` in QEMU's working
//! directory, made by `cargo run -p sweepgate-host --example capture -- make …`) is read over
//! semihosting and replayed through it (`Pump::replay`, 64 bytes of each sweep's answer at a
//! time); every closed bin goes out as a preview frame to `preview.bin`, which the host
//! compares with the same loop's output on the host. The capture is then replayed a second
//! time with the other echo setting, to count both gating paths.
//!
//! The pump lives in a `static` (`sweepgate_firmware_places`), built in place by
//! `Pump::configure`: the stack never holds a copy of the engine.
//!
//! Instruction counts: with QEMU's
//! `-icount shift=0` every instruction advances virtual time by 1 ns, and SysTick runs at the
//! 168 MHz core clock, so a SysTick difference of t ticks is t·1000/168 instructions (±6).
//! Every measured transform is also checked on the target (kernel path against FFT path); any
//! mismatch or error exits with status 1.
//!
//! With the gate figures (the default image), a capture of cuts (`cuts.bin`, made by
//! `capture make-cuts`: two traces per sweep, two cuts of a second axis) is then replayed,
//! when present, through the core's board loop of cuts `sweepgate::cut_pump::CutPump<256, 8,
//! 64, 64, 1>` (in a `static` too) into `cuts-preview.bin`, which `capture compare-cuts`
//! compares with the host's replay.
//!
//! Only text and integers are printed, by the firmware's own small printer (`say`): core
//! formatting would add several KiB of flash, its float formatting ~12 KB.
#![no_std]
#![no_main]

#[cfg(feature = "gate-figures")]
use core::f64::consts::PI;
use cortex_m::peripheral::{syst::SystClkSource, SYST};
use cortex_m_rt::entry;
use cortex_m_semihosting::debug;
use sweepgate::error::{CaptureError, PumpError, ReplayError};
use sweepgate::pump::{Meter, Step};
use sweepgate::scan::EchoMode;
#[cfg(feature = "gate-figures")]
use sweepgate::scan::IMPULSE_EVERY_DEFAULT;
#[cfg(feature = "gate-figures")]
use sweepgate::wire::impulse::ImpulseRecord;
#[cfg(feature = "gate-figures")]
use sweepgate::wire::preview::{encode_frame, PreviewRecord, MAX_FRAME};
#[cfg(feature = "gate-figures")]
use sweepgate::Complex32;
#[cfg(feature = "gate-figures")]
use sweepgate::{
    bins::{BinLayout, Bins, RevisitPolicy, SweepAngle},
    fft::Fft,
    gate::{Gate, GateConfig},
    grid::Grid,
    scan::{Scan, ScanConfig},
    track::Direction,
    window::WindowKind,
    wire::block::{emit, BlockConfig, BlockDecoder, ByteOrder, DecodeEvent as BlockEvent, Format},
};
use sweepgate_firmware_places::BoardPump;

#[macro_use]
mod say;
#[cfg(feature = "rcs-capture")]
mod rcs;

#[cfg(feature = "gate-figures")]
const ZERO: Complex32 = Complex32::new(0.0, 0.0);

/// SysTick as an instruction counter.
struct Counter;

impl Counter {
    fn start(mut syst: SYST) -> Self {
        syst.set_clock_source(SystClkSource::Core);
        syst.set_reload(0x00FF_FFFF);
        syst.clear_current();
        syst.enable_counter();
        Counter
    }

    fn now(&self) -> u32 {
        SYST::get_current()
    }

    /// Instructions between two readings (SysTick counts down, 24 bits: intervals must stay
    /// under 2^24 ticks ≈ 99.9 M instructions).
    fn instructions(&self, from: u32, to: u32) -> u32 {
        let ticks = from.wrapping_sub(to) & 0x00FF_FFFF;
        (ticks as u64 * 1000 / 168) as u32
    }

    fn measure(&self, f: impl FnOnce()) -> u32 {
        let a = self.now();
        f();
        let b = self.now();
        self.instructions(a, b)
    }
}

/// Painting the free RAM below the stack lets the firmware report its peak stack use.
mod stack {
    const PAINT: u32 = 0x5747_5354;
    extern "C" {
        static mut __sheap: u32;
        static _stack_start: u32;
    }

    fn bounds() -> (usize, usize) {
        // Only the addresses of the linker symbols are taken.
        (
            core::ptr::addr_of!(__sheap) as usize,
            core::ptr::addr_of!(_stack_start) as usize,
        )
    }

    /// Fills the RAM between the end of static data and a little below the current stack
    /// pointer with a pattern.
    pub fn paint() {
        let (lo, _) = bounds();
        let sp = cortex_m::register::msp::read() as usize - 256;
        let mut p = lo;
        while p < sp {
            // SAFETY: [lo, sp) is RAM owned by nobody: above .bss/.data, below the live stack.
            unsafe { core::ptr::write_volatile(p as *mut u32, PAINT) };
            p += 4;
        }
    }

    /// Largest stack depth reached since `paint`, bytes.
    pub fn peak() -> usize {
        let (lo, hi) = bounds();
        let mut p = lo;
        // SAFETY: reads RAM inside [lo, hi).
        while p < hi && unsafe { core::ptr::read_volatile(p as *const u32) } == PAINT {
            p += 4;
        }
        hi - p
    }

    /// RAM of the part, bytes.
    pub fn total() -> usize {
        bounds().1 - 0x2000_0000
    }

    /// Static RAM (.data + .bss), bytes.
    pub fn statics() -> usize {
        bounds().0 - 0x2000_0000
    }
}

#[cfg(feature = "gate-figures")]
/// Two paths — direct at 18 ns and an echo 0.4 strong 3 ns later — over the grid.
fn two_path<const M: usize>(grid: &Grid, raw: &mut [Complex32; M]) {
    for (n, v) in raw.iter_mut().take(grid.points()).enumerate() {
        let f = grid.frequency_hz(n);
        let mut z = ZERO;
        for (a, tau) in [(1.0, 18e-9), (0.4, 21e-9)] {
            let ph = -2.0 * PI * f * tau;
            z += Complex32::new((a * libm::cos(ph)) as f32, (a * libm::sin(ph)) as f32);
        }
        *v = z;
    }
}

/// Why the firmware stopped. Printed as a fixed sentence: formatting the core's error values
/// with `Debug` would add several KiB of flash.
#[allow(dead_code)] // the payloads are kept for a debugger
enum Failure {
    Gate(sweepgate::error::GateError),
    Grid(sweepgate::error::GridError),
    Mismatch {
        m: usize,
        f: usize,
    },
    NoCapture,
    CaptureEnds,
    Capture(CaptureError),
    Scan(sweepgate::error::ScanConfigError),
    NotConfigured,
    Output,
    Frame,
    Taken,
    Decode,
    ScanCounts,
    #[cfg(feature = "rcs-capture")]
    RcsEnds,
    #[cfg(feature = "rcs-capture")]
    RcsFormat,
    #[cfg(feature = "rcs-capture")]
    Rcs(sweepgate::error::RcsError),
}

impl From<ReplayError<core::convert::Infallible, embedded_io::ErrorKind>> for Failure {
    fn from(e: ReplayError<core::convert::Infallible, embedded_io::ErrorKind>) -> Self {
        match e {
            ReplayError::Read(never) => match never {},
            ReplayError::Capture {
                error: CaptureError::Truncated,
                ..
            } => Failure::CaptureEnds,
            ReplayError::Capture { error, .. } => Failure::Capture(error),
            ReplayError::Config(e) => Failure::Scan(e),
            ReplayError::Pump(PumpError::NotConfigured) => Failure::NotConfigured,
            ReplayError::Pump(PumpError::Emit(_)) => Failure::Frame,
            ReplayError::Pump(PumpError::Write(_)) => Failure::Output,
        }
    }
}

impl Failure {
    fn what(&self) -> &'static str {
        match self {
            Failure::Gate(_) => "the gate settings were refused",
            Failure::Grid(_) => "the frequency grid was refused",
            Failure::Mismatch { .. } => "the kernel path disagrees with the FFT path",
            Failure::NoCapture => "capture.bin not found in QEMU's working directory",
            Failure::CaptureEnds => "capture.bin ends inside an entry",
            Failure::Capture(_) => "capture.bin is not a valid link capture",
            Failure::Scan(_) => "the scan settings were refused",
            Failure::NotConfigured => "the board loop was not configured",
            Failure::Output => "preview.bin could not be written",
            Failure::Frame => "a preview record did not fit its frame",
            Failure::Taken => "the board loop's storage was already taken",
            Failure::Decode => "the block decoder did not return the sweep it was given",
            Failure::ScanCounts => "the scan measurement did not bin and close as planned",
            #[cfg(feature = "rcs-capture")]
            Failure::RcsEnds => "rcs.bin ends inside a field",
            #[cfg(feature = "rcs-capture")]
            Failure::RcsFormat => "rcs.bin is not an RCS capture for this board",
            #[cfg(feature = "rcs-capture")]
            Failure::Rcs(_) => "the RCS chain refused the capture's data",
        }
    }
}

/// Host files over semihosting.
mod host {
    use cortex_m_semihosting::{nr, syscall};

    /// Opens a host file; `path` ends with a NUL byte.
    pub fn open(path: &[u8], mode: usize) -> Option<usize> {
        // SAFETY: SYS_OPEN reads `path.len() - 1` bytes of a live, NUL-terminated buffer.
        let r = unsafe { syscall!(OPEN, path.as_ptr(), mode, path.len() - 1) } as isize;
        (r >= 0).then_some(r as usize)
    }

    pub const READ: usize = nr::open::R_BINARY;
    pub const WRITE: usize = nr::open::W_TRUNC_BINARY;

    /// Reads up to `buf.len()` bytes; returns how many were read (0 at the end).
    pub fn read(fd: usize, buf: &mut [u8]) -> usize {
        // SAFETY: SYS_READ writes at most `buf.len()` bytes into `buf`; it returns the
        // number of bytes NOT read.
        let not_read = unsafe { syscall!(READ, fd, buf.as_mut_ptr(), buf.len()) };
        buf.len().saturating_sub(not_read)
    }

    /// Writes all of `buf`.
    pub fn write(fd: usize, buf: &[u8]) -> bool {
        // SAFETY: SYS_WRITE reads `buf.len()` bytes of a live buffer; 0 means all written.
        unsafe { syscall!(WRITE, fd, buf.as_ptr(), buf.len()) == 0 }
    }

    pub fn close(fd: usize) {
        // SAFETY: closes a handle this module opened.
        unsafe {
            syscall!(CLOSE, fd);
        }
    }
}

/// Buffered reads of a host file.
struct HostReader {
    fd: usize,
    buf: [u8; 512],
    at: usize,
    len: usize,
}

impl HostReader {
    fn open(path: &[u8]) -> Option<Self> {
        Some(Self {
            fd: host::open(path, host::READ)?,
            buf: [0; 512],
            at: 0,
            len: 0,
        })
    }
}

impl embedded_io::ErrorType for HostReader {
    type Error = core::convert::Infallible;
}

impl embedded_io::Read for HostReader {
    /// Up to `out.len()` bytes; 0 at the end of the file.
    fn read(&mut self, out: &mut [u8]) -> Result<usize, Self::Error> {
        if self.at == self.len {
            self.len = host::read(self.fd, &mut self.buf);
            self.at = 0;
        }
        let n = (self.len - self.at).min(out.len());
        out[..n].copy_from_slice(&self.buf[self.at..self.at + n]);
        self.at += n;
        Ok(n)
    }
}

impl Drop for HostReader {
    fn drop(&mut self) {
        host::close(self.fd);
    }
}

/// Preview frames to a host file, or nowhere (`fd` `None`: the frames of the second pass
/// are built, counted and dropped).
struct HostWriter {
    fd: Option<usize>,
}

impl embedded_io::ErrorType for HostWriter {
    type Error = embedded_io::ErrorKind;
}

impl embedded_io::Write for HostWriter {
    fn write(&mut self, buf: &[u8]) -> Result<usize, Self::Error> {
        match self.fd {
            Some(fd) if !host::write(fd, buf) => Err(embedded_io::ErrorKind::Other),
            _ => Ok(buf.len()),
        }
    }

    fn flush(&mut self) -> Result<(), Self::Error> {
        Ok(())
    }
}

/// What one pass over the capture measured.
#[derive(Default)]
struct Pass {
    decode: u64,
    adds: u32,
    add_instr: u64,
    closes: u32,
    close_instr: u64,
}

/// Counts the instructions of each step of the loop.
struct Timing<'a> {
    c: &'a Counter,
    t0: u32,
    pass: Pass,
}

impl Meter for Timing<'_> {
    #[inline(always)]
    fn start(&mut self) {
        self.t0 = self.c.now();
    }

    #[inline(always)]
    fn stop(&mut self, step: Step) {
        let n = self.c.instructions(self.t0, self.c.now()) as u64;
        let p = &mut self.pass;
        match step {
            Step::Decode => p.decode += n,
            Step::Sweep { closed: false } => {
                p.adds += 1;
                p.add_instr += n;
            }
            Step::Sweep { closed: true } => {
                p.closes += 1;
                p.close_instr += n;
            }
        }
    }
}

/// Replays the capture through the board loop, with `echo` instead of the capture's echo
/// mode when given; writes preview frames to `out` when given.
#[inline(never)]
fn stream(
    pump: &mut BoardPump,
    c: &Counter,
    echo: Option<EchoMode>,
    out: Option<usize>,
) -> Result<Pass, Failure> {
    let mut r = HostReader::open(b"capture.bin\0").ok_or(Failure::NoCapture)?;
    let mut w = HostWriter { fd: out };
    let mut timing = Timing {
        c,
        t0: 0,
        pass: Pass::default(),
    };
    pump.replay(&mut r, &mut w, echo, &mut timing)?;
    let k = pump.scan().counters();
    say!(
        "capture (",
        match pump.scan().config().echo {
            EchoMode::Never => "kernel path",
            EchoMode::EveryBin => "FFT path with echo level",
        },
        "): ",
        pump.counters().sweeps_decoded,
        " sweeps decoded (",
        pump.decoder().map_or(0, |d| d.counters().rejected()),
        " blocks rejected), ",
        k.sweeps_binned,
        " binned, ",
        k.sweeps_rejected(),
        " rejected, ",
        k.bins_closed,
        " bins closed, ",
        pump.counters().frames_sent,
        " preview frames (",
        pump.counters().impulses_sent,
        " impulse-response records)",
    );
    Ok(timing.pass)
}

fn per(total: u64, n: u32) -> u64 {
    if n == 0 {
        0
    } else {
        total / n as u64
    }
}

/// Returns the board loop's storage for the loop of cuts.
fn capture_case(c: &Counter) -> Result<&'static mut BoardPump, Failure> {
    // The one board loop, in static storage: configured in place by each replay.
    let pump = sweepgate_firmware_places::board_pump().ok_or(Failure::Taken)?;
    // First pass with the capture's own settings, writing the preview frames; second pass
    // with the other echo setting, frames dropped, so both gating paths are measured.
    let out = host::open(b"preview.bin\0", host::WRITE).ok_or(Failure::NoCapture)?;
    let first = stream(pump, c, None, Some(out));
    host::close(out);
    let first = first?;
    let first_echo = pump.scan().config().echo;
    let other = match first_echo {
        EchoMode::Never => EchoMode::EveryBin,
        EchoMode::EveryBin => EchoMode::Never,
    };
    let second = stream(pump, c, Some(other), None)?;
    let (kernel, fft) = match first_echo {
        EchoMode::Never => (first, second),
        EchoMode::EveryBin => (second, first),
    };
    say!(
        "board loop: decode ",
        per(kernel.decode, kernel.adds + kernel.closes),
        " instructions per sweep; add a sweep to the open bin ",
        per(kernel.add_instr, kernel.adds),
    );
    say!(
        "board loop: add a sweep and close a bin, M=1024 F=8: kernel path ",
        per(kernel.close_instr, kernel.closes),
        " | FFT path with echo level ",
        per(fft.close_instr, fft.closes),
    );
    Ok(pump)
}

/// Replays `cuts.bin`, when present, through the board loop of cuts into `cuts-preview.bin`.
#[cfg(feature = "gate-figures")]
/// The loop of cuts takes the storage of the one-trace loop (`board`), whose work is done.
fn cuts_case(c: &Counter, board: &'static mut BoardPump) -> Result<(), Failure> {
    let Some(mut r) = HostReader::open(b"cuts.bin\0") else {
        say!("capture of cuts: cuts.bin not in QEMU's working directory, not replayed");
        return Ok(());
    };
    let pump = sweepgate_firmware_places::cut_pump(board);
    let out = host::open(b"cuts-preview.bin\0", host::WRITE).ok_or(Failure::NoCapture)?;
    let mut w = HostWriter { fd: Some(out) };
    let mut result = Ok(());
    let n = c.measure(|| result = pump.replay(&mut r, &mut w));
    host::close(out);
    result?;
    let k = pump.scan().counters();
    say!(
        "capture of cuts: ",
        pump.counters().traces_decoded,
        " traces decoded, ",
        k.sweeps_binned(),
        " sweeps binned, ",
        k.sweeps_rejected(),
        " rejected, ",
        k.cuts_started,
        " cuts, ",
        k.scan.bins_closed,
        " bins closed, ",
        pump.counters().frames_sent,
        " preview frames, ",
        n,
        " instructions in all",
    );
    say!(
        "memory: CutPump<256, 8, 64, 64, 1> ",
        core::mem::size_of::<sweepgate_firmware_places::BoardCutPump>(),
        " bytes in static RAM",
    );
    Ok(())
}

#[cfg(feature = "gate-figures")]
/// What one kernel-path measurement counted, instructions.
struct KernelFigures {
    /// [`Gate::apply_kernels`]: the band window applied on the fly.
    on_the_fly: u32,
    /// [`Gate::window`] over the sweep in place (the other way to the same values).
    window: u32,
    /// [`Gate::apply_kernels_windowed`]: the F dot products alone.
    dots: u32,
}

#[cfg(feature = "gate-figures")]
/// Kernel path for F frequencies spread over the band, timed two ways and checked against
/// the FFT path. `scratch` is overwritten (memory is tight at M = 2048).
#[inline(never)]
fn kernel_case<const M: usize, const F: usize>(
    c: &Counter,
    gate: &Gate<M>,
    raw: &[Complex32; M],
    scratch: &mut [Complex32; M],
) -> Result<KernelFigures, Failure>
where
    [Complex32; M]: Fft,
{
    let k = gate.points();
    let idx = spread::<F>(k);
    gate.apply(raw, scratch);
    let reference = idx.map(|i| scratch[i]);
    let kernels = gate.kernels(idx).map_err(Failure::Gate)?;
    let mut out = [ZERO; F];
    let on_the_fly = c.measure(|| gate.apply_kernels(&kernels, raw, &mut out));
    check(&out, &reference, M, F)?;
    // The other way: window the sweep in place, then one dot product per frequency (the
    // scan engine windows on the fly, as above, and scales the F results by 1/count).
    scratch.copy_from_slice(raw);
    let window = c.measure(|| gate.window(scratch, 1.0));
    let dots = c.measure(|| gate.apply_kernels_windowed(&kernels, scratch, &mut out));
    check(&out, &reference, M, F)?;
    Ok(KernelFigures {
        on_the_fly,
        window,
        dots,
    })
}

#[cfg(feature = "gate-figures")]
/// F grid indices spread evenly over K points.
fn spread<const F: usize>(k: usize) -> [usize; F] {
    let mut idx = [0usize; F];
    for (i, v) in idx.iter_mut().enumerate() {
        *v = (i + 1) * k / (F + 1);
    }
    idx
}

#[cfg(feature = "gate-figures")]
/// A ratio printed with one decimal, from integers (no float formatting in the image).
struct Tenths(u64);

#[cfg(feature = "gate-figures")]
impl Tenths {
    /// `total / count`, rounded to a tenth.
    fn of(total: u64, count: u64) -> Self {
        Tenths((total * 10 + count / 2) / count.max(1))
    }
}

#[cfg(feature = "gate-figures")]
impl say::Put for Tenths {
    fn put(&self, line: &mut say::Line) {
        line.unsigned(self.0 / 10);
        line.bytes(b".");
        line.unsigned(self.0 % 10);
    }
}

#[cfg(feature = "gate-figures")]
fn check(out: &[Complex32], reference: &[Complex32], m: usize, f: usize) -> Result<(), Failure> {
    for (o, r) in out.iter().zip(reference.iter()) {
        if (*o - *r).norm() > 1e-4 * r.norm() {
            return Err(Failure::Mismatch { m, f });
        }
    }
    Ok(())
}

#[cfg(feature = "gate-figures")]
/// The gate measured on the board: 8–12 GHz (an X-band bench range of our own), a Kaiser
/// band window, a 2 ns Kaiser gate at 18 ns.
fn bench_gate(points: usize) -> Result<GateConfig, Failure> {
    let grid = Grid::from_start_stop(8e9, 12e9, points).map_err(Failure::Grid)?;
    Ok(GateConfig {
        grid,
        band_window: WindowKind::Kaiser { beta: 6.0 },
        center_s: 18e-9,
        span_s: 2e-9,
        shape: WindowKind::Kaiser { beta: 4.0 },
        renormalize: true,
    })
}

/// The impulse-response preview record's cost on the board: sampling an M-point impulse
/// response near the gate (what the engine does for one closed bin in
/// `IMPULSE_EVERY_DEFAULT`, between the inverse FFT and the gating) and framing it.
#[cfg(feature = "gate-figures")]
#[inline(never)]
fn impulse_figures<const M: usize>(
    c: &Counter,
    gate: &Gate<M>,
    raw: &[Complex32; M],
    h: &mut [Complex32; M],
) where
    [Complex32; M]: Fft,
{
    gate.impulse_response(raw, h);
    let cfg = gate.config();
    let mut rec = ImpulseRecord::empty();
    let dt_s = cfg.grid.time_step_s(M);
    let sample = c.measure(|| rec.sample(h, dt_s, cfg.center_s, cfg.span_s));
    let points = rec.levels.len();
    let record: PreviewRecord<8> = PreviewRecord::Impulse(rec);
    let mut frame = [0u8; MAX_FRAME];
    let mut n = 0;
    let framing = c.measure(|| n = encode_frame(&record, 0, &mut frame).unwrap_or(0));
    let every = u32::from(IMPULSE_EVERY_DEFAULT);
    say!(
        "  impulse record (",
        points,
        " points, ",
        n,
        " bytes framed): sample ",
        sample,
        " | frame ",
        framing,
        " | per closed bin at 1 in ",
        every,
        ": ",
        (sample + framing) / every,
    );
}

#[cfg(feature = "gate-figures")]
#[inline(never)]
fn gate_case<const M: usize>(c: &Counter, points: usize) -> Result<[KernelFigures; 3], Failure>
where
    [Complex32; M]: Fft,
{
    let cfg = bench_gate(points)?;
    let grid = cfg.grid;
    let t0 = c.now();
    // Built in place: one copy of the gate on the stack (48 KiB at M = 2048).
    let mut gate = Gate::<M>::unconfigured();
    gate.configure(&cfg).map_err(Failure::Gate)?;
    let setup = c.instructions(t0, c.now());
    let gate = &gate;
    let mut raw = [ZERO; M];
    two_path(&grid, &mut raw);
    let mut out = [ZERO; M];
    let mut echo_db = 0.0;
    let fft_path = c.measure(|| echo_db = gate.apply(&raw, &mut out));
    impulse_figures(c, gate, &raw, &mut out);
    let f1 = kernel_case::<M, 1>(c, gate, &raw, &mut out)?;
    let f4 = kernel_case::<M, 4>(c, gate, &raw, &mut out)?;
    let f8 = kernel_case::<M, 8>(c, gate, &raw, &mut out)?;
    say!(
        "gate M=",
        M,
        " K=",
        points,
        ": set-up ",
        setup,
        " | FFT path ",
        fft_path,
        " (echo ",
        echo_db as i32,
        " dB)",
    );
    say!(
        "  kernel path, window on the fly: F=1 ",
        f1.on_the_fly,
        " F=4 ",
        f4.on_the_fly,
        " F=8 ",
        f8.on_the_fly,
    );
    say!(
        "  kernel path, window in place then dot products: F=1 ",
        f1.window + f1.dots,
        " F=4 ",
        f4.window + f4.dots,
        " F=8 ",
        f8.window + f8.dots,
    );
    // Per complex multiply-accumulate: F·K of them per call.
    let k = points as u64;
    say!(
        "  per complex multiply-accumulate, window on the fly: F=1 ",
        Tenths::of(f1.on_the_fly as u64, k),
        " F=4 ",
        Tenths::of(f4.on_the_fly as u64, 4 * k),
        " F=8 ",
        Tenths::of(f8.on_the_fly as u64, 8 * k),
    );
    say!(
        "  per complex multiply-accumulate, dot products alone: F=1 ",
        Tenths::of(f1.dots as u64, k),
        " F=4 ",
        Tenths::of(f4.dots as u64, 4 * k),
        " F=8 ",
        Tenths::of(f8.dots as u64, 8 * k),
        " (window in place: ",
        Tenths::of(f8.window as u64, k),
        " per point)",
    );
    Ok([f1, f4, f8])
}

#[cfg(feature = "gate-figures")]
/// Room for the largest block measured: `#5`, five digits, 1601 REAL,32 points, newline.
const BLOCK_BYTES: usize = 16 + 8 * 1601;

#[cfg(feature = "gate-figures")]
/// One REAL,32 block of K points decoded from 64-byte chunks, as the board loop feeds it;
/// returns the instructions inside the decoder's `feed` calls (each timed as the board loop
/// times them) and those of the whole chunk loop around them. The decoded sweep must equal
/// the one sent.
#[inline(never)]
fn decode_case<const M: usize>(
    c: &Counter,
    points: usize,
    order: ByteOrder,
) -> Result<(u32, u32), Failure>
where
    [Complex32; M]: Fft,
{
    let grid = Grid::from_start_stop(8e9, 12e9, points).map_err(Failure::Grid)?;
    let mut sweep = [ZERO; M];
    two_path(&grid, &mut sweep);
    let mut bytes = [0u8; BLOCK_BYTES];
    let n =
        emit(Format::Real32, order, &sweep[..points], &mut bytes).map_err(|_| Failure::Decode)?;
    let mut decoder = BlockDecoder::new(BlockConfig::for_grid(&grid, Format::Real32, order));
    let mut out = [ZERO; M];
    let mut sweeps = 0u32;
    let mut in_feed = 0u32;
    let whole = c.measure(|| {
        for chunk in bytes[..n].chunks(64) {
            let mut rest = chunk;
            while !rest.is_empty() {
                let t0 = c.now();
                let fed = decoder.feed(rest, &mut out);
                in_feed += c.instructions(t0, c.now());
                rest = rest.get(fed.consumed..).unwrap_or_default();
                if let Some(BlockEvent::Sweep { .. }) = fed.event {
                    sweeps += 1;
                }
            }
        }
    });
    if sweeps != 1 || out[..points] != sweep[..points] {
        return Err(Failure::Decode);
    }
    Ok((in_feed, whole))
}

#[cfg(feature = "gate-figures")]
/// An unusable value (the SCPI not-a-number code, 9.91e37: SCPI-99 Vol. 1, as the core's
/// `wire::block` cites it) anywhere in a 201-point REAL,32
/// block, real or imaginary part, in either byte order, rejects the block: the board's copy
/// of whole samples checks them by an OR of the words it copied (the carried sample, the
/// odd one, the pairs), and the general path must then find the value.
#[inline(never)]
fn decode_rejects_unusable() -> Result<(), Failure> {
    const K: usize = 201;
    let grid = Grid::from_start_stop(8e9, 12e9, K).map_err(Failure::Grid)?;
    let mut sweep = [ZERO; 256];
    two_path(&grid, &mut sweep);
    let mut bytes = [0u8; 16 + 8 * K];
    let mut out = [ZERO; K];
    let mut cases = 0u32;
    for order in [ByteOrder::Normal, ByteOrder::Swapped] {
        for at in [0, 1, 6, 7, 8, 9, 15, 100, K - 2, K - 1] {
            for part in 0..2 {
                let mut bad = sweep;
                let v = if part == 0 {
                    &mut bad[at].re
                } else {
                    &mut bad[at].im
                };
                *v = 9.91e37;
                let n = emit(Format::Real32, order, &bad[..K], &mut bytes)
                    .map_err(|_| Failure::Decode)?;
                let mut decoder =
                    BlockDecoder::new(BlockConfig::for_grid(&grid, Format::Real32, order));
                let (mut swept, mut rejected) = (0u32, 0u32);
                for chunk in bytes[..n].chunks(64) {
                    let mut rest = chunk;
                    while !rest.is_empty() {
                        let fed = decoder.feed(rest, &mut out);
                        rest = rest.get(fed.consumed..).unwrap_or_default();
                        match fed.event {
                            Some(BlockEvent::Sweep { .. }) => swept += 1,
                            Some(BlockEvent::Rejected(_)) => rejected += 1,
                            None => {}
                        }
                    }
                }
                if swept != 0 || rejected != 1 || decoder.counters().non_finite != 1 {
                    return Err(Failure::Decode);
                }
                cases += 1;
            }
        }
    }
    say!(
        "decode REAL,32 K=201: an unusable value rejected the block in each of ",
        cases,
        " places and byte orders",
    );
    Ok(())
}

#[cfg(feature = "gate-figures")]
#[inline(never)]
fn decode_figures<const M: usize>(c: &Counter, points: usize) -> Result<u32, Failure>
where
    [Complex32; M]: Fft,
{
    let normal = decode_case::<M>(c, points, ByteOrder::Normal)?;
    let swapped = decode_case::<M>(c, points, ByteOrder::Swapped)?;
    let floats = 2 * points as u64;
    say!(
        "decode REAL,32 K=",
        points,
        " in 64-byte chunks, in feed: NORMal ",
        normal.0,
        " per sweep, ",
        Tenths::of(normal.0 as u64, floats),
        " per float | SWAPped ",
        swapped.0,
        " per sweep, ",
        Tenths::of(swapped.0 as u64, floats),
        " per float",
    );
    say!(
        "  with the chunk loop around feed (and its timing): NORMal ",
        Tenths::of(normal.1 as u64, floats),
        " per float | SWAPped ",
        Tenths::of(swapped.1 as u64, floats),
        " per float",
    );
    Ok(normal.0)
}

#[cfg(feature = "gate-figures")]
/// The scan engine `Scan<M, F, 8>` on a sector of 1° bins at 10°/s with one 20 ms sweep
/// every 50 ms (two per bin), kernel path: returns the instructions of a sweep added to the
/// open bin and of a sweep that also closes a bin (means over the run).
#[inline(never)]
fn scan_case<const M: usize, const F: usize>(
    c: &Counter,
    points: usize,
) -> Result<(u32, u32), Failure>
where
    [Complex32; M]: Fft,
{
    let gate = bench_gate(points)?;
    let layout = BinLayout::sector(0.0, 7.0, 1.0).map_err(|_| Failure::ScanCounts)?;
    let mut sc = ScanConfig::new(layout);
    sc.echo = EchoMode::Never;
    // Bins close when a sweep lands in the next one, so every close is in a sweep's count.
    sc.leave_close_us = None;
    // Used in place inside the Result: moving the engine out would put a second copy on the
    // stack.
    let mut built = Scan::<M, F, 8>::new(&gate, spread::<F>(points), sc);
    let scan = match &mut built {
        Ok(s) => s,
        Err(e) => return Err(Failure::Scan(*e)),
    };
    let mut sweep = [ZERO; M];
    two_path(&gate.grid, &mut sweep);
    let (mut adds, mut add_instr, mut closes, mut close_instr) = (0u64, 0u64, 0u64, 0u64);
    for i in 0..=70u64 {
        let t_us = i * 10_000;
        let _ = scan.push_angle(t_us, -0.45 + i as f32 * 0.1);
        if i % 5 == 4 {
            let before = scan.counters().bins_closed;
            let t0 = c.now();
            let events = scan.push_sweep(t_us - 30_000, t_us - 10_000, &sweep[..points]);
            let n = c.instructions(t0, c.now()) as u64;
            drop(events);
            if scan.counters().bins_closed > before {
                closes += 1;
                close_instr += n;
            } else {
                adds += 1;
                add_instr += n;
            }
        }
    }
    let k = scan.counters();
    if k.sweeps_binned != 14 || closes != 6 || adds != 8 {
        return Err(Failure::ScanCounts);
    }
    Ok(((add_instr / adds) as u32, (close_instr / closes) as u32))
}

#[cfg(feature = "gate-figures")]
/// The open-bin accumulator `Bins<M, 8>` alone, two sweeps per 1° bin: returns the
/// instructions of adding a sweep to the open bin and the bookkeeping of closing one
/// (a sweep that closes a bin, less an add; the gating the engine then does is measured by
/// `kernel_case`).
#[inline(never)]
fn bins_case<const M: usize>(c: &Counter, points: usize) -> Result<(u32, u32), Failure>
where
    [Complex32; M]: Fft,
{
    let layout = BinLayout::sector(0.0, 7.0, 1.0).map_err(|_| Failure::ScanCounts)?;
    let mut built = Bins::<M, 8>::new(layout, RevisitPolicy::Replace, 1);
    let bins = match &mut built {
        Ok(b) => b,
        Err(_) => return Err(Failure::ScanCounts),
    };
    let grid = Grid::from_start_stop(8e9, 12e9, points).map_err(Failure::Grid)?;
    let mut sweep = [ZERO; M];
    two_path(&grid, &mut sweep);
    let (mut adds, mut add_instr, mut closes, mut close_instr) = (0u64, 0u64, 0u64, 0u64);
    for i in 0..14u16 {
        let angle = SweepAngle {
            mid_deg: -0.25 + 0.5 * i as f32,
            smear_deg: 0.2,
            direction: Direction::Forward,
            moving: false,
            extrapolated: false,
            end_us: 50_000 * u64::from(i),
        };
        let t0 = c.now();
        let (res, closed) = bins.add(i / 2, &angle, &sweep[..points], |_, _, _| ());
        let n = c.instructions(t0, c.now()) as u64;
        if res.is_err() {
            return Err(Failure::ScanCounts);
        }
        match closed {
            Some(()) => {
                closes += 1;
                close_instr += n;
            }
            None if i > 0 => {
                adds += 1;
                add_instr += n;
            }
            // The very first sweep opens the first bin: neither a plain add nor a close.
            None => {}
        }
    }
    if closes != 6 || adds != 7 {
        return Err(Failure::ScanCounts);
    }
    let add = add_instr / adds;
    Ok((
        add as u32,
        (close_instr / closes).saturating_sub(add) as u32,
    ))
}

#[cfg(feature = "gate-figures")]
/// Per-sweep and per-bin work at one K: decoding, adding to the open bin, closing it with
/// the kernel path for F = 1, 4, 8 (the window on the fly, as the scan engine does, and the
/// bookkeeping). `kernels`
/// are `kernel_case`'s figures at this K. With `ENGINE`, the scan engine itself is measured
/// too (at M = 2048 it does not fit the part's RAM beside the measurement).
#[inline(never)]
fn sweep_figures<const M: usize, const ENGINE: bool>(
    c: &Counter,
    points: usize,
    kernels: &[KernelFigures; 3],
) -> Result<(), Failure>
where
    [Complex32; M]: Fft,
{
    let decode = decode_figures::<M>(c, points)?;
    let (add, bookkeeping) = bins_case::<M>(c, points)?;
    for (f, k) in [1, 4, 8].into_iter().zip(kernels.iter()) {
        let close = k.on_the_fly + bookkeeping;
        say!(
            "sweep M=",
            M,
            " K=",
            points,
            " F=",
            f,
            ": per sweep decode ",
            decode,
            " + add ",
            add,
            " = ",
            decode + add,
            " | per bin close ",
            close,
            " (kernel path, window on the fly ",
            k.on_the_fly,
            " + bookkeeping ",
            bookkeeping,
            ")",
        );
    }
    if ENGINE {
        let engine = [
            scan_case::<M, 1>(c, points)?,
            scan_case::<M, 4>(c, points)?,
            scan_case::<M, 8>(c, points)?,
        ];
        for (f, (add, add_close)) in [1, 4, 8].into_iter().zip(engine) {
            say!(
                "  the scan engine itself, F=",
                f,
                ": add a sweep ",
                add,
                " | add a sweep and close a bin ",
                add_close,
            );
        }
    }
    Ok(())
}

#[cfg(feature = "gate-figures")]
#[inline(never)]
fn fft_case<const M: usize>(c: &Counter)
where
    [Complex32; M]: Fft,
{
    let mut buf = [Complex32::new(0.5, -0.25); M];
    let fwd = c.measure(|| buf.forward());
    let inv = c.measure(|| buf.inverse());
    say!("microfft M=", M, ": forward ", fwd, " inverse ", inv);
}

fn run(c: &Counter) -> Result<(), Failure> {
    let empty = c.measure(|| {});
    say!("counter overhead ", empty, " instructions");
    #[cfg(feature = "gate-figures")]
    {
        fft_case::<256>(c);
        fft_case::<1024>(c);
        fft_case::<2048>(c);
        let k201 = gate_case::<256>(c, 201)?;
        let k801 = gate_case::<1024>(c, 801)?;
        let k1601 = gate_case::<2048>(c, 1601)?;
        sweep_figures::<256, true>(c, 201, &k201)?;
        decode_rejects_unusable()?;
        sweep_figures::<1024, true>(c, 801, &k801)?;
        sweep_figures::<2048, false>(c, 1601, &k1601)?;
        say!(
            "memory: peak stack of the gate measurements ",
            stack::peak(),
            " bytes"
        );
        stack::paint();
    }
    #[cfg_attr(not(feature = "gate-figures"), allow(unused_variables))]
    let board = capture_case(c)?;
    #[cfg(feature = "gate-figures")]
    cuts_case(c, board)?;
    say!(
        "memory: peak stack of the board loop ",
        stack::peak(),
        " bytes (Pump<1024, 8, 361> ",
        core::mem::size_of::<BoardPump>(),
        " bytes and its engine Scan<1024, 8, 361> ",
        core::mem::size_of::<sweepgate::scan::Scan<1024, 8, 361>>(),
        " bytes in static RAM)",
    );
    #[cfg(feature = "rcs-capture")]
    rcs::case(c)?;
    Ok(())
}

#[entry]
fn main() -> ! {
    stack::paint();
    let code = match cortex_m::Peripherals::take() {
        None => {
            say!("error: peripherals already taken");
            debug::EXIT_FAILURE
        }
        Some(p) => {
            let c = Counter::start(p.SYST);
            match run(&c) {
                Ok(()) => {
                    say!(
                        "memory: static RAM ",
                        stack::statics(),
                        " bytes, ",
                        stack::total(),
                        " bytes of RAM in all",
                    );
                    say!("firmware: all checks passed");
                    debug::EXIT_SUCCESS
                }
                Err(e) => {
                    say!("error: ", e.what());
                    debug::EXIT_FAILURE
                }
            }
        }
    };
    debug::exit(code);
    loop {
        cortex_m::asm::wfi();
    }
}
