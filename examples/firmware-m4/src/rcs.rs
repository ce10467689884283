//! The RCS chain on the board: an RCS capture (`rcs.bin` in QEMU's working directory, made
//! by `cargo run -p sweepgate-host --example rcs_capture -- make …`) read over semihosting;
//! the reference measurement minus its background, gated around the target zone on the
//! kernel path at the F pattern frequencies, gives the calibration (`sweepgate::rcs`); each
//! angle's background is stored in the board's one background sweep and subtracted from the
//! target sweep, which is gated and calibrated. The factors and each angle's RCS in dBsm go to
//! `rcs-out.bin`, which the host compares with its own FFT-path result. Without `rcs.bin`
//! the case is skipped with a line saying so (the host's compare then fails on the missing
//! answer).

use embedded_io::Read;
use sweepgate::gate::{Gate, GateConfig};
use sweepgate::grid::Grid;
use sweepgate::rcs::{dbsm, subtract, Background, Calibration};
use sweepgate::window::WindowKind;
use sweepgate::Complex32;

use crate::{host, Counter, Failure, HostReader};

const M: usize = 1024;
/// Pattern frequencies of an RCS capture.
const F: usize = 4;
const ZERO: Complex32 = Complex32::new(0.0, 0.0);

struct In(HostReader);

impl In {
    fn bytes<const N: usize>(&mut self) -> Result<[u8; N], Failure> {
        let mut b = [0u8; N];
        let mut at = 0;
        while at < N {
            let n = match self.0.read(&mut b[at..]) {
                Ok(n) => n,
                Err(never) => match never {},
            };
            if n == 0 {
                return Err(Failure::RcsEnds);
            }
            at += n;
        }
        Ok(b)
    }
    fn f64(&mut self) -> Result<f64, Failure> {
        Ok(f64::from_le_bytes(self.bytes()?))
    }
    fn f32(&mut self) -> Result<f32, Failure> {
        Ok(f32::from_le_bytes(self.bytes()?))
    }
    fn u32(&mut self) -> Result<u32, Failure> {
        Ok(u32::from_le_bytes(self.bytes()?))
    }
    fn sweep(&mut self, out: &mut [Complex32]) -> Result<(), Failure> {
        for v in out {
            *v = Complex32::new(self.f32()?, self.f32()?);
        }
        Ok(())
    }
}

fn put(fd: usize, bytes: &[u8]) -> Result<(), Failure> {
    if host::write(fd, bytes) {
        Ok(())
    } else {
        Err(Failure::Output)
    }
}

/// The capture's header: the gate configuration and the point count.
fn header(r: &mut In) -> Result<(GateConfig, usize), Failure> {
    if &r.bytes::<8>()? != b"SGRCS001" {
        return Err(Failure::RcsFormat);
    }
    let (start, step) = (r.f64()?, r.f64()?);
    let k = r.u32()? as usize;
    if k > M {
        return Err(Failure::RcsFormat);
    }
    let grid = Grid::new(start, step, k).map_err(Failure::Grid)?;
    let (beta, alpha) = (r.f32()?, r.f32()?);
    let (center_s, span_s) = (r.f64()?, r.f64()?);
    let cfg = GateConfig {
        grid,
        band_window: WindowKind::Kaiser { beta },
        center_s,
        span_s,
        shape: WindowKind::Tukey { alpha },
        renormalize: true,
    };
    Ok((cfg, k))
}

/// Runs the RCS capture through the board's chain (see the module notes).
#[inline(never)]
pub fn case(c: &Counter) -> Result<(), Failure> {
    let Some(reader) = HostReader::open(b"rcs.bin\0") else {
        say!("rcs: no rcs.bin in QEMU's working directory, skipped");
        return Ok(());
    };
    let mut r = In(reader);
    let (cfg, k) = header(&mut r)?;
    let mut gate = Gate::<M>::unconfigured();
    gate.configure(&cfg).map_err(Failure::Gate)?;
    if r.u32()? as usize != F {
        return Err(Failure::RcsFormat);
    }
    let mut indices = [0usize; F];
    for i in indices.iter_mut() {
        *i = r.u32()? as usize;
    }
    let kernels = gate.kernels(indices).map_err(Failure::Gate)?;
    let mut known = [ZERO; F];
    r.sweep(&mut known)?;
    let (mut buf, mut tmp) = ([ZERO; M], [ZERO; M]);
    r.sweep(&mut buf[..k])?;
    r.sweep(&mut tmp[..k])?;
    subtract(&mut buf[..k], &tmp[..k]).map_err(Failure::Rcs)?;
    let mut g = [ZERO; F];
    gate.apply_kernels(&kernels, &buf, &mut g);
    let cal = Calibration::<F>::from_reference(&g, &known).map_err(Failure::Rcs)?;
    let out = host::open(b"rcs-out.bin\0", host::WRITE).ok_or(Failure::Output)?;
    let done = angles(
        c,
        &mut r,
        out,
        (&gate, &kernels, &cal),
        k,
        (&mut buf, &mut tmp),
    );
    host::close(out);
    done
}

type Chain<'a> = (
    &'a Gate<M>,
    &'a sweepgate::gate::Kernels<M, F>,
    &'a Calibration<F>,
);

/// Every angle of the capture: store its background, subtract, gate, calibrate, write.
fn angles(
    c: &Counter,
    r: &mut In,
    out: usize,
    (gate, kernels, cal): Chain,
    k: usize,
    (buf, tmp): (&mut [Complex32; M], &mut [Complex32; M]),
) -> Result<(), Failure> {
    for f in cal.factor() {
        put(out, &f.re.to_le_bytes())?;
        put(out, &f.im.to_le_bytes())?;
    }
    let mut background = Background::<M>::empty();
    let n = r.u32()?;
    let (mut instr, mut g) = (0u64, [ZERO; F]);
    for _ in 0..n {
        let angle = r.f32()?;
        r.sweep(&mut tmp[..k])?;
        r.sweep(&mut buf[..k])?;
        let t0 = c.now();
        background.store(&tmp[..k]).map_err(Failure::Rcs)?;
        background
            .subtract_from(&mut buf[..k])
            .map_err(Failure::Rcs)?;
        gate.apply_kernels(kernels, buf, &mut g);
        cal.apply(&mut g).map_err(Failure::Rcs)?;
        instr += c.instructions(t0, c.now()) as u64;
        put(out, &angle.to_le_bytes())?;
        for v in g {
            put(out, &dbsm(v).to_le_bytes())?;
        }
    }
    say!(
        "rcs: ",
        n,
        " angles, K=",
        k,
        " F=",
        F,
        ": store the background, subtract, gate and calibrate ",
        if n == 0 { 0 } else { instr / n as u64 },
        " instructions per angle",
    );
    Ok(())
}
