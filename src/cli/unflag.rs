//! `porewise unflag`: take a flagged reading back into fits, keeping the record.

use std::path::PathBuf;

use anyhow::Context;
use clap::Args;

use super::flag::{fit_note, target, what};
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
    /// The reading id (as `porewise list DB readings` shows it), or with --conductivity the
    /// conductivity reading id (as `porewise list DB conductivity` shows it).
    pub reading: i64,
    /// READING is a measured conductivity reading: it is left out of (taken back into) joint
    /// fits of retention and conductivity.
    #[arg(long)]
    pub conductivity: bool,
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
    let target = target(args.reading, args.conductivity);
    let ids = unflag_reading(&mut campaign, target, args.note.as_deref())?;
    let (sample, state) = fit_state_of_reading(campaign.connection(), target)?;
    println!(
        "{} back in fits ({} cleared); {}",
        what(target),
        plural(ids.len() as u64, "flag"),
        fit_note(&sample, &state)
    );
    Ok(Outcome::Success)
}
