//! `porewise curve` (not built yet).

use clap::Args;

use crate::error::Outcome;

/// Arguments of `porewise curve`.
#[derive(Debug, Args)]
pub struct CurveArgs {}

/// Run `porewise curve`.
///
/// # Errors
/// Always, until the command is built.
pub fn run(_args: &CurveArgs) -> anyhow::Result<Outcome> {
    anyhow::bail!("porewise curve is not built yet")
}
