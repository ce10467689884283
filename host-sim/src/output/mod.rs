//! What people read: the report (CSV, JSON, SVG), the full-band exports (Touchstone, NumPy),
//! the terminal screen and the plan's table.

pub mod colour_map;
pub mod export;
pub mod markers;
pub mod plan_text;
pub mod report;
pub mod screen;
