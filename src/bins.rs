//! Angle bins: the open bin accumulator, closing a bin, per-bin results and flags.
