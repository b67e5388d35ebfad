//! Field logger records: the sensors, the bulk insert of an import (or its dry run), series in
//! time order, and the quality flags raised on records.
//!
//! A sensor (`logger_sensor`) is a site and a sensor id, with one depth and one kind. A record
//! (`logger_record`) names its sensor by id and holds its time as whole seconds since
//! 1970-01-01T00:00:00Z (`time_s`); every read of a series goes through the key index
//! `(logger_sensor_id, time_s)`, so it comes back in time order without a sort. The view
//! `logger_view` shows records with the columns of schema versions 1-10 (the time as text).

use std::collections::HashMap;
use std::fmt::Write as _;

use rusqlite::{CachedStatement, Connection, OptionalExtension, ffi, params};

use super::sql_types::SqlTime;
use super::{Result, StoreError};
use crate::field::time::{parse_instant, utc_string, utc_text};
use crate::model::domain::SensorKind;

/// The seconds since 1970 UTC of a time as stored and exchanged (`YYYY-MM-DDTHH:MM:SSZ`);
/// `None` for any other text.
pub fn stored_time(text: &str) -> Option<i64> {
    let secs = parse_instant(text, None).ok()?;
    let canonical = utc_text(secs)?;
    (canonical.as_slice() == text.as_bytes()).then_some(secs)
}

/// The stored text of a time (`YYYY-MM-DDTHH:MM:SSZ`) from seconds since 1970 UTC.
pub fn time_text(secs: i64) -> String {
    utc_string(secs)
}

/// A record about to be stored (canonical units).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct NewRecord {
    /// Its sensor: a `logger_sensor` id (in a dry run, negative for a sensor it would create).
    pub sensor: i64,
    /// UTC, seconds since 1970.
    pub time_s: i64,
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

/// How many records one insert statement writes (see [`RecordSink`]).
pub const CHUNK: usize = 64;

/// After a chunk that held a duplicate, how many records go in one by one before chunks
/// resume (a file that repeats stored records tends to repeat many).
const SINGLE_AFTER_DUPLICATE: usize = 64 * CHUNK;

/// Where records of an import go: the campaign's table, or (dry run) a temporary table that
/// stands in for it, so duplicates are found exactly as a real import would find them
/// while the campaign file is not written.
///
/// Records are queued and written [`CHUNK`] at a time by one `INSERT OR IGNORE` of many rows,
/// which costs SQLite far less per record than one statement each. Such a statement needs no
/// statement journal only because it cannot fail part-way: the record's foreign keys are
/// checked at commit, a key or check it breaks leaves the record out, and SQLite assigns the
/// ids (each the largest so far plus one, so a chunk's ids follow from the last). A chunk
/// that leaves a record out (the sensor already has one at that time) is taken back and
/// written one record at a time, each duplicate then reported with the record it repeats,
/// and the ids come out as one statement per record would give them.
pub struct RecordSink<'conn> {
    conn: &'conn Connection,
    dry_run: bool,
    insert: CachedStatement<'conn>,
    many: Option<CachedStatement<'conn>>,
    find: CachedStatement<'conn>,
    find_pending: Option<CachedStatement<'conn>>,
    queued: Vec<NewRecord>,
    /// The id the next record gets.
    next_id: i64,
    /// Records still to go in one by one after a duplicate.
    single: usize,
}

const INSERT: &str = "INSERT INTO logger_record (logger_sensor_id, time_s, value, batch_id, \
     source_line) VALUES (?1, ?2, ?3, ?4, ?5)";

const FIND: &str = "SELECT r.value, r.batch_id, b.file_name, r.source_line FROM logger_record r \
     LEFT JOIN import_batch b ON b.id = r.batch_id \
     WHERE r.logger_sensor_id = ?1 AND r.time_s = ?2";

/// The dry run's stand-in table (temporary: it lives outside the campaign file).
const PENDING: &str = "CREATE TEMP TABLE IF NOT EXISTS logger_pending (
         sensor INTEGER NOT NULL, time_s INTEGER NOT NULL,
         value REAL NOT NULL, batch_id INTEGER NOT NULL, source_line INTEGER NOT NULL,
         PRIMARY KEY (sensor, time_s)
     ) WITHOUT ROWID;
     DELETE FROM temp.logger_pending;";

fn is_unique_violation(e: &rusqlite::Error) -> bool {
    matches!(e, rusqlite::Error::SqliteFailure(f, _)
        if f.extended_code == ffi::SQLITE_CONSTRAINT_UNIQUE
            || f.extended_code == ffi::SQLITE_CONSTRAINT_PRIMARYKEY)
}

/// The statement that writes [`CHUNK`] records.
fn insert_many() -> String {
    let mut sql = String::from(
        "INSERT OR IGNORE INTO logger_record (logger_sensor_id, time_s, value, batch_id, \
         source_line) VALUES ",
    );
    for i in 0..CHUNK {
        let p = 5 * i;
        if i > 0 {
            sql.push(',');
        }
        let _ = write!(
            sql,
            "(?{}, ?{}, ?{}, ?{}, ?{})",
            p + 1,
            p + 2,
            p + 3,
            p + 4,
            p + 5
        );
    }
    sql
}

impl<'conn> RecordSink<'conn> {
    /// Records for the campaign's table (inside the command's write transaction).
    ///
    /// # Errors
    /// An SQLite error.
    pub fn writing(conn: &'conn Connection) -> Result<Self> {
        let last: i64 =
            conn.query_row("SELECT coalesce(max(id), 0) FROM logger_record", [], |r| {
                r.get(0)
            })?;
        // Near the largest id SQLite picks ids at random: one statement per record then.
        let many = if last < i64::MAX - 2 * CHUNK as i64 {
            Some(conn.prepare_cached(&insert_many())?)
        } else {
            None
        };
        Ok(Self {
            conn,
            dry_run: false,
            insert: conn.prepare_cached(INSERT)?,
            many,
            find: conn.prepare_cached(FIND)?,
            find_pending: None,
            queued: Vec::with_capacity(CHUNK),
            next_id: last.saturating_add(1),
            single: 0,
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
                "INSERT INTO temp.logger_pending (sensor, time_s, value, batch_id, source_line)
                 VALUES (?1, ?2, ?3, ?4, ?5)",
            )?,
            many: None,
            find: conn.prepare_cached(FIND)?,
            find_pending: Some(conn.prepare_cached(
                "SELECT value, batch_id, NULL, source_line FROM temp.logger_pending
                 WHERE sensor = ?1 AND time_s = ?2",
            )?),
            queued: Vec::new(),
            next_id: 1,
            single: 0,
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

    /// Queue a record. Once [`CHUNK`] are queued (a dry run: at once) they are written and
    /// what became of each is appended to `done`, in the order they were queued.
    ///
    /// # Errors
    /// An SQLite error other than the sensor-and-time key (a value outside the schema's
    /// ranges).
    pub fn push(&mut self, r: NewRecord, done: &mut Vec<Added>) -> Result<()> {
        if self.dry_run {
            done.push(self.add_pending(&r)?);
            return Ok(());
        }
        self.queued.push(r);
        if self.queued.len() >= CHUNK {
            self.flush(done)?;
        }
        Ok(())
    }

    /// Write the queued records now (see [`RecordSink::push`]).
    ///
    /// # Errors
    /// As [`RecordSink::push`].
    pub fn flush(&mut self, done: &mut Vec<Added>) -> Result<()> {
        if self.queued.is_empty() {
            return Ok(());
        }
        let queued = std::mem::take(&mut self.queued);
        let result = self.write(&queued, done);
        self.queued = queued;
        self.queued.clear();
        result
    }

    fn write(&mut self, queued: &[NewRecord], done: &mut Vec<Added>) -> Result<()> {
        if queued.len() == CHUNK
            && self.single == 0
            && let Some(stmt) = &mut self.many
        {
            for (i, r) in queued.iter().enumerate() {
                bind(stmt, 5 * i, r)?;
            }
            let written = stmt.raw_execute()?;
            let first = self.next_id;
            if written == CHUNK {
                // SQLite gave each record the largest id so far plus one, in order.
                let last = self.conn.last_insert_rowid();
                if last != first + CHUNK as i64 - 1 {
                    return Err(StoreError::Corrupt(format!(
                        "logger records got ids up to {last}, expected {first} and on"
                    )));
                }
                done.extend((first..=last).map(Added::Stored));
                self.next_id = last + 1;
                return Ok(());
            }
            // A record was left out: take the chunk back (its ids are free again) and go
            // one by one.
            self.conn
                .prepare_cached("DELETE FROM logger_record WHERE id >= ?1")?
                .execute([first])?;
            self.single = SINGLE_AFTER_DUPLICATE;
        }
        for r in queued {
            done.push(self.add_one(r)?);
            self.single = self.single.saturating_sub(1);
        }
        Ok(())
    }

    /// One record by one statement, reporting a duplicate.
    fn add_one(&mut self, r: &NewRecord) -> Result<Added> {
        bind(&mut self.insert, 0, r)?;
        match self.insert.raw_execute() {
            Ok(_) => {
                let id = self.conn.last_insert_rowid();
                self.next_id = id.saturating_add(1);
                Ok(Added::Stored(id))
            }
            Err(e) if is_unique_violation(&e) => match existing(&mut self.find, r)? {
                Some(found) => Ok(Added::Duplicate(found)),
                None => Err(e.into()),
            },
            Err(e) => Err(e.into()),
        }
    }

    /// A dry run's record: checked against the campaign, then kept in the temporary table.
    fn add_pending(&mut self, r: &NewRecord) -> Result<Added> {
        let line = r.line as i64;
        if let Some(found) = existing(&mut self.find, r)? {
            return Ok(Added::Duplicate(found));
        }
        match self
            .insert
            .execute(params![r.sensor, r.time_s, r.value, r.batch_id, line])
        {
            Ok(_) => Ok(Added::Stored(line)),
            Err(e) if is_unique_violation(&e) => {
                let pending = self.find_pending.as_mut().map(|s| existing(s, r));
                match pending.transpose()?.flatten() {
                    Some(found) => Ok(Added::Duplicate(found)),
                    None => Err(e.into()),
                }
            }
            Err(e) => Err(e.into()),
        }
    }

    /// Every record of one sensor in time order, stored ones and those this command added:
    /// `(handle, seconds since 1970 UTC, value, added by this command)`. Batches from
    /// `first_batch` on (or negative, in a dry run) count as this command's. Queued records
    /// are written first.
    ///
    /// # Errors
    /// An SQLite error.
    pub fn series(
        &self,
        sensor: i64,
        first_batch: i64,
        mut each: impl FnMut(i64, i64, f64, bool),
    ) -> Result<()> {
        if !self.queued.is_empty() {
            return Err(StoreError::Refused(
                "logger records are still queued; flush them before reading a series".into(),
            ));
        }
        let sql = if self.dry_run {
            "SELECT id, time_s, value, 0 FROM main.logger_record WHERE logger_sensor_id = ?1
             UNION ALL
             SELECT source_line, time_s, value, 1 FROM temp.logger_pending WHERE sensor = ?1
             ORDER BY 2"
        } else {
            "SELECT id, time_s, value, coalesce(batch_id >= ?2, 0)
             FROM logger_record WHERE logger_sensor_id = ?1 ORDER BY time_s"
        };
        let mut stmt = self.conn.prepare_cached(sql)?;
        let mut rows = if self.dry_run {
            stmt.query(params![sensor])?
        } else {
            stmt.query(params![sensor, first_batch])?
        };
        while let Some(row) = rows.next()? {
            each(row.get(0)?, row.get(1)?, row.get(2)?, row.get(3)?);
        }
        Ok(())
    }
}

/// Bind record `r` to the five parameters after `at`.
fn bind(stmt: &mut CachedStatement<'_>, at: usize, r: &NewRecord) -> Result<()> {
    // Bound one by one (no slice of trait objects): this runs millions of times.
    stmt.raw_bind_parameter(at + 1, r.sensor)?;
    stmt.raw_bind_parameter(at + 2, r.time_s)?;
    stmt.raw_bind_parameter(at + 3, r.value)?;
    stmt.raw_bind_parameter(at + 4, r.batch_id)?;
    stmt.raw_bind_parameter(at + 5, r.line as i64)?;
    Ok(())
}

fn existing(stmt: &mut CachedStatement<'_>, r: &NewRecord) -> Result<Option<Existing>> {
    Ok(stmt
        .query_row(params![r.sensor, r.time_s], |row| {
            Ok(Existing {
                value: row.get(0)?,
                batch_id: row.get(1)?,
                file_name: row.get(2)?,
                line: row.get::<_, Option<i64>>(3)?.map(|l| l.max(0) as u64),
            })
        })
        .optional()?)
}

/// What the campaign holds about a sensor.
#[derive(Debug, Clone, PartialEq)]
pub struct StoredSensor {
    /// Its `logger_sensor` id.
    pub id: i64,
    /// Its depth, cm.
    pub depth_cm: f64,
    /// Its kind.
    pub sensor: SensorKind,
    /// File of its latest record at that depth and of that kind, for messages.
    pub file_name: Option<String>,
    /// Line of that record.
    pub line: Option<u64>,
}

/// The stored sensor `sensor_id` of site `site_id`, if the campaign has it.
///
/// # Errors
/// An SQLite error.
pub fn stored_sensor(
    conn: &Connection,
    site_id: i64,
    sensor_id: &str,
) -> Result<Option<StoredSensor>> {
    let mut stmt = conn.prepare_cached(
        "SELECT s.id, s.depth_cm, s.sensor, b.file_name, r.source_line
         FROM logger_sensor s
         LEFT JOIN logger_record r ON r.id = (
             SELECT x.id FROM logger_record x
             WHERE x.logger_sensor_id = s.id AND x.depth_cm IS NULL AND x.sensor IS NULL
             ORDER BY x.time_s DESC LIMIT 1)
         LEFT JOIN import_batch b ON b.id = r.batch_id
         WHERE s.site_id = ?1 AND s.sensor_id = ?2",
    )?;
    Ok(stmt
        .query_row(params![site_id, sensor_id], |row| {
            Ok(StoredSensor {
                id: row.get(0)?,
                depth_cm: row.get(1)?,
                sensor: row.get(2)?,
                file_name: row.get(3)?,
                line: row.get::<_, Option<i64>>(4)?.map(|l| l.max(0) as u64),
            })
        })
        .optional()?)
}

/// Add sensor `sensor_id` of site `site_id` at `depth_cm` of `kind`; returns its id.
///
/// # Errors
/// The site has that sensor already, a value outside the schema's ranges, or another SQLite
/// error.
pub fn insert_sensor(
    conn: &Connection,
    site_id: i64,
    sensor_id: &str,
    depth_cm: f64,
    kind: SensorKind,
) -> Result<i64> {
    conn.prepare_cached(
        "INSERT INTO logger_sensor (site_id, sensor_id, depth_cm, sensor) VALUES (?1, ?2, ?3, ?4)",
    )?
    .execute(params![site_id, sensor_id, depth_cm, kind])?;
    Ok(conn.last_insert_rowid())
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
/// sensor `sensor` (a `logger_sensor` id) added from batch `first_batch` on (used when a
/// sensor's ordered checks are run again over its whole series). Flags are never deleted: they
/// become `cleared` by the checks, which keeps the audit trail. Returns how many were withdrawn.
///
/// # Errors
/// An SQLite error.
pub fn withdraw_new_flags(
    conn: &Connection,
    sensor: i64,
    first_batch: i64,
    prefixes: &[&str],
) -> Result<usize> {
    let mut removed = 0;
    for prefix in prefixes {
        removed += conn
            .prepare_cached(
                "UPDATE flag SET status = 'cleared', decided_by = 'checks', decided_at = ?4,
                     note = 'withdrawn: the checks were run again over the whole series'
                 WHERE status = 'suggested' AND origin = 'auto'
                   AND substr(reason, 1, length(?3)) = ?3 AND logger_record_id IN
                     (SELECT id FROM logger_record
                      WHERE logger_sensor_id = ?1 AND batch_id >= ?2)",
            )?
            .execute(params![sensor, first_batch, prefix, SqlTime::now()])?;
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
    /// Its `logger_sensor` id.
    pub id: i64,
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
/// # Errors
/// An SQLite error.
pub fn sensors(conn: &Connection, site_id: Option<i64>) -> Result<Vec<SensorRef>> {
    let mut stmt = conn.prepare_cached(
        "SELECT k.id, k.site_id, s.code, k.sensor_id, k.depth_cm, k.sensor
         FROM logger_sensor k JOIN site s ON s.id = k.site_id
         WHERE (?1 IS NULL OR k.site_id = ?1)
           AND EXISTS (SELECT 1 FROM logger_record r WHERE r.logger_sensor_id = k.id)
         ORDER BY k.site_id, k.sensor_id",
    )?;
    let rows = stmt.query_map(params![site_id], |r| {
        Ok(SensorRef {
            id: r.get(0)?,
            site_id: r.get(1)?,
            site: r.get(2)?,
            sensor_id: r.get(3)?,
            depth_cm: r.get(4)?,
            sensor: r.get(5)?,
        })
    })?;
    Ok(rows.collect::<rusqlite::Result<_>>()?)
}

/// The id of sensor `sensor_id` of site `site_id`, `None` when the campaign has no such sensor.
///
/// # Errors
/// An SQLite error.
pub fn sensor_key(conn: &Connection, site_id: i64, sensor_id: &str) -> Result<Option<i64>> {
    Ok(conn
        .prepare_cached("SELECT id FROM logger_sensor WHERE site_id = ?1 AND sensor_id = ?2")?
        .query_row(params![site_id, sensor_id], |r| r.get(0))
        .optional()?)
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
    let (mut points, mut left_out) = (Vec::new(), 0u64);
    let Some(sensor) = sensor_key(conn, site_id, sensor_id)? else {
        return Ok((points, left_out));
    };
    let mut stmt = conn.prepare_cached(
        "SELECT r.time_s, r.value, EXISTS (SELECT 1 FROM flag f
             WHERE f.logger_record_id = r.id AND f.status IN ('accepted', 'suggested'))
         FROM logger_record r WHERE r.logger_sensor_id = ?1 ORDER BY r.time_s",
    )?;
    let mut rows = stmt.query(params![sensor])?;
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
    let Some(sensor) = sensor_key(conn, site_id, sensor_id)? else {
        return Ok(());
    };
    // The live flags of the window first, driven by the flag table (CROSS JOIN keeps that
    // order: flags are few, records many), so the records then stream without a lookup each.
    let mut flags: HashMap<i64, u32> = HashMap::new();
    let mut stmt = conn.prepare_cached(
        "SELECT g.id, count(*) FROM flag f CROSS JOIN logger_record g ON g.id = f.logger_record_id
         WHERE f.status IN ('accepted', 'suggested') AND g.logger_sensor_id = ?1
             AND g.time_s BETWEEN ?2 AND ?3
         GROUP BY g.id",
    )?;
    let mut rows = stmt.query(params![sensor, from, to])?;
    while let Some(row) = rows.next()? {
        flags.insert(row.get(0)?, row.get(1)?);
    }
    let mut stmt = conn.prepare_cached(
        "SELECT r.id, r.time_s, r.value FROM logger_record r
         WHERE r.logger_sensor_id = ?1 AND r.time_s BETWEEN ?2 AND ?3 ORDER BY r.time_s",
    )?;
    let mut rows = stmt.query(params![sensor, from, to])?;
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
    let Some(sensor) = sensor_key(conn, site_id, sensor_id)? else {
        return Ok(None);
    };
    // Two subqueries, each one seek (min and max in one select would scan the range).
    Ok(conn
        .prepare_cached(
            "SELECT (SELECT time_s FROM logger_record WHERE logger_sensor_id = ?1
                     ORDER BY time_s LIMIT 1),
                    (SELECT time_s FROM logger_record WHERE logger_sensor_id = ?1
                     ORDER BY time_s DESC LIMIT 1)",
        )?
        .query_row(params![sensor], |r| {
            Ok(r.get::<_, Option<i64>>(0)?.zip(r.get::<_, Option<i64>>(1)?))
        })?)
}

/// Records with a live flag (accepted, or suggested and not yet decided), per site id and
/// sensor id. Driven by the flag table, so it costs nothing for series without flags.
///
/// # Errors
/// An SQLite error.
pub fn flagged_by_sensor(conn: &Connection) -> Result<HashMap<(i64, String), usize>> {
    let mut stmt = conn.prepare_cached(
        "SELECT k.site_id, k.sensor_id, count(DISTINCT g.id) FROM flag f
         JOIN logger_record g ON g.id = f.logger_record_id
         JOIN logger_sensor k ON k.id = g.logger_sensor_id
         WHERE f.status IN ('accepted', 'suggested') GROUP BY k.site_id, k.sensor_id",
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
                 INSERT INTO logger_sensor (id, site_id, sensor_id, depth_cm, sensor) VALUES
                     (1, 1, 'T', 30, 'tensiometer'), (2, 1, 'W', 30, 'water_content');
                 INSERT INTO logger_record (id, logger_sensor_id, time_s, value) VALUES
                     (1, 1, 0, 10), (2, 1, 3600, 900), (3, 1, 7200, 12), (4, 2, 3600, 0.3);
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
            series_between(conn, 1, "T", -1_000_000_000_000, -1)
                .expect("before the records")
                .is_empty()
        );
        assert_eq!(
            series_between(conn, 1, "T", -1_000_000_000_000, 0).expect("from before the years"),
            vec![(0, 10.0, 0)]
        );
    }

    fn outcomes(sink: &mut RecordSink<'_>, records: &[NewRecord]) -> Vec<Added> {
        let mut done = Vec::new();
        for r in records {
            sink.push(*r, &mut done).expect("push");
        }
        sink.flush(&mut done).expect("flush");
        done
    }

    fn record(sensor: i64, time_s: i64, value: f64, line: u64) -> NewRecord {
        NewRecord {
            sensor,
            time_s,
            value,
            batch_id: 1,
            line,
        }
    }

    /// An empty campaign with one batch, one site and sensors 1 (`T`) and 2 (`W`).
    fn empty() -> Campaign {
        let c = Campaign::in_memory("t", 33.0, 1500.0).expect("campaign");
        c.connection()
            .execute_batch(
                "INSERT INTO site (id, uid, code) VALUES (1, '00000000-0000-4000-8000-000000000001', 'S');
                 INSERT INTO import_batch (id, file_name, sha256, kind, rows, imported_at)
                     VALUES (1, 'a.csv', printf('%064d', 0), 'logger', 0, '2026-01-01T00:00:00Z');",
            )
            .expect("fixture");
        insert_sensor(c.connection(), 1, "T", 30.0, SensorKind::Tensiometer).expect("T");
        insert_sensor(c.connection(), 1, "W", 30.0, SensorKind::WaterContent).expect("W");
        c
    }

    #[test]
    fn chunks_give_the_ids_and_duplicates_of_one_statement_per_record() {
        // Alternating sensors. Line 33 repeats line 31's sensor and time (one chunk holds
        // both); once the records after that chunk have gone in one by one, chunks resume,
        // and the last record repeats line 10's (a chunk against a stored record).
        let n = 2 * CHUNK + SINGLE_AFTER_DUPLICATE + CHUNK;
        let mut records: Vec<NewRecord> = (0..n as u64)
            .map(|i| record(1 + (i % 2) as i64, 60 * (i / 2) as i64, 0.5, 2 + i))
            .collect();
        records[31] = record(records[29].sensor, records[29].time_s, 0.25, 33);
        records[n - 1] = record(records[8].sensor, records[8].time_s, 0.5, n as u64 + 1);
        let mut c = empty();
        let tx = c.transaction().expect("tx");
        let mut sink = RecordSink::writing(&tx).expect("sink");
        let done = outcomes(&mut sink, &records);
        drop(sink);
        // The same records one statement each, in another campaign.
        let mut one = empty();
        let tx_one = one.transaction().expect("tx");
        let mut single = RecordSink::writing(&tx_one).expect("sink");
        single.many = None;
        let expected = outcomes(&mut single, &records);
        drop(single);
        assert_eq!(done, expected);
        assert_eq!(done.len(), records.len());
        let stored: Vec<i64> = done
            .iter()
            .filter_map(|a| match a {
                Added::Stored(id) => Some(*id),
                Added::Duplicate(_) => None,
            })
            .collect();
        assert_eq!(stored, (1..=records.len() as i64 - 2).collect::<Vec<_>>());
        assert!(
            matches!(&done[31], Added::Duplicate(e) if e.line == Some(31) && e.value.to_bits() == 0.5f64.to_bits())
        );
        assert_eq!(
            done[n - 1],
            Added::Duplicate(Existing {
                value: 0.5,
                batch_id: Some(1),
                file_name: Some("a.csv".into()),
                line: Some(10),
            })
        );
        let rows: Vec<(i64, i64, i64, f64)> = tx
            .prepare("SELECT id, logger_sensor_id, time_s, value FROM logger_record ORDER BY id")
            .expect("prepare")
            .query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?)))
            .expect("query")
            .collect::<rusqlite::Result<_>>()
            .expect("rows");
        let rows_one: Vec<(i64, i64, i64, f64)> = tx_one
            .prepare("SELECT id, logger_sensor_id, time_s, value FROM logger_record ORDER BY id")
            .expect("prepare")
            .query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?)))
            .expect("query")
            .collect::<rusqlite::Result<_>>()
            .expect("rows");
        assert_eq!(rows, rows_one);
        assert_eq!(rows.len(), records.len() - 2);
        tx.commit()
            .expect("the deferred foreign keys hold at commit");
    }

    #[test]
    fn a_record_the_schema_refuses_is_an_error_not_a_duplicate() {
        let mut c = empty();
        let tx = c.transaction().expect("tx");
        let mut sink = RecordSink::writing(&tx).expect("sink");
        let mut records: Vec<NewRecord> = (0..CHUNK as u64)
            .map(|i| record(1, 60 * i as i64, 10.0, 2 + i))
            .collect();
        records[5].value = 2e7; // beyond pF 7
        let mut done = Vec::new();
        let err = records
            .iter()
            .try_for_each(|r| sink.push(*r, &mut done))
            .and_then(|()| sink.flush(&mut done))
            .expect_err("refused");
        assert!(err.to_string().contains("CHECK"), "{err}");
    }

    #[test]
    fn a_dry_run_finds_duplicates_in_the_campaign_and_among_its_own_records() {
        let c = campaign();
        let conn = c.connection();
        let mut sink = RecordSink::dry_run(conn).expect("sink");
        let records = [
            record(1, 3600, 901.0, 2),
            record(1, 10_800, 13.0, 3),
            record(1, 10_800, 14.0, 4),
            record(-1, 10_800, 14.0, 5),
        ];
        let done = outcomes(&mut sink, &records);
        assert!(
            matches!(&done[0], Added::Duplicate(e) if e.value.to_bits() == 900f64.to_bits() && e.line.is_none())
        );
        assert_eq!(done[1], Added::Stored(3));
        assert!(matches!(&done[2], Added::Duplicate(e) if e.line == Some(3)));
        assert_eq!(done[3], Added::Stored(5));
        let mut series = Vec::new();
        sink.series(1, 0, |h, t, v, new| series.push((h, t, v, new)))
            .expect("series");
        assert_eq!(
            series,
            vec![
                (1, 0, 10.0, false),
                (2, 3600, 900.0, false),
                (3, 7200, 12.0, false),
                (3, 10_800, 13.0, true)
            ]
        );
        let stored: i64 = conn
            .query_row("SELECT count(*) FROM main.logger_record", [], |r| r.get(0))
            .expect("count");
        assert_eq!(stored, 4, "a dry run writes nothing to the campaign");
    }

    #[test]
    fn stored_times_are_exactly_the_text_form() {
        assert_eq!(stored_time("1970-01-01T00:00:00Z"), Some(0));
        assert_eq!(stored_time("2026-05-01T10:00:00Z"), Some(1_777_629_600));
        assert_eq!(time_text(1_777_629_600), "2026-05-01T10:00:00Z");
        assert_eq!(stored_time("0000-01-01T00:00:00Z"), Some(-62_167_219_200));
        assert_eq!(stored_time("9999-12-31T23:59:59Z"), Some(253_402_300_799));
        for other in [
            "2026-05-01T12:00:00+02:00",
            "2026-05-01 10:00:00Z",
            "2026-05-01T10:00Z",
            "2026-05-01T10:00:00.5Z",
            "2026-05-01T10:00:00z",
            "",
        ] {
            assert_eq!(stored_time(other), None, "{other:?}");
        }
    }

    #[test]
    fn the_view_shows_records_with_the_old_columns_and_text_times() {
        let c = campaign();
        let got: (i64, f64, String, String, String, f64, i64) = c
            .connection()
            .query_row(
                "SELECT site_id, depth_cm, sensor, sensor_id, time, value, time_s
                 FROM logger_view WHERE id = 2",
                [],
                |r| {
                    Ok((
                        r.get(0)?,
                        r.get(1)?,
                        r.get(2)?,
                        r.get(3)?,
                        r.get(4)?,
                        r.get(5)?,
                        r.get(6)?,
                    ))
                },
            )
            .expect("view");
        assert_eq!(
            got,
            (
                1,
                30.0,
                "tensiometer".into(),
                "T".into(),
                "1970-01-01T01:00:00Z".into(),
                900.0,
                3600
            )
        );
    }

    #[test]
    fn series_reads_walk_the_key_index_without_sorting() {
        let c = campaign();
        let conn = c.connection();
        let plan = |sql: &str| -> String {
            let mut stmt = conn
                .prepare(&format!("EXPLAIN QUERY PLAN {sql}"))
                .expect("plan");
            let rows = stmt
                .query_map(params![1, 0, 10], |r| r.get::<_, String>(3))
                .expect("rows");
            rows.collect::<rusqlite::Result<Vec<_>>>()
                .expect("plan")
                .join("\n")
        };
        for sql in [
            "SELECT r.id, r.time_s, r.value FROM logger_record r
             WHERE r.logger_sensor_id = ?1 AND r.time_s BETWEEN ?2 AND ?3 ORDER BY r.time_s",
            "SELECT r.time_s, r.value FROM logger_record r
             WHERE r.logger_sensor_id = ?1 AND ?2 < ?3 ORDER BY r.time_s",
            "SELECT k.sensor_id, r.time_s, r.value FROM logger_sensor k
             JOIN logger_record r ON r.logger_sensor_id = k.id
             WHERE k.site_id = ?1 AND ?2 < ?3 ORDER BY k.sensor_id, r.time_s",
        ] {
            let p = plan(sql);
            assert!(!p.contains("TEMP B-TREE"), "{sql}:\n{p}");
            assert!(p.contains("INDEX"), "{sql}:\n{p}");
        }
    }
}
