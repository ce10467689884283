//! Comma-separated ASCII numbers from the VNA link.
