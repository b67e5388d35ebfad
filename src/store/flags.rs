//! Flags on readings, logger records and measured conductivity readings: suggestions from the checks, the user's own flags,
//! their review (accept, dismiss, clear) and the audit trail.
//!
//! A flag is never deleted and its status changes are never overwritten: triggers of schema
//! version 3 write every status a flag takes to `flag_event` (who, when, from, to, note).
//! Accepted flags, and manual flags still open, exclude the reading from fits
//! ([`super::fits::EXCLUDED`]); a change of status bumps the sample's revision, so a fit made
//! before it is reported stale by [`super::fits::summaries`].
//!
//! Every function takes a `&Connection`; a command that changes several flags runs them in one
//! transaction ([`super::Campaign::transaction`]).

use std::collections::{HashMap, HashSet};
use std::fmt;

use chrono::{DateTime, Utc};
use rusqlite::{Connection, OptionalExtension, Row, params};

use super::sql_types::SqlTime;
use super::{Result, StoreError};
use crate::model::domain::{Flag, FlagOrigin, FlagStatus, FlagTarget, LayerRef};

/// Rule name of a flag the user set by hand.
pub const RULE_MANUAL: &str = "manual";

/// Who changed a flag's status.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Actor {
    /// The person reviewing (a command or a key in the terminal UI).
    User,
    /// The outlier checks (raising a suggestion, or withdrawing one they no longer make).
    Checks,
}

impl Actor {
    /// The word stored in the file.
    pub fn as_str(self) -> &'static str {
        match self {
            Actor::User => "user",
            Actor::Checks => "checks",
        }
    }

    fn parse(text: &str) -> rusqlite::Result<Self> {
        match text {
            "user" => Ok(Actor::User),
            "checks" => Ok(Actor::Checks),
            other => Err(rusqlite::Error::FromSqlConversionFailure(
                0,
                rusqlite::types::Type::Text,
                format!("found {other:?}, expected user or checks").into(),
            )),
        }
    }
}

impl fmt::Display for Actor {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

/// A flag as stored: its id, the rule that raised it and who decided it last.
#[derive(Debug, Clone, PartialEq)]
pub struct StoredFlag {
    /// Database id of the flag.
    pub id: i64,
    /// The check that raised it (`leave-one-out`, `saturation`, `monotonic`, [`RULE_MANUAL`],
    /// a logger check); `None` for flags older than schema version 3.
    pub rule: Option<String>,
    /// Who made the last status change, when it has changed.
    pub decided_by: Option<Actor>,
    /// The flag itself.
    pub flag: Flag,
}

impl StoredFlag {
    /// Whether this flag keeps its reading out of fits (see [`Flag::excludes`]).
    pub fn excludes(&self) -> bool {
        self.flag.excludes()
    }
}

/// What a flag points at, with the values a reviewer needs to judge it.
#[derive(Debug, Clone, PartialEq)]
pub enum Subject {
    /// A lab or field-pairing retention reading.
    Reading {
        /// Reading id (as `list readings` shows it).
        reading_id: i64,
        /// Database id of its sample.
        sample_id: i64,
        /// Sample code.
        sample: String,
        /// The sample's layer (site and depths).
        layer: LayerRef,
        /// Suction head, cm.
        h_cm: f64,
        /// Water content, m3/m3.
        theta: f64,
        /// Measurement method, as imported.
        method: Option<String>,
    },
    /// A field logger record.
    LoggerRecord {
        /// Logger record id.
        record_id: i64,
        /// Site code.
        site: String,
        /// Sensor depth, cm below the surface.
        depth_cm: f64,
        /// `tensiometer` or `water_content`.
        sensor: String,
        /// The sensor's identifier.
        sensor_id: String,
        /// Time of the record as stored (UTC, ISO 8601).
        time: String,
        /// Suction in cm (tensiometer) or water content in m3/m3.
        value: f64,
    },
    /// A measured conductivity reading.
    ConductivityReading {
        /// Conductivity reading id (as `list conductivity` shows it).
        reading_id: i64,
        /// Database id of its sample.
        sample_id: i64,
        /// Sample code.
        sample: String,
        /// The sample's layer (site and depths).
        layer: LayerRef,
        /// Suction head, cm, for a K(h) reading.
        h_cm: Option<f64>,
        /// Water content, m3/m3, for a K(theta) reading.
        theta: Option<f64>,
        /// Hydraulic conductivity, cm/day.
        k_cm_per_day: f64,
        /// Measurement method, as imported.
        method: Option<String>,
    },
}

impl Subject {
    /// The site code.
    pub fn site(&self) -> &str {
        match self {
            Subject::Reading { layer, .. } | Subject::ConductivityReading { layer, .. } => {
                &layer.site
            }
            Subject::LoggerRecord { site, .. } => site,
        }
    }

    /// The sample code (readings and conductivity readings only).
    pub fn sample(&self) -> Option<&str> {
        match self {
            Subject::Reading { sample, .. } | Subject::ConductivityReading { sample, .. } => {
                Some(sample)
            }
            Subject::LoggerRecord { .. } => None,
        }
    }

    /// Suction head in cm: the reading's, or a tensiometer record's value.
    pub fn h_cm(&self) -> Option<f64> {
        match self {
            Subject::Reading { h_cm, .. } => Some(*h_cm),
            Subject::ConductivityReading { h_cm, .. } => *h_cm,
            Subject::LoggerRecord { sensor, value, .. } => {
                (sensor == "tensiometer").then_some(*value)
            }
        }
    }

    /// Water content in m3/m3: the reading's, or a water-content record's value.
    pub fn theta(&self) -> Option<f64> {
        match self {
            Subject::Reading { theta, .. } => Some(*theta),
            Subject::ConductivityReading { theta, .. } => *theta,
            Subject::LoggerRecord { sensor, value, .. } => {
                (sensor == "water_content").then_some(*value)
            }
        }
    }

    /// The flag target this subject is.
    pub fn target(&self) -> FlagTarget {
        match self {
            Subject::Reading { reading_id, .. } => FlagTarget::Reading(*reading_id),
            Subject::LoggerRecord { record_id, .. } => FlagTarget::LoggerRecord(*record_id),
            Subject::ConductivityReading { reading_id, .. } => {
                FlagTarget::ConductivityReading(*reading_id)
            }
        }
    }
}

/// A flag with its subject, for listings and the review queue.
#[derive(Debug, Clone, PartialEq)]
pub struct FlagRow {
    /// The flag.
    pub stored: StoredFlag,
    /// The reading or logger record it is on.
    pub subject: Subject,
}

/// One status a flag took: its creation (`from` = `None`) or a later change.
#[derive(Debug, Clone, PartialEq)]
pub struct FlagEvent {
    /// Event id (events of one flag are in id order).
    pub id: i64,
    /// The flag.
    pub flag_id: i64,
    /// Status before (`None` when the flag was created).
    pub from: Option<FlagStatus>,
    /// Status after.
    pub to: FlagStatus,
    /// Who made the change.
    pub actor: Actor,
    /// The note given with the change.
    pub note: Option<String>,
    /// When (UTC).
    pub at: DateTime<Utc>,
}

/// A suggestion from a check, to store as an open (`suggested`, origin `auto`) flag.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Suggestion<'a> {
    /// The reading or logger record.
    pub target: FlagTarget,
    /// The check that raised it: one open suggestion per target and rule.
    pub rule: &'a str,
    /// Human text with the numbers behind it.
    pub reason: &'a str,
    /// How bad, higher is worse (the review queue sorts on it).
    pub score: Option<f64>,
}

/// What [`suggest`] did.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Raised {
    /// A new suggested flag with this id.
    New(i64),
    /// An open suggestion for the same target and rule existed; its reason and score were
    /// brought up to date.
    Refreshed(i64),
    /// The user already decided about this target and rule (dismissed it, or cleared an
    /// accepted flag) or the target is already excluded; nothing raised. The id is the flag
    /// that holds the decision.
    Declined(i64),
}

impl Raised {
    /// The id of the flag concerned.
    pub fn id(self) -> i64 {
        match self {
            Raised::New(id) | Raised::Refreshed(id) | Raised::Declined(id) => id,
        }
    }

    /// True when a new flag was stored.
    pub fn is_new(self) -> bool {
        matches!(self, Raised::New(_))
    }
}

/// Which flags a listing covers; `Default` is every flag.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct FlagFilter {
    /// Only flags with this status.
    pub status: Option<FlagStatus>,
    /// Only flags of this origin.
    pub origin: Option<FlagOrigin>,
    /// Only flags on readings or logger records of this site (code).
    pub site: Option<String>,
    /// Only flags on readings of this sample (code); logger records have no sample.
    pub sample: Option<String>,
}

/// The flag table's three target columns: reading, logger record, conductivity reading.
type TargetIds = (Option<i64>, Option<i64>, Option<i64>);

fn target_ids(target: FlagTarget) -> TargetIds {
    match target {
        FlagTarget::Reading(id) => (Some(id), None, None),
        FlagTarget::LoggerRecord(id) => (None, Some(id), None),
        FlagTarget::ConductivityReading(id) => (None, None, Some(id)),
    }
}

fn target_of(ids: TargetIds) -> rusqlite::Result<FlagTarget> {
    match ids {
        (Some(id), None, None) => Ok(FlagTarget::Reading(id)),
        (None, Some(id), None) => Ok(FlagTarget::LoggerRecord(id)),
        (None, None, Some(id)) => Ok(FlagTarget::ConductivityReading(id)),
        _ => Err(rusqlite::Error::FromSqlConversionFailure(
            1,
            rusqlite::types::Type::Null,
            "a flag must be on exactly one reading, logger record or conductivity reading".into(),
        )),
    }
}

const FLAG_COLUMNS: &str = "f.id, f.reading_id, f.logger_record_id, f.reason, f.score, \
     f.origin, f.status, f.note, f.created_at, f.decided_at, f.rule, f.decided_by, \
     f.conductivity_reading_id";

fn flag_from_row(r: &Row<'_>) -> rusqlite::Result<StoredFlag> {
    Ok(StoredFlag {
        id: r.get(0)?,
        rule: r.get(10)?,
        decided_by: r
            .get::<_, Option<String>>(11)?
            .map(|t| Actor::parse(&t))
            .transpose()?,
        flag: Flag {
            target: target_of((r.get(1)?, r.get(2)?, r.get(12)?))?,
            reason: r.get(3)?,
            score: r.get(4)?,
            origin: r.get(5)?,
            status: r.get(6)?,
            note: r.get(7)?,
            created_at: r.get::<_, SqlTime>(8)?.0,
            decided_at: r.get::<_, Option<SqlTime>>(9)?.map(|t| t.0),
        },
    })
}

/// Subject columns (from index 13) for [`ROW_FROM`].
const SUBJECT_COLUMNS: &str = "r.sample_id, m.code, s.code, l.top_cm, l.bottom_cm, r.h_cm, \
     r.theta, r.method, gs.code, coalesce(g.depth_cm, gk.depth_cm), \
     coalesce(g.sensor, gk.sensor), gk.sensor_id, \
     strftime('%Y-%m-%dT%H:%M:%SZ', g.time_s, 'unixepoch'), g.value, \
     k.sample_id, km.code, ks.code, kl.top_cm, kl.bottom_cm, k.h_cm, k.theta, k.k_cm_per_day, \
     k.method";

/// Flags joined to their subjects. The site and sample of any flag are
/// `coalesce(s.code, gs.code, ks.code)` and `coalesce(m.code, km.code)`.
const ROW_FROM: &str = "flag f
     LEFT JOIN reading r ON r.id = f.reading_id
     LEFT JOIN sample m ON m.id = r.sample_id
     LEFT JOIN layer l ON l.id = m.layer_id
     LEFT JOIN site s ON s.id = l.site_id
     LEFT JOIN logger_record g ON g.id = f.logger_record_id
     LEFT JOIN logger_sensor gk ON gk.id = g.logger_sensor_id
     LEFT JOIN site gs ON gs.id = gk.site_id
     LEFT JOIN conductivity_reading k ON k.id = f.conductivity_reading_id
     LEFT JOIN sample km ON km.id = k.sample_id
     LEFT JOIN layer kl ON kl.id = km.layer_id
     LEFT JOIN site ks ON ks.id = kl.site_id";

fn row_from_row(r: &Row<'_>) -> rusqlite::Result<FlagRow> {
    let stored = flag_from_row(r)?;
    let subject = match stored.flag.target {
        FlagTarget::Reading(reading_id) => Subject::Reading {
            reading_id,
            sample_id: r.get(13)?,
            sample: r.get(14)?,
            layer: LayerRef {
                site: r.get(15)?,
                top_cm: r.get(16)?,
                bottom_cm: r.get(17)?,
            },
            h_cm: r.get(18)?,
            theta: r.get(19)?,
            method: r.get(20)?,
        },
        FlagTarget::LoggerRecord(record_id) => Subject::LoggerRecord {
            record_id,
            site: r.get(21)?,
            depth_cm: r.get(22)?,
            sensor: r.get(23)?,
            sensor_id: r.get(24)?,
            time: r.get(25)?,
            value: r.get(26)?,
        },
        FlagTarget::ConductivityReading(reading_id) => Subject::ConductivityReading {
            reading_id,
            sample_id: r.get(27)?,
            sample: r.get(28)?,
            layer: LayerRef {
                site: r.get(29)?,
                top_cm: r.get(30)?,
                bottom_cm: r.get(31)?,
            },
            h_cm: r.get(32)?,
            theta: r.get(33)?,
            k_cm_per_day: r.get(34)?,
            method: r.get(35)?,
        },
    };
    Ok(FlagRow { stored, subject })
}

/// Check that the target exists, so a wrong id is a clear error.
fn check_target(conn: &Connection, target: FlagTarget) -> Result<()> {
    let (sql, id, what) = match target {
        FlagTarget::Reading(id) => ("SELECT 1 FROM reading WHERE id = ?1", id, "reading"),
        FlagTarget::LoggerRecord(id) => (
            "SELECT 1 FROM logger_record WHERE id = ?1",
            id,
            "logger record",
        ),
        FlagTarget::ConductivityReading(id) => (
            "SELECT 1 FROM conductivity_reading WHERE id = ?1",
            id,
            "conductivity reading",
        ),
    };
    let found: Option<i64> = conn
        .prepare_cached(sql)?
        .query_row([id], |r| r.get(0))
        .optional()?;
    if found.is_none() {
        return Err(StoreError::Unknown {
            what,
            code: id.to_string(),
        });
    }
    Ok(())
}

/// Every flag on a reading or logger record, oldest first.
///
/// # Errors
/// An SQLite error.
pub fn of_target(conn: &Connection, target: FlagTarget) -> Result<Vec<StoredFlag>> {
    let (reading, record, conductivity) = target_ids(target);
    let mut stmt = conn.prepare_cached(&format!(
        "SELECT {FLAG_COLUMNS} FROM flag f
         WHERE f.reading_id IS ?1 AND f.logger_record_id IS ?2
           AND f.conductivity_reading_id IS ?3
         ORDER BY f.id"
    ))?;
    let rows = stmt.query_map(params![reading, record, conductivity], flag_from_row)?;
    Ok(rows.collect::<rusqlite::Result<_>>()?)
}

/// One flag with its subject.
///
/// # Errors
/// An SQLite error.
pub fn get(conn: &Connection, flag_id: i64) -> Result<Option<FlagRow>> {
    let mut stmt = conn.prepare_cached(&format!(
        "SELECT {FLAG_COLUMNS}, {SUBJECT_COLUMNS} FROM {ROW_FROM} WHERE f.id = ?1"
    ))?;
    Ok(stmt.query_row([flag_id], row_from_row).optional()?)
}

/// Store a check's suggestion as an open flag, unless one is open for the same target and
/// rule (then its reason and score are refreshed) or the user already decided about them.
///
/// Declined when the target is already excluded by a flag, or when a flag of the same rule on
/// it was dismissed or cleared by the user: a reviewer's "keep it" is not asked again.
///
/// # Errors
/// [`StoreError::Unknown`] for a reading or logger record that does not exist,
/// [`StoreError::Refused`] for an empty reason or rule, or an SQLite error.
pub fn suggest(conn: &Connection, suggestion: &Suggestion<'_>) -> Result<Raised> {
    let reason = suggestion.reason.trim();
    let rule = suggestion.rule.trim();
    if reason.is_empty() || rule.is_empty() {
        return Err(StoreError::Refused(
            "a suggestion needs a rule and a reason".into(),
        ));
    }
    check_target(conn, suggestion.target)?;
    let existing = of_target(conn, suggestion.target)?;
    if let Some(f) = existing.iter().find(|f| f.excludes()) {
        return Ok(Raised::Declined(f.id));
    }
    let same_rule = |f: &&StoredFlag| f.rule.as_deref() == Some(rule);
    if let Some(open) = existing
        .iter()
        .filter(same_rule)
        .find(|f| f.flag.status == FlagStatus::Suggested)
    {
        conn.prepare_cached("UPDATE flag SET reason = ?2, score = ?3 WHERE id = ?1")?
            .execute(params![open.id, reason, finite(suggestion.score)])?;
        return Ok(Raised::Refreshed(open.id));
    }
    if let Some(kept) = existing.iter().filter(same_rule).find(|f| {
        matches!(f.flag.status, FlagStatus::Dismissed | FlagStatus::Cleared)
            && f.decided_by != Some(Actor::Checks)
    }) {
        return Ok(Raised::Declined(kept.id));
    }
    let (reading, record, conductivity) = target_ids(suggestion.target);
    conn.prepare_cached(
        "INSERT INTO flag (reading_id, logger_record_id, conductivity_reading_id, reason, score,
             origin, status, created_at, rule)
         VALUES (?1, ?2, ?7, ?3, ?4, 'auto', 'suggested', ?5, ?6)",
    )?
    .execute(params![
        reading,
        record,
        reason,
        finite(suggestion.score),
        SqlTime::now(),
        rule,
        conductivity
    ])?;
    Ok(Raised::New(conn.last_insert_rowid()))
}

fn finite(v: Option<f64>) -> Option<f64> {
    v.filter(|x| x.is_finite())
}

/// Flag a reading or logger record by hand: the user's reason and an optional note. The flag
/// excludes the target from fits at once (status `accepted`, origin `manual`); open
/// suggestions on the target are accepted with it. Returns the new flag's id.
///
/// # Errors
/// [`StoreError::Unknown`] for a target that does not exist, [`StoreError::Refused`] for an
/// empty reason or a target already excluded, or an SQLite error.
pub fn flag_manual(
    conn: &Connection,
    target: FlagTarget,
    reason: &str,
    note: Option<&str>,
) -> Result<i64> {
    let reason = reason.trim();
    if reason.is_empty() {
        return Err(StoreError::Refused(
            "a flag needs a reason (--reason TEXT)".into(),
        ));
    }
    check_target(conn, target)?;
    let existing = of_target(conn, target)?;
    if let Some(f) = existing.iter().find(|f| f.excludes()) {
        return Err(StoreError::Refused(format!(
            "{} is already flagged (flag {}: {}); unflag it first to flag it again",
            describe(target),
            f.id,
            f.flag.reason
        )));
    }
    let note = clean(note);
    let now = SqlTime::now();
    let (reading, record, conductivity) = target_ids(target);
    conn.prepare_cached(
        "INSERT INTO flag (reading_id, logger_record_id, conductivity_reading_id, reason, score,
             origin, status, note, created_at, decided_at, rule, decided_by)
         VALUES (?1, ?2, ?7, ?3, NULL, 'manual', 'accepted', ?4, ?5, ?5, ?6, 'user')",
    )?
    .execute(params![
        reading,
        record,
        reason,
        note,
        now,
        RULE_MANUAL,
        conductivity
    ])?;
    let id = conn.last_insert_rowid();
    let with = format!("accepted with manual flag {id}");
    for open in existing
        .iter()
        .filter(|f| f.flag.status == FlagStatus::Suggested)
    {
        change(
            conn,
            open,
            FlagStatus::Accepted,
            Actor::User,
            Some(note.unwrap_or(&with)),
        )?;
    }
    Ok(id)
}

/// Rule of the flags that retire a derived reading replaced by a new computation.
pub const RULE_SUPERSEDED: &str = "superseded";

/// Retire a derived reading that a new computation replaces (a field pairing run again) but
/// that cannot be deleted because flags point at it: its open suggestions are withdrawn by the
/// checks and an accepted flag (origin auto, decided by the checks) with `reason` leaves it out
/// of fits. Nothing is deleted, so the audit trail of its earlier flags stays whole. Returns the
/// new flag's id, or `None` when the reading is already excluded.
///
/// # Errors
/// An unknown target, or an SQLite error.
pub fn retire(conn: &Connection, target: FlagTarget, reason: &str) -> Result<Option<i64>> {
    check_target(conn, target)?;
    let existing = of_target(conn, target)?;
    let note = format!("withdrawn: {reason}");
    for open in existing
        .iter()
        .filter(|f| f.flag.status == FlagStatus::Suggested && f.flag.origin == FlagOrigin::Auto)
    {
        change(conn, open, FlagStatus::Cleared, Actor::Checks, Some(&note))?;
    }
    if of_target(conn, target)?.iter().any(StoredFlag::excludes) {
        return Ok(None);
    }
    let now = SqlTime::now();
    let (reading, record, conductivity) = target_ids(target);
    conn.prepare_cached(
        "INSERT INTO flag (reading_id, logger_record_id, conductivity_reading_id, reason, score,
             origin, status, note, created_at, decided_at, rule, decided_by)
         VALUES (?1, ?2, ?6, ?3, NULL, 'auto', 'accepted', NULL, ?4, ?4, ?5, 'checks')",
    )?
    .execute(params![
        reading,
        record,
        reason,
        now,
        RULE_SUPERSEDED,
        conductivity
    ])?;
    Ok(Some(conn.last_insert_rowid()))
}

/// `reading 12`, `logger record 3` or `conductivity reading 7`, for messages.
pub fn describe(target: FlagTarget) -> String {
    match target {
        FlagTarget::Reading(id) => format!("reading {id}"),
        FlagTarget::LoggerRecord(id) => format!("logger record {id}"),
        FlagTarget::ConductivityReading(id) => format!("conductivity reading {id}"),
    }
}

fn clean(note: Option<&str>) -> Option<&str> {
    note.map(str::trim).filter(|n| !n.is_empty())
}

/// Change a flag's status, recording who, when and the note (the trigger keeps the event).
fn change(
    conn: &Connection,
    flag: &StoredFlag,
    to: FlagStatus,
    actor: Actor,
    note: Option<&str>,
) -> Result<()> {
    let from = flag.flag.status;
    let allowed = match to {
        FlagStatus::Accepted => from != FlagStatus::Accepted,
        FlagStatus::Dismissed => from == FlagStatus::Suggested,
        FlagStatus::Cleared => {
            from == FlagStatus::Accepted
                || (from == FlagStatus::Suggested
                    && (actor == Actor::Checks || flag.flag.origin == FlagOrigin::Manual))
        }
        FlagStatus::Suggested => false,
    };
    if !allowed {
        let hint = match to {
            FlagStatus::Dismissed if from == FlagStatus::Accepted => {
                "; clear it (unflag) to take the reading back"
            }
            FlagStatus::Cleared if from == FlagStatus::Suggested => {
                "; dismiss a suggestion instead"
            }
            _ => "",
        };
        return Err(StoreError::Refused(format!(
            "flag {} is {from}; it cannot become {to}{hint}",
            flag.id
        )));
    }
    conn.prepare_cached(
        "UPDATE flag SET status = ?2, note = ?3, decided_at = ?4, decided_by = ?5 WHERE id = ?1",
    )?
    .execute(params![
        flag.id,
        to,
        clean(note),
        SqlTime::now(),
        actor.as_str()
    ])?;
    Ok(())
}

fn load(conn: &Connection, flag_id: i64) -> Result<StoredFlag> {
    let mut stmt = conn.prepare_cached(&format!(
        "SELECT {FLAG_COLUMNS} FROM flag f WHERE f.id = ?1"
    ))?;
    stmt.query_row([flag_id], flag_from_row)
        .optional()?
        .ok_or_else(|| StoreError::Unknown {
            what: "flag",
            code: flag_id.to_string(),
        })
}

/// Accept a flag: the reading is left out of fits from now on.
///
/// # Errors
/// [`StoreError::Unknown`] for a flag id that does not exist, [`StoreError::Refused`] when it
/// is accepted already, or an SQLite error.
pub fn accept(conn: &Connection, flag_id: i64, note: Option<&str>) -> Result<()> {
    change(
        conn,
        &load(conn, flag_id)?,
        FlagStatus::Accepted,
        Actor::User,
        note,
    )
}

/// Dismiss a suggestion: the reading stays in, and the same check does not raise it again.
///
/// # Errors
/// [`StoreError::Unknown`], [`StoreError::Refused`] when the flag is not a suggestion, or an
/// SQLite error.
pub fn dismiss(conn: &Connection, flag_id: i64, note: Option<&str>) -> Result<()> {
    change(
        conn,
        &load(conn, flag_id)?,
        FlagStatus::Dismissed,
        Actor::User,
        note,
    )
}

/// Clear an accepted (or open manual) flag: the reading is taken back into fits.
///
/// # Errors
/// [`StoreError::Unknown`], [`StoreError::Refused`] when the flag does not exclude anything,
/// or an SQLite error.
pub fn clear(conn: &Connection, flag_id: i64, note: Option<&str>) -> Result<()> {
    change(
        conn,
        &load(conn, flag_id)?,
        FlagStatus::Cleared,
        Actor::User,
        note,
    )
}

/// Withdraw an open suggestion the checks no longer make (status `cleared`, by the checks);
/// the same check may raise it again later.
///
/// # Errors
/// [`StoreError::Unknown`], [`StoreError::Refused`] when the flag is not an open suggestion,
/// or an SQLite error.
pub fn withdraw(conn: &Connection, flag_id: i64, note: Option<&str>) -> Result<()> {
    let flag = load(conn, flag_id)?;
    if flag.flag.status != FlagStatus::Suggested || flag.flag.origin != FlagOrigin::Auto {
        return Err(StoreError::Refused(format!(
            "flag {flag_id} is not an open suggestion of the checks"
        )));
    }
    change(conn, &flag, FlagStatus::Cleared, Actor::Checks, note)
}

/// Apply `to` to every flag on `target` that `pick` selects; error when there is none.
fn change_target(
    conn: &Connection,
    target: FlagTarget,
    to: FlagStatus,
    note: Option<&str>,
    pick: impl Fn(&StoredFlag) -> bool,
    none: &str,
) -> Result<Vec<i64>> {
    check_target(conn, target)?;
    let picked: Vec<StoredFlag> = of_target(conn, target)?
        .into_iter()
        .filter(|f| pick(f))
        .collect();
    if picked.is_empty() {
        return Err(StoreError::Refused(format!("{} {none}", describe(target))));
    }
    for flag in &picked {
        change(conn, flag, to, Actor::User, note)?;
    }
    Ok(picked.iter().map(|f| f.id).collect())
}

/// Accept every open suggestion on a reading or logger record; returns the flag ids.
///
/// # Errors
/// [`StoreError::Unknown`] for a target that does not exist, [`StoreError::Refused`] when it
/// has no open suggestion, or an SQLite error.
pub fn accept_target(
    conn: &Connection,
    target: FlagTarget,
    note: Option<&str>,
) -> Result<Vec<i64>> {
    change_target(
        conn,
        target,
        FlagStatus::Accepted,
        note,
        |f| f.flag.status == FlagStatus::Suggested && f.flag.origin == FlagOrigin::Auto,
        "has no open suggestion to accept",
    )
}

/// Dismiss every open suggestion on a reading or logger record; returns the flag ids.
///
/// # Errors
/// As [`accept_target`].
pub fn dismiss_target(
    conn: &Connection,
    target: FlagTarget,
    note: Option<&str>,
) -> Result<Vec<i64>> {
    change_target(
        conn,
        target,
        FlagStatus::Dismissed,
        note,
        |f| f.flag.status == FlagStatus::Suggested && f.flag.origin == FlagOrigin::Auto,
        "has no open suggestion to dismiss",
    )
}

/// Clear every flag that excludes a reading or logger record (unflag); returns the flag ids.
///
/// # Errors
/// [`StoreError::Unknown`] for a target that does not exist, [`StoreError::Refused`] when no
/// flag excludes it, or an SQLite error.
pub fn clear_target(conn: &Connection, target: FlagTarget, note: Option<&str>) -> Result<Vec<i64>> {
    change_target(
        conn,
        target,
        FlagStatus::Cleared,
        note,
        StoredFlag::excludes,
        "is not flagged (nothing to unflag)",
    )
}

/// Flags with their subjects, filtered by status, origin, site and sample; ordered by site,
/// sample, suction and flag id (logger records by depth and time after the readings).
///
/// # Errors
/// An SQLite error.
pub fn list(conn: &Connection, filter: &FlagFilter) -> Result<Vec<FlagRow>> {
    let mut stmt = conn.prepare_cached(&format!(
        "SELECT {FLAG_COLUMNS}, {SUBJECT_COLUMNS} FROM {ROW_FROM}
         WHERE (?1 IS NULL OR f.status = ?1) AND (?2 IS NULL OR f.origin = ?2)
           AND (?3 IS NULL OR coalesce(s.code, gs.code, ks.code) = ?3)
           AND (?4 IS NULL OR coalesce(m.code, km.code) = ?4)
         ORDER BY coalesce(s.code, gs.code, ks.code), f.logger_record_id IS NOT NULL,
                  f.conductivity_reading_id IS NOT NULL, coalesce(l.top_cm, kl.top_cm),
                  coalesce(m.code, km.code), r.h_cm, k.h_cm, k.theta DESC,
                  coalesce(g.depth_cm, gk.depth_cm), g.time_s,
                  f.id"
    ))?;
    let rows = stmt.query_map(
        params![filter.status, filter.origin, filter.site, filter.sample],
        row_from_row,
    )?;
    Ok(rows.collect::<rusqlite::Result<_>>()?)
}

/// The review queue: open suggestions of the checks (lab readings and logger records alike)
/// whose target is not already excluded, worst (highest score) first.
///
/// `filter.site` and `filter.sample` narrow it; its status and origin are ignored.
///
/// # Errors
/// An SQLite error.
pub fn queue(conn: &Connection, filter: &FlagFilter) -> Result<Vec<FlagRow>> {
    let mut stmt = conn.prepare_cached(&format!(
        "SELECT {FLAG_COLUMNS}, {SUBJECT_COLUMNS} FROM {ROW_FROM}
         WHERE f.status = 'suggested' AND f.origin = 'auto'
           AND (?1 IS NULL OR coalesce(s.code, gs.code, ks.code) = ?1)
           AND (?2 IS NULL OR coalesce(m.code, km.code) = ?2)
           AND NOT EXISTS (SELECT 1 FROM flag x
               WHERE x.reading_id IS f.reading_id AND x.logger_record_id IS f.logger_record_id
                 AND x.conductivity_reading_id IS f.conductivity_reading_id
                 AND (x.status = 'accepted' OR (x.status = 'suggested' AND x.origin = 'manual')))
         ORDER BY f.score IS NULL, f.score DESC, f.id"
    ))?;
    let rows = stmt.query_map(params![filter.site, filter.sample], row_from_row)?;
    Ok(rows.collect::<rusqlite::Result<_>>()?)
}

fn event_from_row(r: &Row<'_>) -> rusqlite::Result<FlagEvent> {
    Ok(FlagEvent {
        id: r.get(0)?,
        flag_id: r.get(1)?,
        from: r.get(2)?,
        to: r.get(3)?,
        actor: Actor::parse(&r.get::<_, String>(4)?)?,
        note: r.get(5)?,
        at: r.get::<_, SqlTime>(6)?.0,
    })
}

/// The audit trail of one flag: every status it took, oldest first.
///
/// # Errors
/// An SQLite error.
pub fn events(conn: &Connection, flag_id: i64) -> Result<Vec<FlagEvent>> {
    let mut stmt = conn.prepare_cached(
        "SELECT id, flag_id, from_status, to_status, actor, note, at FROM flag_event
         WHERE flag_id = ?1 ORDER BY id",
    )?;
    let rows = stmt.query_map([flag_id], event_from_row)?;
    Ok(rows.collect::<rusqlite::Result<_>>()?)
}

/// The audit trail of every flag on a reading or logger record, oldest first.
///
/// # Errors
/// An SQLite error.
pub fn trail(conn: &Connection, target: FlagTarget) -> Result<Vec<FlagEvent>> {
    let (reading, record, conductivity) = target_ids(target);
    let mut stmt = conn.prepare_cached(
        "SELECT e.id, e.flag_id, e.from_status, e.to_status, e.actor, e.note, e.at
         FROM flag_event e JOIN flag f ON f.id = e.flag_id
         WHERE f.reading_id IS ?1 AND f.logger_record_id IS ?2
           AND f.conductivity_reading_id IS ?3
         ORDER BY e.id",
    )?;
    let rows = stmt.query_map(params![reading, record, conductivity], event_from_row)?;
    Ok(rows.collect::<rusqlite::Result<_>>()?)
}

/// Readings the user reviewed and kept: a flag on them dismissed or cleared by the user (or
/// decided before schema version 3), and none excluding them. The checks leave these alone.
///
/// # Errors
/// An SQLite error.
pub fn kept_by_user(conn: &Connection) -> Result<HashSet<i64>> {
    let mut stmt = conn.prepare_cached(
        "SELECT DISTINCT f.reading_id FROM flag f
         WHERE f.reading_id IS NOT NULL AND f.status IN ('dismissed', 'cleared')
           AND f.decided_by IS NOT 'checks'
           AND NOT EXISTS (SELECT 1 FROM flag x WHERE x.reading_id = f.reading_id
               AND (x.status = 'accepted' OR (x.status = 'suggested' AND x.origin = 'manual')))",
    )?;
    let rows = stmt.query_map([], |r| r.get(0))?;
    Ok(rows.collect::<rusqlite::Result<_>>()?)
}

/// A reading's flag state at a glance (for a column in listings and the readings pane).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Mark {
    /// Reviewed and kept (a dismissed suggestion or a cleared flag, nothing open).
    Kept,
    /// An open suggestion waits for review; the reading is still used.
    Suggested,
    /// Left out of fits (an accepted flag, or a manual one).
    Excluded,
}

impl Mark {
    /// The mark one flag gives its reading (a reading with several takes the highest).
    pub fn of(status: FlagStatus, origin: FlagOrigin) -> Mark {
        match (status, origin) {
            (FlagStatus::Accepted, _) | (FlagStatus::Suggested, FlagOrigin::Manual) => {
                Mark::Excluded
            }
            (FlagStatus::Suggested, FlagOrigin::Auto) => Mark::Suggested,
            (FlagStatus::Dismissed | FlagStatus::Cleared, _) => Mark::Kept,
        }
    }

    /// One word for tables: `kept`, `suggested`, `excluded`.
    pub fn label(self) -> &'static str {
        match self {
            Mark::Kept => "kept",
            Mark::Suggested => "suggested",
            Mark::Excluded => "excluded",
        }
    }
}

/// The [`Mark`] of every reading that has a flag, by reading id (readings without flags are
/// absent). Excluded beats suggested beats kept.
///
/// # Errors
/// An SQLite error.
pub fn reading_marks(conn: &Connection) -> Result<HashMap<i64, Mark>> {
    let mut stmt = conn.prepare_cached(
        "SELECT reading_id, status, origin FROM flag WHERE reading_id IS NOT NULL",
    )?;
    let mut out: HashMap<i64, Mark> = HashMap::new();
    for row in stmt.query_map([], |r| {
        Ok((
            r.get::<_, i64>(0)?,
            r.get::<_, FlagStatus>(1)?,
            r.get::<_, FlagOrigin>(2)?,
        ))
    })? {
        let (id, status, origin) = row?;
        let mark = Mark::of(status, origin);
        let slot = out.entry(id).or_insert(mark);
        *slot = (*slot).max(mark);
    }
    Ok(out)
}

/// Flag counts of one sample, for the campaign tree.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct FlagCounts {
    /// Readings with an open suggestion (not excluded).
    pub open: usize,
    /// Readings left out of fits.
    pub excluded: usize,
}

/// [`FlagCounts`] per sample id, for samples with any open or excluding flag.
///
/// # Errors
/// An SQLite error.
pub fn counts_by_sample(conn: &Connection) -> Result<HashMap<i64, FlagCounts>> {
    let marks = reading_marks(conn)?;
    let mut stmt = conn.prepare_cached(
        "SELECT r.id, r.sample_id FROM reading r JOIN flag f ON f.reading_id = r.id",
    )?;
    let mut sample_of: HashMap<i64, i64> = HashMap::new();
    for row in stmt.query_map([], |r| Ok((r.get::<_, i64>(0)?, r.get::<_, i64>(1)?)))? {
        let (reading, sample) = row?;
        sample_of.insert(reading, sample);
    }
    let mut out: HashMap<i64, FlagCounts> = HashMap::new();
    for (reading, mark) in marks {
        let Some(&sample) = sample_of.get(&reading) else {
            continue;
        };
        match mark {
            Mark::Excluded => out.entry(sample).or_default().excluded += 1,
            Mark::Suggested => out.entry(sample).or_default().open += 1,
            Mark::Kept => {}
        }
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::store::Campaign;

    /// A campaign with one sample `S-a` of site `S` and three readings (ids 1, 2, 3), and one
    /// tensiometer record (id 1).
    fn campaign() -> Campaign {
        let c = Campaign::in_memory("t", 33.0, 1500.0).expect("campaign");
        c.connection()
            .execute_batch(
                "INSERT INTO site (id, uid, code) VALUES (1, '00000000-0000-4000-8000-000000000001', 'S');
                 INSERT INTO layer (id, uid, site_id, top_cm, bottom_cm)
                     VALUES (1, '00000000-0000-4000-8000-000000000002', 1, 0, 10);
                 INSERT INTO sample (id, uid, layer_id, code, kind)
                     VALUES (1, '00000000-0000-4000-8000-000000000003', 1, 'S-a', 'lab_core');
                 INSERT INTO reading (id, uid, sample_id, h_cm, theta, method) VALUES
                     (1, '00000000-0000-4000-8000-000000000011', 1, 10, 0.40, 'sandbox'),
                     (2, '00000000-0000-4000-8000-000000000012', 1, 100, 0.30, 'pressure plate'),
                     (3, '00000000-0000-4000-8000-000000000013', 1, 1000, 0.20, 'pressure plate');
                 INSERT INTO logger_sensor (id, site_id, sensor_id, depth_cm, sensor)
                     VALUES (1, 1, 'T1', 30, 'tensiometer');
                 INSERT INTO logger_record (id, logger_sensor_id, time_s, value)
                     VALUES (1, 1, unixepoch('2026-06-01T10:00:00Z'), 250);",
            )
            .expect("fixture");
        c
    }

    fn loo(target: FlagTarget, reason: &str, score: f64) -> Suggestion<'_> {
        Suggestion {
            target,
            rule: "leave-one-out",
            reason,
            score: Some(score),
        }
    }

    #[test]
    fn a_suggestion_is_not_raised_twice_and_a_dismissal_is_respected() {
        let c = campaign();
        let conn = c.connection();
        let r2 = FlagTarget::Reading(2);
        let first = suggest(conn, &loo(r2, "error 0.08", 8.0)).expect("raise");
        assert!(first.is_new());
        let again = suggest(conn, &loo(r2, "error 0.09", 9.0)).expect("refresh");
        assert_eq!(again, Raised::Refreshed(first.id()));
        let flags = of_target(conn, r2).expect("flags");
        assert_eq!(flags.len(), 1);
        assert_eq!(flags[0].flag.reason, "error 0.09");
        assert_eq!(flags[0].flag.score, Some(9.0));
        // Another rule on the same reading is its own suggestion.
        let other = Suggestion {
            rule: "monotonic",
            ..loo(r2, "rises", 3.0)
        };
        assert!(suggest(conn, &other).expect("raise").is_new());
        dismiss(conn, first.id(), Some("plate checked")).expect("dismiss");
        assert_eq!(
            suggest(conn, &loo(r2, "error 0.09", 9.0)).expect("declined"),
            Raised::Declined(first.id())
        );
        // A suggestion the checks withdrew may come back.
        let r3 = FlagTarget::Reading(3);
        let id = suggest(conn, &loo(r3, "error", 5.0)).expect("raise").id();
        withdraw(conn, id, Some("no longer found")).expect("withdraw");
        assert!(
            suggest(conn, &loo(r3, "error", 5.0))
                .expect("again")
                .is_new()
        );
        assert!(matches!(
            suggest(conn, &loo(FlagTarget::Reading(99), "x", 1.0)),
            Err(StoreError::Unknown {
                what: "reading",
                ..
            })
        ));
    }

    #[test]
    fn every_transition_is_kept_with_its_time_and_note() {
        let mut c = campaign();
        let tx = c.transaction().expect("tx");
        let r1 = FlagTarget::Reading(1);
        let id = suggest(&tx, &loo(r1, "error 0.1", 10.0))
            .expect("raise")
            .id();
        accept(&tx, id, Some("lost contact")).expect("accept");
        assert!(matches!(
            dismiss(&tx, id, None),
            Err(StoreError::Refused(m)) if m.contains("clear it")
        ));
        clear(&tx, id, Some("re-measured, fine")).expect("clear");
        accept(&tx, id, None).expect("accept again");
        tx.commit().expect("commit");
        let conn = c.connection();
        let trail = events(conn, id).expect("events");
        let steps: Vec<(Option<FlagStatus>, FlagStatus, Actor)> =
            trail.iter().map(|e| (e.from, e.to, e.actor)).collect();
        assert_eq!(
            steps,
            vec![
                (None, FlagStatus::Suggested, Actor::Checks),
                (
                    Some(FlagStatus::Suggested),
                    FlagStatus::Accepted,
                    Actor::User
                ),
                (Some(FlagStatus::Accepted), FlagStatus::Cleared, Actor::User),
                (Some(FlagStatus::Cleared), FlagStatus::Accepted, Actor::User),
            ]
        );
        assert_eq!(trail[1].note.as_deref(), Some("lost contact"));
        assert_eq!(trail[2].note.as_deref(), Some("re-measured, fine"));
        assert!(trail.windows(2).all(|w| w[0].at <= w[1].at));
        assert_eq!(trail, super::trail(conn, r1).expect("trail"));
        // Neither flags nor events can be removed or rewritten.
        assert!(conn.execute("DELETE FROM flag", []).is_err());
        assert!(conn.execute("DELETE FROM flag_event", []).is_err());
        assert!(
            conn.execute("UPDATE flag_event SET note = 'x'", [])
                .is_err()
        );
    }

    #[test]
    fn manual_flags_exclude_at_once_and_unflag_takes_the_reading_back() {
        let c = campaign();
        let conn = c.connection();
        let r2 = FlagTarget::Reading(2);
        let open = suggest(conn, &loo(r2, "error", 4.0)).expect("raise").id();
        let manual =
            flag_manual(conn, r2, "typo on the sheet", Some("0.03 not 0.30")).expect("manual flag");
        assert!(matches!(
            flag_manual(conn, r2, "again", None),
            Err(StoreError::Refused(m)) if m.contains("already flagged")
        ));
        assert_eq!(
            load(conn, open).expect("open").flag.status,
            FlagStatus::Accepted
        );
        assert_eq!(reading_marks(conn).expect("marks")[&2], Mark::Excluded);
        let excluded: i64 = conn
            .query_row(
                &format!(
                    "SELECT count(*) FROM reading r WHERE {}",
                    super::super::fits::EXCLUDED
                ),
                [],
                |r| r.get(0),
            )
            .expect("count");
        assert_eq!(excluded, 1);
        let cleared = clear_target(conn, r2, Some("sheet re-read")).expect("unflag");
        assert_eq!(cleared, vec![open, manual]);
        assert_eq!(reading_marks(conn).expect("marks")[&2], Mark::Kept);
        assert!(matches!(
            clear_target(conn, r2, None),
            Err(StoreError::Refused(m)) if m.contains("not flagged")
        ));
        assert!(flag_manual(conn, r2, "  ", None).is_err());
    }

    #[test]
    fn the_queue_lists_open_suggestions_worst_first_with_logger_records() {
        let c = campaign();
        let conn = c.connection();
        suggest(conn, &loo(FlagTarget::Reading(1), "small", 3.0)).expect("raise");
        suggest(conn, &loo(FlagTarget::Reading(3), "big", 12.0)).expect("raise");
        let spike = Suggestion {
            target: FlagTarget::LoggerRecord(1),
            rule: "logger-spike",
            reason: "jump of 200 cm in 10 min",
            score: Some(6.0),
        };
        suggest(conn, &spike).expect("raise");
        let q = queue(conn, &FlagFilter::default()).expect("queue");
        let scores: Vec<Option<f64>> = q.iter().map(|r| r.stored.flag.score).collect();
        assert_eq!(scores, vec![Some(12.0), Some(6.0), Some(3.0)]);
        assert_eq!(q[0].subject.sample(), Some("S-a"));
        assert_eq!(q[0].subject.h_cm(), Some(1000.0));
        assert_eq!(q[0].subject.theta(), Some(0.20));
        assert_eq!(q[1].subject.h_cm(), Some(250.0));
        assert_eq!(q[1].subject.theta(), None);
        assert_eq!(q[1].subject.site(), "S");
        // Only the sample's readings with --sample; accepted ones leave the queue.
        let only = FlagFilter {
            sample: Some("S-a".into()),
            ..FlagFilter::default()
        };
        assert_eq!(queue(conn, &only).expect("queue").len(), 2);
        accept_target(conn, FlagTarget::Reading(3), None).expect("accept");
        assert_eq!(queue(conn, &only).expect("queue").len(), 1);
        let accepted = list(
            conn,
            &FlagFilter {
                status: Some(FlagStatus::Accepted),
                ..FlagFilter::default()
            },
        )
        .expect("list");
        assert_eq!(accepted.len(), 1);
        assert_eq!(accepted[0].subject.target(), FlagTarget::Reading(3));
        let counts = counts_by_sample(conn).expect("counts");
        assert_eq!(
            counts[&1],
            FlagCounts {
                open: 1,
                excluded: 1
            }
        );
    }
}
