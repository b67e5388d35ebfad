//! Tables and exports built from model and store values.

pub mod campaign;
pub mod table;

pub use table::{Cell, Column, Listing};
