//! One trait over the fixed microfft sizes, so the rest of the core is generic in M.
//!
//! Implemented for `[Complex32; M]` with M = 64 … 4096 (as enabled by the `fft-*` features).
//! Forward is unscaled; inverse is scaled by 1/M (microfft's `ifft_N` already is), so
//! `inverse(forward(x)) == x`.

use crate::Complex32;

/// In-place complex FFT of a fixed size.
pub trait Fft {
    /// Transform size M.
    const SIZE: usize;
    /// Forward transform X[k] = Σ x[n]·e^(−j2πkn/M), unscaled.
    fn forward(&mut self);
    /// Inverse transform x[n] = (1/M)·Σ X[k]·e^(+j2πkn/M).
    fn inverse(&mut self);
}

macro_rules! impl_fft {
    ($feature:literal: $($n:literal => $f:ident, $i:ident;)*) => {$(
        #[cfg(feature = $feature)]
        impl Fft for [Complex32; $n] {
            const SIZE: usize = $n;
            #[inline]
            fn forward(&mut self) {
                let _ = microfft::complex::$f(self);
            }
            #[inline]
            fn inverse(&mut self) {
                let _ = microfft::inverse::$i(self);
            }
        }
    )*};
}

impl_fft!("fft-256":
    64 => cfft_64, ifft_64;
    128 => cfft_128, ifft_128;
    256 => cfft_256, ifft_256;
);
impl_fft!("fft-1024":
    512 => cfft_512, ifft_512;
    1024 => cfft_1024, ifft_1024;
);
impl_fft!("fft-2048": 2048 => cfft_2048, ifft_2048;);
impl_fft!("fft-4096": 4096 => cfft_4096, ifft_4096;);

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn round_trip_1024() {
        let mut x = [Complex32::new(0.0, 0.0); 1024];
        for (n, v) in x.iter_mut().enumerate() {
            *v = Complex32::new((n as f32 * 0.37).sin(), (n as f32 * 0.11).cos());
        }
        let orig = x;
        x.forward();
        x.inverse();
        for (a, b) in x.iter().zip(orig.iter()) {
            assert!((a - b).norm() < 1e-5);
        }
    }
}
