//! Input files to validated values, with every problem placed at `FILE:LINE:COLUMN`.
//!
//! Importers read and validate; they never write to the campaign file. The store takes a
//! validated batch and writes it in one transaction.

pub mod diagnostic;
pub mod pairs;
pub mod table;

pub use diagnostic::{Diagnostic, Diagnostics};
