//! Spreadsheet workbooks (`.xlsx`, `.ods`) as a [`RowSource`]: one sheet's header row and the
//! data rows under it, each cell turned into the text a CSV file would hold.
//!
//! Numbers are written with Rust's shortest round-trip formatting (never through a
//! locale-formatted string), date cells as `YYYY-MM-DD` (`YYYY-MM-DDTHH:MM:SS` when they hold
//! a time of day), text as it is. Problems point at cells: [`SheetPlace::cell`] turns the
//! row number and column name of a diagnostic into `Plates!D14`. Any importer reads a sheet
//! through [`Sheet::open`] and the same `read_rows` / `Cells` as a CSV file.

use std::io::Cursor;

use calamine::{Data, DataType, Ods, Reader, Xlsx, open_workbook_from_rs};

use super::diagnostic::Diagnostics;
use super::table::{Header, RecordError, RowSource};

/// The file name endings read as workbooks (any letter case).
pub const EXTENSIONS: &[&str] = &["xlsx", "ods"];

/// How many rows at the top of a sheet are searched for the header row (title lines and notes
/// above a table are common in lab sheets).
pub const HEADER_SEARCH_ROWS: usize = 20;

/// Whether a file name says it is a workbook porewise reads.
pub fn is_workbook(name: &str) -> bool {
    std::path::Path::new(name)
        .extension()
        .and_then(|e| e.to_str())
        .is_some_and(|e| EXTENSIONS.iter().any(|x| e.eq_ignore_ascii_case(x)))
}

/// The column letters of a 0-based column index: 0 is `A`, 25 `Z`, 26 `AA`.
pub fn column_letters(index: u32) -> String {
    let mut n = u64::from(index) + 1;
    let mut out = Vec::new();
    while n > 0 {
        let rem = ((n - 1) % 26) as u8;
        out.push(b'A' + rem);
        n = (n - 1) / 26;
    }
    out.reverse();
    String::from_utf8(out).unwrap_or_default()
}

/// A sheet name as written in a cell reference: quoted (`'Lab results'`) unless it is
/// letters, digits and underscores only.
fn quoted_sheet(name: &str) -> String {
    if !name.is_empty() && name.chars().all(|c| c.is_alphanumeric() || c == '_') {
        name.to_string()
    } else {
        format!("'{}'", name.replace('\'', "''"))
    }
}

/// Where a sheet's table sits, to turn `LINE:COLUMN` into cell references.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct SheetPlace {
    /// The sheet's name.
    pub sheet: String,
    /// The header's row number in the sheet (from 1).
    pub header_row: u64,
    /// Each header column's name (lower case) and its 0-based column in the sheet.
    columns: Vec<(String, u32)>,
}

impl SheetPlace {
    /// The sheet row a diagnostic's line means: line 1 (where header problems are reported)
    /// is the header row, any other line is a sheet row already.
    fn row(&self, line: u64) -> u64 {
        if line == 1 { self.header_row } else { line }
    }

    /// The reference of a diagnostic's place: `Sheet!D14` for a known column, the whole row
    /// (`Sheet!14:14`) otherwise, the sheet (`Sheet`) for line 0.
    pub fn cell(&self, line: u64, column: &str) -> String {
        let sheet = quoted_sheet(&self.sheet);
        if line == 0 {
            return sheet;
        }
        let row = self.row(line);
        let lower = column.to_ascii_lowercase();
        match self.columns.iter().find(|(name, _)| *name == lower) {
            Some(&(_, col)) => format!("{sheet}!{}{row}", column_letters(col)),
            None => format!("{sheet}!{row}:{row}"),
        }
    }
}

/// One sheet of a workbook read as a table: the header found, the data rows as text.
#[derive(Debug)]
pub struct Sheet {
    file: String,
    header: Header,
    place: SheetPlace,
    rows: std::vec::IntoIter<Result<(u64, csv::StringRecord), RecordError>>,
    record: csv::StringRecord,
}

/// A cell's value as the text a CSV file would hold.
fn cell_text(cell: &Data) -> String {
    match cell {
        Data::Empty => String::new(),
        Data::String(s) | Data::DateTimeIso(s) | Data::DurationIso(s) => s.clone(),
        Data::Int(i) => i.to_string(),
        Data::Float(f) => format!("{f}"),
        Data::Bool(b) => if *b { "TRUE" } else { "FALSE" }.to_string(),
        Data::Error(e) => e.to_string(),
        Data::DateTime(dt) => match dt.as_datetime() {
            Some(t) if t.time() == chrono::NaiveTime::MIN => t.format("%Y-%m-%d").to_string(),
            Some(t) => t.format("%Y-%m-%dT%H:%M:%S").to_string(),
            None => format!("{}", dt.as_f64()),
        },
    }
}

/// Whether row `cells` holds every `required` name (case-insensitive, trimmed).
fn has_columns(cells: &[Data], required: &[&str]) -> bool {
    required.iter().all(|r| {
        cells
            .iter()
            .any(|c| matches!(c, Data::String(s) if s.trim().eq_ignore_ascii_case(r)))
    })
}

/// The sheets of a workbook, with each sheet's cells (absolute start row and column, rows).
type SheetCells = (String, Option<(u32, u32)>, Vec<Vec<Data>>);

/// Read every sheet's cells (or only `only`).
fn read_sheets(bytes: &[u8], ods: bool, only: Option<&str>) -> Result<Vec<SheetCells>, String> {
    fn collect<R: Reader<Cursor<Vec<u8>>>>(mut book: R, only: Option<&str>) -> Vec<SheetCells> {
        let mut out = Vec::new();
        for name in book.sheet_names() {
            if only.is_some_and(|o| o != name) {
                continue;
            }
            // A chart sheet or another sheet without cells is passed over.
            let Ok(range) = book.worksheet_range(&name) else {
                continue;
            };
            let rows = range.rows().map(<[Data]>::to_vec).collect();
            out.push((name, range.start(), rows));
        }
        out
    }
    let cursor = Cursor::new(bytes.to_vec());
    if ods {
        let book: Ods<_> =
            open_workbook_from_rs(cursor).map_err(|e: calamine::OdsError| e.to_string())?;
        Ok(collect(book, only))
    } else {
        let book: Xlsx<_> =
            open_workbook_from_rs(cursor).map_err(|e: calamine::XlsxError| e.to_string())?;
        Ok(collect(book, only))
    }
}

/// A problem with the whole workbook (`lab.xlsx: ...`).
fn workbook_problem(file: &str, message: String) -> Diagnostics {
    let mut d = Diagnostics::new();
    d.push(file, 0, "-", message);
    d.relocate(|x| x.cell = Some(String::new()));
    d
}

impl Sheet {
    /// Open sheet `sheet` of workbook `bytes` (named `file`), or, without a name, the first
    /// sheet with a header row holding every `required` column. The header is the first of
    /// the top [`HEADER_SEARCH_ROWS`] rows that holds them (the first non-empty row of a
    /// named sheet that has none, so the header check names what is missing).
    ///
    /// # Errors
    /// A file that is not a workbook of its kind, a sheet not there, no sheet with the header,
    /// an empty sheet; placed at the workbook or the sheet.
    pub fn open(
        file: &str,
        bytes: &[u8],
        sheet: Option<&str>,
        required: &[&str],
    ) -> Result<Self, Diagnostics> {
        let ods = std::path::Path::new(file)
            .extension()
            .is_some_and(|e| e.eq_ignore_ascii_case("ods"));
        let kind = if ods { "an .ods" } else { "an .xlsx" };
        let sheets = read_sheets(bytes, ods, sheet).map_err(|e| {
            workbook_problem(
                file,
                format!("cannot read the file as {kind} workbook: {e}"),
            )
        })?;
        let header_row_of = |rows: &[Vec<Data>]| {
            rows.iter()
                .take(HEADER_SEARCH_ROWS)
                .position(|r| has_columns(r, required))
        };
        let chosen = if let Some(name) = sheet {
            let Some(found) = sheets.into_iter().next() else {
                let names = read_sheets(bytes, ods, None)
                    .map(|s| {
                        s.iter()
                            .map(|(n, _, _)| format!("{n:?}"))
                            .collect::<Vec<_>>()
                            .join(", ")
                    })
                    .unwrap_or_default();
                return Err(workbook_problem(
                    file,
                    format!("found no sheet named {name:?}, expected one of {names}"),
                ));
            };
            let at = header_row_of(&found.2)
                .or_else(|| found.2.iter().position(|r| r.iter().any(|c| !c.is_empty())));
            let Some(at) = at else {
                let mut d = Diagnostics::new();
                d.push(
                    file,
                    0,
                    "-",
                    "the sheet is empty, expected a header row and at least one data row",
                );
                let sheet_ref = quoted_sheet(name);
                d.relocate(|x| x.cell = Some(sheet_ref.clone()));
                return Err(d);
            };
            (found, at)
        } else {
            let names: Vec<String> = sheets.iter().map(|(n, _, _)| format!("{n:?}")).collect();
            let Some((found, at)) = sheets
                .into_iter()
                .find_map(|s| header_row_of(&s.2).map(|at| (s, at)))
            else {
                return Err(workbook_problem(
                    file,
                    format!(
                        "found no sheet with the columns {} in a header row (sheets: {}), \
                         expected one, or name the sheet with --sheet",
                        required.join(", "),
                        if names.is_empty() {
                            "none".to_string()
                        } else {
                            names.join(", ")
                        }
                    ),
                ));
            };
            (found, at)
        };
        let ((name, start, rows), at) = chosen;
        Ok(Self::from_cells(
            file,
            &name,
            start.unwrap_or((0, 0)),
            &rows,
            at,
        ))
    }

    /// Build the table from a sheet's cells, the header at row index `at` of `rows`.
    fn from_cells(
        file: &str,
        sheet: &str,
        (row0, col0): (u32, u32),
        rows: &[Vec<Data>],
        at: usize,
    ) -> Self {
        let head = &rows[at];
        let first = head.iter().position(|c| !c.is_empty()).unwrap_or(0);
        let last = head.iter().rposition(|c| !c.is_empty()).unwrap_or(0);
        let names: Vec<String> = head[first..=last].iter().map(cell_text).collect();
        let header = Header::new(&csv::StringRecord::from(names.clone()));
        let columns = names
            .iter()
            .enumerate()
            .map(|(i, n)| (n.trim().to_ascii_lowercase(), col0 + (first + i) as u32))
            .collect();
        let place = SheetPlace {
            sheet: sheet.to_string(),
            header_row: u64::from(row0) + at as u64 + 1,
            columns,
        };
        let sheet_ref = quoted_sheet(sheet);
        let mut out = Vec::new();
        for (i, row) in rows.iter().enumerate().skip(at + 1) {
            let line = u64::from(row0) + i as u64 + 1;
            if row.iter().all(DataType::is_empty) {
                continue;
            }
            let outside = row
                .iter()
                .enumerate()
                .find(|&(j, c)| (j < first || j > last) && !c.is_empty());
            if let Some((j, c)) = outside {
                let at_cell = format!("{}{line}", column_letters(col0 + j as u32));
                out.push(Err((
                    line,
                    format!(
                        "found {:?} in {sheet_ref}!{at_cell}, outside the header's columns {} to \
                         {}; expected values only under a header cell",
                        cell_text(c),
                        column_letters(col0 + first as u32),
                        column_letters(col0 + last as u32)
                    ),
                )));
                continue;
            }
            let fields: Vec<String> = (first..=last)
                .map(|j| row.get(j).map(cell_text).unwrap_or_default())
                .collect();
            out.push(Ok((line, csv::StringRecord::from(fields))));
        }
        Self {
            file: file.to_string(),
            header,
            place,
            rows: out.into_iter(),
            record: csv::StringRecord::new(),
        }
    }

    /// Where the table sits in the workbook, for cell references.
    pub fn place(&self) -> &SheetPlace {
        &self.place
    }
}

impl RowSource for Sheet {
    fn file(&self) -> &str {
        &self.file
    }
    fn header(&self) -> &Header {
        &self.header
    }
    fn decimal_comma(&self) -> bool {
        false
    }
    fn next_record(&mut self) -> Option<Result<(u64, &csv::StringRecord), RecordError>> {
        match self.rows.next()? {
            Ok((line, record)) => {
                self.record = record;
                Some(Ok((line, &self.record)))
            }
            Err(e) => Some(Err(e)),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn column_letters_count_like_a_spreadsheet() {
        assert_eq!(column_letters(0), "A");
        assert_eq!(column_letters(3), "D");
        assert_eq!(column_letters(25), "Z");
        assert_eq!(column_letters(26), "AA");
        assert_eq!(column_letters(701), "ZZ");
        assert_eq!(column_letters(702), "AAA");
    }

    #[test]
    fn places_name_cells_rows_and_quote_sheet_names() {
        let place = SheetPlace {
            sheet: "Lab results".into(),
            header_row: 3,
            columns: vec![("site".into(), 1), ("theta".into(), 4)],
        };
        assert_eq!(place.cell(1, "theta"), "'Lab results'!E3");
        assert_eq!(place.cell(14, "Theta"), "'Lab results'!E14");
        assert_eq!(place.cell(14, "-"), "'Lab results'!14:14");
        assert_eq!(place.cell(0, "-"), "'Lab results'");
        assert_eq!(quoted_sheet("Plates"), "Plates");
        assert_eq!(quoted_sheet("it's"), "'it''s'");
    }

    #[test]
    fn cells_become_the_text_a_csv_would_hold() {
        assert_eq!(cell_text(&Data::Float(0.1)), "0.1");
        assert_eq!(cell_text(&Data::Float(33.0)), "33");
        assert_eq!(cell_text(&Data::Float(1e-7)), "0.0000001");
        assert_eq!(cell_text(&Data::Int(-5)), "-5");
        assert_eq!(cell_text(&Data::Bool(true)), "TRUE");
        assert_eq!(cell_text(&Data::Empty), "");
        assert_eq!(
            cell_text(&Data::DateTimeIso("2026-06-03".into())),
            "2026-06-03"
        );
        assert!(is_workbook("lab.XLSX"));
        assert!(is_workbook("dir/lab.ods"));
        assert!(!is_workbook("lab.csv"));
        assert!(!is_workbook("xlsx"));
    }
}
