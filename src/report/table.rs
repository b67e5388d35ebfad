//! A listing of rows under named columns, printed as an aligned text table, CSV or JSON.
//!
//! Column names carry their unit (`suction_kpa`, `bulk_density_g_cm3`). Missing and
//! non-finite values are empty cells in tables and CSV and `null` in JSON, never NaN. Text
//! from users shows control characters escaped in tables and CSV, and CSV text cells are
//! neutralised against spreadsheet formulas; JSON strings carry the text as stored.

use std::fmt::Write as _;

use super::csv_safe;
use crate::model::number::significant;
use crate::model::text::shown;

/// Significant digits of numbers in text tables (for people).
pub const TABLE_DIGITS: usize = 6;
/// Significant digits of numbers in CSV and JSON (for programs; beyond the data's precision).
pub const EXPORT_DIGITS: usize = 10;

/// One column of a listing.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Column {
    /// Header name, unit included.
    pub name: String,
    /// Shown in text tables too (wide identifiers are left to CSV and JSON).
    pub in_table: bool,
}

impl Column {
    /// A column shown in every format.
    pub fn new(name: impl Into<String>) -> Self {
        Self {
            name: name.into(),
            in_table: true,
        }
    }

    /// A column left out of text tables (for example a 36-character uid).
    pub fn export_only(name: impl Into<String>) -> Self {
        Self {
            name: name.into(),
            in_table: false,
        }
    }
}

/// One value of a row.
#[derive(Debug, Clone, PartialEq)]
pub enum Cell {
    /// Text, or nothing.
    Text(Option<String>),
    /// A count or id.
    Int(i64),
    /// A measurement, or nothing; non-finite values are treated as nothing.
    Real(Option<f64>),
    /// A measurement with the exact text CSV and JSON write for it (a decimal that imports
    /// back to the stored value); text tables round `value` for people. A text that is not a
    /// JSON number (`-inf`, pF of 0 cm) is `null` in JSON; an empty text is nothing.
    Decimal(Option<String>, f64),
    /// A measurement that text tables show as the given text (with its interval, for
    /// example `0.284±0.012`) while CSV and JSON carry the number alone.
    Estimate(Option<f64>, String),
}

impl Cell {
    /// A text cell.
    pub fn text(s: impl Into<String>) -> Self {
        Cell::Text(Some(s.into()))
    }

    /// A measurement written in full in CSV and JSON: the shortest decimal that reads back
    /// as exactly `v`.
    pub fn exact(v: Option<f64>) -> Self {
        match v.filter(|v| v.is_finite()) {
            Some(v) => Cell::Decimal(Some(super::format_number(v)), v),
            None => Cell::Real(None),
        }
    }

    fn is_numeric(&self) -> bool {
        matches!(
            self,
            Cell::Int(_) | Cell::Real(_) | Cell::Decimal(..) | Cell::Estimate(..)
        )
    }

    /// The cell as text for people, with `digits` significant digits for reals; `None` when
    /// empty.
    fn render(&self, digits: usize) -> Option<String> {
        match self {
            Cell::Text(t) => t.clone(),
            Cell::Int(i) => Some(i.to_string()),
            Cell::Real(v) => v.and_then(|v| significant(v, digits)),
            Cell::Decimal(_, v) => significant(*v, digits),
            Cell::Estimate(v, text) => v.filter(|v| v.is_finite()).map(|_| text.clone()),
        }
    }

    /// The cell as CSV and JSON write it: exact decimals in full, other reals with `digits`.
    fn render_export(&self, digits: usize) -> Option<String> {
        match self {
            Cell::Decimal(text, _) => text.clone(),
            Cell::Estimate(v, _) => v.and_then(|v| significant(v, digits)),
            other => other.render(digits),
        }
    }

    /// As [`Cell::render`] for a terminal: control and bidirectional formatting characters
    /// of text shown escaped.
    fn render_shown(&self, digits: usize) -> Option<String> {
        match self {
            Cell::Text(t) => t.as_deref().map(|t| shown(t).into_owned()),
            _ => self.render(digits),
        }
    }

    /// As [`Cell::render_export`] for CSV: text neutralised against spreadsheet formulas
    /// ([`csv_safe::text`]), numbers unchanged.
    fn render_csv(&self, digits: usize) -> Option<String> {
        match self {
            Cell::Text(t) => t.as_deref().map(csv_safe::text),
            _ => self.render_export(digits),
        }
    }
}

impl From<Option<String>> for Cell {
    fn from(t: Option<String>) -> Self {
        Cell::Text(t)
    }
}

impl From<Option<f64>> for Cell {
    fn from(v: Option<f64>) -> Self {
        Cell::Real(v)
    }
}

impl From<f64> for Cell {
    fn from(v: f64) -> Self {
        Cell::Real(Some(v))
    }
}

impl From<u64> for Cell {
    fn from(v: u64) -> Self {
        Cell::Int(i64::try_from(v).unwrap_or(i64::MAX))
    }
}

impl From<i64> for Cell {
    fn from(v: i64) -> Self {
        Cell::Int(v)
    }
}

/// Rows under columns.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Listing {
    columns: Vec<Column>,
    rows: Vec<Vec<Cell>>,
}

impl Listing {
    /// An empty listing with these columns.
    pub fn new(columns: Vec<Column>) -> Self {
        Self {
            columns,
            rows: Vec::new(),
        }
    }

    /// Add a row (one cell per column).
    pub fn push(&mut self, row: Vec<Cell>) {
        debug_assert_eq!(row.len(), self.columns.len());
        self.rows.push(row);
    }

    /// The column names.
    pub fn column_names(&self) -> Vec<&str> {
        self.columns.iter().map(|c| c.name.as_str()).collect()
    }

    /// Number of rows.
    pub fn len(&self) -> usize {
        self.rows.len()
    }

    /// True when there are no rows.
    pub fn is_empty(&self) -> bool {
        self.rows.is_empty()
    }

    /// An aligned text table for people: numbers right-aligned, text left-aligned.
    pub fn to_table(&self) -> String {
        let shown: Vec<usize> = (0..self.columns.len())
            .filter(|&i| self.columns[i].in_table)
            .collect();
        let cells: Vec<Vec<String>> = self
            .rows
            .iter()
            .map(|row| {
                shown
                    .iter()
                    .map(|&i| row[i].render_shown(TABLE_DIGITS).unwrap_or_default())
                    .collect()
            })
            .collect();
        let numeric: Vec<bool> = shown
            .iter()
            .map(|&i| self.rows.iter().any(|r| r[i].is_numeric()))
            .collect();
        let widths: Vec<usize> = shown
            .iter()
            .enumerate()
            .map(|(k, &i)| {
                cells
                    .iter()
                    .map(|r| r[k].chars().count())
                    .chain([self.columns[i].name.chars().count()])
                    .max()
                    .unwrap_or(0)
            })
            .collect();
        let mut out = String::new();
        let header: Vec<String> = shown
            .iter()
            .map(|&i| self.columns[i].name.clone())
            .collect();
        for line in std::iter::once(&header).chain(&cells) {
            let mut text = String::new();
            for (k, cell) in line.iter().enumerate() {
                if k > 0 {
                    text.push_str("  ");
                }
                let pad = widths[k].saturating_sub(cell.chars().count());
                if numeric[k] {
                    text.push_str(&" ".repeat(pad));
                    text.push_str(cell);
                } else {
                    text.push_str(cell);
                    text.push_str(&" ".repeat(pad));
                }
            }
            out.push_str(text.trim_end());
            out.push('\n');
        }
        out
    }

    /// CSV with a header row; empty cells for missing values, text cells neutralised
    /// against spreadsheet formulas ([`csv_safe::text`]).
    ///
    /// # Errors
    /// Only if the CSV writer fails on memory.
    pub fn to_csv(&self) -> Result<String, csv::Error> {
        let mut w = csv_safe::writer();
        w.write_record(self.column_names())?;
        for row in &self.rows {
            w.write_record(
                row.iter()
                    .map(|c| c.render_csv(EXPORT_DIGITS).unwrap_or_default()),
            )?;
        }
        csv_safe::finish(w)
    }

    /// A JSON array with one object per row, keys in column order, `null` for missing values.
    pub fn to_json(&self) -> String {
        let mut out = String::from("[");
        for (n, row) in self.rows.iter().enumerate() {
            out.push_str(if n == 0 { "\n  {" } else { ",\n  {" });
            for (k, (col, cell)) in self.columns.iter().zip(row).enumerate() {
                if k > 0 {
                    out.push_str(", ");
                }
                let value = match (cell, cell.render_export(EXPORT_DIGITS)) {
                    (_, None) => "null".to_string(),
                    (Cell::Text(_), Some(t)) => serde_json::Value::String(t).to_string(),
                    (Cell::Decimal(_, v), Some(_)) if !v.is_finite() => "null".to_string(),
                    (_, Some(t)) => t,
                };
                let _ = write!(
                    out,
                    "{}: {value}",
                    serde_json::Value::String(col.name.clone())
                );
            }
            out.push('}');
        }
        out.push_str(if self.rows.is_empty() { "]\n" } else { "\n]\n" });
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sample() -> Listing {
        let mut l = Listing::new(vec![
            Column::new("sample"),
            Column::new("suction_kpa"),
            Column::export_only("uid"),
        ]);
        l.push(vec![
            Cell::text("A1"),
            33.000_000_000_01.into(),
            Cell::text("u1"),
        ]);
        l.push(vec![
            Cell::text("B, \"2\""),
            Cell::Real(Some(f64::NEG_INFINITY)),
            Cell::Text(None),
        ]);
        l
    }

    #[test]
    fn table_aligns_and_hides_export_columns() {
        let text = sample().to_table();
        assert_eq!(text, "sample  suction_kpa\nA1               33\nB, \"2\"\n");
    }

    #[test]
    fn estimates_show_their_interval_in_tables_and_the_number_elsewhere() {
        let mut l = Listing::new(vec![Column::new("theta_m3_m3")]);
        l.push(vec![Cell::Estimate(Some(0.2841), "0.284±0.012".into())]);
        l.push(vec![Cell::Estimate(None, "–".into())]);
        assert_eq!(l.to_table(), "theta_m3_m3\n0.284±0.012\n\n");
        // A record of one empty field is written quoted, so it is not an empty line.
        assert_eq!(l.to_csv().expect("csv"), "theta_m3_m3\n0.2841\n\"\"\n");
        let json: serde_json::Value = serde_json::from_str(&l.to_json()).expect("json");
        assert_eq!(json[0]["theta_m3_m3"], serde_json::json!(0.2841));
        assert!(json[1]["theta_m3_m3"].is_null());
    }

    #[test]
    fn csv_and_json_never_write_nan_or_infinity() {
        let csv = sample().to_csv().expect("csv");
        assert_eq!(
            csv,
            "sample,suction_kpa,uid\nA1,33,u1\n\"B, \"\"2\"\"\",,\n"
        );
        let json: serde_json::Value = serde_json::from_str(&sample().to_json()).expect("json");
        assert_eq!(json[0]["suction_kpa"], serde_json::json!(33));
        assert!(json[1]["suction_kpa"].is_null());
        assert_eq!(json[1]["sample"], "B, \"2\"");
        assert_eq!(Listing::new(vec![Column::new("a")]).to_json(), "[]\n");
    }
}
