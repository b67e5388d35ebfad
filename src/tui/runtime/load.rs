//! Reading what the panes show from the campaign file: cheap queries only, one sample at a
//! time, never every reading.

use std::collections::HashMap;

use rusqlite::Connection;

use crate::analysis::advise::{AdviseOptions, PoolCache, advise_sample};
use crate::analysis::{BetweenCores, derive_fit, profiles_pooled, sample_fits};
use crate::field::time::parse_instant;
use crate::model::domain::{FlagStatus, FlagTarget};
use crate::model::domain::{SampleKind, SensorKind};
use crate::store::fits::{self, FitState, Selection};
use crate::store::flags::{self, FlagFilter, Subject};
use crate::store::outline::{self, outline};
use crate::store::{CampaignSettings, Result, StoreError, logger, readings};

use super::super::app::series::{SensorSeries, Thinner};
use super::super::app::{
    DepthData, FlagMark, ReviewEpisode, ReviewItem, SampleDetail, SampleParts, SensorInfo,
    SeriesData, SeriesRequest, Suspect, Tree,
};

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

/// One sample's panes, with the fit card's advice (the pooled noise it may need is kept in
/// `pool` between loads).
///
/// # Errors
/// An unknown sample id, an SQLite error or a stored fit that does not decode.
pub fn sample(
    conn: &Connection,
    settings: &CampaignSettings,
    sample_id: i64,
    pool: &mut PoolCache,
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
    let derived = fit.as_ref().and_then(|f| {
        derive_fit(
            f.report.as_ref()?,
            settings,
            layer.ks_cm_per_day,
            f.conductivity,
        )
    });
    let derived = crate::analysis::joint::with_joint(conn, fit.as_ref(), derived, settings)?;
    let advice = match &fit {
        Some(f) if info.kind == SampleKind::LabCore => advise_sample(
            conn,
            settings,
            f,
            &readings,
            pool,
            &AdviseOptions::default(),
        )?,
        _ => None,
    };
    let conductivity = crate::store::conductivity::of_sample(conn, sample_id)?;
    let measured_ks = crate::store::conductivity::ks_of_sample(conn, sample_id)?;
    let joint = match &fit {
        Some(f) => crate::store::conductivity::joint_of(conn, f.id)?,
        None => None,
    };
    let k_model = derived.as_ref().and_then(|d| d.conductivity_model);
    let mut detail = SampleDetail::from_parts(&SampleParts {
        info: &info,
        layer: &layer,
        state,
        readings: &readings,
        flags: &flags,
        fit: fit.as_ref(),
        derived,
        fc_kpa: settings.fc_kpa,
        pwp_kpa: settings.pwp_kpa,
        advice,
    });
    let curve = fit
        .as_ref()
        .and_then(|f| f.report.as_ref())
        .and_then(crate::analysis::water::curve_of);
    detail.conductivity = crate::tui::app::conductivity::ConductivityPanel::new(
        &conductivity,
        measured_ks,
        curve.as_ref(),
        k_model,
        joint.as_ref(),
        [crate::tui::app::PLOT_X_MIN, detail.x_max],
    );
    Ok(detail)
}

/// One site's depth view; its layer intervals with the campaign's between-core variance
/// `pooled` (from [`crate::analysis::between_cores`]).
///
/// # Errors
/// An SQLite error or a stored fit that does not decode.
pub fn depth(
    conn: &Connection,
    settings: &CampaignSettings,
    site: &str,
    root_zone_cm: f64,
    pooled: Option<BetweenCores>,
) -> Result<DepthData> {
    let selection = Selection {
        site: Some(site.to_string()),
        ..Selection::default()
    };
    let fits = sample_fits(conn, settings, &selection)?;
    let profile = profiles_pooled(conn, settings, root_zone_cm, Some(site), pooled)?;
    let name = crate::store::sites::find(conn, site)?.and_then(|s| s.site.name);
    Ok(DepthData::from_parts(
        site,
        name,
        &fits,
        profile.first(),
        root_zone_cm,
    ))
}

/// The review queue (open suggestions on readings and logger records) in episodes
/// (`analysis::episodes`), worst first.
///
/// # Errors
/// An SQLite error.
pub fn review_episodes(conn: &Connection) -> Result<Vec<ReviewEpisode>> {
    let rows = flags::queue(conn, &FlagFilter::default())?;
    Ok(crate::analysis::episodes::group(conn, rows)?
        .into_iter()
        .filter_map(|e| {
            let items: Vec<ReviewItem> = e.rows.into_iter().filter_map(review_item).collect();
            (!items.is_empty()).then_some(ReviewEpisode { items })
        })
        .collect())
}

/// A queue row as the review screen shows it (`None` for a record the screen cannot read).
fn review_item(row: flags::FlagRow) -> Option<ReviewItem> {
    let suspect = match row.subject {
        Subject::Reading {
            reading_id,
            sample_id,
            sample,
            h_cm,
            theta,
            ..
        } => Suspect::Reading {
            reading_id,
            sample_id,
            sample,
            h_cm,
            theta,
        },
        Subject::LoggerRecord {
            record_id,
            site,
            depth_cm,
            sensor,
            sensor_id,
            time,
            value,
        } => Suspect::Record {
            record_id,
            site,
            depth_cm,
            kind: sensor.parse().ok()?,
            sensor_id,
            time: parse_instant(&time, Some(0)).ok()?,
            value,
        },
        // The checks raise no suggestion on conductivity readings; the review screen shows
        // retention readings and logger records.
        Subject::ConductivityReading { .. } => return None,
    };
    Some(ReviewItem {
        flag_id: row.stored.id,
        suspect,
        reason: row.stored.flag.reason,
        score: row.stored.flag.score,
    })
}

/// Every logger sensor of the campaign with its first and last record and its flagged
/// records: one index seek per sensor and end, whatever the series' length.
///
/// # Errors
/// An SQLite error.
pub fn sensors(conn: &Connection) -> Result<Vec<SensorInfo>> {
    let flagged = logger::flagged_by_sensor(conn)?;
    let mut out = Vec::new();
    for s in logger::sensors(conn, None)? {
        let Some((first, last)) = logger::span(conn, s.site_id, &s.sensor_id)? else {
            continue;
        };
        out.push(SensorInfo {
            flagged: flagged
                .get(&(s.site_id, s.sensor_id.clone()))
                .copied()
                .unwrap_or(0),
            site: s.site,
            sensor_id: s.sensor_id,
            kind: s.sensor,
            depth_cm: s.depth_cm,
            first,
            last,
        });
    }
    Ok(out)
}

/// The series of one depth in a window: the asked-for sensor and its partner of the other
/// kind at the same depth, each streamed through a [`Thinner`] (memory stays flat however
/// many records the window holds).
///
/// # Errors
/// An unknown site, or an SQLite error.
pub fn series(conn: &Connection, request: &SeriesRequest) -> Result<SeriesData> {
    let Some(site) = crate::store::sites::find(conn, &request.site)? else {
        return Err(StoreError::Unknown {
            what: "site",
            code: request.site.clone(),
        });
    };
    let at_depth: Vec<_> = logger::sensors(conn, Some(site.id))?
        .into_iter()
        .filter(|s| (s.depth_cm - request.depth_cm).abs() < 1e-9)
        .collect();
    let pick = |kind: SensorKind| {
        at_depth
            .iter()
            .find(|s| s.sensor == kind && s.sensor_id == request.sensor_id)
            .or_else(|| at_depth.iter().find(|s| s.sensor == kind))
    };
    let plotted: Vec<_> = [SensorKind::Tensiometer, SensorKind::WaterContent]
        .into_iter()
        .map(pick)
        .collect();
    let window = if let Some(w) = request.window {
        w
    } else {
        let mut span: Option<(i64, i64)> = None;
        for s in plotted.iter().flatten() {
            if let Some((a, b)) = logger::span(conn, site.id, &s.sensor_id)? {
                span = Some(span.map_or((a, b), |(x, y)| (x.min(a), y.max(b))));
            }
        }
        span.unwrap_or((0, 0))
    };
    let mut out = Vec::new();
    for s in plotted {
        let Some(s) = s else {
            out.push(None);
            continue;
        };
        let mark_time = request
            .mark
            .as_ref()
            .filter(|(id, _)| *id == s.sensor_id)
            .map(|(_, t)| *t);
        let mut mark = None;
        let mut thinner = Thinner::new(window, request.columns);
        logger::each_between(
            conn,
            site.id,
            &s.sensor_id,
            window.0,
            window.1,
            |t, v, f| {
                if Some(t) == mark_time {
                    mark = Some((t, v));
                }
                thinner.push(t, v, f > 0);
            },
        )?;
        let (buckets, records, flagged) = thinner.finish();
        out.push(Some(SensorSeries {
            sensor_id: s.sensor_id.clone(),
            kind: s.sensor,
            records,
            flagged,
            buckets,
            mark,
        }));
    }
    let water = out.pop().flatten();
    let suction = out.pop().flatten();
    Ok(SeriesData {
        request: request.clone(),
        window,
        columns: request.columns.max(1),
        suction,
        water,
    })
}

#[cfg(test)]
mod tests {
    #![allow(clippy::float_cmp)]

    use super::*;
    use crate::store::Campaign;

    #[test]
    fn a_depth_series_brings_its_partner_thinned_with_the_record_marked() {
        let c = Campaign::in_memory("t", 33.0, 1500.0).expect("campaign");
        c.connection()
            .execute_batch(
                "INSERT INTO site (id, uid, code) VALUES (1, '00000000-0000-4000-8000-000000000001', 'S');
                 INSERT INTO logger_sensor (id, site_id, sensor_id, depth_cm, sensor) VALUES
                     (1, 1, 'T30', 30, 'tensiometer'), (2, 1, 'W30', 30, 'water_content'),
                     (3, 1, 'W60', 60, 'water_content');
                 INSERT INTO logger_record (id, logger_sensor_id, time_s, value) VALUES
                     (1, 1, 0, 10), (2, 1, 3600, 900), (3, 1, 7200, 12), (4, 2, 3600, 0.3),
                     (5, 3, 3600, 0.2);
                 INSERT INTO flag (logger_record_id, reason, origin, status, created_at)
                     VALUES (2, 'spike', 'auto', 'suggested', '2026-01-01T00:00:00Z');",
            )
            .expect("fixture");
        let conn = c.connection();
        let request = SeriesRequest {
            site: "S".into(),
            depth_cm: 30.0,
            sensor_id: "W30".into(),
            window: None,
            columns: 3,
            mark: Some(("T30".into(), 3600)),
        };
        let data = series(conn, &request).expect("series");
        assert_eq!(data.window, (0, 7200));
        let suction = data.suction.expect("the tensiometer at 30 cm");
        assert_eq!(suction.sensor_id, "T30");
        assert_eq!((suction.records, suction.flagged), (3, 1));
        assert_eq!(suction.mark, Some((3600, 900.0)));
        assert_eq!(suction.buckets.len(), 3);
        assert_eq!(suction.buckets[1].flagged.map(|e| e.max), Some(900.0));
        assert!(
            suction.buckets[1].values.is_none(),
            "flagged records stay off the line"
        );
        let water = data.water.expect("the probe asked for");
        assert_eq!((water.sensor_id.as_str(), water.mark), ("W30", None));
        let listed = sensors(conn).expect("sensors");
        let ids: Vec<(&str, usize)> = listed
            .iter()
            .map(|s| (s.sensor_id.as_str(), s.flagged))
            .collect();
        assert_eq!(ids, [("T30", 1), ("W30", 0), ("W60", 0)]);
        let unknown = SeriesRequest {
            site: "X".into(),
            ..request
        };
        assert!(series(conn, &unknown).is_err());
    }
}
