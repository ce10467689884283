//! Errors of the `scan` boundary.
