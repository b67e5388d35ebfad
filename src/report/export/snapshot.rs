//! Everything an export writes, read from the campaign file once, so that every file of one
//! export describes the same state of the campaign.

use std::collections::{BTreeMap, BTreeSet};

use rusqlite::Connection;

use crate::analysis::{SampleFit, SiteProfile, profiles, sample_fits_with};
use crate::model::conductivity::ConductivityForm;
use crate::model::retention::ModelKind;
use crate::store::batches::{self, ImportBatchRecord};
use crate::store::fits::Selection;
use crate::store::flags::{self, FlagEvent, FlagFilter, Mark, StoredFlag, Subject};
use crate::store::layers::{self, LayerRow};
use crate::store::readings::{self, StoredReading};
use crate::store::samples::{self, SampleRow};
use crate::store::sites::{self, SiteRow};
use crate::store::{CampaignSettings, Filter, Result, StoreError, campaign};

/// One flag on a reading, with its audit trail (from the flag store).
#[derive(Debug, Clone, PartialEq)]
pub struct ReadingFlag {
    /// The flag as stored: id, rule, who decided it last, reason, status, dates.
    pub stored: StoredFlag,
    /// Every status it took, oldest first.
    pub events: Vec<FlagEvent>,
}

/// One layer with the samples taken from it.
#[derive(Debug, Clone)]
pub struct LayerPart {
    /// The layer.
    pub row: LayerRow,
    /// Its samples, by code.
    pub samples: Vec<SamplePart>,
}

/// One sample with its readings and current fit.
#[derive(Debug, Clone)]
pub struct SamplePart {
    /// The sample as stored.
    pub row: SampleRow,
    /// Its current fit, standing and derived values (from [`sample_fits`]).
    pub fit: SampleFit,
    /// Its readings, by suction.
    pub readings: Vec<StoredReading>,
}

/// One site with its layers and its available-water profile.
#[derive(Debug, Clone)]
pub struct SitePart {
    /// The site.
    pub row: SiteRow,
    /// Its layers, top down.
    pub layers: Vec<LayerPart>,
    /// Its profile (from [`profiles`]); `None` for a site without layers.
    pub profile: Option<SiteProfile>,
}

/// The campaign as one export sees it.
#[derive(Debug, Clone)]
pub struct Snapshot {
    /// Campaign settings.
    pub settings: CampaignSettings,
    /// The site the export is limited to, if any.
    pub site_filter: Option<String>,
    /// Depth of the profile sums, cm.
    pub root_zone_cm: f64,
    /// The conductivity form asked for at export (`None`: the one recorded with each fit).
    pub conductivity: Option<ConductivityForm>,
    /// Sites by code.
    pub sites: Vec<SitePart>,
    /// Every import batch, oldest first.
    pub imports: Vec<ImportBatchRecord>,
    /// Flags by reading id, oldest first.
    pub flags: BTreeMap<i64, Vec<ReadingFlag>>,
    /// The flag mark of every flagged reading (excluded, suggested or kept).
    pub marks: BTreeMap<i64, Mark>,
}

impl Snapshot {
    /// Every sample, in site, depth and code order.
    pub fn samples(&self) -> impl Iterator<Item = (&SitePart, &LayerPart, &SamplePart)> {
        self.sites.iter().flat_map(|site| {
            site.layers.iter().flat_map(move |layer| {
                layer
                    .samples
                    .iter()
                    .map(move |sample| (site, layer, sample))
            })
        })
    }

    /// The flags on a reading (empty when it has none).
    pub fn flags_of(&self, reading_id: i64) -> &[ReadingFlag] {
        self.flags.get(&reading_id).map_or(&[], Vec::as_slice)
    }

    /// Whether flags leave this reading out of fits now.
    pub fn is_excluded(&self, reading_id: i64) -> bool {
        self.marks.get(&reading_id) == Some(&Mark::Excluded)
    }

    /// Readings of a sample that are flagged: an open suggestion, or left out of fits.
    pub fn flagged_count(&self, sample: &SamplePart) -> usize {
        sample
            .readings
            .iter()
            .filter(|r| {
                matches!(
                    self.marks.get(&r.id),
                    Some(Mark::Suggested | Mark::Excluded)
                )
            })
            .count()
    }

    /// Readings of a sample that flags leave out of fits.
    pub fn excluded_count(&self, sample: &SamplePart) -> usize {
        sample
            .readings
            .iter()
            .filter(|r| self.is_excluded(r.id))
            .count()
    }

    /// Number of samples.
    pub fn sample_count(&self) -> usize {
        self.sites
            .iter()
            .flat_map(|s| &s.layers)
            .map(|l| l.samples.len())
            .sum()
    }
}

/// The models of these samples' current fits, in the order of the model table.
pub fn models_in<'a>(samples: impl Iterator<Item = &'a SamplePart>) -> Vec<ModelKind> {
    let used: BTreeSet<&str> = samples
        .filter_map(|m| m.fit.fit.as_ref().map(|f| f.model.as_str()))
        .collect();
    ModelKind::ALL
        .into_iter()
        .filter(|k| used.contains(k.id()))
        .collect()
}

/// Every flag on a reading of the campaign (or of one site) with its trail, by reading.
fn reading_flags(conn: &Connection, site: Option<&str>) -> Result<BTreeMap<i64, Vec<ReadingFlag>>> {
    let filter = FlagFilter {
        site: site.map(str::to_string),
        ..FlagFilter::default()
    };
    let mut out: BTreeMap<i64, Vec<ReadingFlag>> = BTreeMap::new();
    for row in flags::list(conn, &filter)? {
        let Subject::Reading { reading_id, .. } = row.subject else {
            continue;
        };
        let events = flags::events(conn, row.stored.id)?;
        out.entry(reading_id).or_default().push(ReadingFlag {
            stored: row.stored,
            events,
        });
    }
    for list in out.values_mut() {
        list.sort_by_key(|f| f.stored.id);
    }
    Ok(out)
}

/// Read the campaign (or one site of it) for an export.
///
/// `progress(done, total)` counts samples as they are put together.
///
/// # Errors
/// An unknown site code, an SQLite error, or a stored fit that does not decode.
pub fn read(
    conn: &Connection,
    site: Option<&str>,
    root_zone_cm: f64,
    conductivity: Option<ConductivityForm>,
    progress: &dyn Fn(usize, usize),
) -> Result<Snapshot> {
    let selection = Selection {
        site: site.map(str::to_string),
        ..Selection::default()
    };
    selection.check(conn)?;
    let settings = campaign::settings(conn)?;
    let filter = Filter { site, sample: None };
    let mut fits: BTreeMap<i64, SampleFit> =
        sample_fits_with(conn, &settings, &selection, conductivity)?
            .into_iter()
            .map(|f| (f.sample.id, f))
            .collect();
    let mut readings_by_sample: BTreeMap<i64, Vec<StoredReading>> = BTreeMap::new();
    for row in readings::list(conn, filter)? {
        readings_by_sample
            .entry(row.stored.sample_id)
            .or_default()
            .push(row.stored);
    }
    let mut samples_by_layer: BTreeMap<i64, Vec<SampleRow>> = BTreeMap::new();
    for row in samples::list(conn, filter)? {
        samples_by_layer
            .entry(row.stored.layer_id)
            .or_default()
            .push(row);
    }
    let mut layers_by_site: BTreeMap<i64, Vec<LayerRow>> = BTreeMap::new();
    for row in layers::list(conn, site)? {
        layers_by_site
            .entry(row.stored.site_id)
            .or_default()
            .push(row);
    }
    let mut profiles_by_site: BTreeMap<String, SiteProfile> =
        profiles(conn, &settings, root_zone_cm, site)?
            .into_iter()
            .map(|p| (p.site.clone(), p))
            .collect();
    let total = fits.len();
    let mut done = 0;
    let mut parts = Vec::new();
    for row in sites::list(conn, site)? {
        let mut layers = Vec::new();
        for layer in layers_by_site.remove(&row.stored.id).unwrap_or_default() {
            let mut samples = Vec::new();
            for sample in samples_by_layer
                .remove(&layer.stored.id)
                .unwrap_or_default()
            {
                let id = sample.stored.id;
                let fit = fits.remove(&id).ok_or_else(|| {
                    StoreError::Corrupt(format!("sample {id} has no fit standing"))
                })?;
                samples.push(SamplePart {
                    row: sample,
                    fit,
                    readings: readings_by_sample.remove(&id).unwrap_or_default(),
                });
                done += 1;
                progress(done, total);
            }
            layers.push(LayerPart {
                row: layer,
                samples,
            });
        }
        let profile = profiles_by_site.remove(&row.stored.site.code);
        parts.push(SitePart {
            row,
            layers,
            profile,
        });
    }
    let flags = reading_flags(conn, site)?;
    let ids: BTreeSet<i64> = parts
        .iter()
        .flat_map(|s| &s.layers)
        .flat_map(|l| &l.samples)
        .flat_map(|m| m.readings.iter().map(|r| r.id))
        .collect();
    let marks: BTreeMap<i64, Mark> = flags::reading_marks(conn)?
        .into_iter()
        .filter(|(id, _)| ids.contains(id))
        .collect();
    Ok(Snapshot {
        settings,
        site_filter: site.map(str::to_string),
        root_zone_cm,
        conductivity,
        sites: parts,
        imports: batches::all(conn)?,
        flags,
        marks,
    })
}

/// How many samples an export of the campaign (or of one site) covers.
///
/// # Errors
/// An SQLite error.
pub fn sample_total(conn: &Connection, site: Option<&str>) -> Result<usize> {
    let n: i64 = conn.query_row(
        "SELECT count(*) FROM sample m JOIN layer l ON m.layer_id = l.id
         JOIN site s ON l.site_id = s.id WHERE ?1 IS NULL OR s.code = ?1",
        [site],
        |r| r.get(0),
    )?;
    Ok(n.max(0) as usize)
}

/// How many sites an export of the campaign (or of one site) covers.
///
/// # Errors
/// An SQLite error.
pub fn site_total(conn: &Connection, site: Option<&str>) -> Result<usize> {
    let n: i64 = conn.query_row(
        "SELECT count(*) FROM site s WHERE ?1 IS NULL OR s.code = ?1",
        [site],
        |r| r.get(0),
    )?;
    Ok(n.max(0) as usize)
}
