//! Fits of a campaign: the readings a fit uses, fit history, the current fit and staleness.
//!
//! A reading is used by fits unless a flag on it excludes it (an accepted flag, or a manual
//! one not dismissed or cleared; see [`EXCLUDED`]). Every fit records the ids of the readings
//! it used, their SHA-256 fingerprint and the sample's revision counter (bumped by triggers
//! whenever a reading or a flag on it changes). A fit is stale when the sample's readings no
//! longer match its fingerprint, or when a later attempt to refit the sample failed.

use std::collections::{BTreeMap, HashMap, HashSet};

use chrono::{DateTime, Utc};
use rusqlite::{Connection, OptionalExtension, Row, params};
use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};

use super::sql_types::SqlTime;
use super::{Result, StoreError};
use crate::fit::{AutoFit, FitReport, SkippedModel};
use crate::model::conductivity::ConductivityForm;
use crate::model::domain::{LayerRef, SampleKind};
use crate::model::number::hex;

/// SQL condition, on a reading aliased `r`, that is true when fits must leave it out: an
/// accepted flag, or a manual flag not yet dismissed or cleared (as `Flag::excludes`).
pub const EXCLUDED: &str = concat!(
    "EXISTS (SELECT 1 FROM flag f WHERE f.reading_id = r.id AND ",
    flag_excludes!(),
    ")"
);

/// Which samples a command works on: all of them, a site, a layer, or named samples.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Selection {
    /// Only samples of this site (code).
    pub site: Option<String>,
    /// Only samples of this layer.
    pub layer: Option<LayerRef>,
    /// Only these samples (codes); empty for no restriction.
    pub samples: Vec<String>,
}

impl Selection {
    /// Every sample of the campaign.
    pub fn all() -> Self {
        Self::default()
    }

    /// Check that every code named exists, so a typo is an error rather than an empty result.
    ///
    /// # Errors
    /// [`StoreError::Unknown`] naming the first code not found.
    pub fn check(&self, conn: &Connection) -> Result<()> {
        if let Some(site) = &self.site
            && super::sites::find(conn, site)?.is_none()
        {
            return Err(StoreError::Unknown {
                what: "site",
                code: site.clone(),
            });
        }
        if let Some(layer) = &self.layer
            && super::layers::find(conn, layer)?.is_none()
        {
            return Err(StoreError::Unknown {
                what: "layer",
                code: layer.to_string(),
            });
        }
        for code in &self.samples {
            if super::samples::find(conn, code)?.is_none() {
                return Err(StoreError::Unknown {
                    what: "sample",
                    code: code.clone(),
                });
            }
        }
        Ok(())
    }

    /// Whether a sample with this code and layer is selected.
    fn includes(&self, code: &str, layer: &LayerRef) -> bool {
        self.site.as_ref().is_none_or(|s| *s == layer.site)
            && self.layer.as_ref().is_none_or(|l| l.same_as(layer))
            && (self.samples.is_empty() || self.samples.iter().any(|s| s == code))
    }
}

/// A selected sample: its ids, layer, kind and revision.
#[derive(Debug, Clone, PartialEq)]
pub struct SampleInfo {
    /// Database id.
    pub id: i64,
    /// Sample code.
    pub code: String,
    /// Database id of its layer.
    pub layer_id: i64,
    /// Its layer (site and depths).
    pub layer: LayerRef,
    /// Lab core or field pairing.
    pub kind: SampleKind,
    /// Revision counter of its readings and their flags.
    pub revision: i64,
}

/// Columns of a [`SampleInfo`], in the order [`sample_info`] reads them.
pub(crate) const SAMPLE_INFO_COLUMNS: &str =
    "m.id, m.code, m.layer_id, s.code, l.top_cm, l.bottom_cm, m.kind, m.readings_rev";

/// A [`SampleInfo`] from the first columns of a row ([`SAMPLE_INFO_COLUMNS`]).
pub(crate) fn sample_info(r: &Row<'_>) -> rusqlite::Result<SampleInfo> {
    Ok(SampleInfo {
        id: r.get(0)?,
        code: r.get(1)?,
        layer_id: r.get(2)?,
        layer: LayerRef {
            site: r.get(3)?,
            top_cm: r.get(4)?,
            bottom_cm: r.get(5)?,
        },
        kind: r.get(6)?,
        revision: r.get(7)?,
    })
}

/// The selected samples, ordered by site, depth and code.
///
/// # Errors
/// An SQLite error.
pub fn samples(conn: &Connection, selection: &Selection) -> Result<Vec<SampleInfo>> {
    let mut stmt = conn.prepare_cached(&format!(
        "SELECT {SAMPLE_INFO_COLUMNS}
         FROM sample m JOIN layer l ON m.layer_id = l.id JOIN site s ON l.site_id = s.id
         WHERE (?1 IS NULL OR s.code = ?1)
         ORDER BY s.code, l.top_cm, l.bottom_cm, m.code"
    ))?;
    let rows = stmt.query_map(params![selection.site], sample_info)?;
    let mut out = Vec::new();
    for row in rows {
        let info = row?;
        if selection.includes(&info.code, &info.layer) {
            out.push(info);
        }
    }
    Ok(out)
}

/// The readings of one sample that a fit uses, ordered by suction.
#[derive(Debug, Clone, PartialEq)]
pub struct FitInput {
    /// The sample.
    pub sample: SampleInfo,
    /// Reading ids, in the order of the values below.
    pub reading_ids: Vec<i64>,
    /// Suction head, cm.
    pub h_cm: Vec<f64>,
    /// Water content, m3/m3.
    pub theta: Vec<f64>,
    /// Weights, when any reading has one (1 for those that do not).
    pub weights: Option<Vec<f64>>,
    /// SHA-256 of the readings used (see [`fingerprint`]).
    pub fingerprint: String,
    /// How many readings of the sample are left out by flags.
    pub excluded: usize,
}

/// SHA-256 (hex) of a set of readings: ids, suctions, water contents and weights, in id order.
///
/// Changes when a reading is added, removed (or excluded), or any value of one changes.
pub fn fingerprint(ids: &[i64], h_cm: &[f64], theta: &[f64], weights: Option<&[f64]>) -> String {
    let mut order: Vec<usize> = (0..ids.len()).collect();
    order.sort_by_key(|&i| ids[i]);
    let mut hasher = Sha256::new();
    for i in order {
        hasher.update(ids[i].to_le_bytes());
        hasher.update(h_cm[i].to_bits().to_le_bytes());
        hasher.update(theta[i].to_bits().to_le_bytes());
        hasher.update(weights.map_or(1.0, |w| w[i]).to_bits().to_le_bytes());
    }
    hex(&hasher.finalize())
}

/// The fit inputs of the selected samples (samples without readings included, empty).
///
/// # Errors
/// An SQLite error.
pub fn inputs(conn: &Connection, selection: &Selection) -> Result<Vec<FitInput>> {
    let samples = samples(conn, selection)?;
    let mut stmt = conn.prepare_cached(&format!(
        "SELECT r.id, r.h_cm, r.theta, r.weight, {EXCLUDED} FROM reading r
         WHERE r.sample_id = ?1 ORDER BY r.h_cm, r.id"
    ))?;
    let mut out = Vec::with_capacity(samples.len());
    for sample in samples {
        let mut ids = Vec::new();
        let mut h = Vec::new();
        let mut theta = Vec::new();
        let mut weights: Vec<Option<f64>> = Vec::new();
        let mut excluded = 0;
        let rows = stmt.query_map(params![sample.id], |r| {
            Ok((
                r.get::<_, i64>(0)?,
                r.get::<_, f64>(1)?,
                r.get::<_, f64>(2)?,
                r.get::<_, Option<f64>>(3)?,
                r.get::<_, bool>(4)?,
            ))
        })?;
        for row in rows {
            let (id, hv, tv, w, is_excluded) = row?;
            if is_excluded {
                excluded += 1;
                continue;
            }
            ids.push(id);
            h.push(hv);
            theta.push(tv);
            weights.push(w);
        }
        let weights = weights
            .iter()
            .any(Option::is_some)
            .then(|| weights.iter().map(|w| w.unwrap_or(1.0)).collect::<Vec<_>>());
        let fingerprint = fingerprint(&ids, &h, &theta, weights.as_deref());
        out.push(FitInput {
            sample,
            reading_ids: ids,
            h_cm: h,
            theta,
            weights,
            fingerprint,
            excluded,
        });
    }
    Ok(out)
}

/// Whether a stored fit attempt produced a usable curve.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum FitStatus {
    /// A converged fit; it became the sample's current fit when it was made.
    Ok,
    /// The attempt failed; its reason is in the message. It never becomes current.
    Failed,
}

impl FitStatus {
    fn as_str(self) -> &'static str {
        match self {
            FitStatus::Ok => "ok",
            FitStatus::Failed => "failed",
        }
    }
}

/// One model's line in a stored `auto` ranking (no per-reading diagnostics, to stay small).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RankEntry {
    /// Model identifier.
    pub model: String,
    /// AICc of the fit.
    pub aicc: Option<f64>,
    /// AICc minus the best AICc.
    pub delta_aicc: f64,
    /// Akaike weight.
    pub akaike_weight: f64,
    /// Sum of squared residuals.
    pub sse: f64,
    /// Root mean square error, m3/m3.
    pub rmse: f64,
    /// Free parameters.
    pub n_free_params: usize,
    /// Parameters AICc counts (free ones + the error variance); 0 when stored before the
    /// variance was counted (the ranking is then recomputed on reading, see [`Ranking::recount`]).
    #[serde(default)]
    pub n_criteria_params: usize,
    /// Parameter values by name, in model order.
    pub parameters: Vec<(String, f64)>,
}

/// The stored form of an `auto` ranking: ranked models best first, and the skipped ones.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Ranking {
    /// Converged fits, lowest AICc first.
    pub ranked: Vec<RankEntry>,
    /// Models not ranked, with the reason.
    pub skipped: Vec<SkippedModel>,
}

impl Ranking {
    /// Bring a ranking stored before AICc counted the error variance to the current
    /// convention: each AICc recomputed from `n_points`, its model's free parameters and SSE,
    /// then the order, differences and Akaike weights. A model whose AICc no longer exists
    /// (too few readings) moves to the skipped ones. Returns whether anything changed.
    pub fn recount(&mut self, n_points: usize) -> bool {
        if self.ranked.iter().all(|e| e.n_criteria_params != 0) {
            return false;
        }
        let mut kept = Vec::with_capacity(self.ranked.len());
        for mut e in std::mem::take(&mut self.ranked) {
            e.aicc = crate::fit::aicc(n_points, e.n_free_params, e.sse);
            e.n_criteria_params = crate::fit::criteria_parameters(e.n_free_params);
            if e.aicc.is_some() {
                kept.push(e);
            } else {
                self.skipped.push(SkippedModel {
                    model: e.model,
                    reason: format!(
                        "{n_points} readings for {} free parameters: auto needs at least {}",
                        e.n_free_params,
                        crate::fit::min_points_for_aicc(e.n_free_params)
                    ),
                });
            }
        }
        kept.sort_by(|a, b| {
            a.aicc
                .unwrap_or(f64::INFINITY)
                .total_cmp(&b.aicc.unwrap_or(f64::INFINITY))
        });
        let best = kept.first().and_then(|e| e.aicc).unwrap_or(0.0);
        let total: f64 = kept
            .iter()
            .map(|e| (-0.5 * (e.aicc.unwrap_or(f64::INFINITY) - best)).exp())
            .sum();
        for e in &mut kept {
            e.delta_aicc = e.aicc.unwrap_or(f64::INFINITY) - best;
            e.akaike_weight = (-0.5 * e.delta_aicc).exp() / total;
        }
        self.ranked = kept;
        true
    }
}

impl From<&AutoFit> for Ranking {
    fn from(auto: &AutoFit) -> Self {
        Self {
            ranked: auto
                .ranked
                .iter()
                .map(|r| RankEntry {
                    model: r.report.model.clone(),
                    aicc: r.report.aicc,
                    delta_aicc: r.delta_aicc,
                    akaike_weight: r.akaike_weight,
                    sse: r.report.sse,
                    rmse: r.report.rmse,
                    n_free_params: r.report.n_free_params,
                    n_criteria_params: r.report.n_criteria_params,
                    parameters: r
                        .report
                        .parameters
                        .iter()
                        .map(|p| (p.name.clone(), p.value))
                        .collect(),
                })
                .collect(),
            skipped: auto.skipped.clone(),
        }
    }
}

/// A fit attempt to record.
#[derive(Debug, Clone, Copy)]
pub struct NewFit<'a> {
    /// The readings it was made from.
    pub input: &'a FitInput,
    /// What was asked for: a model identifier or `auto`.
    pub requested: &'a str,
    /// The model of the result (the best one for `auto`), or the one tried when it failed.
    pub model: &'a str,
    /// Parameters the user fixed.
    pub fixed: &'a [(String, f64)],
    /// The report, when the solver produced one (a failed attempt may have one too).
    pub report: Option<&'a FitReport>,
    /// The `auto` ranking.
    pub ranking: Option<&'a Ranking>,
    /// `Some(reason)` for a failed attempt.
    pub failure: Option<&'a str>,
    /// The conductivity form asked for (`None`: the model's usual pairing).
    pub conductivity: Option<ConductivityForm>,
}

fn json<T: Serialize + ?Sized>(value: &T) -> Result<String> {
    serde_json::to_string(value).map_err(|e| StoreError::Corrupt(format!("cannot encode: {e}")))
}

/// Record a fit attempt. A successful one becomes the sample's current fit (the previous
/// current one stays as history); a failed one leaves the current fit alone, which is then
/// stale. Returns the new fit's id.
///
/// # Errors
/// An SQLite error.
pub fn record(conn: &Connection, fit: &NewFit<'_>) -> Result<i64> {
    insert(conn, &encode(fit)?)
}

/// A fit attempt encoded for its row: the JSON columns made, so that [`insert`] inside a
/// write transaction does no more than the SQL.
#[derive(Debug, Clone, PartialEq)]
pub struct EncodedFit {
    sample_id: i64,
    sample_rev: i64,
    model: String,
    parameters: String,
    standard_errors: Option<String>,
    covariance: Option<String>,
    statistics: String,
    n_points: i64,
    fingerprint: String,
    status: FitStatus,
    message: Option<String>,
    requested: String,
    fixed: String,
    report: Option<String>,
    ranking: Option<String>,
    reading_ids: String,
    conductivity: Option<&'static str>,
}

/// Encode a fit attempt for [`insert`].
///
/// # Errors
/// A value that does not encode as JSON ([`StoreError::Corrupt`]).
pub fn encode(fit: &NewFit<'_>) -> Result<EncodedFit> {
    let status = if fit.failure.is_some() {
        FitStatus::Failed
    } else {
        FitStatus::Ok
    };
    let parameters: BTreeMap<&str, f64> = fit
        .report
        .map(|r| {
            r.parameters
                .iter()
                .map(|p| (p.name.as_str(), p.value))
                .collect()
        })
        .unwrap_or_default();
    let errors: Option<BTreeMap<&str, Option<f64>>> = fit.report.map(|r| {
        r.parameters
            .iter()
            .map(|p| (p.name.as_str(), p.se))
            .collect()
    });
    let statistics = fit.report.map(|r| {
        serde_json::json!({
            "sse": r.sse, "rmse": r.rmse, "r2": r.r2, "aic": r.aic, "aicc": r.aicc,
            "bic": r.bic, "n_points": r.n_points, "n_free_params": r.n_free_params,
            "converged": r.converged, "termination": r.termination,
            "evaluations": r.evaluations,
        })
    });
    let fixed: BTreeMap<&str, f64> = fit.fixed.iter().map(|(n, v)| (n.as_str(), *v)).collect();
    let message = fit
        .failure
        .map(str::to_string)
        .or_else(|| fit.report.and_then(|r| r.message.clone()));
    Ok(EncodedFit {
        sample_id: fit.input.sample.id,
        sample_rev: fit.input.sample.revision,
        model: fit.model.to_string(),
        parameters: json(&parameters)?,
        standard_errors: errors.map(|e| json(&e)).transpose()?,
        covariance: fit
            .report
            .and_then(|r| r.covariance.as_ref())
            .map(json)
            .transpose()?,
        statistics: json(&statistics.unwrap_or(serde_json::Value::Object(serde_json::Map::new())))?,
        n_points: fit.input.reading_ids.len() as i64,
        fingerprint: fit.input.fingerprint.clone(),
        status,
        message,
        requested: fit.requested.to_string(),
        fixed: json(&fixed)?,
        report: fit.report.map(json).transpose()?,
        ranking: fit.ranking.map(json).transpose()?,
        reading_ids: json(&fit.input.reading_ids)?,
        conductivity: fit.conductivity.map(ConductivityForm::id),
    })
}

/// Insert an encoded fit attempt (see [`record`]); returns its id.
///
/// # Errors
/// An SQLite error.
pub fn insert(conn: &Connection, fit: &EncodedFit) -> Result<i64> {
    if fit.status == FitStatus::Ok {
        conn.prepare_cached(
            "UPDATE fit SET is_current = 0 WHERE sample_id = ?1 AND is_current = 1",
        )?
        .execute(params![fit.sample_id])?;
    }
    conn.prepare_cached(
        "INSERT INTO fit (sample_id, model, parameters, standard_errors, covariance, statistics,
             n_points, readings_fingerprint, created_at, is_current, status, message, requested,
             fixed, report, ranking, reading_ids, sample_rev, conductivity)
         VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13, ?14, ?15, ?16, ?17, ?18,
             ?19)",
    )?
    .execute(params![
        fit.sample_id,
        fit.model,
        fit.parameters,
        fit.standard_errors,
        fit.covariance,
        fit.statistics,
        fit.n_points,
        fit.fingerprint,
        SqlTime::now(),
        fit.status == FitStatus::Ok,
        fit.status.as_str(),
        fit.message,
        fit.requested,
        fit.fixed,
        fit.report,
        fit.ranking,
        fit.reading_ids,
        fit.sample_rev,
        fit.conductivity,
    ])?;
    Ok(conn.last_insert_rowid())
}

/// Whether a sample's readings are still those of `input` (as a fit made from them needs to
/// be recorded as current): its revision has not moved, or its readings still have the same
/// fingerprint. False for a sample that is gone.
///
/// # Errors
/// An SQLite error.
pub fn unchanged(conn: &Connection, input: &FitInput) -> Result<bool> {
    let revision: Option<i64> = conn
        .prepare_cached("SELECT readings_rev FROM sample WHERE id = ?1")?
        .query_row(params![input.sample.id], |r| r.get(0))
        .optional()?;
    Ok(match revision {
        None => false,
        Some(rev) if rev == input.sample.revision => true,
        Some(_) => readings_fingerprint(conn, input.sample.id)? == input.fingerprint,
    })
}

/// A fit attempt as stored.
#[derive(Debug, Clone, PartialEq)]
pub struct StoredFit {
    /// Fit id.
    pub id: i64,
    /// Database id of the sample.
    pub sample_id: i64,
    /// Model identifier of the result.
    pub model: String,
    /// What was asked for: a model identifier or `auto`.
    pub requested: Option<String>,
    /// Ok or failed.
    pub status: FitStatus,
    /// The failure reason, or the solver's notes on a good fit.
    pub message: Option<String>,
    /// Parameters the user fixed.
    pub fixed: Vec<(String, f64)>,
    /// The full report (absent for an attempt that failed before fitting).
    pub report: Option<FitReport>,
    /// The `auto` ranking, when the fit was made with `auto`.
    pub ranking: Option<Ranking>,
    /// Ids of the readings used, in the order of the report's per-reading diagnostics.
    pub reading_ids: Vec<i64>,
    /// Number of readings used.
    pub n_points: usize,
    /// Fingerprint of the readings used.
    pub fingerprint: String,
    /// The sample's revision when the fit was made.
    pub sample_revision: Option<i64>,
    /// When the fit was made (UTC).
    pub created_at: DateTime<Utc>,
    /// The sample's current fit.
    pub is_current: bool,
    /// The conductivity form asked for when it was made (`None`: the model's usual pairing).
    pub conductivity: Option<ConductivityForm>,
}

const FIT_COLUMNS: &str = "f.id, f.sample_id, f.model, f.requested, f.status, f.message, \
     f.fixed, f.report, f.ranking, f.reading_ids, f.n_points, f.readings_fingerprint, \
     f.sample_rev, f.created_at, f.is_current, f.conductivity";

fn decode<T: for<'de> Deserialize<'de>>(text: Option<String>, what: &str) -> Result<Option<T>> {
    text.map(|t| {
        serde_json::from_str(&t)
            .map_err(|e| StoreError::Corrupt(format!("fit {what} does not decode: {e}")))
    })
    .transpose()
}

/// The raw row, decoded in a second step so JSON errors become [`StoreError::Corrupt`].
struct RawFit {
    id: i64,
    sample_id: i64,
    model: String,
    requested: Option<String>,
    status: String,
    message: Option<String>,
    fixed: Option<String>,
    report: Option<String>,
    ranking: Option<String>,
    reading_ids: Option<String>,
    n_points: i64,
    fingerprint: String,
    sample_rev: Option<i64>,
    created_at: SqlTime,
    is_current: bool,
    conductivity: Option<String>,
}

fn raw(r: &Row<'_>) -> rusqlite::Result<RawFit> {
    Ok(RawFit {
        id: r.get(0)?,
        sample_id: r.get(1)?,
        model: r.get(2)?,
        requested: r.get(3)?,
        status: r.get(4)?,
        message: r.get(5)?,
        fixed: r.get(6)?,
        report: r.get(7)?,
        ranking: r.get(8)?,
        reading_ids: r.get(9)?,
        n_points: r.get(10)?,
        fingerprint: r.get(11)?,
        sample_rev: r.get(12)?,
        created_at: r.get(13)?,
        is_current: r.get(14)?,
        conductivity: r.get(15)?,
    })
}

impl RawFit {
    fn decode(self) -> Result<StoredFit> {
        let fixed: BTreeMap<String, f64> =
            decode(self.fixed, "fixed parameters")?.unwrap_or_default();
        // Fits stored by an earlier version: criteria, intervals and kinks as now.
        let mut report: Option<FitReport> = decode(self.report, "report")?;
        if let Some(r) = &mut report {
            r.upgrade_stored();
        }
        let mut ranking: Option<Ranking> = decode(self.ranking, "ranking")?;
        if let Some(r) = &mut ranking {
            r.recount(self.n_points.max(0) as usize);
        }
        Ok(StoredFit {
            id: self.id,
            sample_id: self.sample_id,
            model: self.model,
            requested: self.requested,
            status: if self.status == "failed" {
                FitStatus::Failed
            } else {
                FitStatus::Ok
            },
            message: self.message,
            fixed: fixed.into_iter().collect(),
            report,
            ranking,
            reading_ids: decode(self.reading_ids, "reading ids")?.unwrap_or_default(),
            n_points: self.n_points.max(0) as usize,
            fingerprint: self.fingerprint,
            sample_revision: self.sample_rev,
            created_at: self.created_at.0,
            is_current: self.is_current,
            conductivity: self
                .conductivity
                .map(|c| c.parse().map_err(StoreError::Corrupt))
                .transpose()?,
        })
    }
}

/// Every fit attempt of a sample, oldest first.
///
/// # Errors
/// An SQLite error, or a stored JSON value that does not decode.
pub fn history(conn: &Connection, sample_id: i64) -> Result<Vec<StoredFit>> {
    let mut stmt = conn.prepare_cached(&format!(
        "SELECT {FIT_COLUMNS} FROM fit f WHERE f.sample_id = ?1 ORDER BY f.id"
    ))?;
    let raws = stmt
        .query_map(params![sample_id], raw)?
        .collect::<rusqlite::Result<Vec<_>>>()?;
    raws.into_iter().map(RawFit::decode).collect()
}

/// The current fit of a sample, if it has one.
///
/// # Errors
/// An SQLite error, or a stored JSON value that does not decode.
pub fn current(conn: &Connection, sample_id: i64) -> Result<Option<StoredFit>> {
    let mut stmt = conn.prepare_cached(&format!(
        "SELECT {FIT_COLUMNS} FROM fit f WHERE f.sample_id = ?1 AND f.is_current = 1"
    ))?;
    stmt.query_row(params![sample_id], raw)
        .optional()?
        .map(RawFit::decode)
        .transpose()
}

/// The id of the newest fit attempt of the campaign (`None` before the first): it changes
/// whenever a fit is recorded, so a value computed from the fits can be kept until it does.
///
/// # Errors
/// An SQLite error.
pub fn latest_id(conn: &Connection) -> Result<Option<i64>> {
    Ok(conn
        .prepare_cached("SELECT max(id) FROM fit")?
        .query_row([], |r| r.get(0))?)
}

/// Why a current fit no longer describes its sample.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum StaleReason {
    /// A reading was added, changed, removed or excluded (or a flag cleared) since the fit.
    ReadingsChanged,
    /// A later attempt to refit the sample failed; the message says why.
    RefitFailed(String),
    /// A joint fit's conductivity readings were added, changed or removed since the fit.
    ConductivityChanged,
}

impl std::fmt::Display for StaleReason {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            StaleReason::ReadingsChanged => f.write_str("readings changed since the fit"),
            StaleReason::RefitFailed(m) => write!(f, "a later refit failed: {m}"),
            StaleReason::ConductivityChanged => {
                f.write_str("conductivity readings changed since the joint fit")
            }
        }
    }
}

/// Where a sample's fitting stands.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case", tag = "state", content = "detail")]
pub enum FitState {
    /// Never fitted.
    None,
    /// Its current fit matches its readings.
    Current,
    /// It has a current fit that no longer matches (see the reasons).
    Stale(Vec<StaleReason>),
    /// Every attempt failed; the last reason.
    Failed(String),
}

impl FitState {
    /// A one-word label for tables: `none`, `current`, `stale`, `failed`.
    pub fn label(&self) -> &'static str {
        match self {
            FitState::None => "none",
            FitState::Current => "current",
            FitState::Stale(_) => "stale",
            FitState::Failed(_) => "failed",
        }
    }

    /// True when the sample has a current fit that is stale.
    pub fn is_stale(&self) -> bool {
        matches!(self, FitState::Stale(_))
    }
}

/// A sample's fit standing without decoding any report: cheap enough for a tree of thousands
/// of samples (readings are read only for samples whose revision moved since their fit).
#[derive(Debug, Clone, PartialEq)]
pub struct FitSummary {
    /// Id of the current fit, if any.
    pub current_fit: Option<i64>,
    /// Model of the current fit.
    pub model: Option<String>,
    /// Where the sample stands.
    pub state: FitState,
}

/// The fit standing of every sample in `samples`, by sample id.
///
/// # Errors
/// An SQLite error.
pub fn summaries(conn: &Connection, samples: &[SampleInfo]) -> Result<HashMap<i64, FitSummary>> {
    let wanted: HashSet<i64> = samples.iter().map(|s| s.id).collect();
    let revision: HashMap<i64, i64> = samples.iter().map(|s| (s.id, s.revision)).collect();
    // Current fits, and the newest failed attempt of each sample.
    let mut current: HashMap<i64, (i64, String, String, Option<i64>)> = HashMap::new();
    let mut stmt = conn.prepare_cached(
        "SELECT sample_id, id, model, readings_fingerprint, sample_rev FROM fit WHERE is_current = 1",
    )?;
    for row in stmt.query_map([], |r| {
        Ok((
            r.get::<_, i64>(0)?,
            r.get::<_, i64>(1)?,
            r.get::<_, String>(2)?,
            r.get::<_, String>(3)?,
            r.get::<_, Option<i64>>(4)?,
        ))
    })? {
        let (sample, id, model, fp, rev) = row?;
        if wanted.contains(&sample) {
            current.insert(sample, (id, model, fp, rev));
        }
    }
    let mut failed: HashMap<i64, (i64, String)> = HashMap::new();
    let mut stmt = conn.prepare_cached(
        "SELECT sample_id, id, coalesce(message, 'no reason recorded') FROM fit
         WHERE status = 'failed' ORDER BY id",
    )?;
    for row in stmt.query_map([], |r| {
        Ok((
            r.get::<_, i64>(0)?,
            r.get::<_, i64>(1)?,
            r.get::<_, String>(2)?,
        ))
    })? {
        let (sample, id, message) = row?;
        if wanted.contains(&sample) {
            failed.insert(sample, (id, message));
        }
    }
    // Current joint fits: their conductivity readings are checked too.
    let joint: HashSet<i64> = conn
        .prepare_cached("SELECT id FROM fit WHERE is_current = 1 AND joint IS NOT NULL")?
        .query_map([], |r| r.get(0))?
        .collect::<rusqlite::Result<_>>()?;
    let mut out = HashMap::with_capacity(samples.len());
    for sample in samples {
        let fail = failed.get(&sample.id);
        let summary = match current.get(&sample.id) {
            None => FitSummary {
                current_fit: None,
                model: None,
                state: fail.map_or(FitState::None, |(_, m)| FitState::Failed(m.clone())),
            },
            Some((id, model, fp, rev)) => {
                let mut reasons = Vec::new();
                let moved = *rev != revision.get(&sample.id).copied();
                if moved && readings_fingerprint(conn, sample.id)? != *fp {
                    reasons.push(StaleReason::ReadingsChanged);
                }
                if joint.contains(id)
                    && super::conductivity::changed_since(conn, *id, sample.id)? == Some(true)
                {
                    reasons.push(StaleReason::ConductivityChanged);
                }
                if let Some((fail_id, message)) = fail
                    && fail_id > id
                {
                    reasons.push(StaleReason::RefitFailed(message.clone()));
                }
                FitSummary {
                    current_fit: Some(*id),
                    model: Some(model.clone()),
                    state: if reasons.is_empty() {
                        FitState::Current
                    } else {
                        FitState::Stale(reasons)
                    },
                }
            }
        };
        out.insert(sample.id, summary);
    }
    Ok(out)
}

/// The fingerprint of the readings a fit of this sample would use now.
///
/// # Errors
/// An SQLite error.
pub fn readings_fingerprint(conn: &Connection, sample_id: i64) -> Result<String> {
    let mut stmt = conn.prepare_cached(&format!(
        "SELECT r.id, r.h_cm, r.theta, r.weight FROM reading r
         WHERE r.sample_id = ?1 AND NOT {EXCLUDED}"
    ))?;
    let mut ids = Vec::new();
    let mut h = Vec::new();
    let mut theta = Vec::new();
    let mut weights = Vec::new();
    for row in stmt.query_map(params![sample_id], |r| {
        Ok((
            r.get::<_, i64>(0)?,
            r.get::<_, f64>(1)?,
            r.get::<_, f64>(2)?,
            r.get::<_, Option<f64>>(3)?,
        ))
    })? {
        let (id, hv, tv, w) = row?;
        ids.push(id);
        h.push(hv);
        theta.push(tv);
        weights.push(w);
    }
    let weights = weights
        .iter()
        .any(Option::is_some)
        .then(|| weights.iter().map(|w| w.unwrap_or(1.0)).collect::<Vec<_>>());
    Ok(fingerprint(&ids, &h, &theta, weights.as_deref()))
}

#[cfg(test)]
#[allow(clippy::float_cmp)]
mod tests {
    use super::*;

    #[test]
    fn fingerprint_ignores_order_and_sees_every_value() {
        let base = fingerprint(&[1, 2], &[10.0, 100.0], &[0.4, 0.3], None);
        assert_eq!(
            base,
            fingerprint(&[2, 1], &[100.0, 10.0], &[0.3, 0.4], None)
        );
        assert_ne!(
            base,
            fingerprint(&[1, 2], &[10.0, 100.0], &[0.4, 0.31], None)
        );
        assert_ne!(
            base,
            fingerprint(&[1, 3], &[10.0, 100.0], &[0.4, 0.3], None)
        );
        assert_ne!(base, fingerprint(&[1], &[10.0], &[0.4], None));
        assert_ne!(
            base,
            fingerprint(&[1, 2], &[10.0, 100.0], &[0.4, 0.3], Some(&[1.0, 2.0]))
        );
        assert_eq!(base.len(), 64);
    }

    /// A ranking as stored before AICc counted the error variance (no `n_criteria_params`).
    fn old_entry(model: &str, k: usize, sse: f64, n: usize) -> RankEntry {
        let (nf, kf) = (n as f64, k as f64);
        let old_aicc = nf * (sse / nf).ln() + 2.0 * kf + 2.0 * kf * (kf + 1.0) / (nf - kf - 1.0);
        let json = serde_json::json!({
            "model": model, "aicc": old_aicc, "delta_aicc": 0.0, "akaike_weight": 0.5,
            "sse": sse, "rmse": (sse / nf).sqrt(), "n_free_params": k, "parameters": [],
        });
        serde_json::from_value(json).expect("an old entry decodes")
    }

    #[test]
    fn rankings_stored_before_the_variance_was_counted_are_recounted() {
        let n = 9;
        // Counting k only, 5 parameters with SSE 0.0002 beat 4 with 0.0009 (AICc -66.4 vs
        // -64.9); counting K = k + 1 the fifth parameter costs more (-42.4 vs -52.9).
        let mut ranking = Ranking {
            ranked: vec![
                old_entry("durner", 7, 1e-7, n),
                old_entry("fredlund-xing", 5, 0.0002, n),
                old_entry("van-genuchten", 4, 0.0009, n),
                old_entry("campbell", 3, 0.004, n),
            ],
            skipped: Vec::new(),
        };
        assert!(ranking.recount(n));
        let order: Vec<&str> = ranking.ranked.iter().map(|e| e.model.as_str()).collect();
        assert_eq!(order, ["van-genuchten", "campbell", "fredlund-xing"]);
        // Durner (K = 8) needs n > 9: with 9 readings it has no AICc any more.
        assert_eq!(ranking.skipped[0].model, "durner");
        assert!(
            ranking.skipped[0].reason.contains("auto needs at least 10"),
            "{:?}",
            ranking.skipped
        );
        let nf = n as f64;
        let want = nf * (0.0009 / nf).ln() + 10.0 + 2.0 * 5.0 * 6.0 / (nf - 6.0);
        assert!((ranking.ranked[0].aicc.expect("aicc") - want).abs() < 1e-12);
        assert_eq!(ranking.ranked[0].delta_aicc, 0.0);
        let total: f64 = ranking.ranked.iter().map(|e| e.akaike_weight).sum();
        assert!((total - 1.0).abs() < 1e-12);
        assert!(
            ranking
                .ranked
                .iter()
                .all(|e| e.n_criteria_params == e.n_free_params + 1)
        );
        // A second reading changes nothing.
        let again = ranking.clone();
        assert!(!ranking.recount(n));
        assert_eq!(ranking, again);
    }
}
