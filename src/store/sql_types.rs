//! How domain values are written to and read from SQLite columns.
//!
//! Word enums are TEXT with the words of their `as_str`; identifiers are TEXT UUIDs; dates are
//! `YYYY-MM-DD` TEXT and instants RFC 3339 TEXT in UTC.

use chrono::{DateTime, NaiveDate, SecondsFormat, Utc};
use rusqlite::types::{FromSql, FromSqlError, FromSqlResult, ToSql, ToSqlOutput, ValueRef};

use crate::model::domain::{Branch, FlagOrigin, FlagStatus, Method, SampleKind, SensorKind, Uid};

/// ToSql/FromSql for the word enums of the domain (TEXT holding `as_str()`).
macro_rules! sql_text_enum {
    ($($ty:ty),+) => {$(
        impl ToSql for $ty {
            fn to_sql(&self) -> rusqlite::Result<ToSqlOutput<'_>> {
                Ok(ToSqlOutput::from(self.as_str()))
            }
        }

        impl FromSql for $ty {
            fn column_result(value: ValueRef<'_>) -> FromSqlResult<Self> {
                value
                    .as_str()?
                    .parse()
                    .map_err(|e: String| FromSqlError::Other(e.into()))
            }
        }
    )+};
}

sql_text_enum!(Branch, SampleKind, SensorKind, FlagOrigin, FlagStatus);

impl ToSql for Uid {
    fn to_sql(&self) -> rusqlite::Result<ToSqlOutput<'_>> {
        Ok(ToSqlOutput::from(self.as_str()))
    }
}

impl FromSql for Uid {
    fn column_result(value: ValueRef<'_>) -> FromSqlResult<Self> {
        Uid::parse(value.as_str()?).map_err(|e| FromSqlError::Other(e.into()))
    }
}

impl ToSql for Method {
    fn to_sql(&self) -> rusqlite::Result<ToSqlOutput<'_>> {
        Ok(ToSqlOutput::from(self.as_str()))
    }
}

impl FromSql for Method {
    fn column_result(value: ValueRef<'_>) -> FromSqlResult<Self> {
        Ok(Method(value.as_str()?.to_string()))
    }
}

/// A calendar day as stored: `YYYY-MM-DD`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct SqlDate(pub NaiveDate);

impl ToSql for SqlDate {
    fn to_sql(&self) -> rusqlite::Result<ToSqlOutput<'_>> {
        Ok(ToSqlOutput::from(self.0.format("%Y-%m-%d").to_string()))
    }
}

impl FromSql for SqlDate {
    fn column_result(value: ValueRef<'_>) -> FromSqlResult<Self> {
        stored_day(value.as_str()?)
            .map(SqlDate)
            .ok_or_else(|| FromSqlError::Other("not a calendar day as YYYY-MM-DD".into()))
    }
}

/// The calendar day a stored date names, `None` when the text is not one.
///
/// A stored time of day (from a later logger import) still names its day.
pub(crate) fn stored_day(text: &str) -> Option<NaiveDate> {
    let day = text.get(..10).unwrap_or(text);
    NaiveDate::parse_from_str(day, "%Y-%m-%d").ok()
}

/// A stored calendar day read without failing: a value that is not one (written by an
/// older porewise or another program) reads as `None`, so one bad value never stops a
/// listing or an export of everything else; [`super::readings::unreadable`] names the rows.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct LenientDate(pub Option<NaiveDate>);

impl FromSql for LenientDate {
    fn column_result(value: ValueRef<'_>) -> FromSqlResult<Self> {
        Ok(LenientDate(match value {
            ValueRef::Text(bytes) => std::str::from_utf8(bytes).ok().and_then(stored_day),
            _ => None,
        }))
    }
}

/// An instant as stored: RFC 3339 in UTC with whole seconds (`2026-12-02T09:30:00Z`).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct SqlTime(pub DateTime<Utc>);

impl SqlTime {
    /// The current time.
    pub(crate) fn now() -> Self {
        Self(Utc::now())
    }
}

impl ToSql for SqlTime {
    fn to_sql(&self) -> rusqlite::Result<ToSqlOutput<'_>> {
        Ok(ToSqlOutput::from(
            self.0.to_rfc3339_opts(SecondsFormat::Secs, true),
        ))
    }
}

impl FromSql for SqlTime {
    fn column_result(value: ValueRef<'_>) -> FromSqlResult<Self> {
        DateTime::parse_from_rfc3339(value.as_str()?)
            .map(|t| SqlTime(t.with_timezone(&Utc)))
            .map_err(|e| FromSqlError::Other(e.into()))
    }
}

/// Read a count (SQLite integers are signed) from column `i`.
pub(crate) fn count(r: &rusqlite::Row<'_>, i: usize) -> rusqlite::Result<u64> {
    r.get::<_, i64>(i).map(|v| v.max(0) as u64)
}

/// Optional dates to and from their stored form.
pub(crate) fn opt_date(d: Option<NaiveDate>) -> Option<SqlDate> {
    d.map(SqlDate)
}

#[cfg(test)]
mod tests {
    use super::*;
    use rusqlite::Connection;

    #[test]
    fn values_round_trip_through_sqlite() {
        let conn = Connection::open_in_memory().expect("memory");
        let uid = Uid::random();
        let day = NaiveDate::from_ymd_opt(2026, 5, 17).expect("date");
        let (b, u, d, k): (Branch, Uid, SqlDate, SampleKind) = conn
            .query_row(
                "SELECT ?1, ?2, ?3, ?4",
                rusqlite::params![Branch::Wetting, uid, SqlDate(day), SampleKind::LabCore],
                |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?)),
            )
            .expect("round trip");
        assert_eq!(
            (b, &u, d.0, k),
            (Branch::Wetting, &uid, day, SampleKind::LabCore)
        );
        let bad: rusqlite::Result<Branch> = conn.query_row("SELECT 'sideways'", [], |r| r.get(0));
        assert!(bad.is_err());
    }

    #[test]
    fn lenient_dates_read_bad_values_as_nothing() {
        let conn = Connection::open_in_memory().expect("memory");
        let read = |sql: &str| -> Option<NaiveDate> {
            conn.query_row(sql, [], |r| r.get::<_, LenientDate>(0))
                .expect("never an error")
                .0
        };
        assert_eq!(
            read("SELECT '2026-06-03'"),
            NaiveDate::from_ymd_opt(2026, 6, 3)
        );
        assert_eq!(read("SELECT '-0001-01-01'"), None);
        assert_eq!(read("SELECT 'soon'"), None);
        assert_eq!(read("SELECT NULL"), None);
        let strict: rusqlite::Result<SqlDate> =
            conn.query_row("SELECT '-0001-01-01'", [], |r| r.get(0));
        assert!(strict.is_err());
    }
}
