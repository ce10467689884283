//! Errors of the `plan` boundary.
