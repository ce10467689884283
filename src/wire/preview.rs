//! Preview records a board sends for each closed bin and for scan status.
