//! Field logger records: the bulk insert of an import (or its dry run), sensors and their
//! series in time order, and the quality flags raised on records.
//!
//! A sensor is a site and a sensor id; all its records share one depth and one kind. Every
//! read goes through the table's key index `(site_id, sensor_id, time)`, so a sensor's series
//! comes back in time order without a second index on a table of millions of rows.

use std::collections::HashMap;

use rusqlite::{CachedStatement, Connection, OptionalExtension, ffi, params};

use super::Result;
use super::sql_types::SqlTime;
use crate::field::time::utc_text;
use crate::model::domain::SensorKind;

/// A record about to be stored (canonical units; `time` as stored, `YYYY-MM-DDTHH:MM:SSZ`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct NewRecord<'a> {
    /// Database id of the site (negative for a site a dry run would create).
    pub site_id: i64,
    /// Depth below the surface, cm.
    pub depth_cm: f64,
    /// Tensiometer or water content.
    pub sensor: SensorKind,
    /// The sensor's id, unique within its site.
    pub sensor_id: &'a str,
    /// UTC time as stored.
    pub time: &'a str,
    /// Suction head (cm) or theta (m3/m3).
    pub value: f64,
    /// Import batch (a dry run's own negative ids stand for its files).
    pub batch_id: i64,
    /// Physical line in the source file.
    pub line: u64,
}

/// The record already held for a sensor and time.
#[derive(Debug, Clone, PartialEq)]
pub struct Existing {
    /// Its value.
    pub value: f64,
    /// Its import batch.
    pub batch_id: Option<i64>,
    /// Name of the file it came from, when stored.
    pub file_name: Option<String>,
    /// Its line in that file.
    pub line: Option<u64>,
}

/// What adding a record did.
#[derive(Debug, Clone, PartialEq)]
pub enum Added {
    /// Stored (or, in a dry run, noted); the handle names it for flags.
    Stored(i64),
    /// The sensor already has a record at that time; nothing was added.
    Duplicate(Existing),
}

/// Where records of an import go: the campaign's table, or (dry run) a temporary table that
/// stands in for it, so duplicates are found exactly as a real import would find them
/// while the campaign file is not written.
pub struct RecordSink<'conn> {
    conn: &'conn Connection,
    dry_run: bool,
    insert: CachedStatement<'conn>,
    find: CachedStatement<'conn>,
    find_pending: Option<CachedStatement<'conn>>,
}

const INSERT: &str = "INSERT INTO logger_record (site_id, depth_cm, sensor, sensor_id, time, \
     value, batch_id, source_line) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8)";

const FIND: &str = "SELECT r.value, r.batch_id, b.file_name, r.source_line FROM logger_record r \
     LEFT JOIN import_batch b ON b.id = r.batch_id \
     WHERE r.site_id = ?1 AND r.sensor_id = ?2 AND r.time = ?3";

/// The dry run's stand-in table (temporary: it lives outside the campaign file).
const PENDING: &str = "CREATE TEMP TABLE IF NOT EXISTS logger_pending (
         site_id INTEGER NOT NULL, sensor_id TEXT NOT NULL, time TEXT NOT NULL,
         value REAL NOT NULL, batch_id INTEGER NOT NULL, source_line INTEGER NOT NULL,
         PRIMARY KEY (site_id, sensor_id, time)
     ) WITHOUT ROWID;
     DELETE FROM temp.logger_pending;";

fn is_unique_violation(e: &rusqlite::Error) -> bool {
    matches!(e, rusqlite::Error::SqliteFailure(f, _)
        if f.extended_code == ffi::SQLITE_CONSTRAINT_UNIQUE
            || f.extended_code == ffi::SQLITE_CONSTRAINT_PRIMARYKEY)
}

impl<'conn> RecordSink<'conn> {
    /// Records for the campaign's table (inside the command's write transaction).
    ///
    /// # Errors
    /// An SQLite error.
    pub fn writing(conn: &'conn Connection) -> Result<Self> {
        Ok(Self {
            conn,
            dry_run: false,
            insert: conn.prepare_cached(INSERT)?,
            find: conn.prepare_cached(FIND)?,
            find_pending: None,
        })
    }

    /// Records for a dry run: checked against the campaign, kept in a temporary table.
    ///
    /// # Errors
    /// An SQLite error.
    pub fn dry_run(conn: &'conn Connection) -> Result<Self> {
        conn.execute_batch(PENDING)?;
        Ok(Self {
            conn,
            dry_run: true,
            insert: conn.prepare_cached(
                "INSERT INTO temp.logger_pending (site_id, sensor_id, time, value, batch_id,
                     source_line) VALUES (?1, ?2, ?3, ?4, ?5, ?6)",
            )?,
            find: conn.prepare_cached(FIND)?,
            find_pending: Some(conn.prepare_cached(
                "SELECT value, batch_id, NULL, source_line FROM temp.logger_pending
                 WHERE site_id = ?1 AND sensor_id = ?2 AND time = ?3",
            )?),
        })
    }

    /// Whether this is a dry run.
    pub fn is_dry_run(&self) -> bool {
        self.dry_run
    }

    /// The connection records go through.
    pub fn connection(&self) -> &'conn Connection {
        self.conn
    }

    /// Add a record, or report the one the sensor already has at that time.
    ///
    /// # Errors
    /// An SQLite error other than the sensor-and-time key (a value outside the schema's
    /// ranges, a missing site).
    pub fn add(&mut self, r: &NewRecord<'_>) -> Result<Added> {
        let line = r.line as i64;
        if self.dry_run {
            if let Some(found) = existing(&mut self.find, r)? {
                return Ok(Added::Duplicate(found));
            }
            return match self.insert.execute(params![
                r.site_id,
                r.sensor_id,
                r.time,
                r.value,
                r.batch_id,
                line
            ]) {
                Ok(_) => Ok(Added::Stored(line)),
                Err(e) if is_unique_violation(&e) => {
                    let pending = self.find_pending.as_mut().map(|s| existing(s, r));
                    match pending.transpose()?.flatten() {
                        Some(found) => Ok(Added::Duplicate(found)),
                        None => Err(e.into()),
                    }
                }
                Err(e) => Err(e.into()),
            };
        }
        // Bound one by one (no slice of trait objects): this runs millions of times.
        let stmt = &mut self.insert;
        stmt.raw_bind_parameter(1, r.site_id)?;
        stmt.raw_bind_parameter(2, r.depth_cm)?;
        stmt.raw_bind_parameter(3, r.sensor)?;
        stmt.raw_bind_parameter(4, r.sensor_id)?;
        stmt.raw_bind_parameter(5, r.time)?;
        stmt.raw_bind_parameter(6, r.value)?;
        stmt.raw_bind_parameter(7, r.batch_id)?;
        stmt.raw_bind_parameter(8, line)?;
        match stmt.raw_execute() {
            Ok(_) => Ok(Added::Stored(self.conn.last_insert_rowid())),
            Err(e) if is_unique_violation(&e) => match existing(&mut self.find, r)? {
                Some(found) => Ok(Added::Duplicate(found)),
                None => Err(e.into()),
            },
            Err(e) => Err(e.into()),
        }
    }

    /// Every record of one sensor in time order, stored ones and those this command added:
    /// `(handle, seconds since 1970 UTC, value, added by this command)`. Batches from
    /// `first_batch` on (or negative, in a dry run) count as this command's.
    ///
    /// # Errors
    /// An SQLite error.
    pub fn series(
        &self,
        site_id: i64,
        sensor_id: &str,
        first_batch: i64,
        mut each: impl FnMut(i64, i64, f64, bool),
    ) -> Result<()> {
        let sql = if self.dry_run {
            "SELECT id, unixepoch(time), value, 0, time FROM main.logger_record
                 WHERE site_id = ?1 AND sensor_id = ?2
             UNION ALL
             SELECT source_line, unixepoch(time), value, 1, time FROM temp.logger_pending
                 WHERE site_id = ?1 AND sensor_id = ?2
             ORDER BY 5"
        } else {
            "SELECT id, unixepoch(time), value, coalesce(batch_id >= ?3, 0), time
             FROM logger_record WHERE site_id = ?1 AND sensor_id = ?2 ORDER BY time"
        };
        let mut stmt = self.conn.prepare_cached(sql)?;
        let mut rows = if self.dry_run {
            stmt.query(params![site_id, sensor_id])?
        } else {
            stmt.query(params![site_id, sensor_id, first_batch])?
        };
        while let Some(row) = rows.next()? {
            each(row.get(0)?, row.get(1)?, row.get(2)?, row.get(3)?);
        }
        Ok(())
    }
}

fn existing(stmt: &mut CachedStatement<'_>, r: &NewRecord<'_>) -> Result<Option<Existing>> {
    Ok(stmt
        .query_row(params![r.site_id, r.sensor_id, r.time], |row| {
            Ok(Existing {
                value: row.get(0)?,
                batch_id: row.get(1)?,
                file_name: row.get(2)?,
                line: row.get::<_, Option<i64>>(3)?.map(|l| l.max(0) as u64),
            })
        })
        .optional()?)
}

/// What the campaign already holds about a sensor.
#[derive(Debug, Clone, PartialEq)]
pub struct StoredSensor {
    /// Depth of its records, cm.
    pub depth_cm: f64,
    /// Its kind.
    pub sensor: SensorKind,
    /// File and line of its latest record, for messages.
    pub file_name: Option<String>,
    /// Line of its latest record.
    pub line: Option<u64>,
}

/// The stored sensor `sensor_id` of site `site_id`, if it has records.
///
/// # Errors
/// An SQLite error.
pub fn stored_sensor(
    conn: &Connection,
    site_id: i64,
    sensor_id: &str,
) -> Result<Option<StoredSensor>> {
    let mut stmt = conn.prepare_cached(
        "SELECT r.depth_cm, r.sensor, b.file_name, r.source_line FROM logger_record r
         LEFT JOIN import_batch b ON b.id = r.batch_id
         WHERE r.site_id = ?1 AND r.sensor_id = ?2 ORDER BY r.time DESC LIMIT 1",
    )?;
    Ok(stmt
        .query_row(params![site_id, sensor_id], |row| {
            Ok(StoredSensor {
                depth_cm: row.get(0)?,
                sensor: row.get(1)?,
                file_name: row.get(2)?,
                line: row.get::<_, Option<i64>>(3)?.map(|l| l.max(0) as u64),
            })
        })
        .optional()?)
}

/// Inserts suggested flags (origin auto) on logger records, stamped with one time.
pub struct FlagWriter<'conn> {
    stmt: CachedStatement<'conn>,
    now: SqlTime,
}

impl<'conn> FlagWriter<'conn> {
    /// Prepare on `conn` (the command's transaction).
    ///
    /// # Errors
    /// An SQLite error.
    pub fn new(conn: &'conn Connection) -> Result<Self> {
        Ok(Self {
            stmt: conn.prepare_cached(
                "INSERT INTO flag (logger_record_id, reason, score, origin, status, created_at)
                 VALUES (?1, ?2, ?3, 'auto', 'suggested', ?4)",
            )?,
            now: SqlTime::now(),
        })
    }

    /// Suggest a flag on record `record_id`.
    ///
    /// # Errors
    /// An empty reason, a missing record, or another SQLite error.
    pub fn suggest(&mut self, record_id: i64, reason: &str, score: f64) -> Result<()> {
        let score = score.is_finite().then_some(score);
        self.stmt
            .execute(params![record_id, reason, score, self.now])?;
        Ok(())
    }
}

/// Withdraw the open suggestions whose reason starts with one of `prefixes` on the records of
/// one sensor added from batch `first_batch` on (used when a sensor's ordered checks are run
/// again over its whole series). Flags are never deleted: they become `cleared` by the checks,
/// which keeps the audit trail. Returns how many were withdrawn.
///
/// # Errors
/// An SQLite error.
pub fn withdraw_new_flags(
    conn: &Connection,
    site_id: i64,
    sensor_id: &str,
    first_batch: i64,
    prefixes: &[&str],
) -> Result<usize> {
    let mut removed = 0;
    for prefix in prefixes {
        removed += conn
            .prepare_cached(
                "UPDATE flag SET status = 'cleared', decided_by = 'checks', decided_at = ?5,
                     note = 'withdrawn: the checks were run again over the whole series'
                 WHERE status = 'suggested' AND origin = 'auto'
                   AND substr(reason, 1, length(?4)) = ?4 AND logger_record_id IN
                     (SELECT id FROM logger_record
                      WHERE site_id = ?1 AND sensor_id = ?2 AND batch_id >= ?3)",
            )?
            .execute(params![
                site_id,
                sensor_id,
                first_batch,
                prefix,
                SqlTime::now()
            ])?;
    }
    Ok(removed)
}

/// Set the row count of an import batch once its file has been read.
///
/// # Errors
/// An SQLite error.
pub fn set_batch_rows(conn: &Connection, batch_id: i64, rows: u64) -> Result<()> {
    conn.prepare_cached("UPDATE import_batch SET rows = ?2 WHERE id = ?1")?
        .execute(params![batch_id, rows as i64])?;
    Ok(())
}

/// A sensor with records in the campaign.
#[derive(Debug, Clone, PartialEq)]
pub struct SensorRef {
    /// Database id of its site.
    pub site_id: i64,
    /// Code of its site.
    pub site: String,
    /// The sensor's id within its site.
    pub sensor_id: String,
    /// Depth, cm.
    pub depth_cm: f64,
    /// Tensiometer or water content.
    pub sensor: SensorKind,
}

/// Every sensor with records (or those of site `site_id`), by site id and sensor id.
///
/// Walks the key index from one sensor to the next (a loose index scan), so it costs one
/// index seek per sensor however many records each has.
///
/// # Errors
/// An SQLite error.
pub fn sensors(conn: &Connection, site_id: Option<i64>) -> Result<Vec<SensorRef>> {
    let mut stmt = conn.prepare_cached(
        "SELECT r.site_id, s.code, r.sensor_id, r.depth_cm, r.sensor
         FROM logger_record r JOIN site s ON s.id = r.site_id
         WHERE (r.site_id, r.sensor_id) > (?1, ?2)
         ORDER BY r.site_id, r.sensor_id LIMIT 1",
    )?;
    let mut out = Vec::new();
    // Start just before the first key: (site, "") is below every sensor id of the site.
    let (mut at_site, mut at_sensor) = (site_id.unwrap_or(i64::MIN), String::new());
    loop {
        let next = stmt
            .query_row(params![at_site, at_sensor], |r| {
                Ok(SensorRef {
                    site_id: r.get(0)?,
                    site: r.get(1)?,
                    sensor_id: r.get(2)?,
                    depth_cm: r.get(3)?,
                    sensor: r.get(4)?,
                })
            })
            .optional()?;
        let Some(next) = next else { break };
        if site_id.is_some_and(|s| s != next.site_id) {
            break;
        }
        at_site = next.site_id;
        at_sensor.clone_from(&next.sensor_id);
        out.push(next);
    }
    Ok(out)
}

/// A sensor's series for pairing, in time order: `(seconds since 1970 UTC, value)` of every
/// record without an accepted flag or a suggestion not yet dismissed, and how many records
/// were left out for such flags.
///
/// # Errors
/// An SQLite error.
pub fn usable_series(
    conn: &Connection,
    site_id: i64,
    sensor_id: &str,
) -> Result<(Vec<(i64, f64)>, u64)> {
    let mut stmt = conn.prepare_cached(
        "SELECT unixepoch(r.time), r.value, EXISTS (SELECT 1 FROM flag f
             WHERE f.logger_record_id = r.id AND f.status IN ('accepted', 'suggested'))
         FROM logger_record r WHERE r.site_id = ?1 AND r.sensor_id = ?2 ORDER BY r.time",
    )?;
    let mut rows = stmt.query(params![site_id, sensor_id])?;
    let (mut points, mut left_out) = (Vec::new(), 0u64);
    while let Some(row) = rows.next()? {
        if row.get::<_, bool>(2)? {
            left_out += 1;
        } else {
            points.push((row.get(0)?, row.get(1)?));
        }
    }
    Ok((points, left_out))
}

/// A sensor's records between two instants (inclusive, seconds since 1970 UTC), in time
/// order, with the number of live flags (accepted, or suggested and not yet decided) on each:
/// `(time, value, flags)`. For time-series views.
///
/// # Errors
/// An SQLite error.
pub fn series_between(
    conn: &Connection,
    site_id: i64,
    sensor_id: &str,
    from: i64,
    to: i64,
) -> Result<Vec<(i64, f64, u32)>> {
    let mut out = Vec::new();
    each_between(conn, site_id, sensor_id, from, to, |t, v, f| {
        out.push((t, v, f));
    })?;
    Ok(out)
}

/// [`series_between`] without collecting: `each(time, value, flags)` for every record in time
/// order, so a view can thin a series of millions of records in flat memory.
///
/// # Errors
/// An SQLite error.
pub fn each_between(
    conn: &Connection,
    site_id: i64,
    sensor_id: &str,
    from: i64,
    to: i64,
    mut each: impl FnMut(i64, f64, u32),
) -> Result<()> {
    let (Some(from), Some(to)) = (utc_text(from), utc_text(to)) else {
        return Ok(());
    };
    let text = |b: [u8; 20]| b.iter().map(|&c| char::from(c)).collect::<String>();
    let (from, to) = (text(from), text(to));
    // The live flags of the window first, driven by the flag table (CROSS JOIN keeps that
    // order: flags are few, records many), so the records then stream without a lookup each.
    let mut flags: HashMap<i64, u32> = HashMap::new();
    let mut stmt = conn.prepare_cached(
        "SELECT g.id, count(*) FROM flag f CROSS JOIN logger_record g ON g.id = f.logger_record_id
         WHERE f.status IN ('accepted', 'suggested') AND g.site_id = ?1 AND g.sensor_id = ?2
             AND g.time BETWEEN ?3 AND ?4
         GROUP BY g.id",
    )?;
    let mut rows = stmt.query(params![site_id, sensor_id, from, to])?;
    while let Some(row) = rows.next()? {
        flags.insert(row.get(0)?, row.get(1)?);
    }
    let mut stmt = conn.prepare_cached(
        "SELECT r.id, unixepoch(r.time), r.value FROM logger_record r
         WHERE r.site_id = ?1 AND r.sensor_id = ?2 AND r.time BETWEEN ?3 AND ?4 ORDER BY r.time",
    )?;
    let mut rows = stmt.query(params![site_id, sensor_id, from, to])?;
    while let Some(row) = rows.next()? {
        let id: i64 = row.get(0)?;
        each(
            row.get(1)?,
            row.get(2)?,
            flags.get(&id).copied().unwrap_or(0),
        );
    }
    Ok(())
}

/// The first and last record time of a sensor (seconds since 1970 UTC), `None` without
/// records. Two seeks on the key index, whatever the series' length.
///
/// # Errors
/// An SQLite error.
pub fn span(conn: &Connection, site_id: i64, sensor_id: &str) -> Result<Option<(i64, i64)>> {
    let edge = |sql: &str| -> Result<Option<i64>> {
        Ok(conn
            .prepare_cached(sql)?
            .query_row(params![site_id, sensor_id], |r| r.get(0))
            .optional()?)
    };
    let first = edge(
        "SELECT unixepoch(time) FROM logger_record WHERE site_id = ?1 AND sensor_id = ?2
         ORDER BY time LIMIT 1",
    )?;
    let last = edge(
        "SELECT unixepoch(time) FROM logger_record WHERE site_id = ?1 AND sensor_id = ?2
         ORDER BY time DESC LIMIT 1",
    )?;
    Ok(first.zip(last))
}

/// Records with a live flag (accepted, or suggested and not yet decided), per site id and
/// sensor id. Driven by the flag table, so it costs nothing for series without flags.
///
/// # Errors
/// An SQLite error.
pub fn flagged_by_sensor(conn: &Connection) -> Result<HashMap<(i64, String), usize>> {
    let mut stmt = conn.prepare_cached(
        "SELECT g.site_id, g.sensor_id, count(DISTINCT g.id) FROM flag f
         JOIN logger_record g ON g.id = f.logger_record_id
         WHERE f.status IN ('accepted', 'suggested') GROUP BY g.site_id, g.sensor_id",
    )?;
    let rows = stmt.query_map([], |r| {
        Ok(((r.get(0)?, r.get(1)?), r.get::<_, i64>(2)?.max(0) as usize))
    })?;
    Ok(rows.collect::<rusqlite::Result<_>>()?)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::store::Campaign;

    /// Site 1 with a tensiometer `T` (records at 0, 3600, 7200 s) and a probe `W` (one record at
    /// 3600 s); a suggested flag on T's second record and a dismissed one on W's.
    fn campaign() -> Campaign {
        let c = Campaign::in_memory("t", 33.0, 1500.0).expect("campaign");
        c.connection()
            .execute_batch(
                "INSERT INTO site (id, uid, code) VALUES (1, '00000000-0000-4000-8000-000000000001', 'S');
                 INSERT INTO logger_record (id, site_id, depth_cm, sensor, sensor_id, time, value) VALUES
                     (1, 1, 30, 'tensiometer', 'T', '1970-01-01T00:00:00Z', 10),
                     (2, 1, 30, 'tensiometer', 'T', '1970-01-01T01:00:00Z', 900),
                     (3, 1, 30, 'tensiometer', 'T', '1970-01-01T02:00:00Z', 12),
                     (4, 1, 30, 'water_content', 'W', '1970-01-01T01:00:00Z', 0.3);
                 INSERT INTO flag (logger_record_id, reason, origin, status, created_at)
                     VALUES (2, 'spike', 'auto', 'suggested', '2026-01-01T00:00:00Z');
                 INSERT INTO flag (logger_record_id, reason, origin, status, created_at, decided_at)
                     VALUES (4, 'stuck', 'auto', 'dismissed', '2026-01-01T00:00:00Z',
                             '2026-01-02T00:00:00Z');",
            )
            .expect("fixture");
        c
    }

    #[test]
    fn spans_flag_counts_and_windows_of_a_series() {
        let c = campaign();
        let conn = c.connection();
        assert_eq!(span(conn, 1, "T").expect("span"), Some((0, 7200)));
        assert_eq!(span(conn, 1, "W").expect("span"), Some((3600, 3600)));
        assert_eq!(span(conn, 1, "none").expect("span"), None);
        let flagged = flagged_by_sensor(conn).expect("flagged");
        assert_eq!(flagged.get(&(1, "T".to_string())), Some(&1));
        assert_eq!(
            flagged.get(&(1, "W".to_string())),
            None,
            "a dismissal is no live flag"
        );
        let window = series_between(conn, 1, "T", 1, 7200).expect("series");
        assert_eq!(window, vec![(3600, 900.0, 1), (7200, 12.0, 0)]);
        let mut streamed = Vec::new();
        each_between(conn, 1, "T", 1, 7200, |t, v, f| streamed.push((t, v, f))).expect("each");
        assert_eq!(streamed, window);
        assert!(
            series_between(conn, 1, "T", -1_000_000_000_000, 0)
                .expect("outside the years")
                .is_empty()
        );
    }
}
