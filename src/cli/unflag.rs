//! `porewise unflag`: take a flagged reading back into fits, keeping the record.

use std::path::PathBuf;

use anyhow::Context;
use clap::Args;

use super::flag::fit_note;
use crate::analysis::review::{fit_state_of_reading, unflag_reading};
use crate::error::Outcome;
use crate::model::number::plural;
use crate::store::Campaign;

/// Arguments of `porewise unflag`.
#[derive(Debug, Args)]
#[command(
    after_help = "Example:\n  porewise unflag spring.sqlite 112 --note \"re-weighed, fine\"\n\nEvery flag that leaves the reading out (a manual flag or an accepted suggestion) is\ncleared with the time and note; nothing is deleted. The sample's fit is then stale until\nrefitted."
)]
pub struct UnflagArgs {
    /// The campaign file.
    pub db: PathBuf,
    /// The reading id (as `porewise list DB readings` shows it).
    pub reading: i64,
    /// A note kept with the change.
    #[arg(long, value_name = "TEXT")]
    pub note: Option<String>,
}

/// Run `porewise unflag`.
///
/// # Errors
/// The campaign cannot be opened or written, no such reading, or a reading not flagged.
pub fn run(args: &UnflagArgs) -> anyhow::Result<Outcome> {
    let mut campaign = Campaign::open(&args.db)
        .with_context(|| format!("cannot open campaign {}", args.db.display()))?;
    let ids = unflag_reading(&mut campaign, args.reading, args.note.as_deref())?;
    let (sample, state) = fit_state_of_reading(campaign.connection(), args.reading)?;
    println!(
        "reading {} back in fits ({} cleared); {}",
        args.reading,
        plural(ids.len() as u64, "flag"),
        fit_note(&sample, &state)
    );
    Ok(Outcome::Success)
}
