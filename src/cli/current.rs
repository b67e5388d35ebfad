//! `porewise current`: choose which fit of a sample's history is its current one (a
//! retention-only fit or one made with measured conductivity).

use std::path::PathBuf;

use anyhow::Context;
use clap::Args;

use crate::error::Outcome;
use crate::model::text::shown;
use crate::store::Campaign;
use crate::store::conductivity::make_current;

/// Arguments of `porewise current`.
#[derive(Debug, Args)]
#[command(
    after_help = "Example:\n  porewise list spring.sqlite fits --sample LV-Ap-a --all\n  porewise current spring.sqlite 42\n\nThe fit ids are the first column of the fit history. Derived values, listings, the\nexport and the terminal UI use the current fit."
)]
pub struct CurrentArgs {
    /// The campaign file.
    pub db: PathBuf,
    /// The fit to make current (its id in `porewise list DB fits --sample CODE --all`).
    #[arg(value_name = "FIT")]
    pub fit: i64,
}

/// Run `porewise current`.
///
/// # Errors
/// No such fit, a failed fit, or a campaign that cannot be opened or written.
pub fn run(args: &CurrentArgs) -> anyhow::Result<Outcome> {
    let mut campaign = Campaign::open(&args.db)
        .with_context(|| format!("cannot open campaign {}", args.db.display()))?;
    let tx = campaign.transaction()?;
    let (code, before) = make_current(&tx, args.fit)?;
    tx.commit()?;
    match before {
        Some(b) if b == args.fit => println!(
            "fit {} is already the current fit of sample {}",
            args.fit,
            shown(&code)
        ),
        Some(b) => println!(
            "fit {} is now the current fit of sample {} (was fit {b})",
            args.fit,
            shown(&code)
        ),
        None => println!(
            "fit {} is now the current fit of sample {}",
            args.fit,
            shown(&code)
        ),
    }
    Ok(Outcome::Success)
}
