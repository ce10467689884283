//! Serial lines for the turntable line protocol: a serial device opened raw (8 data
//! bits, no parity, one stop bit, no flow control, no echo, no line editing) at a given
//! speed, with a read timeout; and, for tests and the simulated turntable, a
//! pseudo-terminal pair whose other end stands in for the device.
//!
//! A read that gets nothing within the timeout returns 0 bytes, as the end of a stream
//! would; [`crate::link::drive::LineDrive`] reports it as no reply in time.

use std::fs::File;
use std::os::fd::{AsFd, OwnedFd};
use std::os::unix::fs::OpenOptionsExt;
use std::path::{Path, PathBuf};
use std::time::Duration;

use anyhow::{bail, Context};
use nix::sys::termios::{self, BaudRate, SetArg, SpecialCharacterIndices};

/// Serial speeds accepted, bits per second.
pub const SPEEDS: [u32; 8] = [9600, 19200, 38400, 57600, 115200, 230400, 460800, 921600];

fn baud(bps: u32) -> anyhow::Result<BaudRate> {
    Ok(match bps {
        9600 => BaudRate::B9600,
        19200 => BaudRate::B19200,
        38400 => BaudRate::B38400,
        57600 => BaudRate::B57600,
        115200 => BaudRate::B115200,
        230400 => BaudRate::B230400,
        460800 => BaudRate::B460800,
        921600 => BaudRate::B921600,
        _ => bail!("serial speed {bps} is not one of {SPEEDS:?}"),
    })
}

/// Puts a terminal in raw mode at `bps`; reads return after `timeout` (0.1 s steps, at
/// most 25.5 s) with whatever arrived, possibly nothing.
pub fn make_raw(fd: impl AsFd, bps: u32, timeout: Duration) -> anyhow::Result<()> {
    let mut t = termios::tcgetattr(&fd).context("reading the serial line's settings")?;
    termios::cfmakeraw(&mut t);
    termios::cfsetspeed(&mut t, baud(bps)?).context("setting the serial speed")?;
    let tenths = (timeout.as_millis() / 100).clamp(1, 255) as u8;
    t.control_chars[SpecialCharacterIndices::VMIN as usize] = 0;
    t.control_chars[SpecialCharacterIndices::VTIME as usize] = tenths;
    termios::tcsetattr(&fd, SetArg::TCSANOW, &t).context("setting the serial line raw")?;
    Ok(())
}

/// Opens a serial device raw at `bps` with a read timeout.
pub fn open(path: &Path, bps: u32, timeout: Duration) -> anyhow::Result<File> {
    let f = std::fs::OpenOptions::new()
        .read(true)
        .write(true)
        .custom_flags(nix::fcntl::OFlag::O_NOCTTY.bits())
        .open(path)
        .with_context(|| format!("opening the serial line {}", path.display()))?;
    make_raw(&f, bps, timeout).with_context(|| format!("on {}", path.display()))?;
    Ok(f)
}

/// A pseudo-terminal pair: the controlling side (a `File`) and the path of the device
/// side, which is kept open so the controlling side survives clients coming and going.
pub struct Pty {
    /// The side the simulated device reads and writes.
    pub device: File,
    /// The path a client opens as its serial line.
    pub path: PathBuf,
    _keep: OwnedFd,
}

/// Opens a pseudo-terminal pair, raw.
pub fn pty() -> anyhow::Result<Pty> {
    let p = nix::pty::openpty(None, None).context("opening a pseudo-terminal")?;
    let path = nix::unistd::ttyname(&p.slave).context("naming the pseudo-terminal")?;
    make_raw(&p.slave, 115200, Duration::from_secs(1))?;
    Ok(Pty {
        device: File::from(p.master),
        path,
        _keep: p.slave,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::io::{Read, Write};

    #[test]
    fn a_pty_carries_lines_both_ways_and_reads_time_out() {
        let mut p = pty().unwrap();
        let mut client = open(&p.path, 115200, Duration::from_millis(200)).unwrap();
        client.write_all(b"WHERE\n").unwrap();
        let mut buf = [0u8; 16];
        let n = p.device.read(&mut buf).unwrap();
        assert_eq!(&buf[..n], b"WHERE\n", "no echo, no line editing");
        p.device.write_all(b"OK 1 2 3 HOLDING\n").unwrap();
        let n = client.read(&mut buf).unwrap();
        assert_eq!(&buf[..n], b"OK 1 2 3 HOLDING");
        let t = std::time::Instant::now();
        let n = client.read(&mut buf[..1]).unwrap();
        assert_eq!(n, 1, "the newline");
        assert_eq!(client.read(&mut buf).unwrap(), 0, "nothing more: a timeout");
        assert!(t.elapsed() >= Duration::from_millis(150));
        assert!(baud(1234).is_err());
    }
}
