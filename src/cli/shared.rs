//! What the import commands share: the campaign-and-files arguments, opening the campaign
//! and printing an import's warnings. A leaf module, so `import`, `logger` and `pair` use it
//! without depending on each other.

use std::path::PathBuf;

use anyhow::Context;
use clap::Args;

use crate::import::Diagnostic;
use crate::import::diagnostic::warning_line;
use crate::store::Campaign;

/// The campaign file, the input files and how to import them.
#[derive(Debug, Args)]
pub struct ImportArgs {
    /// The campaign file (made with `porewise init`).
    pub db: PathBuf,
    /// One or more CSV files (comma or semicolon separated, UTF-8, header row first) or
    /// workbooks (.xlsx, .ods: the same columns on a header row).
    #[arg(required = true, value_name = "FILE")]
    pub files: Vec<PathBuf>,
    /// The sheet to read from every workbook (default: the first sheet with the columns the
    /// import needs on a header row in its top 20 rows).
    #[arg(long, value_name = "NAME")]
    pub sheet: Option<String>,
    /// Check everything and report what would be added, without writing.
    #[arg(long)]
    pub dry_run: bool,
    /// Import a file even though the same content was imported before.
    #[arg(long)]
    pub force: bool,
    /// Refuse a file that has a column porewise does not read (by default a warning on
    /// stderr names it and the known column it resembles).
    #[arg(long)]
    pub strict: bool,
}

/// Print the warnings of an import on stderr, one `FILE:LINE:COLUMN: warning: ...` a line.
pub(crate) fn print_warnings(warnings: &[Diagnostic]) {
    for w in warnings {
        eprintln!("{}", warning_line(w));
    }
}

/// Open the campaign file named on the command line.
///
/// # Errors
/// The file is missing, not a campaign, or from a newer porewise.
pub(crate) fn open(db: &std::path::Path) -> anyhow::Result<Campaign> {
    Campaign::open(db).with_context(|| format!("cannot open campaign {}", db.display()))
}
