//! Sites: insert, find by code, fill in details, list with counts.

use rusqlite::{Connection, OptionalExtension, Row, params};

use super::Result;
use super::sql_types::count;
use crate::model::domain::Site;

/// A site as stored, with its database id.
#[derive(Debug, Clone, PartialEq)]
pub struct StoredSite {
    /// Database id (local to this file).
    pub id: i64,
    /// The site.
    pub site: Site,
}

/// A site with how much it holds, for listings.
#[derive(Debug, Clone, PartialEq)]
pub struct SiteRow {
    /// The site and its id.
    pub stored: StoredSite,
    /// Number of layers.
    pub layers: u64,
    /// Number of samples over all its layers.
    pub samples: u64,
    /// Number of readings over all its samples.
    pub readings: u64,
}

const COLUMNS: &str =
    "s.id, s.code, s.name, s.latitude, s.longitude, s.elevation_m, s.notes, s.uid";

fn from_row(r: &Row<'_>) -> rusqlite::Result<StoredSite> {
    Ok(StoredSite {
        id: r.get(0)?,
        site: Site {
            code: r.get(1)?,
            name: r.get(2)?,
            latitude: r.get(3)?,
            longitude: r.get(4)?,
            elevation_m: r.get(5)?,
            notes: r.get(6)?,
            uid: r.get(7)?,
        },
    })
}

/// The site with this code, if any.
///
/// # Errors
/// An SQLite error.
pub fn find(conn: &Connection, code: &str) -> Result<Option<StoredSite>> {
    let mut stmt =
        conn.prepare_cached(&format!("SELECT {COLUMNS} FROM site s WHERE s.code = ?1"))?;
    Ok(stmt.query_row([code], from_row).optional()?)
}

/// Insert a new site, recording the import batch that created it; returns its id.
///
/// # Errors
/// A duplicate code or uid, a value outside the schema's ranges, or another SQLite error.
pub fn insert(conn: &Connection, site: &Site, batch: Option<i64>) -> Result<i64> {
    let mut stmt = conn.prepare_cached(
        "INSERT INTO site (uid, code, name, latitude, longitude, elevation_m, notes, batch_id)
         VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8)",
    )?;
    stmt.execute(params![
        site.uid,
        site.code,
        site.name,
        site.latitude,
        site.longitude,
        site.elevation_m,
        site.notes,
        batch
    ])?;
    Ok(conn.last_insert_rowid())
}

/// Write the details `site` gives (its `Some` fields) over site `id`, keeping the others.
///
/// Code and uid never change.
///
/// # Errors
/// A value outside the schema's ranges, or another SQLite error.
pub fn fill_in(conn: &Connection, id: i64, site: &Site) -> Result<()> {
    let mut stmt = conn.prepare_cached(
        "UPDATE site SET name = coalesce(?2, name), latitude = coalesce(?3, latitude),
             longitude = coalesce(?4, longitude), elevation_m = coalesce(?5, elevation_m),
             notes = coalesce(?6, notes)
         WHERE id = ?1",
    )?;
    stmt.execute(params![
        id,
        site.name,
        site.latitude,
        site.longitude,
        site.elevation_m,
        site.notes
    ])?;
    Ok(())
}

/// Whether writing `new` over `old` with [`fill_in`] would change anything.
pub fn would_change(old: &Site, new: &Site) -> bool {
    changes(&old.name, &new.name)
        || changes(&old.latitude, &new.latitude)
        || changes(&old.longitude, &new.longitude)
        || changes(&old.elevation_m, &new.elevation_m)
        || changes(&old.notes, &new.notes)
}

/// Whether a given (`Some`) new value differs from the old one.
#[allow(clippy::ref_option)] // called with the fields as they are
pub(crate) fn changes<T: PartialEq>(old: &Option<T>, new: &Option<T>) -> bool {
    new.is_some() && new != old
}

/// Every site (or only the one with code `only`), ordered by code, with counts.
///
/// # Errors
/// An SQLite error.
pub fn list(conn: &Connection, only: Option<&str>) -> Result<Vec<SiteRow>> {
    let mut stmt = conn.prepare(&format!(
        "SELECT {COLUMNS},
            (SELECT count(*) FROM layer l WHERE l.site_id = s.id),
            (SELECT count(*) FROM sample m JOIN layer l ON m.layer_id = l.id WHERE l.site_id = s.id),
            (SELECT count(*) FROM reading r JOIN sample m ON r.sample_id = m.id
                 JOIN layer l ON m.layer_id = l.id WHERE l.site_id = s.id)
         FROM site s WHERE ?1 IS NULL OR s.code = ?1 ORDER BY s.code"
    ))?;
    let rows = stmt.query_map([only], |r| {
        Ok(SiteRow {
            stored: from_row(r)?,
            layers: count(r, 8)?,
            samples: count(r, 9)?,
            readings: count(r, 10)?,
        })
    })?;
    Ok(rows.collect::<rusqlite::Result<_>>()?)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::store::Campaign;

    #[test]
    fn insert_find_and_fill_in() {
        let c = Campaign::in_memory("t", 33.0, 1500.0).expect("campaign");
        let conn = c.connection();
        let mut site = Site::with_code("LV");
        let id = insert(conn, &site, None).expect("insert");
        assert!(
            insert(conn, &Site::with_code("LV"), None).is_err(),
            "codes are unique"
        );
        site.name = Some("Levee".into());
        site.latitude = Some(45.5);
        let before = find(conn, "LV").expect("query").expect("found");
        assert!(would_change(&before.site, &site));
        fill_in(conn, id, &site).expect("fill in");
        let after = find(conn, "LV").expect("query").expect("found");
        assert_eq!(after.site, site);
        assert!(!would_change(&after.site, &Site::with_code("LV")));
        site.latitude = Some(95.0);
        assert!(fill_in(conn, id, &site).is_err(), "latitude CHECK");
        assert_eq!(list(conn, None).expect("list").len(), 1);
        assert!(list(conn, Some("XX")).expect("list").is_empty());
    }
}
