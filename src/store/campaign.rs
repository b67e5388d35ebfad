//! The open campaign file and its one row of settings (name, field capacity, wilting point).

use std::fs::OpenOptions;
use std::path::{Path, PathBuf};

use chrono::{DateTime, Utc};
use rusqlite::{Connection, OptionalExtension, Transaction, TransactionBehavior, params};
use serde::Serialize;

use super::sql_types::SqlTime;
use super::{Result, StoreError, db, migrate};

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
    /// # Errors
    /// [`StoreError::NotFound`], [`StoreError::NotACampaign`] (another SQLite file, or not
    /// SQLite), [`StoreError::TooNew`] (written by a newer porewise), or an SQLite error.
    pub fn open(path: &Path) -> Result<Self> {
        let mut conn = db::open_existing(path)?;
        let not_ours = || StoreError::NotACampaign(path.to_path_buf());
        let app_id: i64 = conn
            .pragma_query_value(None, "application_id", |r| r.get(0))
            .map_err(|_| not_ours())?;
        if app_id != migrate::APPLICATION_ID {
            return Err(not_ours());
        }
        migrate::check_known(migrate::schema_version(&conn)?)?;
        db::configure(&conn)?;
        migrate::migrate(&mut conn)?;
        let has_row: Option<i64> = conn
            .query_row("SELECT id FROM campaign WHERE id = 1", [], |r| r.get(0))
            .optional()?;
        if has_row.is_none() {
            return Err(not_ours());
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
    /// # Errors
    /// The file is locked by another writer beyond the busy timeout.
    pub fn transaction(&mut self) -> Result<Transaction<'_>> {
        Ok(Transaction::new(
            &mut self.conn,
            TransactionBehavior::Immediate,
        )?)
    }

    /// A read-only transaction (DEFERRED: no write lock), for validating without writing.
    ///
    /// # Errors
    /// An SQLite error.
    pub fn read_transaction(&mut self) -> Result<Transaction<'_>> {
        Ok(Transaction::new(
            &mut self.conn,
            TransactionBehavior::Deferred,
        )?)
    }

    /// The settings row.
    ///
    /// # Errors
    /// An SQLite error.
    pub fn settings(&self) -> Result<CampaignSettings> {
        settings(&self.conn)
    }
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
