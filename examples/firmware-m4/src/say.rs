//! Lines of text to the host's standard output over semihosting, without `core::fmt`.
//!
//! Core formatting (`hprintln!` with arguments, the panic message of `panic-semihosting`)
//! links `core::fmt`'s machinery, several KiB of flash. The firmware prints only text and
//! integers, so a line is built here from pieces ([`Put`]) in a fixed buffer and written
//! with one semihosting call. [`say!`](crate::say) builds and sends one line.

use core::sync::atomic::{AtomicUsize, Ordering};

/// One piece of a line.
pub trait Put {
    /// Appends this piece to `line`.
    fn put(&self, line: &mut Line);
}

/// A line being built; sent (with a newline) by [`Line::end`]. A line longer than the
/// buffer is sent in parts as the buffer fills.
pub struct Line {
    buf: [u8; 128],
    len: usize,
}

impl Line {
    /// An empty line.
    pub fn new() -> Self {
        Line {
            buf: [0; 128],
            len: 0,
        }
    }

    /// Appends bytes, sending the buffer whenever it is full.
    pub fn bytes(&mut self, mut b: &[u8]) {
        while !b.is_empty() {
            if self.len == self.buf.len() {
                self.flush();
            }
            let n = (self.buf.len() - self.len).min(b.len());
            self.buf[self.len..self.len + n].copy_from_slice(&b[..n]);
            self.len += n;
            b = &b[n..];
        }
    }

    /// Appends `n` in decimal.
    pub fn unsigned(&mut self, mut n: u64) {
        let mut digits = [0u8; 20];
        let mut i = digits.len();
        loop {
            i -= 1;
            digits[i] = b'0' + (n % 10) as u8;
            n /= 10;
            if n == 0 {
                break;
            }
        }
        self.bytes(&digits[i..]);
    }

    /// Sends what the buffer holds.
    fn flush(&mut self) {
        stdout_write(&self.buf[..self.len]);
        self.len = 0;
    }

    /// Ends the line with a newline and sends it.
    pub fn end(mut self) {
        self.bytes(b"\n");
        self.flush();
    }
}

impl Put for &str {
    fn put(&self, line: &mut Line) {
        line.bytes(self.as_bytes());
    }
}

impl Put for u64 {
    fn put(&self, line: &mut Line) {
        line.unsigned(*self);
    }
}

impl Put for u32 {
    fn put(&self, line: &mut Line) {
        line.unsigned(u64::from(*self));
    }
}

impl Put for u16 {
    fn put(&self, line: &mut Line) {
        line.unsigned(u64::from(*self));
    }
}

impl Put for usize {
    fn put(&self, line: &mut Line) {
        line.unsigned(*self as u64);
    }
}

impl Put for i32 {
    fn put(&self, line: &mut Line) {
        if *self < 0 {
            line.bytes(b"-");
        }
        line.unsigned(u64::from(self.unsigned_abs()));
    }
}

/// Builds one line from its pieces (each a [`Put`]) and sends it.
macro_rules! say {
    ($($piece:expr),* $(,)?) => {{
        #[allow(unused_mut)]
        let mut line = $crate::say::Line::new();
        $( $crate::say::Put::put(&$piece, &mut line); )*
        line.end();
    }};
}

/// The host's standard output (`:tt` opened for writing), plus one; 0 until opened.
static STDOUT: AtomicUsize = AtomicUsize::new(0);

/// Writes `b` to the host's standard output, opening it on first use.
fn stdout_write(b: &[u8]) {
    let mut fd = STDOUT.load(Ordering::Relaxed);
    if fd == 0 {
        // Mode 4 ("w") on the special name ":tt" is the semihosting console.
        fd = crate::host::open(b":tt\0", cortex_m_semihosting::nr::open::W_TRUNC)
            .map_or(0, |f| f + 1);
        STDOUT.store(fd, Ordering::Relaxed);
    }
    if fd != 0 {
        crate::host::write(fd - 1, b);
    }
}

/// Panics print where they happened (file and line) and end QEMU with a failure: the
/// message itself would need `core::fmt`.
#[panic_handler]
fn panic(info: &core::panic::PanicInfo) -> ! {
    cortex_m::interrupt::disable();
    let mut line = Line::new();
    line.bytes(b"panic");
    if let Some(at) = info.location() {
        line.bytes(b" at ");
        line.bytes(at.file().as_bytes());
        line.bytes(b":");
        line.unsigned(u64::from(at.line()));
    }
    line.end();
    cortex_m_semihosting::debug::exit(cortex_m_semihosting::debug::EXIT_FAILURE);
    loop {
        cortex_m::asm::wfi();
    }
}
