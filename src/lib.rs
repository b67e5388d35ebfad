//! porewise: soil-water retention campaigns in one SQLite file.
//!
//! A hydrologist's campaign (sites, the layers of each profile, the samples taken from them and
//! their retention readings) is imported from CSV, stored in SQLite, fitted with the published
//! retention models, reviewed for outliers and exported as a summary.
//!
//! # Layer map
//!
//! Dependencies point one way; nothing imports `tui` or `cli`.
//!
//! - [`model`]: units, domain values and the retention models with analytic derivatives.
//!   Pure: no files, no SQLite, no terminal.
//! - [`fit`]: the bounded least-squares driver, statistics and model choice. Pure.
//! - [`field`]: field loggers: logger times, quality marks on logger series, and the
//!   pairing of tensiometers with water-content sensors into retention points. Pure.
//! - [`import`]: CSV files to validated batches of model values, with `FILE:LINE:COLUMN`
//!   diagnostics. Reads files, writes nothing.
//! - [`store`]: the SQLite campaign file: migrations, pragmas, one module per aggregate.
//! - [`analysis`]: campaign-wide work over store and fit engine: fitting samples and recording
//!   the attempts; derived values, layer and profile available water (computed on read).
//! - [`report`]: tables and exports built from model, store and analysis values.
//! - [`archive`]: the shared archive on a PostgreSQL server: push, pull, stats. The only
//!   layer that talks to PostgreSQL.
//! - [`demo`]: the seeded generator of the invented demo campaign.
//! - [`tui`]: the terminal UI, thin over the library (only `cli` calls it).
//! - [`cli`]: the command line, thin over the library.

pub mod analysis;
pub mod archive;
pub mod cli;
pub mod demo;
pub mod error;
pub mod field;
pub mod fit;
pub mod import;
pub mod model;
pub mod report;
pub mod store;
pub mod tui;
