//! Campaign exchange: every shared row of a campaign with its references as stable uids, so
//! campaigns can be compared, merged (`porewise merge`) and recreated elsewhere (the archive).
//!
//! [`read`] takes a campaign's rows out of a SQLite file in one read transaction and
//! translates every local integer id into the uid of the row it names; [`plan()`] compares two
//! campaigns (pure: new rows, identical rows, conflicts, code collisions, how each conflict is
//! resolved); [`apply()`] writes a plan into a campaign file inside the caller's transaction,
//! translating uids back into that file's ids. [`fingerprint`] hashes a canonical form that
//! does not depend on local ids or row order.
//!
//! Logger records have no uid: they are matched by their natural key (site uid, sensor id,
//! time) and kept grouped by sensor, sorted by time, so the plan merge-joins them in one pass.

use std::collections::{HashMap, HashSet};

use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};

mod apply;
mod plan;
mod read;

pub use apply::{Applied, apply};
pub use plan::{
    Collision, Conflict, KindCounts, MergePlan, Preferences, RowKind, RowSet, Side, Way, plan,
    recreate,
};
pub use read::read;

/// The campaign row itself (exactly one per file).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CampaignRow {
    /// Stable id of the campaign.
    pub uid: String,
    /// Name shown in listings and reports.
    pub name: String,
    /// Free text.
    pub description: Option<String>,
    /// Suction at field capacity, kPa.
    pub fc_kpa: f64,
    /// Suction at the permanent wilting point, kPa.
    pub pwp_kpa: f64,
    /// When the campaign was created (stored text, UTC).
    pub created_at: String,
    /// The texture-prior default: fit with the prior up to this many readings (None: off).
    pub texture_prior_max_readings: Option<i64>,
}

/// One imported file (provenance of the rows it brought).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BatchRow {
    /// Stable id.
    pub uid: String,
    /// The file's name as imported.
    pub file_name: String,
    /// SHA-256 of the file's content (hex).
    pub sha256: String,
    /// `sites`, `layers`, `lab`, `logger` or `conductivity`.
    pub kind: String,
    /// Rows the file held.
    pub rows: i64,
    /// Whether the import was forced past a duplicate check.
    pub forced: bool,
    /// When it was imported (stored text, UTC).
    pub imported_at: String,
}

/// A site.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SiteRow {
    /// Stable id.
    pub uid: String,
    /// The campaign's code for it (unique in a file).
    pub code: String,
    /// Free name.
    pub name: Option<String>,
    /// WGS 84 latitude, decimal degrees.
    pub latitude: Option<f64>,
    /// WGS 84 longitude, decimal degrees.
    pub longitude: Option<f64>,
    /// Elevation, m.
    pub elevation_m: Option<f64>,
    /// Free notes.
    pub notes: Option<String>,
    /// The import that created it.
    pub batch_uid: Option<String>,
}

/// A layer of a site.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LayerRow {
    /// Stable id.
    pub uid: String,
    /// Its site.
    pub site_uid: String,
    /// Top depth, cm.
    pub top_cm: f64,
    /// Bottom depth, cm.
    pub bottom_cm: f64,
    /// Horizon label.
    pub horizon: Option<String>,
    /// Sand, %.
    pub sand_pct: Option<f64>,
    /// Silt, %.
    pub silt_pct: Option<f64>,
    /// Clay, %.
    pub clay_pct: Option<f64>,
    /// Organic carbon, %.
    pub organic_carbon_pct: Option<f64>,
    /// Bulk density, g/cm3.
    pub bulk_density_g_cm3: Option<f64>,
    /// Saturated conductivity, cm/day.
    pub ks_cm_per_day: Option<f64>,
    /// The import that created it.
    pub batch_uid: Option<String>,
}

/// A sample (lab core or field pairing).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SampleRow {
    /// Stable id.
    pub uid: String,
    /// Its layer.
    pub layer_uid: String,
    /// The campaign's code for it (unique in a file).
    pub code: String,
    /// `lab_core` or `field_pairing`.
    pub kind: String,
    /// Day collected (stored text).
    pub collected_on: Option<String>,
    /// Bulk density, g/cm3.
    pub bulk_density_g_cm3: Option<f64>,
    /// Free notes.
    pub notes: Option<String>,
    /// The import that created it.
    pub batch_uid: Option<String>,
    /// Measured saturated conductivity, cm/day.
    pub ks_cm_per_day: Option<f64>,
    /// The import that brought the measured Ks.
    pub ks_batch_uid: Option<String>,
}

/// A retention reading: a suction and the water content held at it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ReadingRow {
    /// Stable id.
    pub uid: String,
    /// Its sample.
    pub sample_uid: String,
    /// Suction head, cm of water.
    pub h_cm: f64,
    /// Water content, m3/m3.
    pub theta: f64,
    /// Method label.
    pub method: Option<String>,
    /// When measured (stored text).
    pub measured_at: Option<String>,
    /// `drying`, `wetting` or `unknown`.
    pub branch: String,
    /// Fit weight.
    pub weight: Option<f64>,
    /// Free notes.
    pub notes: Option<String>,
    /// The import that brought it.
    pub batch_uid: Option<String>,
    /// Its line in that import's file.
    pub source_line: Option<i64>,
}

/// A measured hydraulic conductivity reading, at a suction or at a water content.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ConductivityRow {
    /// Stable id.
    pub uid: String,
    /// Its sample.
    pub sample_uid: String,
    /// Suction head, cm of water (or None when measured at a water content).
    pub h_cm: Option<f64>,
    /// Water content, m3/m3 (or None when measured at a suction).
    pub theta: Option<f64>,
    /// Conductivity, cm/day.
    pub k_cm_per_day: f64,
    /// Method label.
    pub method: Option<String>,
    /// When measured (stored text).
    pub measured_at: Option<String>,
    /// Free notes.
    pub notes: Option<String>,
    /// The import that brought it.
    pub batch_uid: Option<String>,
    /// Its line in that import's file.
    pub source_line: Option<i64>,
}

/// The logger records of one sensor of one site, sorted by time (text order, as stored).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LoggerSeries {
    /// The site.
    pub site_uid: String,
    /// The sensor's id at that site.
    pub sensor_id: String,
    /// The imports its records came from; [`LoggerPoint::batch`] indexes this list.
    pub batch_uids: Vec<Option<String>>,
    /// The records, in time order.
    pub points: Vec<LoggerPoint>,
}

/// One logger record of a [`LoggerSeries`].
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LoggerPoint {
    /// UTC time (stored text, `YYYY-MM-DDTHH:MM:SSZ`).
    pub time: String,
    /// Sensor depth, cm.
    pub depth_cm: f64,
    /// `tensiometer` (value: suction, cm) or `water_content` (value: m3/m3).
    pub sensor: String,
    /// The value.
    pub value: f64,
    /// Index into the series' `batch_uids`.
    pub batch: u32,
    /// Its line in that import's file.
    pub source_line: Option<i64>,
}

/// The logger record a flag names: its natural key.
#[derive(Debug, Clone, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Deserialize)]
pub struct LoggerKey {
    /// The site.
    pub site_uid: String,
    /// The sensor's id at that site.
    pub sensor_id: String,
    /// UTC time (stored text).
    pub time: String,
}

/// What a flag marks.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub enum FlagTarget {
    /// A retention reading (uid).
    Reading(String),
    /// A logger record (natural key).
    Logger(LoggerKey),
    /// A conductivity reading (uid).
    Conductivity(String),
}

/// A flag with its current status (its history is in [`FlagEventRow`]s).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FlagRow {
    /// Stable id.
    pub uid: String,
    /// What it marks.
    pub target: FlagTarget,
    /// Why.
    pub reason: String,
    /// The check's score, if any.
    pub score: Option<f64>,
    /// `auto` or `manual`.
    pub origin: String,
    /// `suggested`, `accepted`, `dismissed` or `cleared`.
    pub status: String,
    /// Free note.
    pub note: Option<String>,
    /// When made (stored text).
    pub created_at: String,
    /// When last decided (stored text).
    pub decided_at: Option<String>,
    /// The check rule that made it.
    pub rule: Option<String>,
    /// `user` or `checks`.
    pub decided_by: Option<String>,
}

/// One entry of a flag's audit trail (append-only).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FlagEventRow {
    /// Stable id.
    pub uid: String,
    /// Its flag.
    pub flag_uid: String,
    /// Status before (None when the flag was made).
    pub from_status: Option<String>,
    /// Status after.
    pub to_status: String,
    /// `user` or `checks`.
    pub actor: String,
    /// Free note.
    pub note: Option<String>,
    /// When (stored text).
    pub at: String,
}

/// A recorded fit attempt. JSON columns are kept as stored text, except `joint`, whose local
/// conductivity reading ids are replaced by uids.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FitRow {
    /// Stable id.
    pub uid: String,
    /// Its sample.
    pub sample_uid: String,
    /// Model name.
    pub model: String,
    /// Parameters (JSON).
    pub parameters: String,
    /// Standard errors (JSON).
    pub standard_errors: Option<String>,
    /// Covariance (JSON).
    pub covariance: Option<String>,
    /// Statistics (JSON).
    pub statistics: String,
    /// Readings used.
    pub n_points: i64,
    /// The readings it used, by uid, when the fit still matches its sample's readings in the
    /// file it was read from: SHA-256 of their uids and values ([`readings_key`]). None for a
    /// stale fit (its readings changed since), so the fit stays stale wherever it goes.
    pub readings_key: Option<String>,
    /// When made (stored text).
    pub created_at: String,
    /// Whether it is its sample's current fit.
    pub is_current: bool,
    /// `ok` or `failed`.
    pub status: String,
    /// Message of the attempt.
    pub message: Option<String>,
    /// What was asked (text as stored).
    pub requested: Option<String>,
    /// Held parameters (JSON).
    pub fixed: Option<String>,
    /// The whole report (JSON).
    pub report: Option<String>,
    /// The auto ranking (JSON).
    pub ranking: Option<String>,
    /// The readings it used, by uid, in the stored order (None when not recorded).
    pub reading_uids: Option<Vec<String>>,
    /// `mualem` or `burdine`.
    pub conductivity: Option<String>,
    /// The joint record (JSON) with conductivity reading uids in place of local ids and its
    /// conductivity fingerprint replaced by the uid-based key (`stale` when stale).
    pub joint: Option<String>,
}

/// All shared rows of one campaign, every reference a uid: enough to recreate it elsewhere.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CampaignRows {
    /// The campaign row.
    pub campaign: CampaignRow,
    /// Import batches.
    pub batches: Vec<BatchRow>,
    /// Sites.
    pub sites: Vec<SiteRow>,
    /// Layers.
    pub layers: Vec<LayerRow>,
    /// Samples.
    pub samples: Vec<SampleRow>,
    /// Retention readings.
    pub readings: Vec<ReadingRow>,
    /// Conductivity readings.
    pub conductivity: Vec<ConductivityRow>,
    /// Logger records, one series per (site, sensor), sorted by (site uid, sensor id).
    pub logger: Vec<LoggerSeries>,
    /// Flags.
    pub flags: Vec<FlagRow>,
    /// Flag events (the audit trail).
    pub flag_events: Vec<FlagEventRow>,
    /// Fits.
    pub fits: Vec<FitRow>,
}

impl CampaignRows {
    /// Logger records in all series.
    pub fn logger_records(&self) -> usize {
        self.logger.iter().map(|s| s.points.len()).sum()
    }
}

/// SHA-256 (hex) of a set of readings by uid: uid, suction, water content and weight, in uid
/// order. The file-independent counterpart of [`super::fits::fingerprint`].
pub fn readings_key(readings: &[(&str, f64, f64, Option<f64>)]) -> String {
    let mut sorted: Vec<&(&str, f64, f64, Option<f64>)> = readings.iter().collect();
    sorted.sort_by(|a, b| a.0.cmp(b.0));
    let weighted = readings.iter().any(|r| r.3.is_some());
    let mut hasher = Sha256::new();
    for (uid, h, theta, w) in sorted {
        hasher.update(uid.as_bytes());
        hasher.update(h.to_bits().to_le_bytes());
        hasher.update(theta.to_bits().to_le_bytes());
        let w = if weighted { w.unwrap_or(1.0) } else { 1.0 };
        hasher.update(w.to_bits().to_le_bytes());
    }
    crate::model::number::hex(&hasher.finalize())
}

/// SHA-256 (hex) of conductivity readings by uid: uid, where measured, K and whether a flag
/// leaves it out of joint fits (`true`; hashed only when set, as the file's own fingerprint
/// does), in uid order.
pub fn conductivity_key(readings: &[(&ConductivityRow, bool)]) -> String {
    let mut sorted: Vec<&(&ConductivityRow, bool)> = readings.iter().collect();
    sorted.sort_by(|a, b| a.0.uid.cmp(&b.0.uid));
    let mut hasher = Sha256::new();
    for &&(r, excluded) in &sorted {
        hasher.update(r.uid.as_bytes());
        let (tag, at) = match (r.h_cm, r.theta) {
            (Some(h), _) => (0u8, h),
            (None, Some(t)) => (1u8, t),
            (None, None) => (2u8, 0.0),
        };
        hasher.update([tag]);
        hasher.update(at.to_bits().to_le_bytes());
        hasher.update(r.k_cm_per_day.to_bits().to_le_bytes());
        if excluded {
            hasher.update(b"excluded");
        }
    }
    crate::model::number::hex(&hasher.finalize())
}

/// A reading as [`readings_key`] hashes it: uid, suction, water content, weight.
type ReadingPoint<'a> = (&'a str, f64, f64, Option<f64>);

/// Whether each fit of `merged` still matches its sample's readings there, the way a file's
/// own read decides it: a fit keeps a `readings_key` (and a joint fit its conductivity key)
/// only when one of `sides` (the versions merged) recorded exactly the key of the merged
/// sample's readings; otherwise it is stale (`None`, `"stale"`). A store that keeps rows
/// rather than a file (the archive) calls this after a merge, so its rows read back as a file
/// pulled from it reads. Returns the uids of the fits whose keys it changed.
pub fn settle_freshness(merged: &mut CampaignRows, sides: &[&CampaignRows]) -> Vec<String> {
    let excluding =
        |f: &FlagRow| f.status == "accepted" || (f.status == "suggested" && f.origin == "manual");
    let mut out_readings: HashSet<&str> = HashSet::new();
    let mut out_k: HashSet<&str> = HashSet::new();
    for f in merged.flags.iter().filter(|f| excluding(f)) {
        match &f.target {
            FlagTarget::Reading(uid) => {
                out_readings.insert(uid);
            }
            FlagTarget::Conductivity(uid) => {
                out_k.insert(uid);
            }
            FlagTarget::Logger(_) => {}
        }
    }
    let mut used: HashMap<&str, Vec<ReadingPoint<'_>>> = HashMap::new();
    for r in merged
        .readings
        .iter()
        .filter(|r| !out_readings.contains(r.uid.as_str()))
    {
        used.entry(&r.sample_uid)
            .or_default()
            .push((&r.uid, r.h_cm, r.theta, r.weight));
    }
    let mut k: HashMap<&str, Vec<(&ConductivityRow, bool)>> = HashMap::new();
    for r in &merged.conductivity {
        k.entry(&r.sample_uid)
            .or_default()
            .push((r, out_k.contains(r.uid.as_str())));
    }
    let keys: HashMap<String, (String, String)> = merged
        .samples
        .iter()
        .map(|s| {
            let uid = s.uid.as_str();
            (
                s.uid.clone(),
                (
                    readings_key(used.get(uid).map_or(&[][..], Vec::as_slice)),
                    conductivity_key(k.get(uid).map_or(&[][..], Vec::as_slice)),
                ),
            )
        })
        .collect();
    let versions: HashMap<&str, Vec<&FitRow>> =
        sides
            .iter()
            .flat_map(|s| &s.fits)
            .fold(HashMap::new(), |mut m, f| {
                m.entry(f.uid.as_str()).or_default().push(f);
                m
            });
    let joint_key = |joint: &Option<String>| -> Option<String> {
        let value: serde_json::Value = serde_json::from_str(joint.as_deref()?).ok()?;
        Some(value.get("conductivity_fingerprint")?.as_str()?.to_string())
    };
    let mut changed = Vec::new();
    for fit in &mut merged.fits {
        let Some((now, k_now)) = keys.get(&fit.sample_uid) else {
            continue;
        };
        let seen = versions
            .get(fit.uid.as_str())
            .map_or(&[][..], Vec::as_slice);
        let fresh = seen
            .iter()
            .any(|v| v.readings_key.as_deref() == Some(now.as_str()));
        let key = fresh.then(|| now.clone());
        let mut moved = key != fit.readings_key;
        fit.readings_key = key;
        if let Some(recorded) = joint_key(&fit.joint) {
            let k_fresh = seen
                .iter()
                .any(|v| joint_key(&v.joint).as_deref() == Some(k_now.as_str()));
            let settled = if k_fresh {
                k_now.clone()
            } else {
                read::STALE.to_string()
            };
            if settled != recorded
                && let Some(text) = &fit.joint
                && let Ok(mut value) = serde_json::from_str::<serde_json::Value>(text)
                && let Some(object) = value.as_object_mut()
            {
                object.insert(
                    "conductivity_fingerprint".into(),
                    serde_json::Value::String(settled),
                );
                fit.joint = serde_json::to_string(&value).ok();
                moved = true;
            }
        }
        if moved {
            changed.push(fit.uid.clone());
        }
    }
    changed
}

/// SHA-256 (hex) of a canonical form of the campaign: every row as JSON, each kind sorted by
/// uid (logger records by natural key), so it does not depend on local ids or row order.
pub fn fingerprint(rows: &CampaignRows) -> String {
    fn feed<T: Serialize>(hasher: &mut Sha256, label: &str, items: Vec<&T>) {
        hasher.update(label.as_bytes());
        hasher.update((items.len() as u64).to_le_bytes());
        for item in items {
            // Plain structs of strings and numbers always serialise.
            let text = serde_json::to_string(item).unwrap_or_default();
            hasher.update((text.len() as u64).to_le_bytes());
            hasher.update(text.as_bytes());
        }
    }
    fn sorted<T>(items: &[T], key: impl Fn(&T) -> &str) -> Vec<&T> {
        let mut v: Vec<&T> = items.iter().collect();
        v.sort_by(|a, b| key(a).cmp(key(b)));
        v
    }
    let mut hasher = Sha256::new();
    feed(&mut hasher, "campaign", vec![&rows.campaign]);
    feed(&mut hasher, "batches", sorted(&rows.batches, |r| &r.uid));
    feed(&mut hasher, "sites", sorted(&rows.sites, |r| &r.uid));
    feed(&mut hasher, "layers", sorted(&rows.layers, |r| &r.uid));
    feed(&mut hasher, "samples", sorted(&rows.samples, |r| &r.uid));
    feed(&mut hasher, "readings", sorted(&rows.readings, |r| &r.uid));
    feed(
        &mut hasher,
        "conductivity",
        sorted(&rows.conductivity, |r| &r.uid),
    );
    feed(&mut hasher, "flags", sorted(&rows.flags, |r| &r.uid));
    feed(
        &mut hasher,
        "flag_events",
        sorted(&rows.flag_events, |r| &r.uid),
    );
    feed(&mut hasher, "fits", sorted(&rows.fits, |r| &r.uid));
    // Logger records: sensor by sensor in key order, each record with its batch's uid.
    let mut series: Vec<&LoggerSeries> = rows.logger.iter().collect();
    series.sort_by(|a, b| (&a.site_uid, &a.sensor_id).cmp(&(&b.site_uid, &b.sensor_id)));
    hasher.update(b"logger");
    for s in series {
        hasher.update(s.site_uid.as_bytes());
        hasher.update([0]);
        hasher.update(s.sensor_id.as_bytes());
        hasher.update([0]);
        let mut points: Vec<&LoggerPoint> = s.points.iter().collect();
        points.sort_by(|a, b| a.time.cmp(&b.time));
        for p in points {
            hasher.update(p.time.as_bytes());
            hasher.update(p.depth_cm.to_bits().to_le_bytes());
            hasher.update(p.sensor.as_bytes());
            hasher.update(p.value.to_bits().to_le_bytes());
            let batch = s
                .batch_uids
                .get(p.batch as usize)
                .and_then(Option::as_deref)
                .unwrap_or("-");
            hasher.update(batch.as_bytes());
            hasher.update(p.source_line.unwrap_or(0).to_le_bytes());
        }
    }
    crate::model::number::hex(&hasher.finalize())
}
