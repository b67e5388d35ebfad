//! The review queue in episodes: consecutive suspect records of one logger sensor with the
//! same kind of reason (a probe stuck for 14 hours, a dry spell past the tensiometer's range)
//! are one item to decide, with its time span, number of records and worst score. A lab
//! reading is an episode of its own.
//!
//! "Consecutive" means no other record of the sensor lies between two flagged ones in time
//! (a record that passed the check breaks the episode). Deciding an episode decides all of
//! its flags in one transaction ([`decide_episode`]).

use rusqlite::{Connection, OptionalExtension};

use super::review::{Decided, Decision, refit_samples};
use crate::store::flags::{self, FlagRow, Subject};
use crate::store::{Campaign, Result};

/// One item of the grouped review queue.
#[derive(Debug, Clone, PartialEq)]
pub struct Episode {
    /// The flags, a logger episode's in time order.
    pub rows: Vec<FlagRow>,
    /// Index in `rows` of the worst (highest score) flag.
    worst: usize,
}

impl Episode {
    fn new(rows: Vec<FlagRow>) -> Self {
        let mut worst = 0;
        for (i, r) in rows.iter().enumerate() {
            let s = r.stored.flag.score.unwrap_or(f64::NEG_INFINITY);
            if s > rows[worst].stored.flag.score.unwrap_or(f64::NEG_INFINITY) {
                worst = i;
            }
        }
        Self { rows, worst }
    }

    /// The worst flag: its score, values and reason stand for the episode.
    pub fn worst(&self) -> &FlagRow {
        &self.rows[self.worst]
    }

    /// The episode's id in listings and `--accept-episode`: its worst flag's id.
    pub fn id(&self) -> i64 {
        self.worst().stored.id
    }

    /// How many flags (records) it holds.
    pub fn len(&self) -> usize {
        self.rows.len()
    }

    /// Never true: an episode holds at least one flag.
    pub fn is_empty(&self) -> bool {
        self.rows.is_empty()
    }

    /// The worst score.
    pub fn score(&self) -> Option<f64> {
        self.worst().stored.flag.score
    }

    /// The first and last record's time (UTC, as stored) of a logger episode.
    pub fn span(&self) -> Option<(&str, &str)> {
        fn time(r: &FlagRow) -> Option<&str> {
            match &r.subject {
                Subject::LoggerRecord { time, .. } => Some(time.as_str()),
                Subject::Reading { .. } | Subject::ConductivityReading { .. } => None,
            }
        }
        Some((time(self.rows.first()?)?, time(self.rows.last()?)?))
    }

    /// The sensor id of a logger episode.
    pub fn sensor_id(&self) -> Option<&str> {
        match &self.worst().subject {
            Subject::LoggerRecord { sensor_id, .. } => Some(sensor_id),
            Subject::Reading { .. } | Subject::ConductivityReading { .. } => None,
        }
    }

    /// Every flag id, in the episode's order.
    pub fn flag_ids(&self) -> Vec<i64> {
        self.rows.iter().map(|r| r.stored.id).collect()
    }

    /// Whether flag `id` is one of this episode's.
    pub fn holds(&self, id: i64) -> bool {
        self.rows.iter().any(|r| r.stored.id == id)
    }
}

/// The kind of a reason, what an episode's records share: the text before its first `:` or
/// `(` (`stuck sensor`, `tensiometer beyond working range`, `spike`).
pub fn reason_kind(reason: &str) -> &str {
    let end = reason.find([':', '(']).unwrap_or(reason.len());
    reason[..end].trim()
}

/// Group queue rows (in queue order, worst first) into episodes, worst first.
///
/// `gap(a, b)` says whether the sensor of logger records `a` and `b` (`a` earlier) has a
/// record between them; rows of one sensor and reason kind are taken in time order and a
/// new episode starts at every gap.
///
/// # Errors
/// Whatever `gap` returns.
pub fn group_with<E>(
    rows: Vec<FlagRow>,
    mut gap: impl FnMut(i64, i64) -> std::result::Result<bool, E>,
) -> std::result::Result<Vec<Episode>, E> {
    // (site, sensor id, reason kind) -> rows, in first-seen order.
    let mut keys: Vec<(String, String, String)> = Vec::new();
    let mut groups: Vec<Vec<FlagRow>> = Vec::new();
    let mut episodes = Vec::new();
    for row in rows {
        match &row.subject {
            Subject::Reading { .. } | Subject::ConductivityReading { .. } => {
                episodes.push(Episode::new(vec![row]));
            }
            Subject::LoggerRecord {
                site, sensor_id, ..
            } => {
                let key = (
                    site.clone(),
                    sensor_id.clone(),
                    reason_kind(&row.stored.flag.reason).to_string(),
                );
                if let Some(i) = keys.iter().position(|k| *k == key) {
                    groups[i].push(row);
                } else {
                    keys.push(key);
                    groups.push(vec![row]);
                }
            }
        }
    }
    for mut group in groups {
        group.sort_by(|a, b| {
            let t = |r: &FlagRow| match &r.subject {
                Subject::LoggerRecord {
                    time, record_id, ..
                } => (time.clone(), *record_id),
                Subject::Reading { .. } | Subject::ConductivityReading { .. } => (String::new(), 0),
            };
            t(a).cmp(&t(b)).then(a.stored.id.cmp(&b.stored.id))
        });
        let mut run: Vec<FlagRow> = Vec::new();
        for row in group {
            let id = record_id(&row);
            let split = match run.last() {
                Some(prev) if record_id(prev) == id => false,
                Some(prev) => gap(record_id(prev), id)?,
                None => false,
            };
            if split {
                episodes.push(Episode::new(std::mem::take(&mut run)));
            }
            run.push(row);
        }
        if !run.is_empty() {
            episodes.push(Episode::new(run));
        }
    }
    episodes.sort_by(|a, b| {
        let s = |e: &Episode| e.score().unwrap_or(f64::NEG_INFINITY);
        s(b).total_cmp(&s(a)).then(a.id().cmp(&b.id()))
    });
    Ok(episodes)
}

fn record_id(row: &FlagRow) -> i64 {
    match &row.subject {
        Subject::LoggerRecord { record_id, .. } => *record_id,
        Subject::Reading { reading_id, .. } | Subject::ConductivityReading { reading_id, .. } => {
            *reading_id
        }
    }
}

/// Whether the sensor of logger records `a` and `b` has a record strictly between their times
/// (one index range on `logger_record (logger_sensor_id, time_s)`).
///
/// # Errors
/// An SQLite error.
pub fn record_between(conn: &Connection, a: i64, b: i64) -> Result<bool> {
    let found: Option<i64> = conn
        .prepare_cached(
            "SELECT r.id FROM logger_record a JOIN logger_record b ON b.id = ?2
             JOIN logger_record r ON r.logger_sensor_id = a.logger_sensor_id
               AND r.time_s > min(a.time_s, b.time_s) AND r.time_s < max(a.time_s, b.time_s)
             WHERE a.id = ?1 LIMIT 1",
        )?
        .query_row([a, b], |r| r.get(0))
        .optional()?;
    Ok(found.is_some())
}

/// Group queue rows into episodes against the campaign's records (see [`group_with`]).
///
/// # Errors
/// An SQLite error.
pub fn group(conn: &Connection, rows: Vec<FlagRow>) -> Result<Vec<Episode>> {
    group_with(rows, |a, b| record_between(conn, a, b))
}

/// Accept or dismiss every flag of an episode in one transaction, then (when accepting and
/// `refit`) refit the samples of its readings.
///
/// # Errors
/// A flag no longer open (the queue changed since it was read: nothing is changed then), or
/// an SQLite error.
pub fn decide_episode(
    campaign: &mut Campaign,
    episode: &Episode,
    decision: Decision,
    note: Option<&str>,
    refit: bool,
) -> Result<Decided> {
    let tx = campaign.transaction()?;
    let mut out = Decided::default();
    let mut samples = Vec::new();
    for row in &episode.rows {
        match decision {
            Decision::Accept => flags::accept(&tx, row.stored.id, note)?,
            Decision::Dismiss => flags::dismiss(&tx, row.stored.id, note)?,
        }
        out.flags.push(row.stored.id);
        if let Subject::Reading {
            reading_id,
            sample_id,
            ..
        } = row.subject
        {
            out.readings.push(reading_id);
            samples.push(sample_id);
        }
    }
    tx.commit()?;
    if refit && decision == Decision::Accept && !samples.is_empty() {
        out.refit = refit_samples(campaign, &samples)?;
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::domain::{Flag, FlagOrigin, FlagStatus, FlagTarget};
    use crate::store::flags::StoredFlag;

    fn record(
        flag: i64,
        record_id: i64,
        sensor: &str,
        hour: u32,
        reason: &str,
        score: f64,
    ) -> FlagRow {
        FlagRow {
            stored: StoredFlag {
                id: flag,
                rule: None,
                decided_by: None,
                flag: Flag {
                    target: FlagTarget::LoggerRecord(record_id),
                    status: FlagStatus::Suggested,
                    origin: FlagOrigin::Auto,
                    reason: reason.to_string(),
                    score: Some(score),
                    note: None,
                    created_at: chrono::DateTime::UNIX_EPOCH,
                    decided_at: None,
                },
            },
            subject: Subject::LoggerRecord {
                record_id,
                site: "S".into(),
                depth_cm: 30.0,
                sensor: "tensiometer".into(),
                sensor_id: sensor.into(),
                time: format!("2026-06-01T{hour:02}:00:00Z"),
                value: 1000.0,
            },
        }
    }

    #[test]
    fn consecutive_records_of_one_sensor_and_reason_are_one_episode() {
        // Records are numbered by hour; hour 5 of T1 passed the checks (a gap).
        let rows = vec![
            record(
                1,
                103,
                "T1",
                3,
                "tensiometer beyond working range (90 kPa > 85 kPa)",
                1.1,
            ),
            record(
                2,
                101,
                "T1",
                1,
                "tensiometer beyond working range (95 kPa > 85 kPa)",
                1.3,
            ),
            record(
                3,
                102,
                "T1",
                2,
                "tensiometer beyond working range (99 kPa > 85 kPa)",
                1.4,
            ),
            record(4, 104, "T1", 4, "spike: a jump of +20 kPa", 3.0),
            record(
                5,
                106,
                "T1",
                6,
                "tensiometer beyond working range (91 kPa > 85 kPa)",
                1.2,
            ),
            record(
                6,
                201,
                "T2",
                1,
                "tensiometer beyond working range (92 kPa > 85 kPa)",
                1.0,
            ),
        ];
        let passed = [105];
        let episodes = group_with(rows, |a: i64, b: i64| {
            Ok::<_, ()>(passed.iter().any(|p| (a.min(b)..a.max(b)).contains(p)))
        })
        .expect("grouped");
        let summary: Vec<(i64, usize, Option<f64>)> = episodes
            .iter()
            .map(|e| (e.id(), e.len(), e.score()))
            .collect();
        assert_eq!(
            summary,
            vec![
                (4, 1, Some(3.0)),
                (3, 3, Some(1.4)),
                (5, 1, Some(1.2)),
                (6, 1, Some(1.0)),
            ]
        );
        let beyond = &episodes[1];
        assert_eq!(beyond.flag_ids(), vec![2, 3, 1]);
        assert_eq!(
            beyond.span(),
            Some(("2026-06-01T01:00:00Z", "2026-06-01T03:00:00Z"))
        );
        assert_eq!(beyond.sensor_id(), Some("T1"));
        assert!(beyond.holds(1) && !beyond.holds(5));
    }

    #[test]
    fn reason_kinds_drop_the_numbers() {
        assert_eq!(
            reason_kind("stuck sensor: the same value (0.165 m3/m3) for at least 6 h"),
            "stuck sensor"
        );
        assert_eq!(
            reason_kind("tensiometer beyond working range (114.9 kPa > 85 kPa)"),
            "tensiometer beyond working range"
        );
        assert_eq!(reason_kind("plain"), "plain");
    }
}
