//! Reading a delimited text file the way every porewise input is read.
//!
//! Comma or semicolon separated (detected from the header line), UTF-8 with an optional
//! byte-order mark, a header row, physical line numbers for every record, and header lookup
//! by name (case-insensitive). Reads as a stream, so a file of millions of rows keeps memory flat.

use std::cell::RefCell;
use std::collections::VecDeque;
use std::io::{BufRead, BufReader, Cursor, Read};
use std::rc::Rc;

use super::diagnostic::Diagnostics;

/// UTF-8 byte-order mark.
const BOM: &[u8] = b"\xEF\xBB\xBF";

/// A header row: column names as written (trimmed, BOM removed), looked up case-insensitively.
#[derive(Debug, Clone)]
pub struct Header {
    names: Vec<String>,
    lower: Vec<String>,
}

impl Header {
    /// Build from the header record.
    pub fn new(record: &csv::StringRecord) -> Self {
        let names: Vec<String> = record.iter().map(|s| s.trim().to_string()).collect();
        let lower = names.iter().map(|s| s.to_ascii_lowercase()).collect();
        Self { names, lower }
    }

    /// Index of the column with this name (case-insensitive), if present.
    pub fn find(&self, name: &str) -> Option<usize> {
        let name = name.to_ascii_lowercase();
        self.lower.iter().position(|n| *n == name)
    }

    /// The column names as written in the file.
    pub fn names(&self) -> &[String] {
        &self.names
    }

    /// The name of column `index` as written, or `-` past the end.
    pub fn name(&self, index: usize) -> &str {
        self.names.get(index).map_or("-", String::as_str)
    }
}

/// A record that could not be read: its physical line and what went wrong.
pub type RecordError = (u64, String);

/// Line-end bytes (`\r`, `\n`) seen by [`LineCounting`] but not yet passed by the records read.
///
/// The CSV reader reads ahead and does not count blank lines, so physical line numbers are
/// worked out here from each record's starting byte. A record's reported start may sit on the
/// line end before it; those bytes are skipped.
#[derive(Debug, Default)]
struct Newlines {
    /// (offset, is `\n`) of every line-end byte not yet passed.
    pending: VecDeque<(u64, bool)>,
    passed: u64,
    offset: u64,
}

impl Newlines {
    /// Physical line (from 1) of the first content byte at or after `offset`; offsets must not
    /// decrease between calls.
    fn line_of(&mut self, mut offset: u64) -> u64 {
        while let Some(&(pos, is_newline)) = self.pending.front() {
            match pos.cmp(&offset) {
                std::cmp::Ordering::Less => self.passed += u64::from(is_newline),
                std::cmp::Ordering::Equal => {
                    self.passed += u64::from(is_newline);
                    offset += 1;
                }
                std::cmp::Ordering::Greater => break,
            }
            self.pending.pop_front();
        }
        self.passed + 1
    }
}

/// A reader that notes where every newline is as bytes pass through.
struct LineCounting<R> {
    inner: R,
    newlines: Rc<RefCell<Newlines>>,
}

impl<R: Read> Read for LineCounting<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = self.inner.read(buf)?;
        let mut nl = self.newlines.borrow_mut();
        let base = nl.offset;
        for i in memchr::memchr2_iter(b'\n', b'\r', &buf[..n]) {
            nl.pending.push_back((base + i as u64, buf[i] == b'\n'));
        }
        nl.offset += n as u64;
        Ok(n)
    }
}

/// The byte stream under the CSV reader: the header line read ahead, then the rest.
type Counted<R> = LineCounting<std::io::Chain<Cursor<Vec<u8>>, BufReader<R>>>;

/// An open delimited file: header read, records to come with their physical line numbers.
pub struct Table<R: Read> {
    file: String,
    header: Header,
    reader: csv::Reader<Counted<R>>,
    newlines: Rc<RefCell<Newlines>>,
    record: csv::StringRecord,
    decimal_comma: bool,
}

impl<R: Read> std::fmt::Debug for Table<R> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Table")
            .field("file", &self.file)
            .field("header", &self.header)
            .finish_non_exhaustive()
    }
}

/// Pick the delimiter from the header line: semicolon when it has more semicolons than commas
/// outside quotes, comma otherwise.
fn detect_delimiter(line: &[u8]) -> u8 {
    let (mut commas, mut semicolons, mut quoted) = (0usize, 0usize, false);
    for &b in line {
        match b {
            b'"' => quoted = !quoted,
            b',' if !quoted => commas += 1,
            b';' if !quoted => semicolons += 1,
            _ => {}
        }
    }
    if semicolons > commas { b';' } else { b',' }
}

impl<R: Read> Table<R> {
    /// Open `reader` (named `file` in messages) and read its header.
    ///
    /// # Errors
    /// An empty file, a file with no header, or one that cannot be read, as a diagnostic at line 1
    /// (or 0 when nothing could be read).
    pub fn open(file: &str, reader: R) -> Result<Self, Diagnostics> {
        let mut buffered = BufReader::new(reader);
        let mut first = Vec::new();
        let mut problems = Diagnostics::new();
        if let Err(e) = buffered.read_until(b'\n', &mut first) {
            problems.push(file, 0, "-", format!("cannot read the file: {e}"));
            return Err(problems);
        }
        if first.starts_with(BOM) {
            first.drain(..BOM.len());
        }
        if first.iter().all(u8::is_ascii_whitespace) {
            problems.push(
                file,
                1,
                "-",
                "the file is empty, expected a header row and at least one data row",
            );
            return Err(problems);
        }
        let delimiter = detect_delimiter(&first);
        let newlines = Rc::new(RefCell::new(Newlines::default()));
        let counting = LineCounting {
            inner: Cursor::new(first).chain(buffered),
            newlines: Rc::clone(&newlines),
        };
        let mut reader = csv::ReaderBuilder::new()
            .delimiter(delimiter)
            .has_headers(true)
            .flexible(true)
            .from_reader(counting);
        let header = match reader.headers() {
            Ok(h) => Header::new(h),
            Err(e) => {
                problems.push(file, 1, "-", format!("cannot read the header row: {e}"));
                return Err(problems);
            }
        };
        Ok(Self {
            file: file.to_string(),
            header,
            reader,
            newlines,
            record: csv::StringRecord::new(),
            decimal_comma: delimiter == b';',
        })
    }

    /// Parse a number field of this file.
    ///
    /// Semicolon-separated files may write a decimal comma (`0,35`), as European lab sheets do.
    ///
    /// # Errors
    /// The message for a diagnostic: what was found and that a finite number was expected.
    pub fn number(&self, text: &str) -> Result<f64, String> {
        parse_number(text, self.decimal_comma)
    }

    /// Whether number fields may use a decimal comma (semicolon-separated files), for callers
    /// that parse with [`parse_number`] while a record is borrowed.
    pub fn decimal_comma(&self) -> bool {
        self.decimal_comma
    }

    /// The file name used in messages.
    pub fn file(&self) -> &str {
        &self.file
    }

    /// The header row.
    pub fn header(&self) -> &Header {
        &self.header
    }

    /// Read the next record. Returns its physical starting line and the fields, `None` at the end.
    ///
    /// Blank lines are skipped by the CSV reader.
    ///
    /// # Errors
    /// A record that cannot be read (invalid UTF-8, an unterminated quote) as a message naming
    /// the line; the caller decides whether to go on.
    pub fn next_record(&mut self) -> Option<Result<(u64, &csv::StringRecord), RecordError>> {
        match self.reader.read_record(&mut self.record) {
            Ok(true) => {
                let byte = self.record.position().map_or(0, csv::Position::byte);
                let line = self.newlines.borrow_mut().line_of(byte);
                Some(Ok((line, &self.record)))
            }
            Ok(false) => None,
            Err(e) => {
                let line = match e.position() {
                    Some(p) => self.newlines.borrow_mut().line_of(p.byte()),
                    None => 0,
                };
                let message = match e.kind() {
                    csv::ErrorKind::Utf8 { .. } => "the text is not valid UTF-8".to_string(),
                    _ => format!("cannot read this row: {e}"),
                };
                Some(Err((line, message)))
            }
        }
    }

    /// Byte offset reached in the input (for progress bars).
    pub fn bytes_read(&self) -> u64 {
        self.reader.position().byte()
    }
}

/// Rows of a table with a header, wherever they come from: a delimited text file
/// ([`Table`]) or a spreadsheet sheet ([`super::workbook::Sheet`]). The readers of sites,
/// layers and lab files take any row source, so a new importer gets workbooks for free.
pub trait RowSource {
    /// The file name used in messages.
    fn file(&self) -> &str;
    /// The header row.
    fn header(&self) -> &Header;
    /// Whether number cells may use a decimal comma (semicolon-separated text only).
    fn decimal_comma(&self) -> bool;
    /// The next data row with its line (a sheet's row number), `None` at the end.
    ///
    /// # Errors
    /// A row that cannot be read, with its line and what went wrong.
    fn next_record(&mut self) -> Option<Result<(u64, &csv::StringRecord), RecordError>>;
}

impl<R: Read> RowSource for Table<R> {
    fn file(&self) -> &str {
        Table::file(self)
    }
    fn header(&self) -> &Header {
        Table::header(self)
    }
    fn decimal_comma(&self) -> bool {
        Table::decimal_comma(self)
    }
    fn next_record(&mut self) -> Option<Result<(u64, &csv::StringRecord), RecordError>> {
        Table::next_record(self)
    }
}

/// `text` without leading and trailing whitespace, as [`str::trim`] but without looking at
/// every character when the text starts and ends with a printable ASCII byte (most cells).
pub fn trim_cell(text: &str) -> &str {
    let b = text.as_bytes();
    match (b.first(), b.last()) {
        (Some(f), Some(l)) if f.is_ascii_graphic() && l.is_ascii_graphic() => text,
        _ => text.trim(),
    }
}

/// A number cell as text with a decimal point: trimmed, a decimal comma (where the file
/// writes them) replaced.
pub fn number_text(text: &str, decimal_comma: bool) -> std::borrow::Cow<'_, str> {
    let t = trim_cell(text);
    if decimal_comma && t.contains(',') && !t.contains('.') {
        std::borrow::Cow::Owned(t.replace(',', "."))
    } else {
        std::borrow::Cow::Borrowed(t)
    }
}

/// Parse a finite number, optionally with a decimal comma.
///
/// # Errors
/// A message naming the text found: empty, not a number, or NaN / infinity.
pub fn parse_number(text: &str, decimal_comma: bool) -> Result<f64, String> {
    let t = number_text(text, decimal_comma);
    if t.is_empty() {
        return Err("found an empty cell, expected a number".to_string());
    }
    match t.parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(v),
        Ok(_) => Err(format!(
            "found {:?}, expected a finite number (NaN and infinity are not measurements)",
            text.trim()
        )),
        Err(_) => Err(format!("found {:?}, expected a number", text.trim())),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn lines_of(text: &str) -> Vec<(u64, Vec<String>)> {
        let mut t = Table::open("t.csv", text.as_bytes()).expect("opens");
        let mut out = Vec::new();
        while let Some(r) = t.next_record() {
            let (line, rec) = r.expect("record");
            out.push((line, rec.iter().map(str::to_string).collect()));
        }
        out
    }

    #[test]
    fn semicolons_bom_and_line_numbers() {
        let text =
            "\u{feff}Sample;Suction_kPa;theta\r\nA;1;0.4\r\n\r\n\nA;10;0.3\n\"B\nC\";1;2\nD;3;4";
        let mut t = Table::open("t.csv", text.as_bytes()).expect("opens");
        assert_eq!(t.header().find("sample"), Some(0));
        assert_eq!(t.header().find("suction_kpa"), Some(1));
        let mut lines = Vec::new();
        while let Some(r) = t.next_record() {
            lines.push(r.expect("record").0);
        }
        assert_eq!(lines, vec![2, 5, 6, 8]);
    }

    #[test]
    fn quoted_commas_do_not_fool_detection() {
        let rows = lines_of("a,\"b;c\",d\n1,2,3\n");
        assert_eq!(rows, vec![(2, vec!["1".into(), "2".into(), "3".into()])]);
    }

    #[test]
    fn numbers() {
        assert_eq!(parse_number(" 0.35 ", false), Ok(0.35));
        assert_eq!(parse_number("0,35", true), Ok(0.35));
        assert!(parse_number("0,35", false).is_err());
        assert!(
            parse_number("NaN", false)
                .expect_err("nan")
                .contains("finite")
        );
        assert!(parse_number("inf", false).is_err());
        assert!(
            parse_number("", false)
                .expect_err("empty")
                .contains("empty")
        );
        assert!(
            parse_number("abc", false)
                .expect_err("text")
                .contains("\"abc\"")
        );
    }

    #[test]
    fn cells_are_trimmed_of_any_whitespace() {
        assert_eq!(trim_cell("kPa"), "kPa");
        assert_eq!(trim_cell(" kPa\t"), "kPa");
        assert_eq!(trim_cell("\u{a0}30\u{2003}"), "30");
        assert_eq!(trim_cell(""), "");
        assert_eq!(trim_cell("é"), "é");
    }

    #[test]
    fn empty_file_is_an_error() {
        let err = Table::open("e.csv", "".as_bytes()).expect_err("empty");
        assert!(err.to_string().starts_with("e.csv:1:-: the file is empty"));
    }
}
