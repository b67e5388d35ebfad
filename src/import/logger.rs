//! Field logger files, long form: `site,depth_cm,sensor,sensor_id,time,value,unit`.
//!
//! `sensor` is `tensiometer` or `water_content`; `unit` (any letter case) is `cm`, `hpa`,
//! `kpa`, `mpa` or `bar` for suction (a negative value is a pressure and is turned into
//! suction) or `fraction`, `m3/m3`, `percent` or `%` for water content. Times are ISO 8601
//! with an offset, or local times with one offset given for the whole command; they are
//! stored in UTC.
//!
//! The import streams: a file is hashed in one pass and read in a second, each row is checked
//! and inserted as it is read inside the command's one transaction, duplicates are found by
//! the table's key, and only per-site and per-sensor state is kept, so memory does not grow
//! with the file. Any problem and the transaction is rolled back: nothing is written. A dry
//! run checks everything the same way against a temporary table.
//!
//! Sites a file names that the campaign does not hold are created (as a lab file does); the
//! summary names them, so a mistyped code is seen at once.

use std::cell::Cell;
use std::collections::HashMap;
use std::fmt;
use std::fs::File;
use std::io::{BufRead, BufReader, Read};
use std::path::{Path, PathBuf};
use std::rc::Rc;

use rusqlite::Connection;
use sha2::{Digest, Sha256};

use super::batch::Origin;
use super::diagnostic::Diagnostics;
use super::fields::{Cells, HeaderCheck};
use super::table::{Table, trim_cell};
use super::wide::{ChannelMap, WideRows};
use super::{EarlierImport, FileSummary, ImportError};
use crate::field::quality::{
    Mark, MarkKind, QualitySettings, SPIKE_PREFIX, STUCK_PREFIX, SensorChecker,
};
use crate::field::time::{TimeError, parse_instant, utc_text};
use crate::model::domain::{SensorKind, Site};
use crate::model::number::{plural, significant};
use crate::model::text::shown;
use crate::model::units::SuctionUnit;
use crate::store::logger::{self as records, Added, FlagWriter, NewRecord, RecordSink};
use crate::store::{Campaign, StoreError, batches, sites};

/// The columns of a logger file, for messages.
pub const COLUMNS: &str = "site,depth_cm,sensor,sensor_id,time,value,unit";

/// The word recorded in `import_batch.kind`.
pub const KIND: &str = "logger";

/// The driest suction accepted, cm: pF 7, oven-dry soil (common practice).
pub const MAX_SUCTION_CM: f64 = 1.0e7;

/// Suction units a logger file may name.
pub(crate) const SUCTION_UNITS: &str = "cm, hpa, kpa, mpa, bar";
/// Water-content units a logger file may name.
pub(crate) const WATER_UNITS: &str = "fraction, m3/m3, percent, %";

/// How a logger import runs.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
#[allow(clippy::struct_excessive_bools)] // independent switches, one per command-line flag
pub struct LoggerOptions {
    /// Check everything and report, but write nothing.
    pub dry_run: bool,
    /// Import files whose content was imported before.
    pub force: bool,
    /// Skip a record whose sensor already has one at that time, instead of refusing the file.
    pub skip_duplicates: bool,
    /// Offset (seconds east of UTC) for times written without one.
    pub utc_offset_s: Option<i32>,
    /// Thresholds of the quality marks.
    pub quality: QualitySettings,
    /// Refuse a file with a column porewise does not read (otherwise a warning).
    pub strict: bool,
    /// Lines of logger preamble before the header, skipped (line numbers still count them).
    pub skip_lines: u64,
}

/// Where an import has got to, for a progress bar. Every method does nothing by default.
pub trait Progress {
    /// A file of `bytes` bytes is about to be read.
    fn file(&mut self, _name: &str, _bytes: u64) {}
    /// `bytes` of the current file have been read.
    fn read(&mut self, _bytes: u64) {}
    /// The files have been read.
    fn done(&mut self) {}
}

/// No progress reporting.
impl Progress for () {}

/// What a logger import added (or, in a dry run, would add).
#[derive(Debug, Clone, PartialEq, Eq, Default)]
pub struct LoggerSummary {
    /// True when nothing was written.
    pub dry_run: bool,
    /// The files read.
    pub files: Vec<FileSummary>,
    /// Records added: tensiometer, water content.
    pub records: [u64; 2],
    /// Sensors the records belong to.
    pub sensors: u64,
    /// Codes of the sites created.
    pub new_sites: Vec<String>,
    /// Records skipped because their sensor already had one at that time.
    pub duplicates_skipped: u64,
    /// Of those, how many had a different value.
    pub duplicates_differing: u64,
    /// Quality flags suggested, by [`MarkKind::index`].
    pub marks: [u64; 4],
    /// Columns the files have that were not read, as warnings for stderr.
    pub warnings: Vec<super::Diagnostic>,
}

impl LoggerSummary {
    /// Records added in all.
    pub fn records_added(&self) -> u64 {
        self.records[0] + self.records[1]
    }

    /// Flags suggested in all.
    pub fn flags(&self) -> u64 {
        self.marks.iter().sum()
    }
}

impl fmt::Display for LoggerSummary {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let added = format!(
            "{} ({} tensiometer, {} water content) of {}",
            plural(self.records_added(), "logger record"),
            self.records[0],
            self.records[1],
            plural(self.sensors, "sensor")
        );
        let files = plural(self.files.len() as u64, "file");
        let (add, suggest, skip) = if self.dry_run {
            write!(f, "dry run: {files} valid; would add {added}")?;
            ("would add", "would suggest", "would skip")
        } else {
            write!(f, "added {added} from {files}")?;
            ("added", "suggested", "skipped")
        };
        if !self.new_sites.is_empty() {
            write!(
                f,
                "; {add} {}: {}",
                plural(self.new_sites.len() as u64, "new site"),
                shown(&self.new_sites.join(", "))
            )?;
        }
        let kinds: Vec<String> = MarkKind::ALL
            .iter()
            .filter(|k| self.marks[k.index()] > 0)
            .map(|k| format!("{} {}", self.marks[k.index()], k.label()))
            .collect();
        write!(f, "; {suggest} {}", plural(self.flags(), "quality flag"))?;
        if !kinds.is_empty() {
            write!(f, " ({})", kinds.join(", "))?;
        }
        if self.duplicates_skipped > 0 {
            write!(
                f,
                "; {skip} {} ({} with a different value)",
                plural(self.duplicates_skipped, "duplicate"),
                self.duplicates_differing
            )?;
        }
        if self.dry_run {
            write!(f, "; nothing was written")?;
        }
        Ok(())
    }
}

/// The unit of one row.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum RowUnit {
    Suction(SuctionUnit),
    Fraction,
    Percent,
}

pub(crate) fn row_unit(text: &str) -> Option<RowUnit> {
    const NAMES: [(&str, RowUnit); 9] = [
        ("kpa", RowUnit::Suction(SuctionUnit::Kpa)),
        ("cm", RowUnit::Suction(SuctionUnit::Cm)),
        ("hpa", RowUnit::Suction(SuctionUnit::Hpa)),
        ("mpa", RowUnit::Suction(SuctionUnit::Mpa)),
        ("bar", RowUnit::Suction(SuctionUnit::Bar)),
        ("fraction", RowUnit::Fraction),
        ("m3/m3", RowUnit::Fraction),
        ("percent", RowUnit::Percent),
        ("%", RowUnit::Percent),
    ];
    NAMES
        .iter()
        .find(|(name, _)| text.eq_ignore_ascii_case(name))
        .map(|(_, unit)| *unit)
}

/// The column indexes of a logger file.
#[derive(Debug, Clone, Copy)]
struct Columns {
    site: usize,
    depth: usize,
    sensor: usize,
    sensor_id: usize,
    time: usize,
    value: usize,
    unit: usize,
}

/// One row, checked, in canonical units (text borrowed from the record).
#[derive(Debug, Clone, Copy)]
struct Row<'r> {
    line: u64,
    site: &'r str,
    depth_cm: f64,
    kind: SensorKind,
    sensor_id: &'r str,
    /// The time as written.
    time_text: &'r str,
    time: i64,
    value: f64,
    written_negative: bool,
}

/// The last time text parsed, and what it gave (rows of one instant usually come together).
#[derive(Debug, Default)]
struct TimeCache {
    text: String,
    parsed: Option<Result<(i64, [u8; 20]), TimeError>>,
}

impl TimeCache {
    fn parse(&mut self, text: &str, offset: Option<i32>) -> Result<(i64, [u8; 20]), TimeError> {
        if let Some(p) = &self.parsed
            && self.text == text
        {
            return p.clone();
        }
        let parsed = parse_instant(text, offset).and_then(|secs| {
            utc_text(secs)
                .map(|t| (secs, t))
                .ok_or(TimeError::NotCalendar)
        });
        self.text.clear();
        self.text.push_str(text);
        self.parsed = Some(parsed.clone());
        parsed
    }
}

/// Check the cells of one data row; `None` when any cell was bad (each reported).
fn read_row(
    cells: &mut Cells<'_>,
    c: &Columns,
    times: &mut TimeCache,
    offset: Option<i32>,
) -> Option<(Row<'static>, [u8; 20])> {
    // Codes are checked here and borrowed from the record by the caller.
    let _ = cells.code_text(c.site, "a site code");
    let depth = cells.depth(c.depth);
    let kind = match cells.cell(c.sensor).parse::<SensorKind>() {
        Ok(k) => Some(k),
        Err(message) => {
            cells.fail(c.sensor, message);
            None
        }
    };
    let _ = cells.code_text(c.sensor_id, "a sensor id");
    let time_text = cells.cell(c.time);
    let time = match times.parse(time_text, offset) {
        Ok(t) => Some(t),
        Err(e) => {
            cells.fail(c.time, e.message(time_text));
            None
        }
    };
    let raw = cells.number(c.value);
    let unit_text = cells.cell(c.unit);
    let unit = row_unit(unit_text);
    if unit.is_none() {
        cells.fail(
            c.unit,
            format!(
                "found {unit_text:?}, expected a suction unit ({SUCTION_UNITS}) or a \
                 water-content unit ({WATER_UNITS})"
            ),
        );
    }
    let (Some(depth_cm), Some(kind), Some((time, utc)), Some(raw), Some(unit)) =
        (depth, kind, time, raw, unit)
    else {
        return None;
    };
    let value = match (kind, unit) {
        (SensorKind::Tensiometer, RowUnit::Suction(u)) => {
            let h = u.to_cm(raw.abs());
            if h > MAX_SUCTION_CM {
                let found = format!("{} {unit_text}", cells.cell(c.value));
                cells.fail(
                    c.value,
                    format!(
                        "found {found:?}, expected a suction of at most 1e7 cm (pF 7, oven dry)"
                    ),
                );
                return None;
            }
            h
        }
        (SensorKind::WaterContent, RowUnit::Fraction) => {
            let ok = cells.in_range(
                c.value,
                raw,
                0.0,
                1.0,
                "a volumetric water content from 0 to 1 m3/m3",
            );
            ok.then_some(raw)?
        }
        (SensorKind::WaterContent, RowUnit::Percent) => {
            let ok = cells.in_range(
                c.value,
                raw,
                0.0,
                100.0,
                "a volumetric water content from 0 to 100 %",
            );
            ok.then_some(raw / 100.0)?
        }
        (SensorKind::Tensiometer, _) => {
            cells.fail(
                c.unit,
                format!("found {unit_text:?} for a tensiometer, expected a suction unit ({SUCTION_UNITS})"),
            );
            return None;
        }
        (SensorKind::WaterContent, RowUnit::Suction(_)) => {
            cells.fail(
                c.unit,
                format!(
                    "found {unit_text:?} for a water-content sensor, expected a water-content \
                     unit ({WATER_UNITS})"
                ),
            );
            return None;
        }
    };
    if !cells.is_ok() {
        return None;
    }
    Some((
        Row {
            line: cells.line(),
            site: "",
            depth_cm,
            kind,
            sensor_id: "",
            time_text: "",
            time,
            value,
            written_negative: raw < 0.0,
        },
        utc,
    ))
}

/// One sensor seen by the command.
#[derive(Debug)]
struct SensorState {
    site_id: i64,
    sensor_id: String,
    depth_cm: f64,
    kind: SensorKind,
    /// Where the command first saw it.
    first: Origin,
    /// Latest time fed to the ordered checks.
    last_time: i64,
    /// Stuck and spike checks run as the rows stream past (the sensor's rows have come in
    /// time order and it had no stored records).
    inline: bool,
    checker: SensorChecker<i64>,
    /// Ordered marks raised inline, taken back if the sensor must be checked again.
    inline_marks: [u64; 4],
}

/// A site seen by the command, and its sensors (indexes into `Run::sensors`).
#[derive(Debug)]
struct SiteEntry {
    id: i64,
    sensors: HashMap<String, usize>,
}

/// The state of one import command.
struct Run<'c> {
    conn: &'c Connection,
    options: LoggerOptions,
    sink: RecordSink<'c>,
    flags: Option<FlagWriter<'c>>,
    files: Vec<String>,
    batch_ids: Vec<i64>,
    sites: HashMap<String, SiteEntry>,
    sensors: Vec<SensorState>,
    next_pseudo_site: i64,
    marks: Vec<(i64, Mark)>,
    summary: LoggerSummary,
}

/// Reads through to `inner`, remembering the last byte seen (was the file cut off mid-line?).
struct TailTracker<R> {
    inner: R,
    last: Rc<Cell<Option<u8>>>,
}

impl<R: Read> Read for TailTracker<R> {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = self.inner.read(buf)?;
        if n > 0 {
            self.last.set(Some(buf[n - 1]));
        }
        Ok(n)
    }
}

fn open(path: &Path) -> Result<File, ImportError> {
    File::open(path).map_err(|source| ImportError::Read {
        path: path.to_path_buf(),
        source,
    })
}

/// SHA-256 (lower-case hex) and length of a file, read in one streaming pass.
fn hash_file(path: &Path) -> Result<(String, u64), ImportError> {
    let mut file = open(path)?;
    let mut hasher = Sha256::new();
    let mut buf = vec![0u8; 1 << 18];
    let mut len = 0u64;
    loop {
        let n = file.read(&mut buf).map_err(|source| ImportError::Read {
            path: path.to_path_buf(),
            source,
        })?;
        if n == 0 {
            break;
        }
        len += n as u64;
        hasher.update(&buf[..n]);
    }
    let hex = hasher
        .finalize()
        .iter()
        .fold(String::with_capacity(64), |mut s, b| {
            use std::fmt::Write as _;
            let _ = write!(s, "{b:02x}");
            s
        });
    Ok((hex, len))
}

/// Import logger files into the campaign, all or nothing, streaming.
///
/// # Errors
/// [`ImportError::Invalid`] with every problem found (up to 50 listed),
/// [`ImportError::AlreadyImported`], [`ImportError::Read`] or [`ImportError::Store`]; in
/// every case nothing was written.
pub fn import_logger_files(
    campaign: &mut Campaign,
    files: &[PathBuf],
    options: LoggerOptions,
    progress: &mut dyn Progress,
) -> Result<LoggerSummary, ImportError> {
    import_logger_files_mapped(campaign, files, options, None, progress)
}

/// [`import_logger_files`] for wide files when `map` is given: a time column, then one
/// column per channel as the map says ([`super::wide`]).
///
/// # Errors
/// As [`import_logger_files`].
pub fn import_logger_files_mapped(
    campaign: &mut Campaign,
    files: &[PathBuf],
    options: LoggerOptions,
    map: Option<&ChannelMap>,
    progress: &mut dyn Progress,
) -> Result<LoggerSummary, ImportError> {
    let mut hashed = Vec::with_capacity(files.len());
    for path in files {
        hashed.push(hash_file(path)?);
    }
    let tx = if options.dry_run {
        campaign.read_transaction()?
    } else {
        campaign.transaction()?
    };
    if !options.force {
        let mut earlier = Vec::new();
        for (path, (sha, _)) in files.iter().zip(&hashed) {
            if let Some(rec) = batches::find_by_sha256(&tx, sha)? {
                earlier.push(EarlierImport {
                    file: path.display().to_string(),
                    earlier: rec,
                });
            }
        }
        if !earlier.is_empty() {
            return Err(ImportError::AlreadyImported(earlier));
        }
    }
    let sink = if options.dry_run {
        RecordSink::dry_run(&tx)?
    } else {
        RecordSink::writing(&tx)?
    };
    let mut run = Run {
        conn: &tx,
        options,
        sink,
        flags: if options.dry_run {
            None
        } else {
            Some(FlagWriter::new(&tx)?)
        },
        files: Vec::with_capacity(files.len()),
        batch_ids: Vec::with_capacity(files.len()),
        sites: HashMap::new(),
        sensors: Vec::new(),
        next_pseudo_site: -1,
        marks: Vec::new(),
        summary: LoggerSummary {
            dry_run: options.dry_run,
            ..LoggerSummary::default()
        },
    };
    let mut diags = if options.strict {
        Diagnostics::strict()
    } else {
        Diagnostics::new()
    };
    for (index, (path, (sha, len))) in files.iter().zip(&hashed).enumerate() {
        let name = path.display().to_string();
        progress.file(&name, *len);
        let batch_id = if options.dry_run {
            -1 - index as i64
        } else {
            batches::insert(
                &tx,
                &batches::NewBatch {
                    file_name: &name,
                    sha256: sha,
                    kind: KIND,
                    rows: 0,
                    forced: options.force,
                },
            )?
        };
        run.files.push(name.clone());
        run.batch_ids.push(batch_id);
        let rows = run.read_file(index, path, map, &mut diags, progress)?;
        if !options.dry_run {
            records::set_batch_rows(&tx, batch_id, rows)?;
        }
        run.summary.files.push(FileSummary {
            name,
            sha256: sha.clone(),
            rows,
            batch_id: (!options.dry_run).then_some(batch_id),
        });
    }
    progress.done();
    if !diags.is_empty() {
        return Err(ImportError::Invalid(diags));
    }
    run.check_again()?;
    run.summary.sensors = run.sensors.len() as u64;
    run.summary.warnings = diags.warnings().to_vec();
    let summary = std::mem::take(&mut run.summary);
    drop(run);
    if !options.dry_run {
        tx.commit().map_err(StoreError::from)?;
    }
    Ok(summary)
}

impl Run<'_> {
    /// Read file `index`, checking and adding its rows; returns the number of data rows
    /// (records, for a wide file).
    fn read_file(
        &mut self,
        index: usize,
        path: &Path,
        map: Option<&ChannelMap>,
        diags: &mut Diagnostics,
        progress: &mut dyn Progress,
    ) -> Result<u64, ImportError> {
        let name = self.files[index].clone();
        let last_byte = Rc::new(Cell::new(None));
        let reader = TailTracker {
            inner: open(path)?,
            last: Rc::clone(&last_byte),
        };
        let skip = self.options.skip_lines;
        let mut reader = BufReader::new(reader);
        let mut skipped = 0u64;
        let mut preamble = Vec::new();
        while skipped < skip {
            preamble.clear();
            match reader.read_until(b'\n', &mut preamble) {
                Ok(0) => break,
                Ok(_) => skipped += 1,
                Err(source) => {
                    return Err(ImportError::Read {
                        path: path.to_path_buf(),
                        source,
                    });
                }
            }
        }
        if skipped < skip {
            diags.push(
                &name,
                skipped,
                "-",
                format!(
                    "found {} in the file, expected a header row after the {} that \
                     --skip-lines {skip} skips",
                    plural(skipped, "line"),
                    plural(skip, "line")
                ),
            );
            return Ok(0);
        }
        // Header problems are reported at line 1 of what follows the preamble.
        let mut head = if diags.is_strict() {
            Diagnostics::strict()
        } else {
            Diagnostics::new()
        };
        let shift = |head: &mut Diagnostics| {
            head.relocate(|d| {
                if d.line > 0 {
                    d.line += skip;
                }
            });
        };
        let table = match Table::open(&name, reader) {
            Ok(t) => t,
            Err(mut problems) => {
                shift(&mut problems);
                diags.extend(problems);
                return Ok(0);
            }
        };
        let source = match map {
            Some(map) => WideRows::new(table, map, &mut head).map(Source::Wide),
            None => long_columns(&name, table, &mut head),
        };
        shift(&mut head);
        diags.extend(head);
        let Some(mut source) = source else {
            return Ok(0);
        };
        let columns = source.columns();
        let decimal_comma = source.decimal_comma();
        let offset = self.options.utc_offset_s;
        let mut times = TimeCache::default();
        let mut rows = 0u64;
        // The last row's line and whether it had a problem (a cut-off file shows there).
        let mut last: Option<(u64, bool)> = None;
        loop {
            if rows.is_multiple_of(8192) {
                progress.read(source.bytes_read());
            }
            let (next, wide) = match &mut source {
                Source::Long(table, header, _) => (
                    table
                        .next_record()
                        .map(|r| r.map(|(line, record)| (line, record, &*header))),
                    None,
                ),
                Source::Wide(w) => {
                    let time = w.time_name().to_string();
                    (w.next_record(), Some(time))
                }
            };
            let Some(next) = next else {
                break;
            };
            rows += 1;
            let (line, record, header) = match next {
                Ok(r) => r,
                Err((line, message)) => {
                    diags.push(&name, line + skip, "-", message);
                    last = Some((line + skip, true));
                    continue;
                }
            };
            let line = line + skip;
            let before = diags.total();
            let parsed = Cells::new(&name, line, header, record, decimal_comma, diags)
                .and_then(|mut cells| read_row(&mut cells, &columns, &mut times, offset));
            if let Some((row, utc)) = parsed {
                let text = |col: usize| record.get(col).map_or("", trim_cell);
                let row = Row {
                    site: text(columns.site),
                    sensor_id: text(columns.sensor_id),
                    time_text: text(columns.time),
                    ..row
                };
                self.add(index, &row, &utc, &columns, header, diags)?;
            } else if let Some(time) = wide
                && diags
                    .items()
                    .last()
                    .is_some_and(|d| d.line == line && d.column == time)
            {
                // A bad time is one problem, not one per channel.
                if let Source::Wide(w) = &mut source {
                    w.skip_row();
                }
            }
            last = Some((line, diags.total() > before));
        }
        progress.read(source.bytes_read());
        if rows == 0 {
            diags.push(
                &name,
                1 + skip,
                "-",
                "found a header row and no data rows, expected at least one data row",
            );
        }
        if let Some((line, true)) = last
            && last_byte.get().is_some_and(|b| b != b'\n' && b != b'\r')
        {
            diags.push(
                &name,
                line,
                "-",
                "the file ends in the middle of this line (no line break after it): it looks \
                 cut off, as by an interrupted copy or transfer; expected complete rows",
            );
        }
        Ok(rows)
    }

    /// `FILE:LINE` of a place in this command's files.
    fn place(&self, origin: Origin) -> String {
        format!(
            "{}:{}",
            self.files.get(origin.file).map_or("?", String::as_str),
            origin.line
        )
    }

    /// The id of a site, creating it (or, in a dry run, a stand-in id) on first sight.
    fn site_id(&mut self, code: &str, batch_id: i64) -> Result<i64, StoreError> {
        if let Some(entry) = self.sites.get(code) {
            return Ok(entry.id);
        }
        let id = if let Some(stored) = sites::find(self.conn, code)? {
            stored.id
        } else {
            self.summary.new_sites.push(code.to_string());
            if self.options.dry_run {
                self.next_pseudo_site -= 1;
                self.next_pseudo_site + 1
            } else {
                sites::insert(self.conn, &Site::with_code(code), Some(batch_id))?
            }
        };
        self.sites.insert(
            code.to_string(),
            SiteEntry {
                id,
                sensors: HashMap::new(),
            },
        );
        Ok(id)
    }

    /// The sensor of a row: its index in `self.sensors`, noted on first sight; `None` (a
    /// problem reported) when the row gives the sensor another depth or kind than the
    /// command or the campaign knows.
    fn sensor(
        &mut self,
        file: usize,
        row: &Row<'_>,
        columns: &Columns,
        header: &super::table::Header,
        diags: &mut Diagnostics,
    ) -> Result<Option<usize>, StoreError> {
        // The depth and kind the sensor already has, and where that comes from.
        let known = self
            .sites
            .get(row.site)
            .and_then(|s| s.sensors.get(row.sensor_id))
            .copied();
        let mut stored_history = false;
        let mut site_id = 0;
        let earlier = if let Some(i) = known {
            let state = &self.sensors[i];
            Some((state.depth_cm, state.kind, Known::Row(state.first)))
        } else {
            site_id = self.site_id(row.site, self.batch_ids[file])?;
            let stored = if site_id > 0 {
                records::stored_sensor(self.conn, site_id, row.sensor_id)?
            } else {
                None
            };
            stored.map(|s| {
                stored_history = true;
                let from = match (&s.file_name, s.line) {
                    (Some(f), Some(l)) => format!("the campaign (from {f}:{l})"),
                    _ => "the campaign".to_string(),
                };
                (s.depth_cm, s.sensor, Known::Campaign(from))
            })
        };
        if let Some((depth_cm, kind, where_)) = &earlier
            && let Some(col) = conflict(row, *depth_cm, *kind)
        {
            // Where the sensor got its depth and kind: a row of this command, or the campaign.
            let where_ = match where_ {
                Known::Campaign(text) => text.clone(),
                Known::Row(origin) => self.place(*origin),
            };
            let message = conflict_message(row, col, *depth_cm, *kind, &where_);
            diags.push(
                &self.files[file],
                row.line,
                header.name(pick(columns, col)),
                message,
            );
            return Ok(None);
        }
        if known.is_some() {
            return Ok(known);
        }
        let index = self.sensors.len();
        self.sensors.push(SensorState {
            site_id,
            sensor_id: row.sensor_id.to_string(),
            depth_cm: row.depth_cm,
            kind: row.kind,
            first: Origin {
                file,
                line: row.line,
            },
            last_time: i64::MIN,
            // A sensor with stored records is checked over its whole series at the end.
            inline: !stored_history,
            checker: SensorChecker::new(row.kind, self.options.quality),
            inline_marks: [0; 4],
        });
        if let Some(entry) = self.sites.get_mut(row.site) {
            entry.sensors.insert(row.sensor_id.to_string(), index);
        }
        Ok(Some(index))
    }

    /// Check a row's sensor against what the command and the campaign know of it, then store
    /// the row and run the quality checks.
    fn add(
        &mut self,
        file: usize,
        row: &Row<'_>,
        utc: &[u8; 20],
        columns: &Columns,
        header: &super::table::Header,
        diags: &mut Diagnostics,
    ) -> Result<(), StoreError> {
        let Some(sensor) = self.sensor(file, row, columns, header, diags)? else {
            return Ok(());
        };
        let time = std::str::from_utf8(utc).unwrap_or_default();
        let added = self.sink.add(&NewRecord {
            site_id: self.sensors[sensor].site_id,
            depth_cm: row.depth_cm,
            sensor: row.kind,
            sensor_id: row.sensor_id,
            time,
            value: row.value,
            batch_id: self.batch_ids[file],
            line: row.line,
        })?;
        let handle = match added {
            Added::Stored(handle) => handle,
            Added::Duplicate(existing) => {
                if self.options.skip_duplicates {
                    self.summary.duplicates_skipped += 1;
                    if (existing.value - row.value).abs() > 1e-9 * row.value.abs().max(1e-9) {
                        self.summary.duplicates_differing += 1;
                    }
                } else {
                    let message = self.duplicate_message(row, time, &existing);
                    diags.push(
                        &self.files[file],
                        row.line,
                        header.name(columns.time),
                        message,
                    );
                }
                return Ok(());
            }
        };
        self.summary.records[usize::from(row.kind == SensorKind::WaterContent)] += 1;
        if !diags.is_empty() {
            // The command will write nothing; checking quality is wasted work now.
            return Ok(());
        }
        self.check(sensor, row, handle)
    }

    /// The message for a second record of a sensor at one time.
    fn duplicate_message(&self, row: &Row<'_>, time: &str, existing: &records::Existing) -> String {
        let ours = existing
            .batch_id
            .and_then(|b| self.batch_ids.iter().position(|&x| x == b));
        let at = match (existing.file_name.as_deref(), existing.line, ours) {
            (Some(f), Some(l), _) => format!("{f}:{l}"),
            (None, Some(l), Some(file)) => self.place(Origin { file, line: l }),
            _ => "?".to_string(),
        };
        let first = if ours.is_some() {
            format!("first at {at}")
        } else {
            format!("which the campaign already holds (from {at})")
        };
        let written = if row.time_text == time {
            String::new()
        } else {
            format!(" ({} as written)", row.time_text)
        };
        format!(
            "found a second record of sensor {:?} at site {:?} for {time}{written}, {first}; \
             expected one record per sensor and time (--skip-duplicates skips repeats)",
            row.sensor_id, row.site
        )
    }

    /// Run the quality checks on a stored record and suggest the flags they raise.
    fn check(&mut self, sensor: usize, row: &Row<'_>, handle: i64) -> Result<(), StoreError> {
        let first_batch = self.batch_ids[0];
        let mut marks = std::mem::take(&mut self.marks);
        marks.clear();
        let state = &mut self.sensors[sensor];
        state
            .checker
            .push_point(handle, row.value, row.written_negative, &mut marks);
        let pointwise = marks.len();
        if state.inline {
            if row.time > state.last_time {
                state
                    .checker
                    .push_ordered(handle, row.time, row.value, &mut marks);
                state.last_time = row.time;
            } else {
                // Out of time order: this sensor is checked again over its sorted series at
                // the end; take back what the stream raised for it.
                state.inline = false;
                for k in MarkKind::ALL {
                    self.summary.marks[k.index()] -= state.inline_marks[k.index()];
                }
                state.inline_marks = [0; 4];
                if !self.options.dry_run {
                    records::withdraw_new_flags(
                        self.conn,
                        state.site_id,
                        &state.sensor_id,
                        first_batch,
                        &[STUCK_PREFIX, SPIKE_PREFIX],
                    )?;
                }
            }
        }
        for (i, (h, mark)) in marks.iter().enumerate() {
            self.summary.marks[mark.kind.index()] += 1;
            if i >= pointwise {
                state.inline_marks[mark.kind.index()] += 1;
            }
            if let Some(flags) = &mut self.flags {
                flags.suggest(*h, &mark.reason, mark.score)?;
            }
        }
        self.marks = marks;
        Ok(())
    }

    /// Run the ordered checks again over the whole series of every sensor that had stored
    /// records or whose rows came out of time order, flagging only this command's records.
    fn check_again(&mut self) -> Result<(), StoreError> {
        let first_batch = self.batch_ids.first().copied().unwrap_or(0);
        let quality = self.options.quality;
        for state in self.sensors.iter().filter(|s| !s.inline) {
            let mut checker = SensorChecker::new(state.kind, quality);
            let mut marks: Vec<((i64, bool), Mark)> = Vec::new();
            let mut found: Vec<(i64, Mark)> = Vec::new();
            self.sink.series(
                state.site_id,
                &state.sensor_id,
                first_batch,
                |handle, time, value, new| {
                    checker.push_ordered((handle, new), time, value, &mut marks);
                    found.extend(
                        marks
                            .drain(..)
                            .filter(|((_, new), _)| *new)
                            .map(|((h, _), m)| (h, m)),
                    );
                },
            )?;
            for (handle, mark) in found {
                self.summary.marks[mark.kind.index()] += 1;
                if let Some(flags) = &mut self.flags {
                    flags.suggest(handle, &mark.reason, mark.score)?;
                }
            }
        }
        Ok(())
    }
}

/// The rows of one logger file: the long form with its header and columns, or a wide file
/// read through its map.
enum Source<R: Read> {
    Long(Table<R>, super::table::Header, Columns),
    Wide(WideRows<R>),
}

impl<R: Read> Source<R> {
    /// The columns of the (long-form) records.
    fn columns(&self) -> Columns {
        match self {
            Source::Long(_, _, c) => *c,
            Source::Wide(_) => Columns {
                site: 0,
                depth: 1,
                sensor: 2,
                sensor_id: 3,
                time: 4,
                value: 5,
                unit: 6,
            },
        }
    }

    fn decimal_comma(&self) -> bool {
        match self {
            Source::Long(t, _, _) => t.decimal_comma(),
            Source::Wide(w) => w.decimal_comma(),
        }
    }

    fn bytes_read(&self) -> u64 {
        match self {
            Source::Long(t, _, _) => t.bytes_read(),
            Source::Wide(w) => w.bytes_read(),
        }
    }
}

/// Check a long-form header; `None` when it has a problem (reported).
fn long_columns<R: Read>(
    name: &str,
    table: Table<R>,
    diags: &mut Diagnostics,
) -> Option<Source<R>> {
    let header = table.header().clone();
    let mut check = HeaderCheck::new(name, &header, COLUMNS, diags);
    let columns = Columns {
        site: check.required("site", diags),
        depth: check.required("depth_cm", diags),
        sensor: check.required("sensor", diags),
        sensor_id: check.required("sensor_id", diags),
        time: check.required("time", diags),
        value: check.required("value", diags),
        unit: check.required("unit", diags),
    };
    check.unused(
        &[
            "site",
            "depth_cm",
            "sensor",
            "sensor_id",
            "time",
            "value",
            "unit",
        ],
        diags,
    );
    check
        .is_ok()
        .then_some(Source::Long(table, header, columns))
}

/// Where the command learnt a sensor's depth and kind.
#[derive(Debug)]
enum Known {
    /// A row of this command.
    Row(Origin),
    /// The campaign (with the place of its latest record).
    Campaign(String),
}

/// Which of a row's columns a sensor conflict is about.
#[derive(Debug, Clone, Copy)]
enum ConflictColumn {
    Depth,
    Sensor,
}

fn pick(c: &Columns, col: ConflictColumn) -> usize {
    match col {
        ConflictColumn::Depth => c.depth,
        ConflictColumn::Sensor => c.sensor,
    }
}

/// Which column (if any) of a row gives its sensor another kind or depth than `kind` and
/// `depth_cm`.
fn conflict(row: &Row<'_>, depth_cm: f64, kind: SensorKind) -> Option<ConflictColumn> {
    if kind != row.kind {
        Some(ConflictColumn::Sensor)
    } else if (depth_cm - row.depth_cm).abs() > 1e-9 {
        Some(ConflictColumn::Depth)
    } else {
        None
    }
}

/// The message for a sensor conflict, `where_` (`FILE:LINE`, or the campaign) having the
/// sensor at `depth_cm` as a `kind`.
fn conflict_message(
    row: &Row<'_>,
    col: ConflictColumn,
    depth_cm: f64,
    kind: SensorKind,
    where_: &str,
) -> String {
    let who = format!("sensor {:?} of site {:?}", row.sensor_id, row.site);
    let cm = |v: f64| significant(v, 6).unwrap_or_default();
    match col {
        ConflictColumn::Sensor => format!(
            "found {who} as {}, but {where_} has it as {kind}; expected one kind per sensor",
            row.kind
        ),
        ConflictColumn::Depth => format!(
            "found {who} at {} cm, but {where_} has it at {} cm; expected one depth per sensor",
            cm(row.depth_cm),
            cm(depth_cm)
        ),
    }
}
