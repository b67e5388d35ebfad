//! The campaign summary export: tables, the whole campaign as JSON, the sites as GeoJSON and
//! a self-contained HTML report, written into one folder.
//!
//! | file | what | layout |
//! |---|---|---|
//! | `parameters.csv` | one row per sample: its current fit, statistics and derived values | [`tables`] |
//! | `profiles.csv` | per site one row per layer and a `total` row: available water in mm | [`tables`] |
//! | `campaign.json` | everything: campaign, sites, layers, samples, readings with flags and provenance, fits with covariance | [`schema`] |
//! | `sites.geojson` | the sites as RFC 7946 Points with their summary | [`geojson`] |
//! | `report.html` | one page: a chart and tables per site, flagged readings, methods, cautions | [`html`] |
//!
//! Every file of one export is built in memory from one read of the campaign (inside one read
//! transaction, so all files describe the same state), then each is written atomically with
//! [`write_atomic`]: a file is either the new one or the old one, never half-written.
//!
//! Output is deterministic: the same campaign file and options give byte-identical files,
//! except for the one line that states the export time (`"exported_at"` in `campaign.json`,
//! `<p class="exported">` in `report.html`). Everything is sorted (sites by code, layers top
//! down, samples by code, readings by suction), numbers have a fixed format, and no hash-map
//! order reaches the output.
//!
//! Not exported: field logger records and earlier fit attempts (the campaign file keeps both;
//! `porewise list DB fits --sample CODE --all` shows a sample's attempts).
//!
//! The target folder may be missing (it is created), empty, or hold files of an earlier export
//! only (those are replaced). A folder holding anything else is refused, so an export never
//! mixes with other files or overwrites them.

pub mod chart;
pub mod geojson;
pub mod html;
pub mod schema;
pub mod snapshot;
pub mod tables;

use crate::model::conductivity::ConductivityForm;
use std::fmt;
use std::path::{Path, PathBuf};
use std::str::FromStr;
use std::sync::atomic::{AtomicUsize, Ordering};

use chrono::{DateTime, SubsecRound, Utc};
use rusqlite::Connection;

use super::write_atomic;
use crate::analysis::water::DEFAULT_ROOT_ZONE_CM;
use crate::store::StoreError;

/// `parameters.csv`.
pub const PARAMETERS_FILE: &str = "parameters.csv";
/// `profiles.csv`.
pub const PROFILES_FILE: &str = "profiles.csv";
/// `campaign.json`.
pub const CAMPAIGN_FILE: &str = "campaign.json";
/// `sites.geojson`.
pub const SITES_FILE: &str = "sites.geojson";
/// `report.html`.
pub const REPORT_FILE: &str = "report.html";

/// Every file an export can write.
pub const ALL_FILES: [&str; 5] = [
    PARAMETERS_FILE,
    PROFILES_FILE,
    CAMPAIGN_FILE,
    SITES_FILE,
    REPORT_FILE,
];

/// What to write.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum ExportFormat {
    /// `parameters.csv` and `profiles.csv`.
    Csv,
    /// `campaign.json`.
    Json,
    /// `sites.geojson`.
    Geojson,
    /// `report.html`.
    Html,
}

impl ExportFormat {
    /// Every format, in the order files are written.
    pub const ALL: [ExportFormat; 4] = [
        ExportFormat::Csv,
        ExportFormat::Json,
        ExportFormat::Geojson,
        ExportFormat::Html,
    ];

    /// The word `--format` takes.
    pub fn id(self) -> &'static str {
        match self {
            ExportFormat::Csv => "csv",
            ExportFormat::Json => "json",
            ExportFormat::Geojson => "geojson",
            ExportFormat::Html => "html",
        }
    }

    /// The files of this format.
    pub fn files(self) -> &'static [&'static str] {
        match self {
            ExportFormat::Csv => &[PARAMETERS_FILE, PROFILES_FILE],
            ExportFormat::Json => &[CAMPAIGN_FILE],
            ExportFormat::Geojson => &[SITES_FILE],
            ExportFormat::Html => &[REPORT_FILE],
        }
    }
}

impl fmt::Display for ExportFormat {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.id())
    }
}

impl FromStr for ExportFormat {
    type Err = String;

    fn from_str(s: &str) -> Result<Self, Self::Err> {
        let wanted = s.trim();
        ExportFormat::ALL
            .into_iter()
            .find(|f| f.id().eq_ignore_ascii_case(wanted))
            .ok_or_else(|| format!("found {wanted:?}, expected csv, json, geojson or html"))
    }
}

/// What to export and where.
#[derive(Debug, Clone, PartialEq)]
pub struct ExportOptions {
    /// The folder to write into (created when missing).
    pub dir: PathBuf,
    /// The formats to write (each at most once; order does not matter).
    pub formats: Vec<ExportFormat>,
    /// Only this site (code).
    pub site: Option<String>,
    /// Depth down to which profile available water is summed, cm.
    pub root_zone_cm: f64,
    /// The export time to state; `None` for now. Lets a build reproduce a file exactly.
    pub exported_at: Option<DateTime<Utc>>,
    /// The conductivity form for the K values where a model has it (Brooks-Corey: Burdine or
    /// Mualem); `None`: the form recorded with each fit.
    pub conductivity: Option<ConductivityForm>,
}

impl ExportOptions {
    /// Every format into `dir`, the whole campaign, the default root zone, stamped now.
    pub fn new(dir: impl Into<PathBuf>) -> Self {
        Self {
            dir: dir.into(),
            formats: ExportFormat::ALL.to_vec(),
            site: None,
            root_zone_cm: DEFAULT_ROOT_ZONE_CM,
            exported_at: None,
            conductivity: None,
        }
    }

    /// Only these formats.
    #[must_use]
    pub fn with_formats(mut self, formats: &[ExportFormat]) -> Self {
        self.formats = formats.to_vec();
        self
    }

    /// Only this site.
    #[must_use]
    pub fn with_site(mut self, site: Option<String>) -> Self {
        self.site = site;
        self
    }

    /// Sum profiles down to this depth, cm.
    #[must_use]
    pub fn with_root_zone_cm(mut self, root_zone_cm: f64) -> Self {
        self.root_zone_cm = root_zone_cm;
        self
    }

    /// The conductivity form for K values (where a model has it).
    #[must_use]
    pub fn with_conductivity(mut self, form: Option<ConductivityForm>) -> Self {
        self.conductivity = form;
        self
    }

    /// State this export time.
    #[must_use]
    pub fn with_exported_at(mut self, at: DateTime<Utc>) -> Self {
        self.exported_at = Some(at);
        self
    }

    fn wants(&self, format: ExportFormat) -> bool {
        self.formats.contains(&format)
    }
}

/// One file of an export, in memory.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ExportFile {
    /// File name (one of [`ALL_FILES`]).
    pub name: &'static str,
    /// Its content.
    pub bytes: Vec<u8>,
}

/// An export built in memory, not yet written.
#[derive(Debug, Clone, PartialEq)]
pub struct Export {
    /// The files, in the order of [`ALL_FILES`].
    pub files: Vec<ExportFile>,
    /// The export time stated in the files.
    pub exported_at: DateTime<Utc>,
    /// SHA-256 of the exported content (see [`schema`]).
    pub fingerprint: String,
    /// Sites exported.
    pub sites: usize,
    /// Samples exported.
    pub samples: usize,
    /// Readings exported.
    pub readings: usize,
}

impl Export {
    /// The content of one file, if it was built.
    pub fn file(&self, name: &str) -> Option<&[u8]> {
        self.files
            .iter()
            .find(|f| f.name == name)
            .map(|f| f.bytes.as_slice())
    }
}

/// What an export wrote.
#[derive(Debug, Clone, PartialEq)]
pub struct ExportSummary {
    /// The folder.
    pub dir: PathBuf,
    /// The files written, in the order of [`ALL_FILES`].
    pub written: Vec<PathBuf>,
    /// Files of an earlier export left in the folder because their format was not asked for
    /// (they describe the campaign as it was then).
    pub left_from_before: Vec<PathBuf>,
    /// The export time stated in the files.
    pub exported_at: DateTime<Utc>,
    /// SHA-256 of the exported content.
    pub fingerprint: String,
    /// Sites exported.
    pub sites: usize,
    /// Samples exported.
    pub samples: usize,
    /// Readings exported.
    pub readings: usize,
}

/// Why an export could not be made. Nothing is written when building fails; when writing
/// fails, the files already written are complete and the others untouched.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ExportError {
    /// Reading the campaign failed, or the site code is not in it.
    #[error(transparent)]
    Store(#[from] StoreError),
    /// The root-zone depth is not a positive number.
    #[error("root zone {0} cm: expected a depth greater than 0 cm")]
    RootZone(f64),
    /// No format was asked for.
    #[error("no format to export; expected one or more of csv, json, geojson, html")]
    NoFormats,
    /// The target exists and is not a folder.
    #[error("{0} exists and is not a folder; choose a folder for the export")]
    NotADirectory(PathBuf),
    /// The target folder holds files that are not an earlier export's.
    #[error(
        "{dir} is not empty and holds files that are not an earlier export's ({found}); \
         export into a new or empty folder",
        dir = dir.display(),
        found = found.join(", ")
    )]
    NotEmpty {
        /// The folder.
        dir: PathBuf,
        /// Some of the names found (at most five).
        found: Vec<String>,
    },
    /// Creating the folder or writing a file failed.
    #[error("{path}: {source}", path = path.display())]
    Io {
        /// The file or folder.
        path: PathBuf,
        /// The operating system's error.
        source: std::io::Error,
    },
    /// A file could not be encoded (a bug; the message says which).
    #[error("cannot encode {file}: {message}")]
    Encode {
        /// The file.
        file: &'static str,
        /// What went wrong.
        message: String,
    },
}

/// Counts progress over the stages of an export and reports `(done, total)`.
struct Progress<'a> {
    callback: &'a (dyn Fn(usize, usize) + Sync),
    done: AtomicUsize,
    total: usize,
}

impl Progress<'_> {
    fn step(&self) {
        let done = self.done.fetch_add(1, Ordering::Relaxed) + 1;
        (self.callback)(done.min(self.total), self.total);
    }
}

fn io_error(path: &Path) -> impl FnOnce(std::io::Error) -> ExportError + '_ {
    move |source| ExportError::Io {
        path: path.to_path_buf(),
        source,
    }
}

/// Whether a directory entry is ours: a file an export writes, or the temporary file of an
/// interrupted [`write_atomic`] of one (`.NAME.PID.tmp`).
fn is_ours(name: &str) -> bool {
    ALL_FILES.contains(&name)
        || ALL_FILES.iter().any(|f| {
            name.strip_prefix('.')
                .and_then(|rest| rest.strip_prefix(f))
                .and_then(|rest| rest.strip_prefix('.'))
                .and_then(|rest| rest.strip_suffix(".tmp"))
                .is_some_and(|pid| !pid.is_empty() && pid.bytes().all(|b| b.is_ascii_digit()))
        })
}

/// Check the target folder: missing, empty, or holding an earlier export only.
///
/// Returns the files of an earlier export found there.
///
/// # Errors
/// [`ExportError::NotADirectory`], [`ExportError::NotEmpty`], or an I/O error reading it.
pub fn check_dir(dir: &Path) -> Result<Vec<String>, ExportError> {
    match std::fs::metadata(dir) {
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(Vec::new()),
        Err(e) => return Err(io_error(dir)(e)),
        Ok(m) if !m.is_dir() => return Err(ExportError::NotADirectory(dir.to_path_buf())),
        Ok(_) => {}
    }
    let mut ours = Vec::new();
    let mut foreign = Vec::new();
    for entry in std::fs::read_dir(dir).map_err(io_error(dir))? {
        let entry = entry.map_err(io_error(dir))?;
        let name = entry.file_name().to_string_lossy().into_owned();
        let is_file = entry.file_type().map_err(io_error(dir))?.is_file();
        if is_file && is_ours(&name) {
            ours.push(name);
        } else {
            foreign.push(name);
        }
    }
    if !foreign.is_empty() {
        foreign.sort();
        foreign.truncate(5);
        return Err(ExportError::NotEmpty {
            dir: dir.to_path_buf(),
            found: foreign,
        });
    }
    ours.sort();
    Ok(ours)
}

fn validate(options: &ExportOptions) -> Result<(), ExportError> {
    if !(options.root_zone_cm.is_finite() && options.root_zone_cm > 0.0) {
        return Err(ExportError::RootZone(options.root_zone_cm));
    }
    if options.formats.is_empty() {
        return Err(ExportError::NoFormats);
    }
    Ok(())
}

/// Build every asked-for file in memory from one read of the campaign.
///
/// `progress(done, total)` is called as samples are read, charts drawn and files encoded.
///
/// # Errors
/// Invalid options, an unknown site, or an SQLite error; nothing is written.
pub fn build_export(
    conn: &Connection,
    options: &ExportOptions,
    progress: &(dyn Fn(usize, usize) + Sync),
) -> Result<Export, ExportError> {
    validate(options)?;
    let exported_at = options
        .exported_at
        .unwrap_or_else(Utc::now)
        .trunc_subsecs(0);
    // One read transaction: every file sees the same campaign even if another process writes.
    let tx = if conn.is_autocommit() {
        Some(conn.unchecked_transaction().map_err(StoreError::from)?)
    } else {
        None
    };
    let samples = snapshot::sample_total(conn, options.site.as_deref())?;
    let sites_total = snapshot::site_total(conn, options.site.as_deref())?;
    let file_count: usize = ExportFormat::ALL
        .iter()
        .filter(|f| options.wants(**f))
        .map(|f| f.files().len())
        .sum();
    let charts_total = if options.wants(ExportFormat::Html) {
        sites_total
    } else {
        0
    };
    let counter = Progress {
        callback: progress,
        done: AtomicUsize::new(0),
        total: samples + charts_total + file_count,
    };
    let snap = snapshot::read(
        conn,
        options.site.as_deref(),
        options.root_zone_cm,
        options.conductivity,
        &|_, _| counter.step(),
    )?;
    drop(tx);
    let doc = schema::CampaignDocument::new(&snap, exported_at);
    let encode = |file: &'static str| {
        move |e: &dyn fmt::Display| ExportError::Encode {
            file,
            message: e.to_string(),
        }
    };
    let mut files = Vec::new();
    if options.wants(ExportFormat::Csv) {
        let parameters = tables::parameters_csv(&snap).map_err(|e| encode(PARAMETERS_FILE)(&e))?;
        files.push(ExportFile {
            name: PARAMETERS_FILE,
            bytes: parameters.into_bytes(),
        });
        counter.step();
        let profiles = tables::profiles_csv(&snap).map_err(|e| encode(PROFILES_FILE)(&e))?;
        files.push(ExportFile {
            name: PROFILES_FILE,
            bytes: profiles.into_bytes(),
        });
        counter.step();
    }
    if options.wants(ExportFormat::Json) {
        let text = schema::to_json(&doc).map_err(|e| encode(CAMPAIGN_FILE)(&e))?;
        files.push(ExportFile {
            name: CAMPAIGN_FILE,
            bytes: text.into_bytes(),
        });
        counter.step();
    }
    if options.wants(ExportFormat::Geojson) {
        let mut text = serde_json::to_string_pretty(&geojson::collection(&snap))
            .map_err(|e| encode(SITES_FILE)(&e))?;
        text.push('\n');
        files.push(ExportFile {
            name: SITES_FILE,
            bytes: text.into_bytes(),
        });
        counter.step();
    }
    if options.wants(ExportFormat::Html) {
        let mut charts = Vec::with_capacity(snap.sites.len());
        for site in &snap.sites {
            charts.push(chart::site_chart(&snap, site).map_err(|e| encode(REPORT_FILE)(&e))?);
            counter.step();
        }
        let page = html::report_html(
            &snap,
            html::PageMeta {
                exported_at: &doc.exported_at,
                fingerprint: &doc.fingerprint_sha256,
            },
            &charts,
        );
        files.push(ExportFile {
            name: REPORT_FILE,
            bytes: page.into_bytes(),
        });
        counter.step();
    }
    Ok(Export {
        files,
        exported_at,
        fingerprint: doc.fingerprint_sha256,
        sites: snap.sites.len(),
        samples: snap.sample_count(),
        readings: snap.samples().map(|(_, _, m)| m.readings.len()).sum(),
    })
}

/// Export a campaign (or one site) into `options.dir`: check the folder, build every file in
/// memory, then write each atomically.
///
/// This is the one entry point of the `export` command and of the terminal UI's export key.
/// `progress(done, total)` is called from the calling thread as the export goes.
///
/// # Errors
/// See [`ExportError`]: the folder is refused before anything is read, and nothing is written
/// unless every file could be built.
pub fn export_campaign(
    conn: &Connection,
    options: &ExportOptions,
    progress: &(dyn Fn(usize, usize) + Sync),
) -> Result<ExportSummary, ExportError> {
    validate(options)?;
    let earlier = check_dir(&options.dir)?;
    let export = build_export(conn, options, progress)?;
    std::fs::create_dir_all(&options.dir).map_err(io_error(&options.dir))?;
    for name in &earlier {
        if !ALL_FILES.contains(&name.as_str()) {
            // The temporary file of an interrupted export: never a complete file.
            let _ = std::fs::remove_file(options.dir.join(name));
        }
    }
    let mut written = Vec::new();
    for file in &export.files {
        let path = options.dir.join(file.name);
        write_atomic(&path, &file.bytes).map_err(io_error(&path))?;
        written.push(path);
    }
    let left_from_before = earlier
        .iter()
        .filter(|name| ALL_FILES.contains(&name.as_str()))
        .filter(|name| !export.files.iter().any(|f| f.name == name.as_str()))
        .map(|name| options.dir.join(name))
        .collect();
    Ok(ExportSummary {
        dir: options.dir.clone(),
        written,
        left_from_before,
        exported_at: export.exported_at,
        fingerprint: export.fingerprint,
        sites: export.sites,
        samples: export.samples,
        readings: export.readings,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn formats_parse_and_temporary_files_count_as_ours() {
        assert_eq!("HTML".parse::<ExportFormat>(), Ok(ExportFormat::Html));
        assert!("pdf".parse::<ExportFormat>().is_err());
        assert!(is_ours("report.html"));
        assert!(is_ours(".report.html.1234.tmp"));
        assert!(!is_ours(".report.html"));
        assert!(!is_ours("notes.txt"));
        assert!(!is_ours(".notes.txt.1.tmp"));
    }

    #[test]
    fn a_folder_with_other_files_is_refused() {
        let tmp = tempfile::tempdir().expect("temp dir");
        assert_eq!(
            check_dir(&tmp.path().join("new")).expect("missing"),
            Vec::<String>::new()
        );
        std::fs::write(tmp.path().join("report.html"), "old").expect("write");
        assert_eq!(check_dir(tmp.path()).expect("ours"), vec!["report.html"]);
        std::fs::write(tmp.path().join("thesis.docx"), "mine").expect("write");
        let err = check_dir(tmp.path()).expect_err("foreign file");
        assert!(err.to_string().contains("thesis.docx"), "{err}");
        let file = tmp.path().join("thesis.docx");
        assert!(matches!(
            check_dir(&file),
            Err(ExportError::NotADirectory(_))
        ));
    }
}
