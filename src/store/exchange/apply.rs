//! Writing a merge plan into a SQLite campaign, uids translated into that file's ids.

use std::collections::{BTreeMap, HashMap};

use rusqlite::{Connection, OptionalExtension, Transaction, params};

use super::plan::{MergePlan, RowKind};
use super::read::STALE;
use super::{FitRow, FlagTarget, LoggerSeries, readings_key};
use crate::model::domain::SensorKind;
use crate::model::number::plural;
use crate::store::logger;
use crate::store::{Result, StoreError};

/// What [`apply()`] wrote.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Applied {
    /// Rows inserted per kind.
    pub inserted: BTreeMap<RowKind, usize>,
    /// Rows whose FROM version replaced INTO's, per kind.
    pub replaced: BTreeMap<RowKind, usize>,
    /// Samples whose current fit changed.
    pub current_changed: usize,
    /// Whether the campaign row was written.
    pub campaign_written: bool,
}

/// The triggers that write flag events: off while flags and their events are copied (the
/// events come with them, each once), restored before the transaction ends.
const EVENT_TRIGGERS: [&str; 2] = ["flag_insert_logs_event", "flag_status_logs_event"];

/// uid -> local id of one table.
type Ids = HashMap<String, i64>;

fn ids(conn: &Connection, table: &str) -> Result<Ids> {
    let mut stmt = conn.prepare(&format!("SELECT uid, id FROM {table}"))?;
    let map = stmt
        .query_map([], |r| Ok((r.get(0)?, r.get(1)?)))?
        .collect::<rusqlite::Result<_>>()?;
    Ok(map)
}

fn id_of(map: &Ids, uid: Option<&str>, what: &str) -> Result<Option<i64>> {
    uid.map(|uid| {
        map.get(uid).copied().ok_or_else(|| {
            StoreError::Corrupt(format!(
                "a merged row names {what} {uid}, which neither file has"
            ))
        })
    })
    .transpose()
}

fn need(map: &Ids, uid: &str, what: &str) -> Result<i64> {
    id_of(map, Some(uid), what).map(Option::unwrap_or_default)
}

/// Write `plan` into the campaign of `tx` (the caller commits). Refuses a plan that is not
/// clean (a refusal, a collision or a conflict left unresolved).
///
/// Flags and their events are copied as they are: the triggers that log flag events are
/// dropped for the copy and recreated from their stored SQL in the same transaction, so no
/// event is written twice. Fits are written last: a fit whose readings key matches the
/// target sample's readings gets that file's fingerprint and revision (current), any other
/// a fingerprint no readings match (stale).
///
/// # Errors
/// [`StoreError::Refused`] for a plan that is not clean; an SQLite error, or a row naming one
/// that neither campaign has ([`StoreError::Corrupt`]).
#[allow(clippy::too_many_lines)]
pub fn apply(tx: &Transaction<'_>, plan: &MergePlan) -> Result<Applied> {
    if !plan.is_clean() {
        return Err(StoreError::Refused(format!(
            "the merge has {} and {}{}; nothing was written",
            plural(plan.unresolved() as u64, "unresolved conflict"),
            plural(plan.collisions.len() as u64, "code collision"),
            if plan.refusal.is_some() {
                " and is refused"
            } else {
                ""
            }
        )));
    }
    let conn: &Connection = tx;
    let mut applied = Applied::default();
    let (ins, rep) = (&plan.insert, &plan.replace);
    let mut count = |kind: RowKind, inserted: usize, replaced: usize| {
        if inserted > 0 {
            applied.inserted.insert(kind, inserted);
        }
        if replaced > 0 {
            applied.replaced.insert(kind, replaced);
        }
    };

    if let Some(c) = &plan.campaign {
        conn.execute(
            "UPDATE campaign SET uid = ?1, name = ?2, description = ?3, fc_kpa = ?4, pwp_kpa = ?5,
                    created_at = ?6, texture_prior_max_readings = ?7 WHERE id = 1",
            params![
                c.uid,
                c.name,
                c.description,
                c.fc_kpa,
                c.pwp_kpa,
                c.created_at,
                c.texture_prior_max_readings
            ],
        )?;
    }

    {
        let sql_insert = "INSERT INTO import_batch (uid, file_name, sha256, kind, rows, forced,
                          imported_at) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7)";
        let sql_update = "UPDATE import_batch SET file_name = ?2, sha256 = ?3, kind = ?4,
                          rows = ?5, forced = ?6, imported_at = ?7 WHERE uid = ?1";
        for (rows, sql) in [(&rep.batches, sql_update), (&ins.batches, sql_insert)] {
            let mut stmt = conn.prepare(sql)?;
            for b in rows {
                stmt.execute(params![
                    b.uid,
                    b.file_name,
                    b.sha256,
                    b.kind,
                    b.rows,
                    i64::from(b.forced),
                    b.imported_at
                ])?;
            }
        }
    }
    let batches = ids(conn, "import_batch")?;
    count(RowKind::Batches, ins.batches.len(), rep.batches.len());

    {
        let sql_insert = "INSERT INTO site (uid, code, name, latitude, longitude, elevation_m,
                          notes, batch_id) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8)";
        let sql_update = "UPDATE site SET code = ?2, name = ?3, latitude = ?4, longitude = ?5,
                          elevation_m = ?6, notes = ?7, batch_id = ?8 WHERE uid = ?1";
        // Replaced rows first, so a code that moves away frees its place for a new row.
        for (rows, sql) in [(&rep.sites, sql_update), (&ins.sites, sql_insert)] {
            let mut stmt = conn.prepare(sql)?;
            for s in rows {
                stmt.execute(params![
                    s.uid,
                    s.code,
                    s.name,
                    s.latitude,
                    s.longitude,
                    s.elevation_m,
                    s.notes,
                    id_of(&batches, s.batch_uid.as_deref(), "import batch")?
                ])?;
            }
        }
    }
    let sites = ids(conn, "site")?;
    count(RowKind::Sites, ins.sites.len(), rep.sites.len());

    {
        let sql_insert = "INSERT INTO layer (uid, site_id, top_cm, bottom_cm, horizon, sand_pct,
                          silt_pct, clay_pct, organic_carbon_pct, bulk_density_g_cm3,
                          ks_cm_per_day, batch_id)
                          VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12)";
        let sql_update = "UPDATE layer SET site_id = ?2, top_cm = ?3, bottom_cm = ?4,
                          horizon = ?5, sand_pct = ?6, silt_pct = ?7, clay_pct = ?8,
                          organic_carbon_pct = ?9, bulk_density_g_cm3 = ?10,
                          ks_cm_per_day = ?11, batch_id = ?12 WHERE uid = ?1";
        for (rows, sql) in [(&rep.layers, sql_update), (&ins.layers, sql_insert)] {
            let mut stmt = conn.prepare(sql)?;
            for l in rows {
                stmt.execute(params![
                    l.uid,
                    need(&sites, &l.site_uid, "site")?,
                    l.top_cm,
                    l.bottom_cm,
                    l.horizon,
                    l.sand_pct,
                    l.silt_pct,
                    l.clay_pct,
                    l.organic_carbon_pct,
                    l.bulk_density_g_cm3,
                    l.ks_cm_per_day,
                    id_of(&batches, l.batch_uid.as_deref(), "import batch")?
                ])?;
            }
        }
    }
    let layers = ids(conn, "layer")?;
    count(RowKind::Layers, ins.layers.len(), rep.layers.len());

    {
        let sql_insert = "INSERT INTO sample (uid, layer_id, code, kind, collected_on,
                          bulk_density_g_cm3, notes, batch_id, ks_cm_per_day, ks_batch_id)
                          VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10)";
        let sql_update = "UPDATE sample SET layer_id = ?2, code = ?3, kind = ?4,
                          collected_on = ?5, bulk_density_g_cm3 = ?6, notes = ?7, batch_id = ?8,
                          ks_cm_per_day = ?9, ks_batch_id = ?10 WHERE uid = ?1";
        for (rows, sql) in [(&rep.samples, sql_update), (&ins.samples, sql_insert)] {
            let mut stmt = conn.prepare(sql)?;
            for s in rows {
                stmt.execute(params![
                    s.uid,
                    need(&layers, &s.layer_uid, "layer")?,
                    s.code,
                    s.kind,
                    s.collected_on,
                    s.bulk_density_g_cm3,
                    s.notes,
                    id_of(&batches, s.batch_uid.as_deref(), "import batch")?,
                    s.ks_cm_per_day,
                    id_of(&batches, s.ks_batch_uid.as_deref(), "import batch")?
                ])?;
            }
        }
    }
    let samples = ids(conn, "sample")?;
    count(RowKind::Samples, ins.samples.len(), rep.samples.len());

    {
        let sql_insert = "INSERT INTO reading (uid, sample_id, h_cm, theta, method, measured_at,
                          branch, weight, notes, batch_id, source_line)
                          VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11)";
        let sql_update = "UPDATE reading SET sample_id = ?2, h_cm = ?3, theta = ?4, method = ?5,
                          measured_at = ?6, branch = ?7, weight = ?8, notes = ?9,
                          batch_id = ?10, source_line = ?11 WHERE uid = ?1";
        for (rows, sql) in [(&rep.readings, sql_update), (&ins.readings, sql_insert)] {
            let mut stmt = conn.prepare(sql)?;
            for r in rows {
                stmt.execute(params![
                    r.uid,
                    need(&samples, &r.sample_uid, "sample")?,
                    r.h_cm,
                    r.theta,
                    r.method,
                    r.measured_at,
                    r.branch,
                    r.weight,
                    r.notes,
                    id_of(&batches, r.batch_uid.as_deref(), "import batch")?,
                    r.source_line
                ])?;
            }
        }
    }
    let readings = ids(conn, "reading")?;
    count(RowKind::Readings, ins.readings.len(), rep.readings.len());

    {
        let sql_insert = "INSERT INTO conductivity_reading (uid, sample_id, h_cm, theta,
                          k_cm_per_day, method, measured_at, notes, batch_id, source_line)
                          VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10)";
        let sql_update = "UPDATE conductivity_reading SET sample_id = ?2, h_cm = ?3, theta = ?4,
                          k_cm_per_day = ?5, method = ?6, measured_at = ?7, notes = ?8,
                          batch_id = ?9, source_line = ?10 WHERE uid = ?1";
        for (rows, sql) in [
            (&rep.conductivity, sql_update),
            (&ins.conductivity, sql_insert),
        ] {
            let mut stmt = conn.prepare(sql)?;
            for c in rows {
                stmt.execute(params![
                    c.uid,
                    need(&samples, &c.sample_uid, "sample")?,
                    c.h_cm,
                    c.theta,
                    c.k_cm_per_day,
                    c.method,
                    c.measured_at,
                    c.notes,
                    id_of(&batches, c.batch_uid.as_deref(), "import batch")?,
                    c.source_line
                ])?;
            }
        }
    }
    let conductivity = ids(conn, "conductivity_reading")?;
    count(
        RowKind::Conductivity,
        ins.conductivity.len(),
        rep.conductivity.len(),
    );

    let logger_written = write_logger(conn, &rep.logger, &ins.logger, &sites, &batches)?;
    count(RowKind::Logger, logger_written.1, logger_written.0);

    // Flags and their audit trail, copied as they are.
    let mut triggers = Vec::new();
    for name in EVENT_TRIGGERS {
        let sql: Option<String> = conn
            .query_row(
                "SELECT sql FROM sqlite_schema WHERE type = 'trigger' AND name = ?1",
                [name],
                |r| r.get(0),
            )
            .optional()?;
        if let Some(sql) = sql {
            conn.execute_batch(&format!("DROP TRIGGER {name}"))?;
            triggers.push(sql);
        }
    }
    {
        let sql_insert = "INSERT INTO flag (uid, reading_id, logger_record_id,
                          conductivity_reading_id, reason, score, origin, status, note,
                          created_at, decided_at, rule, decided_by)
                          VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13)";
        let sql_update = "UPDATE flag SET reading_id = ?2, logger_record_id = ?3,
                          conductivity_reading_id = ?4, reason = ?5, score = ?6, origin = ?7,
                          status = ?8, note = ?9, created_at = ?10, decided_at = ?11, rule = ?12,
                          decided_by = ?13 WHERE uid = ?1";
        let mut record = conn.prepare(
            "SELECT r.id FROM logger_sensor k JOIN logger_record r ON r.logger_sensor_id = k.id
             WHERE k.site_id = ?1 AND k.sensor_id = ?2 AND r.time_s = ?3",
        )?;
        for (rows, sql) in [(&rep.flags, sql_update), (&ins.flags, sql_insert)] {
            let mut stmt = conn.prepare(sql)?;
            for f in rows {
                let (reading, logger, cond) = match &f.target {
                    FlagTarget::Reading(uid) => {
                        (Some(need(&readings, uid, "reading")?), None, None)
                    }
                    FlagTarget::Conductivity(uid) => (
                        None,
                        None,
                        Some(need(&conductivity, uid, "conductivity reading")?),
                    ),
                    FlagTarget::Logger(key) => {
                        let site = need(&sites, &key.site_uid, "site")?;
                        let time = logger::stored_time(&key.time);
                        let id: Option<i64> = match time {
                            Some(t) => record
                                .query_row(params![site, key.sensor_id, t], |r| r.get(0))
                                .optional()?,
                            None => None,
                        };
                        let id = id.ok_or_else(|| {
                            StoreError::Corrupt(format!(
                                "flag {} names logger record {}/{} at {}, which neither \
                                     file has",
                                f.uid, key.site_uid, key.sensor_id, key.time
                            ))
                        })?;
                        (None, Some(id), None)
                    }
                };
                stmt.execute(params![
                    f.uid,
                    reading,
                    logger,
                    cond,
                    f.reason,
                    f.score,
                    f.origin,
                    f.status,
                    f.note,
                    f.created_at,
                    f.decided_at,
                    f.rule,
                    f.decided_by
                ])?;
            }
        }
    }
    let flags = ids(conn, "flag")?;
    {
        let mut stmt = conn.prepare(
            "INSERT INTO flag_event (uid, flag_id, from_status, to_status, actor, note, at)
             VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7)",
        )?;
        // In time order, so local ids keep each flag's history in the order it happened.
        let mut events: Vec<&super::FlagEventRow> = ins.flag_events.iter().collect();
        events.sort_by(|a, b| {
            (&a.at, a.from_status.is_some(), &a.uid).cmp(&(&b.at, b.from_status.is_some(), &b.uid))
        });
        for e in events {
            stmt.execute(params![
                e.uid,
                need(&flags, &e.flag_uid, "flag")?,
                e.from_status,
                e.to_status,
                e.actor,
                e.note,
                e.at
            ])?;
        }
    }
    for sql in triggers {
        conn.execute_batch(&sql)?;
    }
    count(RowKind::Flags, ins.flags.len(), rep.flags.len());
    count(RowKind::FlagEvents, ins.flag_events.len(), 0);

    // Fits last, once every reading and flag of their samples is in place.
    let mut keys: HashMap<i64, (String, String, String, i64)> = HashMap::new();
    {
        let sql_insert = "INSERT INTO fit (uid, sample_id, model, parameters, standard_errors,
                          covariance, statistics, n_points, readings_fingerprint, created_at,
                          is_current, status, message, requested, fixed, report, ranking,
                          reading_ids, sample_rev, conductivity, joint)
                          VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, 0, ?11, ?12, ?13,
                                  ?14, ?15, ?16, ?17, ?18, ?19, ?20)";
        let sql_update = "UPDATE fit SET sample_id = ?2, model = ?3, parameters = ?4,
                          standard_errors = ?5, covariance = ?6, statistics = ?7, n_points = ?8,
                          readings_fingerprint = ?9, created_at = ?10, status = ?11,
                          message = ?12, requested = ?13, fixed = ?14, report = ?15,
                          ranking = ?16, reading_ids = ?17, sample_rev = ?18,
                          conductivity = ?19, joint = ?20 WHERE uid = ?1";
        let cx = FitTarget {
            readings: &readings,
            conductivity: &conductivity,
        };
        // New fits in the order they were made: a failed attempt's place after a sample's
        // current fit (a newer local id) is what marks that fit stale.
        let mut new_fits: Vec<&FitRow> = ins.fits.iter().collect();
        new_fits.sort_by(|a, b| (&a.created_at, &a.uid).cmp(&(&b.created_at, &b.uid)));
        let replaced_fits: Vec<&FitRow> = rep.fits.iter().collect();
        for (rows, sql) in [(replaced_fits, sql_update), (new_fits, sql_insert)] {
            let mut stmt = conn.prepare(sql)?;
            for f in rows {
                let sample = need(&samples, &f.sample_uid, "sample")?;
                if let std::collections::hash_map::Entry::Vacant(e) = keys.entry(sample) {
                    e.insert(now(conn, sample)?);
                }
                let (local, key, cond_key, rev) = &keys[&sample];
                let fresh = f.readings_key.as_deref() == Some(key.as_str());
                let (fingerprint, sample_rev) = if fresh {
                    (local.as_str(), Some(*rev))
                } else {
                    (STALE, None)
                };
                stmt.execute(params![
                    f.uid,
                    sample,
                    f.model,
                    f.parameters,
                    f.standard_errors,
                    f.covariance,
                    f.statistics,
                    f.n_points,
                    fingerprint,
                    f.created_at,
                    f.status,
                    f.message,
                    f.requested,
                    f.fixed,
                    f.report,
                    f.ranking,
                    cx.reading_ids(f)?,
                    sample_rev,
                    f.conductivity,
                    cx.joint(conn, f, sample, cond_key)?
                ])?;
            }
        }
    }
    count(RowKind::Fits, ins.fits.len(), rep.fits.len());
    {
        let mut clear =
            conn.prepare("UPDATE fit SET is_current = 0 WHERE sample_id = ?1 AND is_current = 1")?;
        let mut set = conn.prepare("UPDATE fit SET is_current = 1 WHERE uid = ?1")?;
        for (sample, fit) in &plan.current {
            clear.execute([need(&samples, sample, "sample")?])?;
            set.execute([fit])?;
            applied.current_changed += 1;
        }
    }
    applied.campaign_written = plan.campaign.is_some();
    Ok(applied)
}

/// The target file's view of a sample now: its readings fingerprint, the uid-based readings
/// key, the uid-based conductivity key, and its readings revision.
fn now(conn: &Connection, sample: i64) -> Result<(String, String, String, i64)> {
    let local = crate::store::fits::readings_fingerprint(conn, sample)?;
    let mut stmt = conn.prepare_cached(&format!(
        "SELECT r.uid, r.h_cm, r.theta, r.weight FROM reading r
         WHERE r.sample_id = ?1 AND NOT {}",
        crate::store::fits::EXCLUDED
    ))?;
    let rows: Vec<(String, f64, f64, Option<f64>)> = stmt
        .query_map([sample], |r| {
            Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?))
        })?
        .collect::<rusqlite::Result<_>>()?;
    let by_uid: Vec<(&str, f64, f64, Option<f64>)> = rows
        .iter()
        .map(|(u, h, t, w)| (u.as_str(), *h, *t, *w))
        .collect();
    let mut stmt = conn.prepare_cached(&format!(
        "SELECT c.uid, c.h_cm, c.theta, c.k_cm_per_day, {}
         FROM conductivity_reading c WHERE c.sample_id = ?1",
        crate::store::conductivity::K_EXCLUDED
    ))?;
    let cond: Vec<(super::ConductivityRow, bool)> = stmt
        .query_map([sample], |r| {
            let row = super::ConductivityRow {
                uid: r.get(0)?,
                sample_uid: String::new(),
                h_cm: r.get(1)?,
                theta: r.get(2)?,
                k_cm_per_day: r.get(3)?,
                method: None,
                measured_at: None,
                notes: None,
                batch_uid: None,
                source_line: None,
            };
            Ok((row, r.get::<_, bool>(4)?))
        })?
        .collect::<rusqlite::Result<_>>()?;
    let refs: Vec<(&super::ConductivityRow, bool)> = cond.iter().map(|(r, x)| (r, *x)).collect();
    let rev: i64 = conn.query_row(
        "SELECT readings_rev FROM sample WHERE id = ?1",
        [sample],
        |r| r.get(0),
    )?;
    Ok((
        local,
        readings_key(&by_uid),
        super::conductivity_key(&refs),
        rev,
    ))
}

/// Translating a fit's uid references into the target file's ids.
struct FitTarget<'a> {
    readings: &'a Ids,
    conductivity: &'a Ids,
}

impl FitTarget<'_> {
    fn reading_ids(&self, f: &FitRow) -> Result<Option<String>> {
        let Some(uids) = &f.reading_uids else {
            return Ok(None);
        };
        let ids = uids
            .iter()
            .map(|u| need(self.readings, u, "reading"))
            .collect::<Result<Vec<i64>>>()?;
        Ok(Some(serde_json::to_string(&ids).map_err(|e| {
            StoreError::Corrupt(format!("fit {}: reading ids: {e}", f.uid))
        })?))
    }

    fn joint(
        &self,
        conn: &Connection,
        f: &FitRow,
        sample: i64,
        cond_key: &str,
    ) -> Result<Option<String>> {
        let Some(text) = &f.joint else {
            return Ok(None);
        };
        let bad = |e: String| StoreError::Corrupt(format!("fit {}: joint record: {e}", f.uid));
        let mut value: serde_json::Value =
            serde_json::from_str(text).map_err(|e| bad(e.to_string()))?;
        let Some(object) = value.as_object_mut() else {
            return Err(bad("not an object".into()));
        };
        if let Some(ids) = object.get_mut("conductivity_reading_ids") {
            let uids: Vec<String> =
                serde_json::from_value(ids.clone()).map_err(|e| bad(e.to_string()))?;
            let local = uids
                .iter()
                .map(|u| need(self.conductivity, u, "conductivity reading"))
                .collect::<Result<Vec<i64>>>()?;
            *ids = serde_json::Value::from(local);
        }
        if let Some(fp) = object.get_mut("conductivity_fingerprint")
            && let Some(key) = fp.as_str()
        {
            let written = if key == cond_key {
                crate::store::conductivity::fingerprint(&crate::store::conductivity::of_sample(
                    conn, sample,
                )?)
            } else {
                STALE.to_string()
            };
            *fp = serde_json::Value::String(written);
        }
        Ok(Some(
            serde_json::to_string(&value).map_err(|e| bad(e.to_string()))?,
        ))
    }
}

/// Logger records: replaced ones updated by natural key, new ones inserted. A sensor the
/// file lacks is created with the depth and kind of its latest record; a record whose depth
/// or kind differs from its sensor's keeps its own (see migration 11). Returns
/// (replaced, inserted).
fn write_logger(
    conn: &Connection,
    replace: &[LoggerSeries],
    insert: &[LoggerSeries],
    sites: &Ids,
    batches: &Ids,
) -> Result<(usize, usize)> {
    let mut sensor = conn.prepare(
        "SELECT id, depth_cm, sensor FROM logger_sensor WHERE site_id = ?1 AND sensor_id = ?2",
    )?;
    let mut update = conn.prepare(
        "UPDATE logger_record SET depth_cm = ?3, sensor = ?4, value = ?5, batch_id = ?6,
                source_line = ?7 WHERE logger_sensor_id = ?1 AND time_s = ?2",
    )?;
    let mut add = conn.prepare(
        "INSERT INTO logger_record (logger_sensor_id, time_s, depth_cm, sensor, value, batch_id,
                source_line) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7)",
    )?;
    let mut counts = (0, 0);
    for (list, adding) in [(replace, false), (insert, true)] {
        for series in list {
            let Some(latest) = series.points.last() else {
                continue;
            };
            let site = need(sites, &series.site_uid, "site")?;
            let batch_ids = series
                .batch_uids
                .iter()
                .map(|b| id_of(batches, b.as_deref(), "import batch"))
                .collect::<Result<Vec<Option<i64>>>>()?;
            let what = |time: &str| {
                format!(
                    "logger record {}/{} at {time:?}",
                    series.site_uid, series.sensor_id
                )
            };
            let kind_of = |text: &str, time: &str| {
                text.parse::<SensorKind>()
                    .map_err(|e| StoreError::Corrupt(format!("{}: {e}", what(time))))
            };
            let found: Option<(i64, f64, String)> = sensor
                .query_row(params![site, series.sensor_id], |r| {
                    Ok((r.get(0)?, r.get(1)?, r.get(2)?))
                })
                .optional()?;
            let (sensor_ref, depth, kind) = if let Some(found) = found {
                found
            } else {
                let kind = kind_of(&latest.sensor, &latest.time)?;
                let id =
                    logger::insert_sensor(conn, site, &series.sensor_id, latest.depth_cm, kind)?;
                (id, latest.depth_cm, latest.sensor.clone())
            };
            let stmt = if adding { &mut add } else { &mut update };
            for p in &series.points {
                let time = logger::stored_time(&p.time).ok_or_else(|| {
                    StoreError::Corrupt(format!(
                        "{}: expected a time as YYYY-MM-DDTHH:MM:SSZ",
                        what(&p.time)
                    ))
                })?;
                // The schema checks water content up to 1 only on a record of its own kind.
                if kind_of(&p.sensor, &p.time)? == SensorKind::WaterContent
                    && !(0.0..=1.0).contains(&p.value)
                {
                    return Err(StoreError::Corrupt(format!(
                        "{}: water content {} outside 0 to 1 m3/m3",
                        what(&p.time),
                        p.value
                    )));
                }
                let own_depth = (p.depth_cm.to_bits() != depth.to_bits()).then_some(p.depth_cm);
                let own_kind = (p.sensor != kind).then_some(p.sensor.as_str());
                let batch = batch_ids.get(p.batch as usize).copied().flatten();
                stmt.execute(params![
                    sensor_ref,
                    time,
                    own_depth,
                    own_kind,
                    p.value,
                    batch,
                    p.source_line
                ])?;
            }
            if adding {
                counts.1 += series.points.len();
            } else {
                counts.0 += series.points.len();
            }
        }
    }
    Ok(counts)
}
