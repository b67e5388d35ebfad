//! `porewise demo` (not built yet).

use clap::Args;

use crate::error::Outcome;

/// Arguments of `porewise demo`.
#[derive(Debug, Args)]
pub struct DemoArgs {}

/// Run `porewise demo`.
///
/// # Errors
/// Always, until the command is built.
pub fn run(_args: &DemoArgs) -> anyhow::Result<Outcome> {
    anyhow::bail!("porewise demo is not built yet")
}
