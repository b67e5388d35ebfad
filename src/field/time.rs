//! Instants, offsets and spans as logger files and the command line write them.
//!
//! Logger times are ISO 8601 with a UTC offset (`2026-05-01T12:00:00+02:00`, `...Z`) or, when
//! a file carries none, local times with one offset given for the whole file. Inside the
//! program an instant is whole seconds since 1970-01-01 UTC; it is stored as
//! `YYYY-MM-DDTHH:MM:SSZ`.

use chrono::{DateTime, Datelike, FixedOffset, NaiveDate, Timelike};

/// An example of an accepted time, for messages.
pub const TIME_EXAMPLE: &str = "2026-05-01T12:00:00+02:00";

/// Why a time cell was refused (the caller adds where).
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum TimeError {
    /// Not an ISO 8601 date and time.
    Malformed,
    /// Well formed, but not a calendar date or time of day (`2026-02-30`, `25:00`).
    NotCalendar,
    /// No offset in the text and none given for the file.
    NoOffset,
    /// A fraction of a second that is not zero.
    Fraction,
    /// An offset beyond ±18 hours.
    BadOffset,
}

impl TimeError {
    /// The message for a diagnostic about the cell `text`: what was found, what was expected.
    pub fn message(&self, text: &str) -> String {
        match self {
            TimeError::Malformed => {
                format!("found {text:?}, expected an ISO 8601 date and time such as {TIME_EXAMPLE}")
            }
            TimeError::NotCalendar => format!(
                "found {text:?}, which is not a calendar date and time of day, expected one \
                 such as {TIME_EXAMPLE}"
            ),
            TimeError::NoOffset => format!(
                "found {text:?} without a UTC offset, expected a time with its offset \
                 ({TIME_EXAMPLE} or ...Z), or --utc-offset +HH:MM for the whole file"
            ),
            TimeError::Fraction => {
                format!("found {text:?} with a fraction of a second, expected whole seconds")
            }
            TimeError::BadOffset => {
                format!("found {text:?}, expected a UTC offset from -18:00 to +18:00")
            }
        }
    }
}

/// A cursor over the bytes of a time text.
struct Bytes<'a> {
    b: &'a [u8],
    i: usize,
}

impl Bytes<'_> {
    fn digits(&mut self, n: usize) -> Option<u32> {
        let end = self.i.checked_add(n)?;
        let slice = self.b.get(self.i..end)?;
        let mut v = 0u32;
        for &c in slice {
            if !c.is_ascii_digit() {
                return None;
            }
            v = v * 10 + u32::from(c - b'0');
        }
        self.i = end;
        Some(v)
    }

    fn eat(&mut self, c: u8) -> bool {
        if self.b.get(self.i) == Some(&c) {
            self.i += 1;
            true
        } else {
            false
        }
    }

    fn peek(&self) -> Option<u8> {
        self.b.get(self.i).copied()
    }

    fn done(&self) -> bool {
        self.i >= self.b.len()
    }
}

/// Parse an offset suffix at the cursor: `Z`, `±HH:MM`, `±HHMM` or `±HH`; seconds east of UTC.
fn offset_at(c: &mut Bytes<'_>) -> Result<Option<i32>, TimeError> {
    match c.peek() {
        None => Ok(None),
        Some(b'Z' | b'z') => {
            c.i += 1;
            Ok(Some(0))
        }
        Some(sign @ (b'+' | b'-')) => {
            c.i += 1;
            let hours = c.digits(2).ok_or(TimeError::Malformed)?;
            let minutes = if c.done() {
                0
            } else {
                c.eat(b':');
                c.digits(2).ok_or(TimeError::Malformed)?
            };
            if hours > 18 || minutes > 59 || (hours == 18 && minutes > 0) {
                return Err(TimeError::BadOffset);
            }
            let secs = (hours * 3600 + minutes * 60) as i32;
            Ok(Some(if sign == b'-' { -secs } else { secs }))
        }
        Some(_) => Err(TimeError::Malformed),
    }
}

/// Parse a logger time: `YYYY-MM-DD[T| ]HH:MM[:SS[.000]]` and an optional offset (`Z`,
/// `±HH:MM`, `±HHMM`, `±HH`, optionally after one space). A time without an offset takes
/// `default_offset` (seconds east of UTC); returns seconds since 1970-01-01 UTC.
///
/// # Errors
/// A [`TimeError`] saying what is wrong with the text.
pub fn parse_instant(text: &str, default_offset: Option<i32>) -> Result<i64, TimeError> {
    let mut c = Bytes {
        b: text.trim().as_bytes(),
        i: 0,
    };
    let year = c.digits(4).ok_or(TimeError::Malformed)?;
    let ok = c.eat(b'-');
    let month = c.digits(2).filter(|_| ok).ok_or(TimeError::Malformed)?;
    let ok = c.eat(b'-');
    let day = c.digits(2).filter(|_| ok).ok_or(TimeError::Malformed)?;
    if !(c.eat(b'T') || c.eat(b't') || c.eat(b' ')) {
        return Err(TimeError::Malformed);
    }
    let hour = c.digits(2).ok_or(TimeError::Malformed)?;
    let ok = c.eat(b':');
    let minute = c.digits(2).filter(|_| ok).ok_or(TimeError::Malformed)?;
    let mut second = 0;
    if c.eat(b':') {
        second = c.digits(2).ok_or(TimeError::Malformed)?;
        if c.eat(b'.') || c.eat(b',') {
            let start = c.i;
            while c.peek().is_some_and(|b| b.is_ascii_digit()) {
                if c.peek() != Some(b'0') {
                    return Err(TimeError::Fraction);
                }
                c.i += 1;
            }
            if c.i == start {
                return Err(TimeError::Malformed);
            }
        }
    }
    c.eat(b' ');
    let offset = match offset_at(&mut c)? {
        Some(o) => o,
        None => default_offset.ok_or(TimeError::NoOffset)?,
    };
    if !c.done() {
        return Err(TimeError::Malformed);
    }
    let local = NaiveDate::from_ymd_opt(year as i32, month, day)
        .and_then(|d| d.and_hms_opt(hour, minute, second))
        .ok_or(TimeError::NotCalendar)?;
    Ok(local.and_utc().timestamp() - i64::from(offset))
}

/// Parse a UTC offset given on the command line: `+HH:MM`, `-HH:MM`, `+HHMM`, `+HH` or `Z`;
/// seconds east of UTC.
///
/// # Errors
/// A message naming the text and the accepted forms.
pub fn parse_offset(text: &str) -> Result<i32, String> {
    let t = text.trim();
    let bad = || format!("found {t:?}, expected a UTC offset such as +02:00, -05:00 or Z");
    if t.eq_ignore_ascii_case("utc") {
        return Ok(0);
    }
    let mut c = Bytes {
        b: t.as_bytes(),
        i: 0,
    };
    match offset_at(&mut c) {
        Ok(Some(o)) if c.done() => FixedOffset::east_opt(o).map(|_| o).ok_or_else(bad),
        _ => Err(bad()),
    }
}

/// Parse a span such as `30m`, `6h`, `90s`, `2d` (also `min`, `hours`, ...) into seconds (> 0).
///
/// # Errors
/// A message naming the text and the accepted forms.
pub fn parse_span(text: &str) -> Result<i64, String> {
    let t = text.trim();
    let bad = || format!("found {t:?}, expected a span such as 90s, 30m, 6h or 2d");
    let split = t
        .find(|c: char| !(c.is_ascii_digit() || c == '.'))
        .ok_or_else(bad)?;
    let (number, unit) = t.split_at(split);
    let value: f64 = number.parse().map_err(|_| bad())?;
    let scale = match unit.trim().to_ascii_lowercase().as_str() {
        "s" | "sec" | "secs" | "second" | "seconds" => 1.0,
        "m" | "min" | "mins" | "minute" | "minutes" => 60.0,
        "h" | "hr" | "hrs" | "hour" | "hours" => 3600.0,
        "d" | "day" | "days" => 86_400.0,
        _ => return Err(bad()),
    };
    let secs = (value * scale).round();
    if !(1.0..=1e10).contains(&secs) {
        return Err(format!(
            "found {t:?}, expected a span of at least one second"
        ));
    }
    Ok(secs as i64)
}

/// A span in seconds for people: `30 min`, `6 h`, `1.5 d`, `90 s`.
pub fn span_text(secs: i64) -> String {
    let s = secs as f64;
    let (v, unit) = if secs % 86_400 == 0 {
        (s / 86_400.0, "d")
    } else if secs >= 3600 && secs % 60 == 0 {
        (s / 3600.0, "h")
    } else if secs >= 60 && secs % 60 == 0 {
        (s / 60.0, "min")
    } else {
        (s, "s")
    };
    let v = crate::model::number::significant(v, 4).unwrap_or_default();
    format!("{v} {unit}")
}

/// The stored form of an instant: `YYYY-MM-DDTHH:MM:SSZ` (20 ASCII bytes), `None` outside the
/// years 0-9999.
pub fn utc_text(secs: i64) -> Option<[u8; 20]> {
    let t = DateTime::from_timestamp(secs, 0)?;
    let year = u32::try_from(t.year()).ok().filter(|y| *y <= 9999)?;
    let mut out = *b"0000-00-00T00:00:00Z";
    let mut put = |at: usize, v: u32, width: usize| {
        let mut v = v;
        for k in (0..width).rev() {
            out[at + k] = b'0' + (v % 10) as u8;
            v /= 10;
        }
    };
    put(0, year, 4);
    put(5, t.month(), 2);
    put(8, t.day(), 2);
    put(11, t.hour(), 2);
    put(14, t.minute(), 2);
    put(17, t.second(), 2);
    Some(out)
}

/// [`utc_text`] as a `String` (an empty string outside the years 0-9999).
pub fn utc_string(secs: i64) -> String {
    utc_text(secs)
        .map(|b| b.iter().map(|&c| char::from(c)).collect())
        .unwrap_or_default()
}

#[cfg(test)]
mod tests {
    use super::*;

    const NOON_UTC: i64 = 1_777_636_800; // 2026-05-01T12:00:00Z

    #[test]
    fn offsets_in_the_text_and_for_the_file() {
        assert_eq!(parse_instant("2026-05-01T12:00:00Z", None), Ok(NOON_UTC));
        assert_eq!(
            parse_instant("2026-05-01T14:00:00+02:00", None),
            Ok(NOON_UTC)
        );
        assert_eq!(parse_instant("2026-05-01 07:00-0500", None), Ok(NOON_UTC));
        assert_eq!(parse_instant("2026-05-01T14:00:00 +02", None), Ok(NOON_UTC));
        assert_eq!(
            parse_instant("2026-05-01T12:00:00.000Z", None),
            Ok(NOON_UTC)
        );
        // The file's offset applies only where the text has none.
        assert_eq!(parse_instant("2026-05-01T13:00", Some(3600)), Ok(NOON_UTC));
        assert_eq!(
            parse_instant("2026-05-01T12:00:00Z", Some(3600)),
            Ok(NOON_UTC)
        );
        assert_eq!(
            parse_instant("2026-05-01T13:00:00", None),
            Err(TimeError::NoOffset)
        );
    }

    #[test]
    fn bad_times_say_why() {
        for (text, err) in [
            ("2026-5-1 12:00Z", TimeError::Malformed),
            ("yesterday", TimeError::Malformed),
            ("2026-05-01", TimeError::Malformed),
            ("2026-05-01T12:00:00Zx", TimeError::Malformed),
            ("2026-02-30T12:00Z", TimeError::NotCalendar),
            ("2026-05-01T24:00Z", TimeError::NotCalendar),
            ("2026-05-01T12:00:00.5Z", TimeError::Fraction),
            ("2026-05-01T12:00+19:00", TimeError::BadOffset),
        ] {
            assert_eq!(parse_instant(text, Some(0)), Err(err), "{text}");
        }
        let msg = TimeError::NoOffset.message("2026-05-01T13:00");
        assert!(msg.contains("without a UTC offset") && msg.contains("--utc-offset"));
    }

    #[test]
    fn stored_form_and_offsets_and_spans() {
        assert_eq!(utc_string(NOON_UTC), "2026-05-01T12:00:00Z");
        assert_eq!(utc_string(0), "1970-01-01T00:00:00Z");
        assert_eq!(parse_offset("+01:00"), Ok(3600));
        assert_eq!(parse_offset("-0530"), Ok(-19_800));
        assert_eq!(parse_offset("Z"), Ok(0));
        assert!(parse_offset("01:00").is_err());
        assert!(parse_offset("+25:00").is_err());
        assert_eq!(parse_span("30m"), Ok(1800));
        assert_eq!(parse_span("6h"), Ok(21_600));
        assert_eq!(parse_span("1.5 d"), Ok(129_600));
        assert_eq!(parse_span("90s"), Ok(90));
        assert!(parse_span("6").is_err());
        assert!(parse_span("0h").is_err());
        assert!(parse_span("6 weeks").is_err());
        assert_eq!(span_text(1800), "30 min");
        assert_eq!(span_text(21_600), "6 h");
        assert_eq!(span_text(129_600), "36 h");
        assert_eq!(span_text(172_800), "2 d");
        assert_eq!(span_text(90), "90 s");
    }
}
