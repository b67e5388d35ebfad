//! `porewise open DB`: the campaign in the terminal UI.

use std::path::PathBuf;

use clap::Args;

use crate::error::Outcome;

/// Arguments of `porewise open`.
#[derive(Debug, Args)]
#[command(
    after_help = "Examples:\n  porewise open spring.sqlite    browse, review and refit it from the keyboard (? lists every key)"
)]
pub struct OpenArgs {
    /// The campaign file.
    pub db: PathBuf,
}

/// Run `porewise open`.
///
/// # Errors
/// The file is not a campaign, or the terminal fails.
pub fn run(args: &OpenArgs) -> anyhow::Result<Outcome> {
    crate::tui::run(&args.db)?;
    Ok(Outcome::Success)
}
