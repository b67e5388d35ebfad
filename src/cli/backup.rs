//! `porewise backup`: a verified copy of a campaign, safe while it is in use.

use std::path::PathBuf;

use clap::Args;
use indicatif::{ProgressBar, ProgressStyle};

use crate::error::Outcome;
use crate::model::number::plural;
use crate::model::text::shown;
use crate::store::Campaign;
use crate::store::backup::backup_to;

/// Arguments of `porewise backup`.
#[derive(Debug, Args)]
#[command(
    after_help = "The copy is the campaign as it was when the backup began, even while the terminal UI\n\
                  or a fit has it open; it is checked (integrity, the row count of every table) before\n\
                  it is put in place, so FILE is either a whole verified copy or not written at all.\n\n\
                  Example:\n  porewise backup spring.sqlite backups/spring-2026-06-03.sqlite"
)]
pub struct BackupArgs {
    /// The campaign file to copy.
    pub db: PathBuf,
    /// Where to write the copy (an existing file is refused unless --replace).
    pub file: PathBuf,
    /// Replace FILE when it exists (the old copy stays until the new one is verified).
    #[arg(long)]
    pub replace: bool,
}

/// Run `porewise backup`.
///
/// # Errors
/// The campaign cannot be opened, FILE exists without --replace, or the copy fails its check.
pub fn run(args: &BackupArgs) -> anyhow::Result<Outcome> {
    let campaign = Campaign::open(&args.db)?;
    let bar = ProgressBar::new(0).with_style(
        ProgressStyle::with_template("copying {bar:30} {pos}/{len} pages")
            .unwrap_or_else(|_| ProgressStyle::default_bar()),
    );
    let summary = backup_to(
        campaign.connection(),
        &args.file,
        args.replace,
        |done, all| {
            bar.set_length(all);
            bar.set_position(done);
        },
    )?;
    bar.finish_and_clear();
    let rows: i64 = summary.tables.iter().map(|(_, n)| n).sum();
    println!(
        "backed up {} to {}: {} ({} bytes), integrity ok, {} in {} match the campaign",
        shown(&args.db.display().to_string()),
        shown(&summary.target.display().to_string()),
        plural(summary.pages, "page"),
        summary.bytes,
        plural(u64::try_from(rows).unwrap_or(0), "row"),
        plural(summary.tables.len() as u64, "table"),
    );
    Ok(Outcome::Success)
}
