//! Retention readings: insert, load a sample's readings, list with their provenance.

use rusqlite::{CachedStatement, Connection, Row, params};

use super::sql_types::{LenientDate, opt_date, stored_day};
use super::{Filter, Result};
use crate::model::domain::{LayerRef, Provenance, Reading};

/// A reading as stored, with its ids and the file it came from.
#[derive(Debug, Clone, PartialEq)]
pub struct StoredReading {
    /// Database id: the reading id other commands take.
    pub id: i64,
    /// Database id of its sample.
    pub sample_id: i64,
    /// The reading (canonical units).
    pub reading: Reading,
    /// Name of the imported file it came from, when it came from one.
    pub source_file: Option<String>,
}

/// A reading with the layer of its sample, for listings.
#[derive(Debug, Clone, PartialEq)]
pub struct ReadingRow {
    /// The reading.
    pub stored: StoredReading,
    /// Site and depths of its sample's layer.
    pub layer: LayerRef,
}

const COLUMNS: &str = "r.id, r.sample_id, m.code, r.h_cm, r.theta, r.method, r.measured_at, \
     r.branch, r.weight, r.notes, r.batch_id, r.source_line, r.uid, b.file_name, \
     s.code, l.top_cm, l.bottom_cm";

const FROM: &str = "reading r JOIN sample m ON r.sample_id = m.id \
     JOIN layer l ON m.layer_id = l.id JOIN site s ON l.site_id = s.id \
     LEFT JOIN import_batch b ON r.batch_id = b.id";

fn from_row(r: &Row<'_>) -> rusqlite::Result<ReadingRow> {
    let line: Option<i64> = r.get(11)?;
    Ok(ReadingRow {
        stored: StoredReading {
            id: r.get(0)?,
            sample_id: r.get(1)?,
            reading: Reading {
                sample: r.get(2)?,
                h_cm: r.get(3)?,
                theta: r.get(4)?,
                method: r.get(5)?,
                measured_on: r.get::<_, LenientDate>(6)?.0,
                branch: r.get(7)?,
                weight: r.get(8)?,
                notes: r.get(9)?,
                provenance: Provenance {
                    batch: r.get(10)?,
                    line: line.map_or(0, |l| l as u64),
                },
                uid: r.get(12)?,
            },
            source_file: r.get(13)?,
        },
        layer: LayerRef {
            site: r.get(14)?,
            top_cm: r.get(15)?,
            bottom_cm: r.get(16)?,
        },
    })
}

/// Inserts many readings through one prepared statement (bulk imports).
pub struct ReadingInserter<'conn> {
    stmt: CachedStatement<'conn>,
}

impl<'conn> ReadingInserter<'conn> {
    /// Prepare the insert on `conn` (a transaction, for a bulk import).
    ///
    /// # Errors
    /// An SQLite error.
    pub fn new(conn: &'conn Connection) -> Result<Self> {
        Ok(Self {
            stmt: conn.prepare_cached(
                "INSERT INTO reading (uid, sample_id, h_cm, theta, method, measured_at, branch,
                     weight, notes, batch_id, source_line)
                 VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11)",
            )?,
        })
    }

    /// Insert a reading of sample `sample_id` (batch and line from its provenance); returns
    /// its id.
    ///
    /// # Errors
    /// A value outside the schema's ranges (negative suction, theta outside 0-1), or another
    /// SQLite error.
    pub fn insert(&mut self, sample_id: i64, reading: &Reading) -> Result<i64> {
        let line = (reading.provenance.line > 0).then_some(reading.provenance.line as i64);
        Ok(self.stmt.insert(params![
            reading.uid,
            sample_id,
            reading.h_cm,
            reading.theta,
            reading.method,
            opt_date(reading.measured_on),
            reading.branch,
            reading.weight,
            reading.notes,
            reading.provenance.batch,
            line
        ])?)
    }
}

/// Insert one reading of sample `sample_id`; returns its id.
///
/// # Errors
/// As [`ReadingInserter::insert`].
pub fn insert(conn: &Connection, sample_id: i64, reading: &Reading) -> Result<i64> {
    ReadingInserter::new(conn)?.insert(sample_id, reading)
}

/// Every reading of sample `sample_id`, driest last (by suction).
///
/// # Errors
/// An SQLite error.
pub fn of_sample(conn: &Connection, sample_id: i64) -> Result<Vec<StoredReading>> {
    let mut stmt = conn.prepare_cached(&format!(
        "SELECT {COLUMNS} FROM {FROM} WHERE r.sample_id = ?1 ORDER BY r.h_cm, r.id"
    ))?;
    let rows = stmt.query_map([sample_id], |r| from_row(r).map(|row| row.stored))?;
    Ok(rows.collect::<rusqlite::Result<_>>()?)
}

/// The readings `filter` selects, by site, depth, sample and suction.
///
/// # Errors
/// An SQLite error.
pub fn list(conn: &Connection, filter: Filter<'_>) -> Result<Vec<ReadingRow>> {
    let mut stmt = conn.prepare(&format!(
        "SELECT {COLUMNS} FROM {FROM}
         WHERE (?1 IS NULL OR s.code = ?1) AND (?2 IS NULL OR m.code = ?2)
         ORDER BY s.code, l.top_cm, l.bottom_cm, m.code, r.h_cm, r.id"
    ))?;
    let rows = stmt.query_map(params![filter.site, filter.sample], from_row)?;
    Ok(rows.collect::<rusqlite::Result<_>>()?)
}

/// A stored reading with a value porewise cannot read back, named for a warning.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Unreadable {
    /// The reading id.
    pub reading: i64,
    /// Its sample's code.
    pub sample: String,
    /// The column, as listings name it.
    pub column: &'static str,
    /// The stored text.
    pub stored: String,
}

impl std::fmt::Display for Unreadable {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "reading {} (sample {:?}): the stored {} {:?} is not a calendar day (YYYY-MM-DD); \
             it is left empty",
            self.reading, self.sample, self.column, self.stored
        )
    }
}

/// Every reading whose stored measuring day is not a calendar day (an older porewise
/// accepted `-1-01-01`): listings and exports show it empty, and name these rows.
///
/// # Errors
/// An SQLite error.
pub fn unreadable(conn: &Connection) -> Result<Vec<Unreadable>> {
    let mut stmt = conn.prepare(
        "SELECT r.id, m.code, r.measured_at FROM reading r JOIN sample m ON r.sample_id = m.id
         WHERE r.measured_at IS NOT NULL
           AND NOT (r.measured_at GLOB '[0-9][0-9][0-9][0-9]-[0-9][0-9]-[0-9][0-9]*'
                    AND date(substr(r.measured_at, 1, 10)) IS substr(r.measured_at, 1, 10))
         ORDER BY r.id",
    )?;
    let rows = stmt.query_map([], |r| {
        Ok(Unreadable {
            reading: r.get(0)?,
            sample: r.get(1)?,
            column: "measured_on",
            stored: r.get(2)?,
        })
    })?;
    let mut out = Vec::new();
    for row in rows {
        let row = row?;
        if stored_day(&row.stored).is_none() {
            out.push(row);
        }
    }
    Ok(out)
}
