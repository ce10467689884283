//! The scan engine: sweeps and angle samples in, events out.
