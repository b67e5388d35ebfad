//! Schema migrations: numbered SQL files applied in order, tracked by `PRAGMA user_version`.
//!
//! `migrations/0001_init.sql` is version 1, the next file version 2, and so on. Files are
//! append-only: a landed migration is never edited, so every campaign file at version N has
//! the same schema. A file with a newer version than [`MIGRATIONS`] knows is refused.

use rusqlite::{Connection, Transaction};

use super::{Result, StoreError};

/// The SQL of every migration, oldest first; entry `i` brings a file to version `i + 1`.
pub const MIGRATIONS: &[&str] = &[
    include_str!("../../migrations/0001_init.sql"),
    include_str!("../../migrations/0002_fits.sql"),
    include_str!("../../migrations/0003_flag_review.sql"),
    include_str!("../../migrations/0004_fit_summary_index.sql"),
    include_str!("../../migrations/0005_fit_conductivity.sql"),
    include_str!("../../migrations/0006_oven_dry_suction.sql"),
    include_str!("../../migrations/0007_measured_on_repair.sql"),
    include_str!("../../migrations/0008_texture.sql"),
    include_str!("../../migrations/0009_conductivity.sql"),
    include_str!("../../migrations/0010_uids_everywhere.sql"),
    include_str!("../../migrations/0011_logger_sensor.sql"),
];

/// `application_id` written by the first migration, so a porewise file can be recognised.
pub const APPLICATION_ID: i64 = 0x504F_5257;

/// The newest schema version this program knows.
pub fn latest_version() -> i64 {
    MIGRATIONS.len() as i64
}

/// The schema version recorded in the file (`PRAGMA user_version`).
///
/// # Errors
/// SQLite cannot read the header (for example the file is not a database).
pub fn schema_version(conn: &Connection) -> Result<i64> {
    Ok(conn.pragma_query_value(None, "user_version", |r| r.get(0))?)
}

/// Bring the file to the latest version, all pending steps in one transaction.
///
/// Returns the version reached.
///
/// # Errors
/// [`StoreError::TooNew`] for a file from a newer porewise; any SQL error rolls every step back.
pub fn migrate(conn: &mut Connection) -> Result<i64> {
    let current = schema_version(conn)?;
    check_known(current)?;
    if current < latest_version() {
        // A step may rebuild a table (SQLite cannot change a CHECK constraint in place):
        // SQLite's procedure for that has foreign keys off around the transaction and checks
        // them before the commit. They are switched back on whatever happens.
        let foreign_keys: bool = conn.pragma_query_value(None, "foreign_keys", |r| r.get(0))?;
        conn.pragma_update(None, "foreign_keys", false)?;
        let result = apply_checked(conn, current);
        conn.pragma_update(None, "foreign_keys", foreign_keys)?;
        result?;
    }
    Ok(latest_version())
}

/// The pending steps in one transaction, committed only when no foreign key is broken.
fn apply_checked(conn: &mut Connection, current: i64) -> Result<()> {
    let tx = conn.transaction()?;
    apply_pending(&tx, current)?;
    let broken: i64 = tx.query_row("SELECT count(*) FROM pragma_foreign_key_check", [], |r| {
        r.get(0)
    })?;
    if broken > 0 {
        return Err(StoreError::Corrupt(format!(
            "{broken} foreign key references broken after the schema upgrade; nothing was changed"
        )));
    }
    tx.commit()?;
    Ok(())
}

/// Refuse a version newer than this program knows.
pub(crate) fn check_known(found: i64) -> Result<()> {
    let known = latest_version();
    if found > known {
        return Err(StoreError::TooNew { found, known });
    }
    Ok(())
}

/// Apply every migration after version `from` inside `tx`, updating `user_version` as it goes.
pub(crate) fn apply_pending(tx: &Transaction<'_>, from: i64) -> Result<()> {
    let start = usize::try_from(from).unwrap_or(0);
    for (i, sql) in MIGRATIONS.iter().enumerate().skip(start) {
        tx.execute_batch(sql)?;
        tx.pragma_update(None, "user_version", (i + 1) as i64)?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn migrates_an_empty_database_once() {
        let mut conn = Connection::open_in_memory().expect("memory");
        assert_eq!(schema_version(&conn).expect("version"), 0);
        assert_eq!(migrate(&mut conn).expect("migrates"), latest_version());
        assert_eq!(schema_version(&conn).expect("version"), latest_version());
        // A second run finds nothing to do and keeps the tables.
        migrate(&mut conn).expect("idempotent");
        let tables: i64 = conn
            .query_row(
                "SELECT count(*) FROM sqlite_schema WHERE type = 'table'",
                [],
                |r| r.get(0),
            )
            .expect("count");
        assert_eq!(tables, 12);
        let app: i64 = conn
            .pragma_query_value(None, "application_id", |r| r.get(0))
            .expect("application id");
        assert_eq!(app, APPLICATION_ID);
    }

    #[test]
    fn refuses_a_newer_schema() {
        let mut conn = Connection::open_in_memory().expect("memory");
        conn.pragma_update(None, "user_version", latest_version() + 1)
            .expect("set");
        let err = migrate(&mut conn).expect_err("too new");
        let text = err.to_string();
        assert!(
            text.contains(&format!("schema version {}", latest_version() + 1)),
            "{text}"
        );
        assert!(
            text.contains(&format!("up to {}", latest_version())),
            "{text}"
        );
    }
}
