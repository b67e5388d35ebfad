//! `porewise review`: refresh and list the suspect readings of a campaign, and decide them.

use std::path::PathBuf;

use anyhow::{Context, bail};
use clap::Args;

use super::list::Format;
use crate::analysis::review::{self, Decided, Decision, ReviewOptions};
use crate::error::Outcome;
use crate::fit::outliers::{NoiseBasis, OutlierOptions};
use crate::model::number::plural;
use crate::model::retention::ModelKind;
use crate::model::text::shown;
use crate::model::units::SuctionUnit;
use crate::report::review::queue_listing;
use crate::store::Campaign;
use crate::store::fits::Selection;
use crate::store::flags::FlagFilter;

const AFTER_HELP: &str = "\
Examples:
  porewise review spring.sqlite                      refresh, then list suspects worst first
  porewise review spring.sqlite --site LEV1 --format csv
  porewise review spring.sqlite --accept 112 118 --note \"lost plate contact\"
  porewise review spring.sqlite --dismiss 87
  porewise review spring.sqlite --accept-all

The checks estimate each method's measurement noise from the whole campaign (per method and
import file: a lab's plates share one noise level), refit every sample without each reading
in turn, and suggest a reading whose water content departs from that refit by more than
--threshold standard deviations of the prediction; two neighbouring readings that hold each
other up are tested together. Physical checks: water content above the porosity from bulk
density (particle density 2.65 g/cm3) by more than --saturation-tolerance, and water content
rising with suction by more than --monotonic-threshold standard deviations of a difference.
Suggestions are stored, so the queue survives a restart; a dismissed suggestion is not raised
again. Accepting leaves the reading out of fits and refits its sample with the model its
current fit asked for (auto when it has none), unless --no-refit. Every decision is kept with
its time and note (porewise list DB flag-events).";

/// Arguments of `porewise review`.
#[derive(Debug, Args)]
#[command(after_help = AFTER_HELP)]
pub struct ReviewArgs {
    /// The campaign file.
    pub db: PathBuf,
    /// Only this site (code).
    #[arg(long, value_name = "CODE")]
    pub site: Option<String>,
    /// Only this sample (code).
    #[arg(long, value_name = "CODE")]
    pub sample: Option<String>,
    /// Output format of the queue.
    #[arg(long, value_enum, default_value_t = Format::Table)]
    pub format: Format,
    /// Suction unit of the listing: cm, hpa, kpa, mpa, bar or pf.
    #[arg(long, default_value = "cm", value_parser = parse_unit, value_name = "UNIT")]
    pub units: SuctionUnit,
    /// Accept the open suggestions on these readings (ids as `list readings` shows them).
    #[arg(long, value_name = "READING", num_args = 1.., conflicts_with_all = ["dismiss", "accept_all"])]
    pub accept: Vec<i64>,
    /// Dismiss the open suggestions on these readings: they stay in fits.
    #[arg(long, value_name = "READING", num_args = 1.., conflicts_with = "accept_all")]
    pub dismiss: Vec<i64>,
    /// Refresh, then accept every suggestion listed, in one transaction.
    #[arg(long)]
    pub accept_all: bool,
    /// A note kept with the decision.
    #[arg(long, value_name = "TEXT")]
    pub note: Option<String>,
    /// Do not refit the samples of accepted readings (their fits are then stale).
    #[arg(long)]
    pub no_refit: bool,
    /// List the stored queue without running the checks again.
    #[arg(long, conflicts_with_all = ["accept", "dismiss"])]
    pub no_refresh: bool,
    /// Suggest a reading whose leave-one-out error exceeds this many standard deviations.
    #[arg(long, value_name = "SD", default_value_t = OutlierOptions::default().threshold_sd)]
    pub threshold: f64,
    /// Suggest a reading whose water content rises with suction by more than this many
    /// standard deviations of a difference.
    #[arg(long, value_name = "SD", default_value_t = OutlierOptions::default().monotonic_sd)]
    pub monotonic_threshold: f64,
    /// Water content may exceed the porosity by this much (m3/m3) before it is suspect.
    #[arg(long, value_name = "M3_M3", default_value_t = OutlierOptions::default().saturation_tolerance)]
    pub saturation_tolerance: f64,
    /// Model to judge with: a model identifier, or `current` for each sample's current model.
    #[arg(long, value_name = "NAME", default_value = "van-genuchten")]
    pub model: String,
}

fn parse_unit(s: &str) -> Result<SuctionUnit, String> {
    s.parse()
}

impl ReviewArgs {
    fn options(&self) -> anyhow::Result<ReviewOptions> {
        let model = if self.model.trim().eq_ignore_ascii_case("current") {
            None
        } else {
            Some(
                self.model
                    .parse::<ModelKind>()
                    .map_err(|e| anyhow::anyhow!("--model: {e} (or `current`)"))?,
            )
        };
        let checks = OutlierOptions {
            threshold_sd: self.threshold,
            monotonic_sd: self.monotonic_threshold,
            saturation_tolerance: self.saturation_tolerance,
            ..OutlierOptions::default()
        };
        checks.validate().map_err(|e| anyhow::anyhow!("{e}"))?;
        Ok(ReviewOptions { checks, model })
    }

    fn filter(&self) -> FlagFilter {
        FlagFilter {
            site: self.site.clone(),
            sample: self.sample.clone(),
            ..FlagFilter::default()
        }
    }
}

/// Report the refits of a decision (on stderr when stdout holds a listing); `Partial` when
/// some failed.
fn report_refit(decided: &Decided, to_stderr: bool) -> Outcome {
    if !decided.refit.fitted.is_empty() {
        let text = format!(
            "refitted {}",
            plural(decided.refit.fitted.len() as u64, "sample")
        );
        if to_stderr {
            eprintln!("{text}");
        } else {
            println!("{text}");
        }
    }
    for (sample, reason) in &decided.refit.failed {
        eprintln!("sample {}: not refitted: {}", shown(sample), shown(reason));
    }
    for sample in &decided.refit.changed {
        eprintln!(
            "sample {sample}: not refitted: its readings changed while it was being fitted; \
             fit it again"
        );
    }
    if decided.refit.is_complete() {
        Outcome::Success
    } else {
        Outcome::Partial
    }
}

/// Run `porewise review`.
///
/// # Errors
/// The campaign cannot be opened or written, a code or reading id that is not there, a reading
/// without an open suggestion, or bad thresholds.
pub fn run(args: &ReviewArgs) -> anyhow::Result<Outcome> {
    let options = args.options()?;
    let mut campaign = Campaign::open(&args.db)
        .with_context(|| format!("cannot open campaign {}", args.db.display()))?;
    super::list::warn_unreadable(campaign.connection())?;
    let note = args.note.as_deref();
    if !args.accept.is_empty() || !args.dismiss.is_empty() {
        if args.site.is_some() || args.sample.is_some() {
            bail!("--accept and --dismiss take reading ids; --site and --sample do not apply");
        }
        let mut outcome = Outcome::Success;
        if !args.accept.is_empty() {
            let decided = review::decide(
                &mut campaign,
                &args.accept,
                Decision::Accept,
                note,
                !args.no_refit,
            )?;
            println!(
                "accepted {} on {}; left out of fits",
                plural(decided.flags.len() as u64, "suggestion"),
                plural(decided.readings.len() as u64, "reading")
            );
            outcome = report_refit(&decided, false);
        }
        if !args.dismiss.is_empty() {
            let decided =
                review::decide(&mut campaign, &args.dismiss, Decision::Dismiss, note, false)?;
            println!(
                "dismissed {} on {}; kept in fits",
                plural(decided.flags.len() as u64, "suggestion"),
                plural(decided.readings.len() as u64, "reading")
            );
        }
        return Ok(outcome);
    }
    let selection = Selection {
        site: args.site.clone(),
        samples: args.sample.iter().cloned().collect(),
        ..Selection::default()
    };
    if args.no_refresh {
        selection.check(campaign.connection())?;
    } else {
        let summary = review::refresh(&mut campaign, &selection, &options)?;
        eprintln!(
            "checked {}: {} new, {} still open, {} no longer suspect, {} already kept",
            plural(summary.samples as u64, "sample"),
            plural(summary.raised as u64, "suggestion"),
            summary.refreshed,
            summary.withdrawn,
            summary.declined
        );
        if args.format == Format::Table {
            for level in &summary.noise.levels {
                let basis = match level.basis {
                    NoiseBasis::Own => "",
                    NoiseBasis::Method => "; too few: the method's level across files",
                    NoiseBasis::Campaign => "; too few: the campaign's level",
                    NoiseBasis::Default => "; too few anywhere: the default level",
                };
                eprintln!(
                    "noise {:.4} m3/m3 for {} ({}{basis})",
                    level.sd,
                    shown(&level.label()),
                    plural(level.residuals as u64, "residual")
                );
            }
        }
    }
    let queue = review::queue(&campaign, &args.filter())?;
    let listing = queue_listing(&queue, args.units);
    match args.format {
        Format::Table => {
            if queue.is_empty() {
                println!("no suspect readings waiting for review");
            } else {
                print!("{}", listing.to_table());
            }
        }
        Format::Csv => print!("{}", listing.to_csv()?),
        Format::Json => print!("{}", listing.to_json()),
    }
    if args.accept_all {
        let decided = review::accept_all(&mut campaign, &args.filter(), note, !args.no_refit)?;
        eprintln!(
            "accepted {}; left out of fits",
            plural(decided.flags.len() as u64, "suggestion")
        );
        return Ok(report_refit(&decided, true));
    }
    Ok(Outcome::Success)
}
