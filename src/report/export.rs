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
//! Every file of one export is written from one read of the campaign (inside one read
//! transaction, so all files describe the same state), a site at a time
//! ([`snapshot::walk_site`]) and a batch of samples at a time
//! ([`snapshot::SiteWalk::read_batch`], [`BATCH_SAMPLES`]), so memory does not grow with the
//! campaign. `campaign.json` is streamed ([`schema::JsonStream`]); the page's site sections
//! and flagged rows go to spool files until the header (which counts everything) can be
//! written, and the chart of a site gathers its points as the batches pass
//! ([`chart::ChartData`]).
//!
//! The set of files is atomic: they are written into a fresh hidden folder beside the target
//! (`.NAME.export-PID.tmp`), synced, and the folder is swapped in with one rename (an exchange
//! of the two folders on Linux; elsewhere two renames), so the target always holds one whole
//! export, the old or the new one, never a mix. The old folder and any temporary files are
//! removed; a staging folder left by an export that was killed is removed by the next export
//! into the same target (on Linux, once its process is gone).
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
//! only (the folder is replaced as a whole, so files of a format not asked for this time go
//! with it). A folder holding anything else is refused, so an export never mixes with other
//! files or removes them; so is the current directory (a folder that is replaced cannot be
//! the one a shell stands in).

pub mod chart;
pub mod chart_k;
pub mod geojson;
pub mod html;
pub mod schema;
pub mod snapshot;
pub mod tables;

use std::collections::BTreeSet;
use std::fmt;
use std::fs::{File, OpenOptions};
use std::io::{self, BufWriter, Cursor, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};
use std::str::FromStr;
use std::sync::atomic::{AtomicUsize, Ordering};

use chrono::{DateTime, SubsecRound, Utc};
use rusqlite::Connection;

use crate::analysis::water::DEFAULT_ROOT_ZONE_CM;
use crate::model::conductivity::ConductivityForm;
use crate::model::retention::ModelKind;
use crate::report::fit_table::parameter_union;
use crate::store::{StoreError, sites};

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
    /// Files of an earlier export that are gone with the old folder because their format was
    /// not asked for this time (a folder holds one export, never a mix of two).
    pub removed_from_before: Vec<PathBuf>,
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

/// Why an export could not be made. The target folder is left as it was.
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

fn io_error_owned(path: PathBuf) -> impl FnOnce(std::io::Error) -> ExportError {
    move |source| ExportError::Io { path, source }
}

/// Spool files of the page inside the staging folder (removed before the swap).
const SPOOLS: [&str; 3] = [".report-sites.part", ".report-flagged.part", ROWS_SPOOL];

/// Whether a directory entry is ours: a file an export writes, or the temporary file of an
/// interrupted [`write_atomic`](crate::report::write_atomic) of one (`.NAME.PID.tmp`, left by
/// exports that wrote file by file).
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

/// One file while an export writes it: on disk (in the staging folder), or in memory.
enum Sink {
    Disk {
        file: BufWriter<File>,
        path: PathBuf,
    },
    Memory(Cursor<Vec<u8>>),
}

impl Write for Sink {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        match self {
            Sink::Disk { file, .. } => file.write(buf),
            Sink::Memory(c) => c.write(buf),
        }
    }

    fn flush(&mut self) -> io::Result<()> {
        match self {
            Sink::Disk { file, .. } => file.flush(),
            Sink::Memory(c) => c.flush(),
        }
    }
}

impl Seek for Sink {
    fn seek(&mut self, pos: SeekFrom) -> io::Result<u64> {
        match self {
            Sink::Disk { file, .. } => file.seek(pos),
            Sink::Memory(c) => c.seek(pos),
        }
    }
}

impl Sink {
    /// The finished file: on disk flushed and synced (its bytes stay there, none returned);
    /// in memory, its bytes.
    fn finish(self) -> io::Result<Vec<u8>> {
        match self {
            Sink::Disk { file, .. } => {
                let file = file.into_inner().map_err(io::IntoInnerError::into_error)?;
                file.sync_all()?;
                Ok(Vec::new())
            }
            Sink::Memory(c) => Ok(c.into_inner()),
        }
    }

    /// Copy a spool's content to the end of `dst`, then delete the spool.
    fn append_to(self, dst: &mut Sink) -> io::Result<()> {
        match self {
            Sink::Disk { file, path } => {
                let mut file = file.into_inner().map_err(io::IntoInnerError::into_error)?;
                file.seek(SeekFrom::Start(0))?;
                io::copy(&mut file, dst)?;
                drop(file);
                std::fs::remove_file(path)
            }
            Sink::Memory(c) => dst.write_all(c.get_ref()),
        }
    }
}

/// Where the files go: a (staging) folder, or memory.
enum Target<'a> {
    Dir(&'a Path),
    Memory,
}

impl Target<'_> {
    fn create(&self, name: &str) -> io::Result<Sink> {
        match self {
            Target::Dir(dir) => {
                let path = dir.join(name);
                let file = OpenOptions::new()
                    .read(true)
                    .write(true)
                    .create_new(true)
                    .open(&path)?;
                Ok(Sink::Disk {
                    file: BufWriter::with_capacity(1 << 16, file),
                    path,
                })
            }
            Target::Memory => Ok(Sink::Memory(Cursor::new(Vec::new()))),
        }
    }
}

/// Spool of one site's parameter-table rows (inside the staging folder).
const ROWS_SPOOL: &str = ".report-rows.part";

/// How many samples an export reads at a time (of one layer).
pub const BATCH_SAMPLES: usize = 200;

/// The page while its sites are written: the table of sites, and spools for the site
/// sections and the flagged rows.
struct PageParts {
    contents: String,
    sections: Sink,
    flagged: Sink,
    flagged_count: usize,
    models: BTreeSet<String>,
}

/// What [`write_files`] wrote.
struct Written {
    files: Vec<ExportFile>,
    exported_at: DateTime<Utc>,
    fingerprint: String,
    totals: html::Totals,
}

/// Write every asked-for file into `target`, one site at a time, from one read of the
/// campaign.
fn write_files(
    conn: &Connection,
    options: &ExportOptions,
    target: &Target<'_>,
    progress: &(dyn Fn(usize, usize) + Sync),
) -> Result<Written, ExportError> {
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
    let site = options.site.as_deref();
    let frame = snapshot::frame(conn, site, options.root_zone_cm, options.conductivity)?;
    let rows = sites::list(conn, site)?;
    let file_count: usize = ExportFormat::ALL
        .iter()
        .filter(|f| options.wants(**f))
        .map(|f| f.files().len())
        .sum();
    let charts_total = if options.wants(ExportFormat::Html) {
        rows.len()
    } else {
        0
    };
    let counter = Progress {
        callback: progress,
        done: AtomicUsize::new(0),
        total: snapshot::sample_total(conn, site)? + charts_total + file_count,
    };
    let io_at = |name: &str| io_error_owned(options.dir.join(name));
    let csv_at = |name: &'static str| {
        let path = options.dir.join(name);
        move |e: csv::Error| match e.into_kind() {
            csv::ErrorKind::Io(source) => ExportError::Io { path, source },
            other => ExportError::Encode {
                file: name,
                message: format!("{other:?}"),
            },
        }
    };
    let create = |name: &'static str| target.create(name).map_err(io_at(name));

    let mut parameters = if options.wants(ExportFormat::Csv) {
        let models = snapshot::current_models(conn, site)?;
        let params = parameter_union(models.iter().map(|k| k.id()), std::iter::empty());
        let mut w = csv::Writer::from_writer(create(PARAMETERS_FILE)?);
        w.write_record(tables::parameters_header(&params))
            .map_err(csv_at(PARAMETERS_FILE))?;
        Some((w, params))
    } else {
        None
    };
    let mut profiles = if options.wants(ExportFormat::Csv) {
        let mut w = csv::Writer::from_writer(create(PROFILES_FILE)?);
        w.write_record(tables::PROFILE_COLUMNS)
            .map_err(csv_at(PROFILES_FILE))?;
        Some(w)
    } else {
        None
    };
    let head = schema::CampaignDocument::head(&frame, exported_at);
    let json_out = if options.wants(ExportFormat::Json) {
        Some(create(CAMPAIGN_FILE)?)
    } else {
        None
    };
    let mut json = schema::JsonStream::start(json_out, &head).map_err(io_at(CAMPAIGN_FILE))?;
    let mut features = Vec::new();
    let mut page = if options.wants(ExportFormat::Html) {
        Some(PageParts {
            contents: String::new(),
            sections: create(SPOOLS[0])?,
            flagged: create(SPOOLS[1])?,
            flagged_count: 0,
            models: BTreeSet::new(),
        })
    } else {
        None
    };
    let mut totals = html::Totals::default();
    for (index, row) in rows.into_iter().enumerate() {
        let walk = snapshot::walk_site(conn, &frame, row)?;
        let site = walk.head();
        json.open(&schema::site_head(&site), "layers")
            .map_err(io_at(CAMPAIGN_FILE))?;
        if let Some(w) = profiles.as_mut() {
            let head = snapshot::Snapshot {
                sites: vec![site.clone()],
                ..frame.clone()
            };
            for r in tables::profile_rows(&head) {
                w.write_record(&r).map_err(csv_at(PROFILES_FILE))?;
            }
        }
        let mut tally = snapshot::SiteTally::default();
        let mut chart_data = page.is_some().then(|| chart::ChartData::new(&site));
        let mut k_chart_data = page.is_some().then(|| chart_k::KChartData::new(&site));
        let mut rows_spool = match page {
            Some(_) => Some(create(ROWS_SPOOL)?),
            None => None,
        };
        for (layer_index, layer) in site.layers.iter().enumerate() {
            json.open(&schema::layer_head(&site, layer), "samples")
                .map_err(io_at(CAMPAIGN_FILE))?;
            for rows in walk.samples_of(layer_index).chunks(BATCH_SAMPLES) {
                let batch = walk.read_batch(conn, &frame, layer_index, rows, &|| counter.step())?;
                for (_, _, m) in batch.samples() {
                    json.item(&schema::sample_data(&batch, m))
                        .map_err(io_at(CAMPAIGN_FILE))?;
                }
                if let Some((w, params)) = parameters.as_mut() {
                    for r in tables::parameter_rows(&batch, params) {
                        w.write_record(&r).map_err(csv_at(PARAMETERS_FILE))?;
                    }
                }
                tally.add(&batch);
                if let (Some(p), Some(data), Some(spool)) =
                    (page.as_mut(), chart_data.as_mut(), rows_spool.as_mut())
                {
                    data.add(&batch);
                    if let Some(k) = k_chart_data.as_mut() {
                        k.add(&batch);
                    }
                    let mut text = String::new();
                    for part in &batch.sites {
                        html::parameter_rows(&mut text, &batch, part);
                    }
                    spool
                        .write_all(text.as_bytes())
                        .map_err(io_at(REPORT_FILE))?;
                    text.clear();
                    p.flagged_count += html::flagged_rows(&mut text, &batch);
                    p.flagged
                        .write_all(text.as_bytes())
                        .map_err(io_at(REPORT_FILE))?;
                }
            }
            json.close().map_err(io_at(CAMPAIGN_FILE))?;
        }
        json.close().map_err(io_at(CAMPAIGN_FILE))?;
        totals.add_site(&tally);
        if options.wants(ExportFormat::Geojson) {
            features.push(geojson::feature(&frame, &site, &tally));
        }
        if let (Some(p), Some(data), Some(spool)) = (page.as_mut(), chart_data, rows_spool) {
            let svg = chart::chart_svg(&frame.settings, &data).map_err(|message| {
                ExportError::Encode {
                    file: REPORT_FILE,
                    message,
                }
            })?;
            let k_svg = match &k_chart_data {
                Some(k) => chart_k::k_chart_svg(k).map_err(|message| ExportError::Encode {
                    file: REPORT_FILE,
                    message,
                })?,
                None => None,
            };
            counter.step();
            html::contents_row(&mut p.contents, index, &site, &tally);
            let mut text = String::new();
            html::section_start(
                &mut text,
                index,
                &site,
                svg.as_deref(),
                k_svg.as_deref(),
                &walk.sample_counts(),
            );
            let write = |sections: &mut Sink| -> io::Result<()> {
                sections.write_all(text.as_bytes())?;
                spool.append_to(sections)?;
                let mut end = String::new();
                html::section_end(&mut end, &site);
                sections.write_all(end.as_bytes())
            };
            write(&mut p.sections).map_err(io_at(REPORT_FILE))?;
            p.models.extend(tally.models.iter().cloned());
        }
    }
    drop(tx);
    let (fingerprint, json_out) = json.finish().map_err(io_at(CAMPAIGN_FILE))?;
    let mut files = Vec::new();
    let mut done = |name: &'static str, sink: Sink| -> Result<(), ExportError> {
        files.push(ExportFile {
            name,
            bytes: sink.finish().map_err(io_at(name))?,
        });
        counter.step();
        Ok(())
    };
    if let Some((w, _)) = parameters {
        let sink = w
            .into_inner()
            .map_err(|e| io_at(PARAMETERS_FILE)(e.into_error()))?;
        done(PARAMETERS_FILE, sink)?;
    }
    if let Some(w) = profiles {
        let sink = w
            .into_inner()
            .map_err(|e| io_at(PROFILES_FILE)(e.into_error()))?;
        done(PROFILES_FILE, sink)?;
    }
    if let Some(sink) = json_out {
        done(CAMPAIGN_FILE, sink)?;
    }
    if options.wants(ExportFormat::Geojson) {
        let mut text =
            serde_json::to_string_pretty(&geojson::collection_of(features)).map_err(|e| {
                ExportError::Encode {
                    file: SITES_FILE,
                    message: e.to_string(),
                }
            })?;
        text.push('\n');
        let mut sink = create(SITES_FILE)?;
        sink.write_all(text.as_bytes()).map_err(io_at(SITES_FILE))?;
        done(SITES_FILE, sink)?;
    }
    if let Some(p) = page {
        let meta = html::PageMeta {
            exported_at: &head.exported_at,
            fingerprint: &fingerprint,
        };
        let models: Vec<ModelKind> = ModelKind::ALL
            .into_iter()
            .filter(|k| p.models.contains(k.id()))
            .collect();
        let totals = &totals;
        let mut sink = create(REPORT_FILE)?;
        let write = |sink: &mut Sink| -> io::Result<()> {
            sink.write_all(html::page_start(&frame, meta, *totals, &p.contents).as_bytes())?;
            p.sections.append_to(sink)?;
            sink.write_all(html::flagged_start(p.flagged_count).as_bytes())?;
            p.flagged.append_to(sink)?;
            sink.write_all(html::flagged_end(p.flagged_count).as_bytes())?;
            sink.write_all(html::page_end(&frame, meta, &models).as_bytes())
        };
        write(&mut sink).map_err(io_at(REPORT_FILE))?;
        done(REPORT_FILE, sink)?;
    }
    Ok(Written {
        files,
        exported_at,
        fingerprint,
        totals,
    })
}

/// Build every asked-for file in memory from one read of the campaign (the same bytes
/// [`export_campaign`] writes).
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
    let written = write_files(conn, options, &Target::Memory, progress)?;
    Ok(Export {
        files: written.files,
        exported_at: written.exported_at,
        fingerprint: written.fingerprint,
        sites: written.totals.sites,
        samples: written.totals.samples,
        readings: written.totals.readings,
    })
}

/// The folder to export into, as a path whose last component names it (a symbolic link is
/// followed, `.` and `..` resolved), so that it can be swapped.
fn resolve_target(dir: &Path) -> Result<PathBuf, ExportError> {
    let is_link = std::fs::symlink_metadata(dir).is_ok_and(|m| m.file_type().is_symlink());
    let named = dir.file_name().is_some() && !dir.ends_with("..");
    let target = if is_link || !named {
        std::fs::canonicalize(dir).map_err(io_error(dir))?
    } else {
        dir.to_path_buf()
    };
    let refused = |why: &str| ExportError::Io {
        path: dir.to_path_buf(),
        source: io::Error::new(io::ErrorKind::InvalidInput, why.to_string()),
    };
    if target.file_name().is_none() {
        return Err(refused(
            "export into a named folder, not the root of a file system",
        ));
    }
    let here = std::env::current_dir()
        .ok()
        .and_then(|d| std::fs::canonicalize(d).ok());
    let there = std::fs::canonicalize(&target).ok();
    if here.is_some() && here == there {
        return Err(refused(
            "the export folder is replaced as a whole, so it cannot be the current directory; \
             export into a named folder (for example --to summary)",
        ));
    }
    Ok(target)
}

fn parent_of(target: &Path) -> PathBuf {
    match target.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    }
}

/// `.NAME.export-PID.tmp` (staging) or `.NAME.old-PID.tmp` (the old folder during a swap
/// without an exchange), beside the target `NAME`.
fn side_name(name: &str, what: &str, pid: u32) -> String {
    format!(".{name}.{what}-{pid}.tmp")
}

/// The process id in a side folder's name for the target `name`, if it is one.
fn side_pid(entry: &str, name: &str) -> Option<u32> {
    let rest = entry
        .strip_prefix('.')?
        .strip_prefix(name)?
        .strip_prefix('.')?;
    let rest = rest
        .strip_prefix("export-")
        .or_else(|| rest.strip_prefix("old-"))?;
    rest.strip_suffix(".tmp")?.parse().ok()
}

/// Remove a folder of export files (staging, or an old export): only files an export
/// writes, then the folder if that emptied it. Anything else is left where it is.
fn remove_export_dir(dir: &Path) {
    if let Ok(entries) = std::fs::read_dir(dir) {
        for entry in entries.flatten() {
            let name = entry.file_name().to_string_lossy().into_owned();
            let is_file = entry.file_type().is_ok_and(|t| t.is_file());
            if is_file && (is_ours(&name) || SPOOLS.contains(&name.as_str())) {
                let _ = std::fs::remove_file(entry.path());
            }
        }
    }
    let _ = std::fs::remove_dir(dir);
}

/// Remove the staging and old folders of earlier exports into `name` whose process is gone
/// (known on Linux only; elsewhere they are left).
fn remove_stale_sides(parent: &Path, name: &str) {
    let Ok(entries) = std::fs::read_dir(parent) else {
        return;
    };
    for entry in entries.flatten() {
        let entry_name = entry.file_name().to_string_lossy().into_owned();
        let Some(pid) = side_pid(&entry_name, name) else {
            continue;
        };
        if pid != std::process::id()
            && crate::store::holder::process_running(pid) == Some(false)
            && entry.file_type().is_ok_and(|t| t.is_dir())
        {
            remove_export_dir(&entry.path());
        }
    }
}

/// Make a folder's entries durable (best effort: not every system syncs a folder).
fn sync_dir(dir: &Path) {
    if let Ok(d) = File::open(dir) {
        let _ = d.sync_all();
    }
}

/// Swap two folders in one step, where the system can (Linux `renameat2(RENAME_EXCHANGE)`).
#[cfg(target_os = "linux")]
fn exchange(a: &Path, b: &Path) -> io::Result<()> {
    use rustix::fs::{CWD, RenameFlags, renameat_with};
    renameat_with(CWD, a, CWD, b, RenameFlags::EXCHANGE).map_err(io::Error::from)
}

#[cfg(not(target_os = "linux"))]
fn exchange(_a: &Path, _b: &Path) -> io::Result<()> {
    Err(io::Error::from(io::ErrorKind::Unsupported))
}

/// The fresh folder an export is written into; removed when dropped unless swapped in.
struct Staging {
    path: PathBuf,
    parent: PathBuf,
    name: String,
    armed: bool,
}

impl Staging {
    fn new(parent: &Path, name: &str) -> Result<Self, ExportError> {
        let path = parent.join(side_name(name, "export", std::process::id()));
        if path.exists() {
            remove_export_dir(&path);
        }
        std::fs::create_dir(&path).map_err(io_error(&path))?;
        Ok(Self {
            path,
            parent: parent.to_path_buf(),
            name: name.to_string(),
            armed: true,
        })
    }

    /// Put the staging folder in the target's place; the old folder (if any) is removed.
    fn swap_into(mut self, target: &Path) -> Result<(), ExportError> {
        let Ok(old) = std::fs::metadata(target) else {
            std::fs::rename(&self.path, target).map_err(io_error(target))?;
            self.armed = false;
            return Ok(());
        };
        // The new folder keeps the old one's permissions.
        let _ = std::fs::set_permissions(&self.path, old.permissions());
        if exchange(&self.path, target).is_ok() {
            // The old export now sits at the staging path; `drop` removes it.
            return Ok(());
        }
        let aside = self
            .parent
            .join(side_name(&self.name, "old", std::process::id()));
        std::fs::rename(target, &aside).map_err(io_error(target))?;
        if let Err(e) = std::fs::rename(&self.path, target) {
            let _ = std::fs::rename(&aside, target);
            return Err(io_error(target)(e));
        }
        self.armed = false;
        remove_export_dir(&aside);
        Ok(())
    }

    fn path(&self) -> &Path {
        &self.path
    }
}

impl Drop for Staging {
    fn drop(&mut self) {
        if self.armed {
            remove_export_dir(&self.path);
        }
    }
}

/// Export a campaign (or one site) into `options.dir`: check the folder, write every file
/// into a fresh folder beside it, and swap that in whole.
///
/// This is the one entry point of the `export` command and of the terminal UI's export key.
/// `progress(done, total)` is called from the calling thread as the export goes.
///
/// # Errors
/// See [`ExportError`]: the folder is refused before anything is read, and the target is
/// left as it was on any error (a full disk, an encoding error, a folder that cannot be
/// written).
pub fn export_campaign(
    conn: &Connection,
    options: &ExportOptions,
    progress: &(dyn Fn(usize, usize) + Sync),
) -> Result<ExportSummary, ExportError> {
    validate(options)?;
    let target = resolve_target(&options.dir)?;
    check_dir(&target)?;
    let parent = parent_of(&target);
    std::fs::create_dir_all(&parent).map_err(io_error(&parent))?;
    let name = target
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    remove_stale_sides(&parent, &name);
    let staging = Staging::new(&parent, &name)?;
    let written = write_files(conn, options, &Target::Dir(staging.path()), progress)?;
    sync_dir(staging.path());
    // Checked again just before the swap: a file put there meanwhile is not swept away.
    let earlier = check_dir(&target)?;
    staging.swap_into(&target)?;
    sync_dir(&parent);
    let removed_from_before = earlier
        .iter()
        .filter(|name| ALL_FILES.contains(&name.as_str()))
        .filter(|name| !written.files.iter().any(|f| f.name == name.as_str()))
        .map(|name| options.dir.join(name))
        .collect();
    Ok(ExportSummary {
        dir: options.dir.clone(),
        written: written
            .files
            .iter()
            .map(|f| options.dir.join(f.name))
            .collect(),
        removed_from_before,
        exported_at: written.exported_at,
        fingerprint: written.fingerprint,
        sites: written.totals.sites,
        samples: written.totals.samples,
        readings: written.totals.readings,
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
