//! Error enums, one per boundary; each variant is a distinct cause.
//!
//! Each boundary keeps its enum in its own file here and they are all re-exported.

mod autogate;
mod cuts;
mod gate;
mod plan;
mod pump;
mod rcs;
mod scan;
mod wire;

pub use self::autogate::*;
pub use self::cuts::*;
pub use self::gate::*;
pub use self::plan::*;
pub use self::pump::*;
pub use self::rcs::*;
pub use self::scan::*;
pub use self::wire::*;
