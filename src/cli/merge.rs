//! `porewise merge`: bring the rows of other campaign files (other laptops' copies) into one.

use std::path::PathBuf;

use anyhow::{Context, bail};
use clap::Args;

use crate::error::Outcome;
use crate::model::number::plural;
use crate::model::text::shown;
use crate::store::Campaign;
use crate::store::exchange::{self, MergePlan, Preferences, RowKind};

/// Arguments of `porewise merge`.
#[derive(Debug, Args)]
#[command(
    after_help = "Rows are matched by their stable ids (logger records by site, sensor and time); rows both\n\
                  files hold alike are skipped, so merging the same file twice changes nothing. A row\n\
                  changed differently in the two files is a conflict: every one is listed and nothing is\n\
                  written unless --prefer resolves it. Two different rows with the same code (two sites\n\
                  S1) are listed too and never merged. Flag histories are unioned.\n\n\
                  Kinds for --prefer: campaign, batches, sites, layers, samples, readings, conductivity,\n\
                  logger, flags, flag-events, fits. `newer` decides flags (by decision time) and fits\n\
                  (by creation time) only.\n\n\
                  Examples:\n  porewise merge spring.sqlite laptop-b.sqlite --dry-run\n  \
                  porewise merge spring.sqlite laptop-b.sqlite laptop-c.sqlite --prefer flags=newer --prefer readings=into"
)]
pub struct MergeArgs {
    /// The campaign file to merge into (written).
    pub into: PathBuf,
    /// The campaign files to merge from, in order (read only; a file of an older porewise is
    /// upgraded on opening, as every command does).
    #[arg(required = true)]
    pub from: Vec<PathBuf>,
    /// How to resolve conflicts: newer, into or from for every kind, or KIND=WAY for one kind
    /// (repeat the option for several).
    #[arg(long, value_name = "WAY|KIND=WAY")]
    pub prefer: Vec<String>,
    /// Say what would happen and write nothing.
    #[arg(long)]
    pub dry_run: bool,
    /// Merge even when a file is another campaign (a different campaign id).
    #[arg(long)]
    pub other_campaign: bool,
}

/// Run `porewise merge`.
///
/// # Errors
/// A file that cannot be opened, an unknown --prefer, conflicts left unresolved or code
/// collisions (nothing is written then), or INTO changed by another command meanwhile.
pub fn run(args: &MergeArgs) -> anyhow::Result<Outcome> {
    let mut prefs = Preferences {
        allow_other_campaign: args.other_campaign,
        ..Preferences::default()
    };
    for p in &args.prefer {
        prefs.add(p).map_err(anyhow::Error::msg)?;
    }
    let mut into = Campaign::open(&args.into)
        .with_context(|| format!("cannot open campaign {}", args.into.display()))?;
    // Read and plan without the write lock; the lock is taken for the writes alone.
    let version = data_version(into.connection())?;
    let stale_before = stale_count(into.connection())?;
    let mut rows = exchange::read(into.connection())
        .with_context(|| format!("cannot read {}", args.into.display()))?;
    let mut plans: Vec<(PathBuf, MergePlan)> = Vec::new();
    for path in &args.from {
        let from = Campaign::open(path)
            .with_context(|| format!("cannot open campaign {}", path.display()))?;
        let theirs = exchange::read(from.connection())
            .with_context(|| format!("cannot read {}", path.display()))?;
        let plan = exchange::plan(&rows, &theirs, &prefs);
        rows = plan.merged(&rows);
        plans.push((path.clone(), plan));
    }
    for (path, plan) in &plans {
        println!(
            "{} from {} (rows):",
            if args.dry_run {
                "would merge"
            } else {
                "merging"
            },
            shown(&path.display().to_string())
        );
        print!("{}", plan.render());
    }
    let unresolved: usize = plans.iter().map(|(_, p)| p.unresolved()).sum();
    let collisions: usize = plans.iter().map(|(_, p)| p.collisions.len()).sum();
    if let Some((path, refusal)) = plans
        .iter()
        .find_map(|(path, p)| p.refusal.as_ref().map(|r| (path, r)))
    {
        bail!(
            "{}: {}; nothing was written",
            shown(&path.display().to_string()),
            shown(refusal)
        );
    }
    if unresolved > 0 || collisions > 0 {
        bail!(
            "{} and {} (listed above); nothing was written",
            plural(unresolved as u64, "unresolved conflict"),
            plural(collisions as u64, "code collision")
        );
    }
    let totals = totals(&plans);
    if args.dry_run {
        println!("dry run: would write {totals}; nothing was written");
        return Ok(Outcome::Success);
    }
    if plans.iter().all(|(_, p)| p.writes_nothing()) {
        println!(
            "nothing to write: {} holds every row of the other {} or keeps its own version",
            shown(&args.into.display().to_string()),
            if args.from.len() == 1 {
                "file"
            } else {
                "files"
            }
        );
        return Ok(Outcome::Success);
    }
    let tx = into.transaction()?;
    if data_version(&tx)? != version {
        bail!(
            "{} was changed by another command while the merge was planned; nothing was \
             written: run the merge again",
            shown(&args.into.display().to_string())
        );
    }
    for (_, plan) in &plans {
        exchange::apply(&tx, plan)?;
    }
    let stale_after = stale_count(&tx)?;
    tx.commit()?;
    println!(
        "merged into {}: {totals}",
        shown(&args.into.display().to_string()),
    );
    println!(
        "stale current fits: {stale_before} before, {stale_after} after (refit them with `porewise fit`)"
    );
    Ok(Outcome::Success)
}

fn data_version(conn: &rusqlite::Connection) -> anyhow::Result<i64> {
    Ok(conn.query_row("PRAGMA data_version", [], |r| r.get(0))?)
}

/// Current fits whose sample's readings no longer match them.
fn stale_count(conn: &rusqlite::Connection) -> anyhow::Result<usize> {
    use crate::store::fits::{FitState, Selection, samples, summaries};
    let samples = samples(conn, &Selection::all())?;
    Ok(summaries(conn, &samples)?
        .values()
        .filter(|s| matches!(s.state, FitState::Stale(_)))
        .count())
}

/// What the plans write, per kind: `3 new readings, 1 reading replaced, ...`.
fn totals(plans: &[(PathBuf, MergePlan)]) -> String {
    let mut parts = Vec::new();
    for kind in RowKind::ALL {
        let (new, took): (usize, usize) = plans
            .iter()
            .filter_map(|(_, p)| p.counts.get(&kind))
            .fold((0, 0), |(n, t), c| (n + c.new, t + c.took_from));
        let noun = match kind {
            RowKind::Campaign => "campaign settings",
            RowKind::Batches => "import batches",
            RowKind::Sites => "sites",
            RowKind::Layers => "layers",
            RowKind::Samples => "samples",
            RowKind::Readings => "retention readings",
            RowKind::Conductivity => "conductivity readings",
            RowKind::Logger => "logger records",
            RowKind::Flags => "flags",
            RowKind::FlagEvents => "flag events",
            RowKind::Fits => "fits",
        };
        if new > 0 {
            parts.push(format!("{noun}: {new} new"));
        }
        if took > 0 {
            parts.push(format!("{noun}: {took} taken from FROM"));
        }
    }
    if parts.is_empty() {
        "no rows".into()
    } else {
        parts.join(", ")
    }
}
