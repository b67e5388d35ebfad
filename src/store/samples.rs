//! Samples: insert, find by code (with the layer's bulk density), list.

use std::collections::HashSet;

use rusqlite::{Connection, OptionalExtension, Row, params};

use super::sql_types::{LenientDate, count, opt_date};
use super::{Filter, Result};
use crate::model::domain::{LayerRef, Sample};

/// A sample as stored, with its ids and its layer's bulk density.
#[derive(Debug, Clone, PartialEq)]
pub struct StoredSample {
    /// Database id.
    pub id: i64,
    /// Database id of its layer.
    pub layer_id: i64,
    /// The sample.
    pub sample: Sample,
    /// Dry bulk density of its layer, g/cm3 (used when the sample has none).
    pub layer_bulk_density_g_cm3: Option<f64>,
}

/// A sample with its reading count, for listings.
#[derive(Debug, Clone, PartialEq)]
pub struct SampleRow {
    /// The sample and its ids.
    pub stored: StoredSample,
    /// Number of readings.
    pub readings: u64,
}

const COLUMNS: &str = "m.id, m.layer_id, s.code, l.top_cm, l.bottom_cm, m.code, m.kind, \
     m.collected_on, m.bulk_density_g_cm3, m.notes, m.uid, l.bulk_density_g_cm3";

const FROM: &str = "sample m JOIN layer l ON m.layer_id = l.id JOIN site s ON l.site_id = s.id";

fn from_row(r: &Row<'_>) -> rusqlite::Result<StoredSample> {
    Ok(StoredSample {
        id: r.get(0)?,
        layer_id: r.get(1)?,
        sample: Sample {
            layer: LayerRef {
                site: r.get(2)?,
                top_cm: r.get(3)?,
                bottom_cm: r.get(4)?,
            },
            code: r.get(5)?,
            kind: r.get(6)?,
            collected_on: r.get::<_, LenientDate>(7)?.0,
            bulk_density_g_cm3: r.get(8)?,
            notes: r.get(9)?,
            uid: r.get(10)?,
        },
        layer_bulk_density_g_cm3: r.get(11)?,
    })
}

/// The sample with this code, if any.
///
/// # Errors
/// An SQLite error.
pub fn find(conn: &Connection, code: &str) -> Result<Option<StoredSample>> {
    let mut stmt =
        conn.prepare_cached(&format!("SELECT {COLUMNS} FROM {FROM} WHERE m.code = ?1"))?;
    Ok(stmt.query_row([code], from_row).optional()?)
}

/// Every sample code in the campaign (to look up only the codes that exist).
///
/// # Errors
/// An SQLite error.
pub fn codes(conn: &Connection) -> Result<HashSet<String>> {
    let mut stmt = conn.prepare("SELECT code FROM sample")?;
    let rows = stmt.query_map([], |r| r.get(0))?;
    Ok(rows.collect::<rusqlite::Result<_>>()?)
}

/// Insert a sample of layer `layer_id`; returns its id.
///
/// # Errors
/// A duplicate code or uid, a value outside the schema's ranges, or another SQLite error.
pub fn insert(
    conn: &Connection,
    layer_id: i64,
    sample: &Sample,
    batch: Option<i64>,
) -> Result<i64> {
    let mut stmt = conn.prepare_cached(
        "INSERT INTO sample (uid, layer_id, code, kind, collected_on, bulk_density_g_cm3, notes,
             batch_id)
         VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8)",
    )?;
    stmt.execute(params![
        sample.uid,
        layer_id,
        sample.code,
        sample.kind,
        opt_date(sample.collected_on),
        sample.bulk_density_g_cm3,
        sample.notes,
        batch
    ])?;
    Ok(conn.last_insert_rowid())
}

/// Record the dry bulk density of sample `id`, g/cm3.
///
/// # Errors
/// A value outside 0.05-2.65 g/cm3, or another SQLite error.
pub fn set_bulk_density(conn: &Connection, id: i64, bulk_density_g_cm3: f64) -> Result<()> {
    conn.prepare_cached("UPDATE sample SET bulk_density_g_cm3 = ?2 WHERE id = ?1")?
        .execute(params![id, bulk_density_g_cm3])?;
    Ok(())
}

/// The samples `filter` selects, by site, depth and code, with reading counts.
///
/// # Errors
/// An SQLite error.
pub fn list(conn: &Connection, filter: Filter<'_>) -> Result<Vec<SampleRow>> {
    let mut stmt = conn.prepare(&format!(
        "SELECT {COLUMNS}, (SELECT count(*) FROM reading r WHERE r.sample_id = m.id)
         FROM {FROM}
         WHERE (?1 IS NULL OR s.code = ?1) AND (?2 IS NULL OR m.code = ?2)
         ORDER BY s.code, l.top_cm, l.bottom_cm, m.code"
    ))?;
    let rows = stmt.query_map(params![filter.site, filter.sample], |r| {
        Ok(SampleRow {
            stored: from_row(r)?,
            readings: count(r, 12)?,
        })
    })?;
    Ok(rows.collect::<rusqlite::Result<_>>()?)
}
