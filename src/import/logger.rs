//! Field logger files, long form: `site,depth_cm,sensor,sensor_id,time,value,unit`.
//!
//! `sensor` is `tensiometer` or `water_content`; `unit` (any letter case) is `cm`, `hpa`,
//! `kpa`, `mpa` or `bar` for suction (a negative value is a pressure and is turned into
//! suction) or `fraction`, `m3/m3`, `percent` or `%` for water content. Times are ISO 8601
//! with an offset, or local times with one offset given for the whole command; they are
//! stored in UTC.
//!
//! The import streams: a file is hashed in one pass and read in a second, on a thread of its
//! own (`reader`) that checks every cell and sends the rows in bounded batches; this thread
//! stores them inside the command's one transaction, many records per statement, finds
//! duplicates by the table's key and runs the quality checks. Only per-site and per-sensor
//! state and a few batches are kept, so memory does not grow with the file. Any problem and
//! the transaction is rolled back: nothing is written. A dry run checks everything the same
//! way against a temporary table.
//!
//! Sites a file names that the campaign does not hold are created (as a lab file does); the
//! summary names them, so a mistyped code is seen at once.

mod reader;

use std::collections::{HashMap, VecDeque};
use std::fmt;
use std::io::Read;
use std::path::{Path, PathBuf};
use std::sync::mpsc::{self, Receiver};

use rusqlite::Connection;
use sha2::{Digest, Sha256};

use self::reader::{Batch, Entry, Msg, Names, Parsed, ReadJob, Tail};
use super::batch::Origin;
use super::diagnostic::Diagnostics;
use super::wide::ChannelMap;
use super::{EarlierImport, FileSummary, ImportError};
use crate::field::quality::{
    Mark, MarkKind, QualitySettings, SPIKE_PREFIX, STUCK_PREFIX, SensorChecker,
};
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

/// One sensor of the command (a site and a sensor id), once a row of it has been accepted.
#[derive(Debug)]
struct SensorState {
    /// Its `logger_sensor` id (negative for one a dry run would create).
    id: i64,
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

/// A sensor the files name (the reader's numbering), and its state once accepted.
#[derive(Debug)]
struct Named {
    site: String,
    sensor_id: String,
    state: Option<usize>,
}

/// A record handed to the sink, with what its outcome needs.
#[derive(Debug, Clone, Copy)]
struct Queued {
    file: usize,
    state: usize,
    row: Parsed,
}

/// The state of one import command (on the thread that writes).
struct Run<'c> {
    conn: &'c Connection,
    options: LoggerOptions,
    sink: RecordSink<'c>,
    flags: Option<FlagWriter<'c>>,
    files: Vec<String>,
    batch_ids: Vec<i64>,
    sites: HashMap<String, i64>,
    named: Vec<Named>,
    sensors: Vec<SensorState>,
    next_pseudo_site: i64,
    next_pseudo_sensor: i64,
    marks: Vec<(i64, Mark)>,
    /// Records handed to the sink whose outcome has not come back yet, in order.
    queue: VecDeque<Queued>,
    /// Outcomes back from the sink, in the order of `queue`.
    done: Vec<Added>,
    /// File and line of the last record this side reported a problem with.
    problem_at: Option<(usize, u64)>,
    summary: LoggerSummary,
}

/// SHA-256 (lower-case hex) and length of a file, read in one streaming pass.
fn hash_file(path: &Path) -> Result<(String, u64), ImportError> {
    let mut file = reader::open(path)?;
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
/// Two threads share the work: one reads and checks the files (`reader`), sending rows in
/// bounded batches, while this one resolves sensors, stores the records and runs the
/// quality checks, so reading overlaps with SQLite and memory stays flat.
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
    let names: Vec<String> = files.iter().map(|p| p.display().to_string()).collect();
    let mut run = Run {
        conn: &tx,
        options,
        sink,
        flags: if options.dry_run {
            None
        } else {
            Some(FlagWriter::new(&tx)?)
        },
        files: names.clone(),
        batch_ids: Vec::with_capacity(files.len()),
        sites: HashMap::new(),
        named: Vec::new(),
        sensors: Vec::new(),
        next_pseudo_site: -1,
        next_pseudo_sensor: -1,
        marks: Vec::new(),
        queue: VecDeque::with_capacity(2 * records::CHUNK),
        done: Vec::with_capacity(2 * records::CHUNK),
        problem_at: None,
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
    let job = ReadJob {
        paths: files,
        names: &names,
        map,
        utc_offset_s: options.utc_offset_s,
        skip_lines: options.skip_lines,
        strict: options.strict,
    };
    std::thread::scope(|scope| {
        let (sender, receiver) = mpsc::sync_channel(reader::BATCHES_AHEAD);
        let job = &job;
        let reading = scope.spawn(move || reader::read_all(job, &sender));
        let received = run.receive(&receiver, &hashed, &mut diags, progress);
        // Whatever happened here, the reader stops at its next batch.
        drop(receiver);
        match reading.join() {
            Ok(()) => received,
            Err(panic) => std::panic::resume_unwind(panic),
        }
    })?;
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
    /// Take what the reader sends until it has read every file.
    fn receive(
        &mut self,
        from: &Receiver<Msg>,
        hashed: &[(String, u64)],
        diags: &mut Diagnostics,
        progress: &mut dyn Progress,
    ) -> Result<(), ImportError> {
        let mut names: Vec<Names> = Vec::new();
        let mut file = 0;
        let mut ended = 0;
        // The reader hangs up after the last file (or a panic, which the caller re-raises).
        while let Ok(msg) = from.recv() {
            match msg {
                Msg::Start {
                    file: f,
                    problems,
                    names: n,
                } => {
                    (file, names) = (f, n);
                    progress.file(&self.files[f], hashed[f].1);
                    let batch_id = if self.options.dry_run {
                        -1 - f as i64
                    } else {
                        batches::insert(
                            self.conn,
                            &batches::NewBatch {
                                file_name: &self.files[f],
                                sha256: &hashed[f].0,
                                kind: KIND,
                                rows: 0,
                                forced: self.options.force,
                            },
                        )?
                    };
                    self.batch_ids.push(batch_id);
                    diags.extend(problems);
                }
                Msg::Batch(batch) => {
                    let Batch {
                        entries,
                        times,
                        bytes_read,
                    } = batch;
                    for entry in entries {
                        match entry {
                            Entry::Row(row) => self.row(file, row, &times, &names, diags)?,
                            Entry::Problems(problems) => {
                                self.settle_all(&times, &names, diags)?;
                                diags.extend(*problems);
                            }
                            Entry::Sensor { site, sensor_id } => self.named.push(Named {
                                site,
                                sensor_id,
                                state: None,
                            }),
                        }
                    }
                    // A batch's times are needed until its records are settled.
                    self.settle_all(&times, &names, diags)?;
                    progress.read(bytes_read);
                }
                Msg::End { file, rows, tail } => {
                    ended += 1;
                    if let Some(tail) = tail {
                        self.tail(file, tail, diags);
                    }
                    if !self.options.dry_run {
                        records::set_batch_rows(self.conn, self.batch_ids[file], rows)?;
                    }
                    self.summary.files.push(FileSummary {
                        name: self.files[file].clone(),
                        sha256: hashed[file].0.clone(),
                        rows,
                        batch_id: (!self.options.dry_run).then_some(self.batch_ids[file]),
                    });
                }
                Msg::Failed(e) => return Err(e),
            }
        }
        if ended < self.files.len() {
            return Err(
                StoreError::Refused("the logger files were not read to the end".into()).into(),
            );
        }
        Ok(())
    }

    /// The problems of a file's end: no data rows, or a last line cut off.
    fn tail(&self, file: usize, tail: Tail, diags: &mut Diagnostics) {
        let name = &self.files[file];
        if let Some(line) = tail.no_rows_at {
            diags.push(
                name,
                line,
                "-",
                "found a header row and no data rows, expected at least one data row",
            );
        }
        if let Some((line, problem)) = tail.last
            && (problem || self.problem_at == Some((file, line)))
            && tail.ends_mid_line
        {
            diags.push(
                name,
                line,
                "-",
                "the file ends in the middle of this line (no line break after it): it looks \
                 cut off, as by an interrupted copy or transfer; expected complete rows",
            );
        }
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
        if let Some(id) = self.sites.get(code) {
            return Ok(*id);
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
        self.sites.insert(code.to_string(), id);
        Ok(id)
    }

    /// Report a problem with a record of this side (a sensor conflict, a duplicate), after
    /// everything before it, so problems come in the order of the files.
    fn report(
        &mut self,
        file: usize,
        line: u64,
        column: &str,
        message: String,
        diags: &mut Diagnostics,
    ) {
        diags.push(&self.files[file], line, column, message);
        self.problem_at = Some((file, line));
    }

    /// A checked row: its sensor resolved (and checked against what the command and the
    /// campaign know of it), then handed to the sink.
    fn row(
        &mut self,
        file: usize,
        row: Parsed,
        times: &[String],
        names: &[Names],
        diags: &mut Diagnostics,
    ) -> Result<(), ImportError> {
        let named = row.sensor as usize;
        let state = if let Some(i) = self.named[named].state {
            let state = &self.sensors[i];
            if let Some(col) = conflict(&row, state.depth_cm, state.kind) {
                let message = conflict_message(
                    &self.named[named],
                    &row,
                    col,
                    state.depth_cm,
                    state.kind,
                    &self.place(state.first),
                );
                self.settle_all(times, names, diags)?;
                let column = pick(&names[row.names as usize], col).to_string();
                self.report(file, row.line, &column, message, diags);
                return Ok(());
            }
            i
        } else {
            match self.first_row(file, &row, times, names, diags)? {
                Some(i) => i,
                None => return Ok(()),
            }
        };
        self.queue.push_back(Queued { file, state, row });
        self.sink.push(
            NewRecord {
                sensor: self.sensors[state].id,
                time_s: row.time,
                value: row.value,
                batch_id: self.batch_ids[file],
                line: row.line,
            },
            &mut self.done,
        )?;
        if !self.done.is_empty() {
            self.settle(times, names, diags)?;
        }
        Ok(())
    }

    /// The first row of a sensor the command has not accepted yet: checked against the
    /// campaign's sensor, which is created (or, in a dry run, given a stand-in id) when the
    /// campaign has none. `None` (a problem reported) on a conflict.
    fn first_row(
        &mut self,
        file: usize,
        row: &Parsed,
        times: &[String],
        names: &[Names],
        diags: &mut Diagnostics,
    ) -> Result<Option<usize>, ImportError> {
        let named = row.sensor as usize;
        let site = self.named[named].site.clone();
        let site_id = self.site_id(&site, self.batch_ids[file])?;
        let stored = if site_id > 0 {
            records::stored_sensor(self.conn, site_id, &self.named[named].sensor_id)?
        } else {
            None
        };
        if let Some(s) = &stored
            && let Some(col) = conflict(row, s.depth_cm, s.sensor)
        {
            let from = match (&s.file_name, s.line) {
                (Some(f), Some(l)) => format!("the campaign (from {f}:{l})"),
                _ => "the campaign".to_string(),
            };
            let message =
                conflict_message(&self.named[named], row, col, s.depth_cm, s.sensor, &from);
            self.settle_all(times, names, diags)?;
            let column = pick(&names[row.names as usize], col).to_string();
            self.report(file, row.line, &column, message, diags);
            return Ok(None);
        }
        let id = match &stored {
            Some(s) => s.id,
            None if self.options.dry_run => {
                self.next_pseudo_sensor -= 1;
                self.next_pseudo_sensor + 1
            }
            None => records::insert_sensor(
                self.conn,
                site_id,
                &self.named[named].sensor_id,
                row.depth_cm,
                row.kind,
            )?,
        };
        let index = self.sensors.len();
        self.sensors.push(SensorState {
            id,
            depth_cm: row.depth_cm,
            kind: row.kind,
            first: Origin {
                file,
                line: row.line,
            },
            last_time: i64::MIN,
            // A sensor with stored records is checked over its whole series at the end.
            inline: stored.is_none(),
            checker: SensorChecker::new(row.kind, self.options.quality),
            inline_marks: [0; 4],
        });
        self.named[named].state = Some(index);
        Ok(Some(index))
    }

    /// Have the sink write what it holds, then settle every outcome.
    fn settle_all(
        &mut self,
        times: &[String],
        names: &[Names],
        diags: &mut Diagnostics,
    ) -> Result<(), ImportError> {
        self.sink.flush(&mut self.done)?;
        self.settle(times, names, diags)
    }

    /// Take the sink's outcomes in order: count stored records and run the quality checks on
    /// them; skip or report duplicates.
    fn settle(
        &mut self,
        times: &[String],
        names: &[Names],
        diags: &mut Diagnostics,
    ) -> Result<(), ImportError> {
        let mut done = std::mem::take(&mut self.done);
        for added in done.drain(..) {
            let Some(q) = self.queue.pop_front() else {
                return Err(StoreError::Refused(
                    "a logger record outcome without its record".into(),
                )
                .into());
            };
            let row = &q.row;
            match added {
                Added::Stored(handle) => {
                    self.summary.records[usize::from(row.kind == SensorKind::WaterContent)] += 1;
                    // Once the command will write nothing, checking quality is wasted work.
                    if diags.is_empty() {
                        self.check(q.state, row, handle)?;
                    }
                }
                Added::Duplicate(existing) => {
                    if self.options.skip_duplicates {
                        self.summary.duplicates_skipped += 1;
                        if (existing.value - row.value).abs() > 1e-9 * row.value.abs().max(1e-9) {
                            self.summary.duplicates_differing += 1;
                        }
                    } else {
                        let written = times.get(row.time_text as usize).map_or("", String::as_str);
                        let message = self.duplicate_message(&q, written, &existing);
                        let column = names[row.names as usize].time.clone();
                        self.report(q.file, row.line, &column, message, diags);
                    }
                }
            }
        }
        self.done = done;
        Ok(())
    }

    /// The message for a second record of a sensor at one time (`written`: the time as the
    /// file has it).
    fn duplicate_message(&self, q: &Queued, written: &str, existing: &records::Existing) -> String {
        let time = records::time_text(q.row.time);
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
        let written = if written == time {
            String::new()
        } else {
            format!(" ({written} as written)")
        };
        let named = &self.named[q.row.sensor as usize];
        format!(
            "found a second record of sensor {:?} at site {:?} for {time}{written}, {first}; \
             expected one record per sensor and time (--skip-duplicates skips repeats)",
            named.sensor_id, named.site
        )
    }

    /// Run the quality checks on a stored record and suggest the flags they raise.
    fn check(&mut self, sensor: usize, row: &Parsed, handle: i64) -> Result<(), StoreError> {
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
                        state.id,
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
            self.sink
                .series(state.id, first_batch, |handle, time, value, new| {
                    checker.push_ordered((handle, new), time, value, &mut marks);
                    found.extend(
                        marks
                            .drain(..)
                            .filter(|((_, new), _)| *new)
                            .map(|((h, _), m)| (h, m)),
                    );
                })?;
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

/// Which of a row's columns a sensor conflict is about.
#[derive(Debug, Clone, Copy)]
enum ConflictColumn {
    Depth,
    Sensor,
}

/// The header name of the column a conflict is about.
fn pick(names: &Names, col: ConflictColumn) -> &str {
    match col {
        ConflictColumn::Depth => &names.depth,
        ConflictColumn::Sensor => &names.sensor,
    }
}

/// Which column (if any) of a row gives its sensor another kind or depth than `kind` and
/// `depth_cm`.
fn conflict(row: &Parsed, depth_cm: f64, kind: SensorKind) -> Option<ConflictColumn> {
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
    named: &Named,
    row: &Parsed,
    col: ConflictColumn,
    depth_cm: f64,
    kind: SensorKind,
    where_: &str,
) -> String {
    let who = format!("sensor {:?} of site {:?}", named.sensor_id, named.site);
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
