//! The open campaign file and its one row of settings (name, field capacity, wilting point).

use std::fs::OpenOptions;
use std::ops::{Deref, DerefMut};
use std::path::{Path, PathBuf};
use std::time::Duration;

use chrono::{DateTime, Utc};
use rusqlite::{Connection, OptionalExtension, Transaction, TransactionBehavior, params};
use serde::Serialize;

use super::sql_types::SqlTime;
use super::{Result, StoreError, db, holder, migrate};

/// Field capacity suction used when a campaign does not say otherwise, kPa (common practice).
pub const DEFAULT_FC_KPA: f64 = 33.0;
/// Permanent wilting point suction used when a campaign does not say otherwise, kPa (common practice).
pub const DEFAULT_PWP_KPA: f64 = 1500.0;

/// The campaign's settings row.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CampaignSettings {
    /// Name shown in listings and reports.
    pub name: String,
    /// Free text.
    pub description: Option<String>,
    /// Suction at field capacity, kPa.
    pub fc_kpa: f64,
    /// Suction at the permanent wilting point, kPa.
    pub pwp_kpa: f64,
    /// When the file was created (UTC).
    pub created_at: DateTime<Utc>,
}

/// One open campaign file (or an in-memory campaign for tests and benchmarks).
#[derive(Debug)]
pub struct Campaign {
    conn: Connection,
    path: Option<PathBuf>,
}

/// Check the settings a campaign is created with.
fn validate_settings(name: &str, fc_kpa: f64, pwp_kpa: f64) -> Result<()> {
    if name.trim().is_empty() {
        return Err(StoreError::InvalidSettings(
            "the campaign name is empty, expected some text".into(),
        ));
    }
    if !(fc_kpa.is_finite() && fc_kpa > 0.0) {
        return Err(StoreError::InvalidSettings(format!(
            "field capacity {fc_kpa} kPa, expected a positive suction (often 33, or 10 for sands)"
        )));
    }
    if !(pwp_kpa.is_finite() && pwp_kpa > fc_kpa) {
        return Err(StoreError::InvalidSettings(format!(
            "wilting point {pwp_kpa} kPa, expected a suction above field capacity \
             {fc_kpa} kPa (often 1500)"
        )));
    }
    Ok(())
}

/// Build the schema and the settings row in one transaction.
fn initialise(conn: &mut Connection, name: &str, fc_kpa: f64, pwp_kpa: f64) -> Result<()> {
    let tx = conn.transaction()?;
    migrate::apply_pending(&tx, 0)?;
    tx.execute(
        "INSERT INTO campaign (id, name, fc_kpa, pwp_kpa, created_at) VALUES (1, ?1, ?2, ?3, ?4)",
        params![name.trim(), fc_kpa, pwp_kpa, SqlTime::now()],
    )?;
    tx.commit()?;
    Ok(())
}

impl Campaign {
    /// Create a new campaign file at `path`; an existing file is never overwritten.
    ///
    /// Field capacity and wilting point are suctions in kPa (see [`DEFAULT_FC_KPA`],
    /// [`DEFAULT_PWP_KPA`]).
    ///
    /// # Errors
    /// [`StoreError::Exists`] when the file is there, [`StoreError::InvalidSettings`] for an
    /// empty name or suctions out of order, or an I/O or SQLite error (the half-made file is
    /// then removed).
    pub fn create(path: &Path, name: &str, fc_kpa: f64, pwp_kpa: f64) -> Result<Self> {
        validate_settings(name, fc_kpa, pwp_kpa)?;
        // create_new claims the name atomically, so two processes cannot both create it.
        match OpenOptions::new().write(true).create_new(true).open(path) {
            Ok(_) => {}
            Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => {
                return Err(StoreError::Exists(path.to_path_buf()));
            }
            Err(source) => {
                return Err(StoreError::Io {
                    path: path.to_path_buf(),
                    source,
                });
            }
        }
        let made = db::open_existing(path).and_then(|mut conn| {
            db::configure(&conn)?;
            initialise(&mut conn, name, fc_kpa, pwp_kpa)?;
            Ok(conn)
        });
        match made {
            Ok(conn) => Ok(Self {
                conn,
                path: Some(path.to_path_buf()),
            }),
            Err(e) => {
                remove_with_journal(path);
                Err(e)
            }
        }
    }

    /// A campaign that lives in memory only (tests, benchmarks).
    ///
    /// # Errors
    /// Invalid settings or an SQLite error.
    pub fn in_memory(name: &str, fc_kpa: f64, pwp_kpa: f64) -> Result<Self> {
        validate_settings(name, fc_kpa, pwp_kpa)?;
        let mut conn = Connection::open_in_memory()?;
        db::configure(&conn)?;
        initialise(&mut conn, name, fc_kpa, pwp_kpa)?;
        Ok(Self { conn, path: None })
    }

    /// Open an existing campaign file, upgrading its schema to the latest version if older.
    ///
    /// Everything that decides whether the file is a campaign is read before anything is
    /// written (the journal mode, a migration): a file that is refused is left as it was.
    ///
    /// # Errors
    /// [`StoreError::NotFound`], [`StoreError::NotACampaign`] (another SQLite file, one with
    /// porewise's application id but no campaign in it, or not SQLite),
    /// [`StoreError::Damaged`] (SQLite finds it malformed), [`StoreError::Unwritable`] (its
    /// folder or journal cannot be written), [`StoreError::TooNew`] (written by a newer
    /// porewise), [`StoreError::Busy`], or an SQLite error.
    pub fn open(path: &Path) -> Result<Self> {
        let mut conn = db::open_existing(path)?;
        let fail = |conn: &Connection, e: rusqlite::Error| diagnose(path, conn, e);
        let fail_store = |conn: &Connection, e: StoreError| match e {
            StoreError::Sqlite(e) => diagnose(path, conn, e),
            other => other,
        };
        conn.busy_timeout(db::BUSY_TIMEOUT)
            .map_err(|e| fail(&conn, e))?;
        let not_ours = || StoreError::NotACampaign(path.to_path_buf());
        let app_id: i64 = conn
            .pragma_query_value(None, "application_id", |r| r.get(0))
            .map_err(|e| fail(&conn, e))?;
        if app_id != migrate::APPLICATION_ID {
            return Err(not_ours());
        }
        let version = migrate::schema_version(&conn).map_err(|e| fail_store(&conn, e))?;
        migrate::check_known(version)?;
        // The campaign table (there since version 1) and its one row, read before any write.
        let has_table: bool = conn
            .query_row(
                "SELECT count(*) > 0 FROM sqlite_schema WHERE type = 'table' AND name = 'campaign'",
                [],
                |r| r.get(0),
            )
            .map_err(|e| fail(&conn, e))?;
        if version < 1 || !has_table {
            return Err(not_ours());
        }
        let has_row: Option<i64> = conn
            .query_row("SELECT id FROM campaign WHERE id = 1", [], |r| r.get(0))
            .optional()
            .map_err(|e| fail(&conn, e))?;
        if has_row.is_none() {
            return Err(not_ours());
        }
        if conn
            .is_readonly(rusqlite::MAIN_DB)
            .map_err(|e| fail(&conn, e))?
        {
            return Err(StoreError::Unwritable {
                path: path.to_path_buf(),
                reason: "the file is read-only (its permissions); porewise writes to every \
                         campaign it opens (journal, fits, flags)"
                    .into(),
            });
        }
        db::configure(&conn).map_err(|e| fail_store(&conn, e))?;
        if let Err(e) = migrate::migrate(&mut conn) {
            return Err(fail_store(&conn, e));
        }
        Ok(Self {
            conn,
            path: Some(path.to_path_buf()),
        })
    }

    /// The file this campaign lives in (`None` in memory).
    pub fn path(&self) -> Option<&Path> {
        self.path.as_deref()
    }

    /// The connection, for reading (repository functions take `&Connection`).
    pub fn connection(&self) -> &Connection {
        &self.conn
    }

    /// Begin the one write transaction of a command (IMMEDIATE: takes the write lock at once,
    /// so it cannot fail half-way on a busy file). It rolls back when dropped uncommitted.
    ///
    /// While it holds the lock, a writer note beside the file names this command (see
    /// [`super::holder`]), so a writer that times out waiting can say who is writing.
    ///
    /// # Errors
    /// [`StoreError::Busy`]: another writer held the file beyond the busy timeout.
    pub fn transaction(&mut self) -> Result<CampaignTransaction<'_>> {
        self.write_transaction(db::BUSY_TIMEOUT)
    }

    /// As [`Campaign::transaction`], waiting up to `wait` for another writer (for a command
    /// that has already done long work it would lose by giving up early).
    ///
    /// # Errors
    /// [`StoreError::Busy`] after `wait`.
    pub fn transaction_waiting(&mut self, wait: Duration) -> Result<CampaignTransaction<'_>> {
        self.write_transaction(wait)
    }

    fn write_transaction(&mut self, wait: Duration) -> Result<CampaignTransaction<'_>> {
        self.conn.busy_timeout(wait)?;
        // `new_unchecked` borrows the connection shared, so the timeout can be put back on
        // either path; `&mut self` still makes this the connection's only transaction.
        let begun = Transaction::new_unchecked(&self.conn, TransactionBehavior::Immediate);
        let restored = self.conn.busy_timeout(db::BUSY_TIMEOUT);
        let tx = match begun {
            Ok(tx) => tx,
            Err(e) => {
                return Err(match &self.path {
                    Some(p) if is_busy(&e) => busy(p, wait),
                    Some(p) if e.sqlite_error_code() == Some(rusqlite::ErrorCode::ReadOnly) => {
                        StoreError::Unwritable {
                            path: p.clone(),
                            reason: journal_problem(p).unwrap_or_else(|| e.to_string()),
                        }
                    }
                    _ => e.into(),
                });
            }
        };
        restored?;
        let note = self.path.as_deref().and_then(holder::Note::write);
        Ok(CampaignTransaction { tx, _note: note })
    }

    /// A read-only transaction (DEFERRED: no write lock), for validating without writing.
    ///
    /// # Errors
    /// An SQLite error.
    pub fn read_transaction(&mut self) -> Result<CampaignTransaction<'_>> {
        Ok(CampaignTransaction {
            tx: Transaction::new(&mut self.conn, TransactionBehavior::Deferred)?,
            _note: None,
        })
    }

    /// The settings row.
    ///
    /// # Errors
    /// An SQLite error.
    pub fn settings(&self) -> Result<CampaignSettings> {
        settings(&self.conn)
    }
}

/// A transaction on a campaign ([`Campaign::transaction`], [`Campaign::read_transaction`]):
/// a [`Transaction`] (it derefs to one) that also keeps the writer note while it lasts.
#[derive(Debug)]
pub struct CampaignTransaction<'c> {
    tx: Transaction<'c>,
    // Dropped after the transaction (fields drop in order), so the note outlives the lock.
    _note: Option<holder::Note>,
}

impl<'c> Deref for CampaignTransaction<'c> {
    type Target = Transaction<'c>;

    fn deref(&self) -> &Transaction<'c> {
        &self.tx
    }
}

impl DerefMut for CampaignTransaction<'_> {
    fn deref_mut(&mut self) -> &mut Self::Target {
        &mut self.tx
    }
}

impl CampaignTransaction<'_> {
    /// Commit; the writer note goes with the lock.
    ///
    /// # Errors
    /// An SQLite error (the transaction is rolled back).
    pub fn commit(self) -> rusqlite::Result<()> {
        self.tx.commit()
    }
}

/// Whether SQLite gave up waiting for another connection.
pub fn is_busy(e: &rusqlite::Error) -> bool {
    matches!(
        e.sqlite_error_code(),
        Some(rusqlite::ErrorCode::DatabaseBusy | rusqlite::ErrorCode::DatabaseLocked)
    )
}

/// The error for a writer that waited `waited` for `path` in vain, naming the holder.
pub fn busy(path: &Path, waited: Duration) -> StoreError {
    StoreError::Busy {
        path: path.to_path_buf(),
        holder: holder::read(path).map_or_else(
            || {
                "another program (no porewise command has noted itself as the writer; an sqlite3 \
                 shell or a backup tool perhaps)"
                    .to_string()
            },
            |h| h.to_string(),
        ),
        seconds: waited.as_secs_f64().ceil() as u64,
    }
}

/// Turn an SQLite error met while opening `path` into what is really wrong: not a database,
/// a damaged one, a folder or journal that cannot be written, a busy file.
fn diagnose(path: &Path, conn: &Connection, e: rusqlite::Error) -> StoreError {
    use rusqlite::ErrorCode as C;
    match e.sqlite_error_code() {
        Some(C::NotADatabase) => StoreError::NotACampaign(path.to_path_buf()),
        Some(C::DatabaseCorrupt) => StoreError::Damaged {
            path: path.to_path_buf(),
            check: integrity_check(conn),
        },
        Some(C::DatabaseBusy | C::DatabaseLocked) => busy(path, db::BUSY_TIMEOUT),
        Some(C::CannotOpen | C::ReadOnly | C::SystemIoFailure | C::PermissionDenied) => {
            journal_problem(path).map_or(StoreError::Sqlite(e), |reason| StoreError::Unwritable {
                path: path.to_path_buf(),
                reason,
            })
        }
        _ => StoreError::Sqlite(e),
    }
}

/// The first lines of `PRAGMA integrity_check`, or why it could not run.
fn integrity_check(conn: &Connection) -> String {
    let run = || -> rusqlite::Result<Vec<String>> {
        let mut stmt = conn.prepare("PRAGMA integrity_check(5)")?;
        let rows = stmt.query_map([], |r| r.get::<_, String>(0))?;
        rows.collect()
    };
    match run() {
        Ok(lines) if lines.is_empty() => "no answer".to_string(),
        Ok(lines) => lines.join("; "),
        Err(e) => format!("cannot run: {e}"),
    }
}

/// Why SQLite cannot write the journal (`-wal`, `-shm`) beside `path`, if that is the problem.
fn journal_problem(path: &Path) -> Option<String> {
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
        _ => PathBuf::from("."),
    };
    let name = path
        .file_name()
        .map_or_else(|| "FILE".into(), |n| n.to_string_lossy().into_owned());
    let probe = dir.join(format!(".{name}.probe-{}", std::process::id()));
    match OpenOptions::new().write(true).create_new(true).open(&probe) {
        Ok(_) => {
            let _ = std::fs::remove_file(&probe);
        }
        Err(e) => {
            return Some(format!(
                "cannot write the journal: its folder {} is read-only ({e}); SQLite keeps the \
                 journal files {name}-wal and {name}-shm beside the campaign file, so copy the \
                 file into a folder you can write, or make this one writable",
                dir.display()
            ));
        }
    }
    for suffix in ["-wal", "-shm"] {
        let mut side = path.as_os_str().to_owned();
        side.push(suffix);
        let side = PathBuf::from(side);
        if std::fs::symlink_metadata(&side).is_ok()
            && let Err(e) = OpenOptions::new().read(true).write(true).open(&side)
        {
            return Some(format!(
                "cannot write the journal: {} cannot be opened for writing ({e})",
                side.display()
            ));
        }
    }
    None
}

/// Read the settings row through any connection or transaction.
///
/// # Errors
/// An SQLite error.
pub fn settings(conn: &Connection) -> Result<CampaignSettings> {
    Ok(conn.query_row(
        "SELECT name, description, fc_kpa, pwp_kpa, created_at FROM campaign WHERE id = 1",
        [],
        |r| {
            Ok(CampaignSettings {
                name: r.get(0)?,
                description: r.get(1)?,
                fc_kpa: r.get(2)?,
                pwp_kpa: r.get(3)?,
                created_at: r.get::<_, SqlTime>(4)?.0,
            })
        },
    )?)
}

/// Change field capacity and wilting point (kPa).
///
/// # Errors
/// Suctions out of order, or an SQLite error.
pub fn set_suctions(conn: &Connection, fc_kpa: f64, pwp_kpa: f64) -> Result<()> {
    validate_settings("-", fc_kpa, pwp_kpa)?;
    conn.execute(
        "UPDATE campaign SET fc_kpa = ?1, pwp_kpa = ?2 WHERE id = 1",
        params![fc_kpa, pwp_kpa],
    )?;
    Ok(())
}

/// Remove a database file and the WAL files beside it (best effort).
pub fn remove_with_journal(path: &Path) {
    let _ = std::fs::remove_file(path);
    for suffix in ["-wal", "-shm", "-journal"] {
        let mut side = path.as_os_str().to_owned();
        side.push(suffix);
        let _ = std::fs::remove_file(PathBuf::from(side));
    }
}

#[cfg(test)]
mod tests {
    #![allow(clippy::float_cmp)]

    use super::*;

    #[test]
    fn settings_are_validated_and_stored() {
        assert!(Campaign::in_memory(" ", 33.0, 1500.0).is_err());
        assert!(Campaign::in_memory("x", 0.0, 1500.0).is_err());
        assert!(Campaign::in_memory("x", 33.0, 33.0).is_err());
        assert!(Campaign::in_memory("x", f64::NAN, 1500.0).is_err());
        let c = Campaign::in_memory("Test plots", 10.0, 1500.0).expect("valid");
        let s = c.settings().expect("row");
        assert_eq!(
            (s.name.as_str(), s.fc_kpa, s.pwp_kpa),
            ("Test plots", 10.0, 1500.0)
        );
        set_suctions(c.connection(), 33.0, 1500.0).expect("update");
        assert!(set_suctions(c.connection(), 1500.0, 33.0).is_err());
        assert_eq!(c.settings().expect("row").fc_kpa, 33.0);
    }
}
