//! Row-positioned problems found in an input file, printed as `FILE:LINE:COLUMN: message`.
//!
//! LINE counts physical lines from 1 (the header is line 1); COLUMN is the header name of the
//! column (or `-` when a problem concerns the whole row or file). A command collects every
//! problem it finds, up to [`MAX_REPORTED`], and writes nothing when there is any.

use std::fmt;

/// How many problems a report lists before it only counts the rest.
pub const MAX_REPORTED: usize = 50;

/// One problem at a place in an input file.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Diagnostic {
    /// The file as the user named it.
    pub file: String,
    /// Physical line, counting from 1 (the header is line 1); 0 when the file could not be read.
    pub line: u64,
    /// Header name of the column, or `-` for the whole row.
    pub column: String,
    /// What was found and what was expected.
    pub message: String,
    /// In a spreadsheet, the cell (`Plates!D14`), row (`Plates!14:14`) or nothing (empty:
    /// the whole workbook) shown in place of `LINE:COLUMN`.
    pub cell: Option<String>,
}

impl Diagnostic {
    /// Where the problem is: `FILE:LINE:COLUMN`, `FILE:Sheet!D14` in a workbook, or `FILE`.
    pub fn place(&self) -> String {
        match self.cell.as_deref() {
            None => format!("{}:{}:{}", self.file, self.line, self.column),
            Some("") => self.file.clone(),
            Some(cell) => format!("{}:{cell}", self.file),
        }
    }
}

impl fmt::Display for Diagnostic {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}: {}", self.place(), self.message)
    }
}

/// The problems found in one command's input, in the order they were found, and the
/// warnings (columns a file has that are not used), which do not stop a command.
///
/// Keeps the first [`MAX_REPORTED`] problems and counts the rest, so a file with a million
/// bad rows does not fill memory.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Diagnostics {
    items: Vec<Diagnostic>,
    total: usize,
    warnings: Vec<Diagnostic>,
    strict: bool,
}

impl Diagnostics {
    /// An empty collection.
    pub fn new() -> Self {
        Self::default()
    }

    /// An empty collection in which what would be a warning (a column not used) is a
    /// problem: `--strict`.
    pub fn strict() -> Self {
        Self {
            strict: true,
            ..Self::default()
        }
    }

    /// Whether warnings are problems here (`--strict`).
    pub fn is_strict(&self) -> bool {
        self.strict
    }

    /// Record a warning: something the command leaves aside without stopping.
    pub fn warn(&mut self, file: &str, line: u64, column: &str, message: impl Into<String>) {
        if self.warnings.len() < MAX_REPORTED {
            self.warnings.push(Diagnostic {
                file: file.to_string(),
                line,
                column: column.to_string(),
                message: message.into(),
                cell: None,
            });
        }
    }

    /// The warnings, in the order they were found.
    pub fn warnings(&self) -> &[Diagnostic] {
        &self.warnings
    }

    /// Record a problem.
    pub fn push(&mut self, file: &str, line: u64, column: &str, message: impl Into<String>) {
        self.total += 1;
        if self.items.len() < MAX_REPORTED {
            self.items.push(Diagnostic {
                file: file.to_string(),
                line,
                column: column.to_string(),
                message: message.into(),
                cell: None,
            });
        }
    }

    /// Add every problem and warning of another collection (its overflow count too).
    pub fn extend(&mut self, other: Diagnostics) {
        for w in other.warnings {
            if self.warnings.len() < MAX_REPORTED {
                self.warnings.push(w);
            }
        }
        let overflow = other.total - other.items.len();
        for d in other.items {
            self.total += 1;
            if self.items.len() < MAX_REPORTED {
                self.items.push(d);
            }
        }
        self.total += overflow;
    }

    /// True when no problem was found.
    pub fn is_empty(&self) -> bool {
        self.total == 0
    }

    /// How many problems were found (listed or not).
    pub fn total(&self) -> usize {
        self.total
    }

    /// True once the list is full, so a caller may stop looking.
    pub fn is_full(&self) -> bool {
        self.items.len() >= MAX_REPORTED
    }

    /// The listed problems.
    pub fn items(&self) -> &[Diagnostic] {
        &self.items
    }

    /// Change where every listed problem and warning points (a workbook's rows and columns
    /// become cell references).
    pub fn relocate(&mut self, mut place: impl FnMut(&mut Diagnostic)) {
        self.items.iter_mut().for_each(&mut place);
        self.warnings.iter_mut().for_each(place);
    }
}

impl fmt::Display for Diagnostics {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for d in &self.items {
            writeln!(f, "{d}")?;
        }
        let hidden = self.total - self.items.len();
        if hidden > 0 {
            writeln!(f, "... and {hidden} more problems not listed")?;
        }
        write!(
            f,
            "{} problem{} found; nothing was written",
            self.total,
            if self.total == 1 { "" } else { "s" }
        )
    }
}

impl std::error::Error for Diagnostics {}

/// A warning as printed on stderr: `FILE:LINE:COLUMN: warning: message`.
pub fn warning_line(w: &Diagnostic) -> String {
    format!("{}: warning: {}", w.place(), w.message)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn caps_the_list_but_counts_everything() {
        let mut d = Diagnostics::new();
        for i in 0..60 {
            d.push("a.csv", i + 2, "theta", "bad");
        }
        assert_eq!(d.items().len(), MAX_REPORTED);
        assert_eq!(d.total(), 60);
        let text = d.to_string();
        assert!(text.starts_with("a.csv:2:theta: bad\n"));
        assert!(text.contains("... and 10 more problems not listed"));
        assert!(text.ends_with("60 problems found; nothing was written"));
    }
}
