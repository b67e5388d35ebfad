//! Everything an export writes, read from the campaign file once, so that every file of one
//! export describes the same state of the campaign.

use std::collections::{BTreeMap, BTreeSet};

use rusqlite::Connection;

use crate::analysis::{SampleFit, SiteProfile, profiles, sample_fits};
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

/// Read the campaign (or one site of it) for an export, all of it at once.
///
/// `progress(done, total)` counts samples as they are put together. An export itself reads
/// one site at a time ([`frame`], then [`read_site`] per site); this is the same content in
/// one value.
///
/// # Errors
/// An unknown site code, an SQLite error, or a stored fit that does not decode.
pub fn read(
    conn: &Connection,
    site: Option<&str>,
    root_zone_cm: f64,
    progress: &dyn Fn(usize, usize),
) -> Result<Snapshot> {
    let mut whole = frame(conn, site, root_zone_cm)?;
    let total = sample_total(conn, site)?;
    let done = std::cell::Cell::new(0);
    for row in sites::list(conn, site)? {
        let part = read_site(conn, &whole, row, &|| {
            done.set(done.get() + 1);
            progress(done.get(), total);
        })?;
        whole.flags.extend(part.flags);
        whole.marks.extend(part.marks);
        whole.sites.extend(part.sites);
    }
    Ok(whole)
}

/// What every site of an export shares: settings, scope and imports, without any site.
///
/// # Errors
/// An unknown site code, or an SQLite error.
pub fn frame(conn: &Connection, site: Option<&str>, root_zone_cm: f64) -> Result<Snapshot> {
    let selection = Selection {
        site: site.map(str::to_string),
        ..Selection::default()
    };
    selection.check(conn)?;
    Ok(Snapshot {
        settings: campaign::settings(conn)?,
        site_filter: site.map(str::to_string),
        root_zone_cm,
        sites: Vec::new(),
        imports: batches::all(conn)?,
        flags: BTreeMap::new(),
        marks: BTreeMap::new(),
    })
}

/// One site for an export: a snapshot with the frame's settings and scope, this site (its
/// layers, samples, readings, current fits and profile) and the flags of its readings; no
/// imports (they are the frame's).
///
/// `progress()` is called once per sample.
///
/// # Errors
/// An SQLite error, or a stored fit that does not decode.
pub fn read_site(
    conn: &Connection,
    frame: &Snapshot,
    row: SiteRow,
    progress: &dyn Fn(),
) -> Result<Snapshot> {
    let code = row.stored.site.code.clone();
    let selection = Selection {
        site: Some(code.clone()),
        ..Selection::default()
    };
    let filter = Filter {
        site: Some(&code),
        sample: None,
    };
    let mut fits: BTreeMap<i64, SampleFit> = sample_fits(conn, &frame.settings, &selection)?
        .into_iter()
        .map(|f| (f.sample.id, f))
        .collect();
    let mut readings_by_sample: BTreeMap<i64, Vec<StoredReading>> = BTreeMap::new();
    for reading in readings::list(conn, filter)? {
        readings_by_sample
            .entry(reading.stored.sample_id)
            .or_default()
            .push(reading.stored);
    }
    let mut samples_by_layer: BTreeMap<i64, Vec<SampleRow>> = BTreeMap::new();
    for sample in samples::list(conn, filter)? {
        samples_by_layer
            .entry(sample.stored.layer_id)
            .or_default()
            .push(sample);
    }
    let profile = profiles(conn, &frame.settings, frame.root_zone_cm, Some(&code))?
        .into_iter()
        .find(|p| p.site == code);
    let mut layers = Vec::new();
    for layer in layers::list(conn, Some(&code))? {
        let mut samples = Vec::new();
        for sample in samples_by_layer
            .remove(&layer.stored.id)
            .unwrap_or_default()
        {
            let id = sample.stored.id;
            let fit = fits
                .remove(&id)
                .ok_or_else(|| StoreError::Corrupt(format!("sample {id} has no fit standing")))?;
            samples.push(SamplePart {
                row: sample,
                fit,
                readings: readings_by_sample.remove(&id).unwrap_or_default(),
            });
            progress();
        }
        layers.push(LayerPart {
            row: layer,
            samples,
        });
    }
    let flags = reading_flags(conn, Some(&code))?;
    let marks = flags
        .iter()
        .filter_map(|(id, list)| {
            list.iter()
                .map(|f| Mark::of(f.stored.flag.status, f.stored.flag.origin))
                .max()
                .map(|m| (*id, m))
        })
        .collect();
    Ok(Snapshot {
        settings: frame.settings.clone(),
        site_filter: frame.site_filter.clone(),
        root_zone_cm: frame.root_zone_cm,
        sites: vec![SitePart {
            row,
            layers,
            profile,
        }],
        imports: Vec::new(),
        flags,
        marks,
    })
}

/// The models of the current fits an export covers, in the order of the model table (the
/// parameter columns of `parameters.csv` are their union).
///
/// # Errors
/// An SQLite error.
pub fn current_models(conn: &Connection, site: Option<&str>) -> Result<Vec<ModelKind>> {
    let mut stmt = conn.prepare(
        "SELECT DISTINCT f.model FROM fit f JOIN sample m ON f.sample_id = m.id
         JOIN layer l ON m.layer_id = l.id JOIN site s ON l.site_id = s.id
         WHERE f.is_current = 1 AND (?1 IS NULL OR s.code = ?1)",
    )?;
    let used = stmt
        .query_map([site], |r| r.get::<_, String>(0))?
        .collect::<rusqlite::Result<BTreeSet<String>>>()?;
    Ok(ModelKind::ALL
        .into_iter()
        .filter(|k| used.contains(k.id()))
        .collect())
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
