//! Field pairing in the campaign: the logger records of each site and depth paired into the
//! readings of a field-pairing sample of the layer that holds the depth.
//!
//! The pairing itself is [`crate::field::pairing`]; this module loads the series (without
//! the records that carry an accepted flag or a suggestion not yet dismissed), finds or makes
//! the layer and sample, and replaces the sample's readings, all in one transaction.

use std::collections::BTreeMap;
use std::fmt::{self, Write as _};

use chrono::{DateTime, Utc};
use rusqlite::{Connection, params};

use super::logger::{self, SensorRef};
use super::readings::ReadingInserter;
use super::{Campaign, StoreError, flags, layers, samples, sites};
use crate::field::pairing::{PairingSettings, Point, pair_depth};
use crate::field::time::span_text;
use crate::model::domain::{
    Branch, FlagTarget, Layer, LayerRef, Method, Provenance, Reading, Sample, SampleKind,
    SensorKind, Uid,
};
use crate::model::number::{plural, significant};
use crate::model::text::shown;

/// The method written on paired readings.
pub const METHOD: &str = "field pairing";

/// Depth of a new layer below a sensor when no layer of the site lies deeper, cm.
pub const NEW_LAYER_BELOW_CM: f64 = 10.0;

/// Which depths to pair and how.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct PairOptions {
    /// Only this site (code).
    pub site: Option<String>,
    /// Only this depth, cm.
    pub depth_cm: Option<f64>,
    /// Window, thinning and smoothing.
    pub settings: PairingSettings,
}

/// What pairing one site and depth did.
#[derive(Debug, Clone, PartialEq)]
pub struct DepthPairing {
    /// Site code.
    pub site: String,
    /// Sensor depth, cm.
    pub depth_cm: f64,
    /// The field-pairing sample that holds the readings.
    pub sample: String,
    /// The layer that holds the depth.
    pub layer: LayerRef,
    /// The layer was made for this pairing.
    pub layer_created: bool,
    /// The sample was made for this pairing.
    pub sample_created: bool,
    /// Sensor ids of the tensiometers and water-content sensors.
    pub sensors: (Vec<String>, Vec<String>),
    /// Records used: tensiometer, water content.
    pub records: (u64, u64),
    /// Records left out for flags.
    pub left_out: u64,
    /// Pairs by branch: drying, wetting, unknown.
    pub pairs: [u64; 3],
    /// Readings written.
    pub readings: u64,
    /// Readings of the earlier pairing that were replaced.
    pub replaced: u64,
    /// Replaced readings kept because flags point at them (flags are never deleted), now left
    /// out of fits by an accepted "superseded" flag.
    pub flagged_kept: u64,
}

/// A site and depth that was not paired, and why.
#[derive(Debug, Clone, PartialEq)]
pub struct SkippedDepth {
    /// Site code.
    pub site: String,
    /// Depth, cm.
    pub depth_cm: f64,
    /// Why.
    pub reason: String,
}

/// What a pairing command did.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct PairSummary {
    /// The window used, seconds.
    pub window_s: i64,
    /// Depths paired.
    pub paired: Vec<DepthPairing>,
    /// Depths left as they were.
    pub skipped: Vec<SkippedDepth>,
}

/// Why pairing did not happen (nothing was written).
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum PairError {
    /// `--site` names a site the campaign does not hold.
    #[error("no site {0:?} in the campaign; `porewise list DB` shows the codes")]
    NoSite(String),
    /// No depth has both kinds of sensor (within the filters).
    #[error("nothing to pair: {0}")]
    NothingToPair(String),
    /// The sample code for a depth is taken by a sample that is not this depth's pairing.
    #[error(
        "sample {code:?} already exists as {kind} under layer {layer}, expected the field \
         pairing of {site} at {depth} cm; rename that sample first"
    )]
    SampleTaken {
        /// The code.
        code: String,
        /// Its kind.
        kind: SampleKind,
        /// Its layer.
        layer: LayerRef,
        /// The site paired.
        site: String,
        /// The depth paired, cm.
        depth: String,
    },
    /// The campaign file refused a read or write.
    #[error(transparent)]
    Store(#[from] StoreError),
}

impl From<rusqlite::Error> for PairError {
    fn from(e: rusqlite::Error) -> Self {
        PairError::Store(e.into())
    }
}

fn cm(v: f64) -> String {
    significant(v, 6).unwrap_or_default()
}

/// The sample code of the field pairing of a site at a depth: `<SITE>-field-<depth>cm`.
pub fn sample_code(site: &str, depth_cm: f64) -> String {
    format!("{site}-field-{}cm", cm(depth_cm))
}

/// Pair every site and depth that `options` select, replacing earlier pairings, in one
/// transaction.
///
/// # Errors
/// [`PairError::NoSite`], [`PairError::NothingToPair`], [`PairError::SampleTaken`] or a store
/// error; nothing was written then.
pub fn pair_campaign(
    campaign: &mut Campaign,
    options: &PairOptions,
) -> Result<PairSummary, PairError> {
    let tx = campaign.transaction()?;
    let site_id = match &options.site {
        Some(code) => Some(
            sites::find(&tx, code)?
                .ok_or_else(|| PairError::NoSite(code.clone()))?
                .id,
        ),
        None => None,
    };
    let all = logger::sensors(&tx, site_id)?;
    // Sensors by site and depth (depth as its bits: equal depths are written alike).
    let mut depths: BTreeMap<(String, u64), (i64, f64, Vec<SensorRef>)> = BTreeMap::new();
    for s in &all {
        if options
            .depth_cm
            .is_some_and(|d| (d - s.depth_cm).abs() > 1e-9)
        {
            continue;
        }
        depths
            .entry((s.site.clone(), (s.depth_cm + 0.0).to_bits()))
            .or_insert_with(|| (s.site_id, s.depth_cm, Vec::new()))
            .2
            .push(s.clone());
    }
    let mut summary = PairSummary {
        window_s: options.settings.window_s,
        ..PairSummary::default()
    };
    for ((site, _), (site_id, depth_cm, sensors)) in depths {
        let of = |k: SensorKind| -> Vec<&SensorRef> {
            sensors.iter().filter(|s| s.sensor == k).collect()
        };
        let (tens, water) = (of(SensorKind::Tensiometer), of(SensorKind::WaterContent));
        if tens.is_empty() || water.is_empty() {
            let missing = if tens.is_empty() {
                "no tensiometer"
            } else {
                "no water-content sensor"
            };
            summary.skipped.push(SkippedDepth {
                site,
                depth_cm,
                reason: format!("{missing} at this depth"),
            });
            continue;
        }
        match pair_one(&tx, &site, site_id, depth_cm, &tens, &water, options)? {
            Ok(done) => summary.paired.push(done),
            Err(reason) => summary.skipped.push(SkippedDepth {
                site,
                depth_cm,
                reason,
            }),
        }
    }
    if summary.paired.is_empty() {
        let mut within = String::new();
        if let Some(s) = &options.site {
            let _ = write!(within, " at site {s:?}");
        }
        if let Some(d) = options.depth_cm {
            let _ = write!(within, " at {} cm", cm(d));
        }
        let mut text = if summary.skipped.is_empty() {
            format!("no logger records{within}")
        } else {
            format!("no depth{within} gave pairs")
        };
        for s in &summary.skipped {
            let _ = write!(text, "; {} {} cm: {}", s.site, cm(s.depth_cm), s.reason);
        }
        if all.is_empty() {
            text.push_str("; import logger files with `porewise import logger`");
        }
        return Err(PairError::NothingToPair(text));
    }
    tx.commit()?;
    Ok(summary)
}

/// Load a list of sensors' usable series; returns them, the records used and left out.
fn load(
    conn: &Connection,
    sensors: &[&SensorRef],
) -> Result<(Vec<Vec<Point>>, u64, u64), PairError> {
    let (mut out, mut used, mut left_out) = (Vec::new(), 0u64, 0u64);
    for s in sensors {
        let (points, left) = logger::usable_series(conn, s.site_id, &s.sensor_id)?;
        used += points.len() as u64;
        left_out += left;
        out.push(
            points
                .into_iter()
                .map(|(time, value)| Point { time, value })
                .collect(),
        );
    }
    Ok((out, used, left_out))
}

/// Pair one site and depth; `Ok(Err(reason))` when it gives nothing to store.
fn pair_one(
    conn: &Connection,
    site: &str,
    site_id: i64,
    depth_cm: f64,
    tens: &[&SensorRef],
    water: &[&SensorRef],
    options: &PairOptions,
) -> Result<Result<DepthPairing, String>, PairError> {
    let (t_series, t_used, t_left) = load(conn, tens)?;
    let (w_series, w_used, w_left) = load(conn, water)?;
    let result = pair_depth(&t_series, &w_series, &options.settings);
    if result.points.is_empty() {
        return Ok(Err(format!(
            "no tensiometer record has a water-content record within {} ({} and {} usable \
             records, {} left out for flags)",
            span_text(options.settings.window_s),
            t_used,
            w_used,
            t_left + w_left
        )));
    }
    let (layer, layer_created) = layer_for(conn, site, site_id, depth_cm)?;
    let code = sample_code(site, depth_cm);
    let (sample_id, sample_created) = if let Some(old) = samples::find(conn, &code)? {
        if old.sample.kind != SampleKind::FieldPairing || !old.sample.layer.same_as(&layer) {
            return Err(PairError::SampleTaken {
                code,
                kind: old.sample.kind,
                layer: old.sample.layer,
                site: site.to_string(),
                depth: cm(depth_cm),
            });
        }
        (old.id, false)
    } else {
        let ids = |list: &[&SensorRef]| {
            list.iter()
                .map(|s| s.sensor_id.as_str())
                .collect::<Vec<_>>()
                .join(", ")
        };
        let sample = Sample {
            layer: layer.clone(),
            code: code.clone(),
            kind: SampleKind::FieldPairing,
            collected_on: None,
            bulk_density_g_cm3: None,
            notes: Some(format!(
                "in-situ pairing at {} cm: tensiometer {} with water content {}",
                cm(depth_cm),
                ids(tens),
                ids(water)
            )),
            uid: Uid::random(),
        };
        let layer_id = layers::find(conn, &layer)?
            .ok_or_else(|| StoreError::Corrupt(format!("layer {layer} not found")))?
            .id;
        (samples::insert(conn, layer_id, &sample, None)?, true)
    };
    // Flags are never deleted: a replaced reading that carries one is kept, retired by an
    // accepted "superseded" flag (left out of fits); the others are deleted.
    let flagged: Vec<i64> = conn
        .prepare_cached(
            "SELECT DISTINCT r.id FROM reading r JOIN flag f ON f.reading_id = r.id
             WHERE r.sample_id = ?1 ORDER BY r.id",
        )?
        .query_map(params![sample_id], |r| r.get(0))?
        .collect::<rusqlite::Result<_>>()?;
    let reason = format!(
        "superseded: sample paired again on {}",
        Utc::now().format("%Y-%m-%d %H:%M UTC")
    );
    for &id in &flagged {
        flags::retire(conn, FlagTarget::Reading(id), &reason)?;
    }
    let flagged_kept = flagged.len() as u64;
    let replaced = conn
        .prepare_cached(
            "DELETE FROM reading WHERE sample_id = ?1
             AND NOT EXISTS (SELECT 1 FROM flag f WHERE f.reading_id = reading.id)",
        )?
        .execute(params![sample_id])? as u64
        + flagged.len() as u64;
    let mut inserter = ReadingInserter::new(conn)?;
    for p in &result.points {
        let day = |t: i64| {
            DateTime::from_timestamp(t, 0).map_or_else(String::new, |d| {
                d.date_naive().format("%Y-%m-%d").to_string()
            })
        };
        inserter.insert(
            sample_id,
            &Reading {
                sample: code.clone(),
                h_cm: p.h_cm,
                theta: p.theta,
                method: Some(Method(METHOD.to_string())),
                measured_on: DateTime::from_timestamp(p.median_time, 0).map(|d| d.date_naive()),
                branch: p.branch,
                weight: None,
                notes: Some(format!(
                    "median of {} from {} to {}",
                    plural(p.pairs as u64, "pair"),
                    day(p.first),
                    day(p.last)
                )),
                provenance: Provenance {
                    batch: None,
                    line: 0,
                },
                uid: Uid::random(),
            },
        )?;
    }
    let count = |b: Branch| result.count(b) as u64;
    Ok(Ok(DepthPairing {
        site: site.to_string(),
        depth_cm,
        sample: code,
        layer,
        layer_created,
        sample_created,
        sensors: (
            tens.iter().map(|s| s.sensor_id.clone()).collect(),
            water.iter().map(|s| s.sensor_id.clone()).collect(),
        ),
        records: (t_used, w_used),
        left_out: t_left + w_left,
        pairs: [
            count(Branch::Drying),
            count(Branch::Wetting),
            count(Branch::Unknown),
        ],
        readings: result.points.len() as u64,
        replaced,
        flagged_kept,
    }))
}

/// The layer of a site that holds `depth_cm` (top <= depth < bottom, or the bottom of the
/// deepest layer), made when there is none: from the bottom of the layer above (or the
/// surface) to the top of the layer below (or [`NEW_LAYER_BELOW_CM`] below the depth).
fn layer_for(
    conn: &Connection,
    site: &str,
    site_id: i64,
    depth_cm: f64,
) -> Result<(LayerRef, bool), PairError> {
    let list = layers::list(conn, Some(site))?;
    let refs: Vec<&LayerRef> = list.iter().map(|l| &l.stored.layer.at).collect();
    if let Some(l) = refs
        .iter()
        .find(|l| l.top_cm <= depth_cm && depth_cm < l.bottom_cm)
        .or_else(|| {
            refs.iter()
                .filter(|l| (l.bottom_cm - depth_cm).abs() < 1e-9)
                .max_by(|a, b| a.top_cm.total_cmp(&b.top_cm))
        })
    {
        return Ok(((*l).clone(), false));
    }
    let top = refs
        .iter()
        .map(|l| l.bottom_cm)
        .filter(|&b| b <= depth_cm)
        .fold(0.0f64, f64::max);
    let bottom = refs
        .iter()
        .map(|l| l.top_cm)
        .filter(|&t| t > depth_cm)
        .fold(depth_cm + NEW_LAYER_BELOW_CM, f64::min);
    let at = LayerRef {
        site: site.to_string(),
        top_cm: top,
        bottom_cm: bottom,
    };
    layers::insert(conn, site_id, &Layer::bare(at.clone()), None)?;
    Ok((at, true))
}

impl fmt::Display for PairSummary {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for p in &self.paired {
            let mut made = Vec::new();
            if p.layer_created {
                made.push("new layer");
            }
            if p.sample_created {
                made.push("new sample");
            }
            let made = if made.is_empty() {
                String::new()
            } else {
                format!(", {}", made.join(", "))
            };
            writeln!(
                f,
                "{} {} cm -> {} (layer {}{made}): {} tensiometer and {} water-content records \
                 ({} left out for flags); {} within {} ({} drying, {} wetting, {} unknown) -> \
                 {} (replaced {})",
                shown(&p.site),
                cm(p.depth_cm),
                shown(&p.sample),
                shown(&p.layer.to_string()),
                p.records.0,
                p.records.1,
                p.left_out,
                plural(p.pairs.iter().sum(), "pair"),
                span_text(self.window_s),
                p.pairs[0],
                p.pairs[1],
                p.pairs[2],
                plural(p.readings, "reading"),
                p.replaced
            )?;
            if p.flagged_kept > 0 {
                writeln!(
                    f,
                    "  {} kept, as flags point at them, and left out of fits as superseded",
                    plural(p.flagged_kept, "replaced reading")
                )?;
            }
        }
        for s in &self.skipped {
            writeln!(
                f,
                "{} {} cm: not paired, {}",
                shown(&s.site),
                cm(s.depth_cm),
                s.reason
            )?;
        }
        write!(f, "paired {}", plural(self.paired.len() as u64, "depth"))
    }
}
