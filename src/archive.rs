//! The shared archive: every campaign of a group on one PostgreSQL server.
//!
//! The only layer that talks to PostgreSQL (as `store` is the only one that talks to SQLite).
//! [`target`] turns what the user wrote (a URL or `key=value` string, a password file, the
//! environment) into a connection target whose password is never printed; [`connect`] opens
//! it, plain or with TLS; [`migrate`] creates and upgrades the server schema from the numbered
//! files in `pg_migrations/`; [`stats`] summarises the current fits of every campaign in SQL.

pub mod connect;
pub mod listing;
pub mod migrate;
pub mod pull;
pub mod push;
pub mod rows;
pub mod stats;
pub mod target;

pub use connect::connect;
pub use target::Target;

/// What can go wrong talking to the archive server.
#[derive(Debug, thiserror::Error)]
pub enum ArchiveError {
    /// The connection string could not be understood (the text shown has its password masked).
    #[error("bad server address {shown}: {reason}")]
    BadTarget {
        /// The connection string, password masked.
        shown: String,
        /// What is wrong with it.
        reason: String,
    },
    /// A password file could not be read.
    #[error("cannot read the password file {path}: {source}")]
    PasswordFile {
        /// The file.
        path: std::path::PathBuf,
        /// Why.
        source: std::io::Error,
    },
    /// TLS could not be set up (root certificates, configuration).
    #[error("TLS: {0}")]
    Tls(String),
    /// The server said no, or the connection failed.
    #[error("{context}: {source}")]
    Server {
        /// What was being done (with the masked address where useful).
        context: String,
        /// The server's or the client's error.
        source: postgres::Error,
    },
    /// The server's archive schema is missing or older than this program's.
    #[error(
        "the archive schema {schema:?} on {shown} is at version {found}, this program needs {needed}: run `porewise archive init {shown}`"
    )]
    NotInitialised {
        /// The schema name.
        schema: String,
        /// The server address, password masked.
        shown: String,
        /// Its migration version (0 when there is none).
        found: i64,
        /// The version this program knows.
        needed: i64,
    },
    /// The server's archive schema was written by a newer porewise.
    #[error(
        "the archive schema {schema:?} is at version {found}; this program knows only up to {known}: use a newer porewise"
    )]
    TooNew {
        /// The schema name.
        schema: String,
        /// The server's version.
        found: i64,
        /// The newest this program knows.
        known: i64,
    },
    /// Another push of the same campaign held it longer than this one would wait.
    #[error(
        "campaign {campaign} is busy: another push of it held it for {} s; nothing was written, try again",
        waited.as_secs_f64()
    )]
    Busy {
        /// The campaign's uid.
        campaign: String,
        /// How long this push waited.
        waited: std::time::Duration,
    },
    /// A bad argument (filter, campaign name) for an archive command.
    #[error("{0}")]
    Invalid(String),
}

/// Result of archive operations.
pub type Result<T> = std::result::Result<T, ArchiveError>;

/// Wrap a server error with what was being done.
pub(crate) fn server(context: impl Into<String>) -> impl FnOnce(postgres::Error) -> ArchiveError {
    let context = context.into();
    move |source| ArchiveError::Server { context, source }
}
