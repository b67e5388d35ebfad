//! `porewise fit` (not built yet).

use clap::Args;

use crate::error::Outcome;

/// Arguments of `porewise fit`.
#[derive(Debug, Args)]
pub struct FitArgs {}

/// Run `porewise fit`.
///
/// # Errors
/// Always, until the command is built.
pub fn run(_args: &FitArgs) -> anyhow::Result<Outcome> {
    anyhow::bail!("porewise fit is not built yet")
}
