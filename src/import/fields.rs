//! Header checks and cell parsing shared by the file readers, each problem placed at
//! `FILE:LINE:COLUMN` with what was found and what was expected.

use chrono::{Datelike, NaiveDate};
use csv::StringRecord;

use super::diagnostic::Diagnostics;
use super::table::{Header, number_text, parse_number, trim_cell};
use crate::model::text::first_hidden_control;
use crate::model::units::SuctionUnit;

/// The years a measuring date may fall in: a stated range that holds every soil survey
/// (the first ones are from the nineteenth century) and leaves out typing slips such as
/// `26-6-3` (the year 26) or `-1-01-01`.
pub const YEAR_RANGE: (i32, i32) = (1800, 2200);

/// The deepest depth accepted, cm (100 m: deeper than any soil profile or logger).
pub const MAX_DEPTH_CM: f64 = 10_000.0;

/// The shallowest depth other than the surface, cm (0.1 mm: finer than any core is cut).
pub const MIN_DEPTH_CM: f64 = 0.01;

/// The range of depths accepted: the surface (0), or from [`MIN_DEPTH_CM`] to [`MAX_DEPTH_CM`].
pub const DEPTH_RANGE_CM: (f64, f64) = (MIN_DEPTH_CM, MAX_DEPTH_CM);

/// The message part for a depth out of range.
pub(crate) const DEPTH_EXPECTED: &str =
    "a depth below the surface of 0 or from 0.01 to 10000 cm (100 m)";

/// Whether a depth (cm) is one porewise accepts: 0, or within [`DEPTH_RANGE_CM`].
pub fn depth_ok(v: f64) -> bool {
    v == 0.0 || (DEPTH_RANGE_CM.0..=DEPTH_RANGE_CM.1).contains(&v)
}

/// A calendar day written exactly `YYYY-MM-DD` (ISO 8601 calendar date, extended format),
/// with the year in [`YEAR_RANGE`]; `None` for anything else (`2026-6-3`, `+2026-06-03`,
/// `26-06-03`, `2026-02-30`).
pub fn calendar_day(text: &str) -> Option<NaiveDate> {
    let b = text.as_bytes();
    let digits = |r: std::ops::Range<usize>| b[r].iter().all(u8::is_ascii_digit);
    if b.len() != 10 || b[4] != b'-' || b[7] != b'-' || !digits(0..4) || !digits(5..7) {
        return None;
    }
    if !digits(8..10) {
        return None;
    }
    let day = NaiveDate::parse_from_str(text, "%Y-%m-%d").ok()?;
    let (lo, hi) = YEAR_RANGE;
    (lo..=hi).contains(&day.year()).then_some(day)
}

/// Checks a header row: required and optional columns, no name twice, and (with
/// [`HeaderCheck::unused`]) every column the reader does not use.
pub(crate) struct HeaderCheck<'a> {
    file: &'a str,
    header: &'a Header,
    expected: &'a str,
    ok: bool,
    used: Vec<bool>,
}

impl<'a> HeaderCheck<'a> {
    /// Start checking; `expected` lists the file's columns for messages.
    pub(crate) fn new(
        file: &'a str,
        header: &'a Header,
        expected: &'a str,
        diags: &mut Diagnostics,
    ) -> Self {
        let mut check = Self {
            file,
            header,
            expected,
            ok: true,
            used: vec![false; header.names().len()],
        };
        let lower: Vec<String> = header
            .names()
            .iter()
            .map(|n| n.to_ascii_lowercase())
            .collect();
        for (i, name) in lower.iter().enumerate() {
            if !name.is_empty() && lower[..i].contains(name) {
                check.fail(
                    diags,
                    header.name(i),
                    format!(
                        "found the column {:?} twice, expected each column once",
                        header.name(i)
                    ),
                );
            }
        }
        check
    }

    /// Record a header problem at line 1.
    pub(crate) fn fail(&mut self, diags: &mut Diagnostics, column: &str, message: String) {
        self.ok = false;
        diags.push(self.file, 1, column, message);
    }

    /// The five columns that place a sample (`site`, `top_cm`, `bottom_cm`, `sample`,
    /// `method`), each required: the start of a lab or conductivity file.
    pub(crate) fn sample_columns(&mut self, diags: &mut Diagnostics) -> SampleColumns {
        SampleColumns {
            site: self.required("site", diags),
            top: self.required("top_cm", diags),
            bottom: self.required("bottom_cm", diags),
            sample: self.required("sample", diags),
            method: self.required("method", diags),
        }
    }

    /// The index of a column the file must have (reports it missing otherwise).
    pub(crate) fn required(&mut self, name: &str, diags: &mut Diagnostics) -> usize {
        if let Some(i) = self.header.find(name) {
            self.mark_used(i);
            return i;
        }
        let message = format!(
            "found no column {name:?} in the header, expected the columns {}",
            self.expected
        );
        self.fail(diags, name, message);
        usize::MAX
    }

    /// The index of a column the file may have.
    pub(crate) fn optional(&mut self, name: &str) -> Option<usize> {
        let i = self.header.find(name)?;
        self.mark_used(i);
        Some(i)
    }

    /// Note that column `i` is read (or already reported) by the caller.
    pub(crate) fn mark_used(&mut self, i: usize) {
        if let Some(u) = self.used.get_mut(i) {
            *u = true;
        }
    }

    /// Report every column not used: a warning naming it and the `known` column it resembles,
    /// or, when `diags` is strict (`--strict`), a header problem.
    pub(crate) fn unused(&mut self, known: &[&str], diags: &mut Diagnostics) {
        let strict = diags.is_strict();
        for i in 0..self.used.len() {
            if self.used[i] {
                continue;
            }
            let name = self.header.name(i).to_string();
            let (column, found) = if name.is_empty() {
                (
                    "-".to_string(),
                    format!("found column {} without a name", i + 1),
                )
            } else {
                let hint = suggestion(&name, known)
                    .map(|k| format!(" (did you mean {k:?}?)"))
                    .unwrap_or_default();
                (
                    name.clone(),
                    format!("found the column {name:?}, which porewise does not read{hint}"),
                )
            };
            if strict {
                let message = format!(
                    "{found}, expected only the columns {} (--strict)",
                    self.expected
                );
                self.fail(diags, &column, message);
            } else {
                diags.warn(
                    self.file,
                    1,
                    &column,
                    format!("{found}; its values are ignored"),
                );
            }
        }
    }

    /// True when no header problem was found.
    pub(crate) fn is_ok(&self) -> bool {
        self.ok
    }
}

/// The cells of one data row, parsed one at a time; every problem is reported, and
/// [`Cells::is_ok`] says whether the row may be used.
pub(crate) struct Cells<'a> {
    file: &'a str,
    line: u64,
    header: &'a Header,
    record: &'a StringRecord,
    decimal_comma: bool,
    diags: &'a mut Diagnostics,
    ok: bool,
}

impl<'a> Cells<'a> {
    /// The cells of a record, or `None` (reported) when its field count is not the header's.
    pub(crate) fn new(
        file: &'a str,
        line: u64,
        header: &'a Header,
        record: &'a StringRecord,
        decimal_comma: bool,
        diags: &'a mut Diagnostics,
    ) -> Option<Self> {
        let expected = header.names().len();
        if record.len() != expected {
            diags.push(
                file,
                line,
                "-",
                format!(
                    "found {} field{}, expected {expected} (one per header column)",
                    record.len(),
                    if record.len() == 1 { "" } else { "s" }
                ),
            );
            return None;
        }
        Some(Self {
            file,
            line,
            header,
            record,
            decimal_comma,
            diags,
            ok: true,
        })
    }

    /// Report a problem with column `col` of this row.
    pub(crate) fn fail(&mut self, col: usize, message: impl Into<String>) {
        self.ok = false;
        self.diags
            .push(self.file, self.line, self.header.name(col), message);
    }

    /// True when no cell of this row was bad.
    pub(crate) fn is_ok(&self) -> bool {
        self.ok
    }

    /// The physical line of this row.
    pub(crate) fn line(&self) -> u64 {
        self.line
    }

    fn raw(&self, col: usize) -> &str {
        self.cell(col)
    }

    /// The trimmed text of column `col`, borrowed from the record (no copy).
    pub(crate) fn cell(&self, col: usize) -> &'a str {
        self.record.get(col).map_or("", trim_cell)
    }

    /// Optional text: `None` when the column is absent or the cell empty.
    pub(crate) fn text(&self, col: Option<usize>) -> Option<String> {
        let t = self.raw(col?);
        (!t.is_empty()).then(|| t.to_string())
    }

    /// A suction cell written in `unit`: the number as written and the suction in cm,
    /// converted from the cell's decimal text and rounded once
    /// ([`SuctionUnit::decimal_to_cm`]), so a listing in any unit imports to the very values
    /// it lists. In a pF column `-inf` is saturation (0 cm, log10 0 being minus infinity).
    pub(crate) fn suction(&mut self, col: usize, unit: SuctionUnit) -> Option<(f64, f64)> {
        if unit == SuctionUnit::Pf && trim_cell(self.raw(col)).eq_ignore_ascii_case("-inf") {
            return Some((f64::NEG_INFINITY, 0.0));
        }
        let v = self.number(col)?;
        let h = unit
            .decimal_to_cm(&number_text(self.raw(col), self.decimal_comma))
            .unwrap_or_else(|| unit.to_cm(v));
        Some((v, h))
    }

    /// A number that must be there.
    pub(crate) fn number(&mut self, col: usize) -> Option<f64> {
        match parse_number(self.raw(col), self.decimal_comma) {
            Ok(v) => Some(v),
            Err(message) => {
                self.fail(col, message);
                None
            }
        }
    }

    /// An optional number: `Ok(None)` for an absent column or empty cell, `Err` (reported)
    /// for a cell that is not a finite number.
    pub(crate) fn optional_number(&mut self, col: Option<usize>) -> Result<Option<f64>, ()> {
        let Some(col) = col else { return Ok(None) };
        if self.raw(col).is_empty() {
            return Ok(None);
        }
        self.number(col).map(Some).ok_or(())
    }

    /// Check that a number lies in `lo..=hi`; `expected` describes the range for the message.
    pub(crate) fn in_range(
        &mut self,
        col: usize,
        v: f64,
        lo: f64,
        hi: f64,
        expected: &str,
    ) -> bool {
        if (lo..=hi).contains(&v) {
            return true;
        }
        let found = self.raw(col).to_string();
        self.fail(col, format!("found {found:?}, expected {expected}"));
        false
    }

    /// An optional number that, when given, must lie in `lo..=hi`.
    pub(crate) fn optional_in_range(
        &mut self,
        col: Option<usize>,
        lo: f64,
        hi: f64,
        expected: &str,
    ) -> Option<f64> {
        let v = self.optional_number(col).ok()??;
        let col = col?;
        self.in_range(col, v, lo, hi, expected).then_some(v)
    }

    /// An optional positive number.
    pub(crate) fn optional_positive(&mut self, col: Option<usize>, expected: &str) -> Option<f64> {
        let v = self.optional_number(col).ok()??;
        let col = col?;
        if v > 0.0 {
            return Some(v);
        }
        let found = self.raw(col).to_string();
        self.fail(col, format!("found {found:?}, expected {expected}"));
        None
    }

    /// An optional calendar day written `YYYY-MM-DD` (ISO 8601), in [`YEAR_RANGE`].
    pub(crate) fn optional_date(&mut self, col: Option<usize>) -> Option<NaiveDate> {
        let col = col?;
        let t = self.raw(col);
        if t.is_empty() {
            return None;
        }
        if let Some(d) = calendar_day(t) {
            return Some(d);
        }
        let found = t.to_string();
        let (lo, hi) = YEAR_RANGE;
        self.fail(
            col,
            format!(
                "found {found:?}, expected a date as YYYY-MM-DD (ISO 8601, four-digit year \
                 from {lo} to {hi}, two-digit month and day)"
            ),
        );
        None
    }

    /// A code (site, sample, sensor) that must be there and hold no control or
    /// bidirectional formatting character; `what` names it for the message.
    pub(crate) fn code(&mut self, col: usize, what: &str) -> Option<String> {
        self.code_text(col, what).map(str::to_string)
    }

    /// As [`Cells::code`], borrowed from the record (no copy: the logger's streaming path).
    pub(crate) fn code_text(&mut self, col: usize, what: &str) -> Option<&'a str> {
        let t = self.cell(col);
        if t.is_empty() {
            self.fail(col, format!("found an empty cell, expected {what}"));
            return None;
        }
        if let Some(c) = first_hidden_control(t) {
            self.fail(
                col,
                format!(
                    "found {t:?}, expected {what} of printable characters (it holds the \
                     control character U+{:04X})",
                    u32::from(c)
                ),
            );
            return None;
        }
        Some(t)
    }

    /// A depth below the surface in cm: a number in [`DEPTH_RANGE_CM`], 0 or at least
    /// [`MIN_DEPTH_CM`].
    pub(crate) fn depth(&mut self, col: usize) -> Option<f64> {
        let v = self.number(col)?;
        if depth_ok(v) {
            return Some(v);
        }
        let found = self.found(col);
        self.fail(col, format!("found {found}, expected {DEPTH_EXPECTED}"));
        None
    }

    /// An optional word of a fixed set, parsed with its `FromStr` (whose error lists the set).
    pub(crate) fn optional_word<T: std::str::FromStr<Err = String>>(
        &mut self,
        col: Option<usize>,
    ) -> Option<T> {
        let col = col?;
        let t = self.raw(col);
        if t.is_empty() {
            return None;
        }
        match t.parse() {
            Ok(v) => Some(v),
            Err(message) => {
                self.fail(col, message);
                None
            }
        }
    }

    /// The cell text of `col` as found (for messages).
    pub(crate) fn found(&self, col: usize) -> String {
        format!("{:?}", self.raw(col))
    }
}

/// Call `each` with the cells of every data row of `table` that has one field per header
/// column, reporting unreadable rows and rows of the wrong width. Returns the number of data
/// rows (good or bad).
pub(crate) fn read_rows(
    table: &mut impl super::table::RowSource,
    header: &Header,
    diags: &mut Diagnostics,
    mut each: impl FnMut(&mut Cells<'_>),
) -> u64 {
    let name = table.file().to_string();
    let decimal_comma = table.decimal_comma();
    let mut rows = 0;
    while let Some(next) = table.next_record() {
        rows += 1;
        match next {
            Err((line, message)) => diags.push(&name, line, "-", message),
            Ok((line, record)) => {
                if let Some(mut cells) =
                    Cells::new(&name, line, header, record, decimal_comma, diags)
                {
                    each(&mut cells);
                }
            }
        }
    }
    rows
}

/// Read the depth pair of a layer: `top_cm` and `bottom_cm` below it, both in
/// [`DEPTH_RANGE_CM`] (or 0).
pub(crate) fn depths(cells: &mut Cells<'_>, top: usize, bottom: usize) -> Option<(f64, f64)> {
    let t = cells.depth(top);
    let b = cells.depth(bottom);
    let t = t?;
    let b = b?;
    if b <= t {
        let found = cells.found(bottom);
        cells.fail(
            bottom,
            format!("found {found}, expected a bottom deeper than top_cm {t} (depths count down from the surface)"),
        );
        return None;
    }
    Some((t, b))
}

/// The known column name `name` most likely stands for: the closest by edit distance (letter
/// case aside) when it differs in at most a third of its letters, or the one it begins
/// (`depth` for `depth_cm`).
pub(crate) fn suggestion<'k>(name: &str, known: &[&'k str]) -> Option<&'k str> {
    let name = name.to_ascii_lowercase();
    let mut best: Option<(usize, &'k str)> = None;
    for &k in known {
        let d = edit_distance(&name, &k.to_ascii_lowercase());
        if best.is_none_or(|(b, _)| d < b) {
            best = Some((d, k));
        }
    }
    if let Some((d, k)) = best
        && 3 * d <= name.chars().count().max(k.chars().count())
    {
        return Some(k);
    }
    known.iter().copied().find(|k| {
        k.to_ascii_lowercase()
            .strip_prefix(name.as_str())
            .is_some_and(|rest| rest.starts_with('_'))
    })
}

/// Levenshtein distance between two names, in characters.
fn edit_distance(a: &str, b: &str) -> usize {
    let b: Vec<char> = b.chars().collect();
    let mut row: Vec<usize> = (0..=b.len()).collect();
    for (i, ca) in a.chars().enumerate() {
        let mut diagonal = row[0];
        row[0] = i + 1;
        for (j, &cb) in b.iter().enumerate() {
            let next = (diagonal + usize::from(ca != cb))
                .min(row[j] + 1)
                .min(row[j + 1] + 1);
            diagonal = row[j + 1];
            row[j + 1] = next;
        }
    }
    row[b.len()]
}

/// Record how many data rows file `file` had, and report a file with a header and no rows.
pub(crate) fn finish_file(
    batch: &mut super::batch::ImportBatch,
    file: usize,
    rows: u64,
    diags: &mut Diagnostics,
) {
    if let Some(f) = batch.files.get_mut(file) {
        f.rows = rows;
        if rows == 0 {
            diags.push(
                &f.name,
                1,
                "-",
                "found a header row and no data rows, expected at least one data row",
            );
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn only_iso_calendar_days_in_range_are_days() {
        let day = |y, m, d| NaiveDate::from_ymd_opt(y, m, d);
        assert_eq!(calendar_day("2026-06-03"), day(2026, 6, 3));
        assert_eq!(calendar_day("1800-01-01"), day(1800, 1, 1));
        assert_eq!(calendar_day("2200-12-31"), day(2200, 12, 31));
        for bad in [
            "-1-01-01",
            "-0001-01-01",
            "26-6-3",
            "0-1-1",
            "+2026-06-03",
            "2026-6-3",
            "2026-06-3",
            "2026-02-30",
            "1799-12-31",
            "2201-01-01",
            "2026/06/03",
            "2026-06-03T00:00",
            "２０２６-06-03",
            "",
        ] {
            assert_eq!(calendar_day(bad), None, "{bad:?}");
        }
    }

    #[test]
    fn depths_are_the_surface_or_within_the_bounds() {
        for ok in [0.0, 0.01, 20.0, 9_999.99, 10_000.0] {
            assert!(depth_ok(ok), "{ok}");
        }
        for bad in [-0.5, 1e-300, 0.005, 10_000.001, 1e308, f64::NAN] {
            assert!(!depth_ok(bad), "{bad}");
        }
    }

    #[test]
    fn suggestions_are_close_names_or_the_name_with_its_unit() {
        let known = ["site", "top_cm", "bottom_cm", "bulk_density_g_cm3", "notes"];
        assert_eq!(
            suggestion("bulk_density_kg_m3", &known),
            Some("bulk_density_g_cm3")
        );
        assert_eq!(suggestion("Note", &known), Some("notes"));
        assert_eq!(suggestion("top", &known), Some("top_cm"));
        assert_eq!(suggestion("colour", &known), None);
        assert_eq!(suggestion("uid", &known), None);
        assert_eq!(edit_distance("kitten", "sitting"), 3);
        assert_eq!(edit_distance("", "abc"), 3);
        assert_eq!(edit_distance("same", "same"), 0);
    }
}

/// Indexes of the columns that place a sample in a lab or conductivity file.
#[derive(Debug, Clone, Copy)]
pub(crate) struct SampleColumns {
    /// `site`.
    pub site: usize,
    /// `top_cm`.
    pub top: usize,
    /// `bottom_cm`.
    pub bottom: usize,
    /// `sample`.
    pub sample: usize,
    /// `method`.
    pub method: usize,
}
