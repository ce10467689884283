//! What people read: the report (CSV, JSON, SVG), the terminal screen and the plan's table.

pub mod plan_text;
pub mod report;
pub mod screen;
