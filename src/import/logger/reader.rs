//! The reading side of a logger import: it reads each file, checks every cell and sends the
//! rows, parsed into canonical units, in bounded batches to the thread that writes them (see
//! [`super::import_logger_files_mapped`]). Nothing here touches the campaign, so reading and
//! checking one batch overlaps with SQLite storing the one before.

use std::cell::Cell;
use std::collections::HashMap;
use std::fs::File;
use std::io::{BufRead, BufReader, Read};
use std::path::{Path, PathBuf};
use std::rc::Rc;
use std::sync::mpsc::SyncSender;

use super::super::diagnostic::Diagnostics;
use super::super::fields::{Cells, HeaderCheck};
use super::super::table::{Table, trim_cell};
use super::super::wide::{ChannelMap, WideRows};
use super::super::{ImportError, table};
use super::{COLUMNS, MAX_SUCTION_CM, RowUnit, SUCTION_UNITS, WATER_UNITS, row_unit};
use crate::field::time::{TimeError, parse_instant, utc_text};
use crate::model::domain::SensorKind;
use crate::model::number::plural;

/// Entries in one batch: small enough that the batches in flight stay a few hundred KB.
pub(super) const BATCH_ENTRIES: usize = 4096;

/// Batches the reader may be ahead of the writer.
pub(super) const BATCHES_AHEAD: usize = 4;

/// What the reading thread sends, file by file, in order.
pub(super) enum Msg {
    /// File `file` is open: the problems and warnings of its preamble and header, and the
    /// header names each kind of record uses in messages ([`Parsed::names`] indexes them).
    Start {
        file: usize,
        problems: Diagnostics,
        names: Vec<Names>,
    },
    /// Rows of the current file.
    Batch(Batch),
    /// The file has been read: its data rows (records, for a wide file) and, unless a
    /// header problem stopped the reading, what its end looked like.
    End {
        file: usize,
        rows: u64,
        tail: Option<Tail>,
    },
    /// The file could not be read.
    Failed(ImportError),
}

/// The header names of the columns a message about a record names.
#[derive(Debug, Clone)]
pub(super) struct Names {
    pub depth: String,
    pub sensor: String,
    pub time: String,
}

/// How a file ended.
#[derive(Debug, Clone, Copy)]
pub(super) struct Tail {
    /// The file had a header and no data row (line of the header).
    pub no_rows_at: Option<u64>,
    /// The last record's line and whether reading it found a problem.
    pub last: Option<(u64, bool)>,
    /// The last byte is not a line break.
    pub ends_mid_line: bool,
}

/// Rows of one file in order, each either parsed or the problems it had.
pub(super) struct Batch {
    pub entries: Vec<Entry>,
    /// Times as written; [`Parsed::time_text`] indexes them (rows of one instant share one).
    pub times: Vec<String>,
    /// Bytes of the file read so far.
    pub bytes_read: u64,
}

/// One entry of a batch.
pub(super) enum Entry {
    /// A row whose every cell was good.
    Row(Parsed),
    /// The problems of a row (or a line that could not be read).
    Problems(Box<Diagnostics>),
    /// A sensor first seen here: it gets the next sensor index (from 0, over all files).
    Sensor { site: String, sensor_id: String },
}

/// One row, checked, in canonical units.
#[derive(Debug, Clone, Copy)]
pub(super) struct Parsed {
    pub line: u64,
    /// The sensor's index (see [`Entry::Sensor`]).
    pub sensor: u32,
    /// Index into [`Msg::Start`]'s names.
    pub names: u32,
    /// Index into [`Batch::times`].
    pub time_text: u32,
    pub depth_cm: f64,
    pub kind: SensorKind,
    /// UTC, seconds since 1970.
    pub time: i64,
    pub value: f64,
    /// The value was written negative (a pressure, turned into suction).
    pub written_negative: bool,
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

/// The columns of the long-form records a wide file's rows become.
const WIDE_COLUMNS: Columns = Columns {
    site: 0,
    depth: 1,
    sensor: 2,
    sensor_id: 3,
    time: 4,
    value: 5,
    unit: 6,
};

/// What the reading thread needs to know of the command.
pub(super) struct ReadJob<'a> {
    pub paths: &'a [PathBuf],
    /// The files as the user named them (for messages).
    pub names: &'a [String],
    pub map: Option<&'a ChannelMap>,
    pub utc_offset_s: Option<i32>,
    pub skip_lines: u64,
    pub strict: bool,
}

/// The writing thread has stopped listening (it failed or was dropped): stop reading.
struct Hangup;

/// Read every file of `job`, sending what was found to `out`; returns when done or when the
/// receiver has gone.
pub(super) fn read_all(job: &ReadJob<'_>, out: &SyncSender<Msg>) {
    let mut sensors = Sensors::default();
    for (index, path) in job.paths.iter().enumerate() {
        match read_file(job, index, path, &mut sensors, out) {
            Ok(Ok(())) => {}
            Ok(Err(e)) => {
                let _ = out.send(Msg::Failed(e));
                return;
            }
            Err(Hangup) => return,
        }
    }
}

/// The sensors seen so far, by site code and sensor id.
#[derive(Default)]
struct Sensors {
    by_site: HashMap<String, HashMap<String, u32>>,
    count: u32,
}

impl Sensors {
    /// The index of a sensor, and whether it is new.
    fn index(&mut self, site: &str, sensor_id: &str) -> (u32, bool) {
        if let Some(i) = self.by_site.get(site).and_then(|s| s.get(sensor_id)) {
            return (*i, false);
        }
        let i = self.count;
        self.count += 1;
        self.by_site
            .entry(site.to_string())
            .or_default()
            .insert(sensor_id.to_string(), i);
        (i, true)
    }
}

fn diagnostics(strict: bool) -> Diagnostics {
    if strict {
        Diagnostics::strict()
    } else {
        Diagnostics::new()
    }
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

pub(super) fn open(path: &Path) -> Result<File, ImportError> {
    File::open(path).map_err(|source| ImportError::Read {
        path: path.to_path_buf(),
        source,
    })
}

/// A batch being filled, sent when full.
struct Filling<'o> {
    out: &'o SyncSender<Msg>,
    batch: Batch,
}

impl Filling<'_> {
    fn new(out: &SyncSender<Msg>) -> Filling<'_> {
        Filling {
            out,
            batch: Batch {
                entries: Vec::with_capacity(BATCH_ENTRIES),
                times: Vec::new(),
                bytes_read: 0,
            },
        }
    }

    fn push(&mut self, entry: Entry, bytes_read: u64) -> Result<(), Hangup> {
        self.batch.entries.push(entry);
        if self.batch.entries.len() >= BATCH_ENTRIES {
            self.send(bytes_read)?;
        }
        Ok(())
    }

    /// The index of a time text in this batch (the last one again when it repeats).
    fn time(&mut self, text: &str) -> u32 {
        if self.batch.times.last().is_none_or(|t| t != text) {
            self.batch.times.push(text.to_string());
        }
        u32::try_from(self.batch.times.len() - 1).unwrap_or(u32::MAX)
    }

    fn send(&mut self, bytes_read: u64) -> Result<(), Hangup> {
        let next = Batch {
            entries: Vec::with_capacity(BATCH_ENTRIES),
            times: Vec::new(),
            bytes_read: 0,
        };
        let mut full = std::mem::replace(&mut self.batch, next);
        full.bytes_read = bytes_read;
        self.out.send(Msg::Batch(full)).map_err(|_| Hangup)
    }
}

/// Read file `index`; the outer error means the writer has gone, the inner one that the
/// file could not be read.
fn read_file(
    job: &ReadJob<'_>,
    index: usize,
    path: &Path,
    sensors: &mut Sensors,
    out: &SyncSender<Msg>,
) -> Result<Result<(), ImportError>, Hangup> {
    let name = job.names[index].as_str();
    let send = |msg: Msg| out.send(msg).map_err(|_| Hangup);
    let file = match open(path) {
        Ok(f) => f,
        Err(e) => return Ok(Err(e)),
    };
    let last_byte = Rc::new(Cell::new(None));
    let reader = TailTracker {
        inner: file,
        last: Rc::clone(&last_byte),
    };
    let skip = job.skip_lines;
    let mut reader = BufReader::new(reader);
    let mut skipped = 0u64;
    let mut preamble = Vec::new();
    while skipped < skip {
        preamble.clear();
        match reader.read_until(b'\n', &mut preamble) {
            Ok(0) => break,
            Ok(_) => skipped += 1,
            Err(source) => {
                return Ok(Err(ImportError::Read {
                    path: path.to_path_buf(),
                    source,
                }));
            }
        }
    }
    let stopped = |problems: Diagnostics| -> Result<Result<(), ImportError>, Hangup> {
        send(Msg::Start {
            file: index,
            problems,
            names: Vec::new(),
        })?;
        send(Msg::End {
            file: index,
            rows: 0,
            tail: None,
        })?;
        Ok(Ok(()))
    };
    if skipped < skip {
        let mut problems = diagnostics(job.strict);
        problems.push(
            name,
            skipped,
            "-",
            format!(
                "found {} in the file, expected a header row after the {} that \
                 --skip-lines {skip} skips",
                plural(skipped, "line"),
                plural(skip, "line")
            ),
        );
        return stopped(problems);
    }
    // Header problems are reported at line 1 of what follows the preamble.
    let shift = |head: &mut Diagnostics| {
        head.relocate(|d| {
            if d.line > 0 {
                d.line += skip;
            }
        });
    };
    let table = match Table::open(name, reader) {
        Ok(t) => t,
        Err(mut problems) => {
            shift(&mut problems);
            return stopped(problems);
        }
    };
    let mut head = diagnostics(job.strict);
    let source = match job.map {
        Some(map) => WideRows::new(table, map, &mut head).map(|w| {
            let names = w
                .headers()
                .map(|h| Names {
                    depth: h.name(WIDE_COLUMNS.depth).to_string(),
                    sensor: h.name(WIDE_COLUMNS.sensor).to_string(),
                    time: h.name(WIDE_COLUMNS.time).to_string(),
                })
                .collect();
            Source::Wide(w, names)
        }),
        None => long_columns(name, table, &mut head),
    };
    shift(&mut head);
    let Some(mut source) = source else {
        return stopped(head);
    };
    send(Msg::Start {
        file: index,
        problems: head,
        names: source.names(),
    })?;
    let columns = source.columns();
    let decimal_comma = source.decimal_comma();
    let offset = job.utc_offset_s;
    let mut times = TimeCache::default();
    let mut batch = Filling::new(out);
    let mut rows = 0u64;
    // The last record's line and whether it had a problem (a cut-off file shows there).
    let mut last: Option<(u64, bool)> = None;
    loop {
        let (next, wide) = match &mut source {
            Source::Long(table, header, _) => (
                table
                    .next_record()
                    .map(|r| r.map(|(line, record)| (line, record, &*header, 0))),
                None,
            ),
            Source::Wide(w, _) => {
                let time = w.time_name().to_string();
                (w.next_indexed(), Some(time))
            }
        };
        let Some(next) = next else {
            break;
        };
        rows += 1;
        let (line, record, header, names) = match next {
            Ok(r) => r,
            Err((line, message)) => {
                let mut problems = diagnostics(job.strict);
                problems.push(name, line + skip, "-", message);
                last = Some((line + skip, true));
                let bytes = source.bytes_read();
                batch.push(Entry::Problems(Box::new(problems)), bytes)?;
                continue;
            }
        };
        let line = line + skip;
        let mut problems = diagnostics(job.strict);
        let parsed = Cells::new(name, line, header, record, decimal_comma, &mut problems)
            .and_then(|mut cells| read_row(&mut cells, &columns, &mut times, offset));
        let row = parsed.map(|row| {
            let text = |col: usize| record.get(col).map_or("", trim_cell);
            let (sensor, new) = sensors.index(text(columns.site), text(columns.sensor_id));
            let sensor_entry = new.then(|| Entry::Sensor {
                site: text(columns.site).to_string(),
                sensor_id: text(columns.sensor_id).to_string(),
            });
            let time_text = batch.time(text(columns.time));
            (
                sensor_entry,
                Parsed {
                    sensor,
                    names: u32::try_from(names).unwrap_or(u32::MAX),
                    time_text,
                    ..row
                },
            )
        });
        let bad = !problems.is_empty();
        // A bad time is one problem, not one per channel.
        let skip_row = row.is_none()
            && wide.is_some_and(|time| {
                problems
                    .items()
                    .last()
                    .is_some_and(|d| d.line == line && d.column == time)
            });
        let bytes = source.bytes_read();
        if bad {
            batch.push(Entry::Problems(Box::new(problems)), bytes)?;
        }
        if let Some((sensor_entry, row)) = row {
            if let Some(entry) = sensor_entry {
                batch.push(entry, bytes)?;
            }
            batch.push(Entry::Row(row), bytes)?;
        }
        if skip_row && let Source::Wide(w, _) = &mut source {
            w.skip_row();
        }
        last = Some((line, bad));
    }
    batch.send(source.bytes_read())?;
    let tail = Tail {
        no_rows_at: (rows == 0).then_some(1 + skip),
        last,
        ends_mid_line: last_byte.get().is_some_and(|b| b != b'\n' && b != b'\r'),
    };
    send(Msg::End {
        file: index,
        rows,
        tail: Some(tail),
    })?;
    Ok(Ok(()))
}

/// The last time text parsed, and what it gave (rows of one instant usually come together).
#[derive(Debug, Default)]
struct TimeCache {
    text: String,
    parsed: Option<Result<i64, TimeError>>,
}

impl TimeCache {
    fn parse(&mut self, text: &str, offset: Option<i32>) -> Result<i64, TimeError> {
        if let Some(p) = &self.parsed
            && self.text == text
        {
            return p.clone();
        }
        let parsed = parse_instant(text, offset)
            .and_then(|secs| utc_text(secs).map(|_| secs).ok_or(TimeError::NotCalendar));
        self.text.clear();
        self.text.push_str(text);
        self.parsed = Some(parsed.clone());
        parsed
    }
}

/// Check the cells of one data row; `None` when any cell was bad (each reported). The sensor,
/// names and time text indexes are left for the caller.
fn read_row(
    cells: &mut Cells<'_>,
    c: &Columns,
    times: &mut TimeCache,
    offset: Option<i32>,
) -> Option<Parsed> {
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
    let (Some(depth_cm), Some(kind), Some(time), Some(raw), Some(unit)) =
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
    Some(Parsed {
        line: cells.line(),
        sensor: 0,
        names: 0,
        time_text: 0,
        depth_cm,
        kind,
        time,
        value,
        written_negative: raw < 0.0,
    })
}

/// The rows of one logger file: the long form with its header and columns, or a wide file
/// read through its map (with the names its records use in messages).
enum Source<R: Read> {
    Long(Table<R>, table::Header, Columns),
    Wide(WideRows<R>, Vec<Names>),
}

impl<R: Read> Source<R> {
    /// The columns of the (long-form) records.
    fn columns(&self) -> Columns {
        match self {
            Source::Long(_, _, c) => *c,
            Source::Wide(..) => WIDE_COLUMNS,
        }
    }

    /// The names messages use, per kind of record: the file's header for the long form; for a
    /// wide file each channel's column (the time column for times).
    fn names(&self) -> Vec<Names> {
        match self {
            Source::Long(_, h, c) => vec![Names {
                depth: h.name(c.depth).to_string(),
                sensor: h.name(c.sensor).to_string(),
                time: h.name(c.time).to_string(),
            }],
            Source::Wide(_, names) => names.clone(),
        }
    }

    fn decimal_comma(&self) -> bool {
        match self {
            Source::Long(t, _, _) => t.decimal_comma(),
            Source::Wide(w, _) => w.decimal_comma(),
        }
    }

    fn bytes_read(&self) -> u64 {
        match self {
            Source::Long(t, _, _) => t.bytes_read(),
            Source::Wide(w, _) => w.bytes_read(),
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
