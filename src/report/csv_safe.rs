//! Text cells of the CSV files porewise writes, made safe to open in a spreadsheet.
//!
//! Codes and names come from lab sheets, which may come from outside; a cell that begins
//! with `=`, `+`, `-`, `@`, a tab or a carriage return is read by spreadsheets as a formula
//! (`=HYPERLINK(...)`, `+cmd|...`). Every text cell goes through [`text`]: such a cell gets a
//! leading apostrophe (common practice against "CSV injection"), and [`writer`] quotes it.
//! Numbers are written by their own columns and never changed: a negative number stays a
//! number, and so does a text cell that is nothing but one (`-5`). Control and bidirectional
//! formatting characters are shown escaped ([`crate::model::text::shown`]), as on a terminal.

use crate::model::text::shown;

/// The first characters that make a spreadsheet take a cell for a formula (common practice:
/// the four formula signs, and tab and carriage return, which some spreadsheets strip first).
pub const FORMULA_START: [char; 6] = ['=', '+', '-', '@', '\t', '\r'];

/// A text cell as written: control characters escaped, and a leading `'` when it would
/// otherwise start a formula.
pub fn text(cell: &str) -> String {
    let starts_formula = cell.starts_with(FORMULA_START);
    let is_number = cell.parse::<f64>().is_ok_and(f64::is_finite);
    let visible = shown(cell);
    if starts_formula && !is_number {
        format!("'{visible}")
    } else {
        visible.into_owned()
    }
}

/// A CSV writer into memory that also quotes every cell holding an apostrophe, so a
/// neutralised cell reads `"'=..."` (the comment byte is set only for that effect of it:
/// the writer quotes any cell that holds its comment byte).
pub fn writer() -> csv::Writer<Vec<u8>> {
    csv::WriterBuilder::new()
        .comment(Some(b'\''))
        .from_writer(Vec::new())
}

/// The text a [`writer`] holds.
///
/// # Errors
/// Only if flushing the in-memory buffer fails.
pub fn finish(w: csv::Writer<Vec<u8>>) -> Result<String, csv::Error> {
    let bytes = w
        .into_inner()
        .map_err(|e| csv::Error::from(std::io::Error::other(e.to_string())))?;
    Ok(String::from_utf8_lossy(&bytes).into_owned())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn formula_starts_get_an_apostrophe_and_quotes() {
        let mut w = writer();
        let cells = [
            "=HYPERLINK(\"http://x\",\"y\")",
            "+cmd|' /C calc'!A0",
            "-2+3",
            "@SUM(A1)",
            "\tTAB",
            "\rCR",
            "-5",
            "+1.5e3",
            "LEV1",
            "a=b",
            "-inf",
        ];
        w.write_record(cells.iter().map(|c| text(c)))
            .expect("record");
        let out = finish(w).expect("text");
        assert_eq!(
            out,
            "\"'=HYPERLINK(\"\"http://x\"\",\"\"y\"\")\",\"'+cmd|' /C calc'!A0\",\"'-2+3\",\
             \"'@SUM(A1)\",\"'\\u{9}TAB\",\"'\\u{d}CR\",-5,+1.5e3,LEV1,a=b,\"'-inf\"\n"
        );
    }

    #[test]
    fn controls_are_escaped_in_any_cell() {
        assert_eq!(text("A\u{1b}]0;x\u{7}"), "A\\u{1b}]0;x\\u{7}");
        assert_eq!(text("ok"), "ok");
    }
}
