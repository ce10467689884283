//! Time gating (being written).
