//! One trait over the fixed microfft sizes, so the rest of the core is generic in M.
//!
//! Implemented for `[Complex32; M]` with M = 64 … 4096 (as enabled by the `fft-*` features).
//! Forward is unscaled; inverse is scaled by 1/M (microfft's `ifft_N` already is), so
//! `inverse(forward(x)) == x`.
//!
//! Code whose FFT size is fixed names it (`Gate<1024>`). Code that chooses it from the data,
//! as the host does, takes [`FftSize::for_points`] and runs a function generic over `M` for
//! the chosen size with [`with_fft_size!`](crate::with_fft_size): the one `match` over the
//! sizes lives here.

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

/// An M-point FFT implementation with the conventions of [`Fft`] (forward unscaled, inverse
/// scaled by 1/M), passed by the caller to the gate's `*_using` methods
/// ([`Gate::apply_using`](crate::gate::Gate::apply_using),
/// [`Gate::apply_many_using`](crate::gate::Gate::apply_many_using)).
///
/// The core's own is [`Microfft`]; a host brings a faster one (the `sweepgate` host crate
/// plans rustfft's SIMD transforms) and gets the same chain, windows and gate around it.
pub trait Transform<const M: usize> {
    /// Forward transform of one buffer, unscaled.
    fn forward(&mut self, buf: &mut [Complex32; M]);
    /// Inverse transform of one buffer, scaled by 1/M.
    fn inverse(&mut self, buf: &mut [Complex32; M]);
    /// Forward transform of every buffer; one at a time unless the implementation batches.
    fn forward_many(&mut self, bufs: &mut [[Complex32; M]]) {
        for b in bufs {
            self.forward(b);
        }
    }
    /// Inverse transform of every buffer; one at a time unless the implementation batches.
    fn inverse_many(&mut self, bufs: &mut [[Complex32; M]]) {
        for b in bufs {
            self.inverse(b);
        }
    }
}

/// The core's own transforms (microfft, through [`Fft`]); what [`Gate::apply`](crate::gate::Gate::apply)
/// and the scan engine use.
#[derive(Debug, Clone, Copy, Default)]
pub struct Microfft;

impl<const M: usize> Transform<M> for Microfft
where
    [Complex32; M]: Fft,
{
    #[inline]
    fn forward(&mut self, buf: &mut [Complex32; M]) {
        buf.forward();
    }
    #[inline]
    fn inverse(&mut self, buf: &mut [Complex32; M]) {
        buf.inverse();
    }
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

/// An FFT size to gate with when it is chosen from the sweep: 1024, 2048 or 4096, as far as
/// the `fft-*` features compile them in.
///
/// Sizes start at 1024 so that even a short sweep is zero-padded to a finely sampled
/// impulse response; a board with one fixed size names it as a const generic instead.
/// Without `fft-1024` no size is compiled in and [`FftSize::for_points`] always answers
/// `None`.
///
/// ```
/// use sweepgate::fft::{Fft, FftSize};
/// use sweepgate::Complex32;
///
/// // Any function generic over the FFT size M.
/// fn zero_padding<const M: usize>(points: usize) -> usize
/// where
///     [Complex32; M]: Fft,
/// {
///     M - points
/// }
///
/// let size = FftSize::for_points(801).unwrap();
/// assert_eq!(size, FftSize::M1024);
/// // One call; the macro expands to the match over the compiled sizes.
/// let padding = sweepgate::with_fft_size!(size, M => zero_padding::<M>(801));
/// assert_eq!(padding, 223);
/// assert_eq!(FftSize::for_points(1601).map(FftSize::points), Some(2048));
/// assert_eq!(FftSize::for_points(5000), None);
/// ```
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum FftSize {
    /// M = 1024.
    #[cfg(feature = "fft-1024")]
    M1024,
    /// M = 2048.
    #[cfg(feature = "fft-2048")]
    M2048,
    /// M = 4096.
    #[cfg(feature = "fft-4096")]
    M4096,
}

impl FftSize {
    /// The smallest compiled size that holds `points` (K) points, or `None` when K is
    /// above the largest.
    pub fn for_points(points: usize) -> Option<Self> {
        #[cfg(feature = "fft-1024")]
        if points <= 1024 {
            return Some(Self::M1024);
        }
        #[cfg(feature = "fft-2048")]
        if points <= 2048 {
            return Some(Self::M2048);
        }
        #[cfg(feature = "fft-4096")]
        if points <= 4096 {
            return Some(Self::M4096);
        }
        let _ = points;
        None
    }

    /// The largest compiled size (K above it has no FFT size), 0 when none is compiled in.
    pub const fn largest() -> usize {
        if cfg!(feature = "fft-4096") {
            4096
        } else if cfg!(feature = "fft-2048") {
            2048
        } else if cfg!(feature = "fft-1024") {
            1024
        } else {
            0
        }
    }

    /// The transform size M.
    pub const fn points(self) -> usize {
        match self {
            #[cfg(feature = "fft-1024")]
            Self::M1024 => 1024,
            #[cfg(feature = "fft-2048")]
            Self::M2048 => 2048,
            #[cfg(feature = "fft-4096")]
            Self::M4096 => 4096,
        }
    }
}

/// Runs an expression generic over the FFT size for a [`FftSize`] chosen at run time.
///
/// `with_fft_size!(size, M => expr)` evaluates `expr` with `M` a `const usize` equal to
/// `size.points()`; `expr` has the same type for every size. It expands to one `match` arm
/// per compiled size (the arms follow this crate's `fft-*` features, not the caller's).
/// See [`FftSize`] for an example.
#[cfg(feature = "fft-4096")]
#[macro_export]
macro_rules! with_fft_size {
    ($size:expr, $m:ident => $body:expr) => {
        match $size {
            $crate::fft::FftSize::M1024 => {
                const $m: usize = 1024;
                $body
            }
            $crate::fft::FftSize::M2048 => {
                const $m: usize = 2048;
                $body
            }
            $crate::fft::FftSize::M4096 => {
                const $m: usize = 4096;
                $body
            }
        }
    };
}

/// Runs an expression generic over the FFT size for a [`FftSize`] chosen at run time
/// (this build: 1024 and 2048). See the default build's documentation.
#[cfg(all(feature = "fft-2048", not(feature = "fft-4096")))]
#[macro_export]
macro_rules! with_fft_size {
    ($size:expr, $m:ident => $body:expr) => {
        match $size {
            $crate::fft::FftSize::M1024 => {
                const $m: usize = 1024;
                $body
            }
            $crate::fft::FftSize::M2048 => {
                const $m: usize = 2048;
                $body
            }
        }
    };
}

/// Runs an expression generic over the FFT size for a [`FftSize`] chosen at run time
/// (this build: 1024 only). See the default build's documentation.
#[cfg(all(feature = "fft-1024", not(feature = "fft-2048")))]
#[macro_export]
macro_rules! with_fft_size {
    ($size:expr, $m:ident => $body:expr) => {
        match $size {
            $crate::fft::FftSize::M1024 => {
                const $m: usize = 1024;
                $body
            }
        }
    };
}

/// Runs an expression generic over the FFT size for a [`FftSize`] chosen at run time
/// (this build: no size is compiled in, so there is nothing to run).
#[cfg(not(feature = "fft-1024"))]
#[macro_export]
macro_rules! with_fft_size {
    ($size:expr, $m:ident => $body:expr) => {
        match $size {}
    };
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    #[cfg(feature = "fft-4096")]
    fn smallest_size_that_holds_the_points() {
        // Boundaries on both sides of each size (common practice, no source).
        for (k, m) in [
            (0, Some(1024)),
            (2, Some(1024)),
            (1024, Some(1024)),
            (1025, Some(2048)),
            (2048, Some(2048)),
            (2049, Some(4096)),
            (4096, Some(4096)),
            (4097, None),
        ] {
            assert_eq!(FftSize::for_points(k).map(FftSize::points), m, "K = {k}");
        }
        assert_eq!(FftSize::largest(), 4096);
    }

    #[cfg(feature = "fft-4096")]
    fn size_of_buffer<const M: usize>() -> usize
    where
        [Complex32; M]: Fft,
    {
        <[Complex32; M] as Fft>::SIZE
    }

    #[test]
    #[cfg(feature = "fft-4096")]
    fn dispatch_runs_the_chosen_size() {
        for (k, m) in [(801, 1024), (1601, 2048), (3201, 4096)] {
            let size = FftSize::for_points(k).unwrap();
            assert_eq!(crate::with_fft_size!(size, M => size_of_buffer::<M>()), m);
        }
    }

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
