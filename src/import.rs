//! Input files to validated values, with every problem placed at `FILE:LINE:COLUMN`.
//!
//! The readers ([`sites`], [`layers`], [`lab`]) turn CSV into an [`ImportBatch`] of domain
//! values and never touch the campaign file. [`import_files`] (used by the command line and
//! the demo builder alike) reads the files, runs the readers, checks the batch against the
//! campaign and writes it, all in one transaction: any problem in any file and nothing is
//! written. Field logger files, which can hold millions of rows, have their own streaming
//! path in [`logger`].

use std::fmt::{self, Write as _};
use std::path::{Path, PathBuf};

use sha2::{Digest, Sha256};

use crate::model::number::{hex, plural};
use crate::store::{Campaign, StoreError};

mod apply;
pub mod batch;
pub mod conductivity;
pub mod diagnostic;
mod fields;
pub mod lab;
pub mod layers;
pub mod logger;
pub mod pairs;
pub mod sites;
pub mod table;
pub mod wide;
pub mod workbook;

pub use batch::{ImportBatch, ImportKind};
pub use diagnostic::{Diagnostic, Diagnostics};

/// How an import runs.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
#[allow(clippy::struct_excessive_bools)] // independent switches, one per command-line flag
pub struct ImportOptions {
    /// Validate everything (against the campaign too) and report, but write nothing.
    pub dry_run: bool,
    /// Import files whose content was imported before.
    pub force: bool,
    /// Refuse a file with a column porewise does not read (otherwise a warning).
    pub strict: bool,
    /// Accept layers of one site whose depth ranges overlap (nested or straddling on
    /// purpose); otherwise such a layer is refused with both ranges named.
    pub allow_overlap: bool,
}

/// One input: a name for messages and its bytes.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Source {
    /// The file as the user named it (used in `FILE:LINE:COLUMN` and in provenance).
    pub name: String,
    /// The file's content.
    pub bytes: Vec<u8>,
}

impl Source {
    /// Read a file, naming it as the path was given.
    ///
    /// # Errors
    /// [`ImportError::Read`] when the file cannot be read.
    pub fn read(path: &Path) -> Result<Self, ImportError> {
        let bytes = std::fs::read(path).map_err(|source| ImportError::Read {
            path: path.to_path_buf(),
            source,
        })?;
        Ok(Self {
            name: path.display().to_string(),
            bytes,
        })
    }

    /// SHA-256 of the content, lower-case hex.
    pub fn sha256(&self) -> String {
        hex(&Sha256::digest(&self.bytes))
    }

    /// SHA-256 of a workbook's content and the sheet read from it (a zero byte between), so
    /// each sheet of a workbook is imported once: lower-case hex.
    pub fn sheet_sha256(&self, sheet: &str) -> String {
        let mut h = Sha256::new();
        h.update(&self.bytes);
        h.update([0u8]);
        h.update(sheet.as_bytes());
        hex(&h.finalize())
    }
}

/// A file refused because the same content was imported before.
#[derive(Debug, Clone, PartialEq)]
pub struct EarlierImport {
    /// The file as named now.
    pub file: String,
    /// The earlier import of the same content.
    pub earlier: crate::store::batches::ImportBatchRecord,
}

/// Why an import did not happen. In every case nothing was written.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ImportError {
    /// Bad input: every problem found, as `FILE:LINE:COLUMN: message`.
    #[error("{0}")]
    Invalid(Diagnostics),
    /// Files whose content was already imported (pass `force` to import them again).
    #[error("{}", already_imported(.0))]
    AlreadyImported(Vec<EarlierImport>),
    /// A file could not be read.
    #[error("cannot read {}: {source}", path.display())]
    Read {
        /// The file.
        path: PathBuf,
        /// The operating system's error.
        source: std::io::Error,
    },
    /// The campaign file refused a read or write.
    #[error(transparent)]
    Store(#[from] StoreError),
}

fn already_imported(list: &[EarlierImport]) -> String {
    let mut out = String::new();
    for e in list {
        let _ = writeln!(
            out,
            "{}: this content was already imported on {} as {:?} (import #{}); use --force to \
             import it again",
            e.file,
            e.earlier.imported_at.format("%Y-%m-%d %H:%M UTC"),
            e.earlier.file_name,
            e.earlier.id
        );
    }
    out.push_str("nothing was written");
    out
}

/// One imported file in a summary.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct FileSummary {
    /// The file as named.
    pub name: String,
    /// SHA-256 of its content.
    pub sha256: String,
    /// Data rows.
    pub rows: u64,
    /// Its import batch id (`None` in a dry run).
    pub batch_id: Option<i64>,
}

/// What an import added (or, in a dry run, would add).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ImportSummary {
    /// The kind of files.
    pub kind: ImportKind,
    /// True when nothing was written.
    pub dry_run: bool,
    /// The files read.
    pub files: Vec<FileSummary>,
    /// Rows added and updated.
    pub counts: ImportCounts,
    /// Columns the files have that were not read, as warnings for stderr.
    pub warnings: Vec<Diagnostic>,
}

/// How many rows an import adds and updates.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct ImportCounts {
    /// New sites.
    pub sites_added: u64,
    /// Stored sites whose details were filled in or changed.
    pub sites_updated: u64,
    /// New layers.
    pub layers_added: u64,
    /// Stored layers whose properties were filled in or changed.
    pub layers_updated: u64,
    /// New samples.
    pub samples_added: u64,
    /// Stored samples that got a bulk density.
    pub samples_updated: u64,
    /// New readings.
    pub readings_added: u64,
    /// New measured conductivity readings.
    pub conductivity_added: u64,
    /// Samples that got a measured Ks.
    pub ks_added: u64,
}

impl fmt::Display for ImportSummary {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let c = &self.counts;
        let mut added = format!(
            "{}, {}, {}, {}",
            plural(c.sites_added, "site"),
            plural(c.layers_added, "layer"),
            plural(c.samples_added, "sample"),
            plural(c.readings_added, "reading")
        );
        if self.kind == ImportKind::Conductivity {
            added = format!(
                "{}, {}, {}, {}, {}",
                plural(c.sites_added, "site"),
                plural(c.layers_added, "layer"),
                plural(c.samples_added, "sample"),
                plural(c.conductivity_added, "conductivity reading"),
                plural(c.ks_added, "Ks value")
            );
        }
        let files = plural(self.files.len() as u64, "file");
        if self.dry_run {
            write!(f, "dry run: {files} valid; would add {added}")?;
        } else {
            write!(f, "added {added} from {files}")?;
        }
        let mut updated = Vec::new();
        for (n, word) in [
            (c.sites_updated, "site"),
            (c.layers_updated, "layer"),
            (c.samples_updated, "sample"),
        ] {
            if n > 0 {
                updated.push(plural(n, word));
            }
        }
        if !updated.is_empty() {
            let verb = if self.dry_run {
                "would update"
            } else {
                "updated"
            };
            write!(f, "; {verb} {}", updated.join(", "))?;
        }
        if self.dry_run {
            write!(f, "; nothing was written")?;
        }
        Ok(())
    }
}

/// Read `sources` of one kind into a batch, collecting every problem (no campaign needed).
///
/// # Errors
/// The problems found, when there are any.
pub fn parse(kind: ImportKind, sources: &[Source]) -> Result<ImportBatch, Diagnostics> {
    let mut diags = Diagnostics::new();
    let batch = read_batch(kind, sources, None, &mut diags);
    batch.relocate(&mut diags);
    if diags.is_empty() {
        Ok(batch)
    } else {
        Err(diags)
    }
}

/// The columns a workbook sheet's header row must hold to be taken for a file of `kind`
/// when no `--sheet` is named.
pub fn header_columns(kind: ImportKind) -> &'static [&'static str] {
    match kind {
        ImportKind::Sites => &["site", "name", "latitude", "longitude"],
        ImportKind::Layers => &["site", "top_cm", "bottom_cm"],
        ImportKind::Lab | ImportKind::Conductivity => {
            &["site", "top_cm", "bottom_cm", "sample", "method"]
        }
    }
}

fn read_batch(
    kind: ImportKind,
    sources: &[Source],
    sheet: Option<&str>,
    diags: &mut Diagnostics,
) -> ImportBatch {
    let mut batch = ImportBatch::new(kind);
    let mut sites_reader = sites::SitesReader::default();
    let mut layers_reader = layers::LayersReader::default();
    let mut lab_reader = lab::LabReader::default();
    let mut k_reader = conductivity::ConductivityReader::default();
    for (index, source) in sources.iter().enumerate() {
        if workbook::is_workbook(&source.name) {
            let opened =
                workbook::Sheet::open(&source.name, &source.bytes, sheet, header_columns(kind));
            let table = match opened {
                Ok(t) => t,
                Err(problems) => {
                    batch
                        .files
                        .push(batch::SourceFile::new(&source.name, source.sha256()));
                    diags.extend(problems);
                    continue;
                }
            };
            let mut file =
                batch::SourceFile::new(&source.name, source.sheet_sha256(&table.place().sheet));
            file.sheet = Some(table.place().clone());
            batch.files.push(file);
            match kind {
                ImportKind::Sites => sites_reader.read(index, table, &mut batch, diags),
                ImportKind::Layers => layers_reader.read(index, table, &mut batch, diags),
                ImportKind::Lab => lab_reader.read(index, table, &mut batch, diags),
                ImportKind::Conductivity => k_reader.read(index, table, &mut batch, diags),
            }
            continue;
        }
        batch
            .files
            .push(batch::SourceFile::new(&source.name, source.sha256()));
        let table = match table::Table::open(&source.name, source.bytes.as_slice()) {
            Ok(t) => t,
            Err(problems) => {
                diags.extend(problems);
                continue;
            }
        };
        match kind {
            ImportKind::Sites => sites_reader.read(index, table, &mut batch, diags),
            ImportKind::Layers => layers_reader.read(index, table, &mut batch, diags),
            ImportKind::Lab => lab_reader.read(index, table, &mut batch, diags),
            ImportKind::Conductivity => k_reader.read(index, table, &mut batch, diags),
        }
    }
    batch
}

/// Import files of one kind into the campaign, all or nothing.
///
/// Every file is read and validated, then checked against the campaign (a sample code
/// already under another layer, a suction already stored, a file already imported), then
/// written in one transaction with one `import_batch` row per file.
///
/// # Errors
/// [`ImportError::Invalid`] with every problem found, [`ImportError::AlreadyImported`],
/// [`ImportError::Read`] or [`ImportError::Store`]; in every case nothing was written.
pub fn import_files(
    campaign: &mut Campaign,
    kind: ImportKind,
    files: &[PathBuf],
    options: ImportOptions,
) -> Result<ImportSummary, ImportError> {
    import_files_from(campaign, kind, files, options, None)
}

/// [`import_files`] reading sheet `sheet` of every workbook (`.xlsx`, `.ods`) among `files`
/// (`None`: the first sheet with the kind's header row, [`header_columns`]).
///
/// # Errors
/// As [`import_files`].
pub fn import_files_from(
    campaign: &mut Campaign,
    kind: ImportKind,
    files: &[PathBuf],
    options: ImportOptions,
    sheet: Option<&str>,
) -> Result<ImportSummary, ImportError> {
    let sources = files
        .iter()
        .map(|p| Source::read(p))
        .collect::<Result<Vec<_>, _>>()?;
    import_sources_from(campaign, kind, &sources, options, sheet)
}

/// [`import_files`] for content already in memory.
///
/// # Errors
/// As [`import_files`], except reading.
pub fn import_sources(
    campaign: &mut Campaign,
    kind: ImportKind,
    sources: &[Source],
    options: ImportOptions,
) -> Result<ImportSummary, ImportError> {
    import_sources_from(campaign, kind, sources, options, None)
}

/// [`import_sources`] reading sheet `sheet` of every workbook (see [`import_files_from`]).
///
/// # Errors
/// As [`import_files`], except reading.
pub fn import_sources_from(
    campaign: &mut Campaign,
    kind: ImportKind,
    sources: &[Source],
    options: ImportOptions,
    sheet: Option<&str>,
) -> Result<ImportSummary, ImportError> {
    let mut diags = if options.strict {
        Diagnostics::strict()
    } else {
        Diagnostics::new()
    };
    let mut batch = read_batch(kind, sources, sheet, &mut diags);
    let drafts = std::mem::take(&mut batch.readings);
    let tx = if options.dry_run {
        campaign.read_transaction()?
    } else {
        campaign.transaction()?
    };
    if !options.force {
        let earlier = apply::earlier_imports(&tx, &batch)?;
        if !earlier.is_empty() {
            return Err(ImportError::AlreadyImported(
                earlier
                    .into_iter()
                    .map(|(file, earlier)| EarlierImport { file, earlier })
                    .collect(),
            ));
        }
    }
    let plan = apply::resolve(&tx, &batch, drafts, options.allow_overlap, &mut diags)?;
    let k_plan = conductivity::resolve(&tx, &batch, &mut diags)?;
    batch.relocate(&mut diags);
    if !diags.is_empty() {
        return Err(ImportError::Invalid(diags));
    }
    let mut counts = plan.counts();
    counts.conductivity_added = batch.conductivity.readings.len() as u64;
    counts.ks_added = k_plan.ks_count();
    let batch_ids = if options.dry_run {
        Vec::new()
    } else {
        let ids = apply::write(&tx, &batch, plan, options.force)?;
        conductivity::write(&tx, &batch, &k_plan, &ids)?;
        tx.commit().map_err(StoreError::from)?;
        ids
    };
    Ok(ImportSummary {
        kind,
        dry_run: options.dry_run,
        files: batch
            .files
            .iter()
            .enumerate()
            .map(|(i, f)| FileSummary {
                name: f.name.clone(),
                sha256: f.sha256.clone(),
                rows: f.rows,
                batch_id: batch_ids.get(i).copied(),
            })
            .collect(),
        counts,
        warnings: diags.warnings().to_vec(),
    })
}
