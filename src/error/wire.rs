//! Errors of the `wire` boundary.
