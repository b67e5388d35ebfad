//! Import batches: one row per imported file, with its SHA-256, for provenance and for
//! refusing a second import of the same content.

use chrono::{DateTime, Utc};
use rusqlite::{Connection, OptionalExtension, params};

use super::Result;
use super::sql_types::SqlTime;

/// A recorded import.
#[derive(Debug, Clone, PartialEq)]
pub struct ImportBatchRecord {
    /// Database id (readings point at it).
    pub id: i64,
    /// The file as the user named it.
    pub file_name: String,
    /// SHA-256 of the file's bytes, lower-case hex.
    pub sha256: String,
    /// `sites`, `layers`, `lab` or `logger`.
    pub kind: String,
    /// Data rows in the file.
    pub rows: u64,
    /// Whether the import was forced past an earlier import of the same content.
    pub forced: bool,
    /// When it was imported (UTC).
    pub imported_at: DateTime<Utc>,
}

/// A file about to be recorded.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct NewBatch<'a> {
    /// The file as the user named it.
    pub file_name: &'a str,
    /// SHA-256 of its bytes, lower-case hex.
    pub sha256: &'a str,
    /// `sites`, `layers`, `lab` or `logger`.
    pub kind: &'a str,
    /// Data rows.
    pub rows: u64,
    /// Forced past an earlier import of the same content.
    pub forced: bool,
}

/// Record an import, stamped with the current time; returns its id.
///
/// # Errors
/// An unknown kind, a malformed hash, or another SQLite error.
pub fn insert(conn: &Connection, batch: &NewBatch<'_>) -> Result<i64> {
    conn.prepare_cached(
        "INSERT INTO import_batch (file_name, sha256, kind, rows, forced, imported_at)
         VALUES (?1, ?2, ?3, ?4, ?5, ?6)",
    )?
    .execute(params![
        batch.file_name,
        batch.sha256,
        batch.kind,
        batch.rows as i64,
        batch.forced,
        SqlTime::now()
    ])?;
    Ok(conn.last_insert_rowid())
}

fn from_row(r: &rusqlite::Row<'_>) -> rusqlite::Result<ImportBatchRecord> {
    Ok(ImportBatchRecord {
        id: r.get(0)?,
        file_name: r.get(1)?,
        sha256: r.get(2)?,
        kind: r.get(3)?,
        rows: r.get::<_, i64>(4)? as u64,
        forced: r.get(5)?,
        imported_at: r.get::<_, SqlTime>(6)?.0,
    })
}

const COLUMNS: &str = "id, file_name, sha256, kind, rows, forced, imported_at";

/// The earliest import of content with this SHA-256, if any.
///
/// # Errors
/// An SQLite error.
pub fn find_by_sha256(conn: &Connection, sha256: &str) -> Result<Option<ImportBatchRecord>> {
    let mut stmt = conn.prepare_cached(&format!(
        "SELECT {COLUMNS} FROM import_batch WHERE sha256 = ?1 ORDER BY id LIMIT 1"
    ))?;
    Ok(stmt.query_row([sha256], from_row).optional()?)
}

/// Every recorded import, oldest first.
///
/// # Errors
/// An SQLite error.
pub fn all(conn: &Connection) -> Result<Vec<ImportBatchRecord>> {
    let mut stmt = conn.prepare(&format!("SELECT {COLUMNS} FROM import_batch ORDER BY id"))?;
    let rows = stmt.query_map([], from_row)?;
    Ok(rows.collect::<rusqlite::Result<_>>()?)
}
