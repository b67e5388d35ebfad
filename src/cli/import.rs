//! `porewise import` (not built yet).

use clap::Subcommand;

use crate::error::Outcome;

/// What kind of file to import.
#[derive(Debug, Subcommand)]
pub enum ImportCommand {}

/// Run `porewise import`.
///
/// # Errors
/// Always, until the command is built.
pub fn run(_cmd: &ImportCommand) -> anyhow::Result<Outcome> {
    anyhow::bail!("porewise import is not built yet")
}
