//! `porewise set`: change a campaign's settings (field capacity and wilting point suctions).

use std::path::PathBuf;

use anyhow::{Context, bail};
use clap::Args;

use crate::error::Outcome;
use crate::store::Campaign;
use crate::store::campaign::set_suctions;
use crate::store::texture::{prior_default, set_prior_default};

/// Arguments of `porewise set`.
#[derive(Debug, Args)]
#[command(
    after_help = "Example:\n  porewise set spring.sqlite --fc-kpa 10\n  porewise set spring.sqlite --texture-prior 5\n\nDerived values (water at field capacity and wilting point, available water, profiles)\nare computed from the current settings whenever they are shown, so no refit is needed."
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
    /// Fit van Genuchten with the layer's texture-class prior by default for samples with at
    /// most N readings (`porewise fit DB` without --prior); `off` to stop.
    #[arg(long, value_name = "N|off", value_parser = parse_prior_default)]
    pub texture_prior: Option<PriorDefault>,
}

/// The value of `--texture-prior`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct PriorDefault(pub Option<u32>);

fn parse_prior_default(s: &str) -> Result<PriorDefault, String> {
    if s.trim().eq_ignore_ascii_case("off") {
        return Ok(PriorDefault(None));
    }
    match s.trim().parse::<u32>() {
        Ok(n) if n <= 1000 => Ok(PriorDefault(Some(n))),
        _ => Err(format!(
            "`{s}`: expected a number of readings (0-1000) or off"
        )),
    }
}

/// Run `porewise set`.
///
/// # Errors
/// Nothing to set, suctions out of order, or a campaign that cannot be opened or written.
pub fn run(args: &SetArgs) -> anyhow::Result<Outcome> {
    if args.fc_kpa.is_none() && args.pwp_kpa.is_none() && args.texture_prior.is_none() {
        bail!("nothing to set: give --fc-kpa, --pwp-kpa and/or --texture-prior");
    }
    let mut campaign = Campaign::open(&args.db)
        .with_context(|| format!("cannot open campaign {}", args.db.display()))?;
    let old = campaign.settings()?;
    let fc = args.fc_kpa.unwrap_or(old.fc_kpa);
    let pwp = args.pwp_kpa.unwrap_or(old.pwp_kpa);
    let old_prior = prior_default(campaign.connection())?;
    let tx = campaign.transaction()?;
    set_suctions(&tx, fc, pwp)?;
    if let Some(PriorDefault(n)) = args.texture_prior {
        set_prior_default(&tx, n)?;
    }
    tx.commit()?;
    println!(
        "field capacity {fc} kPa (was {}), wilting point {pwp} kPa (was {})",
        old.fc_kpa, old.pwp_kpa
    );
    if let Some(PriorDefault(n)) = args.texture_prior {
        let said = |n: Option<u32>| {
            n.map_or("off".to_string(), |n| {
                format!("samples with at most {n} readings")
            })
        };
        println!("texture prior: {} (was {})", said(n), said(old_prior));
    }
    Ok(Outcome::Success)
}
