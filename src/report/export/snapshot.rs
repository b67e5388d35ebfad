//! Everything an export writes, read from the campaign file once, so that every file of one
//! export describes the same state of the campaign.

use std::collections::{BTreeMap, BTreeSet, HashMap};

use rusqlite::Connection;

use crate::analysis::{
    BetweenCores, SampleFit, SiteProfile, between_cores, derive_fit, profiles_pooled,
};
use crate::model::conductivity::ConductivityForm;
use crate::model::retention::ModelKind;
use crate::store::batches::{self, ImportBatchRecord};
use crate::store::fits::{self, FitState, FitSummary, SampleInfo, Selection};
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
    /// Its current fit, standing and derived values (as [`crate::analysis::sample_fits`]
    /// gives them).
    pub fit: SampleFit,
    /// Its readings, by suction.
    pub readings: Vec<StoredReading>,
    /// Its measured conductivity readings.
    pub conductivity: Vec<crate::store::conductivity::StoredConductivity>,
    /// Its measured Ks and its layer's.
    pub ks: crate::store::conductivity::SampleKs,
    /// The joint record of its current fit, when that fit was made with conductivity.
    pub joint: Option<crate::store::conductivity::JointRecord>,
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
    /// The between-core variance of available water pooled over the whole campaign's layers
    /// (whatever the site filter), which every layer interval uses.
    pub between_cores: Option<BetweenCores>,
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
/// one batch of samples at a time ([`frame`], then per site [`walk_site`] and
/// [`SiteWalk::read_batch`]); this is the same content in one value.
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
    let mut whole = frame(conn, site, root_zone_cm, conductivity)?;
    let total = sample_total(conn, site)?;
    let done = std::cell::Cell::new(0);
    for row in sites::list(conn, site)? {
        let walk = walk_site(conn, &whole, row)?;
        let mut part = walk.head();
        for (index, layer) in part.layers.iter_mut().enumerate() {
            let batch = walk.read_batch(conn, &whole, index, walk.samples_of(index), &|| {
                done.set(done.get() + 1);
                progress(done.get(), total);
            })?;
            whole.flags.extend(batch.flags);
            whole.marks.extend(batch.marks);
            layer.samples = batch
                .sites
                .into_iter()
                .flat_map(|s| s.layers)
                .flat_map(|l| l.samples)
                .collect();
        }
        whole.sites.push(part);
    }
    Ok(whole)
}

/// What every site of an export shares: settings, scope, imports and the campaign's pooled
/// between-core variance, without any site.
///
/// # Errors
/// An unknown site code, or an SQLite error.
pub fn frame(
    conn: &Connection,
    site: Option<&str>,
    root_zone_cm: f64,
    conductivity: Option<ConductivityForm>,
) -> Result<Snapshot> {
    let selection = Selection {
        site: site.map(str::to_string),
        ..Selection::default()
    };
    selection.check(conn)?;
    let settings = campaign::settings(conn)?;
    Ok(Snapshot {
        between_cores: between_cores(conn, &settings)?,
        settings,
        site_filter: site.map(str::to_string),
        root_zone_cm,
        conductivity,
        sites: Vec::new(),
        imports: batches::all(conn)?,
        flags: BTreeMap::new(),
        marks: BTreeMap::new(),
    })
}

/// One site as an export walks it: the site, its layers with their sample rows, its profile,
/// the fit standing of its samples and the flags on its readings; the heavy parts (readings,
/// fits with their reports) are read a batch of samples at a time by
/// [`SiteWalk::read_batch`]. A few hundred bytes a sample, plus its flags.
#[derive(Debug)]
pub struct SiteWalk {
    row: SiteRow,
    layers: Vec<(LayerRow, Vec<SampleRow>)>,
    profile: Option<SiteProfile>,
    infos: HashMap<i64, SampleInfo>,
    summaries: HashMap<i64, FitSummary>,
    flags: BTreeMap<i64, Vec<ReadingFlag>>,
}

/// Start walking one site of an export.
///
/// # Errors
/// An SQLite error, or a stored fit that does not decode (for the profile).
pub fn walk_site(conn: &Connection, frame: &Snapshot, row: SiteRow) -> Result<SiteWalk> {
    let code = row.stored.site.code.clone();
    let selection = Selection {
        site: Some(code.clone()),
        ..Selection::default()
    };
    let infos = fits::samples(conn, &selection)?;
    let summaries = fits::summaries(conn, &infos)?;
    let mut samples_by_layer: BTreeMap<i64, Vec<SampleRow>> = BTreeMap::new();
    for sample in samples::list(
        conn,
        Filter {
            site: Some(&code),
            sample: None,
        },
    )? {
        samples_by_layer
            .entry(sample.stored.layer_id)
            .or_default()
            .push(sample);
    }
    let layers = layers::list(conn, Some(&code))?
        .into_iter()
        .map(|layer| {
            let samples = samples_by_layer
                .remove(&layer.stored.id)
                .unwrap_or_default();
            (layer, samples)
        })
        .collect();
    let profile = profiles_pooled(
        conn,
        &frame.settings,
        frame.root_zone_cm,
        Some(&code),
        frame.between_cores,
    )?
    .into_iter()
    .find(|p| p.site == code);
    Ok(SiteWalk {
        row,
        layers,
        profile,
        infos: infos.into_iter().map(|i| (i.id, i)).collect(),
        summaries,
        flags: reading_flags(conn, Some(&code))?,
    })
}

impl SiteWalk {
    /// The site with its layers and profile, each layer without samples.
    pub fn head(&self) -> SitePart {
        SitePart {
            row: self.row.clone(),
            layers: self
                .layers
                .iter()
                .map(|(row, _)| LayerPart {
                    row: row.clone(),
                    samples: Vec::new(),
                })
                .collect(),
            profile: self.profile.clone(),
        }
    }

    /// The sample rows of the layer at `index` (top down), by code.
    pub fn samples_of(&self, index: usize) -> &[SampleRow] {
        self.layers.get(index).map_or(&[], |(_, s)| s.as_slice())
    }

    /// How many samples each layer has, top down.
    pub fn sample_counts(&self) -> Vec<usize> {
        self.layers.iter().map(|(_, s)| s.len()).collect()
    }

    /// A snapshot of these samples (of the layer at `index`): the frame's settings and scope,
    /// this site with that one layer and these samples (readings, current fit, standing and
    /// derived values), and the flags of their readings. `progress()` is called per sample.
    ///
    /// # Errors
    /// An SQLite error, or a stored fit that does not decode.
    pub fn read_batch(
        &self,
        conn: &Connection,
        frame: &Snapshot,
        index: usize,
        rows: &[SampleRow],
        progress: &dyn Fn(),
    ) -> Result<Snapshot> {
        let Some((layer, _)) = self.layers.get(index) else {
            return Err(StoreError::Corrupt(format!(
                "no layer {index} in this site"
            )));
        };
        let ks = layer.stored.layer.ks_cm_per_day;
        let mut samples = Vec::with_capacity(rows.len());
        let mut flags = BTreeMap::new();
        let mut marks = BTreeMap::new();
        for row in rows {
            let id = row.stored.id;
            let info =
                self.infos.get(&id).cloned().ok_or_else(|| {
                    StoreError::Corrupt(format!("sample {id} has no fit standing"))
                })?;
            let state = self
                .summaries
                .get(&id)
                .map_or(FitState::None, |s| s.state.clone());
            let fit = fits::current(conn, id)?;
            let derived = fit.as_ref().and_then(|f| {
                derive_fit(
                    f.report.as_ref()?,
                    &frame.settings,
                    ks,
                    frame.conductivity.or(f.conductivity),
                )
            });
            let derived =
                crate::analysis::joint::with_joint(conn, fit.as_ref(), derived, &frame.settings)?;
            let joint = match &fit {
                Some(f) => crate::store::conductivity::joint_of(conn, f.id)?,
                None => None,
            };
            let conductivity = crate::store::conductivity::of_sample(conn, id)?;
            let ks = crate::store::conductivity::ks_of_sample(conn, id)?;
            let readings = readings::of_sample(conn, id)?;
            for r in &readings {
                if let Some(list) = self.flags.get(&r.id) {
                    if let Some(mark) = list
                        .iter()
                        .map(|f| Mark::of(f.stored.flag.status, f.stored.flag.origin))
                        .max()
                    {
                        marks.insert(r.id, mark);
                    }
                    flags.insert(r.id, list.clone());
                }
            }
            samples.push(SamplePart {
                row: row.clone(),
                fit: SampleFit {
                    sample: info,
                    state,
                    fit,
                    derived,
                },
                readings,
                conductivity,
                ks,
                joint,
            });
            progress();
        }
        Ok(Snapshot {
            settings: frame.settings.clone(),
            site_filter: frame.site_filter.clone(),
            root_zone_cm: frame.root_zone_cm,
            conductivity: frame.conductivity,
            between_cores: frame.between_cores,
            sites: vec![SitePart {
                row: self.row.clone(),
                layers: vec![LayerPart {
                    row: layer.clone(),
                    samples,
                }],
                profile: None,
            }],
            imports: Vec::new(),
            flags,
            marks,
        })
    }
}

/// Counts over a site's samples, gathered a batch at a time: what the GeoJSON properties and
/// the page's table of sites say about a site.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct SiteTally {
    /// Samples.
    pub samples: usize,
    /// Readings.
    pub readings: usize,
    /// Readings with an open suggestion or left out of fits.
    pub flagged: usize,
    /// Readings left out of fits.
    pub excluded: usize,
    /// Samples whose current fit is current.
    pub current: usize,
    /// Samples whose current fit is stale.
    pub stale: usize,
    /// Samples without a usable fit (never fitted, or every attempt failed).
    pub unfitted: usize,
    /// Model identifiers of the current fits.
    pub models: BTreeSet<String>,
}

impl SiteTally {
    /// Count a snapshot's samples.
    pub fn add(&mut self, s: &Snapshot) {
        for (_, _, m) in s.samples() {
            self.samples += 1;
            self.readings += m.readings.len();
            self.flagged += s.flagged_count(m);
            self.excluded += s.excluded_count(m);
            match &m.fit.state {
                FitState::Current => self.current += 1,
                FitState::Stale(_) => self.stale += 1,
                FitState::None | FitState::Failed(_) => self.unfitted += 1,
            }
            if let Some(f) = &m.fit.fit {
                self.models.insert(f.model.clone());
            }
        }
    }

    /// The known models among [`SiteTally::models`], in the order of the model table.
    pub fn model_kinds(&self) -> Vec<ModelKind> {
        ModelKind::ALL
            .into_iter()
            .filter(|k| self.models.contains(k.id()))
            .collect()
    }
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
