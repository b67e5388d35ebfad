//! Domain values, units and the parametric retention models.
//!
//! Nothing here touches files, SQLite or the terminal.

pub mod curve;
pub mod retention;
pub mod units;
