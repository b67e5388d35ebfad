//! `porewise advise`: which suction to measure next on each sample, and where one more reading
//! pays most.

use std::path::PathBuf;

use anyhow::{Context, bail};
use clap::{Args, ValueEnum};

use super::list::Format;
use crate::analysis::advise::{self, AdviceTarget, AdviseOptions, DEFAULT_CANDIDATES_CM};
use crate::error::Outcome;
use crate::model::number::plural;
use crate::model::text::shown;
use crate::model::units::SuctionUnit;
use crate::report::advice::advice_listing;
use crate::store::Campaign;
use crate::store::fits::Selection;

const AFTER_HELP: &str = "\
Examples:
  porewise advise spring.sqlite                         every lab core, biggest gain first
  porewise advise spring.sqlite --site LEV1 --format csv > lab-order.csv
  porewise advise spring.sqlite --sample LEV1-Ap-a --every-step
  porewise advise spring.sqlite --target parameters --candidates-kpa 1,10,33,100,500,1500

For each lab core with a current fit: the one more reading, at which of the candidate
suctions, that would shrink the 95 % interval of available water (theta at the campaign's
field capacity minus at its wilting point) most, and to what; with --target parameters, the
reading that grows det(J'WJ) most (D-optimality), its effect given as the geometric mean of
the parameters' relative 95 % half-widths. Nothing is refitted: the new reading (weight 1) adds
one row to the fit's information matrix. Its noise is the fit's own residual standard deviation,
or with fewer than 3 degrees of freedom the campaign's pooled noise of the methods of the
sample's readings. Intervals use Student's t of the noise's degrees of freedom, the same now
and after, so a reading that tells nothing about the target takes nothing off.

Candidates by default: 1, 3, 10, 30, 60, 100, 330, 1000, 3000, 5000 and 15300 cm (the steps
labs usually offer). Field pairings are not advised (their readings come from the loggers).
A lab core without a current fit or without advice is named on stderr (exit 3).";

/// What the next reading should make more certain.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum TargetArg {
    /// Available water: the smallest 95 % interval after the reading.
    AvailableWater,
    /// The parameters jointly: the largest det(J'WJ) after the reading.
    Parameters,
}

impl From<TargetArg> for AdviceTarget {
    fn from(t: TargetArg) -> Self {
        match t {
            TargetArg::AvailableWater => AdviceTarget::AvailableWater,
            TargetArg::Parameters => AdviceTarget::Parameters,
        }
    }
}

/// Arguments of `porewise advise`.
#[derive(Debug, Args)]
#[command(after_help = AFTER_HELP)]
pub struct AdviseArgs {
    /// The campaign file.
    pub db: PathBuf,
    /// Only this site (code).
    #[arg(long, value_name = "CODE")]
    pub site: Option<String>,
    /// Only this sample (code); repeat for more.
    #[arg(long, value_name = "CODE")]
    pub sample: Vec<String>,
    /// What the next reading should make more certain.
    #[arg(long, value_enum, default_value_t = TargetArg::AvailableWater)]
    pub target: TargetArg,
    /// The suctions to choose from, kPa, comma separated (default: the usual lab steps).
    #[arg(long, value_name = "LIST", value_delimiter = ',')]
    pub candidates_kpa: Vec<f64>,
    /// Every candidate of every sample, the chosen one marked, instead of the chosen one.
    #[arg(long)]
    pub every_step: bool,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Table)]
    pub format: Format,
    /// Suction unit of the listing: cm, hpa, kpa, mpa, bar or pf.
    #[arg(long, default_value = "cm", value_parser = parse_unit, value_name = "UNIT")]
    pub units: SuctionUnit,
}

fn parse_unit(s: &str) -> Result<SuctionUnit, String> {
    s.parse()
}

impl AdviseArgs {
    fn options(&self) -> anyhow::Result<AdviseOptions> {
        let mut candidates_cm = if self.candidates_kpa.is_empty() {
            DEFAULT_CANDIDATES_CM.to_vec()
        } else {
            self.candidates_kpa
                .iter()
                .map(|&kpa| advise::candidate_from_kpa(kpa))
                .collect::<Result<Vec<f64>, String>>()
                .map_err(|e| anyhow::anyhow!("--candidates-kpa: {e}"))?
        };
        candidates_cm.sort_by(f64::total_cmp);
        candidates_cm.dedup();
        if candidates_cm.is_empty() {
            bail!("--candidates-kpa: expected at least one suction");
        }
        Ok(AdviseOptions {
            target: self.target.into(),
            candidates_cm,
        })
    }
}

/// Run `porewise advise`.
///
/// # Errors
/// Bad candidates, a campaign that cannot be opened, or a site or sample code not in it.
pub fn run(args: &AdviseArgs) -> anyhow::Result<Outcome> {
    let options = args.options()?;
    let campaign = Campaign::open(&args.db)
        .with_context(|| format!("cannot open campaign {}", args.db.display()))?;
    super::list::warn_unreadable(campaign.connection())?;
    let settings = campaign.settings()?;
    let selection = Selection {
        site: args.site.clone(),
        samples: args.sample.clone(),
        ..Selection::default()
    };
    let advice = advise::advise(campaign.connection(), &settings, &selection, &options)?;
    let listing = advice_listing(&advice, options.target, args.units, args.every_step);
    match args.format {
        super::list::Format::Table => {
            let what = match options.target {
                AdviceTarget::AvailableWater => format!(
                    "shrinks the 95 % interval of available water (field capacity {} kPa, \
                     wilting point {} kPa)",
                    settings.fc_kpa, settings.pwp_kpa
                ),
                AdviceTarget::Parameters => "grows det(J'WJ) of the parameters (param_pm: the \
                     geometric mean of their relative 95 % half-widths)"
                    .to_string(),
            };
            let steps: Vec<String> = options
                .candidates_cm
                .iter()
                .map(|h| {
                    crate::model::number::significant(args.units.from_cm(*h), 4)
                        .unwrap_or_else(|| "sat".into())
                })
                .collect();
            eprintln!(
                "next reading per sample: the one that {what} most, among {} {}; \
                 biggest gain first",
                steps.join(", "),
                args.units.symbol()
            );
            if advice.ranked.is_empty() {
                println!("no sample to advise on");
            } else {
                print!("{}", listing.to_table());
            }
        }
        super::list::Format::Csv => print!("{}", listing.to_csv()?),
        super::list::Format::Json => print!("{}", listing.to_json()),
    }
    for s in &advice.skipped {
        eprintln!(
            "sample {}: no advice: {}",
            shown(&s.sample),
            shown(&s.reason)
        );
    }
    if !advice.skipped.is_empty() {
        eprintln!(
            "{} without advice",
            plural(advice.skipped.len() as u64, "sample")
        );
    }
    Ok(if advice.skipped.is_empty() {
        Outcome::Success
    } else {
        Outcome::Partial
    })
}
