//! Reading what the panes show from the campaign file: cheap queries only, one sample at a
//! time, never every reading.

use std::collections::HashMap;

use rusqlite::Connection;

use crate::analysis::{derive_fit, profiles, sample_fits};
use crate::model::domain::{FlagStatus, FlagTarget};
use crate::store::fits::{self, FitState, Selection};
use crate::store::flags::{self, FlagFilter, Subject};
use crate::store::outline::{self, outline};
use crate::store::{CampaignSettings, Result, StoreError, readings};

use super::super::app::{DepthData, FlagMark, ReviewItem, SampleDetail, SampleParts, Tree};

/// The tree: outline, fit standings and flag counts.
///
/// # Errors
/// An SQLite error.
pub fn tree(conn: &Connection) -> Result<Tree> {
    let outline = outline(conn)?;
    let summaries = fits::summaries(conn, &outline.samples)?;
    let flags: HashMap<i64, usize> = flags::counts_by_sample(conn)?
        .into_iter()
        .map(|(id, c)| (id, c.open + c.excluded))
        .collect();
    Ok(Tree::from_outline(&outline, &summaries, &flags))
}

/// The flag each reading of a sample shows: one that excludes it, else an open suggestion,
/// else the latest decision (kept).
fn reading_flags(conn: &Connection, sample: &str) -> Result<HashMap<i64, FlagMark>> {
    let rows = flags::list(
        conn,
        &FlagFilter {
            sample: Some(sample.to_string()),
            ..FlagFilter::default()
        },
    )?;
    let rank = |m: &FlagMark| {
        if m.excludes {
            2
        } else {
            i32::from(m.status == FlagStatus::Suggested.as_str())
        }
    };
    let mut out: HashMap<i64, FlagMark> = HashMap::new();
    for row in rows {
        let FlagTarget::Reading(reading) = row.stored.flag.target else {
            continue;
        };
        let mark = FlagMark {
            id: row.stored.id,
            status: row.stored.flag.status.as_str().to_string(),
            origin: row.stored.flag.origin.as_str().to_string(),
            reason: row.stored.flag.reason.clone(),
            excludes: row.stored.excludes(),
        };
        match out.get(&reading) {
            Some(old) if rank(old) > rank(&mark) => {}
            _ => {
                out.insert(reading, mark);
            }
        }
    }
    Ok(out)
}

/// One sample's panes.
///
/// # Errors
/// An unknown sample id, an SQLite error or a stored fit that does not decode.
pub fn sample(
    conn: &Connection,
    settings: &CampaignSettings,
    sample_id: i64,
) -> Result<SampleDetail> {
    let Some((info, layer)) = outline::sample(conn, sample_id)? else {
        return Err(StoreError::Unknown {
            what: "sample",
            code: format!("id {sample_id}"),
        });
    };
    let state = fits::summaries(conn, std::slice::from_ref(&info))?
        .remove(&info.id)
        .map_or(FitState::None, |s| s.state);
    let readings = readings::of_sample(conn, sample_id)?;
    let flags = reading_flags(conn, &info.code)?;
    let fit = fits::current(conn, sample_id)?;
    let derived = fit
        .as_ref()
        .and_then(|f| f.report.as_ref())
        .and_then(|r| derive_fit(r, settings, layer.ks_cm_per_day));
    Ok(SampleDetail::from_parts(&SampleParts {
        info: &info,
        layer: &layer,
        state,
        readings: &readings,
        flags: &flags,
        fit: fit.as_ref(),
        derived,
        fc_kpa: settings.fc_kpa,
        pwp_kpa: settings.pwp_kpa,
    }))
}

/// One site's depth view.
///
/// # Errors
/// An SQLite error or a stored fit that does not decode.
pub fn depth(
    conn: &Connection,
    settings: &CampaignSettings,
    site: &str,
    root_zone_cm: f64,
) -> Result<DepthData> {
    let selection = Selection {
        site: Some(site.to_string()),
        ..Selection::default()
    };
    let fits = sample_fits(conn, settings, &selection)?;
    let profile = profiles(conn, settings, root_zone_cm, Some(site))?;
    let name = crate::store::sites::find(conn, site)?.and_then(|s| s.site.name);
    Ok(DepthData::from_parts(
        site,
        name,
        &fits,
        profile.first(),
        root_zone_cm,
    ))
}

/// The review queue: open suggestions on readings, worst first (logger records have their own
/// pane, to come).
///
/// # Errors
/// An SQLite error.
pub fn review(conn: &Connection) -> Result<Vec<ReviewItem>> {
    Ok(flags::queue(conn, &FlagFilter::default())?
        .into_iter()
        .filter_map(|row| match row.subject {
            Subject::Reading {
                reading_id,
                sample_id,
                sample,
                h_cm,
                theta,
                ..
            } => Some(ReviewItem {
                flag_id: row.stored.id,
                reading_id,
                sample_id,
                sample,
                h_cm,
                theta,
                reason: row.stored.flag.reason,
                score: row.stored.flag.score,
            }),
            Subject::LoggerRecord { .. } => None,
        })
        .collect())
}
