//! sweepgate on an emulated Cortex-M4F (QEMU `netduinoplus2`, STM32F405, 128 KiB RAM).
//!
//! Runs the core's gate on the target and prints instruction counts: with QEMU's
//! `-icount shift=0` every instruction advances virtual time by 1 ns, and SysTick runs at the
//! 168 MHz core clock, so a SysTick difference of t ticks is t·1000/168 instructions (±6).
//! Every measured transform is also checked on the target (kernel path against FFT path); any
//! mismatch or error exits with status 1.
//!
//! Only integers are printed: core float formatting would add ~12 KB of flash.
#![no_std]
#![no_main]

use core::f64::consts::PI;
use cortex_m::peripheral::{syst::SystClkSource, SYST};
use cortex_m_rt::entry;
use cortex_m_semihosting::{debug, hprintln};
use panic_semihosting as _;
use sweepgate::fft::Fft;
use sweepgate::gate::{Gate, GateConfig};
use sweepgate::grid::Grid;
use sweepgate::window::WindowKind;
use sweepgate::Complex32;

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

    /// Static RAM (.data + .bss), bytes.
    pub fn statics() -> usize {
        bounds().0 - 0x2000_0000
    }
}

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

#[derive(Debug)]
#[allow(dead_code)] // fields are read through Debug when printed
enum Failure {
    Gate(sweepgate::error::GateError),
    Grid(sweepgate::error::GridError),
    Mismatch { m: usize, f: usize },
}

/// Kernel path for F frequencies spread over the band, timed two ways and checked against
/// the FFT path. `scratch` is overwritten (memory is tight at M = 2048).
#[inline(never)]
fn kernel_case<const M: usize, const F: usize>(
    c: &Counter,
    gate: &Gate<M>,
    raw: &[Complex32; M],
    scratch: &mut [Complex32; M],
) -> Result<(u32, u32), Failure>
where
    [Complex32; M]: Fft,
{
    let k = gate.points();
    let mut idx = [0usize; F];
    for (i, v) in idx.iter_mut().enumerate() {
        *v = (i + 1) * k / (F + 1);
    }
    gate.apply(raw, scratch);
    let reference = idx.map(|i| scratch[i]);
    let kernels = gate.kernels(idx).map_err(Failure::Gate)?;
    let mut out = [ZERO; F];
    let on_the_fly = c.measure(|| gate.apply_kernels(&kernels, raw, &mut out));
    check(&out, &reference, M, F)?;
    // As the scan engine does it: window the bin's sum in place (folding in 1/count), then
    // one dot product per frequency.
    scratch.copy_from_slice(raw);
    let windowed = c.measure(|| {
        gate.window(scratch, 1.0);
        gate.apply_kernels_windowed(&kernels, scratch, &mut out);
    });
    check(&out, &reference, M, F)?;
    Ok((on_the_fly, windowed))
}

fn check(out: &[Complex32], reference: &[Complex32], m: usize, f: usize) -> Result<(), Failure> {
    for (o, r) in out.iter().zip(reference.iter()) {
        if (*o - *r).norm() > 1e-4 * r.norm() {
            return Err(Failure::Mismatch { m, f });
        }
    }
    Ok(())
}

#[inline(never)]
fn gate_case<const M: usize>(c: &Counter, points: usize) -> Result<(), Failure>
where
    [Complex32; M]: Fft,
{
    // 8–12 GHz: an X-band bench range of our own.
    let grid = Grid::from_start_stop(8e9, 12e9, points).map_err(Failure::Grid)?;
    let cfg = GateConfig {
        grid,
        band_window: WindowKind::Kaiser { beta: 6.0 },
        center_s: 18e-9,
        span_s: 2e-9,
        shape: WindowKind::Kaiser { beta: 4.0 },
        renormalize: true,
    };
    let t0 = c.now();
    let gate = Gate::<M>::new(&cfg).map_err(Failure::Gate)?;
    let setup = c.instructions(t0, c.now());
    let mut raw = [ZERO; M];
    two_path(&grid, &mut raw);
    let mut out = [ZERO; M];
    let mut echo_db = 0.0;
    let fft_path = c.measure(|| echo_db = gate.apply(&raw, &mut out));
    let f1 = kernel_case::<M, 1>(c, &gate, &raw, &mut out)?;
    let f4 = kernel_case::<M, 4>(c, &gate, &raw, &mut out)?;
    let f8 = kernel_case::<M, 8>(c, &gate, &raw, &mut out)?;
    hprintln!(
        "gate M={} K={}: set-up {} | FFT path {} (echo {} dB)",
        M,
        points,
        setup,
        fft_path,
        echo_db as i32
    );
    hprintln!(
        "  kernel path, window on the fly: F=1 {} F=4 {} F=8 {}",
        f1.0,
        f4.0,
        f8.0
    );
    hprintln!(
        "  kernel path, window in place then dot products: F=1 {} F=4 {} F=8 {}",
        f1.1,
        f4.1,
        f8.1
    );
    Ok(())
}

#[inline(never)]
fn fft_case<const M: usize>(c: &Counter)
where
    [Complex32; M]: Fft,
{
    let mut buf = [Complex32::new(0.5, -0.25); M];
    let fwd = c.measure(|| buf.forward());
    let inv = c.measure(|| buf.inverse());
    hprintln!("microfft M={}: forward {} inverse {}", M, fwd, inv);
}

fn run(c: &Counter) -> Result<(), Failure> {
    let empty = c.measure(|| {});
    hprintln!("counter overhead {} instructions", empty);
    fft_case::<256>(c);
    fft_case::<1024>(c);
    fft_case::<2048>(c);
    gate_case::<256>(c, 201)?;
    gate_case::<1024>(c, 801)?;
    gate_case::<2048>(c, 1601)?;
    Ok(())
}

#[entry]
fn main() -> ! {
    stack::paint();
    let code = match cortex_m::Peripherals::take() {
        None => {
            hprintln!("error: peripherals already taken");
            debug::EXIT_FAILURE
        }
        Some(p) => {
            let c = Counter::start(p.SYST);
            match run(&c) {
                Ok(()) => {
                    hprintln!(
                        "memory: static RAM {} bytes, peak stack {} bytes",
                        stack::statics(),
                        stack::peak()
                    );
                    hprintln!("firmware: all checks passed");
                    debug::EXIT_SUCCESS
                }
                Err(e) => {
                    hprintln!("error: {:?}", e);
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
