//! Layers: insert, find by site and depths, fill in properties, list.

use rusqlite::{Connection, OptionalExtension, Row, params};

use super::Result;
use super::sites::changes;
use super::sql_types::count;
use crate::model::domain::{Layer, LayerRef};

/// A layer as stored, with its database ids.
#[derive(Debug, Clone, PartialEq)]
pub struct StoredLayer {
    /// Database id.
    pub id: i64,
    /// Database id of its site.
    pub site_id: i64,
    /// The layer.
    pub layer: Layer,
}

/// A layer with its sample count, for listings.
#[derive(Debug, Clone, PartialEq)]
pub struct LayerRow {
    /// The layer and its ids.
    pub stored: StoredLayer,
    /// Number of samples taken from it.
    pub samples: u64,
}

const COLUMNS: &str = "l.id, l.site_id, s.code, l.top_cm, l.bottom_cm, l.horizon, l.sand_pct, \
     l.silt_pct, l.clay_pct, l.organic_carbon_pct, l.bulk_density_g_cm3, l.ks_cm_per_day, l.uid";

fn from_row(r: &Row<'_>) -> rusqlite::Result<StoredLayer> {
    Ok(StoredLayer {
        id: r.get(0)?,
        site_id: r.get(1)?,
        layer: Layer {
            at: LayerRef {
                site: r.get(2)?,
                top_cm: r.get(3)?,
                bottom_cm: r.get(4)?,
            },
            horizon: r.get(5)?,
            sand_pct: r.get(6)?,
            silt_pct: r.get(7)?,
            clay_pct: r.get(8)?,
            organic_carbon_pct: r.get(9)?,
            bulk_density_g_cm3: r.get(10)?,
            ks_cm_per_day: r.get(11)?,
            uid: r.get(12)?,
        },
    })
}

/// The layer of site `at.site` with exactly these depths, if any.
///
/// # Errors
/// An SQLite error.
pub fn find(conn: &Connection, at: &LayerRef) -> Result<Option<StoredLayer>> {
    let mut stmt = conn.prepare_cached(&format!(
        "SELECT {COLUMNS} FROM layer l JOIN site s ON l.site_id = s.id
         WHERE s.code = ?1 AND l.top_cm = ?2 AND l.bottom_cm = ?3"
    ))?;
    Ok(stmt
        .query_row(params![at.site, at.top_cm, at.bottom_cm], from_row)
        .optional()?)
}

/// Insert a layer of site `site_id`; returns its id.
///
/// # Errors
/// A duplicate depth range or uid, a value outside the schema's ranges, or another SQLite error.
pub fn insert(conn: &Connection, site_id: i64, layer: &Layer, batch: Option<i64>) -> Result<i64> {
    let mut stmt = conn.prepare_cached(
        "INSERT INTO layer (uid, site_id, top_cm, bottom_cm, horizon, sand_pct, silt_pct, clay_pct,
             organic_carbon_pct, bulk_density_g_cm3, ks_cm_per_day, batch_id)
         VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12)",
    )?;
    stmt.execute(params![
        layer.uid,
        site_id,
        layer.at.top_cm,
        layer.at.bottom_cm,
        layer.horizon,
        layer.sand_pct,
        layer.silt_pct,
        layer.clay_pct,
        layer.organic_carbon_pct,
        layer.bulk_density_g_cm3,
        layer.ks_cm_per_day,
        batch
    ])?;
    Ok(conn.last_insert_rowid())
}

/// Write the properties `layer` gives (its `Some` fields) over layer `id`, keeping the others.
///
/// # Errors
/// A value outside the schema's ranges, or another SQLite error.
pub fn fill_in(conn: &Connection, id: i64, layer: &Layer) -> Result<()> {
    let mut stmt = conn.prepare_cached(
        "UPDATE layer SET horizon = coalesce(?2, horizon), sand_pct = coalesce(?3, sand_pct),
             silt_pct = coalesce(?4, silt_pct), clay_pct = coalesce(?5, clay_pct),
             organic_carbon_pct = coalesce(?6, organic_carbon_pct),
             bulk_density_g_cm3 = coalesce(?7, bulk_density_g_cm3),
             ks_cm_per_day = coalesce(?8, ks_cm_per_day)
         WHERE id = ?1",
    )?;
    stmt.execute(params![
        id,
        layer.horizon,
        layer.sand_pct,
        layer.silt_pct,
        layer.clay_pct,
        layer.organic_carbon_pct,
        layer.bulk_density_g_cm3,
        layer.ks_cm_per_day
    ])?;
    Ok(())
}

/// Whether writing `new` over `old` with [`fill_in`] would change anything.
pub fn would_change(old: &Layer, new: &Layer) -> bool {
    changes(&old.horizon, &new.horizon)
        || changes(&old.sand_pct, &new.sand_pct)
        || changes(&old.silt_pct, &new.silt_pct)
        || changes(&old.clay_pct, &new.clay_pct)
        || changes(&old.organic_carbon_pct, &new.organic_carbon_pct)
        || changes(&old.bulk_density_g_cm3, &new.bulk_density_g_cm3)
        || changes(&old.ks_cm_per_day, &new.ks_cm_per_day)
}

/// Every layer (or those of site `site`), by site code and depth, with sample counts.
///
/// # Errors
/// An SQLite error.
pub fn list(conn: &Connection, site: Option<&str>) -> Result<Vec<LayerRow>> {
    let mut stmt = conn.prepare(&format!(
        "SELECT {COLUMNS}, (SELECT count(*) FROM sample m WHERE m.layer_id = l.id)
         FROM layer l JOIN site s ON l.site_id = s.id
         WHERE ?1 IS NULL OR s.code = ?1
         ORDER BY s.code, l.top_cm, l.bottom_cm"
    ))?;
    let rows = stmt.query_map([site], |r| {
        Ok(LayerRow {
            stored: from_row(r)?,
            samples: count(r, 13)?,
        })
    })?;
    Ok(rows.collect::<rusqlite::Result<_>>()?)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::domain::Site;
    use crate::store::{Campaign, sites};

    #[test]
    fn layers_are_unique_per_site_and_depth() {
        let c = Campaign::in_memory("t", 33.0, 1500.0).expect("campaign");
        let conn = c.connection();
        let site_id = sites::insert(conn, &Site::with_code("LV"), None).expect("site");
        let at: LayerRef = "LV:0-20".parse().expect("ref");
        let mut layer = Layer::bare(at.clone());
        let id = insert(conn, site_id, &layer, None).expect("layer");
        assert!(insert(conn, site_id, &Layer::bare(at.clone()), None).is_err());
        layer.bulk_density_g_cm3 = Some(1.4);
        fill_in(conn, id, &layer).expect("fill in");
        let found = find(conn, &at).expect("query").expect("found");
        assert_eq!(found.layer, layer);
        assert!(
            find(conn, &"LV:0-21".parse().expect("ref"))
                .expect("query")
                .is_none()
        );
        let mut bad = Layer::bare("LV:30-20".parse().expect("ref"));
        assert!(
            insert(conn, site_id, &bad, None).is_err(),
            "bottom above top"
        );
        bad.at.bottom_cm = 40.0;
        bad.sand_pct = Some(50.0);
        bad.silt_pct = Some(30.0);
        bad.clay_pct = Some(30.0);
        assert!(
            insert(conn, site_id, &bad, None).is_err(),
            "texture sums to 110 %"
        );
        assert_eq!(list(conn, Some("LV")).expect("list").len(), 1);
    }
}
