//! Domain values, units and the parametric retention models.
//!
//! Nothing here touches files, SQLite or the terminal.

pub mod curve;
pub mod domain;
pub mod number;
pub mod units;
