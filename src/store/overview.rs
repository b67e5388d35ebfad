//! A campaign at a glance: sites, their layers by depth, the samples and their reading counts.

use std::collections::HashMap;

use rusqlite::Connection;
use serde::Serialize;

use super::campaign::{self, Campaign, CampaignSettings};
use super::sql_types::count;
use super::{Filter, Result, layers, samples, sites};
use crate::model::domain::SampleKind;

/// How many rows of each kind a campaign holds.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize)]
pub struct Counts {
    /// Sites.
    pub sites: u64,
    /// Layers.
    pub layers: u64,
    /// Samples.
    pub samples: u64,
    /// Readings.
    pub readings: u64,
    /// Imported files.
    pub import_batches: u64,
}

/// One sample in the overview.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SampleOverview {
    /// Sample code.
    pub code: String,
    /// Lab core or field pairing.
    pub kind: SampleKind,
    /// Number of readings.
    pub readings: u64,
}

/// One layer in the overview.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LayerOverview {
    /// Upper boundary, cm.
    pub top_cm: f64,
    /// Lower boundary, cm.
    pub bottom_cm: f64,
    /// Horizon label.
    pub horizon: Option<String>,
    /// Its samples, by code.
    pub samples: Vec<SampleOverview>,
}

/// One site in the overview.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SiteOverview {
    /// Site code.
    pub code: String,
    /// Site name.
    pub name: Option<String>,
    /// Its layers, top down.
    pub layers: Vec<LayerOverview>,
}

/// The whole campaign at a glance.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Overview {
    /// Name and settings.
    pub settings: CampaignSettings,
    /// Totals.
    pub counts: Counts,
    /// Sites by code.
    pub sites: Vec<SiteOverview>,
}

/// Count the rows of each kind.
///
/// # Errors
/// An SQLite error.
pub fn counts(conn: &Connection) -> Result<Counts> {
    let count = |table: &str| -> Result<u64> {
        Ok(
            conn.query_row(&format!("SELECT count(*) FROM {table}"), [], |r| {
                count(r, 0)
            })?,
        )
    };
    Ok(Counts {
        sites: count("site")?,
        layers: count("layer")?,
        samples: count("sample")?,
        readings: count("reading")?,
        import_batches: count("import_batch")?,
    })
}

/// Sites with their layers (depths), samples and reading counts, for a summary screen.
///
/// # Errors
/// An SQLite error.
pub fn overview(campaign: &Campaign) -> Result<Overview> {
    let conn = campaign.connection();
    let mut sites: Vec<SiteOverview> = Vec::new();
    let mut site_index = HashMap::new();
    for row in sites::list(conn, None)? {
        site_index.insert(row.stored.site.code.clone(), sites.len());
        sites.push(SiteOverview {
            code: row.stored.site.code,
            name: row.stored.site.name,
            layers: Vec::new(),
        });
    }
    let mut layer_index = HashMap::new();
    for row in layers::list(conn, None)? {
        let layer = row.stored.layer;
        if let Some(&s) = site_index.get(&layer.at.site) {
            layer_index.insert(layer.at.key(), (s, sites[s].layers.len()));
            sites[s].layers.push(LayerOverview {
                top_cm: layer.at.top_cm,
                bottom_cm: layer.at.bottom_cm,
                horizon: layer.horizon,
                samples: Vec::new(),
            });
        }
    }
    for row in samples::list(conn, Filter::default())? {
        let sample = row.stored.sample;
        if let Some(&(s, l)) = layer_index.get(&sample.layer.key()) {
            sites[s].layers[l].samples.push(SampleOverview {
                code: sample.code,
                kind: sample.kind,
                readings: row.readings,
            });
        }
    }
    Ok(Overview {
        settings: campaign::settings(conn)?,
        counts: counts(conn)?,
        sites,
    })
}
