//! What people read: the report (CSV, JSON, SVG) and the terminal screen.

pub mod report;
pub mod screen;
