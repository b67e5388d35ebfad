//! Field loggers: times and spans, quality marks on logger series, and in-situ retention
//! pairing of tensiometers with water-content sensors.
//!
//! Pure computation over values already read: no files, no SQLite, no terminal. The import
//! (`import::logger`) and the store (`store::logger`, `store::pairing`) feed it.

pub mod pairing;
pub mod quality;
pub mod season;
pub mod time;
