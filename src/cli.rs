//! The command line: clap definitions and dispatch, thin over the library.
//!
//! Each subcommand lives in its own module with its arguments and a `run` function that
//! returns an [`Outcome`] or an error for the user (exit 1). Usage errors are clap's (exit 2).

use clap::{Parser, Subcommand};

use crate::error::Outcome;

pub mod advise;
pub mod archive;
pub mod backup;
pub mod current;
pub mod curve;
pub mod demo;
pub mod export;
pub mod fit;
pub mod fit_joint;
pub mod flag;
pub mod import;
pub mod init;
pub mod list;
pub mod logger;
pub mod merge;
pub mod open;
pub mod pair;
pub mod push;
pub mod review;
pub mod set;
pub mod shared;
pub mod shell;
pub mod unflag;

/// porewise: soil-water retention campaigns in one SQLite file.
#[derive(Debug, Parser)]
#[command(name = "porewise", version, about, long_about = None, propagate_version = true)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// The subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Build the invented demo campaign and open it in the terminal UI.
    Demo(demo::DemoArgs),
    /// Create an empty campaign file.
    Init(init::InitArgs),
    /// Import sites, layers, lab retention readings or field logger records from CSV files
    /// (sites, layers and lab readings also from .xlsx and .ods workbooks).
    #[command(subcommand)]
    Import(import::ImportCommand),
    /// List what a campaign file holds.
    List(list::ListArgs),
    /// Open a campaign in the terminal UI: browse, review outliers, refit, compare depths.
    Open(open::OpenArgs),
    /// Change campaign settings (field capacity and wilting point suctions).
    Set(set::SetArgs),
    /// Pair tensiometer and water-content records into field retention readings.
    Pair(pair::PairArgs),
    /// Fit retention models to a campaign's samples, or to a plain CSV file with --input.
    Fit(fit::FitArgs),
    /// Choose which fit of a sample's history is current (retention-only or with conductivity).
    Current(current::CurrentArgs),
    /// Tabulate a retention curve for given parameters.
    Curve(curve::CurveArgs),
    /// Write the campaign summary: parameter and profile tables, JSON, GeoJSON, HTML report.
    Export(export::ExportArgs),
    /// Find suspect readings across the campaign, list them worst first, accept or dismiss them.
    Review(review::ReviewArgs),
    /// Leave a reading out of fits by hand, with a reason.
    Flag(flag::FlagArgs),
    /// Take a flagged reading back into fits.
    Unflag(unflag::UnflagArgs),
    /// Which suction to measure next on each sample, and where one more reading pays most.
    Advise(advise::AdviseArgs),
    /// Write a verified copy of a campaign, safe while it is open elsewhere.
    Backup(backup::BackupArgs),
    /// Push a campaign file into the shared archive on a PostgreSQL server (merge rules: new rows added, conflicts refused unless resolved)
    Push(push::PushArgs),
    /// Pull a campaign from the shared archive into a new campaign file
    Pull(push::PullArgs),
    /// The shared archive on a PostgreSQL server: create it, list it, summarise its fits
    #[command(subcommand)]
    Archive(archive::ArchiveCommand),
    /// Bring other copies of a campaign (other laptops' files) into one, by stable ids.
    Merge(merge::MergeArgs),
    /// Print a shell completion script (bash, zsh, fish, powershell).
    Completions(shell::CompletionsArgs),
    /// Print the manual page (roff): `porewise manual > porewise.1`.
    Manual(shell::ManualArgs),
}

impl Command {
    /// The command as the user typed it, without its arguments (`porewise import lab`): the
    /// name a writer note gives (see [`crate::store::holder`]).
    pub fn name(&self) -> String {
        let word = match self {
            Command::Demo(_) => "demo",
            Command::Init(_) => "init",
            Command::Import(cmd) => {
                let kind = match cmd {
                    import::ImportCommand::Sites(_) => "sites",
                    import::ImportCommand::Layers(_) => "layers",
                    import::ImportCommand::Lab(_) => "lab",
                    import::ImportCommand::Conductivity(_) => "conductivity",
                    import::ImportCommand::Logger(_) => "logger",
                };
                return format!("porewise import {kind}");
            }
            Command::List(_) => "list",
            Command::Open(_) => "open",
            Command::Set(_) => "set",
            Command::Pair(_) => "pair",
            Command::Fit(_) => "fit",
            Command::Curve(_) => "curve",
            Command::Export(_) => "export",
            Command::Review(_) => "review",
            Command::Flag(_) => "flag",
            Command::Unflag(_) => "unflag",
            Command::Advise(_) => "advise",
            Command::Backup(_) => "backup",
            Command::Archive(_) => "archive",
            Command::Push(_) => "push",
            Command::Pull(_) => "pull",
            Command::Merge(_) => "merge",
            Command::Completions(_) => "completions",
            Command::Manual(_) => "manual",
            Command::Current(_) => "current",
        };
        format!("porewise {word}")
    }
}

/// Run a parsed command line.
///
/// # Errors
/// Any error meant for the user (bad input, missing file); `main` prints it and exits 1.
pub fn run(cli: Cli) -> anyhow::Result<Outcome> {
    crate::store::holder::set_command(cli.command.name());
    match cli.command {
        Command::Demo(args) => demo::run(&args),
        Command::Init(args) => init::run(&args),
        Command::Import(cmd) => import::run(&cmd),
        Command::List(args) => list::run(&args),
        Command::Open(args) => open::run(&args),
        Command::Set(args) => set::run(&args),
        Command::Pair(args) => pair::run(&args),
        Command::Fit(args) => fit::run(&args),
        Command::Curve(args) => curve::run(&args),
        Command::Export(args) => export::run(&args),
        Command::Review(args) => review::run(&args),
        Command::Flag(args) => flag::run(&args),
        Command::Unflag(args) => unflag::run(&args),
        Command::Advise(args) => advise::run(&args),
        Command::Backup(args) => backup::run(&args),
        Command::Archive(cmd) => archive::run(&cmd),
        Command::Push(args) => push::run_push(&args),
        Command::Pull(args) => push::run_pull(&args),
        Command::Merge(args) => merge::run(&args),
        Command::Completions(args) => shell::completions(&args),
        Command::Manual(args) => shell::manual(&args),
        Command::Current(args) => current::run(&args),
    }
}
