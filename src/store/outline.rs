//! The campaign's outline for browsing: sites, their layers and samples, without a single
//! reading, so a tree of thousands of samples loads in one pass over three small tables.

use rusqlite::{Connection, OptionalExtension, params};

use super::Result;
use super::fits::{self, SAMPLE_INFO_COLUMNS, SampleInfo, Selection, sample_info};
use crate::model::domain::LayerRef;
use crate::model::texture::TextureClass;

/// A site in the outline.
#[derive(Debug, Clone, PartialEq)]
pub struct OutlineSite {
    /// Database id.
    pub id: i64,
    /// Site code.
    pub code: String,
    /// Descriptive name.
    pub name: Option<String>,
}

/// A layer in the outline.
#[derive(Debug, Clone, PartialEq)]
pub struct OutlineLayer {
    /// Database id.
    pub id: i64,
    /// Database id of its site.
    pub site_id: i64,
    /// Site and depths.
    pub at: LayerRef,
    /// Horizon label.
    pub horizon: Option<String>,
    /// Saturated conductivity, cm/day.
    pub ks_cm_per_day: Option<f64>,
    /// USDA texture class, when sand, silt and clay are known.
    pub texture: Option<TextureClass>,
}

/// The texture class of the sand, silt and clay columns at `i`, `i + 1`, `i + 2`.
fn texture_at(r: &rusqlite::Row<'_>, i: usize) -> rusqlite::Result<Option<TextureClass>> {
    Ok(TextureClass::of_layer(
        r.get(i)?,
        r.get(i + 1)?,
        r.get(i + 2)?,
    ))
}

/// Sites by code, layers top down, samples by code: everything a campaign tree shows.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Outline {
    /// Every site, by code.
    pub sites: Vec<OutlineSite>,
    /// Every layer, by site code and depth.
    pub layers: Vec<OutlineLayer>,
    /// Every sample, by site code, depth and code.
    pub samples: Vec<SampleInfo>,
}

/// The whole outline.
///
/// # Errors
/// An SQLite error.
pub fn outline(conn: &Connection) -> Result<Outline> {
    let mut stmt = conn.prepare_cached("SELECT id, code, name FROM site ORDER BY code")?;
    let sites = stmt
        .query_map([], |r| {
            Ok(OutlineSite {
                id: r.get(0)?,
                code: r.get(1)?,
                name: r.get(2)?,
            })
        })?
        .collect::<rusqlite::Result<Vec<_>>>()?;
    let mut stmt = conn.prepare_cached(
        "SELECT l.id, l.site_id, s.code, l.top_cm, l.bottom_cm, l.horizon, l.ks_cm_per_day,
             l.sand_pct, l.silt_pct, l.clay_pct
         FROM layer l JOIN site s ON l.site_id = s.id
         ORDER BY s.code, l.top_cm, l.bottom_cm",
    )?;
    let layers = stmt
        .query_map([], |r| {
            Ok(OutlineLayer {
                id: r.get(0)?,
                site_id: r.get(1)?,
                at: LayerRef {
                    site: r.get(2)?,
                    top_cm: r.get(3)?,
                    bottom_cm: r.get(4)?,
                },
                horizon: r.get(5)?,
                ks_cm_per_day: r.get(6)?,
                texture: texture_at(r, 7)?,
            })
        })?
        .collect::<rusqlite::Result<Vec<_>>>()?;
    let samples = fits::samples(conn, &Selection::all())?;
    Ok(Outline {
        sites,
        layers,
        samples,
    })
}

/// One sample by database id, with its layer's horizon and saturated conductivity.
///
/// # Errors
/// An SQLite error.
pub fn sample(conn: &Connection, id: i64) -> Result<Option<(SampleInfo, OutlineLayer)>> {
    let mut stmt = conn.prepare_cached(&format!(
        "SELECT {SAMPLE_INFO_COLUMNS}, l.site_id, l.horizon, l.ks_cm_per_day,
             l.sand_pct, l.silt_pct, l.clay_pct
         FROM sample m JOIN layer l ON m.layer_id = l.id JOIN site s ON l.site_id = s.id
         WHERE m.id = ?1"
    ))?;
    Ok(stmt
        .query_row(params![id], |r| {
            let info = sample_info(r)?;
            let layer = OutlineLayer {
                id: info.layer_id,
                site_id: r.get(8)?,
                at: info.layer.clone(),
                horizon: r.get(9)?,
                ks_cm_per_day: r.get(10)?,
                texture: texture_at(r, 11)?,
            };
            Ok((info, layer))
        })
        .optional()?)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::domain::{Layer, Sample, SampleKind, Site, Uid};
    use crate::store::{Campaign, layers, samples, sites};

    #[test]
    fn outline_orders_sites_layers_and_samples() {
        let c = Campaign::in_memory("t", 33.0, 1500.0).expect("campaign");
        let conn = c.connection();
        for code in ["ZZ", "AA"] {
            let site = sites::insert(conn, &Site::with_code(code), None).expect("site");
            for (top, bottom) in [(20.0, 40.0), (0.0, 20.0)] {
                let at = LayerRef {
                    site: code.into(),
                    top_cm: top,
                    bottom_cm: bottom,
                };
                let layer = layers::insert(conn, site, &Layer::bare(at.clone()), None).expect("l");
                for s in ["b", "a"] {
                    let sample = Sample {
                        layer: at.clone(),
                        code: format!("{code}-{top}-{s}"),
                        kind: SampleKind::LabCore,
                        collected_on: None,
                        bulk_density_g_cm3: None,
                        notes: None,
                        uid: Uid::random(),
                    };
                    samples::insert(conn, layer, &sample, None).expect("sample");
                }
            }
        }
        let o = outline(conn).expect("outline");
        let codes: Vec<&str> = o.sites.iter().map(|s| s.code.as_str()).collect();
        assert_eq!(codes, ["AA", "ZZ"]);
        assert_eq!(o.layers[0].at.to_string(), "AA:0-20");
        assert_eq!(o.layers[1].at.to_string(), "AA:20-40");
        let first: Vec<&str> = o.samples.iter().take(3).map(|s| s.code.as_str()).collect();
        assert_eq!(first, ["AA-0-a", "AA-0-b", "AA-20-a"]);
        let (info, layer) = sample(conn, o.samples[2].id)
            .expect("query")
            .expect("found");
        assert_eq!(info.code, "AA-20-a");
        assert_eq!(layer.at.to_string(), "AA:20-40");
        assert!(sample(conn, 9999).expect("query").is_none());
    }
}
