//! The campaign file: SQLite with numbered migrations, one module per aggregate.
//!
//! [`Campaign`] owns the connection. Repository functions take a `&Connection`, so they work
//! the same on the connection and inside a [`rusqlite::Transaction`] (which derefs to one);
//! a command that writes opens one transaction with [`Campaign::transaction`] and commits it
//! once, so all of its changes land or none do.

use std::path::PathBuf;

/// SQL condition on a flag aliased `f` that is true when it leaves its target out of fits: an
/// accepted flag, or a manual flag not yet dismissed or cleared (as `Flag::excludes`). A
/// macro so that constant queries can `concat!` it; every exclusion query uses this one rule.
macro_rules! flag_excludes {
    () => {
        "(f.status = 'accepted' OR (f.status = 'suggested' AND f.origin = 'manual'))"
    };
}

pub mod backup;
pub mod batches;
pub mod campaign;
pub mod conductivity;
pub mod db;
pub mod exchange;
pub mod fits;
pub mod flags;
pub mod holder;
pub mod layers;
pub mod logger;
pub mod migrate;
pub mod outline;
pub mod overview;
pub mod pairing;
pub mod readings;
pub mod samples;
pub mod sites;
mod sql_types;
pub mod texture;

pub use campaign::{Campaign, CampaignSettings, CampaignTransaction};
pub use overview::{Counts, LayerOverview, Overview, SampleOverview, SiteOverview, overview};

/// What can go wrong in the store.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum StoreError {
    /// SQLite refused an operation.
    #[error("database error: {0}")]
    Sqlite(#[from] rusqlite::Error),
    /// The campaign file could not be created or read.
    #[error("{path}: {source}")]
    Io {
        /// The file.
        path: PathBuf,
        /// The operating system's error.
        source: std::io::Error,
    },
    /// `create` was asked to make a file that is already there.
    #[error("{0} already exists; porewise does not overwrite a file (choose another name)")]
    Exists(PathBuf),
    /// `open` was given a file that is not there.
    #[error("{0} does not exist; create a campaign with `porewise init FILE`")]
    NotFound(PathBuf),
    /// The file is not a porewise campaign (another SQLite file, or not SQLite at all).
    #[error("{0} is not a porewise campaign file")]
    NotACampaign(PathBuf),
    /// The file is a database that SQLite finds malformed (truncated, overwritten).
    #[error(
        "{path} is damaged: the database is malformed (PRAGMA integrity_check: {check}); \
         restore it from a backup copy",
        path = path.display()
    )]
    Damaged {
        /// The file.
        path: PathBuf,
        /// What SQLite's integrity check says (its first lines), or why it could not run.
        check: String,
    },
    /// The file cannot be written: its folder or its journal files are not writable.
    #[error("cannot write to {path}: {reason}", path = path.display())]
    Unwritable {
        /// The campaign file.
        path: PathBuf,
        /// What is in the way.
        reason: String,
    },
    /// A command that writes in several transactions (a large campaign fit) was stopped by
    /// an error after some of them had committed.
    #[error(
        "{source}; the fits of {recorded} of {total} samples had been recorded before this \
         (each sample whole); the others keep their earlier fits: run the same fit again"
    )]
    PartlyRecorded {
        /// Samples whose attempts were committed.
        recorded: usize,
        /// Samples the command set out to record.
        total: usize,
        /// What stopped it.
        source: Box<StoreError>,
    },
    /// Another writer held the file longer than the busy timeout.
    #[error(
        "{path} is busy: {holder} is writing to it and did not finish within {seconds} s; \
         try again when it has finished",
        path = path.display()
    )]
    Busy {
        /// The campaign file.
        path: PathBuf,
        /// Who holds it, from its writer note (see [`holder`]), or a note that none is known.
        holder: String,
        /// How long this command waited, s.
        seconds: u64,
    },
    /// The file was written by a newer porewise with a schema this one does not know.
    #[error(
        "the campaign file has schema version {found}, but this porewise knows versions up to \
         {known}; open it with a newer porewise"
    )]
    TooNew {
        /// The file's `user_version`.
        found: i64,
        /// The newest version this program can migrate to.
        known: i64,
    },
    /// Campaign settings out of range (empty name, field capacity not below wilting point, ...).
    #[error("invalid campaign settings: {0}")]
    InvalidSettings(String),
    /// A site, layer or sample code that the campaign does not have.
    #[error("no {what} {code:?} in this campaign (see `porewise list`)")]
    Unknown {
        /// `site`, `layer` or `sample`.
        what: &'static str,
        /// The code as given.
        code: String,
    },
    /// A change the campaign's rules do not allow (for example dismissing an accepted flag);
    /// the message says what to do instead.
    #[error("{0}")]
    Refused(String),
    /// A value read back from the file is not what the schema promises.
    #[error("unexpected value in the campaign file: {0}")]
    Corrupt(String),
    /// A backup copy whose check failed (it was removed).
    #[error("the backup did not verify: {0}; nothing was kept")]
    BackupUnverified(String),
}

/// Shorthand for store results.
pub type Result<T, E = StoreError> = std::result::Result<T, E>;

/// Which part of a campaign a listing covers: everything, one site, or one sample.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Filter<'a> {
    /// Only this site (code).
    pub site: Option<&'a str>,
    /// Only this sample (code).
    pub sample: Option<&'a str>,
}
