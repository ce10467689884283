//! Positioner samples: unwrap, interpolate, direction, speed, stall.
