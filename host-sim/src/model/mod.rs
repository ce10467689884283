//! The invented room as pure data, leaf first: the scenario description, then the physics
//! that simulates a scan of it.

pub mod physics;
pub mod scenario;
