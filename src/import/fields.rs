//! Header checks and cell parsing shared by the file readers, each problem placed at
//! `FILE:LINE:COLUMN` with what was found and what was expected.

use chrono::NaiveDate;
use csv::StringRecord;

use super::diagnostic::Diagnostics;
use super::table::{Header, number_text, parse_number, trim_cell};
use crate::model::units::SuctionUnit;

/// Checks a header row: required and optional columns, no name twice.
pub(crate) struct HeaderCheck<'a> {
    file: &'a str,
    header: &'a Header,
    expected: &'a str,
    ok: bool,
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

    /// The index of a column the file must have (reports it missing otherwise).
    pub(crate) fn required(&mut self, name: &str, diags: &mut Diagnostics) -> usize {
        if let Some(i) = self.header.find(name) {
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
    pub(crate) fn optional(&self, name: &str) -> Option<usize> {
        self.header.find(name)
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

    /// Text that must be there; `what` names it for the message.
    pub(crate) fn required_text(&mut self, col: usize, what: &str) -> Option<String> {
        let t = self.raw(col);
        if t.is_empty() {
            self.fail(col, format!("found an empty cell, expected {what}"));
            return None;
        }
        Some(t.to_string())
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

    /// An optional calendar day written `YYYY-MM-DD`.
    pub(crate) fn optional_date(&mut self, col: Option<usize>) -> Option<NaiveDate> {
        let col = col?;
        let t = self.raw(col);
        if t.is_empty() {
            return None;
        }
        if let Ok(d) = NaiveDate::parse_from_str(t, "%Y-%m-%d") {
            return Some(d);
        }
        let found = t.to_string();
        self.fail(
            col,
            format!("found {found:?}, expected a date as YYYY-MM-DD"),
        );
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
pub(crate) fn read_rows<R: std::io::Read>(
    table: &mut super::table::Table<R>,
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

/// Read the depth pair of a layer: `top_cm` 0 or more, `bottom_cm` below it.
pub(crate) fn depths(cells: &mut Cells<'_>, top: usize, bottom: usize) -> Option<(f64, f64)> {
    let t = cells.number(top);
    let b = cells.number(bottom);
    let t = t.filter(|&t| {
        cells.in_range(
            top,
            t,
            0.0,
            f64::MAX,
            "a depth of 0 cm or more below the surface",
        )
    })?;
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
