//! Domain values, units and the parametric retention models.
//!
//! Nothing here touches files, SQLite or the terminal.

pub mod conductivity;
pub mod curve;
pub mod derived;
pub mod domain;
pub mod golden;
pub mod number;
pub mod ptf;
pub mod retention;
pub mod special;
pub mod text;
pub mod texture;
pub mod units;
