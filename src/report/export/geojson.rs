//! `sites.geojson`: the sites as an RFC 7946 FeatureCollection of Points with their summary.
//!
//! Each site is a Feature with `id` = the site code and a Point geometry
//! `[longitude, latitude]` in decimal degrees, WGS 84 (RFC 7946 section 3.1.1: longitude
//! first; no `crs` member, as section 4 prescribes). Elevation is a property, not a third
//! coordinate: ours is above sea level, RFC 7946 altitude is above the ellipsoid. A site
//! without both coordinates is kept, unlocated, with `"geometry": null` (allowed by section
//! 3.2), so the file lists every site of the export. Properties are flat scalars for GIS tools.

use serde::{Deserialize, Serialize};

use super::snapshot::{SitePart, SiteTally, Snapshot};

/// The whole file.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FeatureCollection {
    /// Always `FeatureCollection`.
    #[serde(rename = "type")]
    pub kind: String,
    /// One feature per site, by code.
    pub features: Vec<Feature>,
}

/// One site.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Feature {
    /// Always `Feature`.
    #[serde(rename = "type")]
    pub kind: String,
    /// The site code.
    pub id: String,
    /// Where it is; `null` when the site has no coordinates.
    pub geometry: Option<Point>,
    /// Its summary.
    pub properties: SiteProperties,
}

/// An RFC 7946 Point.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Point {
    /// Always `Point`.
    #[serde(rename = "type")]
    pub kind: String,
    /// `[longitude, latitude]`, decimal degrees, WGS 84.
    pub coordinates: [f64; 2],
}

/// A site's summary.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SiteProperties {
    /// Site code.
    pub site: String,
    /// Descriptive name.
    pub name: Option<String>,
    /// Elevation above sea level, m.
    pub elevation_m: Option<f64>,
    /// Free text.
    pub notes: Option<String>,
    /// Stable identifier (UUID).
    pub uid: String,
    /// Layers.
    pub layers: usize,
    /// Samples.
    pub samples: usize,
    /// Readings.
    pub readings: usize,
    /// Readings with an open or accepted flag.
    pub flagged_readings: usize,
    /// Readings left out of fits by flags.
    pub excluded_readings: usize,
    /// Samples whose current fit matches their readings.
    pub current_fits: usize,
    /// Samples whose current fit is stale.
    pub stale_fits: usize,
    /// Samples with no usable fit (never fitted, or every attempt failed).
    pub unfitted_samples: usize,
    /// Models of the current fits, comma separated, in model-table order.
    pub models: String,
    /// Profile available water down to `root_zone_cm`, mm.
    pub available_water_mm: Option<f64>,
    /// Depth of that sum, cm.
    pub root_zone_cm: f64,
    /// Depth of the root zone without data (the total is a lower bound when above 0), cm.
    pub uncovered_cm: Option<f64>,
    /// Field capacity suction of the campaign, kPa.
    pub fc_kpa: f64,
    /// Wilting point suction of the campaign, kPa.
    pub pwp_kpa: f64,
}

/// The collection of a snapshot's sites.
pub fn collection(snapshot: &Snapshot) -> FeatureCollection {
    collection_of(
        snapshot
            .sites
            .iter()
            .map(|part| {
                let mut tally = SiteTally::default();
                tally.add(&Snapshot {
                    sites: vec![part.clone()],
                    ..snapshot.clone()
                });
                feature(snapshot, part, &tally)
            })
            .collect(),
    )
}

/// The collection of these features (one per site, in code order).
pub fn collection_of(features: Vec<Feature>) -> FeatureCollection {
    FeatureCollection {
        kind: "FeatureCollection".to_string(),
        features,
    }
}

/// The feature of one site (its layers and profile from `part`, the counts of its samples
/// from `tally`), under the settings and scope of `frame`.
pub fn feature(frame: &Snapshot, part: &SitePart, tally: &SiteTally) -> Feature {
    let site = &part.row.stored.site;
    let models = tally
        .model_kinds()
        .iter()
        .map(|k| k.id())
        .collect::<Vec<_>>()
        .join(",");
    Feature {
        kind: "Feature".to_string(),
        id: site.code.clone(),
        geometry: site.longitude.zip(site.latitude).map(|(lon, lat)| Point {
            kind: "Point".to_string(),
            coordinates: [lon, lat],
        }),
        properties: SiteProperties {
            site: site.code.clone(),
            name: site.name.clone(),
            elevation_m: site.elevation_m,
            notes: site.notes.clone(),
            uid: site.uid.to_string(),
            layers: part.layers.len(),
            samples: tally.samples,
            readings: tally.readings,
            flagged_readings: tally.flagged,
            excluded_readings: tally.excluded,
            current_fits: tally.current,
            stale_fits: tally.stale,
            unfitted_samples: tally.unfitted,
            models,
            available_water_mm: part.profile.as_ref().map(|p| p.total_mm),
            root_zone_cm: frame.root_zone_cm,
            uncovered_cm: part
                .profile
                .as_ref()
                .map(crate::analysis::SiteProfile::uncovered_cm),
            fc_kpa: frame.settings.fc_kpa,
            pwp_kpa: frame.settings.pwp_kpa,
        },
    }
}
