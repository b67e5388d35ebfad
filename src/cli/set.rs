//! `porewise set`: change a campaign's settings (field capacity and wilting point suctions).

use std::path::PathBuf;

use anyhow::{Context, bail};
use clap::Args;

use crate::error::Outcome;
use crate::store::Campaign;
use crate::store::campaign::set_suctions;

/// Arguments of `porewise set`.
#[derive(Debug, Args)]
#[command(
    after_help = "Example:\n  porewise set spring.sqlite --fc-kpa 10\n\nDerived values (water at field capacity and wilting point, available water, profiles)\nare computed from the current settings whenever they are shown, so no refit is needed."
)]
pub struct SetArgs {
    /// The campaign file.
    pub db: PathBuf,
    /// Suction at field capacity, kPa (33 is common; 10 for sandy soils).
    #[arg(long, value_name = "KPA")]
    pub fc_kpa: Option<f64>,
    /// Suction at the permanent wilting point, kPa (1500 is common).
    #[arg(long, value_name = "KPA")]
    pub pwp_kpa: Option<f64>,
}

/// Run `porewise set`.
///
/// # Errors
/// Nothing to set, suctions out of order, or a campaign that cannot be opened or written.
pub fn run(args: &SetArgs) -> anyhow::Result<Outcome> {
    if args.fc_kpa.is_none() && args.pwp_kpa.is_none() {
        bail!("nothing to set: give --fc-kpa and/or --pwp-kpa");
    }
    let mut campaign = Campaign::open(&args.db)
        .with_context(|| format!("cannot open campaign {}", args.db.display()))?;
    let old = campaign.settings()?;
    let fc = args.fc_kpa.unwrap_or(old.fc_kpa);
    let pwp = args.pwp_kpa.unwrap_or(old.pwp_kpa);
    let tx = campaign.transaction()?;
    set_suctions(&tx, fc, pwp)?;
    tx.commit()?;
    println!(
        "field capacity {fc} kPa (was {}), wilting point {pwp} kPa (was {})",
        old.fc_kpa, old.pwp_kpa
    );
    Ok(Outcome::Success)
}
