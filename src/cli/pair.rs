//! `porewise pair`: pair tensiometer and water-content records into the readings of
//! field-pairing samples.

use std::path::PathBuf;

use clap::Args;

use crate::error::Outcome;
use crate::field::pairing::{DEFAULT_PER_DECADE, PairingSettings};
use crate::field::time::parse_span;
use crate::store::pairing::{PairOptions, pair_campaign};

/// Arguments of `porewise pair`.
#[derive(Debug, Args)]
#[command(
    after_help = "Each depth's readings go to the sample <SITE>-field-<depth>cm of the layer that \
    holds the depth (made when missing); pairing again replaces them. Records with an accepted \
    flag or a suggestion not yet dismissed are left out.\n\nExamples:\n  porewise pair spring.sqlite\n  \
    porewise pair spring.sqlite --site LV --depth-cm 30 --window 20m --per-decade 6\n  \
    porewise list spring.sqlite readings --sample LV-field-30cm --units kpa"
)]
pub struct PairArgs {
    /// The campaign file.
    pub db: PathBuf,
    /// Only this site (code).
    #[arg(long, value_name = "CODE")]
    pub site: Option<String>,
    /// Only this sensor depth, cm.
    #[arg(long, value_name = "N", value_parser = parse_depth)]
    pub depth_cm: Option<f64>,
    /// Largest time between a tensiometer record and its water-content record (e.g. 30m, 1h).
    #[arg(long, value_name = "SPAN", default_value = "30m", value_parser = parse_span)]
    pub window: i64,
    /// Points kept per decade of suction per branch (each the median of its bin).
    #[arg(long, value_name = "N", default_value_t = DEFAULT_PER_DECADE,
          value_parser = super::pair::parse_count)]
    pub per_decade: usize,
}

/// Parse a count from 1 to 100 (points per decade, records of a spike).
pub(crate) fn parse_count(s: &str) -> Result<usize, String> {
    match s.trim().parse::<usize>() {
        Ok(v) if (1..=100).contains(&v) => Ok(v),
        _ => Err(format!(
            "found {s:?}, expected a whole number from 1 to 100"
        )),
    }
}

fn parse_depth(s: &str) -> Result<f64, String> {
    match s.trim().parse::<f64>() {
        Ok(v) if v.is_finite() && v >= 0.0 => Ok(v),
        _ => Err(format!("found {s:?}, expected a depth of 0 cm or more")),
    }
}

/// Run `porewise pair`.
///
/// # Errors
/// The campaign cannot be opened, the site is unknown, or nothing can be paired (nothing was
/// written then).
pub fn run(args: &PairArgs) -> anyhow::Result<Outcome> {
    let mut campaign = super::shared::open(&args.db)?;
    let options = PairOptions {
        site: args.site.clone(),
        depth_cm: args.depth_cm,
        settings: PairingSettings {
            window_s: args.window,
            per_decade: args.per_decade,
            ..PairingSettings::default()
        },
    };
    let summary = pair_campaign(&mut campaign, &options)?;
    println!("{summary}");
    Ok(Outcome::Success)
}
