//! `porewise init`: create an empty campaign file.

use std::path::PathBuf;

use anyhow::Context;
use clap::Args;

use crate::error::Outcome;
use crate::store::Campaign;
use crate::store::campaign::{DEFAULT_FC_KPA, DEFAULT_PWP_KPA};

/// Arguments of `porewise init`.
#[derive(Debug, Args)]
#[command(
    after_help = "Example:\n  porewise init spring.sqlite --name \"Spring survey\" --fc-kpa 10"
)]
pub struct InitArgs {
    /// The campaign file to create (an existing file is never overwritten).
    pub file: PathBuf,
    /// Campaign name (default: the file name without extension).
    #[arg(long)]
    pub name: Option<String>,
    /// Suction at field capacity, kPa (33 is common; 10 for sandy soils).
    #[arg(long, default_value_t = DEFAULT_FC_KPA, value_name = "KPA")]
    pub fc_kpa: f64,
    /// Suction at the permanent wilting point, kPa.
    #[arg(long, default_value_t = DEFAULT_PWP_KPA, value_name = "KPA")]
    pub pwp_kpa: f64,
}

/// Run `porewise init`.
///
/// # Errors
/// The file exists, the settings are out of range, or it cannot be created.
pub fn run(args: &InitArgs) -> anyhow::Result<Outcome> {
    let name = args.name.clone().unwrap_or_else(|| {
        args.file.file_stem().map_or_else(
            || "campaign".to_string(),
            |s| s.to_string_lossy().into_owned(),
        )
    });
    let campaign = Campaign::create(&args.file, &name, args.fc_kpa, args.pwp_kpa)
        .with_context(|| format!("cannot create {}", args.file.display()))?;
    let s = campaign.settings()?;
    println!(
        "created campaign {:?} in {} (field capacity {} kPa, wilting point {} kPa)",
        s.name,
        args.file.display(),
        s.fc_kpa,
        s.pwp_kpa
    );
    Ok(Outcome::Success)
}
