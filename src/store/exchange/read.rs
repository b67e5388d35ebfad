//! Reading a campaign's shared rows out of a SQLite file, local ids translated into uids.

use std::collections::{HashMap, HashSet};

use rusqlite::{Connection, Row};

use super::{
    BatchRow, CampaignRow, CampaignRows, ConductivityRow, FitRow, FlagEventRow, FlagRow,
    FlagTarget, LayerRow, LoggerKey, LoggerPoint, LoggerSeries, ReadingRow, SampleRow, SiteRow,
    conductivity_key, readings_key,
};
use crate::store::conductivity::Where;
use crate::store::logger::time_text;
use crate::store::{Result, StoreError};

/// What a fingerprint is replaced by when the readings it was taken of changed since: no
/// SHA-256 is equal to it, so a fit recorded with it is stale in any file.
pub(super) const STALE: &str = "stale";

/// Local id -> uid of one table.
type Uids = HashMap<i64, String>;

/// Read every shared row of the campaign on `conn`, in one read transaction (a savepoint, so
/// it also works inside a transaction the caller holds).
///
/// # Errors
/// An SQLite error, or a reference to a row that is not there (a damaged file).
pub fn read(conn: &Connection) -> Result<CampaignRows> {
    conn.execute_batch("SAVEPOINT exchange_read")?;
    let out = read_inside(conn);
    // A read-only savepoint: releasing it ends the read transaction when it began one.
    let released = conn.execute_batch("RELEASE exchange_read");
    let rows = out?;
    released?;
    Ok(rows)
}

fn uids(conn: &Connection, table: &str) -> Result<Uids> {
    let mut stmt = conn.prepare(&format!("SELECT id, uid FROM {table}"))?;
    let map = stmt
        .query_map([], |r| Ok((r.get(0)?, r.get(1)?)))?
        .collect::<rusqlite::Result<_>>()?;
    Ok(map)
}

fn lookup(map: &Uids, id: Option<i64>, what: &str) -> Result<Option<String>> {
    id.map(|id| {
        map.get(&id).cloned().ok_or_else(|| {
            StoreError::Corrupt(format!("a row names {what} {id}, which is not there"))
        })
    })
    .transpose()
}

fn must(map: &Uids, id: i64, what: &str) -> Result<String> {
    lookup(map, Some(id), what).map(Option::unwrap_or_default)
}

#[allow(clippy::too_many_lines)]
fn read_inside(conn: &Connection) -> Result<CampaignRows> {
    let campaign = conn.query_row(
        "SELECT uid, name, description, fc_kpa, pwp_kpa, created_at, texture_prior_max_readings
         FROM campaign WHERE id = 1",
        [],
        |r| {
            Ok(CampaignRow {
                uid: r.get(0)?,
                name: r.get(1)?,
                description: r.get(2)?,
                fc_kpa: r.get(3)?,
                pwp_kpa: r.get(4)?,
                created_at: r.get(5)?,
                texture_prior_max_readings: r.get(6)?,
            })
        },
    )?;
    let batch_uids = uids(conn, "import_batch")?;
    let site_uids = uids(conn, "site")?;
    let layer_uids = uids(conn, "layer")?;
    let sample_uids = uids(conn, "sample")?;
    let reading_uids = uids(conn, "reading")?;
    let cond_uids = uids(conn, "conductivity_reading")?;
    let flag_uids = uids(conn, "flag")?;

    let batches = collect(
        conn,
        "SELECT uid, file_name, sha256, kind, rows, forced, imported_at FROM import_batch
         ORDER BY uid",
        |r| {
            Ok(BatchRow {
                uid: r.get(0)?,
                file_name: r.get(1)?,
                sha256: r.get(2)?,
                kind: r.get(3)?,
                rows: r.get(4)?,
                forced: r.get::<_, i64>(5)? != 0,
                imported_at: r.get(6)?,
            })
        },
    )?;

    let mut sites = Vec::new();
    for row in collect(
        conn,
        "SELECT uid, code, name, latitude, longitude, elevation_m, notes, batch_id FROM site
         ORDER BY uid",
        |r| {
            Ok((
                SiteRow {
                    uid: r.get(0)?,
                    code: r.get(1)?,
                    name: r.get(2)?,
                    latitude: r.get(3)?,
                    longitude: r.get(4)?,
                    elevation_m: r.get(5)?,
                    notes: r.get(6)?,
                    batch_uid: None,
                },
                r.get::<_, Option<i64>>(7)?,
            ))
        },
    )? {
        let (mut site, batch) = row;
        site.batch_uid = lookup(&batch_uids, batch, "import batch")?;
        sites.push(site);
    }

    let mut layers = Vec::new();
    for (mut layer, site, batch) in collect(
        conn,
        "SELECT uid, site_id, top_cm, bottom_cm, horizon, sand_pct, silt_pct, clay_pct,
                organic_carbon_pct, bulk_density_g_cm3, ks_cm_per_day, batch_id
         FROM layer ORDER BY uid",
        |r| {
            Ok((
                LayerRow {
                    uid: r.get(0)?,
                    site_uid: String::new(),
                    top_cm: r.get(2)?,
                    bottom_cm: r.get(3)?,
                    horizon: r.get(4)?,
                    sand_pct: r.get(5)?,
                    silt_pct: r.get(6)?,
                    clay_pct: r.get(7)?,
                    organic_carbon_pct: r.get(8)?,
                    bulk_density_g_cm3: r.get(9)?,
                    ks_cm_per_day: r.get(10)?,
                    batch_uid: None,
                },
                r.get::<_, i64>(1)?,
                r.get::<_, Option<i64>>(11)?,
            ))
        },
    )? {
        layer.site_uid = must(&site_uids, site, "site")?;
        layer.batch_uid = lookup(&batch_uids, batch, "import batch")?;
        layers.push(layer);
    }

    let mut samples = Vec::new();
    let mut revisions: HashMap<i64, i64> = HashMap::new();
    for (mut sample, id, layer, batch, ks_batch, rev) in collect(
        conn,
        "SELECT uid, id, layer_id, code, kind, collected_on, bulk_density_g_cm3, notes, batch_id,
                ks_cm_per_day, ks_batch_id, readings_rev
         FROM sample ORDER BY uid",
        |r| {
            Ok((
                SampleRow {
                    uid: r.get(0)?,
                    layer_uid: String::new(),
                    code: r.get(3)?,
                    kind: r.get(4)?,
                    collected_on: r.get(5)?,
                    bulk_density_g_cm3: r.get(6)?,
                    notes: r.get(7)?,
                    batch_uid: None,
                    ks_cm_per_day: r.get(9)?,
                    ks_batch_uid: None,
                },
                r.get::<_, i64>(1)?,
                r.get::<_, i64>(2)?,
                r.get::<_, Option<i64>>(8)?,
                r.get::<_, Option<i64>>(10)?,
                r.get::<_, i64>(11)?,
            ))
        },
    )? {
        sample.layer_uid = must(&layer_uids, layer, "layer")?;
        sample.batch_uid = lookup(&batch_uids, batch, "import batch")?;
        sample.ks_batch_uid = lookup(&batch_uids, ks_batch, "import batch")?;
        revisions.insert(id, rev);
        samples.push(sample);
    }

    // Readings a fit would use now: not excluded by a flag (see `fits::EXCLUDED`).
    let excluded: HashSet<i64> = collect(
        conn,
        concat!(
            "SELECT DISTINCT f.reading_id FROM flag f WHERE f.reading_id IS NOT NULL AND ",
            flag_excludes!()
        ),
        |r| r.get(0),
    )?
    .into_iter()
    .collect();
    let mut readings = Vec::new();
    // Per sample id: (local id, uid index into `readings`) of the readings a fit would use.
    let mut used: HashMap<i64, Vec<(i64, usize)>> = HashMap::new();
    for (mut reading, id, sample, batch) in collect(
        conn,
        "SELECT uid, id, sample_id, h_cm, theta, method, measured_at, branch, weight, notes,
                batch_id, source_line
         FROM reading ORDER BY uid",
        |r| {
            Ok((
                ReadingRow {
                    uid: r.get(0)?,
                    sample_uid: String::new(),
                    h_cm: r.get(3)?,
                    theta: r.get(4)?,
                    method: r.get(5)?,
                    measured_at: r.get(6)?,
                    branch: r.get(7)?,
                    weight: r.get(8)?,
                    notes: r.get(9)?,
                    batch_uid: None,
                    source_line: r.get(11)?,
                },
                r.get::<_, i64>(1)?,
                r.get::<_, i64>(2)?,
                r.get::<_, Option<i64>>(10)?,
            ))
        },
    )? {
        reading.sample_uid = must(&sample_uids, sample, "sample")?;
        reading.batch_uid = lookup(&batch_uids, batch, "import batch")?;
        if !excluded.contains(&id) {
            used.entry(sample).or_default().push((id, readings.len()));
        }
        readings.push(reading);
    }

    let mut conductivity = Vec::new();
    let mut cond_of: HashMap<i64, Vec<(i64, usize)>> = HashMap::new();
    for (mut row, id, sample, batch) in collect(
        conn,
        "SELECT uid, id, sample_id, h_cm, theta, k_cm_per_day, method, measured_at, notes,
                batch_id, source_line
         FROM conductivity_reading ORDER BY uid",
        |r| {
            Ok((
                ConductivityRow {
                    uid: r.get(0)?,
                    sample_uid: String::new(),
                    h_cm: r.get(3)?,
                    theta: r.get(4)?,
                    k_cm_per_day: r.get(5)?,
                    method: r.get(6)?,
                    measured_at: r.get(7)?,
                    notes: r.get(8)?,
                    batch_uid: None,
                    source_line: r.get(10)?,
                },
                r.get::<_, i64>(1)?,
                r.get::<_, i64>(2)?,
                r.get::<_, Option<i64>>(9)?,
            ))
        },
    )? {
        row.sample_uid = must(&sample_uids, sample, "sample")?;
        row.batch_uid = lookup(&batch_uids, batch, "import batch")?;
        cond_of
            .entry(sample)
            .or_default()
            .push((id, conductivity.len()));
        conductivity.push(row);
    }
    // Conductivity readings a flag leaves out of joint fits (as `store::conductivity` marks
    // them): part of a joint fit's fingerprint.
    let cond_excluded: HashSet<i64> = conn
        .prepare(concat!(
            "SELECT f.conductivity_reading_id FROM flag f
             WHERE f.conductivity_reading_id IS NOT NULL AND ",
            flag_excludes!()
        ))?
        .query_map([], |r| r.get(0))?
        .collect::<rusqlite::Result<_>>()?;

    let logger = read_logger(conn, &site_uids, &batch_uids)?;

    let mut flags = Vec::new();
    let mut stmt = conn.prepare(
        "SELECT f.uid, f.reading_id, s.uid, k.sensor_id, l.time_s, f.conductivity_reading_id,
                f.reason, f.score, f.origin, f.status, f.note, f.created_at, f.decided_at,
                f.rule, f.decided_by
         FROM flag f
         LEFT JOIN logger_record l ON l.id = f.logger_record_id
         LEFT JOIN logger_sensor k ON k.id = l.logger_sensor_id
         LEFT JOIN site s ON s.id = k.site_id
         ORDER BY f.uid",
    )?;
    let mut rows = stmt.query([])?;
    while let Some(r) = rows.next()? {
        let uid: String = r.get(0)?;
        let reading: Option<i64> = r.get(1)?;
        let site: Option<String> = r.get(2)?;
        let cond: Option<i64> = r.get(5)?;
        let target = match (reading, site, cond) {
            (Some(id), _, _) => FlagTarget::Reading(must(&reading_uids, id, "reading")?),
            (None, Some(site_uid), _) => FlagTarget::Logger(LoggerKey {
                site_uid,
                sensor_id: r.get(3)?,
                time: time_text(r.get(4)?),
            }),
            (None, None, Some(id)) => {
                FlagTarget::Conductivity(must(&cond_uids, id, "conductivity reading")?)
            }
            (None, None, None) => {
                return Err(StoreError::Corrupt(format!("flag {uid} names no row")));
            }
        };
        flags.push(FlagRow {
            uid,
            target,
            reason: r.get(6)?,
            score: r.get(7)?,
            origin: r.get(8)?,
            status: r.get(9)?,
            note: r.get(10)?,
            created_at: r.get(11)?,
            decided_at: r.get(12)?,
            rule: r.get(13)?,
            decided_by: r.get(14)?,
        });
    }
    drop(rows);
    drop(stmt);

    let mut flag_events = Vec::new();
    for (mut event, flag) in collect(
        conn,
        "SELECT uid, flag_id, from_status, to_status, actor, note, at FROM flag_event
         ORDER BY uid",
        |r| {
            Ok((
                FlagEventRow {
                    uid: r.get(0)?,
                    flag_uid: String::new(),
                    from_status: r.get(2)?,
                    to_status: r.get(3)?,
                    actor: r.get(4)?,
                    note: r.get(5)?,
                    at: r.get(6)?,
                },
                r.get::<_, i64>(1)?,
            ))
        },
    )? {
        event.flag_uid = must(&flag_uids, flag, "flag")?;
        flag_events.push(event);
    }

    let fits = read_fits(
        conn,
        &FitContext {
            sample_uids: &sample_uids,
            reading_uids: &reading_uids,
            cond_uids: &cond_uids,
            revisions: &revisions,
            used: &used,
            readings: &readings,
            cond_of: &cond_of,
            cond_excluded: &cond_excluded,
            conductivity: &conductivity,
        },
    )?;

    Ok(CampaignRows {
        campaign,
        batches,
        sites,
        layers,
        samples,
        readings,
        conductivity,
        logger,
        flags,
        flag_events,
        fits,
    })
}

fn collect<T>(
    conn: &Connection,
    sql: &str,
    f: impl FnMut(&Row<'_>) -> rusqlite::Result<T>,
) -> Result<Vec<T>> {
    let mut stmt = conn.prepare(sql)?;
    let out = stmt.query_map([], f)?.collect::<rusqlite::Result<_>>()?;
    Ok(out)
}

/// Logger records sensor by sensor, in (site uid, sensor id, time) order: per site, its
/// sensors by id, each sensor's records by the key index `(logger_sensor_id, time_s)`.
fn read_logger(
    conn: &Connection,
    site_uids: &Uids,
    batch_uids: &Uids,
) -> Result<Vec<LoggerSeries>> {
    let mut sites: Vec<(&String, i64)> = site_uids.iter().map(|(id, uid)| (uid, *id)).collect();
    sites.sort();
    let mut stmt = conn.prepare(
        "SELECT k.sensor_id, r.time_s, coalesce(r.depth_cm, k.depth_cm),
                coalesce(r.sensor, k.sensor), r.value, r.batch_id, r.source_line
         FROM logger_sensor k JOIN logger_record r ON r.logger_sensor_id = k.id
         WHERE k.site_id = ?1 ORDER BY k.sensor_id, r.time_s",
    )?;
    let mut out: Vec<LoggerSeries> = Vec::new();
    for (site_uid, site_id) in sites {
        let mut rows = stmt.query([site_id])?;
        let mut batch_index: HashMap<Option<i64>, u32> = HashMap::new();
        while let Some(r) = rows.next()? {
            let sensor_id = r.get_ref(0)?.as_str().map_err(rusqlite::Error::from)?;
            let fresh = out
                .last()
                .is_none_or(|s| s.site_uid != *site_uid || s.sensor_id != sensor_id);
            if fresh {
                batch_index.clear();
                out.push(LoggerSeries {
                    site_uid: site_uid.clone(),
                    sensor_id: sensor_id.to_string(),
                    batch_uids: Vec::new(),
                    points: Vec::new(),
                });
            }
            let Some(series) = out.last_mut() else {
                continue;
            };
            let batch: Option<i64> = r.get(5)?;
            let index = if let Some(&i) = batch_index.get(&batch) {
                i
            } else {
                let i = u32::try_from(series.batch_uids.len()).unwrap_or(u32::MAX);
                series
                    .batch_uids
                    .push(lookup(batch_uids, batch, "import batch")?);
                batch_index.insert(batch, i);
                i
            };
            series.points.push(LoggerPoint {
                time: time_text(r.get(1)?),
                depth_cm: r.get(2)?,
                sensor: r.get(3)?,
                value: r.get(4)?,
                batch: index,
                source_line: r.get(6)?,
            });
        }
    }
    Ok(out)
}

/// What translating fits needs from the rest of the read.
struct FitContext<'a> {
    sample_uids: &'a Uids,
    reading_uids: &'a Uids,
    cond_uids: &'a Uids,
    revisions: &'a HashMap<i64, i64>,
    used: &'a HashMap<i64, Vec<(i64, usize)>>,
    readings: &'a [ReadingRow],
    cond_of: &'a HashMap<i64, Vec<(i64, usize)>>,
    cond_excluded: &'a HashSet<i64>,
    conductivity: &'a [ConductivityRow],
}

impl FitContext<'_> {
    /// This file's fingerprint of the readings a fit of `sample` would use now, and the
    /// file-independent key of the same readings.
    fn readings_now(&self, sample: i64) -> (String, String) {
        let empty = Vec::new();
        let used = self.used.get(&sample).unwrap_or(&empty);
        let ids: Vec<i64> = used.iter().map(|(id, _)| *id).collect();
        let rows: Vec<&ReadingRow> = used.iter().map(|(_, i)| &self.readings[*i]).collect();
        let h: Vec<f64> = rows.iter().map(|r| r.h_cm).collect();
        let theta: Vec<f64> = rows.iter().map(|r| r.theta).collect();
        let weights = rows.iter().any(|r| r.weight.is_some()).then(|| {
            rows.iter()
                .map(|r| r.weight.unwrap_or(1.0))
                .collect::<Vec<_>>()
        });
        let local = crate::store::fits::fingerprint(&ids, &h, &theta, weights.as_deref());
        let by_uid: Vec<(&str, f64, f64, Option<f64>)> = rows
            .iter()
            .map(|r| (r.uid.as_str(), r.h_cm, r.theta, r.weight))
            .collect();
        (local, readings_key(&by_uid))
    }

    /// This file's fingerprint of a sample's conductivity readings (as
    /// `store::conductivity::fingerprint`) and their file-independent key.
    fn conductivity_now(&self, sample: i64) -> (String, String) {
        let empty = Vec::new();
        let of = self.cond_of.get(&sample).unwrap_or(&empty);
        // The file's own fingerprint, as `store::conductivity` computes it (the schema holds
        // exactly one of h_cm and theta).
        let local = crate::store::conductivity::fingerprint_of(of.iter().map(|(id, i)| {
            let r = &self.conductivity[*i];
            let at = match (r.h_cm, r.theta) {
                (Some(h), _) => Where::Suction(h),
                (None, t) => Where::Water(t.unwrap_or_default()),
            };
            (*id, at, r.k_cm_per_day, self.cond_excluded.contains(id))
        }));
        let rows: Vec<(&ConductivityRow, bool)> = of
            .iter()
            .map(|(id, i)| (&self.conductivity[*i], self.cond_excluded.contains(id)))
            .collect();
        (local, conductivity_key(&rows))
    }
}

#[allow(clippy::too_many_lines)]
fn read_fits(conn: &Connection, cx: &FitContext<'_>) -> Result<Vec<FitRow>> {
    let mut stmt = conn.prepare(
        "SELECT uid, sample_id, model, parameters, standard_errors, covariance, statistics,
                n_points, readings_fingerprint, created_at, is_current, status, message,
                requested, fixed, report, ranking, reading_ids, sample_rev, conductivity, joint
         FROM fit ORDER BY uid",
    )?;
    let mut rows = stmt.query([])?;
    let mut now: HashMap<i64, (String, String)> = HashMap::new();
    let mut out = Vec::new();
    while let Some(r) = rows.next()? {
        let uid: String = r.get(0)?;
        let sample: i64 = r.get(1)?;
        let fingerprint: String = r.get(8)?;
        let sample_rev: Option<i64> = r.get(18)?;
        let (local, key) = now
            .entry(sample)
            .or_insert_with(|| cx.readings_now(sample))
            .clone();
        // As `fits::summaries`: unchanged revision, or the same readings.
        let fresh = sample_rev.is_some() && sample_rev == cx.revisions.get(&sample).copied()
            || fingerprint == local;
        let reading_ids: Option<String> = r.get(17)?;
        let reading_uids = match reading_ids {
            None => None,
            Some(text) => {
                let ids: Vec<i64> = serde_json::from_str(&text).map_err(|e| {
                    StoreError::Corrupt(format!("fit {uid}: reading ids {text:?}: {e}"))
                })?;
                // A reading deleted since the fit is left out (the fit is stale then).
                Some(
                    ids.iter()
                        .filter_map(|id| cx.reading_uids.get(id).cloned())
                        .collect(),
                )
            }
        };
        let joint: Option<String> = r.get(20)?;
        let joint = match joint {
            None => None,
            Some(text) => Some(translate_joint(&uid, &text, sample, cx)?),
        };
        out.push(FitRow {
            sample_uid: must(cx.sample_uids, sample, "sample")?,
            model: r.get(2)?,
            parameters: r.get(3)?,
            standard_errors: r.get(4)?,
            covariance: r.get(5)?,
            statistics: r.get(6)?,
            n_points: r.get(7)?,
            readings_key: fresh.then_some(key),
            created_at: r.get(9)?,
            is_current: r.get::<_, i64>(10)? != 0,
            status: r.get(11)?,
            message: r.get(12)?,
            requested: r.get(13)?,
            fixed: r.get(14)?,
            report: r.get(15)?,
            ranking: r.get(16)?,
            reading_uids,
            conductivity: r.get(19)?,
            joint,
            uid,
        });
    }
    Ok(out)
}

/// A joint record with conductivity reading uids for its local ids, and its conductivity
/// fingerprint replaced by the file-independent key (`stale` when the readings changed since,
/// so the fit stays stale wherever it goes; null stays null).
fn translate_joint(uid: &str, text: &str, sample: i64, cx: &FitContext<'_>) -> Result<String> {
    let bad = |e: String| StoreError::Corrupt(format!("fit {uid}: joint record: {e}"));
    let mut value: serde_json::Value =
        serde_json::from_str(text).map_err(|e| bad(e.to_string()))?;
    let Some(object) = value.as_object_mut() else {
        return Err(bad("not an object".into()));
    };
    if let Some(ids) = object.get_mut("conductivity_reading_ids") {
        let list: Vec<i64> = serde_json::from_value(ids.clone()).map_err(|e| bad(e.to_string()))?;
        let uids: Vec<serde_json::Value> = list
            .iter()
            .filter_map(|id| cx.cond_uids.get(id).cloned().map(serde_json::Value::String))
            .collect();
        *ids = serde_json::Value::Array(uids);
    }
    if let Some(fp) = object.get_mut("conductivity_fingerprint")
        && let Some(recorded) = fp.as_str()
    {
        let (local, key) = cx.conductivity_now(sample);
        *fp = serde_json::Value::String(if recorded == local { key } else { STALE.into() });
    }
    serde_json::to_string(&value).map_err(|e| bad(e.to_string()))
}
