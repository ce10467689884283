//! The invented room, leaf first: the scenario as pure data ([`scenario`]), the paths in its
//! room ([`geometry`]), the antennas' patterns ([`antennas`]), the S21 they add up to
//! ([`room`]), the turntable's schedule ([`timeline`]), reading and checking a scenario as
//! a whole ([`load`]), and the simulated scan ([`simulator`]). Each module imports only
//! the ones before it.

pub mod antennas;
pub mod coords;
pub mod fresnel;
pub mod geometry;
pub mod load;
pub mod polarised;
pub mod rcs_scene;
pub mod rcs_targets;
pub mod room;
pub mod scenario;
pub mod simulator;
pub mod timeline;
