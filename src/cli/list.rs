//! `porewise list` (not built yet).

use clap::Args;

use crate::error::Outcome;

/// Arguments of `porewise list`.
#[derive(Debug, Args)]
pub struct ListArgs {}

/// Run `porewise list`.
///
/// # Errors
/// Always, until the command is built.
pub fn run(_args: &ListArgs) -> anyhow::Result<Outcome> {
    anyhow::bail!("porewise list is not built yet")
}
