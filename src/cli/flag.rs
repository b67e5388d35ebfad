//! `porewise flag`: leave a reading out of fits by hand, with a reason and an optional note.

use std::path::PathBuf;

use anyhow::Context;
use clap::Args;

use crate::analysis::review::{fit_state_of_reading, flag_reading};
use crate::error::Outcome;
use crate::model::domain::FlagTarget;
use crate::store::Campaign;
use crate::store::fits::{FitState, StaleReason};

/// Arguments of `porewise flag`.
#[derive(Debug, Args)]
#[command(
    after_help = "Examples:\n  porewise flag spring.sqlite 112 --reason \"core cracked\" --note \"photo 14\"\n  porewise flag spring.sqlite 7 --conductivity --reason \"sensor drift\"\n\nThe reading is left out of fits at once; its sample's current fit is then stale\n(porewise list DB fits) until refitted (porewise fit DB --sample CODE).\nporewise unflag DB READING takes it back; both changes are kept in the audit trail."
)]
pub struct FlagArgs {
    /// The campaign file.
    pub db: PathBuf,
    /// The reading id (as `porewise list DB readings` shows it), or with --conductivity the
    /// conductivity reading id (as `porewise list DB conductivity` shows it).
    pub reading: i64,
    /// READING is a measured conductivity reading: it is left out of (taken back into) joint
    /// fits of retention and conductivity.
    #[arg(long)]
    pub conductivity: bool,
    /// Why the reading is left out.
    #[arg(long, value_name = "TEXT")]
    pub reason: String,
    /// A note kept with the flag.
    #[arg(long, value_name = "TEXT")]
    pub note: Option<String>,
}

/// Run `porewise flag`.
///
/// # Errors
/// The campaign cannot be opened or written, no such reading, an empty reason, or a reading
/// already flagged.
pub fn run(args: &FlagArgs) -> anyhow::Result<Outcome> {
    let mut campaign = Campaign::open(&args.db)
        .with_context(|| format!("cannot open campaign {}", args.db.display()))?;
    let target = target(args.reading, args.conductivity);
    let id = flag_reading(&mut campaign, target, &args.reason, args.note.as_deref())?;
    let (sample, state) = fit_state_of_reading(campaign.connection(), target)?;
    let left_out = if args.conductivity {
        "left out of joint fits"
    } else {
        "left out of fits"
    };
    println!(
        "{} flagged (flag {id}); {left_out}; {}",
        what(target),
        fit_note(&sample, &state)
    );
    Ok(Outcome::Success)
}

/// What the reading argument names: a retention reading, or with `--conductivity` a
/// conductivity reading.
pub(crate) fn target(reading: i64, conductivity: bool) -> FlagTarget {
    if conductivity {
        FlagTarget::ConductivityReading(reading)
    } else {
        FlagTarget::Reading(reading)
    }
}

/// `reading 12` or `conductivity reading 12`, for messages.
pub(crate) fn what(target: FlagTarget) -> String {
    match target {
        FlagTarget::Reading(id) => format!("reading {id}"),
        FlagTarget::ConductivityReading(id) => format!("conductivity reading {id}"),
        FlagTarget::LoggerRecord(id) => format!("logger record {id}"),
    }
}

/// What a flag change did to the sample's fit, for the message after it.
pub(crate) fn fit_note(sample: &str, state: &FitState) -> String {
    let sample = crate::model::text::shown(sample);
    match state {
        FitState::Stale(reasons) if reasons.contains(&StaleReason::ConductivityChanged) => {
            format!(
                "the joint fit of {sample} is stale until refitted \
                 (porewise fit DB --sample {sample} --with-conductivity)"
            )
        }
        FitState::Stale(_) => format!(
            "the fit of {sample} is stale until refitted (porewise fit DB --sample {sample})"
        ),
        FitState::Current => format!("the fit of {sample} matches its readings"),
        FitState::None | FitState::Failed(_) => format!("{sample} has no current fit"),
    }
}
