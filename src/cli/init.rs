//! `porewise init` (not built yet).

use clap::Args;

use crate::error::Outcome;

/// Arguments of `porewise init`.
#[derive(Debug, Args)]
pub struct InitArgs {}

/// Run `porewise init`.
///
/// # Errors
/// Always, until the command is built.
pub fn run(_args: &InitArgs) -> anyhow::Result<Outcome> {
    anyhow::bail!("porewise init is not built yet")
}
