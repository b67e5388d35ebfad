//! `porewise push` and `porewise pull`: a campaign file into the shared archive and back.

use std::path::PathBuf;

use anyhow::{Context, bail};
use clap::Args;

use crate::archive::connect;
use crate::archive::migrate::{check, ensure};
use crate::archive::pull::pull;
use crate::archive::push::{PushOutcome, preview, push};
use crate::cli::archive::ServerArgs;
use crate::error::Outcome;
use crate::model::number::plural;
use crate::model::text::shown;
use crate::store::Campaign;
use crate::store::exchange::{self, Preferences};

/// Arguments of `porewise push`.
#[derive(Debug, Args)]
#[command(
    after_help = "Examples:\n  porewise push spring.sqlite postgres://ana@db.example/soils\n  porewise push spring.sqlite postgres://ana@db.example/soils --dry-run\n  porewise push spring.sqlite postgres://ana@db.example/soils --prefer flags=newer --prefer fits=local"
)]
pub struct PushArgs {
    /// The campaign file to push.
    pub file: PathBuf,
    #[command(flatten)]
    pub server: ServerArgs,
    /// How to resolve conflicts (rows both sides have, different): WAY for every kind or
    /// KIND=WAY; WAY is newer, local (this file's version; also `from`) or archive (the
    /// server's; also `into`). Without it a conflict refuses the whole push.
    #[arg(long, value_name = "[KIND=]WAY")]
    pub prefer: Vec<String>,
    /// Say what the push would write and write nothing (the archive's transaction is rolled
    /// back; an archive not set up is reported, not created); conflicts are listed as a push
    /// would list them.
    #[arg(long)]
    pub dry_run: bool,
}

/// Arguments of `porewise pull`.
#[derive(Debug, Args)]
#[command(
    after_help = "Example:\n  porewise pull postgres://ana@db.example/soils --campaign \"Spring survey\" spring.sqlite"
)]
pub struct PullArgs {
    #[command(flatten)]
    pub server: ServerArgs,
    /// The campaign: its name, or its uid when several share a name.
    #[arg(long, value_name = "NAME-OR-UID")]
    pub campaign: String,
    /// The campaign file to write (must not exist).
    #[arg(value_name = "OUT")]
    pub out: PathBuf,
}

/// `local`/`archive` for the push's two sides, the merge engine's `from`/`into`.
fn preference(text: &str) -> String {
    let (kind, way) = match text.split_once('=') {
        Some((k, w)) => (Some(k), w),
        None => (None, text),
    };
    let way = match way {
        "local" => "from",
        "archive" | "server" => "into",
        other => other,
    };
    kind.map_or_else(|| way.to_string(), |k| format!("{k}={way}"))
}

/// Run `porewise push`.
///
/// # Errors
/// The file is not a campaign, the server cannot be reached, or conflicts were left
/// unresolved (nothing was written; the report on stderr lists them).
pub fn run_push(args: &PushArgs) -> anyhow::Result<Outcome> {
    let mut prefs = Preferences::default();
    for p in &args.prefer {
        prefs.add(&preference(p)).map_err(anyhow::Error::msg)?;
    }
    let campaign = Campaign::open(&args.file)
        .with_context(|| format!("cannot open {}", args.file.display()))?;
    let local = exchange::read(campaign.connection())
        .with_context(|| format!("cannot read {}", args.file.display()))?;
    drop(campaign);
    let target = args.server.target()?;
    let mut client = connect(&target)?;
    if args.dry_run {
        // A dry run writes nothing, not even the archive's tables.
        check(&mut client, &target)?;
    } else {
        ensure(&mut client, &target)
            .with_context(|| format!("cannot set up the archive on {}", target.shown()))?;
    }
    let outcome = if args.dry_run {
        preview(&mut client, &local, &prefs)?
    } else {
        push(&mut client, &local, &prefs)?
    };
    match outcome {
        PushOutcome::Done(done) if done.dry_run && !done.unchanged && done.written > 0 => {
            print!("{}", done.report);
            println!(
                "dry run: would push {} of campaign {:?} ({}) to {} (fingerprint then {}); nothing was written",
                plural(done.written as u64, "row"),
                shown(&local.campaign.name),
                local.campaign.uid,
                target.shown(),
                done.fingerprint
            );
            Ok(Outcome::Success)
        }
        PushOutcome::Done(done) => {
            print!("{}", done.report);
            let (verb, place) = if done.unchanged {
                ("unchanged:", "already in")
            } else if done.written == 0 {
                // The archive holds every row of the file (or keeps its own version of it).
                ("nothing new:", "holds all of it in")
            } else {
                ("pushed", "to")
            };
            println!(
                "{verb} campaign {:?} ({}) {place} {} (fingerprint {})",
                shown(&local.campaign.name),
                local.campaign.uid,
                target.shown(),
                done.fingerprint
            );
            if done.attempts > 1 {
                eprintln!("note: the server asked for {} tries", done.attempts);
            }
            Ok(Outcome::Success)
        }
        PushOutcome::Refused(plan) => {
            eprint!("{}", plan.render());
            bail!(
                "{}: {} conflicts unresolved and {} code collisions between the archive (INTO) and {} (FROM); nothing was written (resolve with --prefer)",
                if args.dry_run {
                    "push would be refused"
                } else {
                    "push refused"
                },
                plan.unresolved(),
                plan.collisions.len(),
                args.file.display()
            )
        }
    }
}

/// Run `porewise pull`.
///
/// # Errors
/// The server cannot be reached, the campaign is unknown or ambiguous, or OUT exists.
pub fn run_pull(args: &PullArgs) -> anyhow::Result<Outcome> {
    let (target, mut client) = args.server.open_checked()?;
    let pulled = pull(&mut client, &args.campaign, &args.out)
        .with_context(|| format!("cannot pull from {}", target.shown()))?;
    let [sites, samples, readings, fits, logger] = pulled.counts;
    println!(
        "pulled campaign {:?} ({}) into {}: {sites} sites, {samples} samples, {readings} readings, {fits} fits, {logger} logger records (fingerprint {})",
        shown(&pulled.name),
        pulled.uid,
        pulled.path.display(),
        pulled.fingerprint
    );
    Ok(Outcome::Success)
}

#[cfg(test)]
mod tests {
    use super::preference;

    #[test]
    fn local_and_archive_name_the_engines_sides() {
        assert_eq!(preference("local"), "from");
        assert_eq!(preference("fits=archive"), "fits=into");
        assert_eq!(preference("flags=newer"), "flags=newer");
        assert_eq!(preference("server"), "into");
    }
}
