//! Listings of the outlier review: the queue of open suggestions, flags, and their audit trail.

use crate::model::units::SuctionUnit;
use crate::report::{Cell, Column, Listing};
use crate::store::flags::{FlagEvent, FlagRow, Subject};

fn time(t: chrono::DateTime<chrono::Utc>) -> Cell {
    Cell::text(t.to_rfc3339_opts(chrono::SecondsFormat::Secs, true))
}

/// The subject's id in the column of its kind: (reading, logger record, conductivity reading).
fn subject_ids(subject: &Subject) -> (Cell, Cell, Cell) {
    let none = || Cell::Text(None);
    match subject {
        Subject::Reading { reading_id, .. } => (Cell::Int(*reading_id), none(), none()),
        Subject::LoggerRecord { record_id, .. } => (none(), Cell::Int(*record_id), none()),
        Subject::ConductivityReading { reading_id, .. } => (none(), none(), Cell::Int(*reading_id)),
    }
}

/// Flags with their subject: reading id (or logger record id, or conductivity reading id),
/// sample, suction in `unit`, water content, score and reason; `queue` order is kept as given.
///
/// Columns: `flag,reading,logger_record,conductivity_reading,sample,site,suction_<unit>,
/// theta_m3_m3,status,origin,score,reason,note,created_at,decided_at`.
pub fn flags_listing(rows: &[FlagRow], unit: SuctionUnit) -> Listing {
    let mut l = Listing::new(
        [
            "flag",
            "reading",
            "logger_record",
            "conductivity_reading",
            "sample",
            "site",
            unit.column_name(),
            "theta_m3_m3",
            "status",
            "origin",
            "score",
            "reason",
            "note",
            "created_at",
            "decided_at",
        ]
        .into_iter()
        .map(Column::new)
        .collect(),
    );
    for row in rows {
        let flag = &row.stored.flag;
        let (reading, record, conductivity) = subject_ids(&row.subject);
        l.push(vec![
            row.stored.id.into(),
            reading,
            record,
            conductivity,
            row.subject.sample().map(str::to_string).into(),
            Cell::text(row.subject.site()),
            row.subject.h_cm().map(|h| unit.from_cm(h)).into(),
            row.subject.theta().into(),
            Cell::text(flag.status.as_str()),
            Cell::text(flag.origin.as_str()),
            flag.score.into(),
            Cell::text(&flag.reason),
            flag.note.clone().into(),
            time(flag.created_at),
            flag.decided_at.map_or(Cell::Text(None), time),
        ]);
    }
    l
}

/// The review queue: worst first, with the columns a reviewer decides on
/// (`reading,sample,site,suction_<unit>,theta_m3_m3,score,flag,logger_record,reason`; the
/// reason last, as it is the widest).
pub fn queue_listing(rows: &[FlagRow], unit: SuctionUnit) -> Listing {
    let mut l = Listing::new(
        [
            "reading",
            "sample",
            "site",
            unit.column_name(),
            "theta_m3_m3",
            "score",
            "flag",
            "logger_record",
            "reason",
        ]
        .into_iter()
        .map(Column::new)
        .collect(),
    );
    for row in rows {
        // The checks raise no suggestion on conductivity readings (only manual flags), so
        // the queue holds readings and logger records.
        let (reading, record, _) = subject_ids(&row.subject);
        l.push(vec![
            reading,
            row.subject.sample().map(str::to_string).into(),
            Cell::text(row.subject.site()),
            row.subject.h_cm().map(|h| unit.from_cm(h)).into(),
            row.subject.theta().into(),
            row.stored.flag.score.into(),
            row.stored.id.into(),
            record,
            Cell::text(&row.stored.flag.reason),
        ]);
    }
    l
}

/// The review queue in episodes ([`crate::analysis::episodes`]), worst first: a logger
/// episode's sensor, time span (`from`, `to`, UTC) and number of records, its worst record's
/// values, score and reason; `flag` is the episode's id for `--accept-episode`.
///
/// Columns: `reading,sample,site,sensor,from,to,records,suction_<unit>,theta_m3_m3,score,flag,
/// logger_record,reason`.
pub fn episodes_listing(
    episodes: &[crate::analysis::episodes::Episode],
    unit: SuctionUnit,
) -> Listing {
    let mut l = Listing::new(
        [
            "reading",
            "sample",
            "site",
            "sensor",
            "from",
            "to",
            "records",
            unit.column_name(),
            "theta_m3_m3",
            "score",
            "flag",
            "logger_record",
            "reason",
        ]
        .into_iter()
        .map(Column::new)
        .collect(),
    );
    for e in episodes {
        let row = e.worst();
        // The checks raise no suggestion on conductivity readings (only manual flags), so
        // the queue holds readings and logger records.
        let (reading, record, _) = subject_ids(&row.subject);
        let (from, to) = e
            .span()
            .map_or((Cell::Text(None), Cell::Text(None)), |(a, b)| {
                (Cell::text(a), Cell::text(b))
            });
        l.push(vec![
            reading,
            row.subject.sample().map(str::to_string).into(),
            Cell::text(row.subject.site()),
            e.sensor_id().map(str::to_string).into(),
            from,
            to,
            Cell::Int(e.len() as i64),
            row.subject.h_cm().map(|h| unit.from_cm(h)).into(),
            row.subject.theta().into(),
            e.score().into(),
            e.id().into(),
            record,
            Cell::text(&row.stored.flag.reason),
        ]);
    }
    l
}

/// The audit trail: one row per status a flag took (`flag,from,to,by,note,at`).
pub fn events_listing(events: &[FlagEvent]) -> Listing {
    let mut l = Listing::new(
        ["flag", "from", "to", "by", "note", "at"]
            .into_iter()
            .map(Column::new)
            .collect(),
    );
    for e in events {
        l.push(vec![
            e.flag_id.into(),
            e.from.map(|s| s.as_str().to_string()).into(),
            Cell::text(e.to.as_str()),
            Cell::text(e.actor.as_str()),
            e.note.clone().into(),
            time(e.at),
        ]);
    }
    l
}

/// One suspect reading of a plain pairs file (`fit --input --flag-outliers`).
#[derive(Debug, Clone, PartialEq)]
pub struct SuspectRow {
    /// Sample name as written in the file.
    pub sample: String,
    /// Physical line of the reading in the input file (the header is line 1).
    pub line: u64,
    /// Suction head, cm.
    pub h_cm: f64,
    /// Water content, m3/m3.
    pub theta: f64,
    /// Why it is suspect.
    pub reason: String,
    /// How bad, higher is worse.
    pub score: f64,
}

/// The suspects as CSV: `sample,line,suction_cm,theta,reason,score` (numbers read back exactly,
/// text neutralised against spreadsheet formulas).
///
/// # Errors
/// A CSV writer error (not expected for in-memory output).
pub fn suspects_csv(rows: &[SuspectRow]) -> Result<String, csv::Error> {
    use crate::report::csv_safe::{self, text};
    let mut w = csv_safe::writer();
    w.write_record(["sample", "line", "suction_cm", "theta", "reason", "score"])?;
    let num = |v: f64| {
        if v.is_finite() {
            crate::report::format_number(v)
        } else {
            String::new()
        }
    };
    for r in rows {
        w.write_record([
            text(&r.sample),
            r.line.to_string(),
            num(r.h_cm),
            num(r.theta),
            text(&r.reason),
            num(r.score),
        ])?;
    }
    csv_safe::finish(w)
}
