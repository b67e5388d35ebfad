//! `porewise review`: refresh and list the suspect readings of a campaign, and decide them.

use std::path::PathBuf;

use anyhow::{Context, bail};
use clap::Args;

use super::list::Format;
use crate::analysis::episodes;
use crate::analysis::review::{self, Decided, Decision, ReviewOptions};
use crate::error::Outcome;
use crate::fit::outliers::{NoiseBasis, OutlierOptions};
use crate::model::number::plural;
use crate::model::retention::ModelKind;
use crate::model::text::shown;
use crate::model::units::SuctionUnit;
use crate::report::review::{episodes_listing, queue_listing};
use crate::store::Campaign;
use crate::store::fits::Selection;
use crate::store::flags::FlagFilter;

const AFTER_HELP: &str = "\
Examples:
  porewise review spring.sqlite                      refresh, then list suspects worst first
  porewise review spring.sqlite --site LEV1 --format csv
  porewise review spring.sqlite --accept 112 118 --note \"lost plate contact\"
  porewise review spring.sqlite --dismiss 87
  porewise review spring.sqlite --accept-episode 43 --note \"dry spell past the probe's range\"
  porewise review spring.sqlite --by-record                  one row per suspect record
  porewise review spring.sqlite --accept-all

The queue is listed in episodes: consecutive suspect records of one logger sensor with the
same kind of reason (no other record of the sensor between them) are one row, with the time
span, the number of records and the worst record's values, score and reason; its flag column
is the episode's id for --accept-episode and --dismiss-episode, which decide all of its records
in one transaction. A lab reading is an episode of its own. --by-record lists every record.

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
#[allow(clippy::struct_excessive_bools)] // independent switches, one per command-line flag
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
    /// Accept every suggestion of these episodes (the flag ids the listing shows; any flag of
    /// an episode names it), each episode in one transaction.
    #[arg(long, value_name = "FLAG", num_args = 1.., conflicts_with_all = ["accept", "dismiss", "accept_all"])]
    pub accept_episode: Vec<i64>,
    /// Dismiss every suggestion of these episodes: their records and readings stay.
    #[arg(long, value_name = "FLAG", num_args = 1.., conflicts_with_all = ["accept", "dismiss", "accept_all", "accept_episode"])]
    pub dismiss_episode: Vec<i64>,
    /// List one row per suspect reading or record instead of episodes.
    #[arg(long)]
    pub by_record: bool,
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
    if !args.accept_episode.is_empty() || !args.dismiss_episode.is_empty() {
        return decide_episodes(&mut campaign, args, note);
    }
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
    let listing = if args.by_record {
        queue_listing(&queue, args.units)
    } else {
        episodes_listing(
            &episodes::group(campaign.connection(), queue.clone())?,
            args.units,
        )
    };
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

/// `--accept-episode` / `--dismiss-episode`: find each named episode in the stored queue and
/// decide all of its flags, one transaction per episode.
fn decide_episodes(
    campaign: &mut Campaign,
    args: &ReviewArgs,
    note: Option<&str>,
) -> anyhow::Result<Outcome> {
    if args.site.is_some() || args.sample.is_some() {
        bail!(
            "--accept-episode and --dismiss-episode take flag ids; --site and --sample do not apply"
        );
    }
    let (ids, decision) = if args.accept_episode.is_empty() {
        (&args.dismiss_episode, Decision::Dismiss)
    } else {
        (&args.accept_episode, Decision::Accept)
    };
    let queue = review::queue(campaign, &FlagFilter::default())?;
    let grouped = episodes::group(campaign.connection(), queue)?;
    let mut chosen: Vec<&episodes::Episode> = Vec::new();
    for &id in ids {
        let Some(e) = grouped.iter().find(|e| e.holds(id)) else {
            bail!(
                "flag {id} is not an open suggestion in the review queue (see `porewise review \
                 DB --no-refresh`); nothing was decided"
            );
        };
        if !chosen.iter().any(|c| c.id() == e.id()) {
            chosen.push(e);
        }
    }
    let mut outcome = Outcome::Success;
    let (mut flags, mut episodes_done) = (0u64, 0u64);
    for e in chosen {
        let decided = episodes::decide_episode(campaign, e, decision, note, !args.no_refit)?;
        flags += decided.flags.len() as u64;
        episodes_done += 1;
        if report_refit(&decided, false) == Outcome::Partial {
            outcome = Outcome::Partial;
        }
    }
    let what = match decision {
        Decision::Accept => "accepted",
        Decision::Dismiss => "dismissed",
    };
    let kept = match decision {
        Decision::Accept => "left out of fits and pairing",
        Decision::Dismiss => "kept",
    };
    println!(
        "{what} {} in {}; {kept}",
        plural(flags, "suggestion"),
        plural(episodes_done, "episode")
    );
    Ok(outcome)
}
